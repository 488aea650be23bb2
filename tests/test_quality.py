"""Quality audit: statistics, defects at exact sample ranges, stationarity, gap policy, timebase."""

import json
import math

import numpy as np
import pytest
from scipy import signal, stats

from dsp import Channel, SigtuneError
from dsp.quality import (audit, check_timebase, fill_short_gaps, gravity_check, iepe_settling, nonfinite_runs,
                         reverse_arrangements_bounds, reverse_arrangements_test, signal_stats,
                         split_valid_segments)

FS = 1000.0
DEFECT_KINDS = {"clipping", "dropout", "spike", "jump", "nan", "dc_offset", "iepe_settling", "non_gaussian",
                "alias_risk", "gravity", "timebase", "interpolated_gap"}


def clean_noise(seed, n=100_000):
    """Gaussian noise low-passed at 0.3 fs: a properly anti-aliased record."""
    x = np.random.default_rng(seed).standard_normal(n)
    return signal.sosfiltfilt(signal.butter(8, 0.3 * FS, fs=FS, output="sos"), x) * 3.0


def white(seed, n=20_000):
    return np.random.default_rng(seed).standard_normal(n)


# ---------------------------------------------------------------- statistics
def test_sine_crest_factor_and_kurtosis():
    t = np.arange(10_000) / FS  # 100 whole cycles, peaks sampled exactly
    s = signal_stats(3.0 * np.sin(2 * np.pi * 10 * t))
    assert s["crest_factor"] == pytest.approx(math.sqrt(2), rel=1e-9)  # analytic
    assert s["kurtosis"] == pytest.approx(1.5, rel=1e-6)  # analytic: E[sin^4]/E[sin^2]^2 = (3/8)/(1/4)
    assert s["skewness"] == pytest.approx(0.0, abs=1e-9)  # analytic
    assert s["rms"] == pytest.approx(3.0 / math.sqrt(2), rel=1e-12)  # analytic
    assert s["peak_to_peak"] == pytest.approx(6.0, rel=1e-12)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_gaussian_kurtosis_is_three(seed):
    n = 200_000
    s = signal_stats(np.random.default_rng(seed).standard_normal(n))
    # analytic: Pearson kurtosis of a normal is 3; the estimate's standard error is sqrt(24/n) (0.011),
    # the skewness's sqrt(6/n) (0.0055): tolerances are 5 standard errors.
    assert s["kurtosis"] == pytest.approx(3.0, abs=5 * math.sqrt(24 / n))
    assert s["skewness"] == pytest.approx(0.0, abs=5 * math.sqrt(6 / n))


def test_stats_match_numpy_and_scipy_references():
    x = np.random.default_rng(5).gamma(2.0, size=5000).astype(np.float32)
    s = signal_stats(x)
    x64 = x.astype(np.float64)
    assert s["std"] == pytest.approx(np.std(x64), rel=1e-12)  # numpy reference
    assert s["kurtosis"] == pytest.approx(stats.kurtosis(x64, fisher=False), rel=1e-12)  # scipy reference
    assert s["skewness"] == pytest.approx(stats.skew(x64), rel=1e-12)  # scipy reference


# ---------------------------------------------------------------- reverse arrangements
# Bendat & Piersol, Random Data (4th ed.), Table A.6, alpha = 0.05: acceptance region lower < A <= upper.
# The rows N = 10, 20, 100 are the table values quoted in the issue and agree exactly with the normal
# approximation (eq. 4.54) that the function implements. The other rows are recalled, not confirmed
# against the book: they agree with the approximation except N = 70, recalled upper 1401 where
# floor(mean + 1.96 sigma) = floor(1400.80) = 1400, so they are checked to within 1.
RA_TABLE = [
    (10, 11, 33),  # Bendat & Piersol, Table A.6
    (20, 64, 125),  # Bendat & Piersol, Table A.6
    (100, 2145, 2804),  # Bendat & Piersol, Table A.6
]
RA_RECALLED = [
    (30, 162, 272),  # from memory
    (40, 305, 474),  # from memory
    (50, 495, 729),  # from memory
    (60, 731, 1038),  # from memory
    (70, 1014, 1401),  # from memory (the approximation gives 1400)
    (80, 1344, 1815),  # from memory
    (90, 1721, 2283),  # from memory
]


@pytest.mark.parametrize("n, lower, upper", RA_TABLE)
def test_reverse_arrangement_bounds_match_table(n, lower, upper):
    assert reverse_arrangements_bounds(n, 0.05) == (lower, upper)


@pytest.mark.parametrize("n, lower, upper", RA_RECALLED)
def test_reverse_arrangement_bounds_match_recalled_rows(n, lower, upper):
    low, high = reverse_arrangements_bounds(n, 0.05)
    assert abs(low - lower) <= 1 and abs(high - upper) <= 1


@pytest.mark.parametrize("n", [10, 20, 45, 100])
@pytest.mark.parametrize("alpha", [0.01, 0.05, 0.10])
def test_reverse_arrangement_bounds_follow_the_normal_approximation(n, alpha):
    mean = n * (n - 1) / 4  # Bendat & Piersol eq. 4.54
    sigma = math.sqrt(n * (2 * n + 5) * (n - 1) / 72)
    z = stats.norm.ppf(1 - alpha / 2)  # scipy reference
    assert reverse_arrangements_bounds(n, alpha) == (math.floor(mean - z * sigma), math.floor(mean + z * sigma))


@pytest.mark.parametrize("n", [10, 37, 100])
def test_reverse_arrangement_count_matches_kendall_tau(n):
    x = np.random.default_rng(n).standard_normal(n)
    tau = stats.kendalltau(np.arange(n), x).statistic  # scipy reference: tau = 1 - 4 A / (n (n - 1))
    expected = round((1 - tau) * n * (n - 1) / 4)
    assert reverse_arrangements_test(x).arrangements == expected


def test_reverse_arrangements_rejects_at_alpha_for_independent_values():
    rng = np.random.default_rng(11)
    trials = 2000
    rejected = sum(not reverse_arrangements_test(rng.standard_normal(20)).stationary for _ in range(trials))
    # analytic: a stationary sequence is rejected with probability alpha = 0.05; binomial sd over 2000
    # trials is 0.005, and the integer bounds make the exact level a little below 0.05.
    assert 0.025 <= rejected / trials <= 0.07


def test_trend_is_nonstationary():
    t = np.arange(40_000) / FS
    x = np.random.default_rng(3).standard_normal(t.size) * (1 + t / t[-1])  # RMS doubles over the record
    report = audit(Channel(x, FS))
    assert not report.stats["stationarity"]["stationary"]
    assert report.by_kind("nonstationary")[0].severity == "info"


# ---------------------------------------------------------------- defects at exact ranges
def test_clipping_plateaus_found_exactly():
    x = white(0)
    x[3000:3012] = 4.5  # above every sample of the noise: the record's maximum
    x[7000:7005] = -4.7
    found = [(f.start, f.stop) for f in audit(Channel(x, FS)).by_kind("clipping")]
    assert found == [(3000, 3012), (7000, 7005)]


def test_clipping_at_full_scale_fraction():
    x = white(1)
    x[9000:9002] = 4.96  # >= 0.99 of full scale 5.0
    x[500] = -4.97
    report = audit(Channel(x, FS), full_scale=5.0)
    assert [(f.start, f.stop) for f in report.by_kind("clipping")] == [(500, 501), (9000, 9002)]
    assert report.by_kind("clipping")[0].severity == "error"


@pytest.mark.parametrize("depth", [0.05, 0.5, 0.95])  # where the peak sits inside its quantisation step
def test_rounded_peaks_of_quantised_sine_are_not_clips(depth):
    t = np.arange(20_000) / 10_000.0
    step = 2.0 ** -7
    amplitude = 1.0 - step / 2 + depth * step  # the top level's lower boundary is 1 - step/2
    quantised = np.round(amplitude * np.sin(2 * np.pi * 1.0 * t) / step) * step  # plateaus at the peaks
    assert audit(Channel(quantised, 10_000.0)).by_kind("clipping") == []
    clipped = np.clip(quantised * 1.5, -1.0, 1.0)
    found = audit(Channel(clipped, 10_000.0)).by_kind("clipping")
    expected = [(a, b) for a, b in _true_runs(np.abs(clipped) == 1.0)]
    assert [(f.start, f.stop) for f in found] == expected and len(expected) == 4


def _true_runs(mask):
    idx = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(int), [0]))))
    return list(zip(idx[0::2].tolist(), idx[1::2].tolist()))


def test_dropouts_zero_and_held_found_exactly():
    x = white(2)
    x[5000:5040] = 0.0
    x[8000:8100] = x[7999]  # the value is held from sample 7999 on
    found = [(f.start, f.stop) for f in audit(Channel(x, FS)).by_kind("dropout")]
    assert found == [(5000, 5040), (7999, 8100)]


def test_spikes_and_jump_found_exactly():
    x = white(3)
    x[12345] += 15.0
    x[2000:2002] += 15.0
    x[15000:] += 20.0
    report = audit(Channel(x, FS))
    assert [(f.start, f.stop) for f in report.by_kind("spike")] == [(2000, 2002), (12345, 12346)]
    assert [(f.start, f.stop) for f in report.by_kind("jump")] == [(14999, 15001)]


@pytest.mark.parametrize("seed", range(6))
def test_no_false_findings_on_clean_noise(seed):
    report = audit(Channel(clean_noise(seed), FS))
    assert {f.kind for f in report.findings} & DEFECT_KINDS == set()
    assert report.valid_duration_s == pytest.approx(100.0)


def test_dc_offset_relative_to_rms():
    report = audit(Channel(clean_noise(7, 20_000) + 0.5, FS))
    x = clean_noise(7, 20_000) + 0.5
    assert report.stats["dc_offset_ratio"] == pytest.approx(abs(np.mean(x)) / np.std(x), rel=1e-9)  # numpy
    assert len(report.by_kind("dc_offset")) == 1


def test_distribution_flags_a_sine_not_noise():
    t = np.arange(20_000) / FS
    sine = audit(Channel(np.sin(2 * np.pi * 13 * t), FS))
    assert sine.stats["distribution"]["non_gaussian"]
    # KS distance of a sine's arcsine law from the normal CDF is about 0.09 (analytic, at |x| near 1.1)
    assert 0.05 < sine.stats["distribution"]["ks_distance"] < 0.15


# ---------------------------------------------------------------- gap and NaN policy
def test_gap_policy_interpolates_short_and_splits_long():
    x = clean_noise(4, 10_000)
    x[100:102] = np.nan
    x[5000:5050] = np.nan
    ch = Channel(x, FS)
    segments = split_valid_segments(ch)
    assert [(s.start, s.stop) for s in segments] == [(0, 5000), (5050, 10_000)]
    assert segments[0].interpolated == ((100, 102),)
    expected = np.interp([100, 101], [99, 102], [x[99], x[102]])  # numpy reference: linear interpolation
    np.testing.assert_allclose(segments[0].channel.data[100:102], expected, rtol=1e-12)
    assert segments[1].channel.start_time == pytest.approx(5.05)
    report = audit(ch)
    assert report.valid_duration_s == pytest.approx(9.95)
    assert [(f.start, f.stop) for f in report.by_kind("nan")] == [(5000, 5050)]
    assert [(f.start, f.stop) for f in report.by_kind("interpolated_gap")] == [(100, 102)]


def test_gaps_at_the_ends_are_never_filled():
    x = np.arange(10.0)
    x[:2] = np.nan
    out, filled = fill_short_gaps(Channel(x, 1.0))
    assert filled == [] and np.isnan(out.data[:2]).all()
    assert nonfinite_runs(out.data) == [(0, 2)]


def test_all_nan_channel_reports_no_valid_data():
    report = audit(Channel(np.full(100, np.nan), FS))
    assert report.valid_duration_s == 0.0 and report.by_kind("no_valid_data")[0].severity == "error"


def test_time_column_gap_splits_segments():
    t = np.arange(2000) / FS
    t = np.delete(t, range(1000, 1010))
    ch = Channel(clean_noise(5, t.size), FS)
    assert [(s.start, s.stop) for s in split_valid_segments(ch, timestamps=t)] == [(0, 1000), (1000, 1990)]


# ---------------------------------------------------------------- timebase
def test_timebase_rate_error_and_jitter():
    rng = np.random.default_rng(9)
    k = np.arange(100_000)
    jitter = 2e-5
    t = k / FS * (1 - 100e-6) + rng.normal(0, jitter, k.size)  # clock 100 ppm fast, 20 us RMS jitter
    r = check_timebase(t, fs_nominal=FS)
    assert r.rate_error_ppm == pytest.approx(100.0 / (1 - 100e-6), abs=0.5)  # analytic, within 0.5 ppm
    assert r.jitter_rms_s == pytest.approx(jitter, rel=0.02)  # analytic: residual RMS = jitter sd
    assert r.monotonic and r.n_gaps == 0


def test_timebase_duplicates_backward_and_gaps():
    t = np.arange(1000) / FS
    t[600], t[601] = t[601], t[600]  # swapped: one backward step
    t = np.delete(t, range(800, 805))  # 5 samples missing after index 799
    t = np.insert(t, 200, t[199])  # a repeated time: later indices move up by one
    r = check_timebase(t, fs_nominal=FS)
    assert not r.monotonic and r.n_duplicates == 1 and r.n_backward == 1
    assert r.n_gaps == 1 and r.missing_samples == 5  # the swap and the repeat are not gaps
    kinds = [(f.start, f.stop, f.severity) for f in r.findings]
    assert kinds == [(199, 201, "error"), (601, 603, "error"), (800, 802, "warning")]
    assert r.fs_fitted == pytest.approx(FS, rel=1e-9) and r.jitter_rms_s < 1e-12


def test_timebase_rate_mismatch_warns():
    r = check_timebase(np.arange(1000) / 1024.0, fs_nominal=1000.0)
    assert r.fs_fitted == pytest.approx(1024.0, rel=1e-12)
    assert r.rate_error_ppm == pytest.approx(24_000.0, rel=1e-9)
    assert any("ppm" in f.message for f in r.findings)


def test_timebase_bad_input():
    with pytest.raises(SigtuneError, match="timestamps"):
        check_timebase([0.0, 0.0, 0.0])
    with pytest.raises(SigtuneError, match="at least 3"):
        check_timebase([0.0, 1.0])


# ---------------------------------------------------------------- IEPE and gravity
def test_iepe_settling_detected_with_its_duration():
    t = np.arange(20_000) / FS
    noise = clean_noise(6, t.size)
    tau, a0 = 0.5, 20.0
    found = iepe_settling(Channel(noise + a0 * np.exp(-t / tau), FS))
    assert found is not None and found.start == 0
    # analytic: a 0.1 s block mean of a0 exp(-t/tau) starting at t is a0 exp(-t/tau) (tau/0.1)(1 - exp(-0.1/tau));
    # it falls below 5 spreads of the noise's block means (1.4826 MAD, scipy reference) at the time below
    spread = stats.median_abs_deviation(noise.reshape(200, 100).mean(axis=1), scale="normal")
    gain = tau / 0.1 * (1 - math.exp(-0.1 / tau))
    settle = tau * math.log(a0 * gain / (5 * spread))
    assert found.stop / FS == pytest.approx(settle, abs=0.2)  # two blocks: the noise moves the crossing
    assert "time constant about 0.5" in found.message


@pytest.mark.parametrize("seed", range(3))
def test_iepe_settling_silent_on_clean_noise(seed):
    assert iepe_settling(Channel(clean_noise(seed, 20_000), FS)) is None


@pytest.mark.parametrize("unit, value, ok", [("g", 1.0, True), ("m/s^2", 9.80665, True), ("mg", 1000.0, True),
                                             ("g", 9.81, False), ("m/s^2", 1.0, False), ("g", 0.5, False)])
def test_gravity_check(unit, value, ok):
    ch = Channel(value + 0.001 * white(1, 1000), FS, unit=unit, metadata={"dc_coupled": True})
    report = audit(ch)
    assert report.stats["gravity_g"] == pytest.approx(value * {"g": 1, "mg": 1e-3, "m/s^2": 1 / 9.80665}[unit],
                                                      rel=1e-3)  # ISO 80000-3: g_n = 9.80665 m/s^2
    assert (report.by_kind("gravity") == []) == ok


def test_gravity_check_names_the_likely_unit():
    _, finding = gravity_check(Channel(np.full(100, 9.81), FS, unit="g"))
    assert "m/s^2" in finding.message and finding.severity == "warning"


# ---------------------------------------------------------------- report
def test_report_serialises_to_json_and_table():
    x = white(8)
    x[100:120] = 0.0
    report = audit(Channel(x, FS, name="bearing_x", start_time=2.0), timestamps=2.0 + np.arange(x.size) / FS)
    data = json.loads(json.dumps(report.to_dict()))
    assert data["channel"] == "bearing_x" and data["timebase"]["monotonic"] is True
    dropout = [f for f in data["findings"] if f["kind"] == "dropout"][0]
    assert (dropout["start"], dropout["stop"], dropout["start_s"]) == (100, 120, pytest.approx(2.1))
    table = report.to_table()
    assert set(table) >= {"kind", "severity", "start", "stop", "message", "advice"}
    assert len(table["kind"]) == len(report.findings)
    stats_table = report.stats_table()
    assert stats_table["value"][stats_table["statistic"].index("rms")] == pytest.approx(np.sqrt(np.mean(x ** 2)))


def test_audit_rejects_bad_settings():
    ch = Channel(white(0, 100), FS)
    with pytest.raises(SigtuneError, match="full_scale"):
        audit(ch, full_scale=-1.0)
    with pytest.raises(SigtuneError, match="alpha"):
        audit(ch, alpha=1.5)


def test_an_overdriven_burst_is_one_clipping_episode():
    # regression: each flat top of a clipped burst was its own finding (154 rows on the demo)
    fs, f = 5120.0, 612.0
    t = np.arange(int(fs)) / fs
    rng = np.random.default_rng(11)
    x = 0.05 * rng.standard_normal(t.size)
    burst = (t >= 0.4) & (t < 0.5)
    x[burst] += 4.0 * np.sin(2 * np.pi * f * t[burst])
    x = np.clip(x, -1.0, 1.0)  # analytic: every half cycle of the burst flattens at +-1
    report = audit(Channel(x, fs))
    clips = [g for g in report.findings if g.kind == "clipping"]
    assert len(clips) == 1
    assert 0.4 * fs <= clips[0].start < 0.4 * fs + fs / f  # within the first cycle of the burst
    assert 0.5 * fs - fs / f <= clips[0].stop <= 0.5 * fs
    assert "flat-topped runs" in clips[0].message
