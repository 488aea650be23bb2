"""Session files: format, schema messages, versions, safe loading, atomic saving, replay."""

import copy
import json
import shutil
import warnings
from pathlib import Path

import numpy as np
import pytest

import dsp
from dsp import Channel, Filter, Gain, Recording, SigtuneError, SigtuneWarning
from dsp.analysis import AnalysisSettings
from dsp.session import (FORMAT_VERSION, MAX_NESTING, MAX_SESSION_BYTES, Session, apply_setup, describe_source,
                         file_sha256)

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_sessions"


def _session() -> Session:
    return Session(
        source={"path": None, "sha256": None, "channels": ["a"]},
        setup={"*": {"unit": "m/s^2", "quantity": "acceleration", "sensitivity": None, "sensitivity_unit": None}},
        chain=[Gain(2.0), Filter(band="highpass", cutoff=5.0), Filter(band="lowpass", cutoff=100.0)],
        analysis=AnalysisSettings(band_fraction=1, evaluation={"kind": "machine_severity", "group": 1,
                                                               "support": "rigid", "rpm": None}),
        view={"scaling": "psd"}, notes="bench check")


def _data() -> dict:
    return _session().to_dict()


def _channel(n=40_000, fs=4000.0, name="a", unit="m/s^2"):
    t = np.arange(n) / fs
    return Channel(np.sin(2 * np.pi * 30.0 * t) + 0.1 * np.sin(2 * np.pi * 200.0 * t), fs, name=name, unit=unit)


# ------------------------------------------------------------------ round trips
def test_dict_round_trip_keeps_every_part():
    data = _data()
    again = Session.from_dict(data).to_dict()
    assert again == data
    assert data["format"] == "sigtune-session" and data["version"] == FORMAT_VERSION == 1
    assert data["sigtune"] == dsp.__version__
    assert data["chain"][1] == Filter(band="highpass", cutoff=5.0).to_dict()


def test_save_stores_the_source_relative_to_the_session_file_and_load_resolves_it(tmp_path):
    rec_dir, ses_dir = tmp_path / "data" / "site A", tmp_path / "sessions"
    rec_dir.mkdir(parents=True)
    ses_dir.mkdir()
    dsp.write(Recording([_channel()]), rec_dir / "run 1.h5")
    session = _session().replace(source=describe_source(rec_dir / "run 1.h5", ["a"]))
    session.save(ses_dir / "check.json")
    stored = json.loads((ses_dir / "check.json").read_text())
    assert stored["source"]["path"] == "../data/site A/run 1.h5"
    assert stored["source"]["sha256"] == file_sha256(rec_dir / "run 1.h5")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # matching hash: no warning
        loaded = Session.load(ses_dir / "check.json")
    assert loaded.source_path == (rec_dir / "run 1.h5").absolute()
    assert loaded.check_source() == "match"
    assert loaded.location == ses_dir / "check.json"
    # moving the folders together keeps the link
    shutil.move(tmp_path / "data", tmp_path / "moved_data")
    shutil.move(tmp_path / "sessions", tmp_path / "moved_data" / "sessions")
    # ../data no longer exists: reported, not fatal
    with pytest.warns(SigtuneWarning, match="not found"):
        assert Session.load(tmp_path / "moved_data" / "sessions" / "check.json").check_source() == "missing"


def test_sha256_mismatch_is_reported_not_fatal(tmp_path):
    path = tmp_path / "rec.h5"
    dsp.write(Recording([_channel()]), path)
    session = _session().replace(source=describe_source(path, ["a"]))
    session.save(tmp_path / "s.json")
    dsp.write(Recording([_channel(n=20_001)]), path)  # the recording changed after the session was saved
    with pytest.warns(SigtuneWarning, match=r"has changed since the session was saved \(SHA-256"):
        loaded = Session.load(tmp_path / "s.json")
    assert loaded.chain == session.chain  # still usable


def test_sha256_is_that_of_the_file_bytes(tmp_path):
    import hashlib

    path = tmp_path / "bytes.bin"
    path.write_bytes(b"sigtune" * 1000)
    assert file_sha256(path, block_bytes=7) == hashlib.sha256(b"sigtune" * 1000).hexdigest()  # hashlib reference


def test_demo_source_is_kept_verbatim(tmp_path):
    session = _session().replace(source={"path": "demo:pump_skid", "sha256": None, "channels": ["DE_H"]})
    session.save(tmp_path / "demo.json")
    assert json.loads((tmp_path / "demo.json").read_text())["source"]["path"] == "demo:pump_skid"
    loaded = Session.load(tmp_path / "demo.json")
    assert loaded.source["path"] == "demo:pump_skid" and loaded.source_path is None
    assert loaded.check_source() == "unchecked"


def test_fingerprint_follows_the_settings_not_the_notes_or_view():
    base = _session()
    assert base.fingerprint() == base.replace(notes="other", view={"scaling": "asd"}).fingerprint()
    assert base.fingerprint() != base.replace(chain=[Gain(3.0)]).fingerprint()
    assert base.fingerprint() != base.replace(analysis=AnalysisSettings(n_peaks=2)).fingerprint()
    assert len(base.fingerprint()) == 64


# ------------------------------------------------------------------ schema messages
def _edit(path, value):
    def change(data):
        target = data
        for key in path[:-1]:
            target = target[key]
        if value is _DELETE:
            del target[path[-1]]
        else:
            target[path[-1]] = value
    return change


_DELETE = object()

BAD_FIELDS = [
    (("format",), "session", r"format: not a sigtune session \(format \"session\"; expected 'sigtune-session'\)"),
    (("version",), "1", r"version: must be a whole number >= 0; got \"1\""),
    (("extra",), 1, r"extra: unknown key; valid keys: format, version, sigtune, source, setup, chain"),
    (("chain",), _DELETE, r"chain: is required"),
    (("chain",), {"op": "gain"}, r"chain: must be array; got object"),
    (("chain", 0, "op"), "gain_x", r"chain\[0\]\.op: unknown op 'gain_x'; valid ops: .*filter.*gain"),
    (("chain", 1, "cutof"), 5.0, r"chain\[1\]\.cutof: unknown setting 'cutof' for op 'filter'; valid settings: "
                                 r"family, band, order, cutoff"),
    (("chain", 1, "cutoff"), -5.0, r"chain\[1\]\.cutoff: must be > 0 Hz; got -5"),
    (("chain", 2, "order"), 40, r"chain\[2\]\.order: must be a whole number from 1 to 16; got 40"),
    (("chain", 2, "band"), "low", r"chain\[2\]\.band: must be one of 'lowpass', 'highpass', 'bandpass', 'bandstop'"),
    (("chain", 0), {"factor": 2.0}, r"chain\[0\]\.op: is required"),
    (("source", "sha256"), "abc", r"source\.sha256: must be 64 lower-case hex digits \(a SHA-256\); got \"abc\""),
    (("source", "channels"), "a", r"source\.channels: must be array or null; got string \"a\""),
    (("setup", "*", "unit"), "furlong", r"setup\[\"\*\"\]\.unit: unknown unit 'furlong'; known units: m/s\^2"),
    (("setup", "*", "quantity"), "speed", r"setup\[\"\*\"\]\.quantity: must be one of \"acceleration\", \"velocity\""),
    (("setup", "*", "sensitivity"), 0, r"setup\[\"\*\"\]\.sensitivity: must be > 0; got 0"),
    (("setup", "*", "gain"), 2, r"setup\[\"\*\"\]\.gain: unknown key; valid keys: unit, quantity, sensitivity"),
    (("analysis", "band_fraction"), 2, r"analysis\.band_fraction: must be one of 0, 1, 3; got 2"),
    (("analysis", "n_peaks"), 500, r"analysis\.n_peaks: must be <= 100; got 500"),
    (("analysis", "spectrum", "window"), "blackman",
     r"analysis\.spectrum\.window: must be one of 'rectangular', 'hann', 'hamming', 'flattop' or 'kaiser:<beta>'"),
    (("analysis", "spectrum", "overlap"), 0.99, r"analysis\.spectrum\.overlap: must be <= 0.95; got 0.99"),
    (("analysis", "spectrum", "average"), "median", r"analysis\.spectrum\.average: must be one of \"mean\", \"peak\""),
    (("analysis", "integration", "methods"), ["time", "magic"],
     r"analysis\.integration\.methods\[1\]: must be one of \"time\", \"frequency\", \"baseline\"; got \"magic\""),
    (("analysis", "integration", "target"), "jerk", r"analysis\.integration\.target: must be one of \"velocity\""),
    (("analysis", "evaluation", "kind"), "comfort", r"analysis\.evaluation\.kind: must be one of \"machine_severity\""),
    (("analysis", "evaluation", "group"), 3, r"analysis\.evaluation\.group: must be one of 1, 2; got 3"),
    (("analysis", "evaluation", "support"), "soft", r"analysis\.evaluation\.support: must be one of \"rigid\""),
    (("analysis", "evaluation", "colour"), "red",
     r"analysis\.evaluation\.colour: unknown setting 'colour' for machine_severity; valid settings: group, support, rpm"),
    (("analysis", "audit", "full_scale"), -1, r"analysis\.audit\.full_scale: must be > 0; got -1"),
    (("notes",), 5, r"notes: must be string; got integer 5"),
    (("view",), [], r"view: must be object; got array"),
]


@pytest.mark.parametrize("path, value, message", BAD_FIELDS, ids=[".".join(map(str, p)) for p, _, _ in BAD_FIELDS])
def test_each_bad_field_names_its_json_path_and_the_valid_values(path, value, message):
    data = _data()
    _edit(list(path), value)(data)
    with pytest.raises(SigtuneError, match=r"^bad\.json: " + message):
        Session.from_dict(data, where="bad.json")


def test_several_problems_are_reported_together():
    data = _data()
    data["chain"][1]["cutoff"] = -1
    data["chain"][2]["order"] = 0
    with pytest.raises(SigtuneError, match=r"chain\[1\]\.cutoff: .*; chain\[2\]\.order: "):
        Session.from_dict(data)
    data = _data()
    data["analysis"]["n_peaks"] = -1
    data["notes"] = 3
    with pytest.raises(SigtuneError, match=r"analysis\.n_peaks: must be >= 0; got -1; notes: must be string"):
        Session.from_dict(data)


def test_the_schema_file_is_valid_draft_2020_12():
    from jsonschema import Draft202012Validator

    schema = json.loads((ROOT / "dsp" / "session.schema.json").read_text())
    Draft202012Validator.check_schema(schema)  # jsonschema's own meta-schema check: raises if invalid
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    Draft202012Validator(schema).validate(_data())


# ------------------------------------------------------------------ versions
def test_a_newer_version_is_refused_with_a_message():
    data = _data()
    data["version"] = FORMAT_VERSION + 1
    data["sigtune"] = "9.0"
    with pytest.raises(SigtuneError, match=rf"version: the file is session version {FORMAT_VERSION + 1}, written "
                                           rf"by sigtune 9.0; this sigtune .* reads versions up to {FORMAT_VERSION}. "
                                           r"Upgrade sigtune"):
        Session.from_dict(data)


VERSION_0 = {
    "format": "sigtune-session", "version": 0, "sigtune": "0.0.9",
    "source": "recordings/run_07.h5", "channels": ["DE_H", "DE_V"], "unit": "g",
    "steps": [{"op": "filter", "band": "highpass", "cutoff": 5.0}, {"op": "gain", "factor": 9.80665,
                                                                      "unit": "m/s^2"}],
    "spectrum": {"window": "hamming", "segment_s": 2.0}, "bands": 1, "peaks": 3, "notes": "old file",
}


def test_version_0_is_migrated(tmp_path):
    (tmp_path / "old.json").write_text(json.dumps(VERSION_0))
    session = Session.load(tmp_path / "old.json")
    assert session.migrated_from == 0 and session.written_by == "0.0.9"
    assert session.source == {"path": str(tmp_path / "recordings" / "run_07.h5"), "sha256": None,
                              "channels": ["DE_H", "DE_V"]}
    assert session.setup == {"*": {"unit": "g"}}
    assert session.chain == dsp.Chain([Filter(band="highpass", cutoff=5.0), Gain(9.80665, unit="m/s^2")])
    assert session.analysis == AnalysisSettings(spectrum={"window": "hamming", "segment_s": 2.0},
                                                band_fraction=1, n_peaks=3)
    assert session.view == {} and session.notes == "old file"
    # saving writes the current version, which loads back to the same settings
    session.save(tmp_path / "new.json")
    saved = json.loads((tmp_path / "new.json").read_text())
    assert saved["version"] == FORMAT_VERSION and "steps" not in saved
    assert saved["source"]["path"] == "recordings/run_07.h5"
    assert Session.load(tmp_path / "new.json").to_dict() == session.to_dict()


def test_version_0_is_checked_against_its_own_layout():
    data = copy.deepcopy(VERSION_0)
    data["chain"] = []  # a version-1 key in a version-0 file
    with pytest.raises(SigtuneError, match=r"chain: unknown key; valid keys: format, version, sigtune, source, "
                                           r"channels, unit, steps"):
        Session.from_dict(data)
    data = copy.deepcopy(VERSION_0)
    data["steps"][0]["cutoff"] = "five"
    with pytest.raises(SigtuneError, match=r"chain\[0\]\.cutoff: must be a number"):
        Session.from_dict(data)


# ------------------------------------------------------------------ safe loading
def test_a_file_larger_than_the_limit_is_refused_before_parsing(tmp_path):
    path = tmp_path / "big.json"
    with open(path, "wb") as fh:
        fh.truncate(MAX_SESSION_BYTES + 1)
    with pytest.raises(SigtuneError, match=rf"big\.json: is {MAX_SESSION_BYTES + 1} bytes; a session file is at "
                                           rf"most {MAX_SESSION_BYTES} bytes \(10 MiB\)"):
        Session.load(path)


def test_deep_nesting_is_refused(tmp_path):
    data = _data()
    deep = {}
    for _ in range(MAX_NESTING + 5):
        deep = {"d": deep}
    data["view"] = {"scaling": deep}
    (tmp_path / "deep.json").write_text(json.dumps(data))
    with pytest.raises(SigtuneError, match=rf"deep\.json: nests deeper than {MAX_NESTING} levels"):
        Session.load(tmp_path / "deep.json")
    hostile = "[" * 200_000 + "]" * 200_000  # beyond the parser's own recursion limit
    with pytest.raises(SigtuneError, match=rf"nests deeper than {MAX_NESTING} levels"):
        Session.loads(hostile, where="upload")


@pytest.mark.parametrize("text, message", [
    ('{"format": "sigtune-session", "version": 1, "chain": [}', r"is not valid JSON: Expecting value at line 1 "
                                                                r"column 55"),
    ('{"format": "sigtune-session", "version": 1, "version": 2, "chain": []}', r"key 'version' appears twice"),
    ('{"format": "sigtune-session", "version": 1, "chain": [{"op": "gain", "factor": NaN}]}',
     r"NaN is not a JSON number"),
    ('[1, 2]', r"a session file holds one JSON object; got array"),
    (b'\xff\xfe{}', r"is not UTF-8 text \(byte 0\)"),
])
def test_malformed_json_gets_a_message(text, message):
    with pytest.raises(SigtuneError, match=r"^upload\.json: " + message):
        Session.loads(text, where="upload.json")


def test_loading_builds_only_registered_steps():
    data = _data()
    data["chain"] = [{"op": "__import__('os').system('touch /tmp/sigtune_pwned')"}]
    with pytest.raises(SigtuneError, match=r"chain\[0\]\.op: unknown op .*; valid ops: "):
        Session.from_dict(data)
    assert not Path("/tmp/sigtune_pwned").exists()


# ------------------------------------------------------------------ atomic save
def test_a_failure_during_save_leaves_the_old_file_intact(tmp_path, monkeypatch):
    path = tmp_path / "s.json"
    _session().save(path)
    before = path.read_bytes()
    import dsp._atomic

    def disk_full(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(dsp._atomic.os, "fsync", disk_full)  # fails after the new text was written
    with pytest.raises(OSError, match="No space left"):
        _session().replace(notes="a new note that never lands").save(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json"]  # no temporary file left behind


def test_save_refuses_settings_that_would_not_load(tmp_path):
    session = _session()
    session.view = {"scaling": object()}
    with pytest.raises(SigtuneError, match=r"view or notes hold a value JSON cannot store"):
        session.save(tmp_path / "s.json")
    assert not (tmp_path / "s.json").exists()


# ------------------------------------------------------------------ setup and replay
def test_setup_declares_then_calibrates():
    raw = Channel(np.full(8, 0.25), fs=8.0, name="acc", unit="1")
    out = apply_setup(raw, {"acc": {"unit": "V", "sensitivity": 100.0, "sensitivity_unit": "mV/g"}})
    assert out.unit == "g" and out.quantity == "acceleration"
    np.testing.assert_allclose(out.data, 2.5, rtol=1e-15)  # 0.25 V / (100 mV/g) = 2.5 g, analytic
    assert [h["op"] for h in out.history] == ["calibrate"]
    declared = apply_setup(Channel(np.ones(4), 4.0, name="b", unit="1"), {"*": {"unit": "mm/s"}})
    assert (declared.unit, declared.quantity) == ("mm/s", "velocity")
    np.testing.assert_array_equal(declared.data, 1.0)  # declaring never changes the values
    untouched = Channel(np.ones(4), 4.0, name="c")
    assert apply_setup(untouched, {"other": {"unit": "g"}}) is untouched


def test_setup_calibration_of_a_channel_that_is_not_voltage_is_an_error():
    with pytest.raises(SigtuneError, match=r"setup\[\"\*\"\] \(channel 'a'\).*calibration expects a voltage channel"):
        Session(setup={"*": {"sensitivity": 10.0}}).process(_channel())


def test_apply_processes_the_selected_channels_with_the_chain():
    rec = Recording([_channel(name="a"), _channel(name="b", unit="g")])
    session = _session()
    result = session.apply(rec)
    assert list(result.channels) == ["a"]
    expected = dsp.Chain(session.chain).apply(rec["a"])
    np.testing.assert_array_equal(result.channels["a"].data, expected.data)
    assert result.summaries["a"] == dsp.analyse(expected, session.analysis)
    assert result.recording.names == ["a"]
    everything = session.replace(source=None).apply(rec)
    assert list(everything.summaries) == ["a", "b"]


def test_a_selected_channel_missing_from_the_recording_is_named():
    rec = Recording([_channel(name="x")], source="run.h5")
    with pytest.raises(SigtuneError, match=r"run\.h5: the session selects channel\(s\) 'a', which the recording "
                                           r"does not have; its channels: x"):
        _session().apply(rec)


def test_a_step_failing_on_the_channel_names_its_place_in_the_chain():
    session = Session(chain=[Gain(2.0), Filter(band="lowpass", cutoff=400.0)])
    with pytest.raises(SigtuneError, match=r"chain\[1\] \(filter\)"):
        session.process(_channel(fs=500.0))


# ------------------------------------------------------------------ sample sessions
SAMPLE_FILES = sorted(SAMPLES.glob("*.json"))


def test_there_are_at_least_three_documented_sample_sessions():
    assert len(SAMPLE_FILES) >= 3
    readme = (SAMPLES / "README.md").read_text()
    for path in SAMPLE_FILES:
        assert path.name in readme
    assert "sigtune demo sigtune-demo" in readme
    assert "sigtune batch sample_sessions/pump_skid_severity.json sigtune-demo/pump_skid.h5 --out results" in readme


@pytest.fixture(scope="module")
def demo_tree(tmp_path_factory):
    """sample_sessions/ beside sigtune-demo/ with the HDF5 demo files, as the README lays them out."""
    root = tmp_path_factory.mktemp("tree")
    (root / "sigtune-demo").mkdir()
    for scenario in dsp.demo.DEMO_SCENARIOS:
        dsp.write(dsp.demo.demo_recording(scenario), root / "sigtune-demo" / f"{scenario}.h5")
    shutil.copytree(SAMPLES, root / "sample_sessions")
    return root


@pytest.mark.parametrize("path", SAMPLE_FILES, ids=[p.stem for p in SAMPLE_FILES])
def test_sample_sessions_load_and_apply_to_their_demo_data(path, demo_tree):
    with warnings.catch_warnings():
        warnings.simplefilter("error", SigtuneWarning)
        session = Session.load(demo_tree / "sample_sessions" / path.name)
    assert session.source_path.is_file() and session.source_path.parent.name == "sigtune-demo"
    assert session.notes and session.migrated_from is None
    result = session.apply(dsp.read(session.source_path))
    assert list(result.summaries) == session.source["channels"]
    for summary in result.summaries.values():
        assert summary["rms"] > 0
        json.dumps(summary, allow_nan=False)  # JSON-ready
        if session.analysis.evaluation:
            assert summary["evaluation"]["kind"] == session.analysis.evaluation["kind"]
            assert summary["evaluation"]["caution"]


def test_sample_session_numbers_match_the_demo_truths(demo_tree):
    truths = dsp.demo.demo_truths("pump_skid")
    session = Session.load(demo_tree / "sample_sessions" / "pump_skid_severity.json")
    summary = session.apply(dsp.read(session.source_path)).summaries["DE_V"]
    peaks = [p["frequency_hz"] for p in summary["peaks"]]
    # the synthesised running speed and bearing tone (dsp.demo truths) within half a 0.5 Hz bin
    for frequency in (truths["running_speed_hz"], truths["bearing_tone_hz"]):
        assert min(abs(np.array(peaks) - frequency)) < 0.25
