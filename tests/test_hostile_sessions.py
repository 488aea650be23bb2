"""Hostile session files: every case ends in SigtuneError naming the JSON path, or in a correct load.

Cases: a wrong type in every field of a sample session, out-of-range and
huge values, enormous arrays and texts, nesting 10^5 deep, duplicate keys,
NaN/Infinity literals, numbers beyond the float range, text that is not
UTF-8 (or holds lone surrogates), source paths leading out of the data
folder (``../``, absolute, symbolic links), unknown ops, and code-like text
in every string field (nothing is ever evaluated: an audit hook sees no
``exec``, ``compile`` or process start, and the file the payload would
create never appears). Each case has its own id and a 10 s timeout.
"""

from __future__ import annotations

import collections
import copy
import json
import re
import sys
from pathlib import Path

import numpy as np
import pytest

from dsp import Channel, SigtuneError
from dsp.session import MAX_NESTING, MAX_SESSION_BYTES, Session, _path_text, resolve_source

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = json.loads((ROOT / "sample_sessions" / "pump_skid_severity.json").read_text(encoding="utf-8"))
TIMEOUT = pytest.mark.timeout(10)
OUTCOMES: collections.Counter = collections.Counter()


def _paths(value, prefix=()):
    """Every JSON path in ``value`` (containers and leaves), parents first."""
    yield prefix
    members = value.items() if isinstance(value, dict) else enumerate(value) if isinstance(value, list) else ()
    for key, item in members:
        yield from _paths(item, prefix + (key,))


def _get(data, path):
    for part in path:
        data = data[part]
    return data


def _with(path, value, data=None) -> dict:
    data = copy.deepcopy(SAMPLE if data is None else data)
    _get(data, path[:-1])[path[-1]] = value
    return data


def _load_text(tmp_path: Path, text: str | bytes) -> Session:
    path = tmp_path / "hostile.json"
    path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8", "surrogatepass"))
    return Session.load(path, verify_source=False)


def _outcome(load, label: str, error: str | None) -> Session | None:
    """Run ``load``: SigtuneError matching ``error`` (one line), or a Session if ``error`` is None."""
    try:
        session = load()
    except SigtuneError as err:
        message = str(err)
        assert "\n" not in message and len(message) < 4000, message[:500]
        assert error is not None, f"expected a load, got: {message}"
        assert re.search(error, message), f"{error!r} not in {message!r}"
        OUTCOMES[label, "error"] += 1
        return None
    assert error is None, f"expected SigtuneError matching {error!r}; it loaded"
    assert isinstance(session, Session)
    assert Session.from_dict(session.to_dict()).to_dict() == session.to_dict()  # a load is a usable session
    OUTCOMES[label, "load"] += 1
    return session


# ------------------------------------------------------------------ a wrong type in every field
WRONG = {"null": None, "boolean": True, "integer": 7, "number": 2.5, "string": "x", "array": [1], "object": {"k": 1}}
_FREE = ("view",)  # free-form: any JSON value is stored as given
# Fields whose schema allows null, and fields where another type is read as the same setting.
_ALSO_VALID = {("source", "path"): ("null",), ("source", "sha256"): ("null",), ("source", "channels"): ("null",),
               ("setup", "*", "unit"): ("null",), ("setup", "*", "quantity"): ("null",),
               ("setup", "*", "sensitivity"): ("null", "integer", "number"),
               ("setup", "*", "sensitivity_unit"): ("null",), ("source",): ("null",),
               ("analysis", "evaluation"): ("null",), ("analysis", "spectrum", "segment_s"): ("null", "integer"),
               ("analysis", "integration", "f_low"): ("null", "integer"),
               ("analysis", "evaluation", "rpm"): ("null", "integer"), ("analysis", "audit", "full_scale"):
               ("null", "integer"), ("chain", 0, "cutoff"): ("integer",), ("chain", 0, "ripple_db"): ("integer",),
               ("chain", 0, "attenuation_db"): ("integer",)}


# Regression: dsp._validate.check_number converted with float(), so a step setting of true read as 1.0
# and "5" as 5.0 instead of being refused.


def _kind(value) -> str:
    if value is None:
        return "null"
    return {bool: "boolean", int: "integer", float: "number", str: "string", list: "array", dict: "object"}[type(value)]


def _wrong_type_cases():
    for path in _paths(SAMPLE):
        if not path or path[0] in _FREE or (len(path) == 3 and path[:2] == ("source", "channels")
                                            and path[2] > 0):
            continue
        for kind, value in WRONG.items():
            if kind == _kind(_get(SAMPLE, path)):
                continue
            valid = kind in _ALSO_VALID.get(path, ())
            yield pytest.param(path, value, valid, id=f"{_path_text(path)}={kind}")


@TIMEOUT
@pytest.mark.parametrize("path, value, valid", list(_wrong_type_cases()))
def test_a_wrong_type_in_any_field_names_its_json_path(path, value, valid, tmp_path):
    # the message names the field, or (when the field is a whole section) a path inside it
    expected = None if valid else re.escape(_path_text(path))
    session = _outcome(lambda: _load_text(tmp_path, json.dumps(_with(path, value))), "wrong type", expected)
    if session is not None:
        stored = _get(session.to_dict(), path)
        assert stored == value or (value is None and stored in (None, {})), (stored, value)


# ------------------------------------------------------------------ out-of-range and huge values
def _step(**settings) -> dict:
    return _with(("chain",), [settings])


RANGE_CASES = [
    # id, data, the error (None: a correct load)
    ("order 10^6", _with(("chain", 0, "order"), 10**6), r"chain\[0\]\.order: must be a whole number from 1 to 16"),
    ("order 0", _with(("chain", 0, "order"), 0), r"chain\[0\]\.order: must be a whole number"),
    ("order -1", _with(("chain", 0, "order"), -1), r"chain\[0\]\.order"),
    ("order 1e308", _with(("chain", 0, "order"), 1e308), r"chain\[0\]\.order"),
    ("order 4.5", _with(("chain", 0, "order"), 4.5), r"chain\[0\]\.order"),
    ("cutoff -5", _with(("chain", 0, "cutoff"), -5.0), r"chain\[0\]\.cutoff: must be > 0 Hz"),
    ("cutoff 0", _with(("chain", 0, "cutoff"), 0), r"chain\[0\]\.cutoff: must be > 0 Hz"),
    ("cutoff NaN (in memory)", _with(("chain", 0, "cutoff"), float("nan")), r"chain\[0\]\.cutoff: is nan"),
    ("cutoff -inf (in memory)", _with(("chain", 0, "cutoff"), float("-inf")), r"chain\[0\]\.cutoff: is -inf"),
    ("cutoff 1e308", _with(("chain", 0, "cutoff"), 1e308), None),  # checked against Nyquist when applied
    ("cutoff 3 values", _with(("chain", 0, "cutoff"), [1.0, 2.0, 3.0]), r"chain\[0\]\.cutoff"),
    ("ripple 1e308", _with(("chain", 0, "ripple_db"), 1e308), None),
    ("cutoff '5' (text)", _with(("chain", 0, "cutoff"), "5"), r"chain\[0\]\.cutoff: must be a number"),
    ("attenuation -60", _with(("chain", 0, "attenuation_db"), -60), r"chain\[0\]\.attenuation_db: must be > 0"),
    ("resample fs_out -1000", _step(op="resample", fs_out=-1000.0), r"chain\[0\]\.fs_out"),
    ("resample fs_out 0", _step(op="resample", fs_out=0), r"chain\[0\]\.fs_out"),
    ("resample ratio -2", _step(op="resample", ratio=-2.0), r"chain\[0\]\.ratio"),
    ("gain factor 1e308", _step(op="gain", factor=1e308), None),
    ("crop end before start", _step(op="crop", start_s=5.0, end_s=1.0), r"chain\[0\]"),
    ("integrate f_low -1", _step(op="integrate", f_low=-1.0), r"chain\[0\]\.f_low"),
    ("n_peaks 10^6", _with(("analysis", "n_peaks"), 10**6), r"analysis\.n_peaks: must be <= 100"),
    ("n_peaks -1", _with(("analysis", "n_peaks"), -1), r"analysis\.n_peaks: must be >= 0"),
    ("n_peaks 5.0", _with(("analysis", "n_peaks"), 5.0), r"analysis\.n_peaks: must be integer"),
    ("band_fraction 3.0", _with(("analysis", "band_fraction"), 3.0), r"analysis\.band_fraction: must be integer"),
    ("band_fraction 2", _with(("analysis", "band_fraction"), 2), r"analysis\.band_fraction: must be one of 0, 1, 3"),
    ("segment_s 1e308", _with(("analysis", "spectrum", "segment_s"), 1e308), None),  # refused when analysed
    ("overlap 1.5", _with(("analysis", "spectrum", "overlap"), 1.5), r"analysis\.spectrum\.overlap: must be <= 0.95"),
    ("segment_s -2", _with(("analysis", "spectrum", "segment_s"), -2.0), r"analysis\.spectrum\.segment_s: must be > 0"),
    ("window kaiser:10^300", _with(("analysis", "spectrum", "window"), "kaiser:" + "9" * 300),
     r"analysis\.spectrum\.window"),
    ("rpm -1476", _with(("analysis", "evaluation", "rpm"), -1476.0), r"analysis\.evaluation\.rpm: must be > 0"),
    ("rpm 1e308", _with(("analysis", "evaluation", "rpm"), 1e308), None),
    ("group 3", _with(("analysis", "evaluation", "group"), 3), r"analysis\.evaluation\.group: must be one of 1, 2"),
    ("group 1.0", _with(("analysis", "evaluation", "group"), 1.0), r"analysis\.evaluation\.group: must be integer"),
    ("exposure 25 h", _with(("analysis", "evaluation"), {"kind": "whole_body", "exposure_h": 25}),
     r"analysis\.evaluation\.exposure_h: must be <= 24"),
    ("full_scale -5", _with(("analysis", "audit", "full_scale"), -5.0), r"analysis\.audit\.full_scale: must be > 0"),
    ("sensitivity 0", _with(("setup", "*", "sensitivity"), 0), r'setup\["\*"\]\.sensitivity: must be > 0'),
    ("sensitivity 1e-320", _with(("setup", "*", "sensitivity"), 1e-320), r'setup\["\*"\]\.sensitivity'),
    ("sensitivity 1e308", _with(("setup", "*", "sensitivity"), 1e308), None),
    ("unit unknown", _with(("setup", "*", "unit"), "furlong"), r'setup\["\*"\]\.unit'),
    ("version 10^400", _with(("version",), 10**400), r"version: the file is session version 1000"),
    ("version -1", _with(("version",), -1), r"version: must be a whole number >= 0"),
    ("op unknown", _step(op="fourier_magic"), r"chain\[0\]\.op: unknown op 'fourier_magic'; valid ops: "),
    ("op __class__", _step(op="__class__"), r"chain\[0\]\.op: unknown op '__class__'"),
    ("setting __init__", _with(("chain", 0, "__init__"), 1), r"chain\[0\]\.__init__: unknown setting '__init__'"),
    ("setting __dict__", _with(("chain", 0, "__dict__"), {}), r"chain\[0\]\.__dict__: unknown setting"),
    ("analysis key __class__", _with(("analysis", "__class__"), 1), r"analysis\.__class__: unknown key"),
]


@TIMEOUT
@pytest.mark.parametrize("data, error", [
    pytest.param(*c.values[1:], id=c.values[0], marks=c.marks) if hasattr(c, "values") else
    pytest.param(c[1], c[2], id=c[0]) for c in RANGE_CASES])
def test_out_of_range_values_are_refused_with_their_json_path(data, error):
    session = _outcome(lambda: Session.from_dict(data), "range", error)
    if session is not None:
        data = copy.deepcopy(data)
        data["source"]["channels"] = None
        session = Session.from_dict(data)
        try:  # applied to a channel: processed, or refused with the project's error
            session.apply_channel(Channel(np.sin(np.arange(16_000) / 10.0), 4000.0, name="a", unit="V"))
        except SigtuneError as err:
            assert "\n" not in str(err)


# ------------------------------------------------------------------ size, nesting, syntax
def _deep(levels: int):
    deep: list = []
    for _ in range(levels):
        deep = [deep]
    return deep


def _text_with(path, raw: str) -> str:
    """The sample as JSON text with the value at ``path`` replaced by the raw JSON text ``raw``."""
    marker = "\u2603MARK\u2603"
    return json.dumps(_with(path, marker), ensure_ascii=False).replace(json.dumps(marker, ensure_ascii=False), raw)


TEXT = json.dumps(SAMPLE, ensure_ascii=False)
FILE_CASES = [
    # id, file text or bytes (or a function making them), the error (None: a correct load)
    ("notes of 50 MB", lambda: _text_with(("notes",), '"' + "x" * 50_000_000 + '"'),
     rf"hostile\.json: is 500\d+ bytes; a session file is at most {MAX_SESSION_BYTES} bytes"),
    ("notes of 200 kB", _text_with(("notes",), '"' + "x" * 200_000 + '"'),
     r"notes: is too long: at most 100000 allowed; got 200000"),
    ("chain of 10^6 steps", lambda: _text_with(("chain",), "[" + ",".join(['{"op":"gain"}'] * 10**6) + "]"),
     r"hostile\.json: is \d+ bytes; a session file is at most"),
    ("chain of 3 million empty steps (under 10 MiB)",
     lambda: _text_with(("chain",), "[" + ",".join(["{}"] * 3_000_000) + "]"),
     r"chain: is too long: at most 64 allowed; got 3000000"),
    ("10^6 channels", lambda: _text_with(("source", "channels"), json.dumps([f"{i:x}" for i in range(10**6)])),
     r"source\.channels: is too long: at most 1024 allowed; got 1000000"),
    ("10^6 channels of mixed types",
     lambda: _text_with(("source", "channels"), "[" + ",".join(['1,"a"'] * 500_000) + "]"),
     r"source\.channels: is too long: at most 1024 allowed; got 1000000"),
    ("10^6 integration methods", lambda: _text_with(("analysis", "integration", "methods"),
                                                    "[" + ",".join(['"time"'] * 10**6) + "]"),
     r"analysis\.integration\.methods: is too long: at most 3 allowed"),
    ("10^5 channel setups", lambda: _text_with(("setup",), json.dumps({f"c{i}": {} for i in range(10**5)})),
     r"setup: is too long: at most 1024 allowed; got 100000"),
    ("a step with 10^5 settings",
     lambda: _text_with(("chain", 0), json.dumps({"op": "gain", **{f"k{i}": 1 for i in range(10**5)}})),
     r"chain\[0\]: is too long: at most 64 allowed"),
    ("a gain factor of 10^6 numbers",
     lambda: _text_with(("chain", 0), '{"op": "gain", "factor": [' + ",".join(["1"] * 10**6) + "]}"),
     r"chain\[0\]\.factor: must be a number"),
    ("view holding 10^6 numbers",
     lambda: _text_with(("view",), '{"zoom": [' + ",".join(["1.5"] * 10**6) + "]}"), None),
    ("nested 10^5 deep, top level", lambda: "[" * 100_000 + "]" * 100_000, rf"nests deeper than {MAX_NESTING} levels"),
    ("nested 10^5 deep, in view", lambda: _text_with(("view",), '{"a": ' + "[" * 100_000 + "]" * 100_000 + "}"),
     rf"nests deeper than {MAX_NESTING} levels"),
    ("nested 10^5 deep objects, unclosed", '{"a":' * 100_000, rf"nests deeper than {MAX_NESTING} levels"),
    (f"nested {MAX_NESTING + 1} deep", _text_with(("view",), json.dumps({"a": _deep(MAX_NESTING)})),
     rf"nests deeper than {MAX_NESTING} levels"),
    ("nested 40 deep in view", _text_with(("view",), json.dumps({"a": _deep(40)})), None),
    ("duplicate top-level key", TEXT[:-1] + ', "version": 0}', r"key 'version' appears twice in one object"),
    ("duplicate key in a step", _text_with(("chain", 0), '{"op": "gain", "factor": 2, "factor": 3}'),
     r"key 'factor' appears twice"),
    ("NaN literal", _text_with(("chain", 0, "cutoff"), "NaN"), r"NaN is not a JSON number"),
    ("Infinity literal", _text_with(("analysis", "evaluation", "rpm"), "Infinity"), r"Infinity is not a JSON number"),
    ("-Infinity literal", _text_with(("view",), '{"a": -Infinity}'), r"-Infinity is not a JSON number"),
    ("1e400 (beyond the float range)", _text_with(("analysis", "evaluation", "rpm"), "1e400"),
     r'the number "1e400" is beyond the largest'),
    ("-1e400 in view", _text_with(("view",), '{"a": -1e400}'), r"beyond the largest"),
    ("a whole number of 5000 digits", _text_with(("chain", 0, "order"), "9" * 5000),
     r"a whole number of 5000 digits"),
    ("1e308 (in range)", _text_with(("analysis", "evaluation", "rpm"), "1e308"), None),
    ("Latin-1 bytes", TEXT.replace("Pump", "P\u00fcmp").encode("latin-1"), r"is not UTF-8 text \(byte \d+\)"),
    ("UTF-16", TEXT.encode("utf-16"), r"is not UTF-8 text \(byte 0\)"),
    ("UTF-8 with BOM", "\ufeff" + TEXT, None),
    ("lone surrogate in notes", _text_with(("notes",), '"abc\\ud800"'), r"notes: holds a lone UTF-16 surrogate"),
    ("lone surrogate in a key", _text_with(("view",), '{"\\udc80": 1}'), r"view\[.*\]: holds a lone UTF-16 surrogate"),
    ("surrogate pair (valid)", _text_with(("notes",), '"\\ud83d\\ude00"'), None),
    ("NUL in source path", _text_with(("source", "path"), '"a\\u0000b.h5"'), r"source\.path: holds a NUL character"),
    ("empty file", "", r"is not valid JSON: Expecting value at line 1 column 1"),
    ("truncated", TEXT[: len(TEXT) // 2], r"is not valid JSON"),
    ("random bytes", np.random.default_rng(8).bytes(4096), r"is not UTF-8 text|is not valid JSON"),
    ("a JSON array", "[1, 2]", r"a session file holds one JSON object; got array"),
    ("format of another program", json.dumps({**SAMPLE, "format": "other"}), r"format: not a sigtune session"),
]


@TIMEOUT
@pytest.mark.parametrize("text, error", [pytest.param(t, e, id=i) for i, t, e in FILE_CASES])
def test_hostile_files_are_refused_with_a_message(text, error, tmp_path):
    text = text() if callable(text) else text  # the big ones are made when their case runs
    _outcome(lambda: _load_text(tmp_path, text), "file", error)


@TIMEOUT
@pytest.mark.parametrize("data, error", [
    pytest.param(lambda: {"view": {"a": _deep(100_000)}}, rf"nests deeper than {MAX_NESTING} levels",
                 id="view 10^5 deep"),
    pytest.param(lambda: {"chain": [{"op": "gain"}] * 10**6}, r"chain: is too long: at most 64 allowed; got 1000000",
                 id="chain of 10^6 steps"),
    pytest.param(lambda: {"source": {"channels": [f"c{i}" for i in range(10**6)]}}, r"source\.channels: is too long",
                 id="10^6 channels"),
    pytest.param(lambda: {"notes": "x" * 50_000_000}, r"notes: is too long: at most 100000 allowed; got 50000000",
                 id="notes of 50 MB"),
])
def test_hostile_data_in_memory_is_refused_too(data, error):
    """``Session.from_dict`` (data a caller parsed itself) has no file-size limit: the schema bounds it."""
    hostile = {**SAMPLE, **data()}
    _outcome(lambda: Session.from_dict(hostile), "in memory", error)


# ------------------------------------------------------------------ the served data folder
@pytest.fixture
def data_tree(tmp_path):
    """``root/`` (the data folder) with a recording and a sessions folder, and ``outside/`` beside it."""
    root, outside = tmp_path / "root", tmp_path / "outside"
    (root / "site_a").mkdir(parents=True)
    (root / "sessions").mkdir()
    outside.mkdir()
    (root / "site_a" / "run_1.csv").write_text("time [s],a [g]\n0,0\n0.001,1\n")
    (outside / "secret.csv").write_text("time [s],a [g]\n0,0\n0.001,1\n")
    (root / "site_a" / "link_out.csv").symlink_to(outside / "secret.csv")
    (root / "site_a" / "link_in.csv").symlink_to(root / "site_a" / "run_1.csv")
    (root / "escape").symlink_to(outside, target_is_directory=True)
    (root / "loop_a").symlink_to(root / "loop_b")
    (root / "loop_b").symlink_to(root / "loop_a")
    return root, outside


OUTSIDE = r"source\.path: .* leads outside the data folder"
SOURCE_CASES = [
    # id, source path as written in a session file in root/sessions/, the error (None: allowed)
    ("relative, inside", "../site_a/run_1.csv", None),
    ("absolute, inside", "{root}/site_a/run_1.csv", None),
    ("link inside to inside", "../site_a/link_in.csv", None),
    ("missing file inside", "../site_a/none.csv", None),
    ("demo recording", "demo:pump_skid", None),
    ("../ out of the folder", "../../outside/secret.csv", OUTSIDE),
    ("many ../", "../" * 30 + "etc/passwd", OUTSIDE),
    ("in and out again", "../site_a/../../outside/secret.csv", OUTSIDE),
    ("absolute outside", "/etc/passwd", OUTSIDE),
    ("absolute with ..", "{root}/../outside/secret.csv", OUTSIDE),
    ("link to a file outside", "../site_a/link_out.csv", OUTSIDE),
    ("link to a folder outside", "../escape/secret.csv", OUTSIDE),
    ("loop of links", "../loop_a/x.csv", r"source\.path: .*(cannot be resolved|leads outside)"),
]


@TIMEOUT
@pytest.mark.parametrize("given, error", [pytest.param(g, e, id=i) for i, g, e in SOURCE_CASES])
def test_a_source_leading_out_of_the_data_folder_is_refused(given, error, data_tree):
    root, _ = data_tree
    data = _with(("source",), {"path": given.format(root=root), "sha256": "0" * 64, "channels": None})
    file = root / "sessions" / "s.json"
    file.write_text(json.dumps(data))
    session = _outcome(lambda: Session.load(file, verify_source=False, data_root=root), "data folder", error)
    if session is None:
        with pytest.raises(SigtuneError, match=r"hostile-upload\.json: source\.path: "):  # an upload: the same
            Session.loads(file.read_bytes(), where="hostile-upload.json", base=file.parent, data_root=root)
        with pytest.raises(SigtuneError, match=error):  # and the hash check opens nothing outside
            Session.load(file, verify_source=False).check_source(data_root=root)
        return
    resolved = resolve_source(session, root)
    assert resolved is None if given.startswith("demo:") else resolved.is_relative_to(root.resolve())
    with pytest.warns(Warning) if resolved is not None else _no_warning():
        session.check_source(data_root=root)  # the recorded hash is not the file's: a warning, not an error


class _no_warning:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


@TIMEOUT
def test_an_upload_relative_source_is_read_relative_to_the_data_folder(data_tree):
    root, _ = data_tree
    upload = json.dumps(_with(("source",), {"path": "site_a/run_1.csv", "sha256": None, "channels": None}))
    session = Session.loads(upload, where="upload.json", data_root=root)
    assert resolve_source(session, root) == (root / "site_a" / "run_1.csv").resolve()
    escaping = json.dumps(_with(("source",), {"path": "../outside/secret.csv", "sha256": None, "channels": None}))
    with pytest.raises(SigtuneError, match=r"^upload\.json: source\.path: '.*secret\.csv' leads outside the data "
                                           r"folder '.*root'"):
        Session.loads(escaping, where="upload.json", data_root=root)
    assert Session.loads(escaping, where="upload.json").source["path"] == "../outside/secret.csv"  # no folder: kept


# ------------------------------------------------------------------ nothing is evaluated
PAYLOADS = {
    "import": "__import__('os').system('touch {marker}')",
    "exec": "exec(\"open('{marker}', 'w').close()\")",
    "eval": "eval(\"__import__('os').system('touch {marker}')\")",
    "dunder": "().__class__.__bases__[0].__subclasses__()",
    "format": "{0.__class__.__init__.__globals__}{marker}",
    "yaml tag": "!!python/object/apply:os.system ['touch {marker}']",
    "pickle": "cos\nsystem\n(S'touch {marker}'\ntR.",
    "shell": "$(touch {marker}); `touch {marker}`",
}
_EVENTS: list[str] = []
_WATCHING = [False]
_WATCHED = ("exec", "compile", "os.system", "os.exec", "os.posix_spawn", "os.spawn", "subprocess.Popen",
            "pickle.find_class", "ctypes.dlopen", "builtins.input")


def _audit(event: str, args) -> None:
    if _WATCHING[0] and event.startswith(_WATCHED):
        _EVENTS.append(event)


sys.addaudithook(_audit)  # process-wide and permanent (audit hooks cannot be removed); records only when watching


def _string_fields(data):
    for path in _paths(data):
        if path and isinstance(_get(data, path), str) and path[0] not in ("format",):
            yield path


def _payload_cases():
    for path in _string_fields(SAMPLE):
        for name in PAYLOADS:
            yield pytest.param(path, name, id=f"{_path_text(path)}={name}")
    for where in (("setup",), ("view",), ("chain", 0), ("analysis", "evaluation")):
        for name in PAYLOADS:
            yield pytest.param(where + (None,), name, id=f"{_path_text(where)}.<key>={name}")


@TIMEOUT
@pytest.mark.parametrize("path, payload", list(_payload_cases()))
def test_nothing_in_a_session_is_evaluated(path, payload, tmp_path):
    marker = tmp_path / "pwned"
    text = PAYLOADS[payload].replace("{marker}", str(marker))
    if path[-1] is None:  # the payload as a key
        container = copy.deepcopy(_get(SAMPLE, path[:-1]))
        container[text] = {} if path[0] == "setup" else 1
        data = _with(path[:-1], container)
    else:
        data = _with(path, text)
    (tmp_path / "x.json").write_text(json.dumps(data))
    _EVENTS.clear()
    _WATCHING[0] = True
    try:
        try:
            session = Session.load(tmp_path / "x.json", verify_source=False)
            session.to_dict()
            session.save(tmp_path / "again.json")
            outcome = "load"
        except SigtuneError as err:
            assert "\n" not in str(err)
            outcome = "error"
    finally:
        _WATCHING[0] = False
    OUTCOMES["payload", outcome] += 1
    assert _EVENTS == [], f"loading ran {_EVENTS}"
    assert not marker.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["x.json"] + (["again.json"] if outcome == "load"
                                                                              else []))


def test_hostile_session_summary(capsys):
    """Print the outcome counts of this module (run with -s to see them)."""
    rows = collections.defaultdict(collections.Counter)
    for (label, outcome), count in OUTCOMES.items():
        rows[label][outcome] += count
    with capsys.disabled():
        print("\n| hostile session cases | cases | SigtuneError | correct load |")
        print("| --- | ---: | ---: | ---: |")
        for label, counts in rows.items():
            print(f"| {label} | {sum(counts.values())} | {counts['error']} | {counts['load']} |")
        total = sum(OUTCOMES.values())
        print(f"| **all** | **{total}** | **{sum(c['error'] for c in rows.values())}** | "
              f"**{sum(c['load'] for c in rows.values())}** |")
