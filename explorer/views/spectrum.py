"""Spectrum of the raw and processed signal, with the filter's effective gain on a second axis."""

from __future__ import annotations

from dataclasses import dataclass, field

import holoviews as hv
import numpy as np

from ..decimate import reduce_log
from .common import COLOURS, base_opts, frequency_dim, value_dim

__all__ = ["SpectrumData", "SpectrumPlot", "BandPlot", "positive_log_values"]

SPECTRUM_POINTS = 1500  # per curve on a log axis; float32 on the wire
_SCALING_LABELS = {"psd": "PSD", "asd": "ASD", "rms": "RMS spectrum", "peak": "Peak spectrum"}


@dataclass
class SpectrumData:
    """Curves for the spectrum plot: (frequency Hz, value) pairs; ``gain_db`` on its own axis."""

    raw: tuple | None = None
    processed: tuple | None = None
    preview: bool = False
    gain_db: tuple | None = None
    unit: str = ""
    scaling: str = "psd"
    notes: tuple = field(default_factory=tuple)


def positive_log_values(f, values, n_out: int = SPECTRUM_POINTS):
    """Drop the 0 Hz bin and floor the values so a log-log plot can draw them, then reduce."""
    f = np.asarray(f, float)
    v = np.asarray(values, float)
    keep = f > 0
    f, v = f[keep], v[keep]
    top = float(np.nanmax(v)) if v.size else 1.0
    floor = top * 1e-16 if top > 0 else 1e-30  # a filter can remove a band to numerical zero
    f, v = reduce_log(f, np.maximum(v, floor), n_out)
    return f.astype(np.float32), v.astype(np.float32)


def level_limits(pair, decades: float = 9.0):
    """Fixed log-axis limits from the raw spectrum: its peak x 3 down to ``decades`` below it (or its floor).

    A log axis cannot follow the data (no autorange) and would fall back to a
    lower bound of 0.01 when a layer touches zero; the raw spectrum bounds what
    any filtered version of it shows, so the axis stays put while filters change.

    >>> level_limits((np.array([0.0, 1.0, 2.0]), np.array([5.0, 1e-3, 2.0])))
    (0.0005, 6.0)
    """
    if pair is None:
        return None
    f, v = np.asarray(pair[0], float), np.asarray(pair[1], float)
    v = v[(f > 0) & np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return None
    top = float(v.max())
    return max(float(v.min()) / 2, top * 10.0 ** -decades), top * 3


class SpectrumPlot:
    """Raw and processed spectra on a log-log axis; the filter's effective gain (dB) on a second axis."""

    def __init__(self, height: int = 340):
        self.height = height
        self.last_points = 0
        self.rebuild(SpectrumData())

    def rebuild(self, data: SpectrumData) -> hv.DynamicMap:
        """Fresh stream and DynamicMap drawn first with ``data`` (when the frequency span changes)."""
        self.pipe = hv.streams.Pipe(data=data)
        self.dmap = hv.DynamicMap(self._render, streams=[self.pipe])
        return self.view()

    def _render(self, data: SpectrumData):
        # The gain comes first: the overlay takes its (linear) y scale from its first layer, and
        # the spectra then get their own log axis (a log scale for dB would hide the stop band).
        fdim = frequency_dim()
        level = value_dim("level", _SCALING_LABELS.get(data.scaling, "Level"), data.unit)
        gain = value_dim("gain", "Filter gain (as applied)", "dB")
        points = 0
        if data.gain_db is None:
            layers = [hv.Curve((np.zeros(0), np.zeros(0)), fdim, gain, label="filter gain")]
        else:
            f, g = data.gain_db
            points += len(f)
            layers = [hv.Curve({"frequency": f, "gain": np.maximum(g, -160.0)}, fdim, gain, label="filter gain",
                               datatype=["dictionary"]).opts(color=COLOURS["response"], line_width=1.6, alpha=0.9)]
        layers[0] = layers[0].opts(yaxis="right", logy=False)
        ylim = level_limits(data.raw or data.processed)
        for name, pair, colour in (("raw", data.raw, COLOURS["raw"]),
                                   ("processed", data.processed, COLOURS["processed"])):
            if pair is None:
                curve = hv.Curve((np.zeros(0), np.zeros(0)), fdim, level, label=name)
            else:
                f, v = positive_log_values(*pair)
                points += f.size
                curve = hv.Curve({"frequency": f, "level": v}, fdim, level, label=name, datatype=["dictionary"])
                dash = "dashed" if name == "processed" and data.preview else "solid"
                curve = curve.opts(color=colour, line_dash=dash, line_width=1.4)
            layers.append(curve.opts(logy=True, yaxis="left", **({"ylim": ylim} if ylim else {})))
        self.last_points = points
        note = " · processed: preview (raw × |H|²), refining…" if data.preview else ""
        return hv.Overlay(layers).opts(title="Spectrum: raw, processed and the filter's gain" + note)

    def view(self) -> hv.DynamicMap:
        return self.dmap.opts(
            hv.opts.Curve(logx=True, **base_opts(height=self.height)),
            hv.opts.Overlay(multi_y=True, logx=True, legend_position="bottom_left",
                            click_policy="hide", **base_opts(height=self.height)))

    def send(self, data: SpectrumData) -> None:
        self.pipe.send(data)

    @property
    def data(self) -> SpectrumData:
        return self.pipe.data


class BandPlot:
    """Octave or one-third-octave band RMS as bars spanning each band's edges on a log frequency axis."""

    def __init__(self, height: int = 260):
        self.height = height
        self.pipe = hv.streams.Pipe(data=None)
        self.dmap = hv.DynamicMap(self._render, streams=[self.pipe])

    def _render(self, data):
        band = hv.Dimension("band_frequency", label="Band", unit="Hz")
        rms = value_dim("band_rms", "Band RMS", getattr(data, "unit", ""))
        if data is None or len(data.values) == 0:
            return hv.Histogram((np.array([1.0, 10.0]), np.zeros(1)), kdims=[band], vdims=[rms]).opts(title="Band levels: none")
        edges = np.append(np.asarray(data.lower_edges, float), float(data.upper_edges[-1]))
        title = f"{'Octave' if data.fraction == 1 else 'One-third octave'} band RMS " \
                f"(total {data.total_rms:.4g} {data.unit})"
        return hv.Histogram((edges, np.asarray(data.values, float)), kdims=[band], vdims=[rms]).opts(title=title)

    def view(self) -> hv.DynamicMap:
        return self.dmap.opts(hv.opts.Histogram(color=COLOURS["processed"], line_color="white", logx=True,
                                                tools=["hover"], **base_opts(height=self.height, framewise=True)))

    def send(self, bands) -> None:
        self.pipe.send(bands)
