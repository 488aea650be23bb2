"""Resampling, interpolation and aliasing, each check held against an outside reference."""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest
from scipy import signal

from dsp import (Chain, Channel, Resample, SigtuneError, SigtuneWarning, alias_frequency, alias_risk, alias_table,
                 edge_zones, oversampling_ratio, resample_plan, sinc_interpolate, step_from_dict)
from dsp import resample


def tone(fs, f, seconds, amplitude=1.0, offset=0.0, phase=0.3):
    t = np.arange(int(round(seconds * fs))) / fs
    return offset + amplitude * np.sin(2 * np.pi * f * t + phase)


def outside_edges(channel):
    """Boolean mask of the samples outside every reported edge zone."""
    t = channel.time()
    keep = np.ones(t.size, bool)
    for a, b in edge_zones(channel):
        keep &= ~((t >= a) & (t <= b))
    return keep


def tone_amplitude(x, fs, f):
    """Amplitude of the tone at f by projection onto it (least squares on sine and cosine): numpy reference."""
    t = np.arange(x.size) / fs
    basis = np.column_stack([np.sin(2 * np.pi * f * t), np.cos(2 * np.pi * f * t), np.ones(x.size)])
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    return float(np.hypot(coef[0], coef[1]))


# ---------------------------------------------------------------- aliasing
def test_alias_frequency_common_cases():
    # common practice: sampled at 2000 Hz, 1100 Hz appears at 900 Hz; 1900 Hz and 2100 Hz appear at 100 Hz
    np.testing.assert_allclose(alias_frequency([1100.0, 1900.0, 2100.0], 2000.0), [900.0, 100.0, 100.0])
    assert alias_frequency(1100.0, 2000.0) == 900.0
    assert alias_frequency(0.0, 2000.0) == 0.0 and alias_frequency(1000.0, 2000.0) == 1000.0
    assert alias_frequency(np.array([[3000.0, 4000.0]]), 2000.0).shape == (1, 2)


@pytest.mark.parametrize("f", [130.0, 870.0, 1100.0, 1900.0, 2100.0, 3330.0, 5710.0])
def test_alias_frequency_matches_sampled_tone(f):
    # numpy reference: the FFT peak of the tone actually sampled at fs
    fs, n = 2000.0, 20000
    x = np.cos(2 * np.pi * f * np.arange(n) / fs)
    peak = np.fft.rfftfreq(n, 1 / fs)[np.argmax(np.abs(np.fft.rfft(x)))]
    assert alias_frequency(f, fs) == pytest.approx(peak, abs=fs / n)


def test_alias_table_rows():
    # common practice: Nyquist zones of width fs/2; even zones are mirrored
    rows = alias_table([400.0, 1100.0, 1900.0, 2100.0], 2000.0)
    assert [r["apparent_hz"] for r in rows] == [400.0, 900.0, 100.0, 100.0]
    assert [r["zone"] for r in rows] == [1, 2, 2, 3]
    assert [r["folded"] for r in rows] == [False, True, True, True]
    assert [r["inverted"] for r in rows] == [False, True, True, False]
    assert [r["folds"] for r in rows] == [0, 1, 1, 2]
    json.dumps(rows)


def test_alias_frequency_rejects_negative():
    with pytest.raises(SigtuneError, match=r"frequencies must be finite and >= 0 Hz"):
        alias_frequency([-1.0], 1000.0)


def test_oversampling_ratio():
    # common practice: 2.56 samples per Hz of bandwidth (51.2 kHz for 20 kHz)
    assert oversampling_ratio(51200.0, 20000.0) == pytest.approx(2.56)
    with pytest.raises(SigtuneError, match=r"bandwidth_hz: must be 0 < x <= 500 Hz; got 600.*Nyquist \(500 Hz"):
        oversampling_ratio(1000.0, 600.0)


def test_alias_risk_levels():
    rng = np.random.default_rng(0)
    white = Channel(rng.normal(size=65536), 1000.0)
    risk = alias_risk(white)
    # analytic: white noise spreads power evenly, so the top 10 % of the band holds 10 % of it
    assert risk["fraction_near_nyquist"] == pytest.approx(0.1, abs=0.01)
    assert risk["level"] == "high" and risk["band_hz"] == [450.0, 500.0]
    assert risk["density_ratio_db"] == pytest.approx(0.0, abs=0.5)
    sos = signal.butter(8, 1000.0 / 2.56, fs=1000.0, output="sos")  # an analyser-like anti-alias filter
    filtered = Channel(signal.sosfilt(sos, rng.normal(size=65536)), 1000.0)
    assert alias_risk(filtered)["level"] == "low"
    mild = Channel(filtered.data + 0.2 * white.data, 1000.0)
    # analytic: white noise of variance 0.04 puts 0.004 in the top band, out of 0.04 + var(filtered) in all
    expected = 0.1 * 0.04 / (0.04 + np.var(filtered.data))
    assert alias_risk(mild)["fraction_near_nyquist"] == pytest.approx(expected, rel=0.15)
    assert alias_risk(mild)["level"] == "elevated"
    silent = alias_risk(Channel(np.full(1000, 2.0), 1000.0))
    assert silent["level"] == "low" and silent["fraction_near_nyquist"] == 0.0 and silent["density_ratio_db"] is None


# ---------------------------------------------------------------- resampling
RATE_PAIRS = [(5120.0, 2000.0), (44100.0, 48000.0), (48000.0, 44100.0), (2000.0, 5120.0), (10000.0, 1000.0),
              (51200.0, 800.0), (8192.0, 3000.0)]


@pytest.mark.parametrize("fs_in, fs_out", RATE_PAIRS)
def test_in_band_sine_keeps_amplitude_and_frequency(fs_in, fs_out):
    # analytic: a sine inside the usable band (here 0.3 x the lower rate) comes out as the same sine, so the
    # output matches it at the new instants to 0.1 % of the amplitude, which bounds both amplitude and frequency
    f0 = 0.3 * min(fs_in, fs_out)
    out = resample(Channel(tone(fs_in, f0, 2.0, amplitude=2.0, offset=0.7), fs_in), fs_out)
    assert out.fs == pytest.approx(fs_out, rel=1e-12)
    expected = 0.7 + 2.0 * np.sin(2 * np.pi * f0 * np.arange(out.n_samples) / out.fs + 0.3)
    keep = outside_edges(out)
    assert np.abs(out.data - expected)[keep].max() < 1e-3 * 2.0
    assert keep.mean() > 0.5  # the comparison covers most of the record


@pytest.mark.parametrize("attenuation_db", [60.0, 90.0, 120.0])
@pytest.mark.parametrize("fs_in, fs_out, f_tone", [(5120.0, 2000.0, 1500.0), (5120.0, 2000.0, 1001.0),
                                                   (51200.0, 800.0, 1200.0), (10000.0, 1000.0, 4321.0)])
def test_tone_above_new_nyquist_is_attenuated(attenuation_db, fs_in, fs_out, f_tone):
    # analytic: the tone would fold to alias_frequency(f_tone, fs_out); the stopband keeps it at least
    # attenuation_db below its input level there
    x = tone(fs_in, f_tone, 4.0)
    with pytest.warns(SigtuneWarning, match=r"100.0% of the signal's energy"):  # all of it lies above the band
        out = Resample(fs_out=fs_out, attenuation_db=attenuation_db).apply(Channel(x, fs_in))
    folded = alias_frequency(f_tone, out.fs)
    keep = outside_edges(out)
    level_db = 20 * np.log10(tone_amplitude(out.data[keep], out.fs, folded) / 1.0)
    assert level_db <= -attenuation_db


def test_scipy_default_filter_leaks_where_ours_does_not():
    # scipy.signal reference: resample_poly's default Kaiser(5) filter is only about -6 dB at the new Nyquist,
    # so a tone just above it folds back nearly unattenuated
    x = tone(5120.0, 1010.0, 4.0)
    default = signal.resample_poly(x, 25, 64)
    assert tone_amplitude(default[2000:-2000], 2000.0, 990.0) > 0.1
    ours = resample(Channel(x, 5120.0), 2000.0, energy_warning_fraction=1.0)
    assert tone_amplitude(ours.data[2000:-2000], 2000.0, 990.0) < 10 ** (-90 / 20)


@pytest.mark.parametrize("fs_in, fs_out", RATE_PAIRS)
def test_designed_fir_meets_its_stated_edges(fs_in, fs_out):
    # scipy.signal reference: freqz of each stage's taps, at that stage's (upsampled) rate
    for stage in Resample(fs_out=fs_out).plan(fs_in):
        rate = stage["fs_in"] * stage["up"]
        f, h = signal.freqz(stage["taps"], worN=2 ** 20, fs=rate)
        g = 20 * np.log10(np.abs(h) + 1e-300)
        assert g[f >= stage["stopband_hz"]].max() <= -90.0
        assert np.abs(g[f <= stage["passband_hz"]]).max() < 0.01
        assert stage["attenuation_db"] >= 90.0
    final = Resample(fs_out=fs_out).plan(fs_in)[-1]
    lower = min(fs_in, fs_out)
    assert final["stopband_hz"] == pytest.approx(lower / 2)  # the new (or old) Nyquist
    assert final["passband_hz"] == pytest.approx(lower / 2.56)  # common practice: usable bandwidth fs/2.56


def test_output_equals_resample_poly_with_our_filter():
    # scipy.signal reference: resample_poly with our taps, on the centred record, line padding, mean restored
    x = np.random.default_rng(1).normal(3.0, 1.0, 20_000)
    out = Resample(fs_out=3000.0, energy_warning_fraction=1.0).apply(Channel(x, 8192.0))
    (stage,) = Resample(fs_out=3000.0).plan(8192.0)
    expected = signal.resample_poly(x - x.mean(), stage["up"], stage["down"], window=np.array(stage["taps"]),
                                    padtype="line") + x.mean()
    np.testing.assert_allclose(out.data, expected, rtol=1e-12, atol=1e-12)


def test_staged_decimation_plan():
    # analytic: 64 = 8 x 8, 100 = 5 x 5 x 4 (each stage <= 8); 12 is not staged; 17 is prime
    assert [s["down"] for s in resample_plan(51200.0, 1, 64)] == [8, 8]
    assert sorted(s["down"] for s in resample_plan(100000.0, 1, 100)) == [4, 5, 5]
    assert [s["down"] for s in resample_plan(12000.0, 1, 12)] == [12]
    assert [s["down"] for s in resample_plan(17000.0, 1, 17)] == [17]
    stages = resample_plan(51200.0, 1, 64)
    assert stages[0]["stopband_hz"] == pytest.approx(6400.0 - 400.0)  # stops what would fold below 400 Hz
    assert stages[-1]["fs_out"] == 800.0


def test_rational_approximation_reports_rate_obtained():
    # analytic: 333.3 Hz from 1000 Hz with denominators <= 1000 is 1/3 (333.33 Hz, error +1.0e-4)
    out = Resample(fs_out=333.3, max_denominator=1000).apply(Channel(tone(1000.0, 50.0, 3.0), 1000.0))
    info = out.history[-1]["info"]
    assert info["ratio"] == [1, 3]
    assert info["fs_obtained"] == pytest.approx(1000 / 3) and out.fs == pytest.approx(1000 / 3)
    assert info["rate_error"] == pytest.approx((1000 / 3 - 333.3) / 333.3, rel=1e-9)
    assert out.n_samples == math.ceil(3000 / 3)
    with pytest.warns(SigtuneWarning, match=r"obtained 1400 Hz \(error -1.005%\); raise max_denominator"):
        Resample(fs_out=1000.0 * math.sqrt(2), max_denominator=5).apply(Channel(tone(1000.0, 50.0, 1.0), 1000.0))


def test_same_rate_leaves_samples_unchanged():
    x = Channel(np.random.default_rng(9).normal(size=1000), 1000.0)
    out = resample(x, 1000.0)
    np.testing.assert_array_equal(out.data, x.data)
    assert out.history[-1]["info"]["unchanged"] is True and edge_zones(out) == []


def test_exact_ratio_pair_and_number():
    x = Channel(tone(48000.0, 1000.0, 0.5), 48000.0)
    by_pair = Resample(ratio=(147, 160)).apply(x)
    by_number = Resample(ratio=44100 / 48000).apply(x)
    assert by_pair.fs == by_number.fs == 44100.0
    np.testing.assert_array_equal(by_pair.data, by_number.data)
    assert Resample(ratio=[294, 320]).ratio == (147, 160)  # kept in lowest terms


def test_energy_above_usable_band_warns():
    rng = np.random.default_rng(2)
    with pytest.warns(SigtuneWarning, match=r"of the signal's energy .* above the usable band of 781.25 Hz"):
        resample(Channel(rng.normal(size=20_000), 5120.0), 2000.0)
    low = signal.sosfilt(signal.butter(8, 500.0, fs=5120.0, output="sos"), rng.normal(size=20_000))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = resample(Channel(low, 5120.0), 2000.0)
    assert out.history[-1]["info"]["energy_removed_fraction"] < 0.01


def test_mean_and_float32_kept():
    x = tone(4096.0, 100.0, 2.0, offset=5.0).astype(np.float32)
    out = resample(Channel(x, 4096.0), 1024.0)
    assert out.data.dtype == np.float32
    assert float(np.mean(out.data[outside_edges(out)], dtype=np.float64)) == pytest.approx(5.0, abs=1e-3)


def test_edge_zones_cover_the_filter_reach():
    ch = Channel(tone(5120.0, 100.0, 2.0), 5120.0, start_time=30.0)
    out = resample(ch, 2000.0)
    (stage,) = Resample(fs_out=2000.0).plan(5120.0)
    reach = (stage["taps"].size - 1) / 2 / (5120.0 * stage["up"])
    zones = edge_zones(out)
    assert zones[0] == (30.0, pytest.approx(30.0 + reach))
    assert zones[1][1] == pytest.approx(30.0 + out.duration)


def test_step_round_trip():
    step = Resample(fs_out=2000.0, attenuation_db=100.0)
    assert step_from_dict(json.loads(json.dumps(step.to_dict()))) == step
    pair = Resample(ratio=(2, 5))
    assert json.loads(json.dumps(pair.to_dict()))["ratio"] == [2, 5]
    assert step_from_dict(json.loads(json.dumps(pair.to_dict()))) == pair
    x = Channel(tone(5000.0, 80.0, 1.0), 5000.0)
    first = Chain([pair]).apply(x)
    again = Chain.from_list(first.history).apply(x)
    np.testing.assert_array_equal(first.data, again.data)
    assert again.fs == 2000.0


@pytest.mark.parametrize("kwargs, message", [
    (dict(), r"give exactly one of fs_out"),
    (dict(fs_out=100.0, ratio=0.5), r"give exactly one of fs_out"),
    (dict(fs_out=0.0), r"fs_out: sample rate must be a finite number > 0 Hz; got fs=0"),
    (dict(ratio=(1, 2, 3)), r"a ratio pair must be \[p, q\]"),
    (dict(ratio=(0, 2)), r"ratio: must be a whole number >= 1; got 0"),
    (dict(fs_out=100.0, attenuation_db=10.0), r"attenuation_db: must be 20 <= x <= 200 dB; got 10"),
    (dict(fs_out=100.0, passband_fraction=0.99), r"passband_fraction: must be 0.5 <= x <= 0.98; got 0.99"),
])
def test_validation(kwargs, message):
    with pytest.raises(SigtuneError, match=message):
        Resample(**kwargs)


def test_too_few_output_samples():
    with pytest.raises(SigtuneError, match=r"leaves 1; need at least 2"):
        resample(Channel(np.zeros(10), 1000.0), 100.0)


# ---------------------------------------------------------------- interpolation
def band_limited(t, fs, top=0.4, n=12, seed=3):
    """A sum of random-phase sines up to top * fs: analytic and band-limited."""
    rng = np.random.default_rng(seed)
    freqs, phases = np.linspace(0.5, top * fs, n), rng.uniform(0, 2 * np.pi, n)
    return np.sum(np.sin(2 * np.pi * freqs[:, None] * np.atleast_1d(t)[None, :] + phases[:, None]), axis=0) / n


@pytest.mark.parametrize("top, half_width, tolerance", [(0.4, 32, 1e-5), (0.45, 32, 1e-5), (0.4, 16, 1e-5),
                                                        (0.47, 64, 1e-5)])
def test_sinc_interpolation_matches_band_limited_signal(top, half_width, tolerance):
    # analytic: Whittaker-Shannon reconstruction of a signal band-limited below fs/2, between the samples,
    # with the error stated in sinc_interpolate's docstring
    fs = 200.0
    x = band_limited(np.arange(4000) / fs, fs, top)
    t = np.random.default_rng(4).uniform(half_width / fs, (4000 - half_width - 1) / fs, 5000)
    error = np.abs(sinc_interpolate(x, fs, t, half_width=half_width) - band_limited(t, fs, top))
    assert error.max() < tolerance * np.abs(x).max()


def test_sinc_interpolation_hits_samples_and_rectangular_is_worse():
    # analytic: at the sample instants sinc(k) is 1 for k = 0 and 0 otherwise
    fs = 100.0
    x = band_limited(np.arange(1000) / fs, fs)
    np.testing.assert_allclose(sinc_interpolate(x, fs, np.arange(100, 200) / fs), x[100:200], atol=1e-12)
    t = np.random.default_rng(5).uniform(1.0, 8.0, 2000)
    exact = band_limited(t, fs)
    kaiser = np.abs(sinc_interpolate(x, fs, t) - exact).max()
    plain = np.abs(sinc_interpolate(x, fs, t, window="rectangular") - exact).max()
    assert plain > 20 * kaiser


def test_sinc_interpolation_of_channel_uses_its_time_axis():
    fs = 100.0
    ch = Channel(band_limited(np.arange(1000) / fs, fs), fs, start_time=50.0)
    t = np.array([55.123, 57.5])
    np.testing.assert_allclose(sinc_interpolate(ch, None, t), band_limited(t - 50.0, fs), atol=1e-5)
    with pytest.raises(SigtuneError, match=r"t: instants must lie within the record, 0 to 9.99 s"):
        sinc_interpolate(ch.data, fs, [10.5])
