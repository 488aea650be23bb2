"""Acceleration, velocity and displacement: integration without drift, and differentiation.

Integration amplifies low frequencies by ``1/omega`` per stage, so any offset,
trend or sub-hertz noise in an accelerometer record grows without bound (a
constant offset ``c`` integrates to ``c t`` in velocity and ``c t^2 / 2`` in
displacement). Every method here therefore removes content below a
low-frequency corner ``f_low`` (Hz) or a fitted baseline, and says so.

Methods of :func:`integrate` (and the :class:`Integrate` step)
    ``"frequency"`` (default)
        The record's mean is removed; its ends are faded in and out by a
        half-cosine over one period of ``f_low`` (at most 10 % of the record)
        so the periodic FFT sees no step between them, and two periods of
        ``f_low`` of zeros are padded at each end (then up to
        :func:`scipy.fft.next_fast_len`) so the response to one end does not
        wrap round onto the other. The spectrum is divided by
        ``(j 2 pi f)^k`` (k stages in one pass) and multiplied by a low cut: 0
        below ``f_low / 2``, a raised-cosine taper from ``f_low / 2`` to
        ``f_low``, 1 above. Output mean removed. Phase: exactly -90 degrees
        per stage; the low cut is real (zero phase). Drift: none; content
        below ``f_low / 2`` is removed, between ``f_low / 2`` and ``f_low``
        attenuated; above ``f_low`` the gain is exact (no discretisation
        error). Edge zones: the end taper plus one period of ``f_low`` per
        stage.
    ``"time"``
        Cumulative trapezoid (:func:`scipy.integrate.cumulative_trapezoid`)
        with a Butterworth high-pass :class:`dsp.Filter` (order 4, corner
        ``f_low``, zero-phase by default) before the first stage and after
        every stage. Phase: -90 degrees per stage from the trapezoid (its
        response ``-j (dt/2) cot(omega dt/2)`` is purely imaginary), none from
        the zero-phase filter (``zero_phase=False``: the causal Butterworth's
        lag is added). Gain: each zero-phase pass is ``|H|^2`` (-6 dB at
        ``f_low``), and there are ``stages + 1`` passes; the trapezoid reads
        low by ``1 - x / tan(x)``, ``x = pi f / fs`` (0.1 % at fs/55, 0.8 % at
        fs/20). Drift: bounded by the high-passes. Edge zones: 1.1 settling
        times of one high-pass pass (0.1 % criterion, from the filter's
        design report) per stage, at both ends (the start only if causal).
    ``"baseline"``
        Mean removal, then at each stage the cumulative trapezoid followed by
        removal of a least-squares polynomial of order ``baseline_order``
        (default 2) over the record. Phase: -90 degrees per stage; no filter.
        Drift: polynomial drift up to that order is removed; slow content that
        is not polynomial (a sub-hertz sway) stays, as does any content below
        ``f_low`` - the method does not use ``f_low``. The fit also takes the
        part of the signal that resembles the polynomial: an error of order
        ``1 / (f T)`` of a tone's amplitude near the ends of a record T s long.
        No edge zones are reported.

Units
    The input is converted to SI first (g -> m/s^2, mm/s -> m/s ...), the
    result is in the SI unit of the target quantity (m/s, m) or in
    ``output_unit`` (``"mm/s"``, ``"um"`` ...).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
from scipy import fft as sfft
from scipy.integrate import cumulative_trapezoid

from ._validate import check_choice, check_int, check_number
from .channel import Channel
from .errors import SigtuneError
from .filters import Filter
from .steps import Step, register_step
from .units import conversion_factor, si_unit, unit_info, units_for

__all__ = ["Integrate", "Differentiate", "integrate", "differentiate", "compare_integration", "remove_polynomial",
           "IntegrationComparison", "INTEGRATION_PRESETS", "INTEGRATION_METHODS", "DIFFERENTIATION_METHODS",
           "DEFAULT_F_LOW_HZ"]

INTEGRATION_METHODS = ("time", "frequency", "baseline")
DIFFERENTIATION_METHODS = ("central", "frequency")
MOTION_ORDER = ("acceleration", "velocity", "displacement")

#: Default low-frequency corner (Hz) when neither ``f_low`` nor ``preset`` is
#: given: our general-purpose choice. It keeps content above 3 Hz flat (the
#: factor-3 rule of :mod:`dsp.advice`), needs records of at least 1 s, and its
#: edge zones cover about 2 s (frequency) and 3 s (time) at each end for one stage.
DEFAULT_F_LOW_HZ = 1.0

#: Low-frequency corners for common uses. ``band`` is the band of interest
#: (Hz) that the corner keeps flat; ``basis`` says where the numbers come from.
INTEGRATION_PRESETS: dict[str, dict[str, Any]] = {
    "machinery": {
        "f_low": 3.0, "band": (10.0, 1000.0),
        "basis": "ISO 10816-3 / ISO 20816-1 broadband vibration velocity over 10 Hz to 1000 Hz (from "
                 "memory, not checked against the standards' text); the corner sits a factor 3 below the "
                 "band's lower edge (common practice)"},
    "machinery_slow": {
        "f_low": 0.6, "band": (2.0, 1000.0),
        "basis": "ISO 10816-3 for machines running below 600 r/min: 2 Hz to 1000 Hz (from memory); the "
                 "corner sits a factor 3 below 2 Hz (common practice)"},
    "structures": {
        "f_low": 0.15, "band": (0.5, 100.0),
        "basis": "common practice for floors, footbridges and buildings (modes from about 0.5 Hz); no "
                 "standard fixes the corner"},
    "strong_motion": {
        "f_low": 0.05, "band": (0.15, 25.0),
        "basis": "common practice in earthquake strong-motion processing (acausal Butterworth high-pass, "
                 "corner usually 0.05 Hz to 0.1 Hz, chosen per record from its noise); no standard fixes it"},
}

#: Fraction of ``f_low`` where the frequency method's raised-cosine low cut starts.
TAPER_START_RATIO = 0.5
#: The frequency method's end taper covers one period of ``f_low``, at most this fraction of the record.
END_TAPER_MAX_FRACTION = 0.1
#: Zeros padded at each end by the frequency method, in periods of ``f_low``.
PAD_PERIODS = 2
#: The time method's edge zones: this many settling times of one high-pass pass, per stage.
EDGE_SETTLING_PER_STAGE = 1.1


def _motion_target(channel: Channel, target: str | None, where: str) -> list[tuple[str, str]]:
    """Return the stages ``[(from, to), ...]`` from the channel's quantity to ``target``."""
    if channel.quantity not in MOTION_ORDER[:2]:
        raise SigtuneError(f"channel {channel.name!r} is {channel.quantity} ({channel.unit}); integration "
                           f"needs acceleration or velocity", where)
    start = MOTION_ORDER.index(channel.quantity)
    stop = start + 1 if target is None else MOTION_ORDER.index(target)
    if stop <= start:
        valid = ", ".join(repr(q) for q in MOTION_ORDER[start + 1:])
        raise SigtuneError(f"channel {channel.name!r} is already {channel.quantity}; target must be {valid}",
                           f"{where}.target")
    return [(MOTION_ORDER[i], MOTION_ORDER[i + 1]) for i in range(start, stop)]


def _output_unit(quantity: str, output_unit: str | None, where: str) -> str:
    if output_unit is None:
        return si_unit(quantity)
    unit = unit_info(output_unit, f"{where}.output_unit")
    if unit.quantity != quantity:
        raise SigtuneError(f"the result is {quantity}; {unit.symbol!r} is a unit of {unit.quantity}. Use one of "
                           f"{', '.join(units_for(quantity))}", f"{where}.output_unit")
    return unit.symbol


def _finite_samples(channel: Channel, where: str) -> np.ndarray:
    x = np.asarray(channel.data, dtype=np.float64)
    bad = np.flatnonzero(~np.isfinite(x))
    if bad.size:
        raise SigtuneError(f"channel {channel.name!r} has {bad.size} non-finite samples (first at sample "
                           f"{bad[0]}); integration needs a continuous record. Split it with "
                           f"dsp.split_valid_segments and process each segment", where)
    to_si = unit_info(channel.unit).to_si
    return x * to_si if to_si != 1.0 else x


def _spectral_apply(x: np.ndarray, fs: float, taper: int, pad: int, shape) -> np.ndarray:
    """Remove the mean of ``x``, taper its ends, zero-pad, reshape its spectrum in place, return the record part.

    The half-cosine taper over ``taper`` samples at each end removes the step
    the periodic FFT would see between the ends; ``pad`` zeros at each end
    (then up to :func:`scipy.fft.next_fast_len`) keep the response to one end
    from wrapping round onto the other. ``shape(spectrum, f)`` multiplies the
    one-sided spectrum by the method's gain in place (``f`` ascending, Hz).
    """
    nfft = sfft.next_fast_len(x.size + 2 * pad, real=True)
    y = np.zeros(nfft)
    y[pad:pad + x.size] = x
    y[pad:pad + x.size] -= np.mean(x)
    if taper > 0:  # only the ends are touched: a full-length window would cost a pass over the record
        rise = 0.5 * (1.0 - np.cos(np.pi * (np.arange(taper) + 0.5) / taper))
        y[pad:pad + taper] *= rise
        y[pad + x.size - taper:pad + x.size] *= rise[::-1]
    spectrum = sfft.rfft(y)
    shape(spectrum, sfft.rfftfreq(nfft, 1.0 / fs))
    return sfft.irfft(spectrum, nfft)[pad:pad + x.size]


def remove_polynomial(y: np.ndarray, order: int, chunk: int = 1 << 20) -> np.ndarray:
    """Return ``y`` less its least-squares polynomial of ``order`` over the record.

    Written out (rather than :func:`numpy.polynomial.polynomial.polyfit`,
    whose least-squares solve over an n x (order + 1) matrix is the slow part
    on 10^7 samples): the normal equations in the Legendre basis on a scaled
    abscissa in [-1, 1], accumulated in chunks of ``chunk`` samples. Legendre
    polynomials are nearly orthogonal on a uniform grid, so the small Gram
    matrix stays well conditioned up to order 10. The fit is the same as
    numpy's (the tests compare them).

    Examples
    --------
    >>> t = np.linspace(0, 1, 101)
    >>> bool(np.allclose(remove_polynomial(3 + 2 * t - t ** 2, 2), 0, atol=1e-12))
    True
    """
    n = y.size
    scale = 2.0 / (n - 1) if n > 1 else 0.0
    gram = np.zeros((order + 1, order + 1))
    rhs = np.zeros(order + 1)
    for start in range(0, n, chunk):
        basis = np.polynomial.legendre.legvander(np.arange(start, min(start + chunk, n)) * scale - 1.0, order)
        gram += basis.T @ basis
        rhs += basis.T @ y[start:start + chunk]
    coef = np.linalg.solve(gram, rhs)
    out = np.empty(n)
    for start in range(0, n, chunk):
        t = np.arange(start, min(start + chunk, n)) * scale - 1.0
        out[start:start + chunk] = y[start:start + chunk] - np.polynomial.legendre.legval(t, coef)
    return out


def _raised_cosine(f: np.ndarray, f0: float, f1: float) -> np.ndarray:
    """0 below ``f0``, 1 above ``f1``, raised cosine between (``f0 < f1``)."""
    ramp = np.clip((f - f0) / (f1 - f0), 0.0, 1.0)
    return 0.5 * (1.0 - np.cos(np.pi * ramp))


@register_step
@dataclass(frozen=True)
class Integrate(Step):
    """Integrate acceleration to velocity or displacement, or velocity to displacement (op ``"integrate"``).

    See the module notes for what each method does, its drift and its phase.

    Parameters
    ----------
    method : {"frequency", "time", "baseline"}, default ``"frequency"``
    target : {"velocity", "displacement"}, optional
        Default: the next quantity (acceleration -> velocity, velocity ->
        displacement). ``"displacement"`` from acceleration integrates twice.
    f_low : float, optional
        Low-frequency corner in Hz (``frequency``, ``time``). Default: the
        preset's, else :data:`DEFAULT_F_LOW_HZ` (1 Hz). Not used by
        ``baseline`` (giving it raises).
    preset : str, optional
        A key of :data:`INTEGRATION_PRESETS` (``machinery``, ``machinery_slow``,
        ``structures``, ``strong_motion``) supplying ``f_low``.
    output_unit : str, optional
        Unit of the result (``"mm/s"``, ``"um"`` ...); default SI (m/s, m).
    filter_order : int, default 4
        Butterworth order of the ``time`` method's high-passes.
    zero_phase : bool, default True
        ``time`` method: forward-backward high-passes (no phase shift).
    baseline_order : int, default 2
        Polynomial order removed at each stage by ``baseline`` (0 to 10).

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(20000) / fs
    >>> acc = Channel(9.80665 * np.sin(2 * np.pi * 10 * t), fs, unit="m/s^2")
    >>> vel = Integrate(output_unit="mm/s").apply(acc)
    >>> vel.unit, round(float(np.max(np.abs(vel.data[5000:15000]))), 2)  # 9.80665 / (2 pi 10) m/s
    ('mm/s', 156.08)
    """

    op: ClassVar[str] = "integrate"
    method: str = "frequency"
    target: str | None = None
    f_low: float | None = None
    preset: str | None = None
    output_unit: str | None = None
    filter_order: int = 4
    zero_phase: bool = True
    baseline_order: int = 2

    def __post_init__(self):
        set_ = object.__setattr__
        check_choice(self.method, "method", INTEGRATION_METHODS)
        if self.target is not None:
            check_choice(self.target, "target", MOTION_ORDER[1:])
        if self.preset is not None:
            check_choice(self.preset, "preset", tuple(INTEGRATION_PRESETS))
        if self.f_low is not None:
            if self.method == "baseline":
                raise SigtuneError("method 'baseline' removes a fitted polynomial and has no low-frequency "
                                   "corner; leave f_low unset, or use method 'time' or 'frequency'", "f_low")
            set_(self, "f_low", check_number(self.f_low, "f_low", low=0, low_open=True, unit="Hz"))
        if self.output_unit is not None:
            set_(self, "output_unit", unit_info(self.output_unit, "output_unit").symbol)
        set_(self, "filter_order", check_int(self.filter_order, "filter_order", low=1, high=16))
        if not isinstance(self.zero_phase, (bool, np.bool_)):
            raise SigtuneError(f"must be true or false; got {self.zero_phase!r}", "zero_phase")
        set_(self, "zero_phase", bool(self.zero_phase))
        set_(self, "baseline_order", check_int(self.baseline_order, "baseline_order", low=0, high=10))

    def resolved_f_low(self) -> tuple[float | None, str]:
        """Return the corner in Hz and where it came from (None for ``baseline``)."""
        if self.method == "baseline":
            return None, "not used by method 'baseline'"
        if self.f_low is not None:
            return self.f_low, "given"
        if self.preset is not None:
            return float(INTEGRATION_PRESETS[self.preset]["f_low"]), f"preset {self.preset!r}"
        return DEFAULT_F_LOW_HZ, "default"

    def _check_corner(self, channel: Channel, f_low: float) -> None:
        low, high = 1.0 / channel.duration, channel.nyquist
        if not low <= f_low < high:
            raise SigtuneError(f"f_low={f_low:g} Hz must be {low:.3g} Hz (1 / record length "
                               f"{channel.duration:g} s) <= f_low < {high:g} Hz (Nyquist) for channel "
                               f"{channel.name!r}; choose a corner in that range or use a longer record", "f_low")

    def process(self, channel: Channel):
        stages = _motion_target(channel, self.target, "integrate")
        quantity = stages[-1][1]
        unit = _output_unit(quantity, self.output_unit, "integrate")
        x = _finite_samples(channel, "integrate")
        f_low, source = self.resolved_f_low()
        if f_low is not None:
            self._check_corner(channel, f_low)
        run = {"frequency": self._frequency, "time": self._time, "baseline": self._baseline}[self.method]
        y, info = run(x, channel, len(stages), f_low)
        y *= conversion_factor(si_unit(quantity), unit)
        info = {"method": self.method, "stages": [f"{a}->{b}" for a, b in stages], "f_low_hz": f_low,
                "f_low_source": source, "input_unit": channel.unit, "output_unit": unit, **info}
        return channel.replace(data=y, unit=unit, quantity=quantity), info

    # ---- the three methods, on SI float64 samples ----
    def _frequency(self, x, channel, n_stages, f_low):
        period = int(math.ceil(channel.fs / f_low))  # one period of f_low, in samples
        taper = min(period, int(END_TAPER_MAX_FRACTION * x.size))
        f0 = TAPER_START_RATIO * f_low

        def shape(spectrum, f):
            i0, i1 = np.searchsorted(f, [f0, f_low])  # f[0] = 0 <= f0: the DC bin is always cut
            spectrum[:i0] = 0.0
            spectrum[i0:i1] *= _raised_cosine(f[i0:i1], f0, f_low)
            spectrum[i0:] /= (2j * np.pi * f[i0:]) ** n_stages

        y = _spectral_apply(x, channel.fs, taper, PAD_PERIODS * period, shape)
        y -= np.mean(y)
        edge = min(taper / channel.fs + n_stages / f_low, channel.duration / 2)
        t0, t1 = channel.start_time, channel.start_time + channel.duration
        return y, {"low_cut_taper_hz": [f0, f_low], "end_taper_samples": taper,
                   "pad_samples": PAD_PERIODS * period,
                   "phase": "-90 degrees per stage, zero-phase low cut",
                   "edge_zones_s": [[t0, t0 + edge], [t1 - edge, t1]]}

    def _time(self, x, channel, n_stages, f_low):
        highpass = Filter("butterworth", "highpass", order=self.filter_order, cutoff=f_low,
                          zero_phase=self.zero_phase)
        work = channel.replace(data=x, unit="1", quantity="other", history=())
        filtered, info = highpass.process(work.replace(data=x - np.mean(x)))
        y = filtered.data
        for _ in range(n_stages):
            y = cumulative_trapezoid(y, dx=channel.dt, initial=0.0)
            filtered, info = highpass.process(work.replace(data=y - np.mean(y)))
            y = np.array(filtered.data, dtype=np.float64)
        phase = ("-90 degrees per stage, zero-phase high-passes" if self.zero_phase else
                 "-90 degrees per stage plus the lag of the causal Butterworth high-passes")
        return y, {"highpass": {"family": "butterworth", "order": self.filter_order, "cutoff_hz": f_low,
                                "zero_phase": self.zero_phase, "passes": n_stages + 1,
                                "settling_time_s": info["settling_time_s"]},
                   "phase": phase, "edge_zones_s": self._time_edges(channel, n_stages, info["settling_time_s"])}

    def _time_edges(self, channel: Channel, n_stages: int, settling_s: float) -> list[list[float]]:
        # Each stage integrates the transients of the passes before it, so the zone grows with the
        # stages: measured, a tone's error falls below 0.1 % of its amplitude within 1.1 settling
        # times per stage (zero-phase order 4, one and two stages).
        edge = min(EDGE_SETTLING_PER_STAGE * n_stages * settling_s, channel.duration / 2)
        t0, t1 = channel.start_time, channel.start_time + channel.duration
        return [[t0, t0 + edge], [t1 - edge, t1]] if self.zero_phase else [[t0, t0 + edge]]

    def _baseline(self, x, channel, n_stages, f_low):
        y = x - np.mean(x)
        for _ in range(n_stages):
            y = remove_polynomial(cumulative_trapezoid(y, dx=channel.dt, initial=0.0), self.baseline_order)
        return y, {"baseline_order": self.baseline_order, "phase": "-90 degrees per stage, no filter",
                   "edge_zones_s": []}


def integrate(channel: Channel, method: str = "frequency", target: str | None = None, f_low: float | None = None,
              preset: str | None = None, output_unit: str | None = None, **method_options) -> Channel:
    """Integrate a channel: ``Integrate(...).apply(channel)``.

    Parameters
    ----------
    channel : Channel
        Acceleration or velocity, in any unit of its quantity.
    method, target, f_low, preset, output_unit
        See :class:`Integrate`.
    **method_options
        ``filter_order``, ``zero_phase`` (``time``), ``baseline_order`` (``baseline``).

    Returns
    -------
    Channel
        Velocity or displacement, with the step in its history; its info holds
        the resolved ``f_low_hz`` and ``edge_zones_s``.

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(20000) / fs
    >>> acc = Channel(np.sin(2 * np.pi * 10 * t), fs, unit="g")  # 1 g at 10 Hz
    >>> disp = integrate(acc, target="displacement", output_unit="mm")
    >>> disp.history[-1]["info"]["edge_zones_s"]
    [[0.0, 3.0], [17.0, 20.0]]
    >>> round(float(np.max(np.abs(disp.data[3000:17000]))), 3)  # 9.80665 / (2 pi 10)^2 m
    2.484
    """
    return Integrate(method=method, target=target, f_low=f_low, preset=preset, output_unit=output_unit,
                     **method_options).apply(channel)


@register_step
@dataclass(frozen=True)
class Differentiate(Step):
    """Differentiate displacement to velocity or velocity to acceleration (op ``"differentiate"``).

    Parameters
    ----------
    method : {"central", "frequency"}, default ``"central"``
        ``central``: second-order central differences, one-sided second-order
        differences at the two ends (:func:`numpy.gradient`, ``edge_order=2``);
        no phase shift, gain ``sin(omega dt) / (omega dt)`` (0.4 % low at fs/40).
        ``frequency``: multiplication by ``j 2 pi f`` of the spectrum of the
        mean-removed record, its ends faded by a half-cosine over
        ``min(n // 10, max(32, n // 50))`` samples and zero-padded by as many;
        twice the faded length at each end is reported as edge zones. Exact in
        gain and phase elsewhere (to about 1e-5 of the amplitude for a tone
        of 10 periods per faded length).
    f_high : float, optional
        Optional low-pass corner in Hz. ``central``: a zero-phase order-4
        Butterworth :class:`dsp.Filter` after differencing. ``frequency``: gain 1
        up to ``f_high``, raised-cosine taper to 0 at ``min(2 f_high, fs/2)``.
    output_unit : str, optional
        Unit of the result; default SI (m/s^2, m/s).

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(4000) / fs
    >>> vel = Channel(np.sin(2 * np.pi * 5 * t), fs, unit="m/s")
    >>> acc = Differentiate().apply(vel)
    >>> acc.unit, round(float(np.max(np.abs(acc.data[100:-100]))), 2)  # 2 pi 5 sin(x)/x, x = 2 pi 5 / fs
    ('m/s^2', 31.41)
    """

    op: ClassVar[str] = "differentiate"
    method: str = "central"
    f_high: float | None = None
    output_unit: str | None = None

    def __post_init__(self):
        check_choice(self.method, "method", DIFFERENTIATION_METHODS)
        if self.f_high is not None:
            object.__setattr__(self, "f_high", check_number(self.f_high, "f_high", low=0, low_open=True,
                                                            unit="Hz"))
        if self.output_unit is not None:
            object.__setattr__(self, "output_unit", unit_info(self.output_unit, "output_unit").symbol)

    def process(self, channel: Channel):
        if channel.quantity not in MOTION_ORDER[1:]:
            raise SigtuneError(f"channel {channel.name!r} is {channel.quantity} ({channel.unit}); "
                               f"differentiation needs displacement or velocity", "differentiate")
        if self.f_high is not None and not self.f_high < channel.nyquist:
            raise SigtuneError(f"f_high must be below Nyquist {channel.nyquist:g} Hz for channel "
                               f"{channel.name!r}; got {self.f_high:g} Hz", "f_high")
        quantity = MOTION_ORDER[MOTION_ORDER.index(channel.quantity) - 1]
        unit = _output_unit(quantity, self.output_unit, "differentiate")
        x = _finite_samples(channel, "differentiate")
        info: dict[str, Any] = {"method": self.method, "input_unit": channel.unit, "output_unit": unit}
        if self.method == "central":
            y = np.gradient(x, channel.dt, edge_order=2)
            if self.f_high is not None:
                lowpass = Filter("butterworth", "lowpass", order=4, cutoff=self.f_high, zero_phase=True)
                smoothed, filtered = lowpass.process(channel.replace(data=y, unit="1", quantity="other",
                                                                     history=()))
                y, info["edge_zones_s"] = smoothed.data, filtered["edge_zones_s"]
        else:
            y = self._frequency(x, channel.fs)
            edge = 2 * self.end_taper_samples(x.size) / channel.fs
            t0, t1 = channel.start_time, channel.start_time + channel.duration
            info["edge_zones_s"] = [[t0, t0 + edge], [t1 - edge, t1]]
        y = np.asarray(y, dtype=np.float64) * conversion_factor(si_unit(quantity), unit)
        return channel.replace(data=y, unit=unit, quantity=quantity), info

    def _frequency(self, x: np.ndarray, fs: float) -> np.ndarray:
        f_high = self.f_high
        nyquist = fs / 2.0

        def shape(spectrum, f):
            spectrum *= 2j * np.pi * f
            if f[-1] == nyquist:
                spectrum[-1] = 0.0  # a real record has no derivative at Nyquist
            if f_high is not None:
                spectrum *= 1.0 - _raised_cosine(f, f_high, min(2.0 * f_high, nyquist))

        taper = self.end_taper_samples(x.size)
        return _spectral_apply(x, fs, taper, taper, shape)

    @staticmethod
    def end_taper_samples(n: int) -> int:
        """Samples tapered at each end by the ``frequency`` method: ``min(n // 10, max(32, n // 50))``."""
        return min(n // 10, max(32, n // 50))


def differentiate(channel: Channel, method: str = "central", f_high: float | None = None,
                  output_unit: str | None = None) -> Channel:
    """Differentiate a channel: ``Differentiate(method, f_high, output_unit).apply(channel)``.

    See :class:`Differentiate`.

    Examples
    --------
    >>> t = np.arange(2000) / 1000.0
    >>> d = Channel(1e-3 * np.sin(2 * np.pi * 10 * t), 1000.0, unit="m")
    >>> round(float(np.max(differentiate(d, output_unit="mm/s").data[100:-100])), 1)  # 2 pi 10 mm/s
    62.8
    """
    return Differentiate(method=method, f_high=f_high, output_unit=output_unit).apply(channel)


# ---------------------------------------------------------------- comparison
@dataclass(frozen=True)
class IntegrationComparison:
    """Result of :func:`compare_integration`.

    Attributes
    ----------
    channels : dict
        Method -> integrated Channel.
    rows : list of dict
        One per method; see :func:`compare_integration` for the keys.
    target, unit : str
    f_low : float
        Hz, the corner used for ``energy_below_f_low``.
    band : (float, float)
        Band of interest in Hz for the in-band differences.
    interior_s : (float, float)
        The stretch (absolute s) outside every method's edge zones where the
        in-band differences were computed.
    """

    channels: dict
    rows: list
    target: str
    unit: str
    f_low: float
    band: tuple
    interior_s: tuple
    notes: list = field(default_factory=list)

    def to_table(self) -> dict[str, list]:
        """Return the rows as columns ``{"method": [...], "rms": [...], ...}``."""
        keys = list(self.rows[0])
        return {k: [row[k] for row in self.rows] for k in keys}

    def to_dict(self) -> dict[str, Any]:
        """Return the comparison (without the samples) as JSON-ready data."""
        return {"kind": "integration_comparison", "target": self.target, "unit": self.unit,
                "f_low": self.f_low, "band": list(self.band), "interior_s": list(self.interior_s),
                "rows": [dict(r) for r in self.rows], "notes": list(self.notes),
                "history": {m: list(ch.history[-1:]) for m, ch in self.channels.items()}}


def _band_filtered(x: np.ndarray, fs: float, band: tuple[float, float]) -> np.ndarray:
    """``x`` with content outside ``band`` (Hz) removed by zeroing FFT bins (mean removed first).

    The FFT is zero-padded to a fast length: an arbitrary interior length can
    be nearly prime, which made one transform of 10^7 samples take seconds.
    """
    n_fft = sfft.next_fast_len(x.size, real=True)
    spectrum = sfft.rfft(x - np.mean(x), n_fft)
    f = sfft.rfftfreq(n_fft, 1.0 / fs)
    spectrum[(f < band[0]) | (f > band[1])] = 0.0
    return sfft.irfft(spectrum, n_fft)[:x.size]


def _fraction_below(x: np.ndarray, fs: float, f_low: float) -> float:
    """Fraction of the mean square (about the mean) below ``f_low`` (Hz), from the periodogram."""
    n_fft = sfft.next_fast_len(x.size, real=True)  # zero padding keeps the fraction, and speed
    power = np.abs(sfft.rfft(x - np.mean(x), n_fft)) ** 2
    f = sfft.rfftfreq(n_fft, 1.0 / fs)
    total = float(np.sum(power[1:]))
    return float(np.sum(power[1:][f[1:] < f_low]) / total) if total > 0 else 0.0


def compare_integration(channel: Channel, methods=INTEGRATION_METHODS, target: str | None = "velocity",
                        f_low: float | None = None, band: tuple[float, float] | None = None,
                        preset: str | None = None, output_unit: str | None = None) -> IntegrationComparison:
    """Integrate the same channel by several methods and tabulate how they differ.

    Parameters
    ----------
    channel : Channel
        Acceleration or velocity.
    methods : sequence of str, default all three
    target : str, default ``"velocity"``
    f_low : float, optional
        Corner in Hz for ``time`` and ``frequency``; default as :class:`Integrate`
        (preset, else 1 Hz). ``baseline`` does not use it, but its
        ``energy_below_f_low`` is measured against it.
    band : (float, float), optional
        Band of interest in Hz; default the preset's band, else
        ``(3 f_low, 0.4 fs)``.
    preset, output_unit : str, optional
        As for :class:`Integrate`.

    Returns
    -------
    IntegrationComparison
        ``rows`` hold, per method: ``method``; ``final_value``, ``peak_to_peak``,
        ``rms`` (in ``unit``, whole record); ``residual_trend`` (slope of the
        least-squares line, unit/s); ``energy_below_f_low`` (fraction of the
        mean square below ``f_low``, periodogram); ``rms_diff_vs_<method>`` for
        every method compared (RMS of the band-passed difference, over the
        interior outside all edge zones; 0 against itself) and
        ``max_rms_diff_in_band``.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> acc = Channel(rng.standard_normal(20000), 1000.0)
    >>> cmp = compare_integration(acc, f_low=2.0)
    >>> cmp.to_table()["method"]
    ['time', 'frequency', 'baseline']
    """
    methods = list(methods)
    if not methods or len(set(methods)) != len(methods):
        raise SigtuneError(f"needs distinct methods from {', '.join(INTEGRATION_METHODS)}; got {methods}",
                           "methods")
    for m in methods:
        check_choice(m, "methods", INTEGRATION_METHODS)
    probe = Integrate(f_low=f_low, preset=preset)
    corner, _ = probe.resolved_f_low()
    if band is None:
        band = INTEGRATION_PRESETS[preset]["band"] if preset else (3.0 * corner, 0.4 * channel.fs)
    band = (check_number(band[0], "band", low=0, unit="Hz"), check_number(band[1], "band", low=0, unit="Hz"))
    if not band[0] < band[1] <= channel.nyquist:
        raise SigtuneError(f"band must be low < high <= {channel.nyquist:g} Hz (Nyquist); got {band}", "band")
    notes = [] if "baseline" not in methods else [
        "baseline does not use f_low; its energy_below_f_low is measured against the others' corner"]
    channels = {}
    for m in methods:
        step = Integrate(method=m, target=target, f_low=None if m == "baseline" else f_low,
                         preset=preset, output_unit=output_unit)
        channels[m] = step.apply(channel)
    first = channels[methods[0]]
    interior = _interior(channels)
    rows = _comparison_rows(channels, corner, band, interior)
    interior_s = (first.start_time + interior[0] / first.fs, first.start_time + interior[1] / first.fs)
    return IntegrationComparison(channels, rows, first.quantity, first.unit, corner, band, interior_s, notes)


def _interior(channels: dict[str, Channel]) -> tuple[int, int]:
    """Sample range outside every method's edge zones (the whole record if they cover it)."""
    ch = next(iter(channels.values()))
    lo, hi = 0, ch.n_samples
    for c in channels.values():
        for a, b in (c.history[-1].get("info") or {}).get("edge_zones_s", ()):
            ia, ib = int(round((a - c.start_time) * c.fs)), int(round((b - c.start_time) * c.fs))
            if ia <= lo:
                lo = max(lo, ib)
            if ib >= hi:
                hi = min(hi, ia)
    return (lo, hi) if hi - lo >= 16 else (0, ch.n_samples)


def _trend_slope(y: np.ndarray, fs: float) -> float:
    """Slope (unit/s) of the least-squares line through uniformly sampled ``y``.

    Closed form for equally spaced abscissae (the normal equations of a
    straight-line fit): polyfit builds a Vandermonde matrix and took 1.2 s
    per channel at 10^7 samples, this takes one pass.
    """
    n = y.size
    centred_index = np.arange(n, dtype=np.float64) - (n - 1) / 2.0
    sxx = n * (n * n - 1.0) / 12.0  # sum of squared centred indices
    return float(np.einsum("i,i->", centred_index, y) / sxx * fs)


def _comparison_rows(channels, f_low, band, interior) -> list[dict[str, Any]]:
    lo, hi = interior
    filtered = {m: _band_filtered(np.asarray(c.data[lo:hi]), c.fs, band) for m, c in channels.items()}
    rows = []
    for m, c in channels.items():
        y = np.asarray(c.data, dtype=np.float64)
        slope = _trend_slope(y, c.fs)
        row = {"method": m, "final_value": float(y[-1]), "peak_to_peak": float(np.ptp(y)),
               "rms": float(np.sqrt(np.mean(y ** 2))), "residual_trend": slope,
               "energy_below_f_low": _fraction_below(y, c.fs, f_low)}
        diffs = {o: float(np.sqrt(np.mean((filtered[m] - filtered[o]) ** 2))) for o in channels}
        row.update({f"rms_diff_vs_{o}": v for o, v in diffs.items()})  # 0 against itself: a tidy square
        row["max_rms_diff_in_band"] = max(diffs.values())
        rows.append(row)
    return rows
