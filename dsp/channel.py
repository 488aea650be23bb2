"""Channels and recordings: samples that carry their rate, unit and history."""

from __future__ import annotations

import dataclasses
from collections import Counter
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ._validate import check_choice, check_fs, check_samples
from .errors import SigtuneError
from .units import QUANTITIES, unit_info

__all__ = ["Channel", "Recording"]


def _readonly(arr: np.ndarray) -> np.ndarray:
    view = arr.view()
    view.flags.writeable = False
    return view


@dataclass(frozen=True, eq=False)
class Channel:
    """One measured signal: uniformly sampled values with their rate and unit.

    Parameters
    ----------
    data : array_like
        The samples, 1-D. Kept as float32 if given as float32, else float64.
        The channel holds a read-only view: processing never writes into the
        caller's array, and every step returns a new channel.
    fs : float
        Sample rate in Hz (> 0).
    name : str, default ``"ch1"``
    unit : str, default ``"m/s^2"``
        Engineering unit of the samples (see :data:`dsp.UNITS`).
    quantity : str, optional
        ``acceleration``, ``velocity``, ``displacement``, ``force``,
        ``pressure``, ``voltage`` or ``other``; default inferred from ``unit``.
    start_time : float, default 0.0
        Time of the first sample in s, relative to the recording's start.
    metadata : dict, optional
        Free-form key/value pairs (sensor serial, location, axis ...).
    history : tuple of dict, optional
        The processing steps applied so far, oldest first, as ``Step.to_dict()`` data.

    Examples
    --------
    >>> ch = Channel(np.zeros(1000), fs=1000.0, name="bearing_x", unit="g")
    >>> ch.duration, ch.quantity
    (1.0, 'acceleration')
    """

    data: np.ndarray
    fs: float
    name: str = "ch1"
    unit: str = "m/s^2"
    quantity: str | None = None
    start_time: float = 0.0
    metadata: Mapping[str, Any] = field(default_factory=dict)
    history: tuple = ()

    def __post_init__(self):
        where = f"channel {self.name!r}"
        set_ = object.__setattr__
        set_(self, "data", _readonly(check_samples(self.data, f"{where} data", min_samples=2)))
        try:
            set_(self, "fs", check_fs(self.fs, f"{where} fs"))
        except SigtuneError as err:
            raise SigtuneError(err.detail, f"{where} fs") from None
        unit = unit_info(self.unit, f"{where} unit")
        set_(self, "unit", unit.symbol)
        quantity = self.quantity or unit.quantity
        check_choice(quantity, f"{where} quantity", QUANTITIES)
        if self.quantity and unit.quantity not in (quantity, "other", "voltage") and quantity != "other":
            raise SigtuneError(f"unit {unit.symbol!r} measures {unit.quantity}, not {quantity}", where)
        set_(self, "quantity", quantity)
        set_(self, "start_time", float(self.start_time))
        set_(self, "metadata", dict(self.metadata))
        set_(self, "history", tuple(dict(h) for h in self.history))

    # ---- derived values (computed, never stored twice) ----
    @property
    def n_samples(self) -> int:
        """Number of samples."""
        return int(self.data.shape[0])

    def __len__(self) -> int:
        return self.n_samples

    @property
    def duration(self) -> float:
        """Record length in s (``n_samples / fs``)."""
        return self.n_samples / self.fs

    @property
    def nyquist(self) -> float:
        """Nyquist frequency ``fs / 2`` in Hz."""
        return self.fs / 2.0

    @property
    def dt(self) -> float:
        """Sample interval in s."""
        return 1.0 / self.fs

    def time(self) -> np.ndarray:
        """Return the sample instants in s: ``start_time + index / fs``."""
        return self.start_time + np.arange(self.n_samples) / self.fs

    # ---- new channels from this one ----
    def replace(self, **changes) -> "Channel":
        """Return a copy with some fields changed (``data``, ``fs``, ``unit`` ...)."""
        return dataclasses.replace(self, **changes)

    def with_step(self, step: Mapping[str, Any], **changes) -> "Channel":
        """Return a copy with ``changes`` applied and ``step`` appended to the history."""
        return dataclasses.replace(self, history=self.history + (dict(step),), **changes)

    def __repr__(self) -> str:
        return (f"Channel(name={self.name!r}, n_samples={self.n_samples}, fs={self.fs:g} Hz, "
                f"unit={self.unit!r}, quantity={self.quantity!r}, steps={len(self.history)})")


@dataclass(frozen=True, eq=False)
class Recording:
    """An ordered set of channels read from one source.

    Parameters
    ----------
    channels : sequence of Channel
        In file order; names must be unique.
    source : str, optional
        Path of the file it was read from.
    metadata : dict, optional
        Free-form key/value pairs of the whole recording.
    timestamps : ndarray, optional
        The time column in s as read from a file that had one (before the
        rate was inferred), for the timebase check of :func:`dsp.audit`.

    Examples
    --------
    >>> rec = Recording([Channel(np.zeros(8), 8.0, name="a"), Channel(np.ones(8), 8.0, name="b")])
    >>> rec["b"].name, rec[0].name, rec.names
    ('b', 'a', ['a', 'b'])
    """

    channels: Sequence[Channel]
    source: str | None = None
    metadata: Mapping[str, Any] = field(default_factory=dict)
    timestamps: np.ndarray | None = None

    def __post_init__(self):
        channels = tuple(self.channels)
        if not channels:
            raise SigtuneError("a recording needs at least one channel", self.source or "recording")
        duplicates = sorted(n for n, count in Counter(c.name for c in channels).items() if count > 1)
        if duplicates:
            raise SigtuneError(f"channel names must be unique; repeated: {', '.join(duplicates)}",
                               self.source or "recording")
        object.__setattr__(self, "channels", channels)
        object.__setattr__(self, "metadata", dict(self.metadata))
        if self.timestamps is not None:
            object.__setattr__(self, "timestamps", _readonly(np.asarray(self.timestamps, float)))

    @property
    def names(self) -> list[str]:
        """Channel names in order."""
        return [c.name for c in self.channels]

    def __len__(self) -> int:
        return len(self.channels)

    def __iter__(self) -> Iterator[Channel]:
        return iter(self.channels)

    def __getitem__(self, key: int | str) -> Channel:
        """Select a channel by index or by name."""
        if isinstance(key, str):
            for ch in self.channels:
                if ch.name == key:
                    return ch
            raise SigtuneError(f"no channel named {key!r}; channels: {', '.join(self.names)}",
                               self.source or "recording")
        try:
            return self.channels[key]
        except (IndexError, TypeError):
            raise SigtuneError(f"channel index must be 0..{len(self) - 1} or a name; got {key!r}",
                               self.source or "recording") from None

    def select(self, keys: Sequence[int | str]) -> "Recording":
        """Return a recording of the chosen channels, in the order given."""
        return dataclasses.replace(self, channels=[self[k] for k in keys])

    def replace(self, **changes) -> "Recording":
        """Return a copy with some fields changed."""
        return dataclasses.replace(self, **changes)

    def __repr__(self) -> str:
        return f"Recording(source={self.source!r}, channels={self.names})"
