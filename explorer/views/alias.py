"""Where a frequency lands after sampling: the folding diagram at the current rate."""

from __future__ import annotations

import holoviews as hv
import numpy as np

from .common import COLOURS, base_opts

__all__ = ["AliasPlot", "folding_line"]


def folding_line(fs: float, f_max: float) -> tuple[np.ndarray, np.ndarray]:
    """Corners of the folding line (apparent vs true frequency) from 0 to ``f_max`` Hz.

    >>> folding_line(100.0, 150.0)
    (array([  0.,  50., 100., 150.]), array([ 0., 50.,  0., 50.]))
    """
    nyquist = fs / 2.0
    n = int(np.ceil(f_max / nyquist))
    f = np.arange(n + 1) * nyquist
    apparent = np.where(np.arange(n + 1) % 2 == 0, 0.0, nyquist)
    return f, apparent


class AliasPlot:
    """Apparent frequency against true frequency for one sample rate, the chosen frequency marked."""

    def __init__(self, height: int = 260):
        self.height = height
        self.pipe = hv.streams.Pipe(data=None)
        self.dmap = hv.DynamicMap(self._render, streams=[self.pipe])

    def _render(self, data):
        true = hv.Dimension("true_frequency", label="Frequency in the signal", unit="Hz")
        seen = hv.Dimension("apparent_frequency", label="Frequency after sampling", unit="Hz")
        if data is None:
            return hv.Curve([], true, seen) * hv.Scatter([], true, seen)
        fs, f = data["fs"], data["frequency"]
        f_max = max(2.0 * fs, 1.25 * f if f else 0.0)
        x, y = folding_line(fs, f_max)
        line = hv.Curve((x, y), true, seen, label=f"fs = {fs:g} Hz").opts(color=COLOURS["processed"])
        marker = hv.Scatter(([f] if f else [], [data["apparent"]] if f else []), true, seen,
                            label="chosen").opts(color=COLOURS["error"], size=10)
        title = (f"{f:g} Hz sampled at {fs:g} Hz appears at {data['apparent']:g} Hz" if f
                 else f"Folding at fs = {fs:g} Hz (Nyquist {fs / 2:g} Hz)")
        return (line * marker).opts(title=title)

    def view(self):
        return self.dmap.opts(hv.opts.Overlay(**base_opts(height=self.height, framewise=True), legend_position="top_left"),
                              hv.opts.Curve(**base_opts(height=self.height, framewise=True)))

    def send(self, fs: float, frequency: float | None, apparent: float | None) -> None:
        self.pipe.send({"fs": fs, "frequency": frequency or 0.0, "apparent": apparent or 0.0})
