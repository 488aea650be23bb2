"""Advice on common mistakes, as data the app and reports show.

:func:`advise` looks at a channel, the processing chain applied to it and
what the user is about to read, and returns :class:`Advisory` items: what was
seen (with numbers) and what to do. The rules, each with its stated
threshold:

``integrate_with_offset`` (warning)
    The chain integrates (an ``integrate`` step, or ``integrating=True``)
    with no ``detrend`` step and no high-pass filter before it, and the
    channel's mean exceeds 1 % of its AC RMS, or the change of its least-
    squares line over the record exceeds 2 % of it. Both limits are raised to
    6 standard errors of white noise of the same RMS (``6 sigma / sqrt(n)``
    for the mean, ``6 sigma sqrt(12 / n)`` for the trend) so noise alone
    does not trigger them. An offset ``c`` integrates to ``c t`` and ``c t^2 /
    2`` (analytic).
``highpass_near_band`` (warning)
    With ``band=(f_lo, f_hi)`` given: a Butterworth-type high-pass corner
    (a ``filter`` step's lower cutoff, the ``time`` integration's ``f_low``,
    or ``f_low=`` in the context) above ``f_lo / 3``, or the ``frequency``
    integration's ``f_low`` above ``f_lo`` (its low cut is flat above
    ``f_low``). The factor 3 is common practice; the advisory states the
    actual attenuation at ``f_lo`` where the filter and rate are known.
``tone_from_psd`` (info)
    A PSD or ASD (``spectrum=``) shows a narrow tone: a peak at least 15 dB
    (power) above the running median of the surrounding 21 bins and at most
    5 bins wide at half its prominence. A tone's PSD level depends on the
    resolution bandwidth; its amplitude is read from a linear spectrum with a
    flat-top window (``dsp.linear_spectrum``).
``phase_after_causal_filter`` (warning)
    ``reads`` includes ``"phase"`` and the chain has a causal filter (a
    ``filter`` step, or a ``time`` integration, with ``zero_phase=False``, or
    a ``weighting`` step).
``crest_factor_rms_only`` (warning)
    The channel's crest factor (peak of the mean-removed signal over its RMS)
    is above 9 and the evaluation reads RMS without VDV or MTVV (``reads``
    has ``"rms"`` but neither ``"vdv"`` nor ``"mtvv"``; with ``reads`` not
    given, RMS alone is assumed). ISO 2631-1:1997 clause 6.2.1: the basic
    (RMS) method may underestimate the effects when the crest factor exceeds
    9; clause 6.3 gives the running RMS (MTVV) and the VDV for such cases.
    The standard's crest factor is that of the frequency-weighted
    acceleration: pass the weighted channel.
``unit_level`` (warning)
    The RMS (with the mean) in SI lies outside a plausible range for its
    quantity - acceleration 1e-5 to 1e3 m/s^2 (about 1 ug to 100 g),
    velocity 1e-8 to 10 m/s, displacement 1e-10 to 1 m (sigtune's own broad
    limits: they catch a factor-1000 slip, not a small one) - or a
    DC-dominated acceleration (mean above 3 times the AC RMS) reads about
    1 g (within 10 %) only if its unit is something else: mean 1 in m/s^2
    (looks like g), 9.81 in g (looks like m/s^2), 1000 in g (looks like mg).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
from scipy import signal

from .channel import Channel
from .errors import SigtuneError
from .filters import Filter
from .motion import Integrate
from .steps import Chain
from .units import STANDARD_GRAVITY, UNITS, unit_info

__all__ = ["Advisory", "advise", "ADVISORY_CODES", "PLAUSIBLE_RMS_SI"]

ADVISORY_CODES = ("integrate_with_offset", "highpass_near_band", "tone_from_psd", "phase_after_causal_filter",
                  "crest_factor_rms_only", "unit_level")
OFFSET_RATIO = 0.01
TREND_RATIO = 0.02
NOISE_FLOOR_Z = 6.0
HIGHPASS_MARGIN = 3.0  # common practice: corner at most a third of the band's lower edge
TONE_PROMINENCE_DB = 15.0
TONE_MAX_WIDTH_BINS = 5.0
TONE_BACKGROUND_BINS = 21
CREST_FACTOR_LIMIT = 9.0  # ISO 2631-1:1997 clause 6.2.1
#: Plausible RMS range in SI per quantity (sigtune's own broad limits, see the module notes).
PLAUSIBLE_RMS_SI = {"acceleration": (1e-5, 1e3), "velocity": (1e-8, 10.0), "displacement": (1e-10, 1.0)}
GRAVITY_DOMINANCE = 3.0
GRAVITY_TOLERANCE = 0.1
CONTEXT_KEYS = ("band", "integrating", "spectrum", "reads", "f_low")


@dataclass(frozen=True)
class Advisory:
    """One piece of advice.

    Parameters
    ----------
    code : str
        One of :data:`ADVISORY_CODES`.
    severity : {"info", "warning"}
    seen : str
        What was observed, with numbers.
    action : str
        What to do.
    reference : str, optional
        The standard clause or rule behind it.
    """

    code: str
    severity: str
    seen: str
    action: str
    reference: str = ""

    def to_dict(self) -> dict[str, Any]:
        """Return the advisory as JSON-ready data."""
        return asdict(self)


def advise(channel: Channel | None = None, chain=None, **context) -> list[Advisory]:
    """Return the advisories that apply to a channel, its chain and what is read from it.

    Parameters
    ----------
    channel : Channel, optional
        The channel the chain starts from (or the weighted channel, for the
        crest-factor rule).
    chain : Chain or list of Step or dict, optional
        The processing steps.
    **context
        ``band`` (f_lo, f_hi) in Hz: the band of interest. ``integrating``
        (bool): the channel will be integrated (default: the chain has an
        ``integrate`` step). ``spectrum``: a :class:`dsp.Spectrum` being read.
        ``reads``: what is read from the result, among ``"rms"``, ``"vdv"``,
        ``"mtvv"``, ``"peak"``, ``"phase"``, ``"tone_amplitude"``. ``f_low``
        (Hz): a planned high-pass corner.

    Returns
    -------
    list of Advisory
        In the order of :data:`ADVISORY_CODES`; empty when nothing applies.

    Examples
    --------
    >>> t = np.arange(10000) / 1000.0
    >>> ch = Channel(np.sin(2 * np.pi * 20 * t) + 0.2, 1000.0)
    >>> [a.code for a in advise(ch, integrating=True)]
    ['integrate_with_offset']
    """
    unknown = sorted(set(context) - set(CONTEXT_KEYS))
    if unknown:
        raise SigtuneError(f"unknown context {unknown[0]!r}; valid: {', '.join(CONTEXT_KEYS)}", "advise")
    steps = [s.to_dict() for s in Chain(chain or [])]
    reads = None if context.get("reads") is None else {str(r) for r in _as_iterable(context["reads"])}
    band = _band(context.get("band"))
    out: list[Advisory] = []
    integrating = context.get("integrating")
    if integrating is None:
        integrating = any(s["op"] == "integrate" for s in steps)
    if channel is not None and integrating:
        out += _offset_rule(channel, steps)
    if band is not None:
        out += _highpass_rule(channel, steps, band, context.get("f_low"))
    if context.get("spectrum") is not None:
        out += _tone_rule(context["spectrum"])
    if reads is not None and "phase" in reads:
        out += _phase_rule(steps)
    if channel is not None:
        out += _crest_rule(channel, reads)
        out += _unit_rule(channel)
    return out


def _as_iterable(value) -> Iterable:
    return [value] if isinstance(value, str) else value


def _band(value) -> tuple[float, float] | None:
    if value is None:
        return None
    try:
        lo, hi = (float(v) for v in value)
    except (TypeError, ValueError):
        raise SigtuneError(f"band must be (f_lo, f_hi) in Hz; got {value!r}", "band") from None
    if not 0 < lo < hi:
        raise SigtuneError(f"band must satisfy 0 < f_lo < f_hi (Hz); got ({lo:g}, {hi:g})", "band")
    return lo, hi


def _finite(channel: Channel) -> np.ndarray:
    x = np.asarray(channel.data, dtype=np.float64)
    return x[np.isfinite(x)]


# ---------------------------------------------------------------- rules
def _offset_rule(channel: Channel, steps: list[dict]) -> list[Advisory]:
    before = steps[:next((i for i, s in enumerate(steps) if s["op"] == "integrate"), len(steps))]
    if any(s["op"] == "detrend" or (s["op"] == "filter" and s.get("band") in ("highpass", "bandpass"))
           for s in before):
        return []
    x = _finite(channel)
    if x.size < 3:
        return []
    sigma = float(np.std(x))
    mean = float(np.mean(x))
    t = np.arange(x.size) / channel.fs
    change = abs(float(np.polyfit(t, x - mean, 1)[0])) * x.size / channel.fs
    if sigma == 0:
        return []
    mean_limit = max(OFFSET_RATIO, NOISE_FLOOR_Z / math.sqrt(x.size)) * sigma
    trend_limit = max(TREND_RATIO, NOISE_FLOOR_Z * math.sqrt(12.0 / x.size)) * sigma
    seen = []
    if abs(mean) > mean_limit:
        seen.append(f"mean {mean:.4g} {channel.unit} = {abs(mean) / sigma:.1%} of the AC RMS {sigma:.4g}")
    if change > trend_limit:
        seen.append(f"a linear trend changing by {change:.4g} {channel.unit} over the record "
                    f"({change / sigma:.1%} of the AC RMS)")
    if not seen:
        return []
    return [Advisory("integrate_with_offset", "warning",
                     f"channel {channel.name!r} is integrated with " + " and ".join(seen),
                     "add a detrend step (constant or linear) or a high-pass before integrating; an offset c "
                     "grows as c t in velocity and c t^2/2 in displacement, and a large one points to a sensor "
                     "bias or a DC-coupled axis", "analytic: integral of a constant")]


def _corners(steps: list[dict], planned: float | None) -> list[tuple[str, float, float, dict | None]]:
    """Return ``(description, corner Hz, allowed factor, filter step dict or None)`` of each high-pass."""
    found = []
    for i, s in enumerate(steps):
        if s["op"] == "filter" and s.get("band") in ("highpass", "bandpass"):
            cutoff = s["cutoff"][0] if isinstance(s["cutoff"], (list, tuple)) else s["cutoff"]
            found.append((f"steps[{i}] {s['band']} filter", float(cutoff), HIGHPASS_MARGIN, s))
        elif s["op"] == "integrate" and s.get("method") in ("time", "frequency"):
            step = Integrate(**{k: v for k, v in s.items() if k not in ("op", "sigtune", "info")})
            corner, _ = step.resolved_f_low()
            factor = HIGHPASS_MARGIN if s["method"] == "time" else 1.0
            found.append((f"steps[{i}] {s['method']} integration f_low", corner, factor, None))
    if planned is not None:
        found.append(("the planned high-pass corner f_low", float(planned), HIGHPASS_MARGIN, None))
    return found


def _highpass_rule(channel, steps, band, planned) -> list[Advisory]:
    out = []
    for what, corner, factor, spec in _corners(steps, planned):
        if corner * factor <= band[0]:
            continue
        effect = ""
        if spec is not None and channel is not None:
            settings = {k: v for k, v in spec.items() if k not in ("op", "sigtune", "info")}
            h = Filter(**settings).effective_response(channel.fs, [band[0]])
            effect = f"; it attenuates {band[0]:g} Hz by {-20 * math.log10(abs(h[0])):.2f} dB"
        limit = band[0] / factor
        out.append(Advisory("highpass_near_band", "warning",
                            f"{what} is {corner:g} Hz, too close to the band of interest starting at "
                            f"{band[0]:g} Hz{effect}",
                            f"lower the corner to {limit:g} Hz or less, or start the band higher",
                            "common practice: high-pass corner at most 1/3 of the band's lower edge"
                            if factor > 1 else "the frequency method's low cut is flat above f_low"))
    return out


def _spectrum_parts(spectrum) -> tuple[np.ndarray, np.ndarray, str]:
    if isinstance(spectrum, Mapping):
        return (np.asarray(spectrum["frequencies"], float), np.asarray(spectrum["values"], float),
                str(spectrum["scaling"]))
    return np.asarray(spectrum.frequencies, float), np.asarray(spectrum.values, float), str(spectrum.scaling)


def _tone_rule(spectrum) -> list[Advisory]:
    f, v, scaling = _spectrum_parts(spectrum)
    if scaling not in ("psd", "asd") or v.ndim != 1 or v.size < 2 * TONE_BACKGROUND_BINS:
        return []
    power = v ** 2 if scaling == "asd" else v
    with np.errstate(divide="ignore"):
        level = 10.0 * np.log10(np.maximum(power, np.finfo(float).tiny))
    background = signal.medfilt(level, TONE_BACKGROUND_BINS)
    peaks, props = signal.find_peaks(level, prominence=TONE_PROMINENCE_DB, width=(None, TONE_MAX_WIDTH_BINS),
                                     rel_height=0.5)
    tones = [(f[p], level[p] - background[p]) for p in peaks if level[p] - background[p] >= TONE_PROMINENCE_DB]
    if not tones:
        return []
    listed = ", ".join(f"{fr:.4g} Hz (+{db:.0f} dB)" for fr, db in sorted(tones, key=lambda t: -t[1])[:3])
    return [Advisory("tone_from_psd", "info",
                     f"the {scaling.upper()} shows {len(tones)} narrow tone(s): {listed}; a tone's density "
                     f"level depends on the resolution bandwidth",
                     "read tone amplitudes from dsp.linear_spectrum(channel, window='flattop'); use the PSD "
                     "for broadband levels", "common practice: flat-top window for amplitude accuracy")]


def _phase_rule(steps: list[dict]) -> list[Advisory]:
    causal = [f"steps[{i}] ({s['op']})" for i, s in enumerate(steps)
              if (s["op"] in ("filter", "integrate") and s.get("zero_phase") is False
                  and (s["op"] == "filter" or s.get("method") == "time")) or s["op"] == "weighting"]
    if not causal:
        return []
    return [Advisory("phase_after_causal_filter", "warning",
                     f"phase is read after the causal filter(s) {', '.join(causal)}, which shift phase with "
                     f"frequency", "use zero_phase=True, or apply the same filter to every channel compared, "
                     "or correct by the filter's phase (Filter.phase)", "")]


def _crest_rule(channel: Channel, reads) -> list[Advisory]:
    if reads is not None and ("rms" not in reads or reads & {"vdv", "mtvv"}):
        return []
    x = _finite(channel)
    sigma = float(np.std(x)) if x.size else 0.0
    if sigma == 0:
        return []
    crest = float(np.max(np.abs(x - np.mean(x)))) / sigma
    if crest <= CREST_FACTOR_LIMIT:
        return []
    return [Advisory("crest_factor_rms_only", "warning",
                     f"crest factor {crest:.1f} (above {CREST_FACTOR_LIMIT:g}) evaluated by RMS alone",
                     "also report the vibration dose value (VDV) and the maximum transient vibration value "
                     "(MTVV); the RMS may underestimate the effect of the shocks",
                     "ISO 2631-1:1997 clause 6.2.1 (and 6.3 for the additional methods)")]


def _unit_rule(channel: Channel) -> list[Advisory]:
    limits = PLAUSIBLE_RMS_SI.get(channel.quantity)
    x = _finite(channel)
    if limits is None or x.size == 0:
        return []
    gravity = _gravity_signature(channel, x)
    if gravity:
        return gravity
    rms = float(np.sqrt(np.mean(np.square(x))))
    rms_si = rms * unit_info(channel.unit).to_si
    if rms_si == 0 or limits[0] <= rms_si <= limits[1]:
        return []
    si = {"acceleration": "m/s^2", "velocity": "m/s", "displacement": "m"}[channel.quantity]
    return [Advisory("unit_level", "warning",
                     f"RMS {rms:.4g} {channel.unit} = {rms_si:.3g} {si} is outside the plausible range "
                     f"{limits[0]:g} to {limits[1]:g} {si} for {channel.quantity}",
                     "check the declared unit and the sensor sensitivity (a mV/g vs mV/(m/s^2) or "
                     "V vs mV slip is a factor 10 to 1000)", "sigtune's plausibility limits")]


def _gravity_signature(channel: Channel, x: np.ndarray) -> list[Advisory]:
    """A DC-dominated acceleration that reads 1 g only in another unit."""
    mean, sigma = float(np.mean(x)), float(np.std(x))
    if channel.quantity != "acceleration" or abs(mean) <= GRAVITY_DOMINANCE * sigma:
        return []
    reads_g = abs(mean) * unit_info(channel.unit).to_si / STANDARD_GRAVITY
    if abs(reads_g - 1.0) <= GRAVITY_TOLERANCE:
        return []
    misfit = {u.symbol: abs(abs(mean) * u.to_si / STANDARD_GRAVITY - 1.0) for u in UNITS.values()
              if u.quantity == "acceleration" and u.symbol != channel.unit}
    fits = sorted((s for s, m in misfit.items() if m <= GRAVITY_TOLERANCE), key=misfit.get)  # best first
    if not fits:
        return []
    return [Advisory("unit_level", "warning",
                     f"the mean {mean:.4g} {channel.unit} dominates (DC-coupled?) and would read 1 g if the "
                     f"unit were {' or '.join(fits)}; as declared it is {reads_g:.3g} g",
                     f"check the unit: if the axis is at rest and vertical, declare {fits[0]}",
                     "standard gravity 9.80665 m/s^2 (ISO 80000-3)")]
