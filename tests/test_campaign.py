"""dsp.campaign: batch runs on a local Dask cluster (127.0.0.1), failures, resuming, the CLI."""

import csv
import json
import logging
import os
from pathlib import Path

import numpy as np
import pytest

import dsp
from dsp import Channel, Filter, Recording, SigtuneError
from dsp.campaign import expand_inputs, process_input, run_batch
from dsp.session import Session
from explorer.cli import main

GOOD = ("run_a", "run_b", "run_c")


@pytest.fixture(scope="module")
def scheduler():
    """One two-worker cluster for the module, bound to the loopback interface."""
    from dask.distributed import LocalCluster

    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                           dashboard_address=None, silence_logs=logging.ERROR)
    assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
    yield cluster.scheduler_address
    cluster.close()


def _recording(seed: int, n=20_000, fs=2000.0) -> Recording:
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs
    return Recording([Channel(rng.normal(0, 0.2, n) + np.sin(2 * np.pi * (40 + seed) * t) + 0.3, fs, name=name,
                              unit="m/s^2") for name in ("x", "y")])


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    root = tmp_path_factory.mktemp("campaign")
    inputs = root / "inputs"
    inputs.mkdir()
    for seed, name in enumerate(GOOD):
        dsp.write(_recording(seed), inputs / f"{name}.h5")
    dsp.write(_recording(9), inputs / "run_d.csv")
    (inputs / "corrupt.h5").write_bytes(b"\x89HDF\r\n\x1a\n" + b"\x00" * 64)  # a truncated HDF5 header
    session = Session(source={"path": None, "sha256": None, "channels": ["x", "y"]},
                      chain=[Filter(band="highpass", cutoff=5.0)],
                      analysis={"band_fraction": 1, "n_peaks": 3, "integration": {"methods": ["frequency"]}})
    session.save(root / "session.json")
    return root


def _rows(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_a_corrupt_file_is_recorded_and_the_run_goes_on(campaign, scheduler, capsys):
    out = campaign / "out_main"
    result = run_batch(campaign / "session.json", [campaign / "inputs"], out, scheduler=scheduler, progress=True)
    corrupt = str((campaign / "inputs" / "corrupt.h5").resolve())
    assert not result.ok
    assert list(result.failed) == [corrupt] and "corrupt.h5" in result.failed[corrupt]
    assert "HDF5" in result.failed[corrupt]
    assert sorted(Path(p).stem for p in result.done) == ["run_a", "run_b", "run_c", "run_d"]
    progress = capsys.readouterr().err
    assert "sigtune batch" in progress and "5/5" in progress and "Msamples/s" in progress

    rows = _rows(result.summary_csv)
    failed = [r for r in rows if r["status"] == "failed"]
    assert len(failed) == 1 and failed[0]["file"] == corrupt and "corrupt.h5" in failed[0]["error"]
    assert sorted((Path(r["file"]).stem, r["channel"]) for r in rows if r["status"] == "done") == [
        (stem, ch) for stem in ("run_a", "run_b", "run_c", "run_d") for ch in ("x", "y")]
    log = json.loads(result.run_log.read_text())
    session = Session.load(campaign / "session.json")
    assert log["session_hash"] == session.fingerprint() == result.session_hash
    assert {"sigtune", "numpy", "scipy", "dask", "distributed"} <= set(log["versions"])
    assert log["counts"] == {"inputs": 5, "done": 4, "skipped": 0, "failed": 1}
    assert log["status"] == "finished"


def test_outputs_are_the_sessions_own_results(campaign, scheduler):
    out = campaign / "out_main"
    if not (out / "summary.json").exists():
        run_batch(campaign / "session.json", [campaign / "inputs"], out, scheduler=scheduler, progress=False)
    session = Session.load(campaign / "session.json")
    details = {Path(f["file"]).stem: f for f in json.loads((out / "summary.json").read_text())["files"]}
    for stem in ("run_a", "run_d"):
        source = next((campaign / "inputs").glob(f"{stem}.*"))
        expected = session.apply(dsp.read(source))
        processed = dsp.read(out / "processed" / f"{stem}.h5")
        for name in ("x", "y"):
            np.testing.assert_array_equal(processed[name].data, expected.channels[name].data)
            assert processed[name].history == expected.channels[name].history
            assert details[stem]["channels"][name] == expected.summaries[name]


def test_a_rerun_skips_what_is_done_and_force_redoes_it(campaign, scheduler, tmp_path):
    out = tmp_path / "out"
    inputs = [str(campaign / "inputs" / "*.h5")]
    first = run_batch(campaign / "session.json", inputs, out, scheduler=scheduler, progress=False)
    assert len(first.done) == 3 and len(first.failed) == 1
    stamps = {p.name: p.stat().st_mtime_ns for p in (out / "processed").iterdir()}

    again = run_batch(campaign / "session.json", inputs, out, scheduler=scheduler, progress=False)
    assert again.done == [] and len(again.skipped) == 3 and len(again.failed) == 1  # failures are retried
    assert {p.name: p.stat().st_mtime_ns for p in (out / "processed").iterdir()} == stamps
    assert sorted(r["status"] for r in _rows(again.summary_csv)) == ["failed"] + ["skipped"] * 6

    forced = run_batch(campaign / "session.json", inputs, out, scheduler=scheduler, force=True, progress=False)
    assert len(forced.done) == 3 and forced.skipped == []

    changed = Session.load(campaign / "session.json").replace(chain=[Filter(band="highpass", cutoff=8.0)])
    redone = run_batch(changed, inputs, out, scheduler=scheduler, progress=False)
    assert len(redone.done) == 3  # another session hash: nothing counts as done

    edited = campaign / "inputs" / "run_b.h5"
    os.utime(edited, ns=(edited.stat().st_atime_ns, edited.stat().st_mtime_ns + 10**9))
    partly = run_batch(changed, inputs, out, scheduler=scheduler, progress=False)
    assert [Path(p).name for p in partly.done] == ["run_b.h5"] and len(partly.skipped) == 2


def test_another_output_format_redoes_the_inputs(campaign, scheduler, tmp_path):
    good = [str(campaign / "inputs" / f"{name}.h5") for name in GOOD[:2]]
    run_batch(campaign / "session.json", good, tmp_path, scheduler=scheduler, progress=False)
    result = run_batch(campaign / "session.json", good, tmp_path, scheduler=scheduler, output_format="npz",
                       progress=False)
    assert result.ok and len(result.done) == 2
    assert sorted(p.name for p in (tmp_path / "processed").glob("*.npz")) == ["run_a.npz", "run_b.npz"]


def test_the_cli_exit_code_says_whether_any_input_failed(campaign, scheduler, tmp_path, capsys):
    session = str(campaign / "session.json")
    common = ["--scheduler", scheduler, "--no-progress"]
    assert main(["batch", session, str(campaign / "inputs"), "--out", str(tmp_path / "a"), *common]) == 1
    good = [str(campaign / "inputs" / f"{name}.h5") for name in GOOD]
    assert main(["batch", session, *good, "--out", str(tmp_path / "b"), *common]) == 0
    assert main(["batch", session, str(campaign / "nothing_*.h5"), "--out", str(tmp_path / "c"), *common]) == 2
    assert "the pattern matches no file" in capsys.readouterr().err
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"format": "sigtune-session", "version": 1, "chain": [{"op": "filter",
                                                                                    "cutoff": "high"}]}))
    assert main(["batch", str(bad), *good, "--out", str(tmp_path / "d"), *common]) == 2
    assert "chain[0].cutoff: must be a number" in capsys.readouterr().err


@pytest.mark.filterwarnings("ignore:Port 8787 is already in use")  # the module's own cluster holds it
def test_a_local_cluster_is_started_and_stopped(campaign, tmp_path):
    result = run_batch(campaign / "session.json", [campaign / "inputs" / "run_a.h5"], tmp_path, workers=1,
                       progress=False)
    assert result.ok and len(result.done) == 1
    log = json.loads(result.run_log.read_text())
    assert log["cluster"] == {"scheduler": None, "workers": 1}
    assert result.records[0]["peak_rss_bytes"] > 0


def test_a_scheduler_that_does_not_answer_is_a_clear_error(campaign, tmp_path):
    import dask

    with dask.config.set({"distributed.comm.timeouts.connect": "1s"}), pytest.raises(SigtuneError, match=r"scheduler: cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'"):
        run_batch(campaign / "session.json", [campaign / "inputs" / "run_a.h5"], tmp_path,
                  scheduler="tcp://127.0.0.1:9", progress=False)


# ------------------------------------------------------------------ without Dask
def test_inputs_expand_from_files_folders_and_patterns(campaign, tmp_path):
    inputs = campaign / "inputs"
    names = [p.name for p in expand_inputs([inputs, inputs / "run_a.h5", str(inputs / "run_*.csv")])]
    assert names == ["corrupt.h5", "run_a.h5", "run_b.h5", "run_c.h5", "run_d.csv"]  # sorted, each once
    with pytest.raises(SigtuneError, match=r"input '.*nowhere': no such file or folder"):
        expand_inputs([tmp_path / "nowhere"])
    (tmp_path / "empty").mkdir()
    with pytest.raises(SigtuneError, match=r"the folder holds no recording \(extensions .csv, .tsv, .wav, .h5"):
        expand_inputs([tmp_path / "empty"])
    assert expand_inputs([inputs], exclude=inputs) == []  # the output folder's own files are never inputs


def test_inputs_sharing_a_name_get_distinct_outputs(tmp_path):
    session = Session(analysis={"band_fraction": 0, "integration": {"methods": []}})
    for folder in ("day1", "day2"):
        (tmp_path / folder).mkdir()
        dsp.write(_recording(1), tmp_path / folder / "run.h5")
    from dsp.campaign import _output_names

    names = _output_names(expand_inputs([tmp_path / "day1", tmp_path / "day2"]))
    assert len(set(names.values())) == 2 and all(n.startswith("run-") for n in names.values())
    assert session.fingerprint()


def test_a_task_on_a_missing_file_returns_a_failure(tmp_path):
    record = process_input(str(tmp_path / "gone.h5"), Session().to_dict(), str(tmp_path), "gone")
    assert record["status"] == "failed" and "gone.h5" in record["error"] and "No such file" in record["error"]


def test_long_channels_are_streamed_in_blocks(monkeypatch, tmp_path):
    import dsp.campaign

    monkeypatch.setattr(dsp.campaign, "LONG_RECORD_SAMPLES", 10_000)  # in-process: no worker to patch
    dsp.write(_recording(3, n=50_000), tmp_path / "long.h5")
    session = Session(chain=[Filter(band="highpass", cutoff=5.0)], analysis={"band_fraction": 0,
                                                                              "integration": {"methods": []}})
    (tmp_path / "processed").mkdir()
    (tmp_path / "summaries").mkdir()
    (tmp_path / "done").mkdir()
    record = process_input(str(tmp_path / "long.h5"), session.to_dict(), str(tmp_path), "long", block_samples=4096)
    assert record["status"] == "done", record.get("error")
    expected = session.apply(dsp.read(tmp_path / "long.h5"))
    streamed = dsp.read(tmp_path / "processed" / "long.h5")
    for name in ("x", "y"):
        peak = np.max(np.abs(expected.channels[name].data))
        assert np.max(np.abs(streamed[name].data - expected.channels[name].data)) <= 1e-9 * peak
        assert record["channels"][name]["rms"] == pytest.approx(expected.summaries[name]["rms"], rel=1e-9)
