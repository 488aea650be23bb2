"""Pieces every format module shares: JSON metadata, channel headers, checks.

Readers raise :class:`~dsp.errors.SigtuneError` with a location *inside* the
file (row, channel, dataset); :func:`dsp.io.read` prefixes the file's path.
"""

from __future__ import annotations

import inspect
import json
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np

from .._validate import check_number
from .._version import __version__
from ..channel import Channel, Recording
from ..errors import SigtuneError

#: The longest text line read from any file (bytes): a longer line means the
#: file is not a recording of ours (or is binary), and reading it whole could
#: exhaust memory.
MAX_LINE_BYTES = 1 << 20

#: Below this a sensitivity is no sensor's (any unit): its reciprocal could overflow.
_SMALLEST_SENSITIVITY = 1e-200

#: How many non-finite runs an error message lists before summarising.
RUNS_LISTED = 3


def to_json(value: Any, where: str) -> str:
    """Return ``value`` as compact JSON text, or raise naming ``where``.

    numpy scalars and arrays become plain numbers and lists; anything else that
    JSON cannot hold is an error rather than a silent ``str()``.
    """
    def plain(obj):
        if isinstance(obj, np.generic):
            return obj.item()
        if isinstance(obj, np.ndarray):
            return obj.tolist()
        raise TypeError(f"{type(obj).__name__} {obj!r:.60}")

    try:
        return json.dumps(value, default=plain, allow_nan=True, ensure_ascii=False)
    except (TypeError, ValueError) as err:
        raise SigtuneError(f"cannot be stored as JSON ({err}); keep metadata to strings, numbers, "
                           "booleans, lists and dicts", where) from None


def from_json(text: Any, where: str) -> Any:
    """Parse JSON text read from a file, or raise naming ``where``."""
    if isinstance(text, bytes):
        text = text.decode("utf-8", errors="replace")
    try:
        return json.loads(str(text))
    except json.JSONDecodeError as err:
        raise SigtuneError(f"is not valid JSON ({err.msg} at character {err.pos})", where) from None
    except RecursionError:  # one C call per level: a hostile file may nest [[[[... a million deep
        raise SigtuneError("is JSON nested too deeply to read (about a thousand levels of [ or {); sigtune "
                           "metadata nests a few levels at most. Is the file damaged?", where) from None


def json_object(value: Any, where: str) -> dict:
    """Return ``value`` if it is a JSON object (a dict), else raise saying what it is."""
    if not isinstance(value, dict):
        raise SigtuneError(f"must be a JSON object ({{\"key\": value, ...}}); got {type(value).__name__} "
                           f"{value!r:.40}", where)
    return value


def channel_header(channel: Channel) -> dict[str, Any]:
    """Return everything about ``channel`` except its samples, as JSON-ready data."""
    return {
        "name": channel.name, "fs_hz": channel.fs, "unit": channel.unit, "quantity": channel.quantity,
        "start_time_s": channel.start_time, "metadata": dict(channel.metadata),
        "history": [dict(h) for h in channel.history],
    }


def channel_from_header(data: np.ndarray, header: Mapping[str, Any], where: str) -> Channel:
    """Build a channel from samples and a :func:`channel_header` dict read from a file."""
    missing = [k for k in ("name", "fs_hz", "unit") if k not in header]
    if missing:
        raise SigtuneError(f"channel entry lacks {', '.join(map(repr, missing))}; each channel needs "
                           "name, fs_hz and unit (see docs/formats.md)", where)
    metadata, history = header.get("metadata") or {}, header.get("history") or []
    if not isinstance(metadata, Mapping) or not isinstance(history, list):
        raise SigtuneError("'metadata' must be a JSON object and 'history' a JSON list", where)
    if not all(isinstance(step, Mapping) for step in history):
        bad = next(step for step in history if not isinstance(step, Mapping))
        raise SigtuneError(f"'history' must list processing steps as JSON objects ({{\"op\": ...}}); got "
                           f"{type(bad).__name__} {bad!r:.40}", where)
    start = check_number(header.get("start_time_s", 0.0), f"{where} start_time_s", unit="s")
    try:
        return Channel(data, header["fs_hz"], name=str(header["name"]), unit=header["unit"],
                       quantity=header.get("quantity"), start_time=start, metadata=metadata,
                       history=tuple(history))
    except (TypeError, ValueError) as err:
        if isinstance(err, SigtuneError):
            raise err.located(where) from None
        raise SigtuneError(str(err), where) from None


def checked_sensitivity(sensitivity: Any, unit: Any, where: str) -> tuple[float, str]:
    """Return a sensor sensitivity read from a file as ``(number > 0, unit text)``, or raise naming ``where``.

    Checked here because :func:`dsp.units.sensitivity_factor` expects a number
    and a text unit, and a file may hold anything.
    """
    value = check_number(sensitivity, f"{where} sensitivity", low=0.0, low_open=True)
    if value < _SMALLEST_SENSITIVITY:  # calibrating divides by it: every sample would overflow to Inf
        raise SigtuneError(f"{value!r} is too small to be a sensor sensitivity (calibrating divides by it); "
                           "expected a value such as 100 (mV/g)", f"{where} sensitivity")
    if not isinstance(unit, str):
        raise SigtuneError(f"must be text such as 'mV/g' or 'mV/(m/s^2)'; got {unit!r:.40}",
                           f"{where} sensitivity_unit")
    return value, unit


def recording_header(recording: Recording) -> dict[str, Any]:
    """Return the recording-level facts a file stores beside its channels."""
    return {"sigtune_version": __version__, "metadata": dict(recording.metadata)}


def as_recording(data) -> Recording:
    """Accept a Recording or a single Channel (wrapped) for the writers."""
    if isinstance(data, Recording):
        return data
    if isinstance(data, Channel):
        return Recording([data])
    raise SigtuneError(f"expected a dsp.Recording or dsp.Channel; got {type(data).__name__}", "recording")


def common_timebase(recording: Recording, format_name: str) -> tuple[float, int, float]:
    """Return ``(fs, n_samples, start_time)`` shared by every channel, or raise.

    Text and WAV files hold one row (frame) per instant, so every channel must
    have the same rate, length and start time.
    """
    first = recording[0]
    for ch in recording:
        if (ch.fs, ch.n_samples, ch.start_time) != (first.fs, first.n_samples, first.start_time):
            raise SigtuneError(
                f"a {format_name} file holds channels of one rate, length and start time; channel "
                f"{ch.name!r} has fs={ch.fs:g} Hz, {ch.n_samples} samples, start {ch.start_time:g} s but "
                f"{first.name!r} has fs={first.fs:g} Hz, {first.n_samples} samples, start "
                f"{first.start_time:g} s. Write .h5 or .npz instead, or resample/crop first", "recording")
    return first.fs, first.n_samples, first.start_time


def checked_timestamps(stamps, channels: list[Channel], where: str):
    """Return a stored time column if it describes ``channels``, None if it is absent or of another length.

    ``stamps`` is an array or an HDF5 dataset (only its shape and dtype are
    looked at, so a dataset is checked before it is read). A time column that
    is not a 1-D array of numbers is an error: it cannot be a time axis.
    """
    if stamps is None:
        return None
    if stamps.ndim != 1 or stamps.dtype.kind not in "fiu":
        raise SigtuneError(f"must be a 1-D array of times in s; got shape {stamps.shape}, "
                           f"dtype {stamps.dtype}", where)
    if any(ch.n_samples != stamps.size for ch in channels):
        return None  # a time column only describes channels of its own length
    return stamps


def nonfinite_runs(x: np.ndarray) -> list[tuple[int, int]]:
    """Return ``[(start, stop), ...]`` of the runs of NaN/Inf samples (stop exclusive)."""
    bad = ~np.isfinite(x)
    if not bad.any():
        return []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], bad.view(np.int8), [0]))))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist()))


def check_finite(channel: Channel, allow_nonfinite: bool,
                 describe: Callable[[int, int], str] | None = None) -> None:
    """Raise if ``channel`` holds NaN/Inf samples, saying where; do nothing if allowed.

    ``describe(start, stop)`` turns a run of sample indices into the file's own
    words (``"lines 12-40"``); by default sample indices and times are given.
    """
    if allow_nonfinite:
        return
    runs = nonfinite_runs(channel.data)
    if not runs:
        return
    describe = describe or (lambda a, b: f"samples {a}-{b - 1} "
                            f"(t={channel.start_time + a / channel.fs:.6g}-"
                            f"{channel.start_time + (b - 1) / channel.fs:.6g} s)")
    listed = "; ".join(describe(a, b) for a, b in runs[:RUNS_LISTED])
    more = f"; and {len(runs) - RUNS_LISTED} more run(s)" if len(runs) > RUNS_LISTED else ""
    total = sum(b - a for a, b in runs)
    raise SigtuneError(
        f"{total} non-finite sample(s) (NaN/Inf) of {channel.n_samples} in {len(runs)} run(s): "
        f"{listed}{more}. "
        "Pass allow_nonfinite=True to read them anyway (dsp.audit then reports them), or repair the file",
        f"channel {channel.name!r}")


def check_options(function: Callable, options: Mapping[str, Any], format_name: str) -> None:
    """Raise if ``options`` holds a keyword that ``function`` does not take."""
    params = inspect.signature(function).parameters
    valid = [n for n, p in params.items() if p.kind is inspect.Parameter.KEYWORD_ONLY]
    for name in options:
        if name not in valid:
            raise SigtuneError(f"unknown option {name!r} for {format_name} files; valid options: "
                               f"{', '.join(valid) or 'none'}", name)

