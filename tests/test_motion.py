"""Integration and differentiation against analytic results; the method comparison."""

import json
import math
import warnings

import numpy as np
import pytest
from scipy import signal
from scipy.integrate import cumulative_trapezoid

from dsp import (INTEGRATION_PRESETS, Chain, Channel, Detrend, Differentiate, Integrate, SigtuneError,
                 compare_integration, differentiate, edge_zones, integrate, step_from_dict)

FS = 1000.0
METHODS = ("time", "frequency", "baseline")
G = 9.80665  # m/s^2, standard gravity (ISO 80000-3)


def corner_kwargs(method, f_low):
    return {} if method == "baseline" else {"f_low": f_low}


def middle(x, fraction=0.8):
    n = len(x)
    cut = int(round(n * (1 - fraction) / 2))
    return slice(cut, n - cut)


# ---------------------------------------------------------------- integration of a sine
@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("f", [2.0, 10.0, 25.0])
def test_integrating_a_sine_gives_minus_cosine(method, f):
    # analytic: the integral of A sin(2 pi f t + p) is -A/(2 pi f) cos(2 pi f t + p).
    # f_low = f/4 and a record of 30/f_low s put the time method's high-pass settling (2.9/f_low) and the
    # frequency method's taper inside the outer 10 %.
    f_low = f / 4
    t = np.arange(int(30 / f_low * FS)) / FS
    amplitude, phase = 3.0, 0.3
    acc = Channel(amplitude * np.sin(2 * np.pi * f * t + phase), FS, unit="m/s^2")
    vel = integrate(acc, method=method, **corner_kwargs(method, f_low))
    expected = -amplitude / (2 * np.pi * f) * np.cos(2 * np.pi * f * t + phase)
    window = middle(t)
    error = np.max(np.abs(vel.data[window] - expected[window])) / (amplitude / (2 * np.pi * f))
    assert error < 0.005
    assert vel.unit == "m/s" and vel.quantity == "velocity"


@pytest.mark.parametrize("method", METHODS)
def test_double_integration_of_1g_at_10hz(method):
    amplitude_mm = G / (2 * np.pi * 10) ** 2 * 1e3  # analytic: 2.484 mm
    assert amplitude_mm == pytest.approx(2.484, abs=5e-4)
    t = np.arange(20_000) / FS  # 20 s, 200 whole cycles
    acc = Channel(np.sin(2 * np.pi * 10 * t), FS, unit="g")
    disp = integrate(acc, method=method, target="displacement", output_unit="mm", **corner_kwargs(method, 2.0))
    assert disp.unit == "mm" and disp.quantity == "displacement"
    expected = -amplitude_mm * np.sin(2 * np.pi * 10 * t)  # analytic double integral, zero mean
    window = middle(t)
    assert np.max(np.abs(disp.data[window])) == pytest.approx(amplitude_mm, rel=0.005)
    # the waveform too; baseline's polynomial fit also takes about 1/(f T) of the tone near the ends
    tolerance = 0.01 if method == "baseline" else 0.005
    assert np.max(np.abs(disp.data[window] - expected[window])) < tolerance * amplitude_mm


@pytest.mark.parametrize("method", METHODS)
def test_velocity_to_displacement_in_micrometres(method):
    t = np.arange(20_000) / FS
    vel = Channel(5.0 * np.cos(2 * np.pi * 20 * t), FS, unit="mm/s")
    disp = integrate(vel, method=method, output_unit="um", **corner_kwargs(method, 4.0))
    expected = 5e3 / (2 * np.pi * 20) * np.sin(2 * np.pi * 20 * t)  # analytic, in um
    window = middle(t)
    assert np.max(np.abs(disp.data[window] - expected[window])) < 0.005 * 5e3 / (2 * np.pi * 20)


def test_trapezoid_gain_error_is_as_stated():
    # analytic: the trapezoid's gain relative to 1/(j omega) is x / tan(x), x = pi f / fs
    f = 50.0
    t = np.arange(40_000) / FS
    vel = integrate(Channel(np.sin(2 * np.pi * f * t), FS), method="time", f_low=5.0)
    x = np.pi * f / FS
    peak = np.max(np.abs(vel.data[middle(t)])) * 2 * np.pi * f
    assert peak == pytest.approx(x / math.tan(x), rel=5e-4)


# ---------------------------------------------------------------- drift from a DC offset
@pytest.fixture(scope="module")
def offset_record():
    t = np.arange(20_000) / FS
    amplitude, f = 1.0, 10.0
    offset = 0.01 * amplitude / math.sqrt(2)  # 1 % of the sine's RMS
    return t, amplitude, f, offset, Channel(amplitude * np.cos(2 * np.pi * f * t) + offset, FS)


def test_unprotected_trapezoid_drifts_as_half_c_t_squared(offset_record):
    t, amplitude, f, offset, acc = offset_record
    disp = cumulative_trapezoid(cumulative_trapezoid(acc.data, t, initial=0), t, initial=0)  # scipy reference
    # analytic: A cos integrates twice (from rest) to A/w^2 (1 - cos w t), bounded by 2 A / w^2; c to c t^2/2
    w = 2 * np.pi * f
    drift = disp - amplitude / w ** 2 * (1 - np.cos(w * t))
    np.testing.assert_allclose(drift[1000:], 0.5 * offset * t[1000:] ** 2, rtol=1e-3)
    assert disp[-1] > 1000 * 2 * amplitude / w ** 2  # the drift swamps the motion


@pytest.mark.parametrize("method", METHODS)
def test_protected_methods_stay_bounded(offset_record, method):
    t, amplitude, f, offset, acc = offset_record
    disp = integrate(acc, method=method, target="displacement", **corner_kwargs(method, 2.0))
    w = 2 * np.pi * f
    # analytic amplitude A / w^2: within 1 % outside the reported edge zones, and bounded by 1.25 times it
    # inside them (the time method's high-pass transient at the ends reaches 16 %)
    inside = np.ones(t.size, bool)
    for a, b in edge_zones(disp):
        inside &= ~((t >= a) & (t <= b))
    assert np.max(np.abs(disp.data[inside])) == pytest.approx(amplitude / w ** 2, rel=0.01)
    assert np.max(np.abs(disp.data)) < 1.25 * amplitude / w ** 2
    slope = np.polyfit(t, disp.data, 1)[0]
    assert abs(slope) * t[-1] < 0.01 * amplitude / w ** 2


# ---------------------------------------------------------------- differentiation
@pytest.mark.parametrize("method, tolerance", [("central", 2e-3), ("frequency", 1e-4)])
def test_differentiating_a_sine(method, tolerance):
    # analytic: d/dt sin(w t + p) = w cos(w t + p); central differences read sin(w dt)/(w dt): 0.16 % at 5 Hz
    # and fs = 1000 Hz; the frequency method is exact outside its faded ends (the reported edge zones)
    t = np.arange(4000) / FS
    w = 2 * np.pi * 5.0
    vel = Channel(np.sin(w * t + 0.4), FS, unit="m/s")
    acc = differentiate(vel, method=method)
    assert acc.unit == "m/s^2" and acc.quantity == "acceleration"
    expected = w * np.cos(w * t + 0.4)
    zones = edge_zones(acc)
    inside = np.ones(t.size, bool)
    for a, b in zones:
        inside &= ~((t >= a) & (t <= b))
    assert np.max(np.abs(acc.data[inside] - expected[inside])) < tolerance * w
    if method == "central":  # amplitude by least squares on cos/sin (numpy reference) vs sin(x)/x
        basis = np.column_stack((np.cos(w * t + 0.4), np.sin(w * t + 0.4)))[5:-5]
        coef = np.linalg.lstsq(basis, acc.data[5:-5], rcond=None)[0]
        assert np.hypot(*coef) / w == pytest.approx(math.sin(w / FS) / (w / FS), rel=1e-6)


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("diff_method", ["central", "frequency"])
def test_differentiation_inverts_integration_in_band(method, diff_method):
    fs = 2000.0
    band = (5.0, 50.0)
    rng = np.random.default_rng(4)
    acc_data = signal.sosfiltfilt(signal.butter(4, [2.0, 60.0], "bandpass", fs=fs, output="sos"),
                                  rng.standard_normal(80_000))
    acc = Channel(acc_data, fs)
    back = differentiate(integrate(acc, method=method, **corner_kwargs(method, 1.0)), method=diff_method)

    def in_band(x):  # scipy reference band-pass, zero phase
        return signal.sosfiltfilt(signal.butter(6, band, "bandpass", fs=fs, output="sos"), x)

    window = middle(acc_data, 0.6)
    ref = in_band(acc_data)[window]
    error = np.sqrt(np.mean((in_band(back.data)[window] - ref) ** 2)) / np.sqrt(np.mean(ref ** 2))
    # analytic worst case at 50 Hz: trapezoid x/tan x (x = pi 50/2000) reads 0.2 % low, central differences
    # sin(2x)/(2x) 0.4 % low; their RMS over the band is smaller. Frequency-domain steps are exact.
    assert error < 0.006


def test_differentiate_low_pass_options():
    t = np.arange(8000) / FS
    vel = Channel(np.sin(2 * np.pi * 5 * t) + 0.01 * np.sin(2 * np.pi * 300 * t), FS, unit="m/s")
    for method in ("central", "frequency"):
        acc = differentiate(vel, method=method, f_high=100.0)
        window = slice(1000, 7000)
        expected = 2 * np.pi * 5 * np.cos(2 * np.pi * 5 * t)  # analytic; the 300 Hz tone is removed
        assert np.max(np.abs(acc.data[window] - expected[window])) < 0.01 * 2 * np.pi * 5


# ---------------------------------------------------------------- steps, history, units, errors
def test_integrate_is_a_replayable_step():
    t = np.arange(10_000) / FS
    acc = Channel(np.sin(2 * np.pi * 10 * t), FS, unit="g", name="hub_z")
    out = Chain([Detrend(), Integrate(method="time", preset="machinery", output_unit="mm/s")]).apply(acc)
    entry = out.history[-1]
    assert entry["op"] == "integrate"
    assert entry["info"]["f_low_hz"] == INTEGRATION_PRESETS["machinery"]["f_low"]
    assert entry["info"]["f_low_source"] == "preset 'machinery'"
    assert entry["info"]["input_unit"] == "g" and entry["info"]["output_unit"] == "mm/s"
    assert edge_zones(out)  # the high-pass transients are reported
    replayed = Chain.from_list(out.history).apply(acc)
    np.testing.assert_array_equal(replayed.data, out.data)
    assert step_from_dict(entry) == Integrate(method="time", preset="machinery", output_unit="mm/s")
    json.dumps(entry)


def test_default_corner_is_reported():
    acc = Channel(np.random.default_rng(0).standard_normal(20_000), FS)
    info = integrate(acc).history[-1]["info"]
    assert (info["f_low_hz"], info["f_low_source"], info["method"]) == (1.0, "default", "frequency")
    assert info["low_cut_taper_hz"] == [0.5, 1.0]


def test_float32_input_and_causal_time_method():
    t = np.arange(20_000) / FS
    acc = Channel(np.sin(2 * np.pi * 20 * t).astype(np.float32), FS)
    vel = integrate(acc, method="time", f_low=2.0, zero_phase=False)
    assert vel.data.dtype == np.float64
    assert "causal" in vel.history[-1]["info"]["phase"]
    # analytic amplitude 1/(2 pi 20); the causal high-pass shifts phase but keeps the amplitude within 0.5 %
    assert np.max(np.abs(vel.data[10_000:])) == pytest.approx(1 / (2 * np.pi * 20), rel=0.005)


@pytest.mark.parametrize("channel_kwargs, step_kwargs, match", [
    ({"unit": "m"}, {}, "needs acceleration or velocity"),
    ({"unit": "m/s"}, {"target": "velocity"}, "target must be 'displacement'"),
    ({}, {"f_low": 600.0}, "Nyquist"),
    ({}, {"f_low": 0.01}, "1 / record length"),
    ({}, {"output_unit": "mm"}, "the result is velocity"),
])
def test_integration_errors_name_the_setting(channel_kwargs, step_kwargs, match):
    ch = Channel(np.random.default_rng(0).standard_normal(2000), FS, **channel_kwargs)
    with pytest.raises(SigtuneError, match=match):
        integrate(ch, **step_kwargs)


def test_setting_errors():
    with pytest.raises(SigtuneError, match="f_low.*baseline"):
        Integrate(method="baseline", f_low=1.0)
    with pytest.raises(SigtuneError, match="method"):
        Integrate(method="simpson")
    with pytest.raises(SigtuneError, match="preset"):
        Integrate(preset="bridges")
    x = np.ones(100)
    x[50] = np.nan
    with pytest.raises(SigtuneError, match="split_valid_segments"):
        integrate(Channel(x, FS))
    with pytest.raises(SigtuneError, match="differentiation needs displacement or velocity"):
        differentiate(Channel(np.ones(100), FS))
    with pytest.raises(SigtuneError, match="f_high"):
        Differentiate(f_high=600.0).apply(Channel(np.ones(100), FS, unit="m/s"))


def test_presets_state_their_basis():
    for name, preset in INTEGRATION_PRESETS.items():
        assert preset["f_low"] * 3 <= preset["band"][0] * 1.0001, name  # the factor-3 rule of dsp.advice
        assert preset["basis"]


# ---------------------------------------------------------------- comparison
def test_compare_integration_table():
    t = np.arange(40_000) / FS
    acc = Channel(np.sin(2 * np.pi * 12 * t) + 0.3 * np.sin(2 * np.pi * 40 * t), FS, unit="g")
    result = compare_integration(acc, target="velocity", f_low=2.0, band=(6.0, 100.0))
    table = result.to_table()
    assert table["method"] == list(METHODS)
    for row in result.rows:
        y = np.asarray(result.channels[row["method"]].data)
        assert row["rms"] == pytest.approx(np.sqrt(np.mean(y ** 2)), rel=1e-12)  # numpy reference
        assert row["peak_to_peak"] == pytest.approx(np.ptp(y), rel=1e-12)
        assert row["final_value"] == y[-1]
        assert row["residual_trend"] == pytest.approx(np.polyfit(t, y, 1)[0], rel=1e-9, abs=1e-12)
        # analytic in-band velocity RMS: (9.80665 / sqrt 2) (1/(2 pi 12)^2 + 0.09/(2 pi 40)^2)^0.5
        assert row["max_rms_diff_in_band"] < 0.005 * row["rms"]
        assert 0 <= row["energy_below_f_low"] < 1e-3
    assert result.unit == "m/s" and result.band == (6.0, 100.0)
    json.dumps(result.to_dict())


def test_comparison_shows_baseline_keeps_slow_sway():
    t = np.arange(60_000) / FS
    sway = 0.5 * np.sin(2 * np.pi * 0.3 * t)  # content below f_low = 2 Hz
    acc = Channel(np.sin(2 * np.pi * 15 * t) + sway, FS)
    rows = {r["method"]: r for r in compare_integration(acc, f_low=2.0).rows}
    # analytic: the sway's velocity amplitude 0.5/(2 pi 0.3) dwarfs the 15 Hz tone's 1/(2 pi 15)
    assert rows["baseline"]["energy_below_f_low"] > 0.9
    assert rows["frequency"]["energy_below_f_low"] < 0.01 and rows["time"]["energy_below_f_low"] < 0.01


def test_compare_errors():
    acc = Channel(np.random.default_rng(0).standard_normal(5000), FS)
    with pytest.raises(SigtuneError, match="methods"):
        compare_integration(acc, methods=("time", "time"))
    with pytest.raises(SigtuneError, match="band"):
        compare_integration(acc, f_low=2.0, band=(100.0, 50.0))


def test_integration_warning_free_for_default_corner():
    acc = Channel(np.random.default_rng(1).standard_normal(10_000), FS)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        integrate(acc, method="time")


@pytest.mark.parametrize("order", [0, 1, 2, 5, 10])
def test_remove_polynomial_matches_numpy(order):
    from dsp.motion import remove_polynomial
    y = np.random.default_rng(order).standard_normal(5000) + np.linspace(0, 3, 5000) ** 2
    t = np.linspace(-1, 1, y.size)
    expected = y - np.polynomial.polynomial.polyval(t, np.polynomial.polynomial.polyfit(t, y, order))  # numpy
    np.testing.assert_allclose(remove_polynomial(y, order, chunk=777), expected, atol=1e-9)


def test_trend_slope_matches_numpy_polyfit():
    # regression: polyfit took 1.2 s per method at 10^7 samples; the closed form must agree with it
    from dsp.motion import _trend_slope

    y = np.random.default_rng(3).standard_normal(5001) + 0.25 * np.arange(5001) / 500.0
    expected = np.polyfit(np.arange(5001) / 500.0, y, 1)[0]  # numpy reference
    assert _trend_slope(y, 500.0) == pytest.approx(expected, rel=1e-10)
