"""The demo scenarios: deterministic, and their documented truths hold in the samples."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

import dsp
from dsp.demo import DEMO_SCENARIOS, demo_recording, demo_truths, write_demo

DOCS = Path(__file__).resolve().parents[1] / "docs" / "demo.md"


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    directory = tmp_path_factory.mktemp("demo")
    return directory, write_demo(directory)


def _amplitude_at(x: np.ndarray, fs: float, freq: float) -> float:
    """Peak amplitude of the sine at ``freq`` by a single DFT bin (analytic for on-bin tones)."""
    n = x.size
    k = int(round(freq * n / fs))
    assert abs(k * fs / n - freq) < 1e-9  # on-bin by construction: no leakage
    return float(2 * np.abs(np.fft.rfft(x)[k]) / n)


def test_default_scenario_and_catalogue():
    assert list(DEMO_SCENARIOS) == ["pump_skid", "floor_footfall", "vehicle_seat"]
    assert demo_recording().names == ["DE_H", "DE_V", "NDE_A"]


@pytest.mark.parametrize("scenario", list(DEMO_SCENARIOS))
def test_deterministic(scenario):
    a, b = demo_recording(scenario), demo_recording(scenario)
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x.data, y.data)
    assert demo_truths(scenario) == demo_truths(scenario)


@pytest.mark.parametrize("scenario,fs,duration,n_channels", [
    ("pump_skid", 5120.0, 20.0, 3), ("floor_footfall", 512.0, 64.0, 2), ("vehicle_seat", 500.0, 60.0, 3)])
def test_timebase_and_units(scenario, fs, duration, n_channels):
    rec = demo_recording(scenario)
    truths = demo_truths(scenario)
    assert len(rec) == n_channels == len(truths["channels"])
    for ch in rec:
        assert ch.fs == fs == truths["fs_hz"] and ch.duration == duration
        assert ch.unit == "m/s^2" and ch.quantity == "acceleration"
    assert rec.metadata["scenario"] == scenario


def test_unknown_scenario():
    with pytest.raises(dsp.SigtuneError, match=r"scenario: must be one of 'pump_skid', 'floor_footfall', "
                                               r"'vehicle_seat'; got 'ship'"):
        demo_recording("ship")


def test_pump_skid_tones_have_their_stated_amplitudes():
    rec, truths = demo_recording(), demo_truths()
    for tone in truths["tones"]:
        ch = rec[tone["channel"]]
        # Exclude nothing: the defects add broadband energy of < 0.02 m/s^2 per bin here.
        measured = _amplitude_at(ch.data, ch.fs, tone["frequency_hz"])
        assert measured == pytest.approx(tone["amplitude_peak"], abs=0.03), tone


def test_pump_skid_spectral_peaks_by_scipy_welch():
    rec, truths = demo_recording(), demo_truths()
    ch = rec["DE_V"]  # DE_H's clipped 612 Hz burst would top its spectrum
    f, p = signal.welch(ch.data, fs=ch.fs, nperseg=16384)  # scipy.signal reference, 0.3125 Hz bins
    peaks, _ = signal.find_peaks(p)
    strongest = np.sort(f[peaks[np.argsort(p[peaks])[::-1][:4]]])
    # The four strongest lines are 1x, 2x, 3x running speed and the bearing tone, each within a bin.
    expected = [tone["frequency_hz"] for tone in truths["tones"] if tone["channel"] == "DE_V"]
    np.testing.assert_allclose(strongest, sorted(expected), atol=0.32)


def test_pump_skid_defects_are_where_stated():
    rec, truths = demo_recording(), demo_truths()
    defects = {d["kind"]: d for d in truths["defects"]}
    clip = defects["clipping"]
    x = rec["DE_H"].data
    clipped = np.flatnonzero(np.abs(x) >= clip["full_scale"])
    assert clipped[0] == clip["start"] and clipped[-1] + 1 == clip["stop"]
    assert clipped.size == clip["clipped_samples"]
    assert clip["burst_start"] <= clip["start"] < clip["stop"] <= clip["burst_stop"]
    assert clip["full_scale"] == pytest.approx(5 * 9.80665)  # +-5 g, g_n exact (ISO 80000-3)
    for name in ("DE_V", "NDE_A"):
        assert np.max(np.abs(rec[name].data)) < clip["full_scale"]
    drop = defects["dropout"]
    v = rec["DE_V"].data
    assert np.all(v[drop["start"]:drop["stop"]] == 0.0)
    assert v[drop["start"] - 1] != 0.0 and v[drop["stop"]] != 0.0
    drift = defects["dc_drift"]
    a = rec["NDE_A"].data
    fs = rec["NDE_A"].fs
    # The mean of the last second approaches 0.6 (1 - exp(-t/8)) (analytic); tones average out.
    assert np.mean(a[-int(fs):]) == pytest.approx(drift["value_at_end"], abs=0.02)
    assert abs(np.mean(a[:int(fs)])) < 0.1
    impact = defects["impact"]
    for name, amp in impact["amplitude"].items():
        seg = rec[name].data[impact["start"]:impact["stop"]]
        assert np.argmax(np.abs(seg)) < 0.005 * fs  # the peak comes within 5 ms of the stated start
        assert np.max(np.abs(seg)) == pytest.approx(amp, rel=0.2)


def test_floor_mode_and_pacing():
    rec, truths = demo_recording("floor_footfall"), demo_truths("floor_footfall")
    ch = rec["FLOOR_Z_MID"]
    f, p = signal.welch(ch.data, fs=ch.fs, nperseg=8192)  # scipy.signal reference, 0.0625 Hz bins
    assert f[np.argmax(p)] == pytest.approx(truths["floor_mode_hz"], abs=0.07)
    assert truths["resonant_harmonic"] * truths["pacing_hz"] == pytest.approx(truths["floor_mode_hz"])
    # Steady resonant peak of a harmonic load: a = alpha G / (2 zeta M) (analytic, SDOF at resonance)
    assert truths["steady_state_resonant_peak_m_s2"] == pytest.approx(0.06 * 750 / (2 * 0.03 * 12000))
    walking = truths["walking"]
    peak = np.max(np.abs(ch.data))
    noise = truths["noise_std_m_s2"]
    assert peak == pytest.approx(truths["peak_response_m_s2"]["FLOOR_Z_MID"], abs=4 * noise)
    before = ch.data[:walking["start"]]
    assert np.std(before) == pytest.approx(truths["noise_std_m_s2"], rel=0.05)  # only the noise floor
    ratio = np.max(np.abs(rec["FLOOR_Z_QTR"].data)) / peak
    assert ratio == pytest.approx(np.sin(np.pi / 4), abs=0.05)  # first mode shape sin(pi x / L) (analytic)


def test_vehicle_seat_rms_shocks_and_crest():
    rec, truths = demo_recording("vehicle_seat"), demo_truths("vehicle_seat")
    fs = rec[0].fs
    quiet = np.ones(rec[0].n_samples, bool)
    for event in truths["events"]:
        quiet[event["start"]:event["start"] + int(3 * fs)] = False  # shocks ring down within 3 s
    for name, rms in truths["random_rms_m_s2"].items():
        x = rec[name].data
        engine = 0.08 / np.sqrt(2)  # rms of the 27.5 Hz engine tone (analytic)
        assert np.sqrt(np.mean(x[quiet] ** 2)) == pytest.approx(np.hypot(rms, engine), rel=0.05)
        assert np.max(np.abs(x)) == pytest.approx(truths["peak_m_s2"][name])
    z = rec["SEAT_Z"].data
    for event in truths["events"]:
        seg = np.abs(z[event["start"]:event["stop"]])
        assert np.argmax(seg) < 0.15 * fs  # the peak of a 4.5 Hz ring comes within its first quarter cycles
    crest = np.max(np.abs(z)) / np.sqrt(np.mean(z**2))
    assert crest == pytest.approx(truths["crest_factor_unweighted"]["SEAT_Z"])
    # ISO 2631-1:1997 6.2.1 (from memory): the basic rms method holds for crest factors up to 9
    assert crest > 9


def test_write_demo_files(demo_dir):
    directory, written = demo_dir
    names = sorted(p.name for p in written)
    expected = sorted(f"{s}.{ext}" for s in DEMO_SCENARIOS
                      for ext in ("csv", "tsv", "wav", "wav.json", "h5", "npz", "truths.json"))
    assert names == expected
    assert all(p.parent == directory and p.is_file() for p in written)
    assert sum(p.stat().st_size for p in written) < 60e6


@pytest.mark.parametrize("scenario", list(DEMO_SCENARIOS))
@pytest.mark.parametrize("ext", ["csv", "tsv", "wav", "h5", "npz"])
def test_every_demo_file_reads_back_exactly(demo_dir, scenario, ext):
    directory, _ = demo_dir
    rec = dsp.read(directory / f"{scenario}.{ext}")
    original = demo_recording(scenario)
    assert rec.names == original.names
    for a, b in zip(original, rec):
        assert b.fs == a.fs and b.unit == a.unit
        np.testing.assert_array_equal(b.data, a.data)
    if ext == "csv":
        assert rec.timestamps is not None and rec.timestamps.size == original[0].n_samples


@pytest.mark.parametrize("scenario", list(DEMO_SCENARIOS))
def test_truths_json_matches(demo_dir, scenario):
    directory, _ = demo_dir
    truths = json.loads((directory / f"{scenario}.truths.json").read_text())
    assert truths == json.loads(json.dumps(demo_truths(scenario)))


def test_docs_state_the_truths():
    text = DOCS.read_text()
    for scenario in DEMO_SCENARIOS:
        truths = demo_truths(scenario)
        assert f"`{scenario}`" in text
        for tone in truths["tones"]:
            assert f"{tone['frequency_hz']:g} Hz" in text
        for item in truths["defects"] + truths.get("events", []):
            assert f"{item['start']}" in text and f"{item['stop']}" in text, item
    pump = demo_truths()
    clip = pump["defects"][0]
    assert f"{clip['clipped_samples']} samples" in text
