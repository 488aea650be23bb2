"""Spectra: windows, PSD/ASD, linear spectrum, spectrogram, peaks (dsp/spectra.py, dsp/windows.py)."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from scipy import signal

from dsp import Channel, SigtuneError
from dsp.spectra import asd, find_peaks, linear_spectrum, psd, spectrogram
from dsp.windows import resolve_window, window_properties, window_samples

WINDOWS = ["rectangular", "hann", "hamming", "flattop", "kaiser:8.6"]


def noise_channel(sigma=1.0, fs=1000.0, n=200_000, seed=0, unit="m/s^2", dtype=np.float64):
    data = (sigma * np.random.default_rng(seed).standard_normal(n)).astype(dtype)
    return Channel(data, fs=fs, name="noise", unit=unit)


def sine_channel(amplitude, f0, fs=1000.0, n=50_000, phase=0.3, unit="m/s^2"):
    t = np.arange(n) / fs
    return Channel(amplitude * np.sin(2 * np.pi * f0 * t + phase), fs=fs, name="tone", unit=unit)


# ---------------------------------------------------------------- windows
# Harris, F. J. (1978) "On the use of windows for harmonic analysis with the discrete
# Fourier transform", Proc. IEEE 66(1), Table 1: coherent gain, ENBW (bins), scalloping loss (dB).
@pytest.mark.parametrize("window, cg, enbw, scallop", [
    ("rectangular", 1.00, 1.00, 3.92),   # Harris 1978 Table 1
    ("hann", 0.50, 1.50, 1.42),          # Harris 1978 Table 1
    ("hamming", 0.54, 1.36, None),       # Harris 1978 Table 1 (scalloping checked analytically below)
])
def test_window_properties_match_harris_table(window, cg, enbw, scallop):
    p = window_properties(window, 4096)
    assert p.coherent_gain == pytest.approx(cg, abs=0.005)  # table rounds to 2 decimals
    assert p.enbw_bins == pytest.approx(enbw, abs=0.005)
    if scallop is not None:
        assert p.scalloping_loss_db == pytest.approx(scallop, abs=0.005)


@pytest.mark.parametrize("alpha, cg, enbw", [(2.0, 0.49, 1.50), (2.5, 0.44, 1.65),
                                             (3.0, 0.40, 1.80), (3.5, 0.37, 1.93)])
def test_kaiser_properties_match_harris_kaiser_bessel_rows(alpha, cg, enbw):
    # Harris 1978 Table 1, Kaiser-Bessel rows, beta = pi * alpha (values from memory)
    p = window_properties(("kaiser", math.pi * alpha), 4096)
    assert p.coherent_gain == pytest.approx(cg, abs=0.006)
    assert p.enbw_bins == pytest.approx(enbw, abs=0.006)


@pytest.mark.parametrize("window, coefficients", [
    ("hann", [0.5, 0.5]),
    ("hamming", [0.54, 0.46]),
    ("flattop", [0.21557895, 0.41663158, 0.277263158, 0.083578947, 0.006947368]),  # scipy's definition
])
def test_cosine_sum_windows_match_closed_form(window, coefficients):
    # analytic: for a periodic cosine-sum window sum(w) = n a0 and
    # sum(w^2) = n (a0^2 + sum_k a_k^2 / 2), so CG = a0, ENBW = (a0^2 + sum a_k^2/2) / a0^2
    a = np.array(coefficients)
    p = window_properties(window, 1000)
    assert p.coherent_gain == pytest.approx(a[0], rel=1e-9)
    assert p.enbw_bins == pytest.approx((a[0] ** 2 + np.sum(a[1:] ** 2) / 2) / a[0] ** 2, rel=1e-9)
    assert p.amplitude_correction == pytest.approx(1 / a[0], rel=1e-9)


def test_hamming_scalloping_closed_form():
    # analytic: W(1/2 bin) = a0 sinc(1/2) + a1/2 (sinc(1/2) + sinc(3/2)) for large n
    # (Harris 1978 lists 1.78 dB, from memory; the closed form gives 1.75 dB)
    s = np.sinc
    expected = -20 * np.log10((0.54 * s(0.5) + 0.23 * (s(0.5) + s(1.5))) / 0.54)
    assert window_properties("hamming", 8192).scalloping_loss_db == pytest.approx(expected, abs=0.002)


def test_flattop_published_values():
    p = window_properties("flattop", 4096)
    assert p.enbw_bins == pytest.approx(3.77, abs=0.005)  # from memory: 3.77 bins
    assert p.scalloping_loss_db < 0.02  # from memory: about 0.01 dB
    assert p.enbw_hz(1000.0) == pytest.approx(3.7702 * 1000.0 / 4096, rel=1e-4)  # analytic


@pytest.mark.parametrize("window, spec", [
    ("kaiser:8.6", ("kaiser", 8.6)), (("kaiser", 8.6), ("kaiser", 8.6)), (["kaiser", 14], ("kaiser", 14.0)),
    ("Hann", "hann"), ("rectangular", "boxcar"), ("flattop", "flattop"),
])
def test_window_spellings(window, spec):
    assert resolve_window(window)[1] == spec


def test_window_samples_are_scipys_periodic_windows():
    # scipy.signal reference
    np.testing.assert_array_equal(window_samples("kaiser:5", 64), signal.get_window(("kaiser", 5.0), 64))
    np.testing.assert_array_equal(window_samples("hamming", 64), signal.get_window("hamming", 64))


@pytest.mark.parametrize("window, match", [
    ("hanning", "unknown window"), ("kaiser", "needs its shape factor beta"),
    ("hann:2", "takes no parameter"), (("hann", 2), r"must be \('kaiser', beta\)"),
    ("kaiser:-1", "Kaiser beta"), ("kaiser:abc", "Kaiser beta"), (3, "must be a name"),
])
def test_bad_windows_are_rejected(window, match):
    with pytest.raises(SigtuneError, match=match):
        psd(noise_channel(n=4096), window=window)


# ---------------------------------------------------------------- PSD
@pytest.mark.parametrize("window", WINDOWS)
@pytest.mark.parametrize("fs, sigma", [(1000.0, 1.0), (2560.0, 0.2)])
def test_white_noise_psd_level(window, fs, sigma):
    # analytic: one-sided PSD of white noise of variance s^2 is 2 s^2 / fs
    spec = psd(noise_channel(sigma, fs=fs, n=400_000), window=window, nperseg=1024)
    level = np.mean(spec.values[1:-1])
    assert level == pytest.approx(2 * sigma**2 / fs, rel=0.02)  # ~400 averages x 511 bins
    assert spec.unit == "(m/s^2)^2/Hz" and spec.scaling == "psd"


@pytest.mark.parametrize("window", WINDOWS)
@pytest.mark.parametrize("overlap", [0.0, 0.5, 0.75])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_parseval_psd_rms_equals_time_rms(window, overlap, dtype):
    # analytic (Parseval): the whole PSD integrates to the mean square, within 1 %
    fs = 2000.0
    t = np.arange(120_000) / fs
    rng = np.random.default_rng(4)
    x = (0.5 * rng.standard_normal(t.size) + 2.0 * np.sin(2 * np.pi * 101.7 * t)
         + np.sin(2 * np.pi * 433 * t))
    ch = Channel(x.astype(dtype), fs=fs)
    spec = psd(ch, window=window, nperseg=2048, overlap=overlap)
    assert math.sqrt(spec.mean_square()) == pytest.approx(np.std(x), rel=0.01)


@pytest.mark.parametrize("window", WINDOWS)
@pytest.mark.parametrize("nperseg", [1000, 1001])
def test_parseval_is_exact_per_segment(window, nperseg):
    # analytic (Parseval for the DFT): with no detrend and no overlap the whole one-sided PSD
    # integrates to the window-weighted mean square of the segments, sum(x w)^2 / sum(w^2)
    x = np.random.default_rng(2).standard_normal(20 * nperseg) + 0.3
    spec = psd(Channel(x, fs=1000.0), window=window, nperseg=nperseg, overlap=0.0, detrend="none")
    w = window_samples(window, nperseg)
    segments = x.reshape(20, nperseg) * w
    expected = np.mean(np.sum(segments**2, axis=1)) / np.sum(w**2)
    assert spec.mean_square() == pytest.approx(expected, rel=1e-12)
    halves = spec.mean_square(0.0, 250.0) + spec.mean_square(250.0, 500.0)
    assert halves == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("window", ["hann", "flattop", "kaiser:8.6"])
@pytest.mark.parametrize("amplitude, f0", [(1.0, 50.0), (3.5, 123.45)])
def test_sine_psd_integrates_to_half_amplitude_squared(window, amplitude, f0):
    # analytic: a sinusoid of amplitude A has mean square A^2 / 2
    spec = psd(sine_channel(amplitude, f0), window=window, nperseg=1000)
    assert spec.mean_square(f0 - 10, f0 + 10) == pytest.approx(amplitude**2 / 2, rel=0.005)


@pytest.mark.parametrize("settings", [
    dict(window="hann", nperseg=512, overlap=0.5, detrend="constant"),
    dict(window="flattop", nperseg=1000, overlap=0.25, detrend="linear"),
    dict(window="kaiser:6", nperseg=300, overlap=0.0, detrend="none"),
    dict(window="rectangular", segment_s=0.256, overlap=0.9, detrend="constant"),
])
def test_psd_equals_scipy_welch(settings):
    # scipy.signal reference: the same estimate, same scaling
    ch = noise_channel(n=30_000)
    spec = psd(ch, **settings)
    nperseg = settings.get("nperseg") or round(settings["segment_s"] * ch.fs)
    detrend = False if settings["detrend"] == "none" else settings["detrend"]
    f, p = signal.welch(ch.data, ch.fs, window=resolve_window(settings["window"])[1], nperseg=nperseg,
                        noverlap=round(settings["overlap"] * nperseg), detrend=detrend)
    np.testing.assert_allclose(spec.frequencies, f)
    np.testing.assert_allclose(spec.values, p, rtol=1e-12)
    assert spec.resolution_hz == pytest.approx(ch.fs / nperseg)
    step = nperseg - round(settings["overlap"] * nperseg)
    assert spec.settings["n_averages"] == 1 + (ch.n_samples - nperseg) // step


def test_asd_is_square_root_of_psd():
    # analytic: ASD = sqrt(PSD)
    ch = noise_channel(n=20_000, unit="g")
    np.testing.assert_allclose(asd(ch, nperseg=512).values ** 2, psd(ch, nperseg=512).values, rtol=1e-12)
    assert asd(ch).unit == "g/sqrt(Hz)" and asd(ch).scaling == "asd"


def test_peak_hold_is_at_least_the_mean_and_equals_scipy_segment_maximum():
    ch = noise_channel(n=50_000)
    mean = psd(ch, nperseg=1024)
    peak = psd(ch, nperseg=1024, average="peak")
    assert np.all(peak.values >= mean.values)  # a maximum is never below the average
    assert np.mean(peak.values[1:-1] / mean.values[1:-1]) > 2.0  # chi-square(2) max of ~97 segments
    _, _, seg = signal.spectrogram(ch.data, ch.fs, window="hann", nperseg=1024, noverlap=512)
    np.testing.assert_allclose(peak.values, seg.max(axis=1), rtol=1e-12)  # scipy.signal reference
    assert peak.settings["average"] == "peak"


def test_linear_detrend_removes_a_ramp():
    # analytic: a linear trend is removed exactly per segment, leaving the noise PSD
    noise = noise_channel(n=40_000)
    ramp = noise.replace(data=noise.data + np.linspace(0, 50, noise.n_samples))
    with_ramp = psd(ramp, nperseg=1000, detrend="linear")
    clean = psd(noise, nperseg=1000, detrend="linear")
    np.testing.assert_allclose(with_ramp.values, clean.values, rtol=1e-6, atol=1e-12)


def test_default_segment_rule_is_reported():
    ch = noise_channel(fs=1000.0, n=100_000)  # min(8 s = 8000, 100000/4) -> 4096
    spec = psd(ch)
    assert spec.settings["nperseg"] == 4096
    assert "largest power of two" in spec.settings["segment_rule"]
    assert any("segment length default" in note for note in spec.notes)
    short = psd(noise_channel(n=2000))  # max(2000/4, 256) = 500 -> 256
    assert short.settings["nperseg"] == 256 and short.settings["n_averages"] == 14


def test_edge_zones_are_left_out_and_reported():
    fs = 1000.0
    ch = noise_channel(fs=fs, n=10_000)
    data = ch.data.copy()
    data[:1000] += 1e3 * np.exp(-np.arange(1000) / 100.0)  # a start-up transient
    entry = {"op": "filter", "info": {"edge_zones_s": [[0.0, 0.999], [9.5, 10.0]]}}
    filtered = ch.replace(data=data, history=(entry,))
    spec = psd(filtered, nperseg=512)
    assert spec.settings["valid_duration_s"] == pytest.approx(8.5, abs=2 / fs)
    assert any("edge zones left out" in note for note in spec.notes)
    clean = psd(ch.replace(data=ch.data[1000:9500]), nperseg=512)
    np.testing.assert_allclose(spec.values, clean.values, rtol=1e-12)  # same samples analysed
    everything = psd(filtered, nperseg=512, exclude_edges=False)
    assert everything.settings["valid_duration_s"] == pytest.approx(10.0)
    assert everything.mean_square() > 100 * spec.mean_square()


def test_edge_zones_outside_the_record_change_nothing():
    ch = noise_channel(fs=100.0, n=1000)
    entry = {"op": "filter", "info": {"edge_zones_s": [[-5.0, -1.0], [20.0, 25.0]]}}
    spec = psd(ch.replace(history=(entry,)), nperseg=64)
    assert spec.settings["valid_duration_s"] == pytest.approx(10.0) and spec.notes == ()
    np.testing.assert_array_equal(spec.values, psd(ch, nperseg=64).values)


def test_edge_zones_with_start_time_offset():
    ch = noise_channel(fs=100.0, n=1000).replace(start_time=50.0)
    entry = {"op": "filter", "info": {"edge_zones_s": [[50.0, 51.0]]}}
    spec = psd(ch.replace(history=(entry,)), nperseg=64)
    assert spec.settings["valid_start_s"] == pytest.approx(51.01)
    assert spec.settings["valid_duration_s"] == pytest.approx(8.99)


# ---------------------------------------------------------------- linear spectrum
@pytest.mark.parametrize("offset_bins", [0.0, 0.25, 0.5, 0.73])
@pytest.mark.parametrize("amplitude", [0.01, 1.0, 250.0])
def test_flattop_linear_spectrum_reads_sine_amplitude(offset_bins, amplitude):
    # analytic: a sine of amplitude A reads A (peak) / A/sqrt(2) (rms) within 0.1 dB
    fs, nperseg = 1000.0, 1000
    f0 = 100.0 + offset_bins * fs / nperseg
    ch = sine_channel(amplitude, f0, fs=fs)
    peak = linear_spectrum(ch, amplitude="peak", nperseg=nperseg)
    rms = linear_spectrum(ch, amplitude="rms", nperseg=nperseg)
    assert 20 * np.log10(peak.values.max() / amplitude) == pytest.approx(0.0, abs=0.1)
    assert 20 * np.log10(rms.values.max() / (amplitude / math.sqrt(2))) == pytest.approx(0.0, abs=0.1)
    assert peak.unit == "m/s^2" and peak.scaling == "peak" and rms.scaling == "rms"


def test_linear_spectrum_is_scipy_spectrum_scaling():
    # scipy.signal reference: rms = sqrt(scaling="spectrum"); peak = sqrt(2) * rms off DC/Nyquist
    ch = sine_channel(2.0, 77.0, n=20_000)
    _, s = signal.welch(ch.data, ch.fs, window="flattop", nperseg=1000, scaling="spectrum")
    rms = linear_spectrum(ch, amplitude="rms", nperseg=1000)
    peak = linear_spectrum(ch, amplitude="peak", nperseg=1000)
    np.testing.assert_allclose(rms.values, np.sqrt(s), rtol=1e-12)
    np.testing.assert_allclose(peak.values[1:-1], math.sqrt(2) * np.sqrt(s[1:-1]), rtol=1e-12)
    assert peak.values[0] == pytest.approx(math.sqrt(s[0]))


def test_linear_spectrum_without_detrend_reads_dc_as_is():
    # analytic: a constant c reads c at DC (the DC bin is not doubled)
    ch = Channel(np.full(8000, 0.7), fs=1000.0)
    spec = linear_spectrum(ch, nperseg=1000, detrend="none", window="flattop")
    assert spec.values[0] == pytest.approx(0.7, rel=1e-9)


# ---------------------------------------------------------------- spectrogram
@pytest.mark.parametrize("scaling, unit", [("psd", "V^2/Hz"), ("asd", "V/sqrt(Hz)"), ("rms", "V"),
                                           ("peak", "V")])
def test_spectrogram_matches_scipy(scaling, unit):
    # scipy.signal reference
    ch = Channel(np.random.default_rng(7).standard_normal(8192), fs=1024.0, unit="V", start_time=3.0)
    sg = spectrogram(ch, nperseg=256, overlap=0.5, scaling=scaling)
    kind = "density" if scaling in ("psd", "asd") else "spectrum"
    f, t, s = signal.spectrogram(ch.data, ch.fs, window="hann", nperseg=256, noverlap=128, scaling=kind)
    expected = {"psd": s, "asd": np.sqrt(s), "rms": np.sqrt(s), "peak": np.sqrt(2 * s)}[scaling]
    np.testing.assert_allclose(sg.values[1:-1], expected[1:-1], rtol=1e-12)
    np.testing.assert_allclose(sg.times, 3.0 + t)
    assert sg.unit == unit and sg.values.shape == (129, t.size)


def test_spectrogram_mean_over_time_is_welch_psd():
    # scipy.signal reference: Welch's estimate is the mean of the segment periodograms
    ch = noise_channel(n=16_384)
    sg = spectrogram(ch, nperseg=512)
    np.testing.assert_allclose(sg.values.mean(axis=1), psd(ch, nperseg=512).values, rtol=1e-10)
    assert "1 s" in spectrogram(ch).settings["segment_rule"]


# ---------------------------------------------------------------- peaks
@pytest.mark.parametrize("window, tolerance_bins", [("hann", 0.05), ("hamming", 0.05), ("kaiser:8.6", 0.05),
                                                    ("flattop", 0.2), ("rectangular", 0.2)])
@pytest.mark.parametrize("offset_bins", [0.1, 0.3, 0.5, 0.77])
def test_find_peaks_interpolates_tone_between_bins(window, tolerance_bins, offset_bins):
    # analytic: tone frequency known; quadratic interpolation on log magnitude (common practice)
    fs, nperseg = 1000.0, 1000
    f0 = 150.0 + offset_bins
    ch = sine_channel(1.0, f0, fs=fs, n=40_000)
    peak = find_peaks(linear_spectrum(ch, window=window, nperseg=nperseg), n=1)[0]
    assert abs(peak["frequency_hz"] - f0) < tolerance_bins * fs / nperseg
    assert peak["interpolated"]


@pytest.mark.parametrize("window, tolerance_db", [("hann", 0.1), ("flattop", 0.02), ("kaiser:8.6", 0.05)])
def test_find_peaks_amplitude_of_tones(window, tolerance_db):
    # analytic: tones of known amplitude; PSD peaks give the tone RMS sqrt(PSD * ENBW)
    fs = 2000.0
    t = np.arange(80_000) / fs
    x = 3.0 * np.sin(2 * np.pi * 210.37 * t) + 0.5 * np.sin(2 * np.pi * 612.8 * t)
    ch = Channel(x, fs=fs, unit="g")
    peaks = find_peaks(linear_spectrum(ch, window=window, nperseg=2000), n=2)
    assert [round(p["frequency_hz"]) for p in peaks] == [210, 613]
    for p, a in zip(peaks, (3.0, 0.5)):
        assert 20 * np.log10(p["amplitude"] / a) == pytest.approx(0, abs=tolerance_db)
        assert p["amplitude_kind"] == "peak" and p["amplitude_unit"] == "g"
    from_psd = find_peaks(psd(ch, window=window, nperseg=2000), n=1)[0]
    assert 20 * np.log10(from_psd["amplitude"] / (3.0 / math.sqrt(2))) == pytest.approx(0, abs=tolerance_db)
    assert from_psd["amplitude_kind"] == "rms"


def test_find_peaks_range_and_distance():
    fs = 1000.0
    t = np.arange(20_000) / fs
    x = np.sin(2 * np.pi * 100 * t) + 0.8 * np.sin(2 * np.pi * 104 * t) + 0.3 * np.sin(2 * np.pi * 300 * t)
    spec = linear_spectrum(Channel(x, fs=fs), window="hann", nperseg=2000)
    near = find_peaks(spec, n=3)
    assert [round(p["frequency_hz"]) for p in near] == [100, 104, 300]
    spaced = find_peaks(spec, n=3, min_distance_hz=10.0)
    assert [round(p["frequency_hz"]) for p in spaced][:2] == [100, 300]
    assert [round(p["frequency_hz"]) for p in find_peaks(spec, n=5, f_min=200, f_max=400)][:1] == [300]


def test_find_peaks_rejects_bad_input():
    with pytest.raises(SigtuneError, match="expected a Spectrum"):
        find_peaks(np.zeros(10))
    with pytest.raises(SigtuneError, match="n: must be a whole number"):
        find_peaks(psd(noise_channel(n=4096)), n=0)


# ---------------------------------------------------------------- results and validation
def test_results_are_frozen_and_serialisable():
    spec = psd(noise_channel(n=8192), nperseg=256)
    with pytest.raises(dataclasses.FrozenInstanceError):
        spec.unit = "g"
    with pytest.raises(ValueError):
        spec.values[0] = 1.0  # read-only array
    table = spec.to_table()
    assert list(table) == ["frequency (Hz)", "PSD ((m/s^2)^2/Hz)"] and len(table["frequency (Hz)"]) == 129
    data = json.loads(json.dumps(spec.to_dict()))
    assert data["settings"]["nperseg"] == 256 and data["settings"]["window"] == "hann"
    assert data["settings"]["resolution_hz"] == pytest.approx(1000 / 256)
    sg = spectrogram(noise_channel(n=4096), nperseg=128)
    assert len(sg.to_table()["time (s)"]) == sg.values.size
    json.dumps(sg.to_dict())


@pytest.mark.parametrize("kwargs, match", [
    (dict(overlap=0.96), r"overlap: must be 0 <= x <= 0.95"),
    (dict(overlap=-0.1), r"overlap: must be 0 <= x <= 0.95"),
    (dict(nperseg=20_000), r"nperseg: segment of 20000 samples \(20 s\) is longer than the record"),
    (dict(segment_s=11.0), r"segment_s: .*at most 10000 samples \(segment_s <= 10 s\)"),
    (dict(segment_s=1.0, nperseg=100), "give the segment length once"),
    (dict(nperseg=2), "nperseg: must be a whole number >= 4"),
    (dict(detrend="quadratic"), "detrend: must be one of 'none', 'constant', 'linear'"),
    (dict(average="median"), "average: must be one of 'mean', 'peak'"),
])
def test_psd_validation_messages(kwargs, match):
    with pytest.raises(SigtuneError, match=match):
        psd(noise_channel(n=10_000), **kwargs)


def test_other_validation_messages():
    with pytest.raises(SigtuneError, match="amplitude: must be one of 'peak', 'rms'"):
        linear_spectrum(noise_channel(n=4096), amplitude="pk")
    with pytest.raises(SigtuneError, match="scaling: must be one of"):
        spectrogram(noise_channel(n=4096), scaling="db")
    with pytest.raises(SigtuneError, match="expected a dsp.Channel"):
        psd(np.zeros(100))
    data = np.random.default_rng(0).standard_normal(4096)
    data[1000] = np.nan
    with pytest.raises(SigtuneError, match=r"channel 'gap'.*1 non-finite values \(first at 1 s\)"):
        psd(Channel(data, fs=1000.0, name="gap"), nperseg=256)
    zones = {"op": "filter", "info": {"edge_zones_s": [[0.0, 5.0]]}}
    with pytest.raises(SigtuneError, match="cover the whole record"):
        psd(noise_channel(n=4096).replace(history=(zones,)))


def test_linear_spectrum_peak_hold_of_a_steady_tone():
    # analytic: every segment of a steady sine reads its amplitude, so peak hold = mean there
    ch = sine_channel(1.5, 80.0, n=40_000)
    held = linear_spectrum(ch, nperseg=1000, average="peak")
    mean = linear_spectrum(ch, nperseg=1000)
    assert held.values.max() == pytest.approx(1.5, rel=0.005)
    assert np.all(held.values >= mean.values * (1 - 1e-12))


def test_spectrogram_times_skip_edge_zones():
    # analytic: the first segment centre is the valid start plus half a segment
    ch = noise_channel(fs=1000.0, n=10_000).replace(start_time=2.0)
    entry = {"op": "filter", "info": {"edge_zones_s": [[2.0, 3.0]]}}
    sg = spectrogram(ch.replace(history=(entry,)), nperseg=500, overlap=0.0)
    assert sg.times[0] == pytest.approx(3.001 + 0.25)
    assert sg.settings["valid_duration_s"] == pytest.approx(8.999)


def test_an_astronomical_segment_length_is_refused_not_overflowed():
    # regression: int(round(1e308 * fs)) raised OverflowError instead of the project's error
    from dsp import Channel, SigtuneError, psd

    ch = Channel(np.sin(np.arange(4000) / 10.0), 1000.0)
    with pytest.raises(SigtuneError, match=r"segment_s: a segment of 1e\+308 s .* at most 4000 samples"):
        psd(ch, segment_s=1e308)
