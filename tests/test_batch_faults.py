"""Faults in a batch run: a worker killed mid-write, a full disk, an input deleted while queued, an
interrupted run resumed. After each fault no temporary (``*.part``) is left, every output has its done
marker (and every marker its complete outputs), and the summary names exactly which inputs failed and why.

One two-worker cluster for the module, bound to 127.0.0.1, with ``allowed-failures`` 1 (a task is
tried on two workers before it is reported). Worker processes are patched through a Dask worker
plugin (pickled by value, so the workers need not import this module); the in-process faults use
``run_batch(scheduler="synchronous")``, where monkeypatch reaches the work.
"""

from __future__ import annotations

import errno
import json
import logging
import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from distributed.diagnostics.plugin import WorkerPlugin

import dsp
import dsp.campaign
from dsp import Channel, Filter, Recording
from dsp.campaign import run_batch
from dsp.session import Session

NAMES = ("run_a", "run_b", "run_c", "run_d")
pytestmark = pytest.mark.timeout(120)


@pytest.fixture(scope="module")
def cluster():
    """A two-worker local cluster on the loopback interface, and a client to patch its workers."""
    import cloudpickle
    import dask
    from dask.distributed import Client, LocalCluster

    cloudpickle.register_pickle_by_value(sys.modules[__name__])  # the plugin class travels by value
    with dask.config.set({"distributed.scheduler.allowed-failures": 1}):
        local = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                             dashboard_address=None, silence_logs=logging.CRITICAL)
    assert local.scheduler_address.startswith("tcp://127.0.0.1:")
    client = Client(local)
    yield local.scheduler_address, client
    client.close()
    local.close()
    cloudpickle.unregister_pickle_by_value(sys.modules[__name__])


def _recording(seed: int) -> Recording:
    rng = np.random.default_rng(seed)
    t = np.arange(8000) / 2000.0
    return Recording([Channel(np.sin(2 * np.pi * (30 + seed) * t) + rng.normal(0, 0.1, t.size), 2000.0, name=n,
                              unit="m/s^2") for n in ("x", "y")])


@pytest.fixture
def campaign(tmp_path):
    """Four small recordings and a session; returns (session file, input paths, output folder)."""
    inputs = tmp_path / "inputs"
    inputs.mkdir()
    paths = [dsp.write(_recording(seed), inputs / f"{name}.h5") for seed, name in enumerate(NAMES)]
    session = Session(chain=[Filter(band="highpass", cutoff=5.0)],
                      analysis={"band_fraction": 1, "n_peaks": 2, "integration": {"methods": []}})
    return session.save(tmp_path / "session.json"), [p.resolve() for p in paths], tmp_path / "out"


def _check_consistent(out: Path, expected_done: set[str]) -> None:
    """No temporaries; markers and outputs match one to one; each output holds the session's result."""
    assert sorted(p.relative_to(out).as_posix() for p in out.rglob("*.part")) == []
    markers = {p.stem: json.loads(p.read_text()) for p in (out / "done").glob("*.json")}
    assert set(markers) == expected_done
    listed = {rel for m in markers.values() for rel in [*m["outputs"], m["summary"]]}
    present = {p.relative_to(out).as_posix() for sub in ("processed", "summaries") for p in (out / sub).iterdir()}
    assert present == listed  # no output without its marker, no marker without its outputs
    session = Session.load(out.parent / "session.json", verify_source=False)
    for name, marker in markers.items():
        expected = session.apply(dsp.read(marker["input"]))
        processed = dsp.read(out / marker["outputs"][0])
        for channel in ("x", "y"):  # the complete result, not a truncated one
            np.testing.assert_array_equal(processed[channel].data, expected.channels[channel].data)
        assert json.loads((out / marker["summary"]).read_text())["channels"] == expected.summaries


def _summary_files(result) -> dict[str, tuple[str, str | None]]:
    """Input stem -> (status, error) from summary.json, which must agree with the BatchResult."""
    files = json.loads(result.summary_json.read_text())["files"]
    table = {Path(f["file"]).stem: (f["status"], f["error"]) for f in files}
    assert {Path(p).stem: e for p, e in result.failed.items()} == {
        k: e for k, (s, e) in table.items() if s == "failed"}
    return table


# ------------------------------------------------------------------ a worker killed mid-write
class _KillWhileWriting(WorkerPlugin):
    """Worker plugin: writing the output of ``target``, write part of a temporary file, then die.

    ``once``: only the first worker to try dies (a flag file says it happened), so the retry succeeds.
    """

    name = "sigtune-kill-while-writing"

    def __init__(self, target: str, flag: str, once: bool):
        self.target, self.flag, self.once = target, flag, once

    def setup(self, worker):
        import dsp.io
        from dsp._atomic import atomic_path

        original = dsp.io.write
        target, flag, once = self.target, Path(self.flag), self.once

        def write(recording, path, **options):
            if Path(path).stem == target and not (once and flag.exists()):
                flag.write_text(str(os.getpid()))
                with atomic_path(path) as tmp:
                    tmp.write_bytes(b"\x89HDF\r\n\x1a\n" + b"\0" * 4096)  # a half-written file
                    os._exit(137)  # as the kernel's OOM killer would end it: no cleanup runs
            return original(recording, path, **options)

        self._original = original
        dsp.io.write = write

    def teardown(self, worker):
        import dsp.io

        dsp.io.write = self._original


def _with_plugin(client, plugin, run):
    client.register_plugin(plugin, name=plugin.name)
    try:
        return run()
    finally:
        client.unregister_worker_plugin(plugin.name)
        client.wait_for_workers(2, timeout=60)


def test_a_worker_killed_mid_write_is_replaced_and_its_input_retried(cluster, campaign, tmp_path):
    address, client = cluster
    session, inputs, out = campaign
    flag = tmp_path / "killed"
    plugin = _KillWhileWriting("run_b", str(flag), once=True)
    result = _with_plugin(client, plugin, lambda: run_batch(session, inputs, out, scheduler=address,
                                                            progress=False))
    assert flag.exists()  # a worker did die
    assert result.ok and sorted(Path(p).stem for p in result.done) == list(NAMES)
    record = next(r for r in result.records if r["name"] == "run_b")
    assert record["pid"] != int(flag.read_text())  # done by another worker process
    log = json.loads(result.run_log.read_text())
    assert [Path(p).name for p in log["temporaries_removed"]] and all(
        Path(p).name.startswith(".run_b.h5.") for p in log["temporaries_removed"])
    _check_consistent(out, set(NAMES))


def test_an_input_that_kills_every_worker_is_reported_and_the_rest_finish(cluster, campaign, tmp_path):
    address, client = cluster
    session, inputs, out = campaign
    plugin = _KillWhileWriting("run_c", str(tmp_path / "killed"), once=False)
    result = _with_plugin(client, plugin, lambda: run_batch(session, inputs, out, scheduler=address,
                                                            progress=False))
    assert list(result.failed) == [str(inputs[2])]
    assert sorted(Path(p).stem for p in result.done) == ["run_a", "run_b", "run_d"]
    message = result.failed[str(inputs[2])]
    assert message.startswith(f"{inputs[2]}: the worker process died while processing this file")
    assert "KilledWorker" not in message.split("(")[0] and "Rerun to retry it" in message
    assert _summary_files(result)["run_c"] == ("failed", message)
    _check_consistent(out, {"run_a", "run_b", "run_d"})
    again = run_batch(session, inputs, out, scheduler=address, progress=False)  # the cause is gone: retried
    assert again.ok and [Path(p).stem for p in again.done] == ["run_c"] and len(again.skipped) == 3
    _check_consistent(out, set(NAMES))


# ------------------------------------------------------------------ a full output disk
def _disk_full_for(monkeypatch, targets: set[str]) -> list[str]:
    """Make flushing the temporary file of one of ``targets`` (``"<sub-folder>/<final name>"``) fail with
    ENOSPC, as a full disk does at fsync; every sigtune file goes through that flush. Returns the list
    of targets hit."""
    failed: list[str] = []
    original = os.fsync

    def fsync(fd):
        tmp = Path(os.readlink(f"/proc/self/fd/{fd}"))
        if tmp.name.startswith(".") and tmp.name.endswith(".part"):
            final = f"{tmp.parent.name}/{tmp.name[1:].rsplit('.', 2)[0]}"
            if final in targets:
                failed.append(final)
                raise OSError(errno.ENOSPC, "No space left on device")
        return original(fd)

    monkeypatch.setattr(os, "fsync", fsync)
    return failed


def test_a_full_disk_fails_only_the_inputs_it_hits_and_a_rerun_completes(campaign, monkeypatch):
    session, inputs, out = campaign
    # the disk fills while writing run_b's processed channels, run_c's summary, run_d's done marker
    failed = _disk_full_for(monkeypatch, {"processed/run_b.h5", "summaries/run_c.json", "done/run_d.json"})
    result = run_batch(session, inputs, out, scheduler="synchronous", progress=False)
    assert sorted(failed) == ["done/run_d.json", "processed/run_b.h5", "summaries/run_c.json"]
    assert [Path(p).stem for p in result.done] == ["run_a"]
    table = _summary_files(result)
    for name in ("run_b", "run_c", "run_d"):
        status, error = table[name]
        assert status == "failed" and "No space left on device" in error and name in error
    _check_consistent(out, {"run_a"})  # run_c's and run_d's processed files were removed with the failure

    monkeypatch.undo()  # space freed
    again = run_batch(session, inputs, out, scheduler="synchronous", progress=False)
    assert again.ok and [Path(p).stem for p in again.skipped] == ["run_a"]
    assert sorted(Path(p).stem for p in again.done) == ["run_b", "run_c", "run_d"]
    _check_consistent(out, set(NAMES))


def test_a_failed_redo_leaves_no_stale_marker(campaign, monkeypatch):
    """A forced redo that fails after replacing the processed file must not keep the old marker
    (it would vouch for a new processed file next to an old summary)."""
    session, inputs, out = campaign
    assert run_batch(session, inputs, out, scheduler="synchronous", progress=False).ok
    _disk_full_for(monkeypatch, {"summaries/run_a.json"})
    redo = run_batch(session, inputs, out, scheduler="synchronous", force=True, progress=False)
    assert list(redo.failed) == [str(inputs[0])]
    _check_consistent(out, {"run_b", "run_c", "run_d"})


# ------------------------------------------------------------------ an input deleted while queued
def test_an_input_deleted_after_listing_is_reported_as_not_found(cluster, campaign, monkeypatch):
    address, _ = cluster
    session, inputs, out = campaign
    listed = dsp.campaign.expand_inputs

    def expand_then_delete(items, exclude=None):
        paths = listed(items, exclude=exclude)
        inputs[2].unlink()  # gone after the inputs were listed, before its task was submitted
        return paths

    monkeypatch.setattr(dsp.campaign, "expand_inputs", expand_then_delete)
    result = run_batch(session, [inputs[0].parent], out, scheduler=address, progress=False)
    assert list(result.failed) == [str(inputs[2])]
    assert result.failed[str(inputs[2])].startswith(f"{inputs[2]}: not found (No such file or directory); was it "
                                                    f"deleted or moved after the run started?")
    assert sorted(Path(p).stem for p in result.done) == ["run_a", "run_b", "run_d"]
    _check_consistent(out, {"run_a", "run_b", "run_d"})


def test_an_input_deleted_while_queued_is_reported_and_the_rest_finish(campaign, monkeypatch):
    session, inputs, out = campaign
    task = dsp.campaign.process_input
    seen = []

    def delete_a_queued_input(path, *args):
        if not seen:
            inputs[3].unlink()  # while run_a is processed, run_d waits in the queue
        seen.append(Path(path).stem)
        return task(path, *args)

    monkeypatch.setattr(dsp.campaign, "process_input", delete_a_queued_input)
    result = run_batch(session, inputs, out, scheduler="synchronous", progress=False)
    assert seen == list(NAMES)
    assert list(result.failed) == [str(inputs[3])] and "not found" in result.failed[str(inputs[3])]
    assert _summary_files(result)["run_d"][0] == "failed"
    _check_consistent(out, {"run_a", "run_b", "run_c"})


# ------------------------------------------------------------------ an interrupted run, resumed
def test_a_run_interrupted_by_ctrl_c_resumes_where_it_stopped(campaign, monkeypatch):
    session, inputs, out = campaign
    task = dsp.campaign.process_input

    def interrupt_third(path, *args):
        if Path(path).stem == "run_c":
            raise KeyboardInterrupt
        return task(path, *args)

    monkeypatch.setattr(dsp.campaign, "process_input", interrupt_third)
    with pytest.raises(KeyboardInterrupt):
        run_batch(session, inputs, out, scheduler="synchronous", progress=False)
    log = json.loads(max((out / "logs").glob("run-*.json")).read_text())
    assert log["status"] == "interrupted" and log["counts"]["done"] == 2
    _check_consistent(out, {"run_a", "run_b"})
    monkeypatch.undo()
    resumed = run_batch(session, inputs, out, scheduler="synchronous", progress=False)
    assert [Path(p).stem for p in resumed.skipped] == ["run_a", "run_b"]
    assert [Path(p).stem for p in resumed.done] == ["run_c", "run_d"]
    _check_consistent(out, set(NAMES))


KILLED_RUN = """
import os, signal, sys
from pathlib import Path
import dsp.io
from dsp._atomic import atomic_path
from dsp.campaign import run_batch

original = dsp.io.write

def write(recording, path, **options):
    if Path(path).stem == "run_c":  # the third input: die with a half-written temporary file
        with atomic_path(path) as tmp:
            tmp.write_bytes(b"\\x89HDF\\r\\n\\x1a\\n" + b"\\0" * 4096)
            os.kill(os.getpid(), signal.SIGKILL)
    return original(recording, path, **options)

dsp.io.write = write
run_batch(sys.argv[1], sys.argv[2:-1], sys.argv[-1], scheduler="synchronous", progress=False)
"""


def test_a_run_killed_mid_write_resumes_and_cleans_up(cluster, campaign):
    address, _ = cluster
    session, inputs, out = campaign
    done = subprocess.run([sys.executable, "-c", KILLED_RUN, str(session), *map(str, inputs), str(out)],
                          capture_output=True, timeout=60)
    assert done.returncode == -signal.SIGKILL, done.stderr.decode()[-2000:]
    assert [p.name[:len(".run_c.h5.")] for p in (out / "processed").glob("*.part")] == [".run_c.h5."]
    assert not (out / "summary.json").exists()  # killed: no summary was written
    resumed = run_batch(session, inputs, out, scheduler=address, progress=False)
    assert [Path(p).stem for p in resumed.skipped] == ["run_a", "run_b"]
    assert sorted(Path(p).stem for p in resumed.done) == ["run_c", "run_d"]
    assert [Path(p).name[:len(".run_c.h5.")] for p in json.loads(resumed.run_log.read_text())[
        "temporaries_removed"]] == [".run_c.h5."]
    _check_consistent(out, set(NAMES))


def test_deleted_done_markers_redo_exactly_those_inputs(cluster, campaign):
    address, _ = cluster
    session, inputs, out = campaign
    first = run_batch(session, inputs, out, scheduler=address, progress=False)
    assert first.ok
    stamps = {p.name: p.stat().st_mtime_ns for p in (out / "processed").iterdir()}
    for name in ("run_b", "run_d"):
        (out / "done" / f"{name}.json").unlink()
    again = run_batch(session, inputs, out, scheduler=address, progress=False)
    assert sorted(Path(p).stem for p in again.done) == ["run_b", "run_d"]
    assert sorted(Path(p).stem for p in again.skipped) == ["run_a", "run_c"]
    after = {p.name: p.stat().st_mtime_ns for p in (out / "processed").iterdir()}
    assert sorted(n for n in stamps if after[n] != stamps[n]) == ["run_b.h5", "run_d.h5"]  # the others untouched
    _check_consistent(out, set(NAMES))
