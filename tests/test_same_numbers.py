"""Same numbers everywhere: the dashboard's state and `sigtune batch` give identical outputs.

A session is set up in the dashboard's state object (``explorer.state.BenchState``), saved as a
session file, and run with ``sigtune batch`` (the real CLI, on a Dask cluster bound to 127.0.0.1)
over the same recording. The processed samples, their history and every summary figure must be
identical, bit for bit: the batch worker and the app call the same ``dsp`` code on the same data.
"""

import json
import logging
import shutil
from pathlib import Path

import numpy as np
import pytest

import dsp
from dsp.session import Session
from explorer.cli import main
from explorer.state import BenchState

SAMPLES = Path(__file__).resolve().parents[1] / "sample_sessions"


@pytest.fixture(scope="module")
def scheduler():
    from dask.distributed import LocalCluster

    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                           dashboard_address=None, silence_logs=logging.ERROR)
    yield cluster.scheduler_address
    cluster.close()


@pytest.fixture(scope="module")
def tree(tmp_path_factory):
    """sample_sessions/ beside sigtune-demo/ holding the HDF5 demo files (the README's layout)."""
    root = tmp_path_factory.mktemp("same")
    (root / "sigtune-demo").mkdir()
    for scenario in dsp.demo.DEMO_SCENARIOS:
        dsp.write(dsp.demo.demo_recording(scenario), root / "sigtune-demo" / f"{scenario}.h5")
    shutil.copytree(SAMPLES, root / "sample_sessions")
    return root


def _batch(session_file: Path, recording: Path, out: Path, scheduler: str) -> dict:
    code = main(["batch", str(session_file), str(recording), "--out", str(out), "--scheduler", scheduler,
                 "--no-progress"])
    assert code == 0
    return json.loads((out / "summary.json").read_text())["files"][0]


def _assert_identical(state: BenchState, batch_file: dict, out: Path, recording: Path):
    name = state.channel
    assert batch_file["status"] == "done", batch_file["error"]
    assert batch_file["channels"][name] == state.summary  # every figure, exactly
    processed = dsp.read(out / "processed" / f"{recording.stem}.h5")[name]
    np.testing.assert_array_equal(processed.data, state.processed.data)
    assert (processed.unit, processed.quantity, processed.fs) == (state.processed.unit, state.processed.quantity,
                                                                  state.processed.fs)
    assert processed.history == state.processed.history


def test_settings_tuned_in_the_dashboard_give_the_same_numbers_in_batch(tree, scheduler, tmp_path):
    recording = tree / "sigtune-demo" / "pump_skid.h5"
    state = BenchState(file_path=str(recording), channel="DE_V")
    state.param.update(filter_band="bandpass", filter_family="chebyshev1", filter_order=3, cutoff=8.0,
                       cutoff_high=1500.0, zero_phase=True, crop_start_s=1.0, crop_end_s=18.0,
                       band_fraction=1, n_peaks=4, motion_methods=["time", "baseline"], segment_s=1.0,
                       evaluation_kind="machine_severity",
                       evaluation_options={"group": 1, "support": "flexible", "rpm": 1476.0})
    session_file = state.to_session().save(tmp_path / "tuned.json")
    assert Session.load(session_file).source_path == recording
    out = tmp_path / "out"
    _assert_identical(state, _batch(session_file, recording, out, scheduler), out, recording)


@pytest.mark.parametrize("sample", sorted(p.name for p in SAMPLES.glob("*.json")))
def test_sample_sessions_give_the_same_numbers_in_the_dashboard_and_in_batch(sample, tree, scheduler, tmp_path):
    session_file = tree / "sample_sessions" / sample
    session = Session.load(session_file)
    recording = session.source_path
    state = BenchState()
    state.load_session(session)
    assert state.file_path == str(recording)
    out = tmp_path / "out"
    batch_file = _batch(session_file, recording, out, scheduler)
    assert list(batch_file["channels"]) == session.source["channels"]
    _assert_identical(state, batch_file, out, recording)
