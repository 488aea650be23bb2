"""IIR filters as data: a spec (:class:`Filter`), its design and its application.

A :class:`Filter` holds the settings a user picks (family, band, order,
cutoff in Hz, causal or zero-phase). ``Filter.design(fs)`` turns them into an
immutable :class:`FilterDesign` for one sample rate: second-order sections
(never transfer-function polynomials, which lose precision at high orders and
low cutoffs) plus a small report of what was achieved. ``Filter.apply``
filters a :class:`~dsp.Channel` and records the step in its history.

How the cutoff is defined
    Butterworth and Bessel: -3.01 dB (half power) at the cutoff (Bessel uses
    scipy's ``norm="mag"`` for this). Chebyshev I and elliptic: the passband
    edge, where the gain is ``-ripple_db``. Chebyshev II: the stopband edge,
    where the gain is ``-attenuation_db``.
Zero-phase filtering
    The signal is filtered forwards and backwards, so the response it sees is
    ``|H(f)|^2`` with no phase shift: the magnitude in dB doubles, so a
    Butterworth is -6.02 dB at its design cutoff. ``cutoff_mode="effective"``
    moves the design cutoff (solved with :func:`scipy.optimize.brentq`) so that
    the effective response is -3.01 dB at the stated cutoff instead.
Order
    ``order`` is the order of the low-pass prototype (1 to 16). Band-pass and
    band-stop filters have twice as many poles (scipy's convention): order 4
    gives 8 poles, with a 4th-order skirt on each side. Zero-phase filtering
    doubles the effective order again. The report states all three.

Long records
    :meth:`Filter.block_processor` filters causally block by block, carrying
    the section state (the same output as one pass over the whole record);
    :meth:`Filter.zero_phase_blocks` filters forward-backward in overlapping
    blocks, within a stated residue of the whole-record result.
Functions
    :func:`edge_zones` collects the time intervals in which filters (and other
    steps) leave transients, from a channel's history.
"""

from __future__ import annotations

import functools
import math
import types
import warnings
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
from scipy import optimize, signal

from ._validate import check_choice, check_fs, check_int, check_number
from .channel import Channel
from .errors import SigtuneError, SigtuneWarning
from .steps import Step, register_step

__all__ = ["Filter", "FilterDesign", "CausalBlockFilter", "edge_zones",
           "FILTER_FAMILIES", "FILTER_BANDS", "CUTOFF_MODES"]

FILTER_FAMILIES = ("butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel")
FILTER_BANDS = ("lowpass", "highpass", "bandpass", "bandstop")
CUTOFF_MODES = ("design", "effective")
MAX_ORDER = 16

#: The step response is settled once it stays within this fraction of a unit
#: step of its final value (0.1 %): the residue of an edge transient is then
#: at most 0.1 % of the jump that caused it.
SETTLING_TOLERANCE = 1e-3
#: A pole radius above ``1 - POLE_MARGIN`` is treated as on the unit circle.
POLE_MARGIN = 1e-9
#: Lowest cutoff as a fraction of fs. Measured with scipy 1.17: the gain at
#: the cutoff stays within 0.02 dB of its definition down to 1e-6 fs for
#: orders up to 16, and drifts below it (0.76 dB for a 16th-order elliptic
#: high-pass at 1e-7 fs) as the poles crowd against z = 1.
MIN_RELATIVE_CUTOFF = 1e-6
#: Longest settling time accepted, in samples (about 5.5 min at 51.2 kHz):
#: zero-phase padding and edge zones longer than this are impractical.
MAX_SETTLING_SAMPLES = 2 ** 24
#: A design whose gain at a cutoff differs from the family's definition by more
#: than this is numerically unsound and rejected.
GAIN_CHECK_DB = 0.1
#: Records shorter than this many settling times get a warning.
SHORT_RECORD_SETTLING_TIMES = 3
#: The effective-mode target: half power, 10*log10(0.5) dB.
HALF_POWER_DB = 10.0 * math.log10(0.5)


def _as_cutoff(cutoff) -> float | tuple[float, float]:
    """Normalise ``cutoff`` to a float or a (low, high) tuple of floats (hashable, JSON as list)."""
    if isinstance(cutoff, (list, tuple, np.ndarray)):
        values = [check_number(c, "cutoff", low=0, low_open=True, unit="Hz") for c in cutoff]
        if len(values) != 2:
            raise SigtuneError(f"a band filter needs a (low, high) pair in Hz; got {len(values)} values",
                               "cutoff")
        return (values[0], values[1])
    return check_number(cutoff, "cutoff", low=0, low_open=True, unit="Hz")


@dataclass(frozen=True, eq=False)
class FilterDesign:
    """One filter designed for one sample rate (immutable; shared by the design cache).

    Attributes
    ----------
    sos : ndarray, shape (n_sections, 6)
        Second-order sections, read-only because the design is cached and
        shared (pass ``np.array(design.sos)`` to :func:`scipy.signal.sosfilt`,
        whose compiled core needs a writable array).
    fs : float
        Sample rate in Hz.
    filter : Filter
        The spec it was designed from.
    design_cutoff : float or tuple of float
        Cutoff(s) in Hz given to the scipy design; differs from
        ``filter.cutoff`` only with ``cutoff_mode="effective"``.
    report : mapping
        Read-only summary (see :meth:`Filter.design`); ``to_dict()`` gives a plain copy.
    steady_state : ndarray, shape (n_sections, 2)
        The section states in steady state for a constant input of 1
        (:func:`scipy.signal.sosfilt_zi`), read-only; scaled by the first
        sample, they start a causal pass without a start-up step.
    """

    sos: np.ndarray
    fs: float
    filter: "Filter"
    design_cutoff: float | tuple[float, float]
    report: types.MappingProxyType = field(repr=False)
    steady_state: np.ndarray = field(repr=False)

    @property
    def settling_samples(self) -> int:
        """Settling time of one pass in samples (see :data:`SETTLING_TOLERANCE`)."""
        return int(self.report["settling_samples"])

    def to_dict(self) -> dict[str, Any]:
        """Return the report as a plain, JSON-ready dict."""
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.report.items()}


def _scipy_design(spec: "Filter", cutoff, fs: float) -> np.ndarray:
    """Call scipy's design function for ``spec`` with ``cutoff`` (Hz) as SOS."""
    n, band = spec.order, spec.band
    if spec.family == "butterworth":
        return signal.butter(n, cutoff, btype=band, output="sos", fs=fs)
    if spec.family == "chebyshev1":
        return signal.cheby1(n, spec.ripple_db, cutoff, btype=band, output="sos", fs=fs)
    if spec.family == "chebyshev2":
        return signal.cheby2(n, spec.attenuation_db, cutoff, btype=band, output="sos", fs=fs)
    if spec.family == "elliptic":
        return signal.ellip(n, spec.ripple_db, spec.attenuation_db, cutoff, btype=band, output="sos", fs=fs)
    return signal.bessel(n, cutoff, btype=band, output="sos", fs=fs, norm="mag")


def _gain_db(sos: np.ndarray, freqs, fs: float, passes: int) -> np.ndarray:
    _, h = signal.sosfreqz(sos, worN=np.atleast_1d(np.asarray(freqs, float)), fs=fs)
    with np.errstate(divide="ignore"):
        return passes * 20.0 * np.log10(np.abs(h))


def _max_pole_radius(sos: np.ndarray) -> float:
    # Each section's poles are the roots of z^2 + a1 z + a2 (sos[:, 3] == 1).
    radii = [np.abs(np.roots(section[3:])).max(initial=0.0) for section in sos]
    return float(max(radii))


def _settling(sos: np.ndarray, radius: float, dc_gain: float) -> int | None:
    """Samples until the step response stays within SETTLING_TOLERANCE of its final value.

    The final value is the DC gain. The step response is simulated in blocks
    that double in length, carrying the section state, until the second half
    of what has been simulated lies inside the tolerance; the first block
    spans ten time constants of the slowest pole (radius r decays as r**n).
    Returns None if it has not settled within MAX_SETTLING_SAMPLES.
    """
    time_constant = 1.0 / -math.log(radius) if 0 < radius < 1 else 1.0
    block = int(min(10 * time_constant + 64, MAX_SETTLING_SAMPLES))
    sections = np.array(sos)
    zi = np.zeros((sections.shape[0], 2))
    done, last_outside = 0, -1
    while done < MAX_SETTLING_SAMPLES:
        y, zi = signal.sosfilt(sections, np.ones(block), zi=zi)
        outside = np.flatnonzero(np.abs(y - dc_gain) > SETTLING_TOLERANCE)
        if outside.size:
            last_outside = done + int(outside[-1])
        done += block
        if last_outside < done // 2:
            return last_outside + 1 if last_outside >= 0 else 1
        block = min(done, MAX_SETTLING_SAMPLES - done)
    return None


def _cutoffs(cutoff) -> tuple[float, ...]:
    return cutoff if isinstance(cutoff, tuple) else (cutoff,)


def _family_gain_db(spec: "Filter") -> float:
    """The single-pass gain the family defines at its cutoff, dB."""
    if spec.family in ("chebyshev1", "elliptic"):
        return -spec.ripple_db
    if spec.family == "chebyshev2":
        return -spec.attenuation_db
    return HALF_POWER_DB


def _solve_effective_cutoff(spec: "Filter", fs: float):
    """Design cutoff(s) whose effective response is -3.01 dB at the stated cutoff(s).

    One edge: :func:`scipy.optimize.brentq` on the gain at the stated cutoff,
    bracketed between (almost) 0 and Nyquist. Two edges: both are solved
    together by :func:`scipy.optimize.root` on their logarithms, starting
    from the stated pair, then checked.
    """
    passes = 2 if spec.zero_phase else 1
    targets = np.asarray(_cutoffs(spec.cutoff))
    nyq = fs / 2.0

    def error(design_edges):
        cut = tuple(design_edges) if design_edges.size == 2 else float(design_edges[0])
        return _gain_db(_scipy_design(spec, cut, fs), targets, fs, passes) - HALF_POWER_DB

    def failure():
        return SigtuneError(f"cutoff_mode='effective' could not place the -3 dB point(s) at "
                            f"{', '.join(f'{t:g}' for t in targets)} Hz for fs={fs:g} Hz (Nyquist {nyq:g} Hz): "
                            f"move the cutoff further from 0 and Nyquist, or use cutoff_mode='design'", "cutoff")

    if targets.size == 1:
        try:
            return optimize.brentq(lambda f: error(np.array([f]))[0], targets[0] * 1e-3, nyq * (1 - 1e-6),
                                   xtol=1e-10 * targets[0], rtol=1e-12)
        except ValueError:
            raise failure() from None
    with np.errstate(all="ignore"):  # a trial outside 0 < low < high < Nyquist is steered back by a large error
        solution = optimize.root(lambda logs: error(np.exp(logs)) if _valid_pair(np.exp(logs), nyq) else
                                 np.full(2, 1e3), np.log(targets), method="hybr", options={"xtol": 1e-12})
    edges = np.exp(solution.x)
    if not (_valid_pair(edges, nyq) and np.all(np.abs(error(edges)) < 1e-6)):
        raise failure()
    return (float(edges[0]), float(edges[1]))


def _valid_pair(edges, nyq: float) -> bool:
    return bool(0 < edges[0] < edges[1] < nyq)


@functools.lru_cache(maxsize=512)
def _design_cached(spec: "Filter", fs: float) -> FilterDesign:
    spec.check_for_rate(fs)
    exact = spec.cutoff_mode == "design" or (
        not spec.zero_phase and spec.family in ("butterworth", "bessel"))  # already -3.01 dB
    design_cutoff = spec.cutoff if exact else _solve_effective_cutoff(spec, fs)
    sos = _scipy_design(spec, design_cutoff, fs)
    sos.flags.writeable = False
    radius = _max_pole_radius(sos)
    if not radius < 1.0 - POLE_MARGIN:
        rate = min(_cutoffs(design_cutoff)) * 1e5
        raise SigtuneError(f"design is not numerically sound for fs={fs:g} Hz: its poles lie on or too close to "
                           f"the unit circle (largest radius {radius:.12f}; the limit is 1 - {POLE_MARGIN:g}). Lower "
                           f"the order, raise the cutoff, or resample to about {rate:g} Hz first", "filter")
    passes = 2 if spec.zero_phase else 1
    stated = _cutoffs(spec.cutoff)
    design_gain = _gain_db(sos, _cutoffs(design_cutoff), fs, 1)
    if np.any(np.abs(design_gain - _family_gain_db(spec)) > GAIN_CHECK_DB):
        raise SigtuneError(f"design is numerically unsound for fs={fs:g} Hz: gain at the cutoff "
                           f"{design_gain.round(2).tolist()} dB instead of {_family_gain_db(spec):.2f} dB. "
                           f"Lower the order, or resample to a lower rate first", "filter")
    dc_gain = float(np.real(signal.sosfreqz(sos, worN=[0.0], fs=fs)[1][0]))
    settle = _settling(sos, radius, dc_gain)
    if settle is None:
        lowest = min(_cutoffs(design_cutoff))
        raise SigtuneError(f"this design rings for more than {MAX_SETTLING_SAMPLES / fs:g} s at fs={fs:g} Hz "
                           f"({MAX_SETTLING_SAMPLES} samples), too long to pad or to leave out at the edges. "
                           f"Lower the order, use a Butterworth or Bessel family, or resample to about "
                           f"{max(lowest * 20, 1):g} Hz first", "filter")
    filter_order = spec.order * (2 if spec.band in ("bandpass", "bandstop") else 1)
    report = {
        "family": spec.family, "band": spec.band, "zero_phase": spec.zero_phase,
        "cutoff_mode": spec.cutoff_mode,
        "cutoff_hz": stated, "design_cutoff_hz": _cutoffs(design_cutoff),
        "gain_at_cutoff_db": tuple(float(g) for g in _gain_db(sos, stated, fs, passes)),
        "design_gain_at_cutoff_db": tuple(float(g) for g in _gain_db(sos, stated, fs, 1)),
        "order": spec.order, "filter_order": filter_order, "effective_order": filter_order * passes,
        "sections": int(sos.shape[0]),
        "settling_samples": settle, "settling_time_s": settle / fs,
        "settling_criterion": f"step response within {SETTLING_TOLERANCE:g} of its final value",
        "stable": True, "max_pole_radius": radius,
        "dc_gain": dc_gain ** passes,
        "fs": fs,
    }
    steady_state = signal.sosfilt_zi(sos)
    steady_state.flags.writeable = False
    return FilterDesign(sos=sos, fs=fs, filter=spec, design_cutoff=design_cutoff,
                        report=types.MappingProxyType(report), steady_state=steady_state)


@register_step
@dataclass(frozen=True)
class Filter(Step):
    """An IIR filter step (op ``"filter"``), designed as second-order sections.

    Parameters
    ----------
    family : {"butterworth", "chebyshev1", "chebyshev2", "elliptic", "bessel"}, default ``"butterworth"``
    band : {"lowpass", "highpass", "bandpass", "bandstop"}, default ``"lowpass"``
    order : int, default 4
        Prototype order, 1 to 16. Band-pass and band-stop filters have
        ``2 * order`` poles (scipy's convention); zero-phase filtering doubles
        the effective order again (see ``design(fs).report``).
    cutoff : float or (float, float), default 100.0
        Cutoff in Hz; a (low, high) pair for band-pass and band-stop, with
        ``0 < low < high < fs/2``. See the module notes for how each family
        defines its cutoff.
    zero_phase : bool, default False
        False: causal, one forward pass (:func:`scipy.signal.sosfilt`), with a
        phase lag. True: forward-backward (:func:`scipy.signal.sosfiltfilt`),
        no phase lag, squared magnitude, padded by the measured settling time.
    ripple_db : float, default 1.0
        Passband ripple in dB (> 0) for chebyshev1 and elliptic.
    attenuation_db : float, default 60.0
        Minimum stopband attenuation in dB (> 0) for chebyshev2 and elliptic.
    cutoff_mode : {"design", "effective"}, default ``"design"``
        ``"design"``: the cutoff goes to the design as given (zero-phase
        Butterworth: -6.02 dB there). ``"effective"``: the design cutoff is
        solved so that the response the signal actually sees is -3.01 dB at
        the stated cutoff (needs ``ripple_db < 1.5`` for chebyshev1/elliptic,
        so the doubled ripple stays above -3 dB).

    Notes
    -----
    For zero-phase filtering the record's mean is removed first and added back multiplied by
    the filter's DC gain (1 for low-pass and band-stop, 0 for high-pass and
    band-pass, ``10**(-ripple_db/20)`` for an even-order Chebyshev I). That is
    what the filter does to a constant in steady state, so a DC offset causes
    no start-up step, and the padding and the filter's states work on the
    signal's variations rather than on a large offset. The causal filter
    starts :func:`scipy.signal.sosfilt` in its steady state for the first
    sample (``zi = sosfilt_zi(sos) * x[0]``, as scipy's own documentation
    does): an offset then causes no start-up step either, only the first
    sample's departure from it rings, and no pass over the data is spent on
    the mean. Block processing needs no pre-pass for the same reason.

    Zero-phase padding is one settling time long (capped by the record),
    where scipy's default of ``3 * (2 * n_sections + 1)`` samples is far too
    short for a low high-pass corner. A low-pass is padded by odd reflection
    (continuing value and slope); the other bands by even reflection, because
    an odd reflection of the centred record sits at ``2 * x[0]`` and that step
    would ring through a filter that blocks low frequencies. Measured on
    tones, ramps and noise, the residue beyond one settling time stays below
    about 0.1 % of the signal's amplitude near the ends.

    The output has transients near the ends (the start only, for causal
    filtering) lasting one settling time; they are reported as
    ``info["edge_zones_s"]`` and collected by :func:`edge_zones`.

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Channel
    >>> lp = Filter("butterworth", "lowpass", order=4, cutoff=100.0)
    >>> round(float(lp.magnitude_db(1000.0, [100.0])[0]), 2)
    -3.01
    >>> zp = Filter(cutoff=100.0, zero_phase=True)
    >>> round(zp.design(1000.0).report["gain_at_cutoff_db"][0], 2)
    -6.02
    >>> t = np.arange(2000) / 1000.0
    >>> out = lp.apply(Channel(np.sin(2 * np.pi * 10 * t), fs=1000.0))
    >>> out.history[-1]["op"], out.history[-1]["info"]["edge_zones_s"]
    ('filter', [[0.0, 0.027]])
    """

    op: ClassVar[str] = "filter"
    family: str = "butterworth"
    band: str = "lowpass"
    order: int = 4
    cutoff: float | tuple[float, float] = 100.0
    zero_phase: bool = False
    ripple_db: float = 1.0
    attenuation_db: float = 60.0
    cutoff_mode: str = "design"

    def __post_init__(self):
        set_ = functools.partial(object.__setattr__, self)
        check_choice(self.family, "family", FILTER_FAMILIES)
        check_choice(self.band, "band", FILTER_BANDS)
        check_choice(self.cutoff_mode, "cutoff_mode", CUTOFF_MODES)
        set_("order", check_int(self.order, "order", low=1, high=MAX_ORDER))
        if not isinstance(self.zero_phase, (bool, np.bool_)):
            raise SigtuneError(f"must be true or false; got {self.zero_phase!r}", "zero_phase")
        set_("zero_phase", bool(self.zero_phase))
        set_("ripple_db", check_number(self.ripple_db, "ripple_db", low=0, low_open=True, unit="dB"))
        set_("attenuation_db", check_number(self.attenuation_db, "attenuation_db", low=0, low_open=True,
                                            unit="dB"))
        cutoff = _as_cutoff(self.cutoff)
        paired = self.band in ("bandpass", "bandstop")
        if paired != isinstance(cutoff, tuple):
            need = "a (low, high) pair in Hz" if paired else "a single frequency in Hz"
            raise SigtuneError(f"a {self.band} filter needs {need}; got {self.cutoff!r}", "cutoff")
        if paired and not cutoff[0] < cutoff[1]:
            raise SigtuneError(f"needs low < high; got low={cutoff[0]:g} Hz, high={cutoff[1]:g} Hz", "cutoff")
        set_("cutoff", cutoff)
        if (self.cutoff_mode == "effective" and self.family in ("chebyshev1", "elliptic")
                and self.ripple_db >= -HALF_POWER_DB / 2):
            raise SigtuneError(f"cutoff_mode='effective' needs ripple_db < 1.5 dB for {self.family} (the "
                               f"passband ripple is doubled); got {self.ripple_db:g} dB", "ripple_db")

    # ---- design ----
    def check_for_rate(self, fs: float) -> None:
        """Raise :class:`SigtuneError` if the cutoff cannot be designed at ``fs`` (Hz)."""
        nyq = fs / 2.0
        for c in _cutoffs(self.cutoff):
            if not c < nyq:
                raise SigtuneError(f"must be 0 < cutoff < {nyq:g} Hz (Nyquist for fs={fs:g} Hz); got {c:g} Hz. "
                                   f"Lower the cutoff or use a recording with a higher sample rate", "cutoff")
        lowest = min(_cutoffs(self.cutoff))
        if lowest < MIN_RELATIVE_CUTOFF * fs:
            rate = lowest / MIN_RELATIVE_CUTOFF
            raise SigtuneError(f"{lowest:g} Hz is too low for fs={fs:g} Hz to design reliably (lowest "
                               f"{MIN_RELATIVE_CUTOFF * fs:g} Hz, i.e. {MIN_RELATIVE_CUTOFF:g} fs): resample to "
                               f"{rate:g} Hz or less first, or raise the cutoff", "cutoff")

    def design(self, fs: float) -> FilterDesign:
        """Design the filter for sample rate ``fs`` (Hz); cached per (filter, fs).

        Returns
        -------
        FilterDesign
            Its ``report`` holds: ``cutoff_hz`` (stated) and ``design_cutoff_hz``
            (given to scipy); ``gain_at_cutoff_db`` (the effective response,
            both passes for zero-phase) and ``design_gain_at_cutoff_db`` (one
            pass); ``order``, ``filter_order`` (poles), ``effective_order``;
            ``sections``; ``settling_samples`` and ``settling_time_s`` (one
            pass: the step response stays within 0.1 % of its final value
            after it); ``stable`` and ``max_pole_radius``; ``dc_gain``
            (effective); ``fs``.

        Raises
        ------
        SigtuneError
            If a cutoff is not inside 0 < f < fs/2, is below 1e-6 fs, or the
            design is unstable, numerically unsound or rings for longer than
            2**24 samples.
        """
        return _design_cached(self, check_fs(fs))

    def sos(self, fs: float) -> np.ndarray:
        """Second-order sections for ``fs`` (Hz), shape (n_sections, 6), read-only."""
        return self.design(fs).sos

    # ---- responses ----
    def response(self, fs: float, freqs) -> np.ndarray:
        """Complex frequency response of one pass at ``freqs`` (Hz)."""
        _, h = signal.sosfreqz(self.sos(fs), worN=np.atleast_1d(np.asarray(freqs, float)), fs=fs)
        return h

    def effective_response(self, fs: float, freqs) -> np.ndarray:
        """The response the signal actually sees: ``|H|^2`` (real) for zero-phase, else ``H``."""
        h = self.response(fs, freqs)
        return (np.abs(h) ** 2).astype(complex) if self.zero_phase else h

    def magnitude_db(self, fs: float, freqs, effective: bool = False) -> np.ndarray:
        """Magnitude in dB at ``freqs`` (Hz): one pass, or the effective response."""
        h = self.effective_response(fs, freqs) if effective else self.response(fs, freqs)
        with np.errstate(divide="ignore"):
            return 20.0 * np.log10(np.abs(h))

    def phase(self, fs: float, freqs, effective: bool = False) -> np.ndarray:
        """Unwrapped phase in rad at ``freqs`` (Hz, ascending); zero for the effective zero-phase response."""
        h = self.effective_response(fs, freqs) if effective else self.response(fs, freqs)
        return np.unwrap(np.angle(h))

    def group_delay(self, fs: float, freqs, effective: bool = False) -> np.ndarray:
        """Group delay in samples at ``freqs`` (Hz).

        Summed over the sections, which stays accurate where the full
        transfer-function polynomial would not. NaN where a section's zero lies on the unit
        circle at that frequency (f = 0 for a high-pass, Nyquist for a
        low-pass, the notches of Chebyshev II/elliptic), since the delay is
        undefined there. Zero for the effective zero-phase response.
        """
        freqs = np.atleast_1d(np.asarray(freqs, float))
        if effective and self.zero_phase:
            return np.zeros(freqs.shape)
        z = np.exp(-2j * np.pi * freqs / fs)
        return sum(_polynomial_delay(section[:3], z) - _polynomial_delay(section[3:], z) for section in self.sos(fs))

    def group_delay_s(self, fs: float, freqs, effective: bool = False) -> np.ndarray:
        """Group delay in s at ``freqs`` (Hz)."""
        return self.group_delay(fs, freqs, effective) / fs

    def impulse_response(self, fs: float, n: int) -> np.ndarray:
        """First ``n`` samples of one pass's response to a unit impulse."""
        n = check_int(n, "n", low=1)
        impulse = np.zeros(n)
        impulse[0] = 1.0
        return signal.sosfilt(np.array(self.sos(fs)), impulse)

    def step_response(self, fs: float, n: int) -> np.ndarray:
        """First ``n`` samples of one pass's response to a unit step."""
        return signal.sosfilt(np.array(self.sos(fs)), np.ones(check_int(n, "n", low=1)))

    def block_processor(self, fs: float, level: float | None = 0.0) -> "CausalBlockFilter":
        """Return a causal block filter for records too long to hold in memory.

        Feeding consecutive blocks to its ``process`` gives, concatenated,
        the same output as one :func:`scipy.signal.sosfilt` over the whole
        record started in steady state for a constant input ``level``
        (``level=0``, the default: plain ``sosfilt``; ``level=None``: the
        first sample, which gives the same output as :meth:`apply`). Only
        causal filters stream this way: zero-phase filtering runs backwards
        from the record's end, so it needs the whole record, or overlapping
        blocks (:meth:`zero_phase_blocks`).

        Examples
        --------
        >>> import numpy as np
        >>> x = np.random.default_rng(0).normal(size=1000)
        >>> blocks = Filter(cutoff=50.0).block_processor(1000.0)
        >>> y = np.concatenate([blocks.process(b) for b in np.array_split(x, 7)])
        >>> bool(np.allclose(y, signal.sosfilt(np.array(Filter(cutoff=50.0).sos(1000.0)), x)))
        True
        >>> same = Filter(cutoff=50.0).block_processor(1000.0, level=None)
        >>> y = np.concatenate([same.process(b) for b in np.array_split(x, 7)])
        >>> bool(np.array_equal(y, Filter(cutoff=50.0).apply(Channel(x, 1000.0)).data))
        True
        """
        if self.zero_phase:
            raise SigtuneError("zero-phase filtering needs the whole record (it runs backwards from the end); "
                               "set zero_phase=False for block processing", "zero_phase")
        design = self.design(fs)
        return CausalBlockFilter(design.sos, level, steady_state=design.steady_state)

    def zero_phase_blocks(self, fs: float, read, n_samples: int, block_samples: int = 2 ** 22,
                          overlap_settling: int = 4, mean: float | None = None):
        """Zero-phase filter a long record block by block; yield ``(start, filtered_block)``.

        Each block is filtered together with ``overlap_settling`` settling
        times of its neighbours on both sides (overlap-save), and only its own
        samples are kept, so the result matches :meth:`apply` on the whole
        record to within a residue that shrinks about a thousandfold per
        settling time of overlap (measured on noise, tones and an offset: below
        1e-8 of the signal's range with the default 4 settling times, about
        1e-11 with 6; see the tests). The record's ends are padded exactly as
        :meth:`apply` pads them. Work grows by ``2 * overlap / block``, so keep
        blocks several overlaps long.

        Parameters
        ----------
        fs : float
            Sample rate in Hz.
        read : callable
            ``read(start, stop)`` returns samples ``start:stop`` (an HDF5
            dataset's slicing, or an array's, will do).
        n_samples : int
            Length of the record.
        block_samples : int, default 2**22
            Samples yielded per block (the last may be shorter).
        overlap_settling : int, default 4
            Overlap on each side, in settling times (1 to 50).
        mean : float, optional
            The whole record's mean; by default one extra pass of ``read``
            computes it.

        Examples
        --------
        >>> x = np.random.default_rng(0).normal(size=5000)
        >>> zp = Filter(band="highpass", cutoff=20.0, zero_phase=True)
        >>> y = np.concatenate([b for _, b in zp.zero_phase_blocks(1000.0, lambda a, b: x[a:b], x.size, 700)])
        >>> whole = zp.apply(Channel(x, 1000.0)).data
        >>> bool(np.abs(y - whole).max() < 1e-9)
        True
        """
        if not self.zero_phase:
            raise SigtuneError("zero_phase_blocks is for zero-phase filters; use block_processor for a causal one",
                               "zero_phase")
        design = self.design(fs)
        n = check_int(n_samples, "n_samples", low=2)
        block = check_int(block_samples, "block_samples", low=1)
        overlap = check_int(overlap_settling, "overlap_settling", low=1, high=50) * design.settling_samples
        if mean is None:
            mean = sum(float(np.sum(read(a, min(a + block, n)), dtype=np.float64)) for a in range(0, n, block)) / n
        mean = check_number(mean, "mean")
        dc_level = design.report["dc_gain"] * mean if self.band in ("lowpass", "bandstop") else 0.0
        sos = np.array(design.sos)
        for start in range(0, n, block):
            stop = min(start + block, n)
            low, high = max(0, start - overlap), min(n, stop + overlap)
            y = self._forward_backward(design, sos, np.asarray(read(low, high)), mean, n)
            yield start, y[start - low:stop - low] + dc_level

    # ---- application ----
    def process(self, channel: Channel):
        design = self._design_for(channel)
        x = channel.data
        settle = design.settling_samples
        if x.size < SHORT_RECORD_SETTLING_TIMES * settle:
            warnings.warn(f"channel {channel.name!r}: the record ({channel.duration:g} s) is shorter than "
                          f"{SHORT_RECORD_SETTLING_TIMES} settling times of this filter "
                          f"({design.report['settling_time_s']:g} s each); edge transients cover much of it. "
                          f"Use a longer record or a higher cutoff", SigtuneWarning, stacklevel=3)
        sos = np.array(design.sos)
        if self.zero_phase:
            mean = float(np.mean(x, dtype=np.float64))
            y = self._forward_backward(design, sos, x, mean, x.size)
            if self.band in ("lowpass", "bandstop"):  # DC passes: put the mean back at the DC gain
                y += design.report["dc_gain"] * mean
        else:
            y = CausalBlockFilter(sos, level=None, steady_state=design.steady_state).process(x)
        info = {"edge_zones_s": self._edge_zones(channel, settle),
                "settling_time_s": design.report["settling_time_s"],
                "design_cutoff_hz": list(design.report["design_cutoff_hz"]),
                "effective_order": design.report["effective_order"]}
        if self.zero_phase:
            info.update(padlen=min(settle, x.size - 1), padtype=self._padtype)
        return channel.replace(data=y.astype(x.dtype, copy=False)), info

    @property
    def _padtype(self) -> str:
        return "odd" if self.band == "lowpass" else "even"

    def _forward_backward(self, design: FilterDesign, sos: np.ndarray, x: np.ndarray, mean: float,
                          n_record: int) -> np.ndarray:
        """``sosfiltfilt`` of ``x - mean``, padded by the settling time (capped by the whole record's length).

        The centred samples and their reflections are written into one buffer
        by hand, rather than centring a copy and letting sosfiltfilt pad a
        second one: that saves a full pass and allocation (about 15 % of the
        time at 10^7 samples). The padding is scipy's even or odd extension;
        the tests hold the result to ``sosfiltfilt(x - mean, padtype, padlen)``.
        """
        pad = min(design.settling_samples, n_record - 1, x.size - 1)
        ext = np.empty(x.size + 2 * pad)
        body = ext[pad:pad + x.size]
        np.subtract(x, mean, out=body)
        head, tail = body[pad:0:-1], body[-2:-pad - 2:-1]  # the reflections about the end samples
        if self._padtype == "odd":
            np.subtract(2.0 * body[0], head, out=ext[:pad])
            np.subtract(2.0 * body[-1], tail, out=ext[pad + x.size:])
        else:
            ext[:pad], ext[pad + x.size:] = head, tail
        return signal.sosfiltfilt(sos, ext, padtype=None)[pad:pad + x.size]

    def _design_for(self, channel: Channel) -> FilterDesign:
        try:
            return self.design(channel.fs)
        except SigtuneError as err:
            raise err.located(f"channel {channel.name!r}") from None

    def _edge_zones(self, channel: Channel, settle: int) -> list[list[float]]:
        t0, t1 = channel.start_time, channel.start_time + channel.duration
        width = min(settle / channel.fs, channel.duration)
        zones = [[t0, t0 + width]]
        if self.zero_phase:
            zones.append([t1 - width, t1])
        return zones


def _polynomial_delay(coefficients: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Group delay (samples) of ``sum c_k z**k`` at ``z = exp(-j w)``: ``Re(sum k c_k z**k / sum c_k z**k)``.

    The formula scipy.signal.group_delay uses, written out so that singular
    points become NaN without scipy's warning (suppressing warnings is not
    thread-safe, and the app computes responses in worker threads).
    """
    k = np.arange(coefficients.size)
    value = np.polyval(coefficients[::-1], z)
    ramp = np.polyval((k * coefficients)[::-1], z)
    with np.errstate(divide="ignore", invalid="ignore"):
        delay = np.real(ramp / value)
    return np.where(np.abs(value) > 1e-9 * np.abs(coefficients).sum(), delay, np.nan)


class CausalBlockFilter:
    """Causal filtering of a long record block by block, carrying the section state.

    Made by :meth:`Filter.block_processor`. ``process(block)`` returns the
    filtered block (float64); the state ``zi`` carries over to the next call.
    ``level`` is the constant input the filter starts in steady state for;
    ``None`` takes the first sample of the first non-empty block.
    ``steady_state`` is ``sosfilt_zi(sos)``, if already known (a design's).
    """

    def __init__(self, sos: np.ndarray, level: float | None = 0.0, steady_state: np.ndarray | None = None):
        self.sos = np.array(sos)  # a writable copy: scipy's sosfilt needs one
        self._unit_state = signal.sosfilt_zi(self.sos) if steady_state is None else steady_state
        self.zi = None if level is None else self._unit_state * check_number(level, "level")

    def process(self, block) -> np.ndarray:
        """Filter the next block of samples (1-D) and return it."""
        block = np.asarray(block, dtype=np.float64)
        if self.zi is None:
            if block.size == 0:
                return block.copy()
            self.zi = self._unit_state * float(block[0])
        y, self.zi = signal.sosfilt(self.sos, block, zi=self.zi)
        return y


def edge_zones(channel: Channel) -> list[tuple[float, float]]:
    """Collect the intervals with edge transients from a channel's history.

    Parameters
    ----------
    channel : Channel

    Returns
    -------
    list of (float, float)
        ``(t_start, t_end)`` in s on the channel's absolute time axis (the same
        axis as ``channel.time()``, including ``start_time``), one per zone of
        each step that reported ``info["edge_zones_s"]``, oldest step first.
        Because the times are absolute, zones recorded before a later crop or
        resample stay meaningful; zones that a crop has cut away entirely are
        dropped and the rest are clipped to the record.

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Channel
    >>> ch = Filter(band="highpass", cutoff=50.0, zero_phase=True).apply(Channel(np.zeros(1000), 1000.0))
    >>> [(round(a, 3), round(b, 3)) for a, b in edge_zones(ch)]
    [(0.0, 0.058), (0.942, 1.0)]
    """
    t0, t1 = channel.start_time, channel.start_time + channel.duration
    zones = []
    for entry in channel.history:
        for start, end in (entry.get("info") or {}).get("edge_zones_s", ()):
            start, end = max(float(start), t0), min(float(end), t1)
            if end > start:
                zones.append((start, end))
    return zones
