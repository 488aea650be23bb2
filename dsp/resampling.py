"""Resampling without aliasing, band-limited interpolation and where frequencies fold.

:class:`Resample` (op ``"resample"``) changes the sample rate by a rational
factor ``p/q`` with a polyphase FIR (:func:`scipy.signal.resample_poly`) whose
anti-alias filter is designed here, from stated edges, rather than scipy's
default (which is only about -6 dB at the new Nyquist):

passband edge
    ``passband_fraction * f_limit``, default ``f_limit / 1.28``; for a rate
    reduction ``f_limit`` is the new Nyquist, so the usable bandwidth is
    ``fs_out / 2.56``, the common oversampling ratio.
stopband edge
    ``f_limit = min(fs_in, fs_out) / 2``: the new Nyquist when reducing the
    rate, the old one (no images) when raising it.
stopband attenuation
    ``attenuation_db`` (default 90 dB) from the stopband edge up, checked on
    the designed filter's response (the Kaiser estimate is lengthened until it
    holds).

Edge effects: the FIR reaches half its length into the record, so samples
within that distance of each end mix the record with the padding (mean
removed, then a straight line continued beyond each end). That distance is
reported per end as ``info["edge_zones_s"]``.

Also here: :func:`sinc_interpolate` (Whittaker-Shannon reconstruction at
arbitrary instants), :func:`alias_frequency` and :func:`alias_table` (where a
tone appears after sampling), :func:`oversampling_ratio` and
:func:`alias_risk` (a hint from the spectrum near Nyquist).
"""

from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass
from fractions import Fraction
from typing import ClassVar

import numpy as np
from scipy import signal

from ._validate import check_choice, check_fs, check_int, check_number, check_samples
from .channel import Channel
from .errors import SigtuneError, SigtuneWarning
from .steps import Step, register_step

__all__ = ["Resample", "resample", "resample_plan", "sinc_interpolate", "alias_frequency", "alias_table",
           "oversampling_ratio", "alias_risk", "COMMON_OVERSAMPLING_RATIO"]

#: Sample rate / usable bandwidth commonly used by vibration analysers (common practice).
COMMON_OVERSAMPLING_RATIO = 2.56
#: Integer rate reductions above this factor run in stages ...
STAGED_ABOVE_FACTOR = 16
#: ... each of at most this factor (except a prime factor larger than it).
MAX_STAGE_FACTOR = 8
#: A rate error above this relative value (0.1 %) is warned about.
RATE_ERROR_WARNING = 1e-3


def _pack_stages(factor: int) -> list[int]:
    """Split an integer factor into stages of at most MAX_STAGE_FACTOR, largest first.

    Prime factors are packed greedily (largest first) into the stage with the
    most room; a prime larger than MAX_STAGE_FACTOR is a stage of its own.
    """
    primes, n, p = [], factor, 2
    while p * p <= n:
        while n % p == 0:
            primes.append(p)
            n //= p
        p += 1
    if n > 1:
        primes.append(n)
    stages: list[int] = []
    for prime in sorted(primes, reverse=True):
        fits = [i for i, s in enumerate(stages) if s * prime <= MAX_STAGE_FACTOR]
        if fits:
            best = min(fits, key=lambda i: stages[i])
            stages[best] *= prime
        else:
            stages.append(prime)
    return sorted(stages, reverse=True)


@functools.lru_cache(maxsize=128)
def _anti_alias_fir(up: int, pass_rel: float, stop_rel: float, attenuation_db: float) -> tuple:
    """Design the Kaiser-window FIR at the upsampled rate; edges are fractions of that rate.

    Returns ``(taps, measured_attenuation_db, passband_ripple_db)``; taps are
    read-only, odd in number (so resample_poly can centre them), unit DC gain.
    """
    width = 2.0 * (stop_rel - pass_rel)  # as a fraction of the upsampled Nyquist
    numtaps, beta = signal.kaiserord(attenuation_db, width)
    numtaps += 1 - numtaps % 2
    cutoff = 0.5 * (pass_rel + stop_rel)  # a Kaiser-windowed sinc is -6 dB midway through the transition
    for _ in range(20):
        taps = signal.firwin(numtaps, cutoff, window=("kaiser", beta), fs=1.0)
        n_fft = 1 << max(16, math.ceil(math.log2(numtaps * 16)))
        freqs = np.fft.rfftfreq(n_fft)
        gain = np.abs(np.fft.rfft(taps, n_fft))
        stop = gain[freqs >= stop_rel].max()
        with np.errstate(divide="ignore"):
            measured = -20.0 * math.log10(stop) if stop > 0 else math.inf
        if measured >= attenuation_db:
            break
        numtaps += 2 * max(1, numtaps // 40)  # the Kaiser estimate fell short: lengthen by ~5 %
    passband = gain[freqs <= pass_rel]
    ripple_db = float(20.0 * np.log10(passband.max() / passband.min()))
    taps.flags.writeable = False
    return taps, float(measured), ripple_db


def resample_plan(fs_in: float, up: int, down: int, attenuation_db: float = 90.0,
                  passband_fraction: float = 2 / COMMON_OVERSAMPLING_RATIO) -> list[dict]:
    """Return the stages that change ``fs_in`` by ``up/down``, each with its anti-alias FIR.

    Parameters
    ----------
    fs_in : float
        Input rate in Hz.
    up, down : int
        The rational factor, in lowest terms.
    attenuation_db : float, default 90.0
        Stopband attenuation, dB.
    passband_fraction : float, default 1/1.28
        Passband edge as a fraction of the stopband edge.

    Returns
    -------
    list of dict
        One per stage: ``up``, ``down``, ``fs_in``, ``fs_out`` (Hz),
        ``passband_hz``, ``stopband_hz``, ``taps`` (ndarray),
        ``attenuation_db`` (measured on the designed filter),
        ``passband_ripple_db`` and ``half_length_s`` (how far the FIR reaches
        into the record, s). An integer rate reduction by more than 16 runs in
        stages of at most 8 each: intermediate stages keep the final passband
        and stop everything that would fold below the final Nyquist, so the
        result is as clean as one long filter at a fraction of the cost.

    Examples
    --------
    >>> [(s["down"], s["fs_out"]) for s in resample_plan(51200.0, 1, 64)]
    [(8, 6400.0), (8, 800.0)]
    """
    fs_out = fs_in * up / down
    f_stop = min(fs_in, fs_out) / 2.0
    f_pass = passband_fraction * f_stop
    factors = _pack_stages(down) if up == 1 and down > STAGED_ABOVE_FACTOR else [None]
    stages, rate = [], fs_in
    for i, factor in enumerate(factors):
        s_up, s_down = (up, down) if factor is None else (1, factor)
        rate_out = rate * s_up / s_down
        last = i == len(factors) - 1
        # an intermediate stage need only stop what would fold below the final Nyquist
        stop = f_stop if last else rate_out - f_stop
        high_rate = rate * s_up
        taps, measured, ripple = _anti_alias_fir(s_up, f_pass / high_rate, stop / high_rate, attenuation_db)
        stages.append({"up": s_up, "down": s_down, "fs_in": rate, "fs_out": rate_out,
                       "passband_hz": f_pass, "stopband_hz": stop, "taps": taps,
                       "attenuation_db": measured, "passband_ripple_db": ripple,
                       "half_length_s": (taps.size - 1) / 2 / high_rate})
        rate = rate_out
    return stages


def _rational(ratio: float, max_denominator: int) -> Fraction:
    return Fraction(ratio).limit_denominator(max_denominator)


@register_step
@dataclass(frozen=True)
class Resample(Step):
    """Change the sample rate with a stated anti-alias filter (op ``"resample"``).

    Parameters
    ----------
    fs_out : float, optional
        Target rate in Hz. Give this or ``ratio``.
    ratio : float or (int, int), optional
        ``fs_out / fs_in`` as a number, or exactly as a pair ``(p, q)``.
    attenuation_db : float, default 90.0
        Stopband attenuation at and above the stopband edge (the new
        Nyquist when reducing the rate), dB; 20 to 200.
    passband_fraction : float, default 1/1.28
        Passband edge as a fraction of the stopband edge; the default makes
        the usable bandwidth ``fs_out / 2.56``. Between 0.5 and 0.98.
    max_denominator : int, default 4096
        Largest ``q`` tried when approximating the target by ``p/q``
        (:meth:`fractions.Fraction.limit_denominator`); larger is more exact
        but the filter grows with ``max(p, q)``.
    energy_warning_fraction : float, default 0.01
        Warn when more than this share of the record's energy lies above the
        new usable band. Measured as the share of the variance (mean removed)
        that the anti-alias filter takes out, ``1 - var(out) / var(in)``:
        the content above the usable band, give or take what lies in the
        transition band. Costs two sums of squares, not a spectrum.

    Notes
    -----
    The output rate is the rate obtained, ``fs_in * p / q``; ``info`` reports
    it with its relative error from the target, the plan (stages, edges,
    measured attenuation, filter length) and the edge zones. The mean is
    removed before filtering and restored after (so an offset does not ring at
    the ends); beyond the ends a straight line is assumed
    (``padtype="line"``). Decimation is never done by slicing. A factor of
    exactly 1 returns the samples unchanged (``info["unchanged"]``), since
    filtering would only narrow the band.

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Channel
    >>> t = np.arange(5120) / 5120.0
    >>> out = Resample(fs_out=2000.0).apply(Channel(np.sin(2 * np.pi * 50 * t), 5120.0))
    >>> out.fs, out.history[-1]["info"]["ratio"]
    (2000.0, [25, 64])
    """

    op: ClassVar[str] = "resample"
    fs_out: float | None = None
    ratio: float | tuple[int, int] | None = None
    attenuation_db: float = 90.0
    passband_fraction: float = 2 / COMMON_OVERSAMPLING_RATIO  # = 1/1.28: usable band fs_out/2.56
    max_denominator: int = 4096
    energy_warning_fraction: float = 0.01

    def __post_init__(self):
        set_ = functools.partial(object.__setattr__, self)
        if (self.fs_out is None) == (self.ratio is None):
            raise SigtuneError("give exactly one of fs_out (Hz) or ratio (fs_out/fs_in, or a pair [p, q]); "
                               f"got fs_out={self.fs_out!r}, ratio={self.ratio!r}", "resample")
        if self.fs_out is not None:
            set_("fs_out", check_fs(self.fs_out, "fs_out"))
        elif isinstance(self.ratio, (list, tuple)):
            if len(self.ratio) != 2:
                raise SigtuneError(f"a ratio pair must be [p, q]; got {list(self.ratio)!r}", "ratio")
            p, q = (check_int(v, "ratio", low=1) for v in self.ratio)
            f = Fraction(p, q)
            set_("ratio", (f.numerator, f.denominator))
        else:
            set_("ratio", check_number(self.ratio, "ratio", low=0, low_open=True))
        set_("attenuation_db", check_number(self.attenuation_db, "attenuation_db", low=20, high=200, unit="dB"))
        set_("passband_fraction", check_number(self.passband_fraction, "passband_fraction", low=0.5, high=0.98))
        set_("max_denominator", check_int(self.max_denominator, "max_denominator", low=1, high=100_000))
        set_("energy_warning_fraction", check_number(self.energy_warning_fraction, "energy_warning_fraction",
                                                     low=0, high=1))

    def factor(self, fs: float) -> Fraction:
        """The rational factor ``p/q`` used at input rate ``fs`` (Hz)."""
        if isinstance(self.ratio, tuple):
            return Fraction(*self.ratio)
        target = self.ratio if self.ratio is not None else self.fs_out / fs
        factor = _rational(target, self.max_denominator)
        if factor == 0:
            raise SigtuneError(f"fs_out={target * fs:g} Hz is below fs/{self.max_denominator} for fs={fs:g} Hz; "
                               "raise max_denominator or resample in two steps", "fs_out")
        return factor

    def plan(self, fs: float) -> list[dict]:
        """The stages and their filters for input rate ``fs`` (Hz); see :func:`resample_plan`."""
        f = self.factor(check_fs(fs))
        return resample_plan(fs, f.numerator, f.denominator, self.attenuation_db, self.passband_fraction)

    def process(self, channel: Channel):
        fs = channel.fs
        factor = self.factor(fs)
        fs_obtained = fs * factor.numerator / factor.denominator
        target = self.fs_out if self.fs_out is not None else fs * float(
            self.ratio if not isinstance(self.ratio, tuple) else Fraction(*self.ratio))
        rate_error = (fs_obtained - target) / target
        if abs(rate_error) > RATE_ERROR_WARNING:
            warnings.warn(f"channel {channel.name!r}: resampling to {target:g} Hz obtained {fs_obtained:g} Hz "
                          f"(error {rate_error:+.3%}); raise max_denominator for a closer rate",
                          SigtuneWarning, stacklevel=3)
        if factor == 1:  # same rate: filtering would only narrow the band, so the samples pass unchanged
            return channel, {"ratio": [1, 1], "fs_target": target, "fs_obtained": fs, "rate_error": rate_error,
                             "stages": [], "unchanged": True}
        stages = self.plan(fs)
        x = channel.data
        mean = float(np.mean(x, dtype=np.float64))
        y = x - mean
        n_out = -(-x.size * factor.numerator // factor.denominator)  # ceil: resample_poly's length
        if n_out < 2:
            raise SigtuneError(f"resampling {x.size} samples by {factor} leaves {n_out}; need at least 2",
                               f"channel {channel.name!r}")
        # einsum, not np.dot: dot goes through multithreaded BLAS, measured here at 8 ms for 4e4 samples on a
        # busy machine against 0.01 ms for einsum's plain loop
        variance_in = float(np.einsum("i,i->", y, y)) / x.size
        for stage in stages:
            y = signal.resample_poly(y, stage["up"], stage["down"], window=stage["taps"], padtype="line")
        variance_out = float(np.einsum("i,i->", y, y)) / y.size
        removed = 1.0 - variance_out / variance_in if variance_in > 0 else 0.0
        usable = stages[-1]["passband_hz"]
        if removed > self.energy_warning_fraction:
            warnings.warn(f"channel {channel.name!r}: {removed:.1%} of the signal's energy (mean removed) lies "
                          f"above the usable band of {usable:g} Hz at {fs_obtained:g} Hz and was removed "
                          f"(more than {self.energy_warning_fraction:.1%}). If that content matters, keep a "
                          f"higher rate", SigtuneWarning, stacklevel=3)
        y += mean
        out = channel.replace(data=y.astype(x.dtype, copy=False), fs=fs_obtained)
        return out, self._info(out, factor, target, fs_obtained, rate_error, stages, removed)

    @staticmethod
    def _info(out, factor, target, fs_obtained, rate_error, stages, removed) -> dict:
        reach = min(sum(s["half_length_s"] for s in stages), out.duration)
        t0, t1 = out.start_time, out.start_time + out.duration
        return {
            "ratio": [factor.numerator, factor.denominator], "fs_target": target, "fs_obtained": fs_obtained,
            "rate_error": rate_error, "passband_hz": stages[-1]["passband_hz"],
            "stopband_hz": stages[-1]["stopband_hz"],
            "attenuation_db": min(s["attenuation_db"] for s in stages),
            "stages": [{k: s[k] for k in ("up", "down", "fs_out", "passband_hz", "stopband_hz", "attenuation_db",
                                          "passband_ripple_db")} | {"taps": int(s["taps"].size)} for s in stages],
            "energy_removed_fraction": removed,
            "edge_zones_s": [[t0, t0 + reach], [t1 - reach, t1]],
        }


def resample(channel: Channel, fs_out: float, **options) -> Channel:
    """Resample ``channel`` to ``fs_out`` Hz (see :class:`Resample` for the options).

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Channel
    >>> resample(Channel(np.zeros(4410), 44100.0), 48000.0).n_samples
    4800
    """
    return Resample(fs_out=fs_out, **options).apply(channel)


# ---------------------------------------------------------------- interpolation
#: Kaiser beta of the interpolation kernel's window: with half_width=32 the
#: kernel's passband reaches 0.45 fs within 1e-5 (measured, see sinc_interpolate).
SINC_KAISER_BETA = 10.0
_SINC_BLOCK = 65536  # instants per vectorised block: bounds memory at block * 2 * half_width


def sinc_interpolate(x, fs: float, t, half_width: int = 32, window: str = "kaiser",
                     beta: float = SINC_KAISER_BETA) -> np.ndarray:
    """Whittaker-Shannon reconstruction of a band-limited signal at arbitrary instants.

    ``x(t) = sum_n x[n] sinc(fs t - n) w(fs t - n)``, truncated to the
    ``2 * half_width`` samples nearest each instant and tapered by a window
    ``w`` so that the truncation error stays small.

    Parameters
    ----------
    x : array_like or Channel
        Uniform samples; sample ``n`` is at ``n / fs`` s. For a Channel, ``t``
        is on its absolute time axis (including ``start_time``).
    fs : float
        Sample rate in Hz (ignored for a Channel: its own rate is used; pass None).
    t : array_like
        Instants in s, within the record (0 to ``(n - 1) / fs``).
    half_width : int, default 32
        Samples used on each side (4 to 1024).
    window : {"kaiser", "rectangular"}, default ``"kaiser"``
        ``"rectangular"`` is plain truncation, shown for comparison (errors of
        about 1e-3 to 1e-2).
    beta : float, default 10.0
        Kaiser window parameter.

    Returns
    -------
    ndarray
        Interpolated values, same shape as ``t``.

    Notes
    -----
    Error (measured on sums of random-phase sines, relative to the peak
    amplitude, at instants at least ``half_width`` samples from the ends, Kaiser
    beta 10): below 1e-5 for content up to ``fs/2 - 1.6 fs / half_width``,
    that is up to 0.45 fs with the default ``half_width=32`` (about 3e-6 up
    to 0.4 fs), 0.4 fs with 16, 0.475 fs with 64. Content closer to Nyquist
    falls in the kernel's transition band and is attenuated (errors of 1e-2
    within 0.03 fs of Nyquist at ``half_width=32``). Within ``half_width``
    samples of either end the sum lacks samples (taken as zero) and the error
    grows accordingly.

    Examples
    --------
    >>> fs = 100.0
    >>> n = np.arange(400)
    >>> x = np.sin(2 * np.pi * 7.3 * n / fs)
    >>> y = sinc_interpolate(x, fs, [1.2345, 2.0005])
    >>> bool(np.allclose(y, np.sin(2 * np.pi * 7.3 * np.array([1.2345, 2.0005])), atol=1e-5))
    True
    """
    if isinstance(x, Channel):
        t = np.asarray(t, dtype=float) - x.start_time
        fs, x = x.fs, x.data
    fs = check_fs(fs)
    samples = check_samples(x, "x").astype(np.float64, copy=False)
    half_width = check_int(half_width, "half_width", low=4, high=1024)
    check_choice(window, "window", ("kaiser", "rectangular"))
    beta = check_number(beta, "beta", low=0)
    t = np.asarray(t, dtype=float)
    end = (samples.size - 1) / fs
    if t.size and (not np.all(np.isfinite(t)) or t.min() < 0 or t.max() > end):
        raise SigtuneError(f"instants must lie within the record, 0 to {end:g} s; got {t.min():g} to "
                           f"{t.max():g} s", "t")
    u = t.ravel() * fs
    offsets = np.arange(-half_width + 1, half_width + 1)
    out = np.empty(u.size)
    for start in range(0, u.size, _SINC_BLOCK):
        ub = u[start:start + _SINC_BLOCK]
        index = np.floor(ub).astype(np.int64)[:, None] + offsets
        distance = ub[:, None] - index
        kernel = np.sinc(distance)
        if window == "kaiser":
            # the Kaiser window as a function of a continuous offset (np.kaiser only gives integer points)
            kernel *= np.i0(beta * np.sqrt(np.clip(1.0 - (distance / half_width) ** 2, 0.0, None))) / np.i0(beta)
        inside = (index >= 0) & (index < samples.size)
        out[start:start + _SINC_BLOCK] = np.sum(np.where(inside, samples[np.clip(index, 0, samples.size - 1)],
                                                         0.0) * kernel, axis=1)
    return out.reshape(t.shape)


# ---------------------------------------------------------------- aliasing
def alias_frequency(f, fs: float):
    """Where a frequency appears after sampling at ``fs``: folded onto 0..fs/2 (Hz).

    ``|f - fs * round(f / fs)|``, vectorised over ``f`` (Hz, >= 0).

    Examples
    --------
    >>> alias_frequency([1100.0, 1900.0, 2100.0, 400.0], 2000.0)
    array([900., 100., 100., 400.])
    """
    fs = check_fs(fs)
    f = np.asarray(f, dtype=float)
    if np.any(~np.isfinite(f)) or np.any(f < 0):
        raise SigtuneError(f"frequencies must be finite and >= 0 Hz; got {f[~(np.isfinite(f) & (f >= 0))][:3]}",
                           "f")
    folded = np.abs(f - fs * np.round(f / fs))
    return folded if folded.ndim else float(folded)


def alias_table(freqs, fs: float) -> list[dict]:
    """Where each tone appears after sampling at ``fs`` (Hz), as rows of a table.

    Returns
    -------
    list of dict
        ``frequency_hz``, ``apparent_hz`` (see :func:`alias_frequency`),
        ``folded`` (above Nyquist), ``zone`` (Nyquist zone: 1 for 0..fs/2, 2 for
        fs/2..fs ...), ``folds`` (``zone - 1``) and ``inverted`` (even zones
        appear mirrored: a tone rising in frequency appears falling).

    Examples
    --------
    >>> [(r["apparent_hz"], r["zone"]) for r in alias_table([900.0, 1100.0, 2100.0], 2000.0)]
    [(900.0, 1), (900.0, 2), (100.0, 3)]
    """
    freqs = np.atleast_1d(np.asarray(freqs, dtype=float))
    apparent = np.atleast_1d(alias_frequency(freqs, fs))
    nyquist = fs / 2.0
    rows = []
    for f, a in zip(freqs, apparent):
        zone = max(1, math.ceil(f / nyquist))
        rows.append({"frequency_hz": float(f), "apparent_hz": float(a), "folded": bool(f > nyquist),
                     "zone": zone, "folds": zone - 1, "inverted": zone % 2 == 0})
    return rows


def oversampling_ratio(fs: float, bandwidth_hz: float) -> float:
    """Sample rate over the anti-alias bandwidth (2.56 is common practice; 2 is the bare minimum).

    Examples
    --------
    >>> oversampling_ratio(51200.0, 20000.0)
    2.56
    """
    fs = check_fs(fs)
    bandwidth = check_number(bandwidth_hz, "bandwidth_hz", low=0, low_open=True, high=fs / 2, unit="Hz",
                             hint=f"the bandwidth cannot exceed Nyquist ({fs / 2:g} Hz for fs={fs:g} Hz)")
    return fs / bandwidth


#: alias_risk levels: "elevated" from this share of energy near Nyquist, "high" from the second.
ALIAS_RISK_THRESHOLDS = (0.001, 0.01)


def alias_risk(channel: Channel, top_fraction: float = 0.1, thresholds=ALIAS_RISK_THRESHOLDS,
               nperseg: int | None = None) -> dict:
    """A hint of aliasing: how much spectral energy sits just below Nyquist.

    A properly anti-aliased recording has almost nothing in the top of its
    band (an analyser keeps only ``fs / 2.56``); energy there means the
    anti-alias filter was open, or absent, and content from above Nyquist may
    have folded in. Folded energy cannot be told apart once sampled, so this
    is a hint, not proof.

    Parameters
    ----------
    channel : Channel
    top_fraction : float, default 0.1
        The band examined: the top ``top_fraction`` of 0..Nyquist.
    thresholds : (float, float), default (0.001, 0.01)
        Energy shares at which the level becomes "elevated", then "high"
        (sigtune's own defaults, not taken from a standard).
    nperseg : int, optional
        Welch segment length; default ``min(n_samples, 4096)``.

    Returns
    -------
    dict
        ``level`` ("low", "elevated" or "high"), ``fraction_near_nyquist``
        (share of the PSD's power in the band, mean removed), ``band_hz``,
        ``density_ratio_db`` (mean PSD in the band over the mean PSD of the
        whole spectrum; None if either is zero), ``thresholds``, ``nperseg``.

    Examples
    --------
    >>> import numpy as np
    >>> white = Channel(np.random.default_rng(0).normal(size=8192), 1000.0)
    >>> alias_risk(white)["level"]
    'high'
    """
    top_fraction = check_number(top_fraction, "top_fraction", low=0, high=0.5, low_open=True)
    low, high = (check_number(v, "thresholds", low=0, high=1) for v in thresholds)
    if not low < high:
        raise SigtuneError(f"needs elevated < high; got {low:g}, {high:g}", "thresholds")
    nperseg = min(channel.n_samples, 4096) if nperseg is None else check_int(nperseg, "nperseg", low=8,
                                                                               high=channel.n_samples)
    freqs, power = signal.welch(channel.data, fs=channel.fs, nperseg=nperseg, detrend="constant")
    band_start = channel.nyquist * (1.0 - top_fraction)
    in_band = freqs >= band_start
    total = power.sum()
    fraction = float(power[in_band].sum() / total) if total > 0 else 0.0
    level = "high" if fraction >= high else "elevated" if fraction >= low else "low"
    ratio_db = None  # undefined for a constant record, or one silent near Nyquist
    if total > 0 and power[in_band].sum() > 0:
        ratio_db = float(10.0 * np.log10(power[in_band].mean() / power.mean()))
    return {"level": level, "fraction_near_nyquist": fraction, "band_hz": [band_start, channel.nyquist],
            "density_ratio_db": ratio_db, "thresholds": [low, high], "nperseg": nperseg}
