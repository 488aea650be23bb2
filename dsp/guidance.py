"""What every evaluation says beside its figures: the cautions, the clauses it follows, and its result form.

:data:`CAUTIONS` holds the plain-language cautions (the one place the app, reports and results take
their text from) and :data:`CLAUSES` the references each evaluation follows. The private helpers here
are shared by :mod:`dsp.evaluation` (human exposure) and :mod:`dsp.severity` (machinery, buildings).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from ._json import json_ready
from ._validate import check_choice
from .channel import Channel
from .errors import SigtuneError

__all__ = ["CAUTIONS", "CLAUSES"]

# ---- cautions: the one place the app, reports and results take their text from ----
_COMMON_CAUTION = (
    "These figures depend on correct sensor mounting, axes and exposure times. Zone boundaries and "
    "exposure values are guidance: the governing standard, local regulations, contracts and the "
    "manufacturer override them. Decisions about people's health or machine safety belong to "
    "competent professionals.")

CAUTIONS: dict[str, str] = {
    "whole_body": _COMMON_CAUTION + (
        " Whole-body figures assume the accelerometer at the interface between the body and the seat, "
        "floor or backrest, aligned with the body's axes; daily values scale with the exposure time "
        "you gave, so a wrong time gives a wrong A(8)."),
    "hand_arm": _COMMON_CAUTION + (
        " Hand-arm figures assume the accelerometer on the handle where the hand grips it, firmly "
        "fixed (a loose or resonant mount reads high), with all three axes measured; the daily value "
        "scales with the trigger time you gave."),
    "daily_exposure": _COMMON_CAUTION + (
        " A daily exposure is only as good as the durations given for each task: use measured trigger "
        "or operating time, not shift length."),
    "machine_severity": _COMMON_CAUTION + (
        " Severity zones apply to the machine group and support you chose, measured on bearing "
        "housings or pedestals in steady operation; a machine can be in zone A and still have a "
        "developing fault, and alarm and trip values from a baseline need a representative baseline."),
    "building_ppv": _COMMON_CAUTION + (
        " Guideline values apply to short-term vibration (not resonant or fatiguing long-term "
        "vibration) at the foundation or top floor of the building class you chose; staying below "
        "them means damage reducing serviceability is not expected, exceeding them does not "
        "necessarily mean damage."),
}

CLAUSES: dict[str, str] = {
    "whole_body": "ISO 2631-1:1997 clauses 6.2-6.5, 7.2, 8.2, Annex B (health), Annex C (comfort); "
                  "Directive 2002/44/EC Art. 3(2), Annex B",
    "hand_arm": "ISO 5349-1:2001 clauses 4-5 (vibration total value, daily exposure A(8)), Annex A (Wh); "
                "Directive 2002/44/EC Art. 3(1), Annex A",
    "daily_exposure": "ISO 5349-1:2001 clause 5; ISO 2631-1:1997 Annex B eq. B.1; Directive 2002/44/EC "
                      "Annex A.1 and B.1",
    "machine_severity": "ISO 10816-3:2009 (ISO 20816-3:2022) clause 6, Annex A Tables A.1 and A.2",
    "building_ppv": "DIN 4150-3:2016 Table 1 (short-term vibration, guideline values)",
}


class _Result:
    """Mixin: ``to_dict()`` of a result dataclass, JSON-ready, figures plus clause and caution."""

    def to_dict(self) -> dict[str, Any]:
        """Return the figures, ``clause``, ``caution`` and ``notes`` as JSON-ready data."""
        data = {}
        for name in self.__dataclass_fields__:
            value = getattr(self, name)
            data[name] = value.to_dict() if hasattr(value, "to_dict") else json_ready(
                {k: v.to_dict() if hasattr(v, "to_dict") else v for k, v in value.items()}
                if isinstance(value, Mapping) else value, nonfinite_as_none=True)
        return data


def _longest_clean_span(channel: Channel) -> tuple[int, int]:
    """Longest run of samples outside every edge zone in the channel's history."""
    blocked = []
    for entry in channel.history:
        for t0, t1 in (entry.get("info") or {}).get("edge_zones_s") or ():
            i0 = math.floor((min(t0, t1) - channel.start_time) * channel.fs + 1e-9)
            i1 = math.ceil((max(t0, t1) - channel.start_time) * channel.fs - 1e-9)
            blocked.append((max(0, i0), min(channel.n_samples, i1)))
    best, cursor = (0, 0), 0
    for i0, i1 in sorted(blocked) + [(channel.n_samples, channel.n_samples)]:
        if i0 - cursor > best[1] - best[0]:
            best = (cursor, i0)
        cursor = max(cursor, i1)
    return best


def _by_axis(channels, axis: str | None, keys: Sequence[str], where: str) -> dict[str, Channel]:
    """Accept {axis: Channel}, a sequence of channels with metadata 'axis', or one channel."""
    if isinstance(channels, Channel):
        channels = [channels.replace(metadata={**channels.metadata, "axis": axis})] if axis else [channels]
    elif axis is not None:
        raise SigtuneError("'axis' is only for a single channel; give a dict {axis: channel} otherwise", where)
    if isinstance(channels, Mapping):
        items = {str(k).lower(): ch for k, ch in channels.items()}
    else:
        items = {}
        for ch in channels:
            name = str(ch.metadata.get("axis", "")).lower() if isinstance(ch, Channel) else ""
            if not name:
                raise SigtuneError(f"channel {getattr(ch, 'name', ch)!r} has no axis: give a dict "
                                   f"{{axis: channel}}, set metadata['axis'] or pass axis=...; "
                                   f"valid axes: {', '.join(keys)}", where)
            if name in items:
                raise SigtuneError(f"two channels for axis {name!r}", where)
            items[name] = ch
    if not items:
        raise SigtuneError(f"needs at least one channel; valid axes: {', '.join(keys)}", where)
    for name, ch in items.items():
        check_choice(name, f"{where} axis", keys)
        if not isinstance(ch, Channel):
            raise SigtuneError(f"axis {name!r}: expected a Channel, got {type(ch).__name__}", where)
    return items
