"""Reduce a long, uniformly sampled trace to what a plot of a given width can show.

The samples stay a contiguous array outside HoloViews; the time of sample
``i`` is ``t0 + i / fs``, so the visible window is found by arithmetic on the
index instead of by searching a stored time array. Decimation calls
tsdownsample directly (min-max keeps every peak; min-max-LTTB keeps the
shape and, by pre-selecting extremes, nearly every peak). Analysis never
uses these reduced arrays: they are for the screen only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from tsdownsample import MinMaxDownsampler, MinMaxLTTBDownsampler

__all__ = ["DECIMATION_METHODS", "MAX_POINTS", "Reduced", "visible_slice", "reduce_trace",
           "reduce_xy", "reduce_log", "points_for_width"]

DECIMATION_METHODS = ("minmax", "minmax-lttb")
MAX_POINTS = 10_000  # no trace sends more than this many points to the browser
_DOWNSAMPLERS = {"minmax": MinMaxDownsampler(), "minmax-lttb": MinMaxLTTBDownsampler()}


@dataclass(frozen=True)
class Reduced:
    """A trace ready for a plot: ``x`` and ``y`` arrays plus how much was dropped."""

    x: np.ndarray
    y: np.ndarray
    n_visible: int  # samples inside the window before reduction

    @property
    def reduced(self) -> bool:
        """True when fewer points are drawn than there are samples in the window."""
        return self.x.size < self.n_visible


def points_for_width(width_px: int | None) -> int:
    """Points worth sending for a plot ``width_px`` wide: two per pixel (a min and a max).

    >>> points_for_width(800), points_for_width(None), points_for_width(10**6)
    (1600, 2000, 10000)
    """
    width = 1000 if not width_px or width_px <= 0 else int(width_px)
    return int(min(MAX_POINTS, max(200, 2 * width)))


def visible_slice(n_samples: int, fs: float, t0: float, x_range=None) -> slice:
    """Index range of the samples inside ``x_range`` (s), one sample of margin each side.

    >>> visible_slice(1000, 100.0, 0.0, (1.0, 2.0))
    slice(99, 202, None)
    >>> visible_slice(1000, 100.0, 0.0, None)
    slice(0, 1000, None)
    """
    if x_range is None or x_range[0] is None or x_range[1] is None:
        return slice(0, n_samples)
    lo, hi = sorted(float(v) for v in x_range)
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return slice(0, n_samples)
    i0 = max(0, math.floor((lo - t0) * fs) - 1)
    i1 = min(n_samples, math.ceil((hi - t0) * fs) + 2)
    return slice(min(i0, n_samples), max(i1, min(i0, n_samples)))


def reduce_trace(data: np.ndarray, fs: float, t0: float = 0.0, x_range=None, n_out: int = 2000,
                 method: str = "minmax") -> Reduced:
    """Return the samples of ``data`` inside ``x_range`` reduced to about ``n_out`` points.

    Parameters
    ----------
    data : ndarray
        Samples, uniformly spaced at ``fs`` Hz, first one at ``t0`` s.
    x_range : (float, float), optional
        Visible window in s; default the whole record.
    n_out : int
        Points wanted (capped at :data:`MAX_POINTS`).
    method : {"minmax", "minmax-lttb"}

    Examples
    --------
    >>> x = np.sin(np.linspace(0, 100, 1_000_000))
    >>> r = reduce_trace(x, fs=1000.0, n_out=2000)
    >>> r.x.size <= 2000, r.reduced, bool(r.y.max() == np.float32(x.max()))
    (True, True, True)
    """
    window = visible_slice(data.shape[0], fs, t0, x_range)
    part = data[window]
    n_out = int(min(max(n_out, 4), MAX_POINTS))
    n_out -= n_out % 2  # min-max picks points in pairs
    if part.size <= n_out:
        index = np.arange(part.size, dtype=np.int64)
    else:
        part = np.ascontiguousarray(part)
        # tsdownsample returns uint64: cast before arithmetic, or index offsets wrap
        index = _DOWNSAMPLERS[method].downsample(part, n_out=n_out).astype(np.int64)
    y = part[index]
    x = t0 + (index + window.start) / fs
    # float32 halves what goes over the wire; the time axis keeps float64 (absolute times need it)
    return Reduced(x=x, y=np.asarray(y, dtype=np.float32), n_visible=int(part.size))


def reduce_xy(x: np.ndarray, y: np.ndarray, n_out: int = 4000) -> tuple[np.ndarray, np.ndarray]:
    """Reduce a non-uniform curve (a spectrum) to about ``n_out`` points keeping its peaks.

    >>> f = np.linspace(0, 500, 50_001); p = np.ones_like(f); p[1234] = 9.0
    >>> fx, py = reduce_xy(f, p, 1000)
    >>> fx.size <= 1000, float(py.max())
    (True, 9.0)
    """
    if x.size <= n_out:
        return x, y
    n_out -= n_out % 2
    index = MinMaxDownsampler().downsample(np.ascontiguousarray(y), n_out=n_out).astype(np.int64)
    return x[index], y[index]


def reduce_log(f: np.ndarray, y: np.ndarray, n_out: int = 1500) -> tuple[np.ndarray, np.ndarray]:
    """Reduce a spectrum for a log-frequency axis: min and max of each log-spaced bin.

    Uniform bins (as in :func:`reduce_xy`) would squeeze the low frequencies,
    which a log axis spreads out, into a handful of points. Bins holding one
    or two points keep them all. ``f`` must be increasing and positive.

    >>> f = np.linspace(0.1, 1000.0, 100_000); y = np.ones_like(f); y[5] = 7.0
    >>> fx, yx = reduce_log(f, y, 1000)
    >>> fx.size <= 1000, float(yx.max()), bool(np.all(np.diff(fx) > 0))
    (True, 7.0, True)
    """
    if f.size <= n_out:
        return f, y
    edges = np.geomspace(f[0], f[-1], n_out // 2 + 1)
    starts = np.unique(np.searchsorted(f, edges[:-1], side="left"))
    stops = np.append(starts[1:], f.size)
    keep = []
    for start, stop in zip(starts.tolist(), stops.tolist()):
        if stop - start <= 2:
            keep.extend(range(start, stop))
        else:
            part = y[start:stop]
            lo, hi = start + int(np.argmin(part)), start + int(np.argmax(part))
            keep.extend(sorted({lo, hi}))
    index = np.asarray(keep, dtype=np.int64)
    return f[index], y[index]
