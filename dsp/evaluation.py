"""Evaluation against vibration standards: human exposure (this module), machinery and buildings.

Whole-body vibration (ISO 2631-1:1997; Directive 2002/44/EC)
    :func:`whole_body`: weighted RMS a_w, running RMS (1 s, linear
    integration) and its maximum MTVV, VDV, crest factor, the tests for when
    the basic method is not enough, vector sum with the multiplying factors
    k, A(8), estimated VDV, the health guidance caution zone (Annex B, both
    equations) and the Directive's action and limit values.
Hand-arm vibration (ISO 5349-1:2001; Directive 2002/44/EC)
    :func:`hand_arm`: Wh-weighted RMS per axis, vibration total value a_hv,
    A(8); :func:`daily_exposure` combines several tasks or exposures.
Machinery severity and building vibration
    :func:`severity_zone`, :func:`machine_severity` and :func:`building_ppv`
    live in :mod:`dsp.severity` and are re-exported here; the cautions and
    clause references shared by all of them in :mod:`dsp.guidance`.

Every result has ``clause`` (what it follows), ``caution`` (plain language,
from :data:`CAUTIONS`, the one place the app takes its text from) and
``to_dict()``. Values recalled but not confirmed against the standard's text
are marked ``# from memory`` and listed in ``docs/evaluation.md``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ._json import json_ready
from ._validate import check_choice, check_number
from .channel import Channel
from .errors import SigtuneError
from .guidance import CAUTIONS, CLAUSES, _by_axis, _longest_clean_span, _Result
from .severity import (BUILDING_CLASSES, BUILDING_GUIDELINES, SEVERITY_ZONES, BuildingResult,
                       MachineSeverityResult, building_ppv, guideline_velocity, machine_severity,
                       severity_zone)
from .units import conversion_factor
from .weighting import Weighting

# CAUTIONS, CLAUSES (dsp.guidance) and the machinery and building evaluations (dsp.severity) are
# re-exported here: this module is the entry point for every evaluation.
__all__ = ["CAUTIONS", "CLAUSES", "HEALTH_FACTORS", "COMFORT_FACTORS", "EXPOSURE_VALUES",
           "HEALTH_CAUTION_ZONE", "COMFORT_REACTIONS", "AxisFigures", "WholeBodyResult", "HandArmResult",
           "DailyExposureResult", "whole_body", "hand_arm", "daily_exposure", "combined_vdv",
           "running_rms", "vibration_dose_value",
           "BUILDING_CLASSES", "BUILDING_GUIDELINES", "SEVERITY_ZONES", "BuildingResult", "MachineSeverityResult",
           "building_ppv", "guideline_velocity", "machine_severity", "severity_zone"]

# ---- tables ----
#: Weighting and multiplying factor k per axis for health (ISO 2631-1:1997 clause 7.2.3; seated only).
HEALTH_FACTORS: dict[str, dict[str, tuple[str, float]]] = {
    "seated": {"x": ("Wd", 1.4), "y": ("Wd", 1.4), "z": ("Wk", 1.0)},
}
#: Weighting and k per measuring point and axis for comfort (ISO 2631-1:1997 clause 8.2.2, Table 1).
COMFORT_FACTORS: dict[str, dict[str, tuple[str, float]]] = {
    "seated": {"x": ("Wd", 1.0), "y": ("Wd", 1.0), "z": ("Wk", 1.0),
               "rx": ("We", 0.63), "ry": ("We", 0.4), "rz": ("We", 0.2),  # from memory (k in m/rad)
               "back_x": ("Wc", 0.8), "back_y": ("Wd", 0.5), "back_z": ("Wd", 0.4),  # from memory
               "feet_x": ("Wk", 0.25), "feet_y": ("Wk", 0.25), "feet_z": ("Wk", 0.4)},  # from memory
    "standing": {"x": ("Wd", 1.0), "y": ("Wd", 1.0), "z": ("Wk", 1.0)},
    # recumbent, under the pelvis: x (back to chest) is vertical for a person lying on the back
    "recumbent": {"x": ("Wk", 1.0), "y": ("Wd", 1.0), "z": ("Wd", 1.0)},  # from memory
}

#: Daily exposure action and limit values, Directive 2002/44/EC Article 3.
EXPOSURE_VALUES: dict[str, dict[str, float]] = {
    "hand_arm": {"action_a8": 2.5, "limit_a8": 5.0},  # m/s^2, Art. 3(1)
    "whole_body": {"action_a8": 0.5, "limit_a8": 1.15,  # m/s^2, Art. 3(2)
                   "action_vdv": 9.1, "limit_vdv": 21.0},  # m/s^1.75, Art. 3(2)
}

#: Health guidance caution zone of ISO 2631-1:1997 Annex B, Figure B.1 (from memory):
#: eq. B.1 boundaries as a_w at 8 h (scaled by sqrt(8 h / T)); eq. B.2 as VDV (m/s^1.75).
HEALTH_CAUTION_ZONE: dict[str, Any] = {
    "B.1_a8_m_s2": (0.45, 0.90),  # from memory
    "B.2_vdv": (8.5, 17.0),  # from memory
    "figure_range_h": (10.0 / 60.0, 24.0),  # durations drawn in Figure B.1, from memory
}

#: Likely comfort reactions to a total value a_v (m/s^2), ISO 2631-1:1997 Annex C.2.3 (from memory).
COMFORT_REACTIONS: tuple[tuple[float, float, str], ...] = (
    (0.0, 0.315, "not uncomfortable"), (0.315, 0.63, "a little uncomfortable"),
    (0.5, 1.0, "fairly uncomfortable"), (0.8, 1.6, "uncomfortable"),
    (1.25, 2.5, "very uncomfortable"), (2.0, math.inf, "extremely uncomfortable"),
)

_RUNNING_RMS_S = 1.0  # integration time tau, ISO 2631-1:1997 clause 6.3.1 (recommended 1 s)
_CREST_LIMIT = 9.0  # ISO 2631-1:1997 clause 6.2.1
_MTVV_RATIO_LIMIT = 1.5  # ISO 2631-1:1997 clause 6.3.3, eq. (9)
_VDV_RATIO_LIMIT = 1.75  # ISO 2631-1:1997 clause 6.3.3, eq. (10)
_EVDV_FACTOR = 1.4  # eVDV = 1.4 a_w T^(1/4), ISO 2631-1:1997 clause 6.3.3 note / Annex B.3.1; from memory
_T0_H = 8.0  # reference day, Directive 2002/44/EC Annex A.1, B.1; ISO 5349-1 clause 5


# ---- metrics on a weighted record ----
def running_rms(x, fs: float, tau_s: float = _RUNNING_RMS_S) -> np.ndarray:
    """Return the running RMS with linear integration over ``tau_s`` s (ISO 2631-1 clause 6.3.1, eq. 4).

    One value per sample from the first full window on: value i is the RMS
    of samples i .. i + n - 1, n = round(tau_s * fs).

    Examples
    --------
    >>> r = running_rms(np.ones(300), 100.0)
    >>> r.shape, float(r.max())
    ((201,), 1.0)
    """
    n = round(tau_s * fs)
    x = np.asarray(x, dtype=np.float64)
    if n < 1 or x.size < n:
        raise SigtuneError(f"the running RMS needs at least {tau_s:g} s ({n} samples); got {x.size} samples",
                           "running_rms")
    squares = np.concatenate([[0.0], np.cumsum(x * x)])
    return np.sqrt(np.maximum(squares[n:] - squares[:-n], 0.0) / n)  # cumsum differences can dip below 0


def vibration_dose_value(x, fs: float) -> float:
    """Return VDV = (integral of a_w^4 dt)^(1/4) in m/s^1.75 (ISO 2631-1:1997 clause 6.3.2, eq. 5).

    Examples
    --------
    >>> t = np.arange(100000) / 1000.0  # 100 s of a 1 m/s^2 sine at 5 Hz
    >>> round(vibration_dose_value(np.sin(2 * np.pi * 5 * t), 1000.0), 4)  # analytic (3T/8)^(1/4)
    2.4746
    """
    x = np.asarray(x, dtype=np.float64)
    return float(np.sum(x ** 4) / fs) ** 0.25


@dataclass(frozen=True)
class AxisFigures(_Result):
    """Figures of one axis (m/s^2 unless stated).

    Attributes
    ----------
    axis, weighting : str
    k : float
        Multiplying factor (1 for hand-arm).
    a_w : float
        Frequency-weighted RMS over ``duration_s``.
    peak, crest_factor : float
        Largest |a_w(t)| and peak / a_w.
    mtvv : float
        Largest 1 s running RMS (m/s^2).
    vdv : float
        Vibration dose value over ``duration_s`` (m/s^1.75).
    duration_s : float
        Length evaluated, after the weighting's settling and other edge zones.
    excluded_s : float
        Length left out (edge zones).
    """

    axis: str
    weighting: str
    k: float
    a_w: float
    peak: float
    crest_factor: float
    mtvv: float
    vdv: float
    duration_s: float
    excluded_s: float

    @property
    def mtvv_ratio(self) -> float:
        """MTVV / a_w (ISO 2631-1 clause 6.3.3, eq. 9)."""
        return self.mtvv / self.a_w if self.a_w > 0 else math.nan

    @property
    def vdv_ratio(self) -> float:
        """VDV / (a_w T^(1/4)) (ISO 2631-1 clause 6.3.3, eq. 10)."""
        return self.vdv / (self.a_w * self.duration_s ** 0.25) if self.a_w > 0 else math.nan

    def to_dict(self) -> dict[str, Any]:
        return json_ready({**{n: getattr(self, n) for n in self.__dataclass_fields__},
                           "mtvv_ratio": self.mtvv_ratio, "vdv_ratio": self.vdv_ratio}, nonfinite_as_none=True)


def _weighted(channel: Channel, weighting: str, where: str) -> Channel:
    """Return the channel in m/s^2 (or rad/s^2) weighted with ``weighting`` (once, never twice)."""
    done = [h.get("name") for h in channel.history if h.get("op") == "weighting"]
    if done and done[-1] != weighting:
        raise SigtuneError(f"the channel is already weighted with {done[-1]}, but this evaluation needs "
                           f"{weighting}; give the unweighted acceleration", where)
    if channel.quantity == "acceleration":
        factor = conversion_factor(channel.unit, "m/s^2")
        if factor != 1.0:
            channel = channel.replace(data=channel.data * factor, unit="m/s^2")
    elif not (channel.quantity == "other" and weighting == "We"):
        raise SigtuneError(f"needs acceleration (m/s^2, g ...); the channel holds {channel.quantity} "
                           f"({channel.unit})", where)
    if done:
        return channel
    try:
        return Weighting(weighting).apply(channel)
    except SigtuneError as err:
        raise SigtuneError(err.detail, where) from None


def _axis_figures(channel: Channel, axis: str, weighting: str, k: float, where: str) -> AxisFigures:
    weighted = _weighted(channel, weighting, where)
    i0, i1 = _longest_clean_span(weighted)
    x = np.asarray(weighted.data[i0:i1], dtype=np.float64)
    fs = weighted.fs
    if x.size < round(_RUNNING_RMS_S * fs):
        raise SigtuneError(f"after the weighting's settling time and edge zones only {x.size / fs:g} s are "
                           f"left of {weighted.duration:g} s; the running RMS needs {_RUNNING_RMS_S:g} s. "
                           f"Use a longer record", where)
    a_w = math.sqrt(float(np.mean(x * x)))
    peak = float(np.max(np.abs(x)))
    return AxisFigures(axis=axis, weighting=weighting, k=k, a_w=a_w, peak=peak,
                       crest_factor=peak / a_w if a_w > 0 else math.nan,
                       mtvv=float(np.max(running_rms(x, fs))), vdv=vibration_dose_value(x, fs),
                       duration_s=x.size / fs, excluded_s=(weighted.n_samples - x.size) / fs)


def _level(value: float, action: float, limit: float) -> str:
    if value >= limit:
        return "at or above the limit value"
    return "at or above the action value" if value >= action else "below the action value"


def _zone(value: float, low: float, high: float) -> str:
    return "above the zone" if value > high else ("within the zone" if value >= low else "below the zone")


def _exposure_h(value, where: str) -> float | None:
    return None if value is None else check_number(value, where, low=0, low_open=True, high=24.0, unit="h")


# ---- whole-body ----
@dataclass(frozen=True)
class WholeBodyResult(_Result):
    """Result of :func:`whole_body` (m/s^2, VDV in m/s^1.75, durations in s unless ``_h``).

    Attributes
    ----------
    axes : dict of str -> AxisFigures
    vector_sum : float
        a_v = sqrt(sum (k a_w)^2) over the axes given (ISO 2631-1 clause 6.5).
    dominant_axis : str
        Axis of the largest k a_w (health is judged on it, clause 7.2.2).
    vdv_total : float
        (sum (k VDV)^4)^(1/4) over the axes (clause 6.5, from memory).
    basic_method_adequate : bool
        False where a crest factor exceeds 9 or a ratio of clause 6.3.3 is exceeded.
    daily : dict
        Empty without ``exposure_h``; else A(8), eVDV, VDV for the day and comparisons.
    comfort : dict
        For ``purpose="comfort"``: the likely reactions of Annex C.
    """

    posture: str
    purpose: str
    axes: dict
    vector_sum: float
    dominant_axis: str
    vdv_total: float
    basic_method_adequate: bool
    exposure_h: float | None
    daily: dict
    comfort: dict
    notes: list = field(default_factory=list)
    clause: str = CLAUSES["whole_body"]
    caution: str = CAUTIONS["whole_body"]


def whole_body(channels, posture: str = "seated", purpose: str = "health", exposure_h: float | None = None,
               axis: str | None = None) -> WholeBodyResult:
    """Evaluate whole-body vibration by ISO 2631-1:1997 (and the Directive 2002/44/EC values).

    Parameters
    ----------
    channels : dict of axis -> Channel, sequence of Channel, or Channel
        Unweighted acceleration (any acceleration unit). Axes ``x``, ``y``,
        ``z`` (and for seated comfort ``rx``, ``ry``, ``rz``, ``back_x`` ...,
        ``feet_x`` ...: see :data:`COMFORT_FACTORS`). A sequence takes each
        axis from ``metadata["axis"]``; a single channel from ``axis``. A
        channel already weighted with the right weighting is used as is.
    posture : {"seated", "standing", "recumbent"}
    purpose : {"health", "comfort"}
        Health (clause 7) is defined for seated people only.
    exposure_h : float, optional
        Daily exposure duration in hours (0 < T <= 24). Without it no daily
        figures (A(8), eVDV, comparisons) are given.
    axis : str, optional
        Axis of a single channel.

    Returns
    -------
    WholeBodyResult

    Examples
    --------
    >>> t = np.arange(0, 60, 1 / 400.0)
    >>> z = Channel(np.sqrt(2) * np.sin(2 * np.pi * 6.3 * t), 400.0, unit="m/s^2")
    >>> res = whole_body({"z": z}, exposure_h=4.0)
    >>> round(res.axes["z"].a_w, 3), round(res.daily["a8"], 3)  # 1 m/s^2 RMS x Wk(6.3 Hz); x sqrt(4/8)
    (1.054, 0.746)
    """
    where = "whole_body"
    check_choice(posture, f"{where} posture", tuple(COMFORT_FACTORS))
    check_choice(purpose, f"{where} purpose", ("health", "comfort"))
    if purpose == "health" and posture not in HEALTH_FACTORS:
        raise SigtuneError(f"ISO 2631-1 gives health guidance for seated people only; got posture={posture!r}. "
                           "Use posture='seated' or purpose='comfort'", f"{where} posture")
    factors = (HEALTH_FACTORS if purpose == "health" else COMFORT_FACTORS)[posture]
    exposure = _exposure_h(exposure_h, f"{where} exposure_h")
    items = _by_axis(channels, axis, tuple(factors), where)
    axes = {}
    for name, ch in items.items():
        weighting, k = factors[name]
        axes[name] = _axis_figures(ch, name, weighting, k, f"{where} axis {name!r} (channel {ch.name!r})")
    notes = []
    adequate = _basic_method_checks(axes, notes)
    dominant = max(axes, key=lambda n: axes[n].k * axes[n].a_w)
    vector_sum = math.sqrt(sum((f.k * f.a_w) ** 2 for f in axes.values()))
    vdv_total = sum((f.k * f.vdv) ** 4 for f in axes.values()) ** 0.25
    daily = {}
    if exposure is None:
        notes.append("no exposure_h given: daily figures (A(8), eVDV, caution zone, action and limit values) "
                     "are not computed")
    elif purpose == "health":
        daily = _daily_whole_body(axes, exposure, notes)
    comfort = _comfort(vector_sum) if purpose == "comfort" else {}
    if purpose == "comfort" and exposure is not None:
        notes.append("exposure_h is not used for comfort (ISO 2631-1 clause 8 gives no daily values)")
    if purpose == "health" and len(axes) < 3:
        notes.append(f"only axes {', '.join(axes)} measured: the dominant axis may be missing")
    return WholeBodyResult(posture=posture, purpose=purpose, axes=axes, vector_sum=vector_sum,
                           dominant_axis=dominant, vdv_total=vdv_total, basic_method_adequate=adequate,
                           exposure_h=exposure, daily=daily, comfort=comfort, notes=notes)


def _basic_method_checks(axes: Mapping[str, AxisFigures], notes: list) -> bool:
    adequate = True
    for name, f in axes.items():
        for label, value, limit, clause in (
                ("crest factor", f.crest_factor, _CREST_LIMIT, "6.2.1"),
                ("MTVV/a_w", f.mtvv_ratio, _MTVV_RATIO_LIMIT, "6.3.3 eq. 9"),
                ("VDV/(a_w T^1/4)", f.vdv_ratio, _VDV_RATIO_LIMIT, "6.3.3 eq. 10")):
            if value > limit:
                adequate = False
                notes.append(f"axis {name}: {label} = {value:.2f} > {limit:g} (ISO 2631-1 clause {clause}): "
                             "the basic RMS method may underestimate; judge on MTVV and VDV")
    return adequate


def _daily_whole_body(axes: Mapping[str, AxisFigures], exposure_h: float, notes: list) -> dict[str, Any]:
    """A(8), VDV for the day, eVDV and the comparisons, on the axis with the largest k-weighted value."""
    t_s = exposure_h * 3600.0
    a8 = {n: f.k * f.a_w * math.sqrt(exposure_h / _T0_H) for n, f in axes.items()}
    vdv_day = {n: f.k * f.vdv * (t_s / f.duration_s) ** 0.25 for n, f in axes.items()}
    evdv = {n: _EVDV_FACTOR * f.k * f.a_w * t_s ** 0.25 for n, f in axes.items()}
    a8_axis = max(a8, key=a8.get)
    vdv_axis = max(vdv_day, key=vdv_day.get)
    values = EXPOSURE_VALUES["whole_body"]
    low1, high1 = HEALTH_CAUTION_ZONE["B.1_a8_m_s2"]
    low2, high2 = HEALTH_CAUTION_ZONE["B.2_vdv"]
    scale = math.sqrt(_T0_H / exposure_h)
    fig_lo, fig_hi = HEALTH_CAUTION_ZONE["figure_range_h"]
    if not fig_lo <= exposure_h <= fig_hi:
        notes.append(f"exposure {exposure_h:g} h is outside the durations drawn in ISO 2631-1 Figure B.1 "
                     f"({fig_lo * 60:g} min to {fig_hi:g} h)")
    a_dom = axes[a8_axis].k * axes[a8_axis].a_w
    return {
        "a8": a8[a8_axis], "a8_axis": a8_axis, "a8_by_axis": a8,
        "vdv_day": vdv_day[vdv_axis], "vdv_day_axis": vdv_axis, "vdv_day_by_axis": vdv_day,
        "evdv": evdv[a8_axis], "evdv_by_axis": evdv,
        "a8_level": _level(a8[a8_axis], values["action_a8"], values["limit_a8"]),
        "vdv_level": _level(vdv_day[vdv_axis], values["action_vdv"], values["limit_vdv"]),
        "action_limit_values": dict(values),
        "caution_zone_b1": {"boundaries_m_s2": [low1 * scale, high1 * scale], "a_w": a_dom,
                            "zone": _zone(a_dom, low1 * scale, high1 * scale),
                            "equation": "a_w1 T1^(1/2) = a_w2 T2^(1/2) (B.1)"},
        "caution_zone_b2": {"boundaries_vdv": [low2, high2], "evdv": evdv[a8_axis],
                            "boundaries_m_s2": [low2 / (_EVDV_FACTOR * t_s ** 0.25),
                                                high2 / (_EVDV_FACTOR * t_s ** 0.25)],
                            "zone": _zone(evdv[a8_axis], low2, high2),
                            "equation": "a_w1 T1^(1/4) = a_w2 T2^(1/4) (B.2)"},
    }


def _comfort(a_v: float) -> dict[str, Any]:
    reactions = [text for low, high, text in COMFORT_REACTIONS if low <= a_v < high]
    return {"a_v": a_v, "likely_reactions": reactions, "source": "ISO 2631-1:1997 Annex C.2.3 (from memory)"}


# ---- hand-arm ----
@dataclass(frozen=True)
class HandArmResult(_Result):
    """Result of :func:`hand_arm` (m/s^2).

    Attributes
    ----------
    axes : dict of str -> AxisFigures
        Wh-weighted RMS a_hw per axis (``a_w``), peak, crest factor.
    a_hv : float
        Vibration total value sqrt(a_hx^2 + a_hy^2 + a_hz^2) (ISO 5349-1 clause 4.2, eq. 1).
    all_axes : bool
        False if fewer than three axes were given (a_hv then underestimates).
    daily : dict
        Empty without ``exposure_h``; else A(8), its level against the action and
        limit values, and the years to 10 % blanching of ISO 5349-1 Annex C.
    """

    axes: dict
    a_hv: float
    all_axes: bool
    exposure_h: float | None
    daily: dict
    notes: list = field(default_factory=list)
    clause: str = CLAUSES["hand_arm"]
    caution: str = CAUTIONS["hand_arm"]


def hand_arm(channels, exposure_h: float | None = None, axis: str | None = None) -> HandArmResult:
    """Evaluate hand-transmitted vibration by ISO 5349-1:2001 (and the Directive 2002/44/EC values).

    Parameters
    ----------
    channels : dict of axis -> Channel, sequence of Channel, or Channel
        Unweighted acceleration at the handle, axes ``x``, ``y``, ``z``
        (rate at least 2 x 1258.9 Hz).
    exposure_h : float, optional
        Daily duration of this task in hours (trigger time). Without it no A(8).
    axis : str, optional
        Axis of a single channel.

    Examples
    --------
    >>> t = np.arange(0, 10, 1 / 5000.0)
    >>> chans = {a: Channel(np.sqrt(2) * np.sin(2 * np.pi * 31.5 * t), 5000.0) for a in "xyz"}
    >>> res = hand_arm(chans, exposure_h=2.0)
    >>> round(res.a_hv, 3), res.daily["a8_level"]  # sqrt(3) x |Wh(31.5 Hz)| = sqrt(3) x 0.521
    (0.903, 'below the action value')
    """
    where = "hand_arm"
    exposure = _exposure_h(exposure_h, f"{where} exposure_h")
    items = _by_axis(channels, axis, ("x", "y", "z"), where)
    axes = {name: _axis_figures(ch, name, "Wh", 1.0, f"{where} axis {name!r} (channel {ch.name!r})")
            for name, ch in items.items()}
    a_hv = math.sqrt(sum(f.a_w ** 2 for f in axes.values()))
    notes = []
    if len(axes) < 3:
        notes.append(f"only axes {', '.join(axes)} measured: the vibration total value needs all three and "
                     "is underestimated (ISO 5349-1 clause 4.2)")
    daily = {}
    if exposure is None:
        notes.append("no exposure_h given: A(8) and the action and limit values are not computed")
    else:
        daily = _daily_hand_arm(a_hv * math.sqrt(exposure / _T0_H))
    return HandArmResult(axes=axes, a_hv=a_hv, all_axes=len(axes) == 3, exposure_h=exposure, daily=daily,
                         notes=notes)


def _daily_hand_arm(a8: float) -> dict[str, Any]:
    values = EXPOSURE_VALUES["hand_arm"]
    daily = {"a8": a8, "a8_level": _level(a8, values["action_a8"], values["limit_a8"]),
             "action_limit_values": dict(values)}
    if a8 > 0:
        # ISO 5349-1:2001 Annex C eq. C.1 (informative): D_y = 31.8 A(8)^-1.06 years; from memory
        daily["years_to_10pct_blanching"] = 31.8 * a8 ** -1.06
    return daily


# ---- daily exposure from several exposures ----
@dataclass(frozen=True)
class DailyExposureResult(_Result):
    """Result of :func:`daily_exposure`: A(8) in m/s^2 from several (value, hours) pairs."""

    kind: str
    a8: float
    total_h: float
    partial_a8: list
    level: str
    action_limit_values: dict
    notes: list = field(default_factory=list)
    clause: str = CLAUSES["daily_exposure"]
    caution: str = CAUTIONS["daily_exposure"]


def daily_exposure(pairs, kind: str = "hand_arm", t0_h: float = _T0_H) -> DailyExposureResult:
    """Combine exposures into a daily exposure A(8) = sqrt(sum a_i^2 T_i / T0).

    ISO 5349-1:2001 clause 5 eq. 3 and Directive 2002/44/EC Annex A.1 (hand-arm,
    ``a_i`` = a_hv of task i); Annex B.1 and ISO 2631-1 Annex B eq. B.1
    (whole-body, ``a_i`` = k a_w of one axis).

    Parameters
    ----------
    pairs : sequence of (float, float)
        (a_i in m/s^2, T_i in hours) per task or exposure.
    kind : {"hand_arm", "whole_body"}
        Which action and limit values to compare with.
    t0_h : float, default 8
        Reference duration in hours.

    Examples
    --------
    >>> res = daily_exposure([(4.0, 2.0), (3.0, 1.0)])
    >>> round(res.a8, 3), res.level  # sqrt((16*2 + 9*1) / 8)
    (2.264, 'below the action value')
    """
    check_choice(kind, "kind", tuple(EXPOSURE_VALUES))
    t0 = check_number(t0_h, "t0_h", low=0, low_open=True, unit="h")
    pairs = list(pairs)
    if not pairs:
        raise SigtuneError("needs at least one (a in m/s^2, T in h) pair", "pairs")
    partial, total = [], 0.0
    for i, pair in enumerate(pairs):
        try:
            a, t = pair
        except (TypeError, ValueError):
            raise SigtuneError(f"each item must be (a in m/s^2, T in h); got {pair!r}", f"pairs[{i}]") from None
        a = check_number(a, f"pairs[{i}] a", low=0, unit="m/s^2")
        t = check_number(t, f"pairs[{i}] T", low=0, high=24.0, unit="h")
        partial.append(a * math.sqrt(t / t0))
        total += t
    notes = [f"total duration {total:g} h exceeds 24 h"] if total > 24.0 else []
    a8 = math.sqrt(sum(p * p for p in partial))
    values = EXPOSURE_VALUES[kind]
    return DailyExposureResult(kind=kind, a8=a8, total_h=total, partial_a8=partial,
                               level=_level(a8, values["action_a8"], values["limit_a8"]),
                               action_limit_values=dict(values), notes=notes)


def combined_vdv(values) -> float:
    """Return the VDV of several periods (or axes), (sum VDV_i^4)^(1/4), m/s^1.75 (ISO 2631-1 clause 6.3.2).

    Examples
    --------
    >>> round(combined_vdv([5.0, 5.0]), 3)  # 5 x 2^(1/4)
    5.946
    """
    vdvs = [check_number(v, f"values[{i}]", low=0, unit="m/s^1.75") for i, v in enumerate(values)]
    return sum(v ** 4 for v in vdvs) ** 0.25
