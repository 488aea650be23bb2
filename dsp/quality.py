"""Quality audit: can this channel be trusted before it is reported?

:func:`audit` computes the basic statistics of a channel and looks for the
defects that spoil vibration measurements. Every rule and threshold is stated
here and in the report's ``settings``; each defect is a :class:`Finding` with
a sample range (``start`` inclusive, ``stop`` exclusive) so a time plot can
mark it.

Statistics (accumulated in float64 over the valid samples)
    mean, RMS (with the mean), standard deviation (AC RMS), peak ``max|x|``,
    peak-to-peak, crest factor of the mean-removed signal (``max|x - mean| /
    std``: a DC offset must not hide impulsiveness), skewness and Pearson
    kurtosis (normal = 3) by :func:`scipy.stats.skew` and
    :func:`scipy.stats.kurtosis`, and the DC offset relative to the AC RMS.
Clipping
    A run of at least ``clip_min_run`` (3) samples at the record's extreme
    value (max or min), unless the runs of equal samples just before and
    after it also repeat (2 samples or more) and the run is shorter than 6
    times the longer of them: the rounded peak of a coarsely quantised
    smooth signal repeats its top value too, but it dwells on the levels
    beside it (a sine's top run is at most 4.8 times as long as the run
    beside it, analytic), while a clip crosses them quickly. With
    ``full_scale`` given, every sample with ``|x| >= 0.99 * full_scale`` is
    clipped as well (minimum run 1).
Drop-outs
    A run of at least ``dropout_min_run`` (10) identical samples (zeros or a
    held value) that is not a clip; non-finite samples (NaN, inf) are handled
    by the gap policy below.
Spikes
    Robust z-score of the first differences, ``0.6745 (d - median) / MAD``
    (Iglewicz and Hoaglin's modified z-score), above ``spike_threshold`` (8).
    Their 3.5 suits small samples; at 8 a Gaussian record of 10^9 samples
    raises a false alarm with probability about 1e-6. Flagged differences less
    than 5 samples apart form one event; if the level returns (net change at
    most half the largest flagged difference) it is a ``spike`` over the
    samples between, otherwise a ``jump`` (a step in level).
Stationarity
    Reverse-arrangements test (Bendat and Piersol, *Random Data*, 4th ed.,
    section 4.5.2) on the mean-square values of ``n_segments`` (20) equal
    segments of the mean-removed valid data; see
    :func:`reverse_arrangements_test`. A stationary record fails it with
    probability ``alpha`` (0.05): the finding is ``info``.
Amplitude distribution
    Kolmogorov-Smirnov distance ``D`` between the standardised samples and the
    normal CDF (:func:`scipy.stats.kstest`). Samples of a vibration record are
    correlated, so the test's p-value is not used; ``non_gaussian`` is
    reported when ``D > 0.05`` (the CDFs differ by more than 5 percentage
    points) and ``D`` exceeds the 1 % critical value ``1.628 / sqrt(n)``.
    Records above 10^6 samples use every k-th sample (at most 10^6) for
    ``D``. Skewness and kurtosis are reported with it.
Alias risk
    ``dsp.alias_risk`` on the longest valid segment, when that
    function is available; its level ``"elevated"`` is an info finding,
    ``"high"`` a warning.
Gap and NaN policy
    Non-finite runs of at most ``GAP_INTERP_MAX_SAMPLES`` (3) samples inside
    the record are filled by linear interpolation and flagged
    (``interpolated_gap``, info). Longer runs, and gaps in a time column, split
    the record into continuous segments; segments shorter than
    ``MIN_SEGMENT_SAMPLES`` (16) are dropped. Nothing is ever zero-filled.
    Metrics use the valid segments and state their total duration
    (``valid_duration_s``). See :func:`split_valid_segments`.
IEPE settling
    Means of 0.1 s blocks over the first ``min(5 s, duration / 3)``; the
    later blocks give a reference level (median) and spread (1.4826 MAD).
    Flagged when the first block is more than 5 spreads off the reference,
    the deviation keeps one sign until it falls below 5 spreads, and it has
    shrunk at least 3-fold by the end of the window: an exponential-looking
    approach to the operating level. See :func:`iepe_settling`.
DC-coupled axis at rest
    With ``dc_coupled=True`` (or ``metadata["dc_coupled"]``), an acceleration
    channel's mean must read ``expected_gravity_g`` (1 g) within 0.1 g; if a
    different acceleration unit would make it read so, the finding names it.
Timebase
    :func:`check_timebase` on a time column: monotonicity, duplicates, gaps,
    jitter RMS, fitted rate against the nominal one (ppm).
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from scipy import stats as sps

from ._validate import check_int, check_number
from .channel import Channel
from .errors import SigtuneError
from .units import STANDARD_GRAVITY, UNITS, unit_info

__all__ = [
    "AuditReport", "Finding", "Segment", "TimebaseReport", "ReverseArrangements", "audit",
    "check_timebase", "reverse_arrangements_test", "reverse_arrangements_bounds", "nonfinite_runs",
    "fill_short_gaps", "split_valid_segments", "iepe_settling", "gravity_check", "signal_stats",
    "GAP_INTERP_MAX_SAMPLES", "MIN_SEGMENT_SAMPLES",
]

SEVERITIES = ("info", "warning", "error")
CLIP_FULL_SCALE_FRACTION = 0.99  # common practice: the top 1 % of a converter's range is suspect
CLIP_MIN_RUN = 3
CLIP_PLATEAU_RATIO = 6.0
#: Clipped runs closer together than this (s) are one clipping episode, reported as one finding: an
#: overdriven burst flattens every cycle's peaks, and listing each flat top hides everything else.
CLIP_EPISODE_GAP_S = 0.02
DROPOUT_MIN_RUN = 10
SPIKE_THRESHOLD = 8.0
SPIKE_GROUP_SAMPLES = 5
MAD_TO_Z = 0.6745  # Iglewicz & Hoaglin (1993): Phi^-1(0.75), makes MAD consistent with sigma
DC_OFFSET_RATIO = 0.1
KS_EFFECT = 0.05
KS_CRITICAL_1PCT = 1.628  # asymptotic Kolmogorov critical value at alpha = 0.01 (Massey 1951)
KS_MAX_SAMPLES = 10**6
GAP_INTERP_MAX_SAMPLES = 3
MIN_SEGMENT_SAMPLES = 16
MAX_FINDINGS_PER_KIND = 50
IEPE_WINDOW_S = 5.0
IEPE_BLOCK_S = 0.1
IEPE_SPREADS = 5.0
IEPE_DECAY = 3.0
GRAVITY_TOLERANCE_G = 0.1  # common practice: DC-coupled sensors' zero-g offset and sensitivity tolerances
TIMEBASE_GAP_FACTOR = 1.5
TIMEBASE_JITTER_FRACTION = 0.1
TIMEBASE_RATE_PPM = 1000.0


@dataclass(frozen=True)
class Finding:
    """One defect, with the samples it covers.

    Parameters
    ----------
    kind : str
        ``clipping``, ``dropout``, ``nan``, ``interpolated_gap``, ``spike``,
        ``jump``, ``dc_offset``, ``nonstationary``, ``non_gaussian``,
        ``alias_risk``, ``iepe_settling``, ``gravity``, ``timebase``,
        ``no_valid_data`` or ``more`` (findings beyond the cap per kind).
    severity : {"info", "warning", "error"}
        ``error``: the samples in the range cannot be used as they are.
    start, stop : int
        Sample range, ``start`` inclusive, ``stop`` exclusive.
    message : str
        What was found, with numbers.
    advice : str
        What to do about it.
    """

    kind: str
    severity: str
    start: int
    stop: int
    message: str
    advice: str = ""

    def __post_init__(self):
        if self.severity not in SEVERITIES:
            raise SigtuneError(f"must be one of {SEVERITIES}; got {self.severity!r}", "severity")
        object.__setattr__(self, "start", int(self.start))
        object.__setattr__(self, "stop", int(self.stop))

    def to_dict(self, fs: float | None = None, start_time: float = 0.0) -> dict[str, Any]:
        """Return the finding as JSON-ready data; with ``fs`` also ``start_s``/``stop_s`` (absolute s)."""
        data = asdict(self)
        if fs:
            data["start_s"] = start_time + self.start / fs
            data["stop_s"] = start_time + self.stop / fs
        return data


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """Return ``[(start, stop), ...]`` of the True runs of a boolean array (stop exclusive)."""
    if mask.size == 0:
        return []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.view(np.int8), [0]))))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist()))


def _merge(ranges: list[tuple[int, int]]) -> list[tuple[int, int]]:
    merged: list[list[int]] = []
    for a, b in sorted(ranges):
        if merged and a <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], b)
        else:
            merged.append([a, b])
    return [(a, b) for a, b in merged]


def _capped(findings: list[Finding], kind: str) -> list[Finding]:
    if len(findings) <= MAX_FINDINGS_PER_KIND:
        return findings
    rest = findings[MAX_FINDINGS_PER_KIND:]
    extra = Finding("more", rest[0].severity, rest[0].start, rest[-1].stop,
                    f"{len(rest)} more {kind} findings not listed one by one", rest[0].advice)
    return findings[:MAX_FINDINGS_PER_KIND] + [extra]


# ---------------------------------------------------------------- statistics
def signal_stats(x) -> dict[str, float]:
    """Return the basic statistics of finite samples ``x`` (float64 accumulation).

    Keys: ``n``, ``mean``, ``rms``, ``std``, ``peak``, ``peak_to_peak``,
    ``crest_factor`` (of the mean-removed signal), ``skewness``, ``kurtosis``
    (Pearson: normal = 3), ``dc_offset_ratio`` (mean / std).

    Examples
    --------
    >>> t = np.arange(1000) / 1000.0
    >>> s = signal_stats(np.sin(2 * np.pi * 10 * t))
    >>> round(s["crest_factor"], 4), round(s["kurtosis"], 4)
    (1.4142, 1.5)
    """
    x = np.asarray(x, dtype=np.float64)
    mean = float(np.mean(x))
    std = float(np.std(x))
    peak_ac = float(np.max(np.abs(x - mean)))
    return {
        "n": int(x.size), "mean": mean, "rms": float(np.sqrt(np.mean(np.square(x)))), "std": std,
        "peak": float(np.max(np.abs(x))), "peak_to_peak": float(np.ptp(x)),
        "crest_factor": peak_ac / std if std > 0 else math.nan,
        "skewness": float(sps.skew(x)) if std > 0 else math.nan,
        "kurtosis": float(sps.kurtosis(x, fisher=False)) if std > 0 else math.nan,
        "dc_offset_ratio": abs(mean) / std if std > 0 else math.inf,
    }


# ---------------------------------------------------------------- defects
def _run_length_at(x: np.ndarray, index: int, step: int) -> int:
    """Length of the run of samples equal to ``x[index]`` going from ``index`` in direction ``step``."""
    n, value, i = 0, x[index], index
    while 0 <= i < x.size and x[i] == value:
        n, i = n + 1, i + step
    return n


def _clipping(x: np.ndarray, offset: int, extremes: tuple[float, float], full_scale: float | None,
              min_run: int) -> list[tuple[int, int]]:
    ranges = []
    for level in extremes:
        for a, b in _runs(x == level):
            if b - a < min_run:
                continue
            # A rounded peak of quantised data also dwells on the levels beside the top one: for a
            # sine with its peak a depth d into the top level of step q, the top run is
            # 2 sqrt(d) / (sqrt(d + q) - sqrt(d)) <= 4.83 times the run beside it. A clip crosses them.
            beside = max(_run_length_at(x, a - 1, -1) if a > 0 else 0,
                         _run_length_at(x, b, 1) if b < x.size else 0)
            if beside >= 2 and b - a < CLIP_PLATEAU_RATIO * beside:
                continue
            ranges.append((a + offset, b + offset))
    if full_scale is not None:
        mask = np.abs(x) >= CLIP_FULL_SCALE_FRACTION * full_scale
        ranges += [(a + offset, b + offset) for a, b in _runs(mask)]
    return _merge(ranges)


def _clipping_findings(x: np.ndarray, offset: int, clipped: list[tuple[int, int]], max_gap: float,
                       unit: str) -> list["Finding"]:
    """One finding per clipping episode: clipped runs less than ``max_gap`` samples apart."""
    episodes: list[list[tuple[int, int]]] = []
    for a, b in clipped:
        if episodes and a - episodes[-1][-1][1] < max_gap:
            episodes[-1].append((a, b))
        else:
            episodes.append([(a, b)])
    findings = []
    for runs in episodes:
        start, stop = runs[0][0], runs[-1][1]
        limits = sorted({f"{float(x[a - offset]):.6g}" for a, _ in runs})
        at = f"{sum(b - a for a, b in runs)} samples at the limit {' / '.join(limits)} {unit}"
        what = at if len(runs) == 1 else f"{len(runs)} flat-topped runs, {at}"
        findings.append(Finding("clipping", "error", start, stop, what,
                                "re-record with a larger input range; peak and RMS here are underestimated"))
    return findings


def _dropouts(x: np.ndarray, offset: int, min_run: int, clipped: list[tuple[int, int]]):
    same = x[1:] == x[:-1]
    found = []
    for a, b in _runs(same):
        start, stop = a + offset, b + 1 + offset  # k equal differences = k + 1 equal samples
        if stop - start < min_run or any(ca <= start and stop <= cb for ca, cb in clipped):
            continue
        found.append((start, stop, float(x[a])))
    return found


def _spikes(x: np.ndarray, offset: int, threshold: float):
    d = np.diff(x)
    med = float(np.median(d))
    mad = float(np.median(np.abs(d - med)))
    if mad == 0.0:
        return []  # at least half the differences equal: no robust scale to judge by
    z = MAD_TO_Z * (d - med) / mad
    flagged = np.flatnonzero(np.abs(z) > threshold)
    events = []
    if flagged.size == 0:
        return events
    groups = np.split(flagged, np.flatnonzero(np.diff(flagged) > SPIKE_GROUP_SAMPLES) + 1)
    for g in groups:
        first, last = int(g[0]), int(g[-1])
        net = x[last + 1] - x[first]
        biggest = float(np.max(np.abs(d[g])))
        zmax = float(np.max(np.abs(z[g])))
        if abs(net) <= 0.5 * biggest and last > first:
            events.append(("spike", first + 1 + offset, last + 1 + offset, zmax))
        else:
            events.append(("jump", first + offset, last + 2 + offset, zmax))
    return events


# ---------------------------------------------------------------- reverse arrangements
@dataclass(frozen=True)
class ReverseArrangements:
    """Result of :func:`reverse_arrangements_test`.

    ``stationary`` is True when ``lower < arrangements <= upper``.
    """

    n: int
    arrangements: int
    mean: float
    std: float
    alpha: float
    lower: int
    upper: int
    stationary: bool

    def to_dict(self) -> dict[str, Any]:
        """Return the result as JSON-ready data."""
        return asdict(self)


def reverse_arrangements_bounds(n: int, alpha: float = 0.05) -> tuple[int, int]:
    """Return the acceptance region ``(lower, upper)``: accept when ``lower < A <= upper``.

    Normal approximation of the number of reverse arrangements ``A`` of ``n``
    independent values (Bendat and Piersol, *Random Data*, 4th ed., eq.
    4.54): mean ``n(n-1)/4``, variance ``n(2n+5)(n-1)/72``; the bounds are
    ``floor(mean -/+ z sigma)`` with ``z`` the ``1 - alpha/2`` normal quantile,
    which reproduces their Table A.6.

    Examples
    --------
    >>> reverse_arrangements_bounds(20, 0.05)
    (64, 125)
    """
    n = check_int(n, "n", low=3)
    alpha = check_number(alpha, "alpha", low=0, high=1, low_open=True, high_open=True)
    mean = n * (n - 1) / 4.0
    sigma = math.sqrt(n * (2 * n + 5) * (n - 1) / 72.0)
    z = float(sps.norm.isf(alpha / 2.0))
    return math.floor(mean - z * sigma), math.floor(mean + z * sigma)


def reverse_arrangements_test(x, alpha: float = 0.05) -> ReverseArrangements:
    """Test a sequence (e.g. segment mean-square values) for a trend.

    A reverse arrangement is a pair ``i < j`` with ``x[i] > x[j]``. Too many
    or too few of them, outside the acceptance region of
    :func:`reverse_arrangements_bounds`, mean a monotonic trend at
    significance ``alpha`` (Bendat and Piersol, *Random Data*, 4.5.2).

    Parameters
    ----------
    x : array_like
        At least 3 values, in time order.
    alpha : float, default 0.05
        Significance level (two-sided).

    Examples
    --------
    >>> r = reverse_arrangements_test(np.arange(20.0))  # a steady rise: no reverse arrangements
    >>> r.arrangements, r.stationary
    (0, False)
    """
    v = np.asarray(x, dtype=np.float64)
    if v.ndim != 1 or v.size < 3 or not np.all(np.isfinite(v)):
        raise SigtuneError(f"needs at least 3 finite values in a 1-D sequence; got shape {v.shape}", "x")
    # O(n^2) pairs by broadcasting: n is a number of segments (tens to hundreds), not of samples.
    count = int(np.count_nonzero(np.triu(v[:, None] > v[None, :], k=1)))
    lower, upper = reverse_arrangements_bounds(v.size, alpha)
    n = v.size
    return ReverseArrangements(n, count, n * (n - 1) / 4.0, math.sqrt(n * (2 * n + 5) * (n - 1) / 72.0),
                               float(alpha), lower, upper, lower < count <= upper)


# ---------------------------------------------------------------- gap and NaN policy
@dataclass(frozen=True)
class Segment:
    """A continuous stretch of valid samples: ``channel`` holds samples ``start:stop`` of the original."""

    start: int
    stop: int
    channel: Channel
    interpolated: tuple = ()


def nonfinite_runs(x) -> list[tuple[int, int]]:
    """Return the runs of NaN/inf samples as ``(start, stop)`` (stop exclusive).

    Examples
    --------
    >>> nonfinite_runs(np.array([1.0, np.nan, np.nan, 2.0, np.inf]))
    [(1, 3), (4, 5)]
    """
    return _runs(~np.isfinite(np.asarray(x)))


def fill_short_gaps(channel: Channel, max_samples: int = GAP_INTERP_MAX_SAMPLES):
    """Fill interior NaN/inf runs of at most ``max_samples`` by linear interpolation.

    Longer runs, and runs touching either end of the record, are left as they
    are (never zero-filled). The channel's history is unchanged: record the
    returned ranges wherever the result is reported.

    Returns
    -------
    channel : Channel
        A copy with the short gaps filled (float64), or ``channel`` itself if
        none were.
    filled : list of (int, int)
        The filled sample ranges.

    Examples
    --------
    >>> ch = Channel(np.array([0.0, 1.0, np.nan, 3.0, 4.0]), fs=1.0)
    >>> out, filled = fill_short_gaps(ch)
    >>> out.data.tolist(), filled
    ([0.0, 1.0, 2.0, 3.0, 4.0], [(2, 3)])
    """
    max_samples = check_int(max_samples, "max_samples", low=0)
    x = channel.data
    runs = [(a, b) for a, b in nonfinite_runs(x) if b - a <= max_samples and a > 0 and b < x.size]
    if not runs:
        return channel, []
    y = x.astype(np.float64)
    good = np.isfinite(y)
    idx = np.arange(y.size)
    for a, b in runs:
        y[a:b] = np.interp(idx[a:b], idx[good], y[good])
    return channel.replace(data=y), runs


def split_valid_segments(channel: Channel, max_interp_samples: int = GAP_INTERP_MAX_SAMPLES,
                         min_samples: int = MIN_SEGMENT_SAMPLES, timestamps=None) -> list[Segment]:
    """Apply the gap policy: fill very short gaps, split at the rest.

    Parameters
    ----------
    channel : Channel
    max_interp_samples : int, default 3
        Interior NaN/inf runs up to this length are linearly interpolated.
    min_samples : int, default 16
        Continuous stretches shorter than this are dropped.
    timestamps : array_like, optional
        The time column (s) the channel was read with; the record is also split
        where consecutive stamps differ by more than 1.5 median intervals.

    Returns
    -------
    list of Segment
        Each with its sample range in the original channel and a cropped
        channel whose ``start_time`` is that of its first sample.

    Examples
    --------
    >>> x = np.ones(100); x[40:60] = np.nan
    >>> [(s.start, s.stop) for s in split_valid_segments(Channel(x, fs=10.0))]
    [(0, 40), (60, 100)]
    """
    min_samples = check_int(min_samples, "min_samples", low=2)
    filled_channel, filled = fill_short_gaps(channel, max_interp_samples)
    good = np.isfinite(filled_channel.data)
    if timestamps is not None:
        t = np.asarray(timestamps, dtype=np.float64)
        if t.shape != (channel.n_samples,):
            raise SigtuneError(f"the time column has {t.size} values but channel {channel.name!r} has "
                               f"{channel.n_samples} samples", "timestamps")
        dt = np.diff(t)
        positive = dt[dt > 0]
        limit = TIMEBASE_GAP_FACTOR * np.median(positive) if positive.size else np.inf
        cuts = (np.flatnonzero(dt > limit) + 1).tolist()
    else:
        cuts = []
    segments = []
    for run_start, run_stop in _runs(good):
        inner = [c for c in cuts if run_start < c < run_stop]  # a time gap inside a finite run splits it
        for a, b in zip([run_start] + inner, inner + [run_stop]):
            if b - a < min_samples:
                continue
            ch = channel.replace(data=filled_channel.data[a:b], start_time=channel.start_time + a / channel.fs)
            segments.append(Segment(a, b, ch, tuple((fa, fb) for fa, fb in filled if a <= fa and fb <= b)))
    return segments


# ---------------------------------------------------------------- IEPE settling and gravity
def iepe_settling(channel: Channel, window_s: float = IEPE_WINDOW_S) -> Finding | None:
    """Look for the slow exponential settling of an IEPE sensor at the start of a record.

    The rule (module notes): 0.1 s block means over the first ``min(window_s,
    duration / 3)`` s; reference level and spread (median, 1.4826 MAD) from
    the later blocks; flagged when the first block is more than 5 spreads off,
    the deviation keeps its sign until it falls below 5 spreads, and it has
    shrunk at least 3-fold by the end of the window.

    Returns
    -------
    Finding or None
        Covering the samples from 0 to where the level has settled.
    """
    x = np.asarray(channel.data, dtype=np.float64)
    block = max(1, int(round(IEPE_BLOCK_S * channel.fs)))
    n_blocks = x.size // block
    head = int(min(window_s, channel.duration / 3.0) / (block / channel.fs))
    if head < 5 or n_blocks - head < 5:
        return None
    means = x[:n_blocks * block].reshape(n_blocks, block).mean(axis=1)
    rest = means[head:]
    level = float(np.median(rest))
    spread = float(sps.median_abs_deviation(rest, scale="normal"))
    if spread == 0:
        return None
    dev = means[:head] - level
    limit = IEPE_SPREADS * spread
    if abs(dev[0]) <= limit:
        return None
    inside = np.flatnonzero(np.abs(dev) <= limit)
    settled = int(inside[0]) if inside.size else head
    if np.any(np.sign(dev[:settled]) != np.sign(dev[0])) or abs(dev[0]) < IEPE_DECAY * abs(dev[head - 1]):
        return None
    below = np.flatnonzero(np.abs(dev) < abs(dev[0]) / math.e)
    tau = f"; time constant about {below[0] * block / channel.fs:.2g} s" if below.size else ""
    stop = settled * block
    return Finding("iepe_settling", "warning", 0, stop,
                   f"starts {abs(dev[0]):.3g} {channel.unit} off its later level ({level:.3g} {channel.unit}) "
                   f"and approaches it exponentially{tau}; settled after {stop / channel.fs:.3g} s",
                   f"crop the first {stop / channel.fs:.3g} s, or power the IEPE sensor for at least 10 "
                   f"time constants before recording")


def gravity_check(channel: Channel, expected_g: float = 1.0,
                  tolerance_g: float = GRAVITY_TOLERANCE_G) -> tuple[float, Finding | None]:
    """Check that a DC-coupled acceleration channel at rest reads ``expected_g`` in its unit.

    Returns
    -------
    mean_g : float
        The channel's mean in g.
    finding : Finding or None
        A warning if ``|mean_g| - expected_g`` exceeds ``tolerance_g``; it names
        any acceleration unit in which the samples would read right.

    Examples
    --------
    >>> ch = Channel(np.full(100, 9.81), fs=100.0, unit="g")  # the samples are really m/s^2
    >>> mean_g, f = gravity_check(ch)
    >>> "m/s^2" in f.message
    True
    """
    if channel.quantity != "acceleration":
        raise SigtuneError(f"the gravity check needs an acceleration channel; {channel.name!r} is "
                           f"{channel.quantity} ({channel.unit})", "dc_coupled")
    finite = channel.data[np.isfinite(channel.data)]
    value = float(np.mean(finite, dtype=np.float64))
    mean_g = value * unit_info(channel.unit).to_si / STANDARD_GRAVITY
    if abs(abs(mean_g) - expected_g) <= tolerance_g:
        return mean_g, None
    fits = [u.symbol for u in UNITS.values() if u.quantity == "acceleration" and u.symbol != channel.unit
            and abs(abs(value * u.to_si / STANDARD_GRAVITY) - expected_g) <= tolerance_g]
    hint = f"; the samples would read right in {' or '.join(fits)}" if fits else ""
    return mean_g, Finding(
        "gravity", "warning", 0, channel.n_samples,
        f"a DC-coupled axis at rest should read {expected_g:g} g; the mean is {value:.4g} {channel.unit} "
        f"= {mean_g:.4g} g{hint}",
        "check the declared unit and the sensitivity; for a horizontal axis pass expected_gravity_g=0")


# ---------------------------------------------------------------- timebase
@dataclass(frozen=True)
class TimebaseReport:
    """Result of :func:`check_timebase` (times in s, rates in Hz)."""

    n_samples: int
    monotonic: bool
    n_duplicates: int
    n_backward: int
    n_gaps: int
    missing_samples: int
    median_interval_s: float
    jitter_rms_s: float
    fs_fitted: float
    fs_nominal: float | None
    rate_error_ppm: float | None
    findings: tuple = ()

    def to_dict(self) -> dict[str, Any]:
        """Return the report as JSON-ready data."""
        data = asdict(self)
        data["findings"] = [f.to_dict() for f in self.findings]
        return data


def check_timebase(timestamps, fs_nominal: float | None = None) -> TimebaseReport:
    """Check a recording's time column.

    Duplicates (zero intervals) and backward steps are errors; a gap is an
    interval above 1.5 median intervals. Each sample is given its nominal slot
    (gaps count their missing slots), and the least-squares line through time
    against slot gives the fitted rate; the RMS of the residuals is the jitter
    (a warning above 10 % of the interval). Gaps, the fit and the jitter use
    the distinct times in sorted order. The fitted rate differing from
    ``fs_nominal`` by more than 1000 ppm is a warning.

    Parameters
    ----------
    timestamps : array_like
        Times in s, one per sample (at least 3).
    fs_nominal : float, optional
        The rate the recorder claims, in Hz.

    Examples
    --------
    >>> t = np.arange(1000) / 1000.0 * (1 + 50e-6)  # clock running 50 ppm slow
    >>> r = check_timebase(t, fs_nominal=1000.0)
    >>> round(r.rate_error_ppm), r.monotonic, r.n_gaps
    (-50, True, 0)
    """
    t = np.asarray(timestamps, dtype=np.float64)
    if t.ndim != 1 or t.size < 3 or not np.all(np.isfinite(t)):
        raise SigtuneError(f"needs a 1-D column of at least 3 finite times in s; got shape {t.shape}",
                           "timestamps")
    if fs_nominal is not None:
        fs_nominal = check_number(fs_nominal, "fs_nominal", low=0, low_open=True, unit="Hz")
    dt = np.diff(t)
    positive = dt > 0
    if not positive.any():
        raise SigtuneError("the time column never increases", "timestamps")
    step = float(np.median(dt[positive]))
    findings = []
    for kind, mask, text in (("duplicate", dt == 0, "repeats the time"), ("backward", dt < 0, "steps back")):
        found = [Finding("timebase", "error", i, i + 2, f"sample {i + 1} {text} ({t[i + 1]:.9g} s after "
                         f"{t[i]:.9g} s)", "fix the time column at its source; sigtune will not reorder samples")
                 for i in np.flatnonzero(mask)]
        findings += _capped(found, f"{kind} time")
    # Gaps and the rate come from the sorted distinct times, so a swapped pair or a repeat is not also
    # counted as a gap; findings map back to sample indices.
    order = np.argsort(t, kind="stable")
    distinct = np.concatenate(([True], np.diff(t[order]) > 0))
    order = order[distinct]
    ts = t[order]
    dts = np.diff(ts)
    slots = np.maximum(1, np.rint(dts / step))
    gaps = np.flatnonzero(dts > TIMEBASE_GAP_FACTOR * step)
    missing = int(np.sum(slots[gaps] - 1))
    gap_findings = []
    for j in gaps:
        a, b = sorted((int(order[j]), int(order[j + 1])))
        gap_findings.append(Finding("timebase", "warning", a, b + 1, f"gap of {dts[j]:.6g} s after sample {a} "
                                    f"(about {int(slots[j]) - 1} samples missing)",
                                    "the gap policy splits the record here"))
    findings += _capped(gap_findings, "gap")
    k = np.concatenate(([0.0], np.cumsum(slots)))
    tk = ts - ts[0]
    slope, intercept = np.polyfit(k, tk, 1)
    jitter = float(np.sqrt(np.mean((tk - (slope * k + intercept)) ** 2)))
    fs_fit = 1.0 / slope
    ppm = (fs_fit / fs_nominal - 1.0) * 1e6 if fs_nominal else None
    if jitter > TIMEBASE_JITTER_FRACTION * step:
        findings.append(Finding("timebase", "warning", 0, t.size,
                                f"time jitter RMS {jitter:.3g} s is {jitter / step:.0%} of the interval",
                                "check the logger's clock; spectra above a few % of fs are smeared"))
    if ppm is not None and abs(ppm) > TIMEBASE_RATE_PPM:
        findings.append(Finding("timebase", "warning", 0, t.size,
                                f"fitted rate {fs_fit:.6g} Hz differs from the nominal {fs_nominal:g} Hz by "
                                f"{ppm:.0f} ppm", "use the fitted rate, or check the declared one"))
    return TimebaseReport(t.size, bool(np.all(positive)), int(np.sum(dt == 0)), int(np.sum(dt < 0)),
                          int(gaps.size), missing, step, jitter, float(fs_fit), fs_nominal,
                          None if ppm is None else float(ppm), tuple(sorted(findings, key=lambda f: f.start)))


# ---------------------------------------------------------------- the audit
@dataclass(frozen=True)
class AuditReport:
    """Result of :func:`audit`.

    Attributes
    ----------
    channel, unit : str
    fs : float
        Hz.
    n_samples : int
    valid_duration_s : float
        Total duration of the valid segments the metrics used.
    stats : dict
        ``signal_stats`` keys plus ``stationarity``, ``distribution``,
        ``alias_risk``, ``gravity_g``, ``valid_duration_s``.
    findings : list of Finding
        Ordered by start sample.
    segments : list of (int, int)
        The valid sample ranges.
    settings : dict
        Every threshold used.
    timebase : TimebaseReport or None
    """

    channel: str
    unit: str
    fs: float
    n_samples: int
    valid_duration_s: float
    stats: dict
    findings: list
    segments: list
    settings: dict
    start_time: float = 0.0
    timebase: TimebaseReport | None = None

    @property
    def worst_severity(self) -> str | None:
        """The most severe finding's severity, or None when there are none."""
        levels = [SEVERITIES.index(f.severity) for f in self.findings]
        return SEVERITIES[max(levels)] if levels else None

    def by_kind(self, kind: str) -> list[Finding]:
        """Return the findings of one kind."""
        return [f for f in self.findings if f.kind == kind]

    def to_dict(self) -> dict[str, Any]:
        """Return the report as JSON-ready data (``json.dumps`` works on it)."""
        data = {
            "kind": "audit", "channel": self.channel, "unit": self.unit, "fs": self.fs,
            "n_samples": self.n_samples, "start_time": self.start_time,
            "valid_duration_s": self.valid_duration_s, "stats": _json_ready(self.stats),
            "findings": [f.to_dict(self.fs, self.start_time) for f in self.findings],
            "segments": [list(s) for s in self.segments], "settings": dict(self.settings),
            "timebase": self.timebase.to_dict() if self.timebase else None,
        }
        return json.loads(json.dumps(data, default=_json_default))

    def to_table(self) -> dict[str, list]:
        """Return the findings as columns ``{"kind": [...], "severity": [...], ...}``."""
        rows = [f.to_dict(self.fs, self.start_time) for f in self.findings]
        columns = ("kind", "severity", "start", "stop", "start_s", "stop_s", "message", "advice")
        return {c: [r[c] for r in rows] for c in columns}

    def stats_table(self) -> dict[str, list]:
        """Return the scalar statistics as columns ``{"statistic": [...], "value": [...]}``."""
        names = [k for k, v in self.stats.items() if isinstance(v, (int, float)) or v is None]
        return {"statistic": names, "value": [self.stats[k] for k in names]}


def _json_default(value):
    if hasattr(value, "to_dict"):
        return value.to_dict()
    if hasattr(value, "item"):
        return value.item()
    return str(value)


def _json_ready(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None  # JSON has no NaN/inf
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_ready(v) for v in value]
    return value


def _alias_indicator(channel: Channel):
    """The resample module's alias-risk indicator, imported here so this module loads without it."""
    try:
        from .resampling import alias_risk
    except ImportError:
        return None
    try:
        result = alias_risk(channel)
    except SigtuneError as err:  # e.g. a segment too short for its spectrum: say so, audit the rest
        return {"level": None, "note": str(err)}
    return result.to_dict() if hasattr(result, "to_dict") else result


def _stationarity(x: np.ndarray, n_segments: int, alpha: float) -> dict | None:
    if x.size < n_segments * 8:
        return None  # too few samples per segment for a meaningful mean square
    seg = x.size // n_segments
    ms = np.mean(np.square(x[:seg * n_segments] - np.mean(x)).reshape(n_segments, seg), axis=1)
    return reverse_arrangements_test(ms, alpha).to_dict()


def _distribution(x: np.ndarray, std: float) -> dict:
    if std == 0:
        return {"ks_distance": None, "non_gaussian": None}
    stride = -(-x.size // KS_MAX_SAMPLES)  # sorting 10^7 samples costs seconds; 10^6 pin D to +-0.002
    sample = x[::stride]
    d = float(sps.kstest((sample - np.mean(x)) / std, "norm").statistic)
    critical = KS_CRITICAL_1PCT / math.sqrt(sample.size)
    return {"ks_distance": d, "ks_critical_1pct": critical, "ks_samples": int(sample.size),
            "non_gaussian": bool(d > KS_EFFECT and d > critical)}


def audit(channel: Channel, full_scale: float | None = None, *, timestamps=None,
          fs_nominal: float | None = None, dc_coupled: bool | None = None, expected_gravity_g: float = 1.0,
          alpha: float = 0.05, n_segments: int = 20, clip_min_run: int = CLIP_MIN_RUN,
          dropout_min_run: int = DROPOUT_MIN_RUN, spike_threshold: float = SPIKE_THRESHOLD,
          max_interp_samples: int = GAP_INTERP_MAX_SAMPLES, iepe: bool = True) -> AuditReport:
    """Audit a channel for the defects that spoil vibration measurements.

    Parameters
    ----------
    channel : Channel
    full_scale : float, optional
        The acquisition range in the channel's unit (peak); samples at >= 99 %
        of it count as clipped.
    timestamps : array_like, optional
        The time column (s) the channel was read with (``Recording.timestamps``):
        runs :func:`check_timebase` and splits at its gaps.
    fs_nominal : float, optional
        The recorder's stated rate (Hz) for the timebase check; default the channel's ``fs``.
    dc_coupled : bool, optional
        True for a DC-coupled axis at rest: checks it reads ``expected_gravity_g``.
        Default ``channel.metadata.get("dc_coupled", False)``.
    expected_gravity_g : float, default 1.0
        What the axis should read at rest, in g (0 for a horizontal axis).
    alpha : float, default 0.05
        Significance of the reverse-arrangements test.
    n_segments : int, default 20
        Segments for the stationarity test.
    clip_min_run, dropout_min_run : int, default 3, 10
        Minimum run lengths (samples) for clipping and drop-outs.
    spike_threshold : float, default 8.0
        Robust z-score of the first differences above which a sample is a spike.
    max_interp_samples : int, default 3
        Longest NaN run filled by interpolation (gap policy).
    iepe : bool, default True
        Run the IEPE settling check.

    Returns
    -------
    AuditReport

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> x = rng.standard_normal(20000); x[5000:5040] = 0.0
    >>> report = audit(Channel(x, fs=1000.0))
    >>> [(f.start, f.stop, f.severity) for f in report.by_kind("dropout")]
    [(5000, 5040, 'error')]
    """
    if full_scale is not None:
        full_scale = check_number(full_scale, "full_scale", low=0, low_open=True, unit=channel.unit)
    alpha = check_number(alpha, "alpha", low=0, high=1, low_open=True, high_open=True)
    n_segments = check_int(n_segments, "n_segments", low=3, high=1000)
    clip_min_run = check_int(clip_min_run, "clip_min_run", low=2)
    dropout_min_run = check_int(dropout_min_run, "dropout_min_run", low=2)
    spike_threshold = check_number(spike_threshold, "spike_threshold", low=0, low_open=True)
    if dc_coupled is None:
        dc_coupled = bool(channel.metadata.get("dc_coupled", False))
    settings = {
        "full_scale": full_scale, "clip_full_scale_fraction": CLIP_FULL_SCALE_FRACTION,
        "clip_min_run": clip_min_run, "dropout_min_run": dropout_min_run, "spike_threshold": spike_threshold,
        "spike_score": "0.6745 (d - median(d)) / MAD(d) on first differences d",
        "dc_offset_ratio": DC_OFFSET_RATIO, "alpha": alpha, "n_segments": n_segments,
        "ks_effect": KS_EFFECT, "max_interp_samples": max_interp_samples,
        "min_segment_samples": MIN_SEGMENT_SAMPLES, "dc_coupled": dc_coupled,
        "expected_gravity_g": expected_gravity_g, "gravity_tolerance_g": GRAVITY_TOLERANCE_G,
    }
    findings: list[Finding] = []
    timebase = None
    if timestamps is not None:
        timebase = check_timebase(timestamps, fs_nominal or channel.fs)
        findings += list(timebase.findings)
    findings += _gap_findings(channel, max_interp_samples)
    segments = split_valid_segments(channel, max_interp_samples, timestamps=timestamps)
    common = dict(channel=channel.name, unit=channel.unit, fs=channel.fs, n_samples=channel.n_samples,
                  settings=settings, start_time=channel.start_time, timebase=timebase)
    if not segments:
        findings.append(Finding("no_valid_data", "error", 0, channel.n_samples,
                                f"no continuous stretch of at least {MIN_SEGMENT_SAMPLES} finite samples",
                                "check the file and the channel selection"))
        return AuditReport(valid_duration_s=0.0, stats={}, findings=findings, segments=[], **common)
    valid = np.concatenate([np.asarray(s.channel.data, dtype=np.float64) for s in segments])
    stats = signal_stats(valid)
    stats["valid_duration_s"] = valid.size / channel.fs
    findings += _defects(segments, valid, full_scale, clip_min_run, dropout_min_run, spike_threshold,
                         channel.unit)
    longest = max(segments, key=lambda seg: seg.stop - seg.start).channel
    findings += _record_findings(channel, stats, valid, alpha, n_segments, dc_coupled, longest)
    if iepe:
        found = iepe_settling(segments[0].channel)
        if found:
            findings.append(Finding(found.kind, found.severity, found.start + segments[0].start,
                                    found.stop + segments[0].start, found.message, found.advice))
    if dc_coupled:
        stats["gravity_g"], found = gravity_check(channel, expected_gravity_g)
        findings += [found] if found else []
    findings.sort(key=lambda f: (f.start, f.stop, f.kind))
    return AuditReport(valid_duration_s=stats["valid_duration_s"], stats=stats, findings=findings,
                       segments=[(s.start, s.stop) for s in segments], **common)


def _gap_findings(channel: Channel, max_interp_samples: int) -> list[Finding]:
    _, filled = fill_short_gaps(channel, max_interp_samples)
    out = [Finding("interpolated_gap", "info", a, b, f"{b - a} non-finite sample(s) filled by linear "
                   f"interpolation", "short gaps only; check the acquisition if they recur") for a, b in filled]
    long_runs = [(a, b) for a, b in nonfinite_runs(channel.data) if (a, b) not in filled]
    out += [Finding("nan", "error", a, b, f"{b - a} non-finite samples ({(b - a) / channel.fs:.4g} s)",
                    "the record is split here and each continuous segment is processed on its own")
            for a, b in long_runs]
    return _capped(out, "gap")


def _defects(segments, valid, full_scale, clip_min_run, dropout_min_run, spike_threshold, unit):
    extremes = (float(valid.max()), float(valid.min()))
    clips, drops, spikes = [], [], []
    for seg in segments:
        x = np.asarray(seg.channel.data)
        clipped = _clipping(x, seg.start, extremes, full_scale, clip_min_run)
        clips += _clipping_findings(x, seg.start, clipped, CLIP_EPISODE_GAP_S * seg.channel.fs, unit)
        drops += [Finding("dropout", "error", a, b, f"{b - a} samples held at "
                          f"{'zero' if v == 0 else f'{v:.6g} {unit}'}",
                          "check cable and connector; exclude the range from metrics")
                  for a, b, v in _dropouts(x, seg.start, dropout_min_run, [(a - seg.start, b - seg.start)
                                                                           for a, b in clipped])]
        for kind, a, b, z in _spikes(x, seg.start, spike_threshold):
            what = "level returns" if kind == "spike" else "level changes and stays"
            spikes.append(Finding(kind, "warning", a, b, f"robust z-score {z:.1f} of the sample differences "
                                  f"(threshold {spike_threshold:g}); {what}",
                                  "look for electrical interference or a loose connection; exclude or "
                                  "repair the range before peak and crest-factor values"))
    return _capped(clips, "clipping") + _capped(drops, "dropout") + _capped(spikes, "spike")


def _record_findings(channel, stats, valid, alpha, n_segments, dc_coupled, longest) -> list[Finding]:
    n = channel.n_samples
    out = []
    if stats["dc_offset_ratio"] > DC_OFFSET_RATIO and not dc_coupled:
        out.append(Finding("dc_offset", "warning", 0, n,
                           f"mean {stats['mean']:.4g} {channel.unit} is {stats['dc_offset_ratio']:.1%} of the "
                           f"AC RMS ({stats['std']:.4g} {channel.unit})",
                           "remove it (Detrend) before integrating or reading peaks; check the sensor's bias"))
    stationarity = _stationarity(valid, n_segments, alpha)
    if stationarity is not None:
        stationarity["segment_s"] = valid.size // n_segments / channel.fs
    stats["stationarity"] = stationarity
    if stationarity and not stationarity["stationary"]:
        out.append(Finding("nonstationary", "info", 0, n,
                           f"reverse arrangements A={stationarity['arrangements']} outside "
                           f"{stationarity['lower']} < A <= {stationarity['upper']} for {n_segments} segment "
                           f"mean squares (alpha={alpha:g})",
                           "the level trends over the record; report per segment or a running RMS"))
    stats["distribution"] = _distribution(valid, stats["std"])
    if stats["distribution"]["non_gaussian"]:
        out.append(Finding("non_gaussian", "info", 0, n,
                           f"amplitude distribution differs from Gaussian: KS distance "
                           f"{stats['distribution']['ks_distance']:.3f}, skewness {stats['skewness']:.2f}, "
                           f"kurtosis {stats['kurtosis']:.2f} (Gaussian 0 and 3)",
                           "expected for tones and impacts; Gaussian-based peak estimates do not apply"))
    risk = _alias_indicator(longest)
    stats["alias_risk"] = risk
    level = risk.get("level") if isinstance(risk, dict) else None
    if level in ("elevated", "high"):
        share = risk.get("fraction_near_nyquist")
        share_text = f"{share:.2%} of the power" if isinstance(share, (int, float)) else "power"
        out.append(Finding("alias_risk", "warning" if level == "high" else "info", 0, n,
                           f"{level} alias risk: {share_text} lies just below Nyquist ({channel.nyquist:g} Hz)",
                           "check the anti-alias filter; content folded from above Nyquist cannot be removed "
                           "afterwards"))
    return out
