"""Units of the quantities a vibration bench measures, and sensor calibration.

Every unit has an exact factor to the SI unit of its quantity. The factors
come from their definitions: standard gravity g_n = 9.80665 m/s^2 (CGPM 1901,
ISO 80000-3), the international inch 25.4 mm and foot 0.3048 m (1959
agreement, NIST SP 811), the bar 10^5 Pa and the pound-force
4.4482216152605 N (NIST SP 811), the psi 6894.757293168361 Pa (NIST SP 811).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import SigtuneError

__all__ = [
    "QUANTITIES", "STANDARD_GRAVITY", "UNITS", "Unit", "unit_info", "convert_units",
    "units_for", "si_unit", "sensitivity_factor", "calibrate_volts",
]

STANDARD_GRAVITY = 9.80665  # m/s^2, exact by definition (3rd CGPM, 1901)
INCH = 0.0254  # m, exact (international inch, 1959)
FOOT = 0.3048  # m, exact
POUND_FORCE = 4.4482216152605  # N, exact (NIST SP 811 B.8)
PSI = POUND_FORCE / INCH**2  # Pa, 6894.757293168361

#: Smallest sensitivity accepted, in V per measured unit (1 nV per unit).
MIN_SENSITIVITY_V = 1e-9

QUANTITIES = ("acceleration", "velocity", "displacement", "force", "pressure", "voltage", "other")


@dataclass(frozen=True)
class Unit:
    """A unit: its canonical symbol, the quantity it measures and its factor to SI."""

    symbol: str
    quantity: str
    to_si: float


_TABLE = [
    # acceleration (SI: m/s^2)
    ("m/s^2", "acceleration", 1.0), ("mm/s^2", "acceleration", 1e-3),
    ("cm/s^2", "acceleration", 1e-2), ("g", "acceleration", STANDARD_GRAVITY),
    ("mg", "acceleration", STANDARD_GRAVITY * 1e-3), ("in/s^2", "acceleration", INCH),
    ("ft/s^2", "acceleration", FOOT),
    # velocity (SI: m/s)
    ("m/s", "velocity", 1.0), ("mm/s", "velocity", 1e-3), ("cm/s", "velocity", 1e-2),
    ("um/s", "velocity", 1e-6), ("in/s", "velocity", INCH), ("ft/s", "velocity", FOOT),
    # displacement (SI: m)
    ("m", "displacement", 1.0), ("mm", "displacement", 1e-3), ("cm", "displacement", 1e-2),
    ("um", "displacement", 1e-6), ("in", "displacement", INCH), ("mil", "displacement", INCH * 1e-3),
    ("ft", "displacement", FOOT),
    # force (SI: N)
    ("N", "force", 1.0), ("kN", "force", 1e3), ("lbf", "force", POUND_FORCE),
    # pressure (SI: Pa)
    ("Pa", "pressure", 1.0), ("hPa", "pressure", 1e2), ("kPa", "pressure", 1e3),
    ("MPa", "pressure", 1e6), ("mbar", "pressure", 1e2), ("bar", "pressure", 1e5), ("psi", "pressure", PSI),
    # voltage (SI: V): raw sensor output before calibration
    ("V", "voltage", 1.0), ("mV", "voltage", 1e-3),
    # dimensionless
    ("1", "other", 1.0), ("FS", "other", 1.0),
]
UNITS: dict[str, Unit] = {sym: Unit(sym, q, f) for sym, q, f in _TABLE}

_ALIASES = {
    "m/s2": "m/s^2", "m/s**2": "m/s^2", "m/s²": "m/s^2", "ms^-2": "m/s^2", "m s^-2": "m/s^2",
    "mm/s2": "mm/s^2", "mm/s²": "mm/s^2", "cm/s²": "cm/s^2", "gal": "cm/s^2", "Gal": "cm/s^2",
    "G": "g", "gn": "g", "g0": "g", "in/s2": "in/s^2", "ft/s2": "ft/s^2",
    "µm/s": "um/s", "μm/s": "um/s", "ips": "in/s",
    "µm": "um", "μm": "um", "micron": "um", "mils": "mil", "inch": "in",
    "": "1", "-": "1", "none": "1", "fs": "FS", "full scale": "FS",
}


def unit_info(unit: str, where: str = "unit") -> Unit:
    """Return the :class:`Unit` for a symbol or alias (``'m/s²'``, ``'µm'`` ...), or raise."""
    key = str(unit).strip()
    key = _ALIASES.get(key, key)
    if key not in UNITS:
        known = ", ".join(UNITS)
        raise SigtuneError(f"unknown unit {unit!r}; known units: {known}", where)
    return UNITS[key]


def units_for(quantity: str) -> list[str]:
    """Return the unit symbols of ``quantity``, SI first."""
    return [u.symbol for u in UNITS.values() if u.quantity == quantity]


def si_unit(quantity: str) -> str:
    """Return the SI unit symbol of ``quantity`` (``'1'`` for ``'other'``)."""
    units = units_for(quantity)
    if not units:
        raise SigtuneError(f"unknown quantity {quantity!r}; known: {', '.join(QUANTITIES)}", "quantity")
    return units[0]


def convert_units(values, from_unit: str, to_unit: str):
    """Convert ``values`` between two units of the same quantity.

    Parameters
    ----------
    values : float or array_like
        Values in ``from_unit``. Never modified.
    from_unit, to_unit : str
        Unit symbols, e.g. ``'g'`` and ``'m/s^2'``.

    Returns
    -------
    float or ndarray
        The values in ``to_unit`` (a new array).

    Examples
    --------
    >>> convert_units(1.0, "g", "m/s^2")
    9.80665
    >>> convert_units(1.0, "in/s", "mm/s")
    25.4
    """
    factor = conversion_factor(from_unit, to_unit)
    if np.isscalar(values):
        return float(values) * factor
    return np.asarray(values) * factor


def conversion_factor(from_unit: str, to_unit: str) -> float:
    """Return the factor that multiplies values in ``from_unit`` into ``to_unit``."""
    src, dst = unit_info(from_unit, "from_unit"), unit_info(to_unit, "to_unit")
    if src.quantity != dst.quantity:
        raise SigtuneError(
            f"cannot convert {src.symbol} ({src.quantity}) to {dst.symbol} ({dst.quantity}); "
            f"units of {src.quantity}: {', '.join(units_for(src.quantity))}", "to_unit")
    if src.symbol == dst.symbol:
        return 1.0
    # Divide before multiplying back so that exact pairs such as in/s -> mm/s stay exact.
    return src.to_si / dst.to_si


def _split_sensitivity_unit(unit: str) -> tuple[str, str]:
    text = unit.replace(" ", "")
    if "/" not in text:
        raise SigtuneError(f"sensitivity unit must read like 'mV/g' or 'mV/(m/s^2)'; got {unit!r}",
                           "sensitivity_unit")
    electrical, _, measured = text.partition("/")
    if measured.startswith("(") and measured.endswith(")"):
        measured = measured[1:-1]
    return electrical, measured


def sensitivity_factor(sensitivity: float, sensitivity_unit: str) -> tuple[float, str]:
    """Return a sensor sensitivity as volts per unit of the measured quantity.

    Parameters
    ----------
    sensitivity : float
        The sensitivity from the calibration certificate, e.g. ``100`` for 100 mV/g.
    sensitivity_unit : str
        ``'<electrical>/<measured>'``: ``'mV/g'``, ``'V/g'``, ``'mV/(m/s^2)'``,
        ``'mV/(mm/s)'``, ``'mV/N'``, ``'mV/Pa'`` ...

    Returns
    -------
    volts_per_unit : float
        Volts per one ``measured`` unit.
    measured_unit : str
        The canonical symbol of the measured unit (``'g'`` ...).
    """
    if not isinstance(sensitivity_unit, str):
        raise SigtuneError(f"must be text like 'mV/g'; got {sensitivity_unit!r}", "sensitivity_unit")
    electrical, measured = _split_sensitivity_unit(sensitivity_unit)
    e = unit_info(electrical, "sensitivity_unit")
    if e.quantity != "voltage":
        raise SigtuneError(f"the numerator must be V or mV; got {electrical!r}", "sensitivity_unit")
    m = unit_info(measured, "sensitivity_unit")
    try:
        value = float(sensitivity) if not isinstance(sensitivity, bool | str) else math.nan
    except (TypeError, ValueError):
        value = math.nan
    # Below 1e-9 V per unit (1 nV/g) no real sensor exists and 1/sensitivity overflows float32 ranges.
    if not (value * e.to_si >= MIN_SENSITIVITY_V) or not math.isfinite(value):
        raise SigtuneError(f"must be a finite number > 0 (at least {MIN_SENSITIVITY_V:g} V per unit); "
                           f"got {sensitivity!r}", "sensitivity")
    return value * e.to_si, m.symbol


def calibrate_volts(volts, sensitivity: float, sensitivity_unit: str, to_unit: str | None = None):
    """Turn a sensor's output voltage into engineering units.

    Parameters
    ----------
    volts : array_like
        Sensor output in V. Never modified.
    sensitivity : float
        Sensor sensitivity, in ``sensitivity_unit``.
    sensitivity_unit : str
        E.g. ``'mV/g'`` or ``'mV/(m/s^2)'``.
    to_unit : str, optional
        Unit of the result; default the measured unit of ``sensitivity_unit``.

    Returns
    -------
    values : ndarray
        Engineering values.
    unit : str
        Their unit.

    Examples
    --------
    >>> calibrate_volts([0.1], 100.0, "mV/g")[0]
    array([1.])
    """
    v_per_unit, measured = sensitivity_factor(sensitivity, sensitivity_unit)
    values = np.asarray(volts, dtype=float) / v_per_unit
    if to_unit is None or to_unit == measured:
        return values, measured
    return convert_units(values, measured, to_unit), unit_info(to_unit).symbol
