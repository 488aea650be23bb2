"""The filter as the signal sees it: magnitude, phase, group delay; impulse or step on demand."""

from __future__ import annotations

import holoviews as hv
import numpy as np

from .common import COLOURS, base_opts, frequency_dim, value_dim

__all__ = ["ResponsePlot", "report_rows"]


class ResponsePlot:
    """Three linked response plots (frequency axis shared with the spectrum) and an optional fourth."""

    def __init__(self, height: int = 220):
        self.height = height
        # Two pipes: the magnitude is drawn at once, the details (phase, delay, time response) may follow
        # a moment later (every plot update has a fixed cost; a user tuning a filter watches the magnitude).
        self.pipe = hv.streams.Pipe(data=None)
        self.detail_pipe = hv.streams.Pipe(data=None)
        self.magnitude = hv.DynamicMap(lambda data: self._curve(data, "magnitude_db", "Magnitude", "dB"),
                                       streams=[self.pipe])
        self.phase = hv.DynamicMap(lambda data: self._curve(data, "phase_deg", "Phase", "deg"),
                                   streams=[self.detail_pipe])
        self.delay = hv.DynamicMap(lambda data: self._curve(data, "group_delay_s", "Group delay", "s"),
                                   streams=[self.detail_pipe])
        self.extra = hv.DynamicMap(self._extra, streams=[self.detail_pipe])

    @staticmethod
    def _curve(data, key: str, label: str, unit: str):
        fdim, ydim = frequency_dim(), value_dim(key, label, unit)
        if data is None:
            return hv.Curve((np.zeros(0), np.zeros(0)), fdim, ydim).opts(title=f"{label}: no filter")
        values = np.asarray(data[key], float)
        if key == "magnitude_db":
            values = np.maximum(values, -200.0)
        values = values.astype(np.float32)  # half the bytes on the wire; ample for a plot
        return hv.Curve({"frequency": data["frequency"], key: values}, fdim, ydim,
                        datatype=["dictionary"]).opts(title=f"{label} (as applied)")

    @staticmethod
    def _extra(data):
        lag = hv.Dimension("lag", label="Time after the input", unit="s")
        out = value_dim("response", "Response", None)
        if data is None or "extra" not in data:
            return hv.Curve((np.zeros(0), np.zeros(0)), lag, out).opts(title="Impulse/step response: choose one")
        extra = data["extra"]
        return hv.Curve({"lag": extra["time"], "response": extra["values"]}, lag, out,
                        datatype=["dictionary"]).opts(title=f"{extra['kind'].capitalize()} response (one pass)")

    def views(self) -> list:
        opts = hv.opts.Curve(logx=True, color=COLOURS["response"], line_width=1.5, **base_opts(height=self.height, framewise=True))
        extra_opts = hv.opts.Curve(color=COLOURS["response"], line_width=1.5, **base_opts(height=self.height, framewise=True))
        return [self.magnitude.opts(opts), self.phase.opts(opts), self.delay.opts(opts), self.extra.opts(extra_opts)]

    def send(self, response) -> None:
        """Redraw the magnitude (``None``: no filter)."""
        self.pipe.send(response)

    def send_details(self, response) -> None:
        """Redraw phase, group delay and the impulse/step response."""
        self.detail_pipe.send(response)


_REPORT_LABELS = (
    ("cutoff_hz", "Cutoff (stated)", "Hz"), ("design_cutoff_hz", "Cutoff given to the design", "Hz"),
    ("gain_at_cutoff_db", "Gain at the cutoff, as applied", "dB"), ("order", "Prototype order", ""),
    ("filter_order", "Poles", ""), ("effective_order", "Effective order", ""),
    ("settling_time_s", "Settling time (one pass)", "s"), ("stable", "Stable", ""),
    ("max_pole_radius", "Largest pole radius", ""), ("dc_gain", "DC gain", ""),
)


def report_rows(report: dict) -> list[tuple[str, str]]:
    """The design report as (label, text) rows for the card beside the filter settings."""
    rows = []
    for key, label, unit in _REPORT_LABELS:
        if key not in report:
            continue
        value = report[key]
        if isinstance(value, (list, tuple)):
            text = ", ".join(_num(v) for v in value)
        else:
            text = "yes" if value is True else "no" if value is False else _num(value)
        rows.append((label, f"{text} {unit}".strip()))
    return rows


def _num(value) -> str:
    return f"{value:.4g}" if isinstance(value, float) else str(value)
