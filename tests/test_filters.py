"""Filters: designs, responses, zero-phase filtering, reports and validation.

Each check names the outside reference it is held against.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
from scipy import signal

from dsp import (Channel, Chain, Crop, Filter, SigtuneError, SigtuneWarning, edge_zones, step_from_dict)

FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel")
BANDS = ("lowpass", "highpass", "bandpass", "bandstop")
FS = 1000.0
CUTOFFS = {"lowpass": 100.0, "highpass": 100.0, "bandpass": (50.0, 200.0), "bandstop": (50.0, 200.0)}
HALF_POWER_DB = 10 * np.log10(0.5)  # -3.0103 dB, analytic


def scipy_sos(family, band, order, cutoff, fs, ripple_db=1.0, attenuation_db=60.0):
    """The reference design straight from scipy.signal."""
    if family == "butterworth":
        return signal.butter(order, cutoff, band, fs=fs, output="sos")
    if family == "chebyshev1":
        return signal.cheby1(order, ripple_db, cutoff, band, fs=fs, output="sos")
    if family == "chebyshev2":
        return signal.cheby2(order, attenuation_db, cutoff, band, fs=fs, output="sos")
    if family == "elliptic":
        return signal.ellip(order, ripple_db, attenuation_db, cutoff, band, fs=fs, output="sos")
    return signal.bessel(order, cutoff, band, fs=fs, output="sos", norm="mag")


def gain_db(sos, freqs, fs):
    _, h = signal.sosfreqz(sos, worN=np.atleast_1d(freqs), fs=fs)
    return 20 * np.log10(np.abs(h))


# ---------------------------------------------------------------- designs
@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("band", BANDS)
@pytest.mark.parametrize("order", [1, 2, 5, 8])
def test_sections_equal_scipy_design(family, band, order):
    # scipy.signal reference: butter/cheby1/cheby2/ellip/bessel(..., output="sos")
    ours = Filter(family, band, order, CUTOFFS[band]).sos(FS)
    np.testing.assert_allclose(ours, scipy_sos(family, band, order, CUTOFFS[band], FS), rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("order", [1, 2, 3, 4, 6, 8, 12, 16])
@pytest.mark.parametrize("band", ["lowpass", "highpass"])
def test_butterworth_matches_analytic_magnitude(order, band):
    # analytic: bilinear Butterworth |H|^2 = 1 / (1 + (tan(pi f/fs) / tan(pi fc/fs))^(+-2n))
    fc, fs = 120.0, 2000.0
    f = np.linspace(5.0, 990.0, 200)
    ratio = np.tan(np.pi * f / fs) / np.tan(np.pi * fc / fs)
    ratio = ratio if band == "lowpass" else 1 / ratio
    expected = -10 * np.log10(1 + ratio ** (2 * order))
    ours = Filter("butterworth", band, order, fc).magnitude_db(fs, f)
    np.testing.assert_allclose(ours, expected, atol=1e-6)


@pytest.mark.parametrize("order", [1, 2, 4, 8, 16])
@pytest.mark.parametrize("band", BANDS)
@pytest.mark.parametrize("zero_phase", [False, True])
def test_butterworth_cutoff_gain(order, band, zero_phase):
    # analytic: Butterworth is half power (-3.01 dB) at its cutoff; forward-backward squares it (-6.02 dB)
    flt = Filter("butterworth", band, order, CUTOFFS[band], zero_phase=zero_phase)
    expected = 2 * HALF_POWER_DB if zero_phase else HALF_POWER_DB
    cutoffs = np.atleast_1d(CUTOFFS[band])
    np.testing.assert_allclose(flt.design(FS).report["gain_at_cutoff_db"], expected, atol=1e-4)
    np.testing.assert_allclose(flt.magnitude_db(FS, cutoffs, effective=True), expected, atol=1e-4)


@pytest.mark.parametrize("order", [1, 2, 4, 6])
def test_butterworth_rolloff_20n_db_per_decade(order):
    # analytic: far above the cutoff a Butterworth low-pass falls 20*n dB per decade
    fs = 1e6  # far below Nyquist the bilinear warping is negligible
    g = Filter("butterworth", "lowpass", order, 10.0).magnitude_db(fs, [1000.0, 10000.0])
    assert g[0] - g[1] == pytest.approx(20 * order, abs=0.05)


@pytest.mark.parametrize("order", [2, 3, 4, 7])
@pytest.mark.parametrize("ripple_db", [0.1, 0.5, 1.0, 3.0])
def test_chebyshev1_passband_ripple(order, ripple_db):
    # analytic (Chebyshev I equiripple): passband gain stays in [-ripple, 0] dB and reaches both ends
    g = Filter("chebyshev1", "lowpass", order, 100.0, ripple_db=ripple_db).magnitude_db(FS, np.linspace(0, 100, 4001))
    assert g.max() <= 1e-9 and g.max() > -1e-3
    assert g.min() >= -ripple_db - 1e-9 and g.min() < -ripple_db + 1e-6


@pytest.mark.parametrize("band", ["lowpass", "highpass"])
@pytest.mark.parametrize("attenuation_db", [30.0, 60.0, 80.0])
@pytest.mark.parametrize("order", [3, 6])
def test_chebyshev2_stopband_attenuation(band, attenuation_db, order):
    # analytic (Chebyshev II): the stopband, beyond the stated edge, is attenuated by >= attenuation_db
    fc = 100.0
    f = np.linspace(fc, 499.0, 4000) if band == "lowpass" else np.linspace(0.5, fc, 4000)
    g = Filter("chebyshev2", band, order, fc, attenuation_db=attenuation_db).magnitude_db(FS, f)
    assert g.max() <= -attenuation_db + 1e-6
    assert g[0 if band == "lowpass" else -1] == pytest.approx(-attenuation_db, abs=1e-6)


@pytest.mark.parametrize("order", [3, 5, 8])
@pytest.mark.parametrize("attenuation_db", [40.0, 70.0])
def test_elliptic_passband_and_stopband(order, attenuation_db):
    # analytic (elliptic): ripple <= ripple_db up to the cutoff; beyond the stopband edge (scipy.signal.ellipord's
    # minimal-order relation gives that edge for this order), attenuation >= attenuation_db
    flt = Filter("elliptic", "lowpass", order, 100.0, ripple_db=0.5, attenuation_db=attenuation_db)
    passband = flt.magnitude_db(FS, np.linspace(0, 100, 2001))
    assert passband.min() >= -0.5 - 1e-9
    f = np.linspace(100.0, 499.0, 8000)
    g = flt.magnitude_db(FS, f)
    edge = f[np.argmax(g <= -attenuation_db)]
    n_needed, _ = signal.ellipord(100.0, edge * 1.001, 0.5, attenuation_db, fs=FS)
    assert n_needed <= order
    assert g[f >= edge].max() <= -attenuation_db + 1e-6


# ---------------------------------------------------------------- zero phase and cutoff modes
@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("band", BANDS)
@pytest.mark.parametrize("zero_phase", [False, True])
def test_effective_mode_is_half_power_at_stated_cutoff(family, band, zero_phase):
    # analytic: the effective response (|H|^2 for forward-backward) is -3.01 dB at the stated cutoff
    flt = Filter(family, band, 4, CUTOFFS[band], zero_phase=zero_phase, ripple_db=0.5, cutoff_mode="effective")
    cutoffs = np.atleast_1d(CUTOFFS[band])
    np.testing.assert_allclose(flt.magnitude_db(FS, cutoffs, effective=True), HALF_POWER_DB, atol=1e-6)
    report = flt.design(FS).report
    np.testing.assert_allclose(report["gain_at_cutoff_db"], HALF_POWER_DB, atol=1e-6)
    # the design cutoff really used is reported, and is what scipy designs from (scipy.signal reference)
    np.testing.assert_allclose(flt.sos(FS), scipy_sos(family, band, 4, report["design_cutoff_hz"] if
                               len(cutoffs) == 2 else report["design_cutoff_hz"][0], FS, ripple_db=0.5),
                               rtol=1e-12, atol=1e-15)


def test_zero_phase_design_mode_is_minus_6_db():
    # analytic: forward-backward squares |H|, so a Butterworth is 2 * -3.0103 = -6.0206 dB at its design cutoff
    flt = Filter(cutoff=100.0, zero_phase=True)
    assert flt.magnitude_db(FS, [100.0], effective=True)[0] == pytest.approx(-6.0206, abs=1e-4)
    assert flt.design(FS).report["design_cutoff_hz"] == (100.0,)


@pytest.mark.parametrize("family", FAMILIES)
@pytest.mark.parametrize("band", BANDS)
def test_report_agrees_with_sosfreqz_and_poles(family, band):
    # scipy.signal reference: sosfreqz for the gains, sos2zpk for the pole radius, sosfilt_zi for the DC gain
    flt = Filter(family, band, 5, CUTOFFS[band], zero_phase=True)
    design = flt.design(FS)
    report = design.report
    sos = scipy_sos(family, band, 5, CUTOFFS[band], FS)
    np.testing.assert_allclose(report["gain_at_cutoff_db"], 2 * gain_db(sos, CUTOFFS[band], FS), atol=1e-9)
    _, poles, _ = signal.sos2zpk(sos)
    assert report["max_pole_radius"] == pytest.approx(np.abs(poles).max(), abs=1e-9)
    assert report["stable"] is True
    assert report["filter_order"] == (10 if band in ("bandpass", "bandstop") else 5)
    assert report["effective_order"] == 2 * report["filter_order"]
    assert report["sections"] == sos.shape[0]
    json.dumps(design.to_dict())


@pytest.mark.parametrize("family", ["butterworth", "chebyshev1", "bessel"])
@pytest.mark.parametrize("band", ["lowpass", "highpass", "bandpass"])
def test_settling_time_is_when_step_response_settles(family, band):
    # scipy.signal reference: the step response from sosfilt stays within 0.1 % of the DC gain after the settling time
    flt = Filter(family, band, 4, CUTOFFS[band])
    report = flt.design(FS).report
    n = report["settling_samples"]
    step = signal.sosfilt(scipy_sos(family, band, 4, CUTOFFS[band], FS), np.ones(20 * n))
    final = np.real(signal.sosfreqz(scipy_sos(family, band, 4, CUTOFFS[band], FS), worN=[0.0], fs=FS)[1][0])
    assert np.abs(step[n:] - final).max() <= 1e-3
    assert np.abs(step[n - 1] - final) > 1e-3
    assert report["settling_time_s"] == pytest.approx(n / FS)


def test_zero_phase_has_no_lag_and_causal_lags_by_group_delay():
    # analytic: forward-backward filtering has zero phase; a causal filter delays a tone by its phase delay
    fs, f0 = 2000.0, 20.0
    t = np.arange(int(4 * fs)) / fs
    x = np.sin(2 * np.pi * f0 * t)
    ch = Channel(x, fs)
    mid = slice(int(fs), int(3 * fs))  # well away from the edge zones
    y_zp = Filter(cutoff=200.0, zero_phase=True).apply(ch).data
    ref = np.exp(-2j * np.pi * f0 * t[mid])
    phase_zp = np.angle(np.sum(y_zp[mid] * ref) / np.sum(x[mid] * ref))
    assert abs(phase_zp) < 1e-4
    lag = np.argmax(signal.correlate(y_zp[mid], x[mid], mode="full")) - (mid.stop - mid.start - 1)
    assert lag == 0
    causal = Filter(cutoff=200.0)
    y_c = causal.apply(ch).data
    phase_c = np.angle(np.sum(y_c[mid] * ref) / np.sum(x[mid] * ref))
    assert phase_c == pytest.approx(causal.phase(fs, [f0])[0], abs=1e-4)  # scipy.signal sosfreqz reference


def test_low_highpass_corner_with_dc_offset_settles_outside_edge_zones():
    # analytic: a 0.5 Hz high-pass passes a 12 Hz tone at |H(12)|^2 and removes a DC offset; outside the
    # reported edge zones the output may differ from that by at most 0.1 % of the offset
    fs, offset = 5120.0, 3.0
    t = np.arange(int(40 * fs)) / fs
    x = offset + np.sin(2 * np.pi * 12.0 * t)
    flt = Filter(band="highpass", order=4, cutoff=0.5, zero_phase=True)
    out = flt.apply(Channel(x, fs, start_time=10.0))
    expected = np.abs(flt.effective_response(fs, [12.0])[0]) * np.sin(2 * np.pi * 12.0 * t)
    zones = edge_zones(out)
    assert len(zones) == 2 and zones[0][0] == 10.0 and zones[1][1] == pytest.approx(50.0)
    tt = out.time()
    inside = np.zeros(tt.size, bool)
    for a, b in zones:
        inside |= (tt >= a) & (tt <= b)
    assert np.abs(out.data - expected)[~inside].max() < 1e-3 * offset
    assert out.history[-1]["info"]["padlen"] == flt.design(fs).settling_samples


def _crop_of_long_record(band, cutoff, start_phase):
    """A 40 s crop of a 200 s record (offset, tone starting at ``start_phase``, band-limited noise), and the
    reference: the long record filtered forward-backward, then cropped, so its own edges are far away."""
    fs = 5120.0
    n, lead = int(40 * fs), int(80 * fs)
    t = np.arange(int(200 * fs)) / fs
    noise = signal.sosfilt(signal.butter(2, [5, 40], "bandpass", fs=fs, output="sos"),
                           np.random.default_rng(7).normal(size=t.size))
    x_long = 3.0 + np.cos(2 * np.pi * 12.0 * (t - lead / fs) + start_phase) + 2.0 * noise
    flt = Filter(band=band, order=4, cutoff=cutoff, zero_phase=True)
    crop = x_long[lead:lead + n]
    sos = np.array(flt.sos(fs))
    reference = signal.sosfiltfilt(sos, x_long - crop.mean(), padlen=x_long.size - 1)[lead:lead + n]
    if band in ("lowpass", "bandstop"):  # DC passes
        reference += crop.mean() * flt.design(fs).report["dc_gain"]
    return flt, Channel(crop, fs), reference, sos


@pytest.mark.parametrize("band, cutoff", [("highpass", 0.5), ("lowpass", 20.0), ("bandpass", (1.0, 50.0)),
                                          ("bandstop", (0.5, 20.0))])
@pytest.mark.parametrize("start_phase", [0.0, np.pi / 2])
def test_edge_transients_stay_inside_reported_zones(band, cutoff, start_phase):
    # reference: the same filter run over a 5x longer record (scipy.signal.sosfiltfilt), then cropped; beyond the
    # reported edge zones our crop may differ by <= 0.1 % of the signal's range (the settling tolerance)
    flt, ch, reference, sos = _crop_of_long_record(band, cutoff, start_phase)
    out = flt.apply(ch)
    n = flt.design(ch.fs).settling_samples
    span = np.ptp(ch.data)
    assert np.abs(out.data - reference)[n:-n].max() < 1e-3 * span
    if band == "highpass":
        # scipy.signal reference: its default pad (3 * (2 * n_sections + 1) samples) leaves 10x more
        default = signal.sosfiltfilt(sos, ch.data)
        assert np.abs(default - reference)[n:-n].max() > 10 * np.abs(out.data - reference)[n:-n].max()


@pytest.mark.parametrize("band", ["lowpass", "bandstop", "highpass", "bandpass"])
@pytest.mark.parametrize("zero_phase", [False, True])
def test_mean_is_restored_at_dc_gain(band, zero_phase):
    # analytic: a constant comes out multiplied by the DC gain (1 for low-pass/band-stop, 0 for high-/band-pass),
    # with no start-up step
    x = np.full(4000, 2.5)
    out = Filter("butterworth", band, 3, CUTOFFS[band], zero_phase=zero_phase).apply(Channel(x, FS)).data
    expected = 2.5 if band in ("lowpass", "bandstop") else 0.0
    np.testing.assert_allclose(out, expected, atol=1e-9)


def test_even_order_chebyshev1_keeps_mean_at_its_dc_gain():
    # analytic: an even-order Chebyshev I has DC gain 10^(-ripple/20)
    out = Filter("chebyshev1", "lowpass", 4, 100.0, ripple_db=2.0).apply(Channel(np.ones(3000), FS)).data
    np.testing.assert_allclose(out, 10 ** (-2.0 / 20), rtol=1e-9)


@pytest.mark.parametrize("band", ["lowpass", "highpass"])
def test_causal_filter_equals_sosfilt_started_in_steady_state(band):
    # scipy.signal reference: sosfilt with zi = sosfilt_zi * x[0], as in scipy's lfilter_zi documentation
    x = np.random.default_rng(1).normal(4.0, 1.0, 5000)
    flt = Filter("elliptic", band, 5, 80.0)
    sos = np.array(flt.sos(FS))
    expected = signal.sosfilt(sos, x, zi=signal.sosfilt_zi(sos) * x[0])[0]
    np.testing.assert_allclose(flt.apply(Channel(x, FS)).data, expected, rtol=1e-9, atol=1e-9)


def test_causal_filter_passes_an_offset_without_a_start_up_step():
    # analytic: a filter started in steady state for a constant input keeps a constant at its DC gain
    x = np.full(3000, 250.0)
    np.testing.assert_allclose(Filter(order=6, cutoff=40.0).apply(Channel(x, FS)).data, 250.0, rtol=1e-9)
    np.testing.assert_allclose(Filter(band="highpass", order=6, cutoff=5.0).apply(Channel(x, FS)).data, 0.0,
                               atol=1e-9 * 250.0)


@pytest.mark.parametrize("band, padtype", [("highpass", "even"), ("bandpass", "even"), ("bandstop", "even"),
                                           ("lowpass", "odd")])
@pytest.mark.parametrize("n", [6000, 300])  # 300: shorter than the settling time, so the pad is capped
def test_zero_phase_equals_sosfiltfilt_with_settling_pad(band, padtype, n):
    # scipy.signal reference: sosfiltfilt on the centred record, padded by the settling length (capped at n - 1),
    # the mean put back at the DC gain where DC passes
    x = np.random.default_rng(2).normal(1.0, 1.0, n)
    flt = Filter("chebyshev2", band, 6, CUTOFFS[band], zero_phase=True)
    sos = np.array(flt.sos(FS))
    pad = min(flt.design(FS).settling_samples, n - 1)
    expected = signal.sosfiltfilt(sos, x - x.mean(), padtype=padtype, padlen=pad)
    if band in ("lowpass", "bandstop"):
        expected += x.mean() * flt.design(FS).report["dc_gain"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SigtuneWarning)  # the short record is warned about (tested elsewhere)
        out = flt.apply(Channel(x, FS))
    np.testing.assert_allclose(out.data, expected, rtol=1e-9, atol=1e-12)
    assert out.history[-1]["info"]["padtype"] == padtype


# ---------------------------------------------------------------- responses
def test_group_delay_matches_transfer_function_reference():
    # scipy.signal reference: group_delay of the (b, a) polynomial, reliable at this low order and moderate cutoff
    flt = Filter("chebyshev1", "lowpass", 3, 150.0)
    f = np.linspace(1.0, 400.0, 50)
    b, a = signal.cheby1(3, 1.0, 150.0, fs=FS)
    _, expected = signal.group_delay((b, a), w=f, fs=FS)
    np.testing.assert_allclose(flt.group_delay(FS, f), expected, rtol=1e-6)
    np.testing.assert_allclose(flt.group_delay_s(FS, f), expected / FS, rtol=1e-6)
    assert np.all(Filter(cutoff=150.0, zero_phase=True).group_delay(FS, f, effective=True) == 0)


def test_group_delay_is_nan_where_undefined():
    # analytic: a Butterworth high-pass has its zeros at z = 1, so the group delay at 0 Hz is undefined
    gd = Filter(band="highpass", cutoff=50.0).group_delay(FS, [0.0, 100.0])
    assert np.isnan(gd[0]) and np.isfinite(gd[1])


def test_phase_is_unwrapped_and_matches_sosfreqz():
    # scipy.signal reference: unwrap(angle(sosfreqz)); an 8th-order low-pass turns through more than 2 pi
    flt = Filter(order=8, cutoff=100.0)
    f = np.linspace(0, 499, 2000)
    _, h = signal.sosfreqz(scipy_sos("butterworth", "lowpass", 8, 100.0, FS), worN=f, fs=FS)
    np.testing.assert_allclose(flt.phase(FS, f), np.unwrap(np.angle(h)), atol=1e-9)
    assert flt.phase(FS, f)[-1] < -2 * np.pi
    assert np.all(np.diff(flt.phase(FS, f)) < 1e-9)  # monotone: no wrap jumps


@pytest.mark.parametrize("family", FAMILIES)
def test_impulse_sums_to_dc_gain_and_step_is_its_running_sum(family):
    # analytic: sum of h[n] = H(z=1) (the DC gain); the step response is the running sum of the impulse response
    flt = Filter(family, "lowpass", 4, 100.0)
    h = flt.impulse_response(FS, 5000)
    dc = np.abs(flt.response(FS, [0.0])[0])
    assert h.sum() == pytest.approx(dc, rel=1e-9)
    np.testing.assert_allclose(flt.step_response(FS, 5000), np.cumsum(h), atol=1e-12)


def test_effective_response_is_squared_magnitude_for_zero_phase():
    # analytic: forward-backward response is |H|^2, real and non-negative
    zp = Filter(cutoff=100.0, zero_phase=True)
    f = np.linspace(0, 499, 101)
    np.testing.assert_allclose(zp.effective_response(FS, f), np.abs(zp.response(FS, f)) ** 2, atol=1e-15)
    np.testing.assert_allclose(zp.phase(FS, f, effective=True), 0.0, atol=1e-15)


# ---------------------------------------------------------------- block processing
@pytest.mark.parametrize("family", ["butterworth", "elliptic"])
@pytest.mark.parametrize("band", ["highpass", "bandpass"])
def test_block_causal_filtering_equals_whole_array(family, band):
    # scipy.signal reference: one sosfilt over the whole record
    x = np.random.default_rng(3).normal(0.5, 1.0, 100_003)
    flt = Filter(family, band, 6, CUTOFFS[band])
    expected = signal.sosfilt(np.array(flt.sos(FS)), x)
    blocks = flt.block_processor(FS)
    edges = [0, 1, 777, 4096, 50_000, 99_999, x.size]
    y = np.concatenate([blocks.process(x[a:b]) for a, b in zip(edges[:-1], edges[1:])])
    np.testing.assert_allclose(y, expected, rtol=1e-9, atol=1e-9 * np.abs(expected).max())


def test_block_processor_started_at_first_sample_equals_apply():
    # consistency with Filter.apply (itself checked against scipy.signal above); empty blocks first are skipped
    x = np.random.default_rng(4).normal(7.0, 1.0, 20_000)
    flt = Filter(order=3, cutoff=40.0)
    blocks = flt.block_processor(FS, level=None)
    y = np.concatenate([blocks.process(b) for b in [x[:0]] + np.array_split(x, 9)])
    np.testing.assert_array_equal(y, flt.apply(Channel(x, FS)).data)


def test_block_processor_started_at_a_level():
    # scipy.signal reference: sosfilt with zi = sosfilt_zi * level
    x = np.random.default_rng(5).normal(7.0, 1.0, 20_000)
    flt = Filter(order=3, cutoff=40.0)
    sos = np.array(flt.sos(FS))
    blocks = flt.block_processor(FS, level=6.5)
    y = np.concatenate([blocks.process(b) for b in np.array_split(x, 9)])
    np.testing.assert_allclose(y, signal.sosfilt(sos, x, zi=signal.sosfilt_zi(sos) * 6.5)[0], rtol=1e-9)


@pytest.mark.parametrize("spec", [dict(band="highpass", cutoff=0.5), dict(family="elliptic", order=6, cutoff=100.0),
                                  dict(band="bandpass", cutoff=(2.0, 200.0)),
                                  dict(family="chebyshev1", band="bandstop", cutoff=(45.0, 55.0))])
@pytest.mark.parametrize("overlap_settling, tolerance", [(4, 1e-8), (6, 1e-10)])
def test_zero_phase_blocks_match_whole_record(spec, overlap_settling, tolerance):
    # consistency with Filter.apply on the whole record (itself checked against scipy.signal.sosfiltfilt above):
    # the overlap-save residue stays within the stated tolerance of the signal's range
    fs = 5120.0
    t = np.arange(200_000) / fs
    x = 3.0 + np.random.default_rng(8).normal(size=t.size) + np.sin(2 * np.pi * 3.0 * t)
    zp = Filter(zero_phase=True, **spec)
    whole = zp.apply(Channel(x, fs)).data
    for block in (7000, 60_000):
        parts = list(zp.zero_phase_blocks(fs, lambda a, b: x[a:b], x.size, block, overlap_settling))
        assert [start for start, _ in parts] == list(range(0, x.size, block))
        y = np.concatenate([part for _, part in parts])
        assert np.abs(y - whole).max() < tolerance * np.ptp(x)


def test_zero_phase_blocks_refuse_causal_filter():
    with pytest.raises(SigtuneError, match="use block_processor for a causal one"):
        next(Filter().zero_phase_blocks(FS, lambda a, b: np.zeros(b - a), 100))


def test_block_processor_refuses_zero_phase():
    with pytest.raises(SigtuneError, match="zero-phase filtering needs the whole record"):
        Filter(zero_phase=True).block_processor(FS)


# ---------------------------------------------------------------- channels, history, edge zones
def test_step_round_trip_and_chain_replay():
    flt = Filter("elliptic", "bandpass", 3, (20.0, 120.0), zero_phase=True, ripple_db=0.5, attenuation_db=50.0)
    data = json.loads(json.dumps(flt.to_dict()))
    assert data["cutoff"] == [20.0, 120.0] and data["op"] == "filter"
    again = step_from_dict(data)
    assert again == flt and hash(again) == hash(flt)
    x = np.random.default_rng(5).normal(size=3000)
    first = Chain([flt]).apply(Channel(x, FS))
    replay = Chain.from_list(first.history).apply(Channel(x, FS))
    np.testing.assert_array_equal(first.data, replay.data)


def test_design_is_cached_per_filter_and_rate():
    a, b = Filter(cutoff=33.0), Filter(cutoff=33.0)
    assert a.design(FS) is b.design(FS)
    assert a.design(FS) is not a.design(2 * FS)
    with pytest.raises(ValueError):
        a.sos(FS)[0, 0] = 1.0  # the cached sections are read-only


def test_float32_stays_float32():
    out = Filter(cutoff=100.0).apply(Channel(np.ones(1000, np.float32), FS))
    assert out.data.dtype == np.float32


def test_edge_zones_follow_start_time_and_crop():
    ch = Channel(np.random.default_rng(6).normal(size=10_000), FS, start_time=100.0)
    flt = Filter(band="highpass", cutoff=5.0, zero_phase=True)
    settle = flt.design(FS).report["settling_time_s"]
    out = flt.apply(ch)
    assert edge_zones(out) == [(100.0, pytest.approx(100.0 + settle)), (pytest.approx(110.0 - settle), 110.0)]
    cropped = Crop(start_s=1.0, end_s=9.0).apply(out)  # both zones lie outside 101..109 s
    assert edge_zones(cropped) == []
    causal = Filter(cutoff=5.0).apply(ch)
    causal_settle = Filter(cutoff=5.0).design(FS).report["settling_time_s"]
    assert edge_zones(causal) == [(100.0, pytest.approx(100.0 + causal_settle))]


def test_short_record_warns():
    flt = Filter(band="highpass", cutoff=1.0, zero_phase=True)
    with pytest.warns(SigtuneWarning, match="shorter than 3 settling times"):
        flt.apply(Channel(np.zeros(2000), FS))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        Filter(cutoff=100.0).apply(Channel(np.zeros(2000), FS))


# ---------------------------------------------------------------- validation
@pytest.mark.parametrize("kwargs, fs, message", [
    (dict(cutoff=600.0), 1000.0, r"must be 0 < cutoff < 500 Hz \(Nyquist for fs=1000 Hz\); got 600 Hz"),
    (dict(cutoff=500.0), 1000.0, r"0 < cutoff < 500 Hz"),
    (dict(band="bandpass", cutoff=(10.0, 2600.0)), 5120.0, r"0 < cutoff < 2560 Hz \(Nyquist for fs=5120 Hz\)"),
    (dict(band="highpass", cutoff=0.001), 5120.0, r"too low for fs=5120 Hz.*resample to 1000 Hz or less first"),
    (dict(family="elliptic", order=16, cutoff=1.0), 51200.0, r"rings for more than .* resample to about 20 Hz"),
])
def test_rate_dependent_validation(kwargs, fs, message):
    with pytest.raises(SigtuneError, match=message):
        Filter(**kwargs).design(fs)


def test_poles_too_close_to_unit_circle_are_rejected():
    # scipy.signal reference: a 16th-order elliptic band-pass at 1e-6 fs has poles within 1e-9 of the unit circle
    _, poles, _ = signal.sos2zpk(signal.ellip(16, 1.0, 60.0, (1.0, 1.5), "bandpass", fs=1e6, output="sos"))
    assert 1 - np.abs(poles).max() < 1e-9
    with pytest.raises(SigtuneError, match=r"poles lie on or too close to the unit circle .* resample to about"):
        Filter("elliptic", "bandpass", 16, (1.0, 1.5)).design(1e6)


def test_design_whose_gain_misses_its_definition_is_rejected(monkeypatch):
    # the guard against numerically broken designs: a design 1 dB off at its cutoff must be refused
    import dsp.filters as filters

    real = filters._scipy_design
    monkeypatch.setattr(filters, "_scipy_design", lambda spec, cutoff, fs: real(spec, cutoff, fs) * [
        10 ** (-1 / 20), 10 ** (-1 / 20), 10 ** (-1 / 20), 1, 1, 1])
    with pytest.raises(SigtuneError, match=r"numerically unsound for fs=1000 Hz: gain at the cutoff \[-4.01\] dB"):
        Filter(order=1, cutoff=77.7).design(1000.0)


def test_validation_names_channel_when_applied():
    with pytest.raises(SigtuneError, match=r"channel 'acc_z'.*Nyquist for fs=400 Hz"):
        Filter(cutoff=250.0).apply(Channel(np.zeros(100), 400.0, name="acc_z"))


@pytest.mark.parametrize("kwargs, message", [
    (dict(order=0), r"order: must be a whole number from 1 to 16; got 0"),
    (dict(order=17), r"order: must be a whole number from 1 to 16; got 17"),
    (dict(cutoff=-5.0), r"cutoff: must be > 0 Hz; got -5"),
    (dict(band="bandpass", cutoff=(200.0, 50.0)), r"needs low < high; got low=200 Hz, high=50 Hz"),
    (dict(band="bandpass", cutoff=100.0), r"a bandpass filter needs a \(low, high\) pair in Hz"),
    (dict(band="lowpass", cutoff=(1.0, 2.0)), r"a lowpass filter needs a single frequency in Hz"),
    (dict(family="chebyshev1", ripple_db=0.0), r"ripple_db: must be > 0 dB; got 0"),
    (dict(family="chebyshev2", attenuation_db=-3.0), r"attenuation_db: must be > 0 dB; got -3"),
    (dict(family="butterfly"), r"family: must be one of 'butterworth', 'chebyshev1'"),
    (dict(band="notch"), r"band: must be one of 'lowpass', 'highpass', 'bandpass', 'bandstop'"),
    (dict(cutoff_mode="auto"), r"cutoff_mode: must be one of 'design', 'effective'"),
    (dict(family="chebyshev1", ripple_db=2.0, cutoff_mode="effective"), r"needs ripple_db < 1.5 dB"),
    (dict(zero_phase="yes"), r"zero_phase: must be true or false"),
])
def test_setting_validation(kwargs, message):
    with pytest.raises(SigtuneError, match=message):
        Filter(**kwargs)
