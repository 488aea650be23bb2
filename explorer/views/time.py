"""Time-history plots: long traces re-decimated on every zoom, zones shaded.

A :class:`TracePlot` keeps its samples outside HoloViews and feeds a
DynamicMap on ``Pipe`` (the data), ``RangeX`` (the visible window) and
``PlotSize`` (the width in pixels): each zoom or pan cuts the visible window
by index arithmetic and decimates it with tsdownsample, so the browser never
receives more than about two points per pixel. The plot's title says
"display reduced" whenever that happens.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import holoviews as hv
import numpy as np

from ..decimate import points_for_width, reduce_trace
from .common import COLOURS, TIME_TOOLS, base_opts, fmt_count, time_dim, value_dim

__all__ = ["Trace", "TracePlot"]


@dataclass(frozen=True)
class Trace:
    """One uniformly sampled trace to draw: samples, rate (Hz) and first-sample time (s)."""

    label: str
    data: np.ndarray
    fs: float
    t0: float = 0.0
    colour: str = COLOURS["processed"]
    width: float = 1.2
    alpha: float = 1.0
    dash: str = "solid"


@dataclass
class TraceData:
    """What a TracePlot draws: traces in fixed slots, shaded zones and marked findings."""

    traces: dict[str, Trace | None] = field(default_factory=dict)
    zones: list = field(default_factory=list)  # edge zones (s), shaded
    marks: list = field(default_factory=list)  # quality findings (s), shaded in another colour
    unit: str = ""


class TracePlot:
    """A time plot with fixed trace slots (so the overlay's layers never change).

    Parameters
    ----------
    slots : sequence of str
        Names of the traces it can show (a slot left empty draws nothing).
    y_name, y_label : str
        The y dimension (distinct per plot, so y axes do not link).
    title : str
    method : {"minmax", "minmax-lttb"}
        Decimation used for display.
    """

    def __init__(self, slots, y_name: str, y_label: str, title: str, method: str = "minmax",
                 height: int = 300):
        self.slots = tuple(slots)
        self.y_name, self.y_label, self.title = y_name, y_label, title
        self.method = method
        self.height = height
        self.last_points = 0  # points sent by the latest render (all traces)
        self.last_render_s = 0.0
        self.last_reduced = False
        self.rebuild(TraceData())

    def rebuild(self, data: TraceData) -> hv.DynamicMap:
        """Make fresh streams and DynamicMap whose first frame is ``data`` (its ranges come from it).

        Used when the data's time span changes (a new recording or channel):
        ranges follow the data only when a plot is first drawn, and
        ``framewise`` would make every zoom jump.
        """
        self.pipe = hv.streams.Pipe(data=data)
        self.range = hv.streams.RangeX()
        self.size = hv.streams.PlotSize()
        self.dmap = hv.DynamicMap(self._render, streams=[self.pipe, self.range, self.size])
        return self.view()

    def _render(self, data: TraceData, x_range=None, width=None, height=None, scale=None):
        started = time.perf_counter()
        n_out = points_for_width(width)
        tdim, ydim = time_dim(), value_dim(self.y_name, self.y_label, data.unit)
        layers, points, reduced, visible = [], 0, False, 0
        for slot in self.slots:
            trace = data.traces.get(slot)
            if trace is None:
                layers.append(hv.Curve((np.zeros(0), np.zeros(0)), tdim, ydim, label=slot))
                continue
            part = reduce_trace(trace.data, trace.fs, trace.t0, x_range, n_out, self.method)
            points += part.x.size
            visible = max(visible, part.n_visible)
            reduced |= part.reduced
            layers.append(hv.Curve({"time": part.x, self.y_name: part.y}, tdim, ydim, label=trace.label,
                                   datatype=["dictionary"]).opts(
                color=trace.colour, line_width=trace.width, alpha=trace.alpha, line_dash=trace.dash))
        layers.append(hv.VSpans(list(data.zones), kdims=[tdim, "time_end"]).opts(
            color=COLOURS["zone"], alpha=0.25, line_alpha=0))
        layers.append(hv.VSpans(list(data.marks), kdims=[tdim, "time_end"]).opts(
            color=COLOURS["error"], alpha=0.18, line_alpha=0))
        self.last_points, self.last_reduced = points, reduced
        self.last_render_s = time.perf_counter() - started
        note = f" · display reduced ({fmt_count(n_out)} of {fmt_count(visible)} samples per trace)" \
            if reduced else ""
        return hv.Overlay(layers).opts(title=self.title + note)

    def view(self) -> hv.DynamicMap:
        """The DynamicMap to put in a layout."""
        return self.dmap.opts(
            hv.opts.Curve(autorange="y", default_tools=TIME_TOOLS, active_tools=["xwheel_zoom", "xpan"],
                          **base_opts(height=self.height)),
            hv.opts.Overlay(legend_position="top_right", click_policy="hide", **base_opts(height=self.height)))

    def send(self, data: TraceData) -> None:
        """Push new data, redrawn in place (same time span; see :meth:`rebuild` otherwise)."""
        self.pipe.send(data)

    @property
    def data(self) -> TraceData:
        return self.pipe.data
