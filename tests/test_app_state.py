"""Tier 1 (no browser): the explorer's state object, its pipeline and its caches."""

import hashlib

import numpy as np
import pytest
from scipy import signal

from dsp import Channel, Recording, SigtuneError
from dsp.session import Session
from explorer.stages import SOURCES, Pipeline, build_chain
from explorer.state import BenchState

FS_FAST, FS_SLOW = 2000.0, 500.0


def _recording(n=20_000):
    rng = np.random.default_rng(7)
    t = np.arange(n) / FS_FAST
    fast = np.sin(2 * np.pi * 50 * t) + 0.3 * np.sin(2 * np.pi * 400 * t) + 0.05 * rng.standard_normal(n)
    slow_t = np.arange(n // 4) / FS_SLOW
    slow = np.sin(2 * np.pi * 20 * slow_t) + 0.05 * rng.standard_normal(n // 4)
    volts = 0.2 * np.sin(2 * np.pi * 30 * t)
    return Recording([Channel(fast, FS_FAST, name="fast", unit="m/s^2"),
                      Channel(slow, FS_SLOW, name="slow", unit="m/s^2"),
                      Channel(volts, FS_FAST, name="volts", unit="V")], source="synthetic")


@pytest.fixture
def state():
    st = BenchState(recording=_recording(), filter_band="lowpass", cutoff=100.0, motion_f_low=5.0)
    yield st
    st.release()


def test_default_state_opens_the_demo_recording():
    from dsp.demo import demo_recording

    st = BenchState()
    assert st.dataset_id == "demo:pump_skid"
    assert st.channel == demo_recording("pump_skid").names[0]
    assert st.param.channel.objects == demo_recording("pump_skid").names
    assert st.processed.n_samples == demo_recording("pump_skid")[0].n_samples


def test_cutoff_bounds_follow_the_channel(state):
    assert state.param.cutoff.bounds == (0.0, FS_FAST / 2)
    state.cutoff = 20.0
    state.channel = "slow"
    assert state.param.cutoff.bounds == (0.0, FS_SLOW / 2)
    assert state.param.cutoff_high.bounds == (0.0, FS_SLOW / 2)
    with pytest.raises(ValueError):
        state.cutoff = 300.0  # above the 250 Hz Nyquist of the slow channel
    assert state.param.crop_end_s.bounds == (0.0, 5000 / FS_SLOW)


@pytest.mark.parametrize("zero_phase", [False, True])
@pytest.mark.parametrize("band,cutoff", [("lowpass", 100.0), ("highpass", 30.0)])
def test_processed_channel_matches_scipy(state, zero_phase, band, cutoff):
    state.param.update(filter_band=band, cutoff=cutoff, zero_phase=zero_phase)
    x = _recording()["fast"].data
    sos = signal.butter(4, cutoff, btype=band, fs=FS_FAST, output="sos")  # scipy.signal reference
    centred = x - x.mean()
    expected = signal.sosfiltfilt(sos, centred) if zero_phase else signal.sosfilt(sos, centred)
    if band == "lowpass":  # the filter restores the mean at its DC gain of 1
        expected = expected + x.mean()
    # The ends differ by how each pads a forward-backward pass (scipy's default pad is shorter than
    # the settling time, so its own ends ring): compare the middle half, far from either end.
    middle = slice(x.size // 4, 3 * x.size // 4)
    np.testing.assert_allclose(state.processed.data[middle], expected[middle], rtol=0, atol=1e-9)


def _delta(state, change):
    state.results()
    before = dict(state.counts)
    state.param.update(**change)
    state.results()
    after = state.counts
    return {stage for stage in after if after[stage] != before.get(stage, 0)}


# Which stages a change of each setting recomputes: exactly those downstream of it.
@pytest.mark.parametrize("change,recomputed", [
    ({"cutoff": 150.0}, {"response", "conditioned", "spectrum", "bands", "motion", "advice", "summary"}),
    ({"zero_phase": True}, {"response", "conditioned", "spectrum", "bands", "motion", "advice", "summary"}),
    ({"scaling": "asd"}, {"raw_spectrum", "spectrum"}),
    ({"spectrum_window": "hamming"}, {"raw_spectrum", "spectrum", "bands", "summary"}),
    ({"motion_methods": ["time", "frequency"]}, {"motion", "summary"}),
    ({"motion_target": "displacement"}, {"motion", "summary"}),
    ({"band_fraction": 1}, {"bands", "summary"}),
    ({"full_scale": 5.0}, {"quality", "summary"}),
    ({"n_peaks": 3}, {"summary"}),
    ({"decimation": "minmax-lttb"}, set()),
    ({"crop_start_s": 1.0}, {"conditioned", "raw_spectrum", "spectrum", "bands", "motion", "advice", "summary"}),
    ({"channel": "slow", "cutoff": 50.0},
     {"channel", "response", "conditioned", "raw_spectrum", "spectrum", "bands", "motion", "quality", "advice",
      "summary"}),
])
def test_a_change_recomputes_only_downstream_stages(state, change, recomputed):
    assert _delta(state, change) == recomputed


def _tone_amplitude(x, f, fs):
    t = np.arange(x.size) / fs
    return 2 * np.abs(np.mean(x * np.exp(-2j * np.pi * f * t)))  # whole cycles: exact for a steady tone


@pytest.mark.parametrize("cutoff", [100.0, 300.0, 450.0])
def test_a_change_changes_the_processed_output(state, cutoff):
    state.cutoff = cutoff
    steady = state.processed.data[4000:]  # past the 4th-order filter's settling (< 0.1 s)
    gain = np.abs(signal.sosfreqz(signal.butter(4, cutoff, fs=FS_FAST, output="sos"), [400.0],
                                  fs=FS_FAST)[1][0])  # scipy.signal reference
    assert _tone_amplitude(steady, 400.0, FS_FAST) == pytest.approx(0.3 * gain, rel=0.02, abs=2e-3)


def test_toggling_back_is_served_from_the_cache(state):
    state.results()
    state.cutoff = 150.0
    state.results()
    count = state.counts["conditioned"]
    state.cutoff = 100.0
    state.results()
    assert state.counts["conditioned"] == count


def test_cutoff_above_nyquist_is_refused_with_the_library_message(state):
    message = state.propose(cutoff=1500.0)
    assert message is not None
    assert "Nyquist for fs=2000 Hz" in message and "0 < cutoff < 1000 Hz" in message
    assert state.cutoff == 100.0


def test_band_filter_edges_are_checked_together(state):
    assert state.propose(filter_band="bandpass", cutoff=100.0, cutoff_high=80.0) is not None
    assert state.filter_band == "lowpass"
    assert state.propose(filter_band="bandpass", cutoff=100.0, cutoff_high=300.0) is None
    assert state.processed.history[-1]["cutoff"] == [100.0, 300.0]


def test_a_bad_setting_reports_and_keeps_the_rest(state):
    state.results()
    state.cutoff = 0.001  # inside the bounds, but below what the library can design (1e-5 fs)
    res = state.results()
    assert "conditioned" not in res
    assert "too low for fs=2000 Hz" in res.errors["filter"]
    assert "channel" in res  # the stages upstream of the filter still stand
    with pytest.raises(SigtuneError, match="too low"):
        state.processed


def test_calibration_in_the_setup(state):
    state.param.update(channel="volts", filter_band="none")
    assert state.unit == "V" and state.quantity == "voltage"
    state.sensitivity = 100.0  # 100 mV/g: 0.2 V reads 2 g
    processed = state.processed
    assert processed.unit == "g"
    assert np.max(processed.data) == pytest.approx(2.0, rel=1e-4)  # analytic: 0.2 V / 0.1 V/g


def test_setup_is_remembered_per_channel(state):
    state.channel = "volts"
    state.sensitivity = 50.0
    state.channel = "fast"
    assert state.sensitivity is None
    state.channel = "volts"
    assert state.sensitivity == 50.0


def test_open_bad_path_keeps_the_open_data(state, tmp_path):
    dataset = state.dataset_id
    with pytest.raises(SigtuneError, match="no such recording file"):
        state.open(str(tmp_path / "missing.h5"))
    assert state.dataset_id == dataset
    with pytest.raises(SigtuneError, match="folder"):
        state.open(str(tmp_path))


def test_open_a_file_and_save_its_hash(state, tmp_path):
    import dsp

    path = dsp.io.write(_recording(), tmp_path / "bench.h5")
    state.open(str(path), channel="slow")
    assert state.channel == "slow" and state.param.channel.objects == ["fast", "slow", "volts"]
    session = state.to_session()
    assert session.source["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()  # hashlib reference
    assert session.source["channels"] == ["slow"]


def test_session_round_trip(state, tmp_path):
    state.param.update(filter_band="bandpass", cutoff=40.0, cutoff_high=300.0, filter_family="chebyshev1",
                       ripple_db=0.5, zero_phase=True, crop_start_s=1.0, crop_end_s=8.0, resample_by="rate",
                       resample_fs=1000.0, motion_methods=["frequency"], scaling="asd", band_fraction=1,
                       notes="tuned on the fast channel")
    path = state.to_session().save(tmp_path / "s.json")
    other = BenchState(recording=_recording())
    other.load_session(Session.load(path, verify_source=False))
    mine, theirs = state.snapshot(), other.snapshot()
    mine.pop("dataset_id"), theirs.pop("dataset_id")
    assert theirs == mine
    assert other.notes == "tuned on the fast channel"
    np.testing.assert_array_equal(other.processed.data, state.processed.data)
    other.release()


def test_a_session_without_a_filter_loads_without_one(state):
    # regression: loading reset filter_band to the new-bench default (a high-pass), adding a filter
    assert state.filter_band == "lowpass"
    state.load_session(Session())
    assert state.filter_band == "none"
    assert [step.op for step in state.chain] == []
    np.testing.assert_array_equal(state.processed.data, state.source_channel.data)


def test_batch_replay_gives_what_the_app_shows(state):
    state.param.update(channel="volts", sensitivity=100.0, filter_band="highpass", cutoff=10.0, crop_start_s=0.5)
    session = Session.from_dict(state.to_session().to_dict())
    replayed, summary = session.apply_channel(_recording()["volts"])
    np.testing.assert_array_equal(replayed.data, state.processed.data)
    assert summary["rms"] == pytest.approx(state.summary["rms"], rel=1e-12)


def test_session_with_a_step_the_explorer_cannot_edit(state):
    from dsp import Gain

    session = Session(chain=[Gain(2.0)])
    with pytest.raises(SigtuneError, match=r"chain.steps\[0\].*cannot edit a 'gain' step"):
        state.load_session(session)


def test_chain_is_made_of_library_steps(state):
    state.param.update(crop_start_s=1.0, detrend="linear", resample_by="ratio", resample_ratio=0.5)
    chain, n_reference = build_chain(state.snapshot())
    assert [s.op for s in chain] == ["crop", "detrend", "filter", "resample"]
    assert n_reference == 2
    assert state.processed.fs == pytest.approx(FS_FAST / 2)


def test_a_cancelled_run_computes_nothing(state):
    pipeline = Pipeline(SOURCES)
    res = pipeline.run(state.snapshot(), cancelled=lambda: True)
    assert res.cancelled and sum(pipeline.counts.values()) == 0


def test_summary_is_the_library_analysis(state):
    from dsp.analysis import analyse

    from explorer.stages import analysis_settings

    expected = analyse(state.processed, analysis_settings(state.snapshot()))
    # the explorer reuses its motion stage's comparison: the result must be the library's, key for key
    assert state.summary == expected
    assert [r["method"] for r in state.summary["integration"]["rows"]] == ["time", "frequency", "baseline"]
