"""Octave and one-third-octave band levels, band RMS (dsp/spectra.py)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from dsp import Channel, SigtuneError
from dsp.bands import band_levels, band_rms, iec_bands
from dsp.spectra import psd

G = 10 ** (3 / 10)  # IEC 61260-1:2014 base-10 octave ratio


def noise(sigma=1.0, fs=4096.0, seconds=100.0, seed=11):
    data = sigma * np.random.default_rng(seed).standard_normal(int(fs * seconds))
    return Channel(data, fs=fs, name="floor_z", unit="m/s^2")


def tone(amplitude, f0, fs=4096.0, seconds=20.0):
    t = np.arange(int(fs * seconds)) / fs
    return Channel(amplitude * np.sin(2 * np.pi * f0 * t + 0.4), fs=fs, name="tone")


# ---------------------------------------------------------------- IEC 61260-1 bands
@pytest.mark.parametrize("x, mid, nominal", [
    # IEC 61260-1:2014: fm = 1000 * G^(x/3), nominal values from the standard's table
    (0, 1000.0, "1000"), (1, 1258.93, "1250"), (2, 1584.89, "1600"), (3, 1995.26, "2000"),
    (-1, 794.33, "800"), (-2, 630.96, "630"), (-17, 19.95, "20"), (-15, 31.62, "31.5"),
    (13, 19952.62, "20000"), (-30, 1.0, "1"), (-29, 1.26, "1.25"), (-34, 0.40, "0.4"),
])
def test_one_third_octave_mid_frequencies_and_labels(x, mid, nominal):
    bands = iec_bands(3, mid, mid)
    assert bands["index"] == [x]
    assert bands["mid_hz"][0] == pytest.approx(mid, abs=0.005)
    assert bands["nominal"] == [nominal]


@pytest.mark.parametrize("mid, nominal", [
    # IEC 61260-1:2014: octave fm = 1000 * G^x, nominal 31.5, 63, 125 ...
    (31.62, "31.5"), (63.10, "63"), (125.89, "125"), (251.19, "250"), (501.19, "500"),
    (1000.0, "1000"), (1995.26, "2000"), (3981.07, "4000"), (7943.28, "8000"), (15848.93, "16000"),
    (15.85, "16"), (7.94, "8"), (1.0, "1"), (1.995, "2"),
])
def test_octave_mid_frequencies_and_labels(mid, nominal):
    bands = iec_bands(1, mid, mid)
    assert bands["mid_hz"][0] == pytest.approx(mid, abs=0.01)
    assert bands["nominal"] == [nominal]


@pytest.mark.parametrize("fraction, mid, lower, upper", [
    (3, 1000.0, 891.25, 1122.02),   # IEC 61260-1:2014: fm * G^(-1/6), fm * G^(1/6)
    (1, 1000.0, 707.95, 1412.54),   # IEC 61260-1:2014: fm * G^(-1/2), fm * G^(1/2)
    (3, 100.0, 89.13, 112.20),
    (1, 63.0957, 44.67, 89.13),
])
def test_band_edges(fraction, mid, lower, upper):
    bands = iec_bands(fraction, mid, mid)
    assert bands["lower_hz"][0] == pytest.approx(lower, abs=0.005)
    assert bands["upper_hz"][0] == pytest.approx(upper, abs=0.005)


def test_audio_range_nominal_lists():
    # IEC 61260-1:2014 preferred nominal mid-frequencies, 20 Hz to 20 kHz
    thirds = ("20 25 31.5 40 50 63 80 100 125 160 200 250 315 400 500 630 800 1000 1250 1600 2000 "
              "2500 3150 4000 5000 6300 8000 10000 12500 16000 20000").split()
    octaves = "31.5 63 125 250 500 1000 2000 4000 8000 16000".split()
    assert iec_bands(3, 20, 20_000)["nominal"] == thirds
    assert iec_bands(1, 30, 16_000)["nominal"] == octaves
    b = iec_bands(3, 20, 20_000)
    np.testing.assert_allclose(b["upper_hz"][:-1], b["lower_hz"][1:], rtol=1e-12)  # contiguous bands
    np.testing.assert_allclose(np.array(b["mid_hz"]) ** 2, np.multiply(b["lower_hz"], b["upper_hz"]),
                               rtol=1e-12)  # mid = geometric mean of the edges (IEC 61260-1)


# ---------------------------------------------------------------- band levels
@pytest.mark.parametrize("fraction", [1, 3])
def test_white_noise_band_mean_square_is_psd_times_bandwidth(fraction):
    # analytic: white noise PSD 2 s^2/fs, so each band's mean square = PSD * bandwidth; the
    # relative std of a mean square over bandwidth B and time T is 1/sqrt(B T) (analytic)
    sigma, fs, seconds = 0.7, 4096.0, 100.0
    levels = band_levels(noise(sigma, fs, seconds), fraction=fraction, f_min=25.0, f_max=1500.0)
    bandwidth = levels.upper_edges - levels.lower_edges
    expected = 2 * sigma**2 / fs * bandwidth
    relative = levels.values**2 / expected - 1
    assert np.all(np.abs(relative) < 4 / np.sqrt(bandwidth * seconds) + 0.01)
    assert abs(np.mean(relative)) < 0.02
    assert levels.nominal[0] == ("25" if fraction == 3 else "31.5")


def test_sum_of_band_squares_is_mean_square_of_covered_range():
    # numpy.fft reference: the noise band-limited to the covered range by zeroing FFT bins
    ch = noise(1.0, 4096.0, 60.0, seed=3)
    levels = band_levels(ch, fraction=3, f_min=40.0, f_max=1200.0)
    lo, hi = levels.lower_edges[0], levels.upper_edges[-1]
    spectrum = np.fft.rfft(ch.data)
    f = np.fft.rfftfreq(ch.n_samples, 1 / ch.fs)
    spectrum[(f < lo) | (f > hi)] = 0
    reference = np.mean(np.fft.irfft(spectrum, ch.n_samples) ** 2)
    assert levels.total_rms**2 == pytest.approx(reference, rel=0.02)
    # the same PSD integrated over the whole range at once (identity of contiguous bands)
    whole = band_rms(ch, lo, hi, nperseg=levels.settings["nperseg"])
    assert levels.total_rms == pytest.approx(whole.total_rms, rel=1e-9)


@pytest.mark.parametrize("fraction, mid_index", [(3, -10), (3, 0), (3, 2), (1, -3), (1, 0)])
def test_tone_at_exact_mid_frequency_lands_in_its_band(fraction, mid_index):
    # IEC 61260-1:2014 exact mid-frequency; analytic: tone RMS = A / sqrt(2)
    f0 = 1000.0 * G ** (mid_index / fraction)
    levels = band_levels(tone(2.0, f0), fraction=fraction, f_min=50.0, f_max=1600.0)
    k = int(np.argmax(levels.values))
    assert levels.frequencies[k] == pytest.approx(f0, rel=1e-12)
    assert levels.values[k] == pytest.approx(2.0 / math.sqrt(2), rel=0.01)
    assert levels.values[k] ** 2 > 0.99 * levels.total_rms**2


def test_octave_is_root_sum_square_of_its_thirds():
    # IEC 61260-1:2014 base-10: each octave band's edges coincide with three one-third bands
    ch = noise(1.0, 4096.0, 30.0, seed=5)
    thirds = band_levels(ch, fraction=3, f_min=100.0, f_max=1200.0, nperseg=4096)
    octaves = band_levels(ch, fraction=1, f_min=125.0, f_max=1000.0, nperseg=4096)
    assert octaves.nominal == ("125", "250", "500", "1000")
    by_third = np.sqrt(np.sum(thirds.values.reshape(-1, 3) ** 2, axis=1))
    np.testing.assert_allclose(octaves.values, by_third, rtol=1e-9)


def test_defaults_are_resolved_and_reported():
    ch = noise(1.0, 2560.0, 40.0)
    levels = band_levels(ch)
    assert levels.upper_edges[-1] <= ch.fs / 2.56 * G ** (1 / 6) + 1e-9  # default f_max = fs/2.56
    assert levels.upper_edges[-1] <= ch.nyquist
    df = levels.settings["resolution_hz"]
    assert np.all(levels.upper_edges - levels.lower_edges >= 5 * df * (1 - 1e-9))  # >= 5 bins
    assert levels.settings["method"] == "psd integrated over each band"
    assert levels.settings["segment_rule"].startswith("default")
    assert any(note.startswith("f_min not given") for note in levels.notes)
    assert any(note.startswith("f_max not given: fs/2.56 = 1000 Hz") for note in levels.notes)


def test_segment_is_chosen_to_resolve_the_lowest_band():
    ch = noise(1.0, 4096.0, 40.0)
    levels = band_levels(ch, fraction=3, f_min=10.0, f_max=100.0)
    width = levels.upper_edges[0] - levels.lower_edges[0]
    assert levels.nominal[0] == "10"
    assert width / levels.settings["resolution_hz"] >= 5
    assert "resolve the lowest band" in levels.settings["segment_rule"]


def test_narrow_bands_are_omitted_with_a_message():
    ch = noise(1.0, 4096.0, 10.0)
    levels = band_levels(ch, fraction=3, f_min=10.0, f_max=500.0, nperseg=1024)  # 4 Hz bins
    assert levels.nominal[0] == "100"  # 100 Hz band: 23 Hz wide, 5.8 bins
    assert any("10, 12.5, 16" in note and "omitted" in note for note in levels.notes)


def test_band_rms_of_tones():
    # analytic: RMS of A sin is A/sqrt(2); tones outside the band do not count
    fs = 2048.0
    t = np.arange(int(fs * 20)) / fs
    x = (3.0 * np.sin(2 * np.pi * 40 * t) + 1.5 * np.sin(2 * np.pi * 300 * t)
         + 0.5 * np.sin(2 * np.pi * 700 * t))
    ch = Channel(x, fs=fs, unit="mm/s")
    expected = math.sqrt((1.5**2 + 0.5**2) / 2)
    assert band_rms(ch, 200.0, 800.0).total_rms == pytest.approx(expected, rel=0.005)
    assert band_rms(ch, 10.0, 100.0).total_rms == pytest.approx(3.0 / math.sqrt(2), rel=0.005)
    whole = band_rms(ch, 0.0, fs / 2)
    assert whole.total_rms == pytest.approx(np.std(x), rel=0.01)  # analytic (Parseval)
    assert whole.unit == "mm/s" and whole.fraction == 0
    json.dumps(whole.to_dict())


def test_band_rms_partial_bins_count_by_fraction():
    # analytic: white noise, band limits off the bin grid: mean square = PSD * (f_high - f_low)
    ch = noise(1.0, 1000.0, 400.0, seed=9)
    spec = psd(ch, nperseg=1000)
    level = np.mean(spec.values[1:-1])
    for f_low, f_high in [(100.3, 140.8), (211.1, 211.1 + 7.4), (10.5, 480.25)]:
        expected = level * (f_high - f_low)
        tolerance = 4 / math.sqrt(400 * (f_high - f_low))  # 4 sigma for B*T = 400 s * band
        assert spec.mean_square(f_low, f_high) == pytest.approx(expected, rel=tolerance)


def test_band_levels_table():
    levels = band_levels(tone(1.0, 250.0), fraction=1, f_min=60.0, f_max=1000.0)
    table = levels.to_table()
    assert list(table) == ["band (Hz)", "mid frequency (Hz)", "lower edge (Hz)", "upper edge (Hz)",
                           "band RMS (m/s^2)"]
    assert table["band (Hz)"] == ["63", "125", "250", "500", "1000"]
    data = json.loads(json.dumps(levels.to_dict()))
    assert data["scaling"] == "band_rms" and data["fraction"] == 1


def test_edge_zones_apply_to_band_levels():
    ch = noise(1.0, 1024.0, 20.0)
    entry = {"op": "filter", "info": {"edge_zones_s": [[0.0, 2.0], [18.0, 20.0]]}}
    levels = band_levels(ch.replace(history=(entry,)), fraction=3, f_min=20.0, f_max=200.0)
    assert levels.settings["valid_duration_s"] == pytest.approx(16.0, abs=0.01)
    assert any("edge zones left out" in note for note in levels.notes)


# ---------------------------------------------------------------- filter-bank method
@pytest.mark.parametrize("order", [2, 3, 4])
def test_filter_bank_white_noise_reads_butterworth_noise_bandwidth(order):
    # analytic: an order-n Butterworth band-pass passes (pi/2n)/sin(pi/2n) times the ideal
    # band's white-noise power; relative std of the mean square 1/sqrt(B T) (analytic)
    sigma, fs, seconds = 1.0, 4096.0, 100.0
    levels = band_levels(noise(sigma, fs, seconds), fraction=3, f_min=40.0, f_max=400.0,
                         method="filter", filter_order=order)
    bandwidth = levels.upper_edges - levels.lower_edges
    factor = (math.pi / (2 * order)) / math.sin(math.pi / (2 * order))
    relative = levels.values**2 / (2 * sigma**2 / fs * bandwidth * factor) - 1
    assert np.all(np.abs(relative) < 4 / np.sqrt(bandwidth * seconds) + 0.02)
    assert levels.nominal == ("40", "50", "63", "80", "100", "125", "160", "200", "250", "315", "400")
    assert len(levels.settings["settling_s"]) == len(levels.values)


@pytest.mark.parametrize("fraction, mid_index", [(3, -10), (3, -4), (1, -2), (1, -1)])
def test_filter_bank_tone_at_mid_frequency(fraction, mid_index):
    # analytic: a Butterworth band-pass has unit gain at its centre; tone RMS = A / sqrt(2)
    f0 = 1000.0 * G ** (mid_index / fraction)
    levels = band_levels(tone(2.0, f0), fraction=fraction, f_min=50.0, f_max=900.0, method="filter")
    k = int(np.argmax(levels.values))
    assert levels.frequencies[k] == pytest.approx(f0, rel=1e-12)
    assert levels.values[k] == pytest.approx(2.0 / math.sqrt(2), rel=0.01)


def test_filter_bank_omits_bands_it_cannot_measure():
    ch = noise(1.0, 20_000.0, 10.0)
    levels = band_levels(ch, fraction=3, f_min=1.0, f_max=40.0, method="filter")
    assert any("bands 1, 1.25, 1.6, 2 Hz omitted" in note and "numerically unsound" in note
               for note in levels.notes)
    assert any("more than half the record" in note for note in levels.notes)
    assert levels.nominal[0] == "5" and levels.nominal[-1] == "40"
    with pytest.raises(SigtuneError, match="filter_order: must be a whole number from 1 to 6"):
        band_levels(ch, method="filter", filter_order=7)
    with pytest.raises(SigtuneError, match="method: window, nperseg apply to method='psd' only"):
        band_levels(ch, method="filter", window="flattop", nperseg=4096)


@pytest.mark.parametrize("call, match", [
    (lambda ch: band_rms(ch, 10.0, 600.0), r"f_high: must be 0 < x <= 512 Hz; got 600\. Nyquist is 512 Hz"),
    (lambda ch: band_rms(ch, 100.0, 50.0), r"f_low: must be 0 <= x < 50 Hz"),
    (lambda ch: band_rms(ch, -1.0, 50.0), r"f_low: must be 0 <= x < 50 Hz"),
    (lambda ch: band_rms(ch, 100.0, 100.5, nperseg=1024), "spans fewer than 5 bins"),
    (lambda ch: band_levels(ch, fraction=2), "fraction: must be one of 1, 3"),
    (lambda ch: band_levels(ch, f_max=700.0), r"f_max: must be 0 < x <= 512 Hz"),
    (lambda ch: band_levels(ch, f_min=300.0, f_max=200.0), "f_min: must be 0 < x < 200 Hz"),
    (lambda ch: band_levels(ch, method="bank"), "method: must be one of 'psd', 'filter'"),
    (lambda ch: band_levels(ch, f_max=3.0), "no band up to f_max=3 Hz is 5 bins wide"),
    (lambda ch: band_levels(ch, f_min=1.0, f_max=2.0, nperseg=256), "no band between 1 and 2 Hz"),
])
def test_band_validation_messages(call, match):
    with pytest.raises(SigtuneError, match=match):
        call(noise(1.0, 1024.0, 4.0))
