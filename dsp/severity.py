"""Machinery severity zones (ISO 10816-3 / ISO 20816-3) and building vibration (DIN 4150-3).

Machinery
    :func:`machine_severity` computes the broad-band velocity RMS over
    10-1000 Hz (2-1000 Hz for machines at or below 600 r/min) and places it
    in zone A/B/C/D for the machine group and support (:func:`severity_zone`,
    boundaries in :data:`SEVERITY_ZONES`). From acceleration the velocity
    RMS comes from the spectrum: Welch's PSD of the acceleration (Hann,
    50 % overlap) divided by (2 pi f)^2 and summed over the band (Parseval).
    This is exact for a band-limited RMS and needs no time-domain
    integration, so no drift or integration filter enters the figure.
Buildings
    :func:`building_ppv` finds the peak particle velocity per axis, its
    dominant frequency (by default from the zero crossings either side of the
    peak: the half period there; or the peak of the velocity spectrum) and
    the DIN 4150-3 guideline value at that frequency, linearly interpolated
    between the corner points of Table 1 (:func:`guideline_velocity`).
    Acceleration is integrated to velocity in the frequency domain with a
    zero-phase 4th-order Butterworth high-pass magnitude at ``f_low``, after
    removing the mean and tapering the first and last 10 % of the record
    (Tukey window; without it the unknown integration constant of a record
    that starts mid-motion leaves a step that inflates the peak).

Imported by (and re-exported from) :mod:`dsp.evaluation`; see its cautions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import fft, signal

from ._validate import check_choice, check_number
from .channel import Channel
from .errors import SigtuneError
from ._json import json_ready
from .guidance import CAUTIONS, CLAUSES, _by_axis, _longest_clean_span, _Result
from .units import conversion_factor

__all__ = ["SEVERITY_ZONES", "MACHINE_GROUPS", "ZONE_MEANINGS", "BUILDING_CLASSES", "BUILDING_GUIDELINES",
           "TOP_FLOOR_GUIDELINES", "MachineSeverityResult", "BuildingResult", "severity_zone",
           "machine_severity", "guideline_velocity", "building_ppv"]

#: Zone boundaries A/B, B/C, C/D of the velocity RMS in mm/s, ISO 10816-3:2009 Annex A
#: (Table A.1 group 1, Table A.2 group 2; the same values in ISO 20816-3:2022 Annex A). From memory.
SEVERITY_ZONES: dict[tuple[int, str], tuple[float, float, float]] = {
    (1, "rigid"): (2.3, 4.5, 7.1),  # from memory
    (1, "flexible"): (3.5, 7.1, 11.0),  # from memory
    (2, "rigid"): (1.4, 2.8, 4.5),  # from memory
    (2, "flexible"): (2.3, 4.5, 7.1),  # from memory
}
MACHINE_GROUPS = {  # ISO 10816-3:2009 clause 1 (from memory)
    1: "large machines, rated power above 300 kW up to 50 MW; electrical machines with shaft height >= 315 mm",
    2: "medium-size machines, rated power above 15 kW up to 300 kW; electrical machines with shaft height "
       "160 mm to 315 mm",
}
ZONE_MEANINGS = {  # ISO 10816-3:2009 clause 6.2.2 (paraphrased, from memory)
    "A": "typical of newly commissioned machines",
    "B": "normally acceptable for unrestricted long-term operation",
    "C": "normally unsatisfactory for long-term continuous operation; run for a limited period until a "
         "suitable opportunity for remedial action",
    "D": "normally severe enough to cause damage to the machine",
}
_SUPPORTS = ("rigid", "flexible")
_BAND_HZ = (10.0, 1000.0)  # ISO 10816-3 clause 4.? (from memory): machines above 600 r/min
_SLOW_BAND_HZ = (2.0, 1000.0)  # machines at or below 600 r/min (from memory)
_SLOW_RPM = 600.0
_SCOPE_RPM = (120.0, 15000.0)  # operating speeds covered by ISO 10816-3 (from memory)
_ALARM_FRACTION = 0.25  # alarm = baseline + 0.25 x B/C boundary (ISO 10816-3 clause 6.5, from memory)
_ALARM_CAP = 1.25  # alarm not above 1.25 x B/C; trip not above 1.25 x C/D (from memory)

#: Building classes of DIN 4150-3:2016 Table 1 (lines 1, 2, 3).
BUILDING_CLASSES = {
    "commercial": "line 1: buildings used for commercial purposes, industrial buildings and similar",
    "residential": "line 2: dwellings and buildings of similar design or use",
    "sensitive": "line 3: structures that are particularly sensitive to vibration (e.g. listed buildings)",
}
#: Guideline values (mm/s) at the foundation against frequency (Hz): corner points of
#: DIN 4150-3:2016 Table 1, columns 1-10, 10-50, 50-100 Hz; above 100 Hz the 100 Hz value. From memory.
BUILDING_GUIDELINES: dict[str, tuple[tuple[float, float], ...]] = {
    "commercial": ((1.0, 20.0), (10.0, 20.0), (50.0, 40.0), (100.0, 50.0)),  # from memory
    "residential": ((1.0, 5.0), (10.0, 5.0), (50.0, 15.0), (100.0, 20.0)),  # from memory
    "sensitive": ((1.0, 3.0), (10.0, 3.0), (50.0, 8.0), (100.0, 10.0)),  # from memory
}
#: Guideline values (mm/s) for horizontal vibration of the top floor, all frequencies (Table 1). From memory.
TOP_FLOOR_GUIDELINES = {"commercial": 40.0, "residential": 15.0, "sensitive": 8.0}  # from memory
_LOCATIONS = ("foundation", "top_floor")
_FREQUENCY_METHODS = ("zero_crossing", "spectrum")
_HIGHPASS_ORDER = 4
_TAPER_FRACTION = 0.1  # of the record at each end, when integrating acceleration


# ---- machinery ----
def _group_support(group, support: str) -> tuple[int, str]:
    if isinstance(group, str) and group.strip().isdigit():
        group = int(group)
    check_choice(group, "group", (1, 2))
    check_choice(support, "support", _SUPPORTS)
    return int(group), support


def severity_zone(velocity_rms_mm_s: float, group: int = 1, support: str = "rigid") -> str:
    """Return the evaluation zone ``"A"``, ``"B"``, ``"C"`` or ``"D"`` (ISO 10816-3 Annex A).

    A value on a boundary belongs to the zone above it (the conservative
    reading).

    Parameters
    ----------
    velocity_rms_mm_s : float
        Broad-band velocity RMS in mm/s.
    group : {1, 2}
        Machine group (:data:`MACHINE_GROUPS`).
    support : {"rigid", "flexible"}

    Examples
    --------
    >>> severity_zone(3.0, 1, "rigid"), severity_zone(4.5, 1, "rigid")
    ('B', 'C')
    """
    v = check_number(velocity_rms_mm_s, "velocity_rms_mm_s", low=0, unit="mm/s")
    group, support = _group_support(group, support)
    ab, bc, cd = SEVERITY_ZONES[(group, support)]
    return "A" if v < ab else "B" if v < bc else "C" if v < cd else "D"


@dataclass(frozen=True)
class MachineSeverityResult(_Result):
    """Result of :func:`machine_severity` (velocities in mm/s RMS, frequencies in Hz)."""

    channel: str
    velocity_rms_mm_s: float
    zone: str
    zone_meaning: str
    group: int
    support: str
    boundaries_mm_s: dict
    band_hz: list
    rpm: float | None
    method: str
    alarm_mm_s: float | None = None
    trip_mm_s: float | None = None
    trip_max_mm_s: float | None = None
    notes: list = field(default_factory=list)
    clause: str = CLAUSES["machine_severity"]
    caution: str = CAUTIONS["machine_severity"]


def machine_severity(channel: Channel, group: int = 1, support: str = "rigid", rpm: float | None = None,
                     baseline_mm_s: float | None = None) -> MachineSeverityResult:
    """Evaluate broad-band vibration severity of a machine by ISO 10816-3 / ISO 20816-3.

    Parameters
    ----------
    channel : Channel
        Acceleration or velocity measured on a bearing housing or pedestal
        (any unit of either); the sample rate must reach 2000 Hz.
    group : {1, 2}
        Machine group (:data:`MACHINE_GROUPS`).
    support : {"rigid", "flexible"}
        Support class of the machine.
    rpm : float, optional
        Operating speed in r/min; at or below 600 the band is 2-1000 Hz, else
        (and when not given: said in ``notes``) 10-1000 Hz.
    baseline_mm_s : float, optional
        Baseline velocity RMS in mm/s of this machine in good condition; gives
        the alarm (baseline + 0.25 x B/C, at most 1.25 x B/C) and trip (C/D,
        at most 1.25 x C/D) values.

    Examples
    --------
    >>> t = np.arange(0, 10, 1 / 5000.0)
    >>> v = Channel(5.0 * np.sqrt(2) * np.sin(2 * np.pi * 50 * t), 5000.0, unit="mm/s")
    >>> res = machine_severity(v, group=1, support="rigid")
    >>> round(res.velocity_rms_mm_s, 2), res.zone
    (5.0, 'C')
    """
    where = f"machine_severity (channel {channel.name!r})"
    group, support = _group_support(group, support)
    notes = []
    band = _severity_band(rpm, notes)
    if channel.fs < 2.0 * band[1]:
        raise SigtuneError(f"the band {band[0]:g}-{band[1]:g} Hz needs a sample rate of at least "
                           f"{2 * band[1]:g} Hz; got {channel.fs:g} Hz. Record at a higher rate", where)
    rms = _band_velocity_rms(channel, band, where)
    ab, bc, cd = SEVERITY_ZONES[(group, support)]
    zone = severity_zone(rms, group, support)
    limits = {}
    if baseline_mm_s is not None:
        base = check_number(baseline_mm_s, "baseline_mm_s", low=0, low_open=True, unit="mm/s")
        limits = {"alarm_mm_s": min(base + _ALARM_FRACTION * bc, _ALARM_CAP * bc),
                  "trip_mm_s": cd, "trip_max_mm_s": _ALARM_CAP * cd}
        notes.append("alarm = baseline + 0.25 x B/C boundary, at most 1.25 x B/C; trip = C/D boundary, "
                     "at most 1.25 x C/D (ISO 10816-3 clause 6.5, from memory)")
    return MachineSeverityResult(
        channel=channel.name, velocity_rms_mm_s=rms, zone=zone, zone_meaning=ZONE_MEANINGS[zone], group=group,
        support=support, boundaries_mm_s={"A/B": ab, "B/C": bc, "C/D": cd}, band_hz=list(band),
        rpm=None if rpm is None else float(rpm),
        method="velocity" if channel.quantity == "velocity" else "acceleration PSD / (2 pi f)^2",
        notes=notes, **limits)


def _severity_band(rpm, notes: list) -> tuple[float, float]:
    if rpm is None:
        notes.append("rpm not given: band 10-1000 Hz used (machines above 600 r/min); give rpm for slower "
                     "machines (2-1000 Hz)")
        return _BAND_HZ
    speed = check_number(rpm, "rpm", low=0, low_open=True, unit="r/min")
    if not _SCOPE_RPM[0] <= speed <= _SCOPE_RPM[1]:
        notes.append(f"{speed:g} r/min is outside the {_SCOPE_RPM[0]:g}-{_SCOPE_RPM[1]:g} r/min covered by "
                     "ISO 10816-3; the zones may not apply")
    return _SLOW_BAND_HZ if speed <= _SLOW_RPM else _BAND_HZ


def _band_velocity_rms(channel: Channel, band: tuple[float, float], where: str) -> float:
    """Velocity RMS in mm/s over ``band`` from Welch's PSD (Parseval)."""
    if channel.quantity == "acceleration":
        scale = conversion_factor(channel.unit, "m/s^2")
    elif channel.quantity == "velocity":
        scale = conversion_factor(channel.unit, "m/s")
    else:
        raise SigtuneError(f"needs acceleration or velocity; the channel holds {channel.quantity} "
                           f"({channel.unit})", where)
    i0, i1 = _longest_clean_span(channel)
    x = np.asarray(channel.data[i0:i1], dtype=np.float64) * scale
    fs = channel.fs
    # resolution of a tenth of the lower band edge keeps the 1/f^2 weighting flat across a window's main lobe
    nperseg = min(x.size, 2 ** math.ceil(math.log2(10.0 * fs / band[0])))
    if fs / nperseg > band[0] / 2.0:
        raise SigtuneError(f"the record ({x.size / fs:g} s outside edge zones) is too short for a "
                           f"{band[0]:g} Hz lower band edge; it needs at least {2.0 / band[0]:g} s", where)
    f, p = signal.welch(x, fs=fs, window="hann", nperseg=nperseg, detrend="constant")
    inside = (f >= band[0]) & (f <= band[1])
    if channel.quantity == "acceleration":
        p = p / (2.0 * math.pi * np.where(f > 0, f, 1.0)) ** 2
    return 1e3 * math.sqrt(float(np.sum(p[inside])) * (f[1] - f[0]))


# ---- buildings ----
def guideline_velocity(frequency_hz: float, building_class: str = "residential",
                       location: str = "foundation") -> float:
    """Return the DIN 4150-3 Table 1 guideline value in mm/s at ``frequency_hz``.

    Foundation: linear in frequency between the table's corners (1, 10, 50,
    100 Hz); below 1 Hz the 1 Hz value, above 100 Hz the 100 Hz value. Top
    floor (horizontal): one value for all frequencies.

    Examples
    --------
    >>> guideline_velocity(30.0, "residential")  # halfway from 5 (10 Hz) to 15 (50 Hz)
    10.0
    """
    check_choice(building_class, "building_class", tuple(BUILDING_CLASSES))
    check_choice(location, "location", _LOCATIONS)
    f = check_number(frequency_hz, "frequency_hz", low=0, unit="Hz")
    if location == "top_floor":
        return TOP_FLOOR_GUIDELINES[building_class]
    corners = np.array(BUILDING_GUIDELINES[building_class])
    return float(np.interp(f, corners[:, 0], corners[:, 1]))


@dataclass(frozen=True)
class BuildingResult(_Result):
    """Result of :func:`building_ppv` (velocities in mm/s, frequencies in Hz, times in s).

    ``axes`` maps each axis to its ``ppv_mm_s``, ``time_s``, ``frequency_hz``,
    ``guideline_mm_s`` and ``ratio`` (PPV / guideline; ``None`` where no
    guideline applies, e.g. the vertical axis at the top floor).
    """

    building_class: str
    location: str
    axes: dict
    max_ratio: float | None
    governing_axis: str | None
    exceeds_guideline: bool
    frequency_method: str
    notes: list = field(default_factory=list)
    clause: str = CLAUSES["building_ppv"]
    caution: str = CAUTIONS["building_ppv"]


def building_ppv(channels, building_class: str = "residential", location: str = "foundation",
                 f_low: float = 1.0, frequency_method: str = "zero_crossing",
                 axis: str | None = None) -> BuildingResult:
    """Compare peak particle velocity with the DIN 4150-3 guideline values for short-term vibration.

    Parameters
    ----------
    channels : dict of axis -> Channel, sequence of Channel, or Channel
        Velocity (used as measured, less its mean) or acceleration
        (integrated in the frequency domain), axes ``x``, ``y`` (horizontal)
        and ``z`` (vertical).
    building_class : {"commercial", "residential", "sensitive"}
        DIN 4150-3 Table 1 line 1, 2 or 3 (:data:`BUILDING_CLASSES`).
    location : {"foundation", "top_floor"}
        Foundation: all axes, frequency-dependent values. Top floor:
        horizontal axes, one value.
    f_low : float, default 1.0
        High-pass corner (Hz) used when integrating acceleration.
    frequency_method : {"zero_crossing", "spectrum"}
        Dominant frequency from the zero crossings either side of the peak
        (f = 1 / (2 x their spacing)), or the largest peak of the velocity
        spectrum above ``f_low``.
    axis : str, optional
        Axis of a single channel.

    Examples
    --------
    >>> t = np.arange(0, 2, 1 / 2000.0)
    >>> v = Channel(8.0 * np.sin(2 * np.pi * 30.0 * t), 2000.0, unit="mm/s")
    >>> res = building_ppv({"z": v}, "residential")
    >>> a = res.axes["z"]
    >>> round(a["ppv_mm_s"], 2), round(a["frequency_hz"], 1), round(a["guideline_mm_s"], 1)
    (8.0, 30.0, 10.0)
    """
    check_choice(building_class, "building_class", tuple(BUILDING_CLASSES))
    check_choice(location, "location", _LOCATIONS)
    check_choice(frequency_method, "frequency_method", _FREQUENCY_METHODS)
    low = check_number(f_low, "f_low", low=0, low_open=True, unit="Hz")
    items = _by_axis(channels, axis, ("x", "y", "z"), "building_ppv")
    notes, axes = [], {}
    for name, ch in items.items():
        where = f"building_ppv axis {name!r} (channel {ch.name!r})"
        v = _velocity_mm_s(ch, low, where, notes)
        axes[name] = _axis_ppv(v, ch, name, building_class, location, low, frequency_method, notes)
    rated = {n: a["ratio"] for n, a in axes.items() if a["ratio"] is not None}
    governing = max(rated, key=rated.get) if rated else None
    if location == "top_floor" and "z" in axes:
        notes.append("top floor: DIN 4150-3 gives values for horizontal vibration; axis z is not compared")
    return BuildingResult(building_class=building_class, location=location, axes=axes,
                          max_ratio=rated[governing] if governing else None, governing_axis=governing,
                          exceeds_guideline=bool(governing and rated[governing] > 1.0),
                          frequency_method=frequency_method, notes=notes)


def _velocity_mm_s(channel: Channel, f_low: float, where: str, notes: list) -> tuple[np.ndarray, int]:
    """The channel as velocity in mm/s over its longest clean span, and the span's first index."""
    i0, i1 = _longest_clean_span(channel)
    x = np.asarray(channel.data[i0:i1], dtype=np.float64)
    if x.size < 4:
        raise SigtuneError(f"only {x.size} samples outside the edge zones; use a longer record", where)
    x = x - x.mean()
    if channel.quantity == "velocity":
        return x * conversion_factor(channel.unit, "mm/s"), i0
    if channel.quantity != "acceleration":
        raise SigtuneError(f"needs velocity or acceleration; the channel holds {channel.quantity} "
                           f"({channel.unit})", where)
    x = x * signal.windows.tukey(x.size, 2.0 * _TAPER_FRACTION)
    notes.append(f"channel {channel.name!r}: acceleration integrated in the frequency domain (high-pass "
                 f"{f_low:g} Hz); the first and last 10 % of the record are tapered and read low")
    n = fft.next_fast_len(2 * x.size)  # zero padding keeps the circular wrap-around off the record
    f = fft.rfftfreq(n, 1.0 / channel.fs)
    ratio = np.where(f > 0, f / f_low, 0.0)
    highpass = ratio ** _HIGHPASS_ORDER / np.sqrt(1.0 + ratio ** (2 * _HIGHPASS_ORDER))
    integrator = np.zeros_like(f, dtype=complex)
    integrator[1:] = highpass[1:] / (2j * math.pi * f[1:])
    v = fft.irfft(fft.rfft(x * conversion_factor(channel.unit, "m/s^2"), n) * integrator, n)[:x.size]
    return v * 1e3, i0


def _axis_ppv(velocity, channel: Channel, axis: str, building_class: str, location: str, f_low: float,
              method: str, notes: list) -> dict[str, Any]:
    v, first = velocity
    fs = channel.fs
    i = int(np.argmax(np.abs(v)))
    ppv = float(abs(v[i]))
    used = method
    freq = _zero_crossing_frequency(v, i, fs) if method == "zero_crossing" else None
    if freq is None:
        if method == "zero_crossing":
            notes.append(f"axis {axis}: no zero crossing on both sides of the peak; frequency from the spectrum")
        freq, used = _spectrum_frequency(v, fs, f_low), "spectrum"
    guideline = None
    if location == "foundation" or axis in ("x", "y"):
        guideline = guideline_velocity(freq, building_class, location)
    if location == "foundation" and not 1.0 <= freq <= 100.0:
        notes.append(f"axis {axis}: dominant frequency {freq:.3g} Hz is outside Table 1's 1-100 Hz; the value "
                     "at the nearest end is used")
    return json_ready({"ppv_mm_s": ppv, "time_s": channel.start_time + (first + i) / fs, "frequency_hz": freq,
                       "frequency_method": used, "guideline_mm_s": guideline,
                       "ratio": None if guideline is None else ppv / guideline}, nonfinite_as_none=True)


def _zero_crossing_frequency(v: np.ndarray, i: int, fs: float) -> float | None:
    """1 / (2 x spacing of the zero crossings around sample i), crossings linearly interpolated."""
    sign = np.signbit(v)
    changes = np.flatnonzero(sign[1:] != sign[:-1])  # crossing between samples c and c + 1
    before, after = changes[changes < i], changes[changes >= i]
    if before.size == 0 or after.size == 0:
        return None

    def instant(c: int) -> float:
        return (c + v[c] / (v[c] - v[c + 1])) / fs

    half_period = instant(int(after[0])) - instant(int(before[-1]))
    return 1.0 / (2.0 * half_period) if half_period > 0 else None


def _spectrum_frequency(v: np.ndarray, fs: float, f_low: float) -> float:
    spectrum = np.abs(fft.rfft(v * signal.get_window("hann", v.size)))
    f = fft.rfftfreq(v.size, 1.0 / fs)
    spectrum[f < f_low] = 0.0
    return float(f[int(np.argmax(spectrum))])
