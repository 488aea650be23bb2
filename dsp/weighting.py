"""Frequency weightings for human vibration, built from the standards' analogue definitions.

Every weighting of ISO 2631-1:1997 (Wk, Wd, Wc, We, Wj, Wf), ISO 2631-2:2003
(Wm), ISO 2631-4:2001 (Wb) and ISO 5349-1:2001 (Wh) is defined by the
standards (and ISO 8041) as an analogue transfer function

    H(s) = K * Hh(s) * Hl(s) * Ht(s) * Hs(s)

with s = j 2 pi f and w_i = 2 pi f_i:

* band-limiting high-pass ``Hh = s^2 / (s^2 + s w1/Q1 + w1^2)``, Q1 = 1/sqrt(2);
* band-limiting low-pass ``Hl = w2^2 / (s^2 + s w2/Q2 + w2^2)``, Q2 = 1/sqrt(2);
* acceleration-velocity transition
  ``Ht = (1 + s/w3) / (1 + s/(Q4 w4) + s^2/w4^2)`` (absent where f3 = f4 = inf;
  numerator 1 where only f3 = inf);
* upward step ``Hs = (s^2 + s w5/Q5 + w5^2) / (s^2 + s w6/Q6 + w6^2)``, whose
  gain tends to 1 at high frequency and to (f5/f6)^2 at low frequency (absent
  where f5 = f6 = inf).

This normalisation (K = 1, Hs -> 1 at high frequency) reproduces the
tabulated Wk of ISO 2631-1 Table 3 (0.482 at 1 Hz, 1.036 at 8 Hz): see
``tests/test_weighting.py``.

How the digital filter is made (at the recording's rate fs)
    *Matched design with fitted zeros.* Every analogue pole p and finite zero
    z is mapped exactly, ``exp(p / fs)`` and ``exp(z / fs)`` (so the
    low-frequency shape, set by poles and zeros close to z = 1, is exact at
    any rate). The analogue zeros at infinity (relative degree), plus two
    extra, become free zeros whose squared magnitude (a cosine polynomial,
    linear in its coefficients) is fitted by weighted least squares to the
    remaining relative error on a logarithmic grid over the weighting's band
    (full weight from half the band's lower edge to 1.25 x its upper edge,
    1/10 weight from there to Nyquist); spectral factorisation gives them as
    minimum-phase zeros. A whole number of samples of delay is then added so
    that the group delay matches the analogue filter's (the matched mapping
    leads by about one sample). The bilinear transform, even prewarped per
    section, is not used because its frequency warping puts several dB of
    error into the top of the band at rates below about 10 x f2.

    The result stays within 0.1 dB of the analogue magnitude across the
    weighting's band for every rate from 2 x f2 upwards (see
    :func:`weighting_error` and ``docs/evaluation.md``).
Causality
    The standards define the weightings as analogue (hence causal) filters,
    as a hand-held meter applies them; :class:`Weighting` filters causally
    with :func:`scipy.signal.sosfilt`, starting from the steady state for the
    first sample, and marks the settling time at the start as an edge zone.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import signal

from ._validate import check_choice, check_fs
from .channel import Channel
from .errors import SigtuneError
from .steps import Step, register_step

__all__ = ["WEIGHTINGS", "WeightingSpec", "WeightingFilter", "Weighting", "analog_weighting",
           "analog_weighting_zpk", "weighting_filter", "weighting_error", "minimum_rate"]

_BUTTERWORTH_Q = 1.0 / math.sqrt(2.0)
_EXTRA_ZEROS = 2  # free zeros beyond the relative degree: 2 halves the error at 2 x f2
_OUT_OF_BAND_WEIGHT = 0.1  # keeps the response between the band and Nyquist within about 1 dB
_SETTLING_DECAY = math.log(1000.0)  # settled once the slowest mode has decayed to 0.1 % (as dsp.filters)


@dataclass(frozen=True)
class WeightingSpec:
    """Parameters of one frequency weighting (frequencies in Hz; ``inf`` = section absent).

    ``band`` is the frequency range (Hz) the standard evaluates with this
    weighting; the digital filter is held to its accuracy there.
    ``source`` says where the parameters come from and whether they were
    confirmed against a table.
    """

    name: str
    standard: str
    use: str
    f1: float
    f2: float
    f3: float
    f4: float
    q4: float
    f5: float
    q5: float
    f6: float
    q6: float
    k: float
    band: tuple[float, float]
    source: str

    def to_dict(self) -> dict[str, Any]:
        """Return the parameters as JSON-ready data (``None`` for an absent section and its Q)."""
        data = {key: getattr(self, key) for key in self.__dataclass_fields__} | {"band": list(self.band)}
        for f, q in (("f3", None), ("f4", "q4"), ("f5", "q5"), ("f6", "q6")):
            if math.isinf(data[f]):
                data[f] = None
                if q:
                    data[q] = None
        return data


_INF = math.inf
_ISO2631_BAND = (0.5, 80.0)  # ISO 2631-1:1997 clause 1: 0.5 Hz to 80 Hz for health, comfort, perception
_CONFIRMED = "parameters from the issue; formula checked against the tabulated values"
_MEMORY = "parameters from memory (not confirmed against the standard's table)"

WEIGHTINGS: dict[str, WeightingSpec] = {
    # ISO 2631-1:1997 Annex A, Table A.2 (Wk, Wd parameters given in the issue).
    "Wk": WeightingSpec("Wk", "ISO 2631-1:1997", "vertical (z) whole-body: seat, standing, recumbent",
                        0.4, 100.0, 12.5, 12.5, 0.63, 2.37, 0.91, 3.35, 0.91, 1.0, _ISO2631_BAND, _CONFIRMED),
    "Wd": WeightingSpec("Wd", "ISO 2631-1:1997", "horizontal (x, y) whole-body",
                        0.4, 100.0, 2.0, 2.0, 0.63, _INF, 0.0, _INF, 0.0, 1.0, _ISO2631_BAND, _CONFIRMED),
    "Wc": WeightingSpec("Wc", "ISO 2631-1:1997", "seat-back x (comfort)",
                        0.4, 100.0, 8.0, 8.0, 0.63, _INF, 0.0, _INF, 0.0, 1.0,  # from memory
                        _ISO2631_BAND, _MEMORY),
    "We": WeightingSpec("We", "ISO 2631-1:1997", "rotational seat vibration (comfort), rad/s^2",
                        0.4, 100.0, 1.0, 1.0, 0.63, _INF, 0.0, _INF, 0.0, 1.0,  # from memory
                        _ISO2631_BAND, _MEMORY),
    "Wj": WeightingSpec("Wj", "ISO 2631-1:1997", "vertical under the head, recumbent (comfort)",
                        0.4, 100.0, _INF, _INF, 0.0, 3.75, 0.91, 5.32, 0.91, 1.0,  # from memory
                        _ISO2631_BAND, _MEMORY),
    "Wf": WeightingSpec("Wf", "ISO 2631-1:1997", "vertical, motion sickness (clause 9)",
                        0.08, 0.63, _INF, 0.25, 0.86, 0.0625, 0.80, 0.1, 0.80, 1.0,  # from memory
                        (0.1, 0.5), _MEMORY),
    # ISO 2631-2:2003 (vibration in buildings, any direction).
    "Wm": WeightingSpec("Wm", "ISO 2631-2:2003", "people in buildings, all directions",
                        0.7906, 100.0, 5.684, 5.684, 0.5, _INF, 0.0, _INF, 0.0, 1.0,  # from memory
                        (1.0, 80.0), _MEMORY),
    # ISO 2631-4:2001 (fixed-guideway transport: vertical comfort).
    "Wb": WeightingSpec("Wb", "ISO 2631-4:2001", "vertical comfort in rail vehicles",
                        0.4, 100.0, 16.0, 16.0, 0.55, 2.5, 0.9, 4.0, 0.95, 1.024,  # from memory
                        _ISO2631_BAND, _MEMORY),
    # ISO 5349-1:2001 Annex A (parameters given in the issue); band 8 Hz to 1000 Hz (one-third octaves).
    "Wh": WeightingSpec("Wh", "ISO 5349-1:2001", "hand-arm, all three axes",
                        6.310, 1258.9, 15.915, 15.915, 0.64, _INF, 0.0, _INF, 0.0, 1.0, (8.0, 1000.0),
                        _CONFIRMED),
}


def _spec(name: str, where: str = "weighting") -> WeightingSpec:
    return WEIGHTINGS[check_choice(name, where, tuple(WEIGHTINGS))]


def _sections(spec: WeightingSpec) -> list[tuple[np.ndarray, np.ndarray]]:
    """Return the analogue sections as (numerator, denominator) polynomials in s (rad/s)."""
    w = [2.0 * math.pi * f for f in (spec.f1, spec.f2, spec.f3, spec.f4, spec.f5, spec.f6)]
    w1, w2, w3, w4, w5, w6 = w
    q = _BUTTERWORTH_Q
    sections = [([1.0, 0.0, 0.0], [1.0, w1 / q, w1 * w1]), ([w2 * w2], [1.0, w2 / q, w2 * w2])]
    if math.isfinite(spec.f4):
        numerator = [1.0 / w3, 1.0] if math.isfinite(spec.f3) else [1.0]
        sections.append((numerator, [1.0 / (w4 * w4), 1.0 / (spec.q4 * w4), 1.0]))
    if math.isfinite(spec.f5):
        sections.append(([1.0, w5 / spec.q5, w5 * w5], [1.0, w6 / spec.q6, w6 * w6]))
    return [(np.asarray(b, float), np.asarray(a, float)) for b, a in sections]


def analog_weighting(name: str, freqs) -> np.ndarray:
    """Return the complex analogue response H(j 2 pi f) of a weighting (the standard's formula).

    Parameters
    ----------
    name : str
        One of :data:`WEIGHTINGS` (``"Wk"``, ``"Wd"``, ``"Wh"`` ...).
    freqs : array_like
        Frequencies in Hz.

    Examples
    --------
    >>> round(float(abs(analog_weighting("Wk", 8.0))), 3)  # ISO 2631-1 Table 3: 1.036
    1.036
    """
    spec = _spec(name)
    s = 2j * math.pi * np.asarray(freqs, dtype=float)
    h = np.full(s.shape, spec.k, dtype=complex)
    for b, a in _sections(spec):
        h *= np.polyval(b, s) / np.polyval(a, s)
    return h


def analog_weighting_zpk(name: str) -> tuple[np.ndarray, np.ndarray, float]:
    """Return the analogue zeros, poles (rad/s) and gain of a weighting, as ``scipy.signal`` zpk."""
    spec = _spec(name)
    zeros, poles, gain = [], [], spec.k
    for b, a in _sections(spec):
        zeros.extend(np.roots(b))
        poles.extend(np.roots(a))
        gain *= b[np.flatnonzero(b)[0]] / a[0]
    return np.array(zeros, dtype=complex), np.array(poles, dtype=complex), float(gain)


def minimum_rate(name: str) -> float:
    """Return the lowest sample rate (Hz) a weighting can be applied at: 2 x its f2.

    At that rate Nyquist equals the band-limiting frequency f2, about a
    third of an octave above the top of the weighting's band.
    """
    return 2.0 * _spec(name).f2


def _check_rate(spec: WeightingSpec, fs: float, where: str) -> None:
    if fs < 2.0 * spec.f2:
        usable = [n for n, s in WEIGHTINGS.items() if 2.0 * s.f2 <= fs]
        raise SigtuneError(
            f"weighting {spec.name} needs a sample rate of at least {2.0 * spec.f2:g} Hz (Nyquist at or "
            f"above its band-limiting frequency f2 = {spec.f2:g} Hz); got fs = {fs:g} Hz. Record at "
            f"{2.0 * spec.f2:g} Hz or more (resampling up cannot restore the missing band)"
            + (f"; weightings usable at {fs:g} Hz: {', '.join(usable)}" if usable else ""), where)


def _fit_free_zeros(target: np.ndarray, w: np.ndarray, degree: int, weight: np.ndarray) -> np.ndarray:
    """Fit a minimum-phase polynomial B(z) of ``degree`` with |B|^2 ~ ``target`` on ``w`` (rad/sample).

    |B(e^jw)|^2 = sum_j c_j cos(j w) is linear in c: weighted least squares
    on the relative error, then spectral factorisation (the roots of the
    symmetric Laurent polynomial come in pairs r, 1/r; keep those inside).
    Returns the coefficients of B in descending powers of z.
    """
    basis = np.cos(np.outer(w, np.arange(degree + 1)))
    rows = basis * (weight / target)[:, None]
    norms = np.linalg.norm(rows, axis=0)  # column scaling keeps lstsq well conditioned
    c = np.linalg.lstsq(rows / norms, weight, rcond=None)[0] / norms
    power = basis @ c
    if np.any(power <= 0):
        raise SigtuneError("the weighting fit failed (negative power); please report this rate", "weighting")
    laurent = np.concatenate([c[:0:-1] / 2.0, [c[0]], c[1:] / 2.0])
    roots = np.roots(laurent)
    inside = roots[np.argsort(np.abs(roots))][:degree]
    monic = np.real(np.poly(inside))
    monic_power = np.abs(np.polyval(monic, np.exp(1j * w))) ** 2
    scale = np.exp(np.sum(weight * np.log(power / monic_power)) / np.sum(weight))
    return monic * math.sqrt(scale)


@dataclass(frozen=True, eq=False)
class WeightingFilter:
    """A weighting designed for one sample rate (made by :func:`weighting_filter`).

    Attributes
    ----------
    name : str
    fs : float
        Sample rate in Hz.
    sos : ndarray
        Second-order sections (scipy's ``sos`` layout), read-only.
    delay_samples : int
        Whole samples of delay added to match the analogue group delay.
    spec : WeightingSpec
    """

    name: str
    fs: float
    sos: np.ndarray
    delay_samples: int
    spec: WeightingSpec

    def response(self, freqs) -> np.ndarray:
        """Return the complex digital response at ``freqs`` (Hz)."""
        f = np.atleast_1d(np.asarray(freqs, dtype=float))
        return signal.sosfreqz(self.sos, worN=f, fs=self.fs)[1].reshape(np.shape(freqs))

    def error_db(self, freqs) -> np.ndarray:
        """Return 20 log10(|digital| / |analogue|) in dB at ``freqs`` (Hz)."""
        return 20.0 * np.log10(np.abs(self.response(freqs)) / np.abs(analog_weighting(self.name, freqs)))

    @property
    def settling_time_s(self) -> float:
        """Time (s) for the slowest mode to decay to 0.1 % (the edge zone at the start)."""
        radius = max(np.max(np.abs(np.roots(row[3:]))) for row in self.sos)
        return _SETTLING_DECAY / (-math.log(radius) * self.fs) if radius > 0 else 0.0

    @property
    def report(self) -> dict[str, Any]:
        """Return what was designed: rate, sections, delay, worst band error (dB), settling time (s)."""
        lo, hi = self.spec.band
        n = np.arange(math.floor(10 * math.log10(lo) + 0.5), math.floor(10 * math.log10(hi) + 0.5) + 1)
        band_error = float(np.max(np.abs(self.error_db(10.0 ** (n / 10.0)))))
        return {"weighting": self.name, "standard": self.spec.standard, "fs": self.fs,
                "sections": int(self.sos.shape[0]), "delay_samples": self.delay_samples,
                "band_hz": list(self.spec.band), "max_band_error_db": band_error,
                "settling_time_s": self.settling_time_s, "parameters": self.spec.to_dict(),
                "method": "matched poles and zeros, fitted minimum-phase zeros"}


def weighting_filter(name: str, fs: float) -> WeightingFilter:
    """Design the digital form of a weighting at ``fs`` Hz.

    Parameters
    ----------
    name : str
        One of :data:`WEIGHTINGS`.
    fs : float
        Sample rate in Hz; at least :func:`minimum_rate` (2 x f2).

    Returns
    -------
    WeightingFilter
        With ``.sos``, ``.response(freqs)`` and ``.report``.

    Raises
    ------
    SigtuneError
        For an unknown name, or a rate below the minimum (the message gives it).

    Examples
    --------
    >>> wf = weighting_filter("Wk", 400.0)
    >>> round(float(abs(wf.response(8.0))), 3)  # ISO 2631-1 Table 3: 1.036
    1.036
    """
    spec = _spec(name)
    fs = check_fs(fs)
    _check_rate(spec, fs, "fs")
    return _design(spec.name, fs)


@functools.lru_cache(maxsize=64)
def _design(name: str, fs: float) -> WeightingFilter:
    spec = WEIGHTINGS[name]
    zeros, poles, _ = analog_weighting_zpk(name)
    zd = np.exp(zeros / fs)
    pd = np.concatenate([np.exp(poles / fs), np.zeros(_EXTRA_ZEROS)])
    degree = len(poles) - len(zeros) + _EXTRA_ZEROS
    lo, hi = spec.band
    grid = np.geomspace(0.5 * lo, 0.999 * fs / 2.0, 400)
    weight = np.where(grid <= 1.25 * hi, 1.0, _OUT_OF_BAND_WEIGHT)
    w = 2.0 * math.pi * grid / fs
    on_circle = np.exp(1j * w)
    fixed = np.abs(np.prod(on_circle[:, None] - zd, axis=1) / np.prod(on_circle[:, None] - pd, axis=1)) ** 2
    target = np.abs(analog_weighting(name, grid)) ** 2 / fixed
    free = _fit_free_zeros(target, w, degree, weight)
    sos = signal.zpk2sos(np.concatenate([zd, np.roots(free)]), pd, free[0], pairing="nearest")
    delay = _matching_delay(name, sos, fs)
    two, one = [0.0, 0.0, 1.0, 1.0, 0.0, 0.0], [0.0, 1.0, 0.0, 1.0, 0.0, 0.0]  # z^-2, z^-1 as sections
    sos = np.vstack([sos] + [two] * (delay // 2) + [one] * (delay % 2))
    sos.flags.writeable = False
    return WeightingFilter(name, fs, sos, delay, spec)


def _matching_delay(name: str, sos: np.ndarray, fs: float) -> int:
    """Whole samples of delay (0 to 3) that best match the analogue phase across the band.

    The matched mapping leads the analogue filter by about one sample; the
    delay is chosen by least squares on the phase difference at the band's
    one-third-octave frequencies.
    """
    lo, hi = WEIGHTINGS[name].band
    f = np.geomspace(lo, hi, 1 + round(10 * math.log10(hi / lo)))
    lead = np.angle(signal.sosfreqz(sos, worN=f, fs=fs)[1] / analog_weighting(name, f))
    def misfit(delay: int) -> float:
        return float(np.sum(np.angle(np.exp(1j * (lead - 2.0 * math.pi * f * delay / fs))) ** 2))
    return min(range(4), key=misfit)


def weighting_error(name: str, fs: float, freqs) -> np.ndarray:
    """Return the dB error of the digital weighting at ``fs`` against the analogue formula.

    Parameters
    ----------
    name : str
    fs : float
        Sample rate in Hz.
    freqs : array_like
        Frequencies in Hz (below Nyquist).

    Examples
    --------
    >>> err = weighting_error("Wh", 2560.0, [8.0, 100.0, 1000.0])
    >>> bool(np.all(np.abs(err) < 0.1))
    True
    """
    return weighting_filter(name, fs).error_db(freqs)


@register_step
@dataclass(frozen=True)
class Weighting(Step):
    """Apply a frequency weighting causally (op ``"weighting"``); the unit is unchanged.

    The output is frequency-weighted acceleration in the channel's unit. The
    filter starts in the steady state for the first sample (so an offset does
    not ring through the high-pass) and the settling time at the start is an
    edge zone (``info["edge_zones_s"]``).

    Parameters
    ----------
    name : str
        One of :data:`WEIGHTINGS` (``"Wk"``, ``"Wd"``, ``"Wc"``, ``"We"``,
        ``"Wj"``, ``"Wf"``, ``"Wm"``, ``"Wb"``, ``"Wh"``).

    Examples
    --------
    >>> ch = Channel(np.sin(2 * np.pi * 8.0 * np.arange(4000) / 400.0), 400.0, unit="m/s^2")
    >>> out = Weighting("Wk").apply(ch)
    >>> out.history[-1]["op"], out.history[-1]["name"], out.unit
    ('weighting', 'Wk', 'm/s^2')
    """

    op = "weighting"
    name: str

    def __post_init__(self):
        _spec(self.name, "name")

    def process(self, channel: Channel):
        where = f"channel {channel.name!r}"
        if channel.quantity not in ("acceleration", "other"):
            raise SigtuneError(f"weighting {self.name} applies to acceleration; the channel holds "
                               f"{channel.quantity} ({channel.unit}). Differentiate it to acceleration first",
                               where)
        spec = WEIGHTINGS[self.name]
        _check_rate(spec, channel.fs, where)
        design = _design(self.name, channel.fs)
        sos = np.array(design.sos)  # writable copy for scipy
        x = channel.data
        y, _ = signal.sosfilt(sos, x, zi=signal.sosfilt_zi(sos) * float(x[0]))
        settle = min(design.settling_time_s, channel.duration)
        info = {"weighting": self.name, "standard": spec.standard, "delay_samples": design.delay_samples,
                "settling_time_s": settle,
                "edge_zones_s": [[channel.start_time, channel.start_time + settle]]}
        return channel.replace(data=y.astype(x.dtype, copy=False)), info
