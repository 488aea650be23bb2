"""Shared look of the explorer's plots: colours, tools, dimensions with units."""

from __future__ import annotations

import holoviews as hv

if "bokeh" not in hv.Store.renderers:  # the plot options below are Bokeh's
    hv.extension("bokeh", logo=False)

__all__ = ["COLOURS", "METHOD_COLOURS", "TIME_TOOLS", "time_dim", "frequency_dim", "value_dim",
           "base_opts", "fmt_count"]

COLOURS = {"raw": "#9aa3ad", "processed": "#1d5a9e", "preview": "#1d5a9e", "response": "#c4561d",
           "zone": "#f2c14e", "warning": "#e8a33d", "error": "#c23b3b", "info": "#5d8fc9"}
METHOD_COLOURS = {"time": "#1d5a9e", "frequency": "#2e8b57", "baseline": "#b04a8c"}
# x-wheel zoom must be a *default* tool to be the active one (setting only tools/active_tools
# leaves the 2-D wheel zoom active).
TIME_TOOLS = ["xpan", "xwheel_zoom", "box_zoom", "reset", "save"]


def time_dim() -> hv.Dimension:
    """The time axis every time plot shares (axes link by this name)."""
    return hv.Dimension("time", label="Time", unit="s")


def frequency_dim() -> hv.Dimension:
    """The frequency axis shared by spectra and the filter response."""
    return hv.Dimension("frequency", label="Frequency", unit="Hz")


def value_dim(name: str, label: str, unit: str | None) -> hv.Dimension:
    """A y dimension; each independent quantity gets its own name so y axes do not link."""
    return hv.Dimension(name, label=label, unit=unit or None)


def base_opts(**overrides) -> dict:
    """Options every explorer plot uses."""
    opts = dict(responsive=True, height=300, show_grid=True, toolbar="above", fontscale=0.95)
    opts.update(overrides)
    return opts


def fmt_count(n: int) -> str:
    """Thousands-separated count: ``fmt_count(1234567) == '1,234,567'``."""
    return f"{int(n):,}"
