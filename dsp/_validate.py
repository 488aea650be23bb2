"""Shared argument checks, one message style.

Each check names the setting, the valid values or range and the value
received, so that a message reads e.g.
``cutoff: must be 0 < cutoff < 500 Hz (Nyquist for fs=1000 Hz); got 620``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np

from .errors import SigtuneError


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:g}"
    return repr(value) if isinstance(value, str) else str(value)


def check_fs(fs, name: str = "fs") -> float:
    """Return ``fs`` as a float in Hz, or raise if it is not a finite positive scalar."""
    try:
        if isinstance(fs, bool):  # float(True) is 1.0, but a flag is not a rate
            raise TypeError
        value = float(fs)
    except (TypeError, ValueError):
        raise SigtuneError(f"sample rate must be a positive number in Hz; got {fs!r}", name) from None
    if not (value > 0) or not math.isfinite(value):  # `not (x > 0)` also rejects NaN
        raise SigtuneError(f"sample rate must be a finite number > 0 Hz; got fs={_fmt(value)}", name)
    return value


def check_number(value, name: str, *, low=None, high=None, low_open=False, high_open=False,
                 unit: str = "", hint: str = "") -> float:
    """Return ``value`` as a finite float inside the stated bounds, or raise.

    ``low_open``/``high_open`` make the bound strict. ``hint`` says how to fix it.
    """
    try:
        if isinstance(value, bool | str):  # float(True) == 1.0 and float("5") == 5.0: neither is a number
            raise TypeError
        x = float(value)
    except (TypeError, ValueError):
        raise SigtuneError(f"must be a number{_range_text(low, high, low_open, high_open, unit)}; "
                           f"got {value!r}", name) from None
    ok = math.isfinite(x)
    if ok and low is not None:
        ok = x > low if low_open else x >= low
    if ok and high is not None:
        ok = x < high if high_open else x <= high
    if not ok:
        message = f"must be{_range_text(low, high, low_open, high_open, unit) or ' finite'}; got {_fmt(x)}"
        raise SigtuneError(message + (f". {hint}" if hint else ""), name)
    return x


def _range_text(low, high, low_open, high_open, unit) -> str:
    u = f" {unit}" if unit else ""
    if low is not None and high is not None:
        return f" {_fmt(low)} {'<' if low_open else '<='} x {'<' if high_open else '<='} {_fmt(high)}{u}"
    if low is not None:
        return f" {'>' if low_open else '>='} {_fmt(low)}{u}"
    if high is not None:
        return f" {'<' if high_open else '<='} {_fmt(high)}{u}"
    return ""


def check_int(value, name: str, *, low: int, high: int | None = None) -> int:
    """Return ``value`` as an int in ``[low, high]``, or raise."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise SigtuneError(f"must be a whole number{_int_range(low, high)}; got {value!r}", name)
    value = int(value)
    if value < low or (high is not None and value > high):
        raise SigtuneError(f"must be a whole number{_int_range(low, high)}; got {value}", name)
    return value


def _int_range(low, high) -> str:
    return f" from {low} to {high}" if high is not None else f" >= {low}"


def check_choice(value, name: str, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices``, or raise listing them."""
    choices = tuple(choices)
    if value not in choices:
        raise SigtuneError(f"must be one of {', '.join(map(repr, choices))}; got {value!r}", name)
    return value


def check_samples(data, name: str = "data", *, min_samples: int = 2) -> np.ndarray:
    """Return ``data`` as a 1-D float array of at least ``min_samples`` samples, or raise.

    float32 input stays float32 (ample for 24-bit data, half the memory
    traffic); every other dtype becomes float64. The caller's array is never
    modified: the result is either the same read-only view or a copy.
    """
    arr = np.asarray(data)
    if arr.dtype.kind not in "fiu" and arr.dtype.kind != "b":
        raise SigtuneError(f"samples must be numeric; got dtype {arr.dtype}", name)
    if arr.ndim != 1:
        raise SigtuneError(f"samples must be a 1-D array; got shape {arr.shape}", name)
    if arr.size < min_samples:
        raise SigtuneError(f"needs at least {min_samples} samples; got {arr.size}", name)
    if arr.dtype not in (np.float32, np.float64):
        arr = arr.astype(np.float64)
    return arr
