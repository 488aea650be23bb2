"""Frequency weightings: the analogue formula against the standards' tables, the digital
filter against the analogue formula, and the Weighting step."""

import math

import numpy as np
import pytest
from scipy import signal

import dsp
from dsp import Channel, SigtuneError, Weighting, step_from_dict
from dsp.weighting import WEIGHTINGS, analog_weighting, analog_weighting_zpk, minimum_rate, weighting_error

# ISO 2631-1:1997 Table 3 (Wk, Wd), factor at the *nominal* one-third-octave frequency. Values from
# memory; they agree with the Annex A formula (parameters in the issue) to the three figures printed.
WK_TABLE = {0.5: 0.418, 1.0: 0.482, 2.0: 0.531, 4.0: 0.967, 8.0: 1.036, 16.0: 0.768, 31.5: 0.405,
            63.0: 0.186, 80.0: 0.132, 100.0: 0.0887}
WD_TABLE = {0.5: 0.853, 1.0: 1.011, 2.0: 0.890, 4.0: 0.512, 8.0: 0.253, 16.0: 0.125, 31.5: 0.0632,
            80.0: 0.0211}
# ISO 5349-1:2001 Annex A Table A.2 (Wh): values from memory; they agree with the formula at the
# *exact* band frequencies 10^(n/10) (key: nominal frequency, the band number n = round(10 lg f)).
WH_TABLE = {8.0: 0.873, 16.0: 0.896, 31.5: 0.519, 63.0: 0.256, 125.0: 0.127, 250.0: 0.0634,
            500.0: 0.0314, 1000.0: 0.0135}
TABLE_REL_TOL = 0.004  # half a unit in the third figure (0.5/100 at worst) less a little margin


def exact_band(nominal):
    """Exact one-third-octave frequency 10^(n/10) for a nominal one (IEC 61260 base-10 series)."""
    return 10.0 ** (round(10.0 * math.log10(nominal)) / 10.0)


@pytest.mark.parametrize("f, value", WK_TABLE.items())
def test_wk_formula_matches_iso2631_table3(f, value):
    assert abs(analog_weighting("Wk", f)) == pytest.approx(value, rel=TABLE_REL_TOL)  # ISO 2631-1 Table 3


@pytest.mark.parametrize("f, value", WD_TABLE.items())
def test_wd_formula_matches_iso2631_table3(f, value):
    assert abs(analog_weighting("Wd", f)) == pytest.approx(value, rel=TABLE_REL_TOL)  # ISO 2631-1 Table 3


@pytest.mark.parametrize("f, value", WH_TABLE.items())
def test_wh_formula_matches_iso5349_table(f, value):
    assert abs(analog_weighting("Wh", exact_band(f))) == pytest.approx(value, rel=TABLE_REL_TOL)  # ISO 5349-1 A.2


def test_wk_one_hz_in_decibels():
    # ISO 2631-1:1997 Table 3: Wk at 1 Hz is -6.33 dB
    assert 20 * math.log10(abs(analog_weighting("Wk", 1.0))) == pytest.approx(-6.33, abs=0.01)


@pytest.mark.parametrize("name", sorted(WEIGHTINGS))
def test_upward_step_tends_to_unity_and_band_limits_act(name):
    spec = WEIGHTINGS[name]
    # analytic: far above every corner |Hh| -> 1, |Hs| -> 1 (the normalisation), |Hl| -> (f2/f)^2,
    # |Ht| -> f4^2 / (f f3) (or (f4/f)^2 where f3 is infinite)
    f = 1e4 * spec.f2
    ht = 1.0
    if math.isfinite(spec.f4):
        ht = (spec.f4 ** 2 / (f * spec.f3)) if math.isfinite(spec.f3) else (spec.f4 / f) ** 2
    asymptote = spec.k * (spec.f2 / f) ** 2 * ht
    assert abs(analog_weighting(name, f)) == pytest.approx(asymptote, rel=1e-3)  # analytic asymptote


@pytest.mark.parametrize("name", sorted(WEIGHTINGS))
def test_zpk_agrees_with_formula(name):
    z, p, k = analog_weighting_zpk(name)
    f = np.geomspace(0.01, 2000.0, 50)
    _, h = signal.freqs_zpk(z, p, k, worN=2 * np.pi * f)  # scipy.signal reference
    np.testing.assert_allclose(h, analog_weighting(name, f), rtol=1e-9)


RATIOS = (2.0, 2.5, 3.0, 5.0, 10.0, 20.0)  # sample rate / f2
DIGITAL_TOL_DB = 0.1
# Our bound against the analogue formula. ISO 8041 allows (from memory) +-0.5 dB within the
# weighting's band (wider at its edges), so 0.1 dB leaves most of the tolerance to the transducer.


@pytest.mark.parametrize("ratio", RATIOS)
@pytest.mark.parametrize("name", sorted(WEIGHTINGS))
def test_digital_within_tolerance_at_exact_band_frequencies(name, ratio):
    spec = WEIGHTINGS[name]
    lo, hi = spec.band
    n = np.arange(round(10 * math.log10(lo)), round(10 * math.log10(hi)) + 1)
    freqs = 10.0 ** (n / 10.0)  # exact one-third-octave frequencies across the band
    err = weighting_error(name, ratio * spec.f2, freqs)  # reference: the standard's analogue formula
    assert np.max(np.abs(err)) < DIGITAL_TOL_DB


@pytest.mark.parametrize("name, fs", [("Wk", 256.0), ("Wk", 1024.0), ("Wd", 512.0), ("Wk", 51200.0),
                                      ("Wh", 5000.0), ("Wh", 25600.0), ("Wf", 100.0), ("Wm", 2048.0)])
def test_common_recording_rates(name, fs):
    lo, hi = WEIGHTINGS[name].band
    freqs = np.geomspace(lo, hi, 60)
    assert np.max(np.abs(weighting_error(name, fs, freqs))) < DIGITAL_TOL_DB  # analogue formula


@pytest.mark.parametrize("ratio", (2.0, 20.0, 1000.0))
@pytest.mark.parametrize("name", sorted(WEIGHTINGS))
def test_designs_are_stable(name, ratio):
    sos = dsp.weighting_filter(name, ratio * WEIGHTINGS[name].f2).sos
    poles = np.concatenate([np.roots(row[3:]) for row in sos])
    assert np.max(np.abs(poles)) < 1.0


@pytest.mark.parametrize("name", sorted(WEIGHTINGS))
def test_phase_follows_analogue_at_mid_band(name):
    spec = WEIGHTINGS[name]
    wf = dsp.weighting_filter(name, 10 * spec.f2)
    f = math.sqrt(spec.band[0] * spec.band[1])
    lag = np.degrees(np.angle(wf.response(f) / analog_weighting(name, f)))
    assert abs(lag) < 6.0  # analogue formula's phase; the delay compensation leaves a fraction of a sample


def test_rate_too_low_names_the_minimum():
    assert minimum_rate("Wk") == 200.0  # 2 x f2 = 2 x 100 Hz
    with pytest.raises(SigtuneError, match=r"at least 200 Hz.*got fs = 150 Hz.*usable at 150 Hz: Wf"):
        dsp.weighting_filter("Wk", 150.0)
    ch = Channel(np.zeros(2000), 2000.0, name="handle_x")
    with pytest.raises(SigtuneError, match=r"handle_x.*at least 2517.8 Hz"):
        Weighting("Wh").apply(ch)


def test_unknown_weighting():
    with pytest.raises(SigtuneError, match="must be one of 'Wk'"):
        Weighting("Wz")


def test_step_filters_a_tone_by_the_weighting_factor():
    fs, f = 400.0, 8.0
    t = np.arange(0, 30, 1 / fs)
    ch = Channel(np.sin(2 * np.pi * f * t), fs, name="seat_z", unit="g")
    out = Weighting("Wk").apply(ch)
    tail = out.data[int(10 * fs):]
    amplitude = math.sqrt(2) * np.sqrt(np.mean(tail ** 2))
    assert amplitude == pytest.approx(abs(analog_weighting("Wk", f)), rel=2e-3)  # ISO 2631-1 Table 3: 1.036
    assert out.unit == "g" and out.quantity == "acceleration"
    entry = out.history[-1]
    assert entry["op"] == "weighting" and entry["name"] == "Wk"
    assert entry["info"]["edge_zones_s"][0][1] == pytest.approx(entry["info"]["settling_time_s"])
    assert step_from_dict(entry) == Weighting("Wk")


def test_step_starts_settled_on_an_offset():
    ch = Channel(np.full(4000, 3.0), 400.0)
    out = Weighting("Wd").apply(ch)
    assert np.max(np.abs(out.data)) < 1e-9  # analytic: a high-pass passes nothing of a constant


def test_step_keeps_float32():
    ch = Channel(np.ones(1000, dtype=np.float32), 500.0)
    assert Weighting("Wk").apply(ch).data.dtype == np.float32


def test_step_rejects_velocity():
    ch = Channel(np.zeros(1000), 500.0, unit="mm/s")
    with pytest.raises(SigtuneError, match="applies to acceleration.*velocity"):
        Weighting("Wk").apply(ch)


def test_report_states_the_achieved_error():
    report = dsp.weighting_filter("Wd", 200.0).report
    assert report["max_band_error_db"] < DIGITAL_TOL_DB
    assert report["delay_samples"] in (0, 1, 2)
    assert report["parameters"]["f3"] == 2.0 and report["parameters"]["f5"] is None  # Wd has no upward step
    assert report["settling_time_s"] == pytest.approx(math.log(1000) / (2 * math.pi * 0.4 / math.sqrt(2)),
                                                      rel=0.01)  # analytic: slowest pole, Butterworth at f1
