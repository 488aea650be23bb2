"""Processing steps as data, and the chain that replays them.

A step is a small frozen dataclass: its fields are its settings (with units
in their names or docs), ``to_dict()`` turns it into JSON-ready data with an
``"op"`` key, ``step_from_dict`` turns that data back into the same step, and
``apply(channel)`` returns a new channel with the step appended to its
history. The app, the session file and the batch runner all replay steps
through this one path, so their results are identical.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Iterator, Mapping
from typing import Any, ClassVar

from ._json import json_ready
from ._version import __version__
from .channel import Channel, Recording
from .errors import SigtuneError

__all__ = ["Step", "Chain", "register_step", "step_from_dict", "step_types"]

_REGISTRY: dict[str, type["Step"]] = {}


def register_step(cls: type["Step"]) -> type["Step"]:
    """Class decorator: make ``cls`` loadable by its ``op`` name."""
    if not getattr(cls, "op", None):
        raise TypeError(f"{cls.__name__} needs a class attribute 'op'")
    if cls.op in _REGISTRY and _REGISTRY[cls.op] is not cls:
        raise TypeError(f"step op {cls.op!r} is registered twice")
    _REGISTRY[cls.op] = cls
    return cls


def step_types() -> dict[str, type["Step"]]:
    """Return the registered step classes by op name."""
    return dict(_REGISTRY)


class Step:
    """Base of every processing step (subclasses are frozen dataclasses).

    Subclasses set ``op`` and implement :meth:`process`. ``process`` may
    return the new channel, or ``(channel, info)`` where ``info`` is a small
    dict (actual rate obtained, edge zones ...) stored with the history entry.
    """

    op: ClassVar[str] = ""

    def process(self, channel: Channel):  # pragma: no cover - abstract
        raise NotImplementedError

    def apply(self, channel: Channel) -> Channel:
        """Return the processed channel, with this step appended to its history."""
        result = self.process(channel)
        out, info = result if isinstance(result, tuple) else (result, None)
        entry = {**self.to_dict(), "sigtune": __version__}
        if info:
            entry["info"] = json_ready(info)
        return out.replace(history=channel.history + (entry,))

    def to_dict(self) -> dict[str, Any]:
        """Return the step as JSON-ready data: ``{"op": ..., <setting>: <value>, ...}``."""
        data = {"op": self.op}
        for f in dataclasses.fields(self):
            data[f.name] = json_ready(getattr(self, f.name))
        return data

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Step":
        """Build the step from :meth:`to_dict` data, checking every key."""
        return step_from_dict(data, expected=cls)


def step_from_dict(data: Mapping[str, Any], *, where: str = "step", expected: type | None = None) -> Step:
    """Build a registered step from its ``to_dict()`` data.

    Unknown ops and unknown or missing settings raise :class:`SigtuneError`
    naming ``where`` and listing what is valid. History entries (which also
    carry ``"sigtune"`` and ``"info"``) are accepted.
    """
    if not isinstance(data, Mapping):
        raise SigtuneError(f"a step must be an object with an 'op' key; got {type(data).__name__}", where)
    op = data.get("op")
    if op not in _REGISTRY:
        raise SigtuneError(f"unknown op {op!r}; valid ops: {', '.join(sorted(_REGISTRY))}", f"{where}.op")
    cls = _REGISTRY[op]
    if expected is not None and not issubclass(cls, expected):
        raise SigtuneError(f"op {op!r} is not a {expected.__name__}", f"{where}.op")
    fields = {f.name: f for f in dataclasses.fields(cls)}
    settings = {k: v for k, v in data.items() if k not in ("op", "sigtune", "info")}
    unknown = sorted(set(settings) - set(fields))
    if unknown:
        raise SigtuneError(f"unknown setting {unknown[0]!r} for op {op!r}; valid settings: "
                           f"{', '.join(fields)}", f"{where}.{unknown[0]}")
    missing = [n for n, f in fields.items() if n not in settings
               and f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING]
    if missing:
        raise SigtuneError(f"op {op!r} needs setting {missing[0]!r}", f"{where}.{missing[0]}")
    try:
        return cls(**settings)
    except SigtuneError as err:
        raise err.located(where) from None
    except (TypeError, ValueError) as err:
        raise SigtuneError(str(err), where) from None


class Chain:
    """An ordered list of steps, applied one after another.

    Parameters
    ----------
    steps : iterable of Step or dict
        Steps, or their ``to_dict()`` data.

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Channel, Gain
    >>> out = Chain([Gain(2.0)]).apply(Channel(np.ones(4), 4.0))
    >>> float(out.data[0]), out.history[0]["op"]
    (2.0, 'gain')
    """

    def __init__(self, steps: Iterable[Step | Mapping[str, Any]] = ()):
        built = []
        for i, step in enumerate(steps):
            built.append(step if isinstance(step, Step) else step_from_dict(step, where=f"steps[{i}]"))
        self.steps: tuple[Step, ...] = tuple(built)

    def __iter__(self) -> Iterator[Step]:
        return iter(self.steps)

    def __len__(self) -> int:
        return len(self.steps)

    def __repr__(self) -> str:
        return f"Chain({[s.op for s in self.steps]})"

    def __eq__(self, other) -> bool:
        return isinstance(other, Chain) and self.to_list() == other.to_list()

    def apply(self, channel: Channel) -> Channel:
        """Apply every step in order; return the final channel."""
        for i, step in enumerate(self.steps):
            try:
                channel = step.apply(channel)
            except SigtuneError as err:
                raise err.located(f"steps[{i}] ({step.op})") from None
        return channel

    def stages(self, channel: Channel) -> Iterator[Channel]:
        """Yield the channel after each step in turn (for per-stage caches and views)."""
        for step in self.steps:
            channel = step.apply(channel)
            yield channel

    def apply_recording(self, recording: Recording) -> Recording:
        """Apply the chain to every channel of ``recording``."""
        return recording.replace(channels=[self.apply(ch) for ch in recording])

    def to_list(self) -> list[dict[str, Any]]:
        """Return the steps' ``to_dict()`` data."""
        return [s.to_dict() for s in self.steps]

    @classmethod
    def from_list(cls, data: Iterable[Mapping[str, Any]]) -> "Chain":
        """Build a chain from :meth:`to_list` data (or a channel's history)."""
        return cls(list(data))
