"""Integration comparison: the chosen methods overlaid on the shared time axis, with their metrics."""

from __future__ import annotations

from ..state import INTEGRATION_METHODS
from .common import METHOD_COLOURS
from .time import Trace, TraceData, TracePlot

__all__ = ["MotionPlot", "motion_traces"]


class MotionPlot(TracePlot):
    """One slot per integration method (empty when the method is not chosen)."""

    def __init__(self, method: str = "minmax"):
        super().__init__(INTEGRATION_METHODS, "motion", "Integrated", "Integration methods compared", method)


def motion_traces(comparison) -> TraceData:
    """TraceData of an IntegrationComparison: each method's channel in its own colour."""
    traces, unit = {}, ""
    for method, channel in comparison.channels.items():
        traces[method] = Trace(label=method, data=channel.data, fs=channel.fs, t0=channel.start_time,
                               colour=METHOD_COLOURS.get(method, "#444444"), width=1.3)
        unit = channel.unit
    return TraceData(traces=traces, unit=unit)
