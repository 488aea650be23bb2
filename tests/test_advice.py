"""Advisories appear when their condition holds, and not otherwise."""

import json

import numpy as np
import pytest
from scipy import signal

from dsp import Channel, Detrend, Filter, Integrate, SigtuneError, advise, linear_spectrum, psd

FS = 1000.0
T = np.arange(20_000) / FS


def codes(advisories):
    return [a.code for a in advisories]


def tone(f=20.0, amplitude=1.0):
    return amplitude * np.sin(2 * np.pi * f * T)


# ---------------------------------------------------------------- integrating with an offset or trend
def test_offset_before_integration():
    ch = Channel(tone() + 0.05, FS)  # 7.1 % of the AC RMS 0.707; the limit is 6 / sqrt(20000) = 4.2 %
    found = advise(ch, chain=[Integrate()])
    assert codes(found) == ["integrate_with_offset"]
    assert "7.1%" in found[0].seen
    assert advise(ch, chain=[Detrend(), Integrate()]) == []  # removed first
    assert advise(ch, chain=[Filter(band="highpass", cutoff=1.0, zero_phase=True), Integrate()]) == []
    assert advise(ch) == []  # not integrating


def test_trend_before_integration():
    ch = Channel(tone() + 0.2 * (T / T[-1] - 0.5), FS)  # changes by 28 % of the AC RMS; limit 14.7 %
    found = advise(ch, integrating=True)
    assert codes(found) == ["integrate_with_offset"] and "linear trend" in found[0].seen
    small = Channel(tone() + 0.05 * (T / T[-1] - 0.5), FS)  # 7 %: below the white-noise limit
    assert advise(small, integrating=True) == []


@pytest.mark.parametrize("seed", range(4))
def test_zero_mean_noise_does_not_trigger_the_offset_rule(seed):
    ch = Channel(np.random.default_rng(seed).standard_normal(10_000), FS)
    assert advise(ch, integrating=True) == []


def test_clean_tone_does_not_trigger_the_offset_rule():
    assert advise(Channel(tone(), FS), integrating=True) == []


# ---------------------------------------------------------------- high-pass near the band
@pytest.mark.parametrize("corner, expected", [(5.0, True), (3.3, False), (2.0, False)])
def test_highpass_filter_near_band(corner, expected):
    ch = Channel(tone(), FS)
    found = advise(ch, chain=[Filter(band="highpass", order=2, cutoff=corner)], band=(10.0, 200.0))
    assert (codes(found) == ["highpass_near_band"]) == expected
    if expected:  # scipy reference: the order-2 Butterworth's attenuation at 10 Hz, one pass
        sos = signal.butter(2, corner, "highpass", fs=FS, output="sos")
        _, h = signal.sosfreqz(sos, worN=[10.0], fs=FS)
        assert f"{-20 * np.log10(abs(h[0])):.2f} dB" in found[0].seen


@pytest.mark.parametrize("method, f_low, expected", [("time", 4.0, True), ("time", 3.0, False),
                                                     ("frequency", 8.0, False), ("frequency", 12.0, True)])
def test_integration_corner_near_band(method, f_low, expected):
    found = advise(Channel(tone(), FS), chain=[Integrate(method=method, f_low=f_low)], band=(10.0, 200.0))
    assert ("highpass_near_band" in codes(found)) == expected


def test_planned_corner_and_no_band():
    assert codes(advise(f_low=5.0, band=(10.0, 100.0))) == ["highpass_near_band"]
    assert advise(chain=[Filter(band="highpass", cutoff=9.0)]) == []  # no band of interest: no rule


# ---------------------------------------------------------------- tone read from a PSD
def test_tone_in_psd():
    x = tone(50.0) + 0.05 * np.random.default_rng(0).standard_normal(T.size)
    spectrum = psd(Channel(x, FS))
    found = advise(spectrum=spectrum)
    assert codes(found) == ["tone_from_psd"] and "50" in found[0].seen
    f, pxx = signal.welch(x, FS, nperseg=1024)  # scipy reference PSD, as a plain dict
    assert codes(advise(spectrum={"frequencies": f, "values": pxx, "scaling": "psd"})) == ["tone_from_psd"]


def test_no_tone_advice_for_noise_or_linear_spectrum():
    noise = Channel(np.random.default_rng(1).standard_normal(T.size), FS)
    assert advise(spectrum=psd(noise)) == []
    assert advise(spectrum=linear_spectrum(Channel(tone(50.0), FS))) == []


# ---------------------------------------------------------------- phase after a causal filter
def test_phase_after_causal_filter():
    causal = [Filter(band="lowpass", cutoff=100.0)]
    assert codes(advise(chain=causal, reads=["phase"])) == ["phase_after_causal_filter"]
    assert advise(chain=[Filter(band="lowpass", cutoff=100.0, zero_phase=True)], reads=["phase"]) == []
    assert advise(chain=causal, reads=["rms"]) == []
    assert codes(advise(chain=[Integrate(method="time", zero_phase=False)], reads="phase")) == [
        "phase_after_causal_filter"]


# ---------------------------------------------------------------- crest factor above 9
@pytest.fixture(scope="module")
def shocks():
    x = 0.1 * np.random.default_rng(2).standard_normal(T.size)
    x[::5000] += 5.0  # four shocks: crest factor about 20
    return Channel(x, FS)


def test_crest_factor_rms_only(shocks):
    found = advise(shocks, reads=["rms"])
    assert codes(found) == ["crest_factor_rms_only"]
    assert "ISO 2631-1:1997 clause 6.2.1" in found[0].reference
    assert codes(advise(shocks)) == ["crest_factor_rms_only"]  # RMS alone assumed


def test_crest_factor_with_vdv_or_low_crest(shocks):
    assert advise(shocks, reads=["rms", "vdv"]) == []
    assert advise(Channel(np.random.default_rng(3).standard_normal(T.size), FS), reads=["rms"]) == []
    # analytic: a sine's crest factor is sqrt(2)
    assert advise(Channel(tone(), FS), reads=["rms"]) == []


# ---------------------------------------------------------------- unit plausibility
@pytest.mark.parametrize("unit, level, hint", [("g", 500.0, "outside the plausible range"),
                                               ("m/s^2", 1e-7, "outside the plausible range"),
                                               ("mm/s", 5e4, "outside the plausible range")])
def test_implausible_levels(unit, level, hint):
    found = advise(Channel(level * np.sqrt(2) * np.sin(2 * np.pi * 20 * T), FS, unit=unit))
    assert codes(found) == ["unit_level"] and hint in found[0].seen


@pytest.mark.parametrize("unit, mean, names", [("g", 9.80665, "m/s^2"), ("m/s^2", 1.0, "g"), ("g", 1000.0, "mg")])
def test_gravity_in_the_wrong_unit(unit, mean, names):
    # ISO 80000-3: g_n = 9.80665 m/s^2, so 1 g reads 9.80665 in m/s^2 and 1000 in mg
    found = advise(Channel(mean + 0.01 * mean * np.sin(2 * np.pi * 20 * T), FS, unit=unit))
    assert codes(found) == ["unit_level"] and f"unit were {names}" in found[0].seen
    assert found[0].action.endswith(f"declare {names}")  # the closest to 1 g first


@pytest.mark.parametrize("unit, mean", [("g", 1.0), ("m/s^2", 9.81), ("mg", 1000.0), ("g", 0.0)])
def test_plausible_levels_are_silent(unit, mean):
    assert advise(Channel(mean + 0.2 * tone(), FS, unit=unit)) == []


# ---------------------------------------------------------------- data
def test_advisory_to_dict_and_bad_context():
    data = advise(Channel(tone() + 0.1, FS), integrating=True)[0].to_dict()
    assert set(data) == {"code", "severity", "seen", "action", "reference"} and data["severity"] == "warning"
    json.dumps(data)
    with pytest.raises(SigtuneError, match="unknown context 'bandwidth'"):
        advise(bandwidth=(1, 2))
    with pytest.raises(SigtuneError, match="band"):
        advise(band=(10.0, 5.0))
