"""The explorer page: one scrolling column of cards in working order.

Source -> Quality -> Conditioning -> Motion -> Spectrum -> Evaluation -> Export.
Each card has its settings on the left and its plots on the right. The
settings edit :class:`~explorer.state.BenchState` (through
:class:`~explorer.controls.Binder`); every change queues a pipeline run on
the session's worker thread (:class:`~explorer.runner.Runner`); the results
come back to :meth:`ExplorerPage.show`, which pushes new data into the
plots' streams inside one ``pn.io.hold()`` so the browser gets one message.
Only the views whose data changed are sent.
"""

from __future__ import annotations

import contextlib
import html
import io
import json
import math

import numpy as np
import panel as pn

import dsp
from dsp import SigtuneError

from . import exports
from .controls import Binder
from .runner import Runner
from .stages import FAST_STAGES, Results
from .state import INTEGRATION_METHODS, SENSITIVITY_UNITS, BenchState
from .views.alias import AliasPlot
from .views.common import COLOURS, fmt_count
from .views.motion import MotionPlot, motion_traces
from .views.response import ResponsePlot, report_rows
from .views.spectrum import BandPlot, SpectrumData, SpectrumPlot
from .views.tables import html_table, key_value_table
from .views.time import Trace, TraceData, TracePlot

__all__ = ["ExplorerPage", "CSS"]

_ALL_GROUPS = ("source", "setup", "crop", "filter", "resample", "conditioning", "spectrum", "bands", "motion",
               "quality", "advice", "evaluation")
# The stage whose presence in a partial result settles a group's message (default: the conditioned channel).
_GROUP_STAGES = {"source": "source", "setup": "channel", "spectrum": "spectrum", "bands": "bands",
                 "motion": "motion", "quality": "quality", "advice": "advice", "evaluation": "summary"}

CSS = """
.st-header h1 {font-size: 1.45em; margin: 0 0 2px 0; color: #1b2a3a;}
.st-header .st-sub {color: #4a5866; font-size: 0.95em;}
.st-error {background: #fdecec; border-left: 4px solid #c23b3b; color: #7a1f1f; padding: 6px 8px;
           font-size: 0.9em; border-radius: 3px;}
.st-caution {background: #fff6e0; border-left: 4px solid #e8a33d; color: #5e4300; padding: 6px 8px;
             font-size: 0.88em; border-radius: 3px; margin: 4px 0;}
.st-note {color: #4a5866; font-size: 0.88em;}
.st-muted {color: #7a8794; font-size: 0.9em; margin: 2px 0;}
table.st-table {border-collapse: collapse; font-size: 0.86em; width: 100%;}
table.st-table th, table.st-table td {border-bottom: 1px solid #e3e7eb; padding: 3px 6px; text-align: left;
                                      vertical-align: top;}
table.st-table th {color: #33414f; background: #f4f6f8;}
table.st-kv th {width: 55%; font-weight: 500;}
.st-sev-error {color: #a32020; font-weight: 600;} .st-sev-warning {color: #9a5b00; font-weight: 600;}
.st-status {color: #4a5866; font-size: 0.88em;}
"""


def _none_if_blank(value):
    return None if value is None or (isinstance(value, float) and math.isnan(value)) else value


class ExplorerPage:
    """The page of one browser session (or one notebook cell).

    Parameters
    ----------
    state : BenchState
    doc : bokeh Document, optional
        The session's document: runs go to a worker thread and come back on
        its event loop. None (a script, a test, a notebook) runs synchronously.
    upload_dir : Path, optional
        Private folder for this session's uploads (removed when it closes).
    data_root : Path, optional
        The data folder: paths typed on the page, and the recording a loaded
        session names, must lie inside it (see :mod:`explorer.exports`).
        None (a notebook): paths are taken as given.
    """

    def __init__(self, state: BenchState, doc=None, upload_dir=None, data_root=None):
        self.state = state
        self.upload_dir = upload_dir
        self.data_root = data_root
        self.binder = Binder(state)
        self.time_plot = TracePlot(("raw", "processed"), "signal", "Signal", "Raw and processed",
                                   method=state.decimation)
        self.motion_plot = MotionPlot(method=state.decimation)
        self.spectrum_plot = SpectrumPlot()
        self.band_plot = BandPlot()
        self.response_plot = ResponsePlot()
        self.alias_plot = AliasPlot()
        self.spinner = pn.indicators.LoadingSpinner(value=False, size=22, visible=False)
        self.status = pn.pane.HTML("", css_classes=["st-status"])
        self.dataset_line = pn.pane.HTML("", css_classes=["st-sub"], sizing_mode="stretch_width")
        self._shown: dict[str, object] = {}
        self.last_results: Results | None = None
        self.runner = Runner(self.show, self._busy, doc)
        self._spans: dict[str, object] = {}
        self.layout = self._build()
        state.param.watch(self._settings_changed, [n for n in state.snapshot() if n != "dataset_id"] +
                          ["dataset_id"])
        # The fast stages run here, synchronously, so the plots are first drawn with data (their ranges
        # come from the first frame); the rest follows on the worker.
        self.show(state.pipeline.run(state.snapshot(), stages=FAST_STAGES), final=False)
        if doc is None:
            self.refresh()
        else:
            # Served: the rest runs once the browser's websocket is open. Before that every plot update
            # re-queues itself on the event loop until the page connects, and a bare HTTP GET (no
            # websocket) would keep a core busy until Bokeh discards the unused session (~20 s).
            pn.state.onload(self.refresh)

    # ---- running ----
    def refresh(self) -> int:
        """Queue a run on the current settings; return its generation."""
        snap = self.state.snapshot()
        pipeline = self.state.pipeline
        return self.runner.submit(lambda **kw: pipeline.run(snap, **kw))

    def _settings_changed(self, *events) -> None:
        names = {e.name for e in events}
        if "decimation" in names:
            self.time_plot.method = self.motion_plot.method = self.state.decimation
            self._shown.pop("time", None)
            self._shown.pop("motion", None)
        if "dataset_id" in names or "channel" in names:
            self._sync_channel_widgets()
        self.refresh()

    def _busy(self, on: bool) -> None:
        self.spinner.value = on
        self.spinner.visible = on
        if on:
            self.status.object = "computing…"

    # ---- results to the screen ----
    def show(self, res: Results, final: bool) -> None:
        """Put the results of a run on screen (views whose data did not change are not sent).

        Partial results (``final=False``) show what they hold; a message line
        is cleared only once the stages behind it have run.
        """
        # the first delivery of a change carries only what a user tuning a filter watches
        details = final or "spectrum" in res or self.last_results is None
        self.last_results = res
        # One freeze around every plot update: Bokeh re-walks the whole document's models each time
        # the outermost freeze ends, and each plot update would otherwise end one of its own.
        doc = self.runner.doc
        with pn.io.hold(), (doc.models.freeze() if doc is not None else contextlib.nullcontext()):
            for group in _ALL_GROUPS:
                if final or group in res.errors or _GROUP_STAGES.get(group, "conditioned") in res:
                    self.binder.message(group).show(res.errors.get(group))
            if "channel" in res:
                self._show_dataset(res)
            if "conditioned" in res:
                self._show_time(res)
                self._show_conditioning(res, details)
            self._show_spectrum(res)
            self._show_quality(res)
            self._show_bands(res)
            self._show_advice(res)
            self._show_motion(res)
            self._show_summary(res)
            if final:
                took = sum(res.seconds.values())
                self.status.object = (f"updated: {', '.join(sorted(res.recomputed)) or 'nothing to recompute'}"
                                      f" ({took * 1000:.0f} ms of computing)")

    def _changed(self, view: str, *objects) -> bool:
        """True (and remembered) if ``view``'s inputs are not the ones last sent."""
        ident = tuple(id(o) for o in objects)
        if self._shown.get(view) == ident:
            return False
        self._shown[view] = ident
        return True

    def _show_dataset(self, res: Results) -> None:
        ch = res["channel"]
        source = self.state.file_path or f"demo recording '{self.state.demo_scenario}'"
        self.dataset_line.object = (f"{html.escape(source)} · channel <b>{html.escape(ch.name)}</b> · "
                                    f"{ch.fs:g} Hz · {fmt_count(ch.n_samples)} samples · {ch.duration:g} s · "
                                    f"{html.escape(ch.unit)} ({ch.quantity})")

    def _show_time(self, res: Results) -> None:
        raw, processed = res["channel"], res["conditioned"]
        quality = res.get("quality") or self._last("quality")
        if not self._changed("time", raw, processed, quality):
            return
        marks = []
        if quality is not None:
            marks = [(raw.start_time + f.start / raw.fs, raw.start_time + f.stop / raw.fs)
                     for f in quality.findings if f.severity in ("warning", "error") and f.stop > f.start]
        data = TraceData(traces={"raw": Trace("raw", raw.data, raw.fs, raw.start_time, COLOURS["raw"], 1.0, 0.9),
                                 "processed": Trace("processed", processed.data, processed.fs,
                                                    processed.start_time, COLOURS["processed"], 1.3)},
                         zones=dsp.edge_zones(processed), marks=marks, unit=processed.unit)
        self._send(self.time_plot, self.time_pane, data, span=(raw.start_time, raw.duration, raw.fs))

    def _send(self, plot, pane, data, span) -> None:
        """Update ``plot`` in place, or redraw it when its axis span changed (ranges follow the first frame)."""
        if self._spans.get(id(plot)) == span:
            plot.send(data)
            return
        self._spans[id(plot)] = span
        pane.object = plot.rebuild(data)

    def _last(self, stage: str):
        return None if self.last_results is None else self.last_results.get(stage)

    def _show_conditioning(self, res: Results, details: bool) -> None:
        """The filter's magnitude at once; its phase, delay, report and the alias view when ``details``."""
        response = res.get("response") if res.get("filter") is not None else None
        if "filter" in res and self._changed("response", response):
            self.response_plot.send(response)
        if not details:
            return
        if "filter" in res and self._changed("response_details", response):
            self.response_plot.send_details(response)
            self.report.object = ('<p class="st-muted">No filter.</p>' if response is None
                                  else key_value_table(report_rows(response["report"])))
        self._show_alias(res["channel"].fs, res["conditioned"].fs)

    def _show_alias(self, fs_in: float, fs_out: float) -> None:
        f = self.state.alias_frequency
        key = (fs_in, fs_out, f)
        if self._shown.get("alias") == key:
            return
        self._shown["alias"] = key
        try:
            seen_in = dsp.alias_frequency(f, fs_in) if f else None
            seen_out = dsp.alias_frequency(f, fs_out) if f else None
        except SigtuneError as err:
            self.binder.message("resample").show(str(err))
            return
        self.alias_plot.send(fs_out, f, seen_out)
        lines = [f"Sampling at {fs_out:g} Hz folds everything above {fs_out / 2:g} Hz back below it."]
        if f:
            lines.append(f"{f:g} Hz appears at {float(seen_in):g} Hz at the recorded rate ({fs_in:g} Hz)"
                         + (f" and at {float(seen_out):g} Hz after resampling to {fs_out:g} Hz." if fs_out != fs_in
                            else "."))
        self.alias_text.object = "".join(f'<p class="st-note">{html.escape(t)}</p>' for t in lines)

    def _show_spectrum(self, res: Results) -> None:
        raw = res.get("raw_spectrum")
        processed = res.get("spectrum")
        preview = res.get("preview") if processed is None else None
        if raw is None and processed is None and preview is None:
            return
        response = res.get("response") if res.get("filter") is not None else None
        if not self._changed("spectrum", raw, processed, preview, response):
            return
        gain = None if response is None else (response["frequency"].astype(np.float32),
                                              response["magnitude_db"].astype(np.float32))
        if processed is not None:
            pair, is_preview = (processed.frequencies, processed.values), False
        elif preview is not None:
            pair, is_preview = (preview["frequencies"], preview["values"]), True
        else:
            pair, is_preview = None, False
        spec = processed or raw
        data = SpectrumData(raw=None if raw is None else (raw.frequencies, raw.values), processed=pair,
                            preview=is_preview, gain_db=gain, unit=spec.unit if spec else "",
                            scaling=spec.scaling if spec else "psd")
        nyquists = tuple(float(p[0][-1]) for p in (data.raw, data.processed) if p is not None)
        self._send(self.spectrum_plot, self.spectrum_pane, data, span=(nyquists, data.scaling, data.unit))
        if spec is not None:
            settings = spec.settings
            facts = [("Window", settings.get("window")), ("Segment (samples)", settings.get("nperseg")),
                     ("Resolution (Hz)", settings.get("resolution_hz")), ("Averages", settings.get("n_averages")),
                     ("Overlap", settings.get("overlap"))]
            notes = "".join(f'<p class="st-note">{html.escape(n)}</p>' for n in spec.notes)
            self.spectrum_facts.object = key_value_table(facts) + notes

    def _show_bands(self, res: Results) -> None:
        if "bands" in res and self._changed("bands", res["bands"]):
            self.band_plot.send(res["bands"])

    def _show_quality(self, res: Results) -> None:
        report = res.get("quality")
        if report is None or not self._changed("quality", report):
            return
        ch = res["channel"]
        rows = [{"kind": f.kind, "severity": f.severity, "from (s)": ch.start_time + f.start / ch.fs,
                 "to (s)": ch.start_time + f.stop / ch.fs, "what was found": f.message, "what to do": f.advice}
                for f in report.findings]
        counts = {}
        for f in report.findings:
            counts[(f.kind, f.severity)] = counts.get((f.kind, f.severity), 0) + 1
        tally = ", ".join(f'<span class="st-sev-{sev}">{n} × {html.escape(kind)}</span>'
                          for (kind, sev), n in counts.items())
        self.findings.object = (f'<p class="st-note">{len(rows)} finding(s): {tally or "none"}. Valid duration '
                                f'{report.valid_duration_s:g} s of {ch.duration:g} s. Warnings and errors are '
                                f'shaded red on the time plot.</p>' + html_table(rows))
        stats = report.stats
        keys = [k for k in ("mean", "rms", "peak", "crest_factor", "std", "min", "max", "kurtosis", "skewness")
                if k in stats]
        self.quality_stats.object = key_value_table([(k.replace("_", " "), stats[k]) for k in keys])
        self._show_time(res)

    def _show_motion(self, res: Results) -> None:
        comparison = res.get("motion")
        if comparison is None or not self._changed("motion", comparison):
            return
        processed = res["conditioned"]
        self._send(self.motion_plot, self.motion_pane, motion_traces(comparison),
                   span=(processed.start_time, processed.duration, comparison.unit))
        notes = "".join(f'<p class="st-note">{html.escape(str(n))}</p>' for n in comparison.notes)
        self.motion_table.object = (f'<p class="st-note">{html.escape(comparison.target)} in '
                                    f'{html.escape(comparison.unit)}, integrated from {comparison.f_low:g} Hz</p>'
                                    + html_table(comparison.rows) + notes)

    def _show_advice(self, res: Results) -> None:
        advisories = res.get("advice")
        if advisories is None or not self._changed("advice", advisories):
            return
        rows = [a.to_dict() for a in advisories]
        self.advice.object = html_table(rows, [c for c in ("severity", "seen", "action") if rows and c in rows[0]]) \
            if rows else '<p class="st-muted">No common mistakes spotted in these settings.</p>'

    def _show_summary(self, res: Results) -> None:
        summary = res.get("summary")
        if summary is None or not self._changed("summary", summary):
            return
        figures = [("RMS", summary.get("rms")), ("Peak", summary.get("peak")),
                   ("Crest factor", summary.get("crest_factor")), ("Mean", summary.get("mean")),
                   ("Valid duration (s)", summary.get("valid_duration_s")), ("Unit", summary.get("unit"))]
        peaks = summary.get("peaks") or []
        peak_rows = [{k: p.get(k) for k in list(p)[:3]} for p in peaks]
        self.summary_figures.object = key_value_table(figures) + (html_table(peak_rows) if peak_rows else "")
        self.evaluation_result.object = evaluation_html(summary.get("evaluation"))

    # ---- layout ----
    def _build(self):
        header = pn.Row(
            pn.pane.HTML('<div class="st-header"><h1>sigtune explorer</h1></div>', margin=(4, 10)),
            self.spinner, self.status, sizing_mode="stretch_width")
        cards = [self._source_card(), self._quality_card(), self._conditioning_card(), self._motion_card(),
                 self._spectrum_card(), self._evaluation_card(), self._export_card()]
        return pn.Column(header, self.dataset_line, *cards, sizing_mode="stretch_width",
                         styles={"max-width": "1500px", "margin": "0 auto"})

    @staticmethod
    def _card(title: str, settings: list, plots: list, collapsed: bool = False):
        left = pn.Column(*settings, width=330, margin=(0, 12, 0, 0))
        right = pn.Column(*plots, sizing_mode="stretch_width")
        return pn.Card(pn.Row(left, right, sizing_mode="stretch_width"), title=title, collapsed=collapsed,
                       sizing_mode="stretch_width", margin=(6, 4), header_background="#eef2f6")

    def _hv(self, obj, height=None):
        return pn.pane.HoloViews(obj, sizing_mode="stretch_width", linked_axes=True,
                                 **({"height": height} if height else {}))

    def _source_card(self):
        b, s = self.binder, self.state
        self.path_input = pn.widgets.TextInput(label="Recording file on this computer", value=s.file_path,
                                               placeholder="path/to/recording.h5 (empty: the demo)")
        open_button = pn.widgets.Button(label="Open", color="primary", width=80)
        open_button.on_click(lambda _e: self.open_path(self.path_input.value))
        demo_button = pn.widgets.Button(label="Demo recording", width=130)
        demo_button.on_click(lambda _e: self.open_path(""))
        self.upload = pn.widgets.FileDropper(
            label="Upload", max_file_size=f"{exports.MAX_UPLOAD_MB}MB", multiple=False,
            accepted_filetypes=[".csv", ".tsv", ".wav", ".h5", ".hdf5", ".npz"], height=90)
        self.upload.param.watch(self._uploaded, "value")
        self.channel_select = pn.widgets.Select(label="Channel", options=list(s.param.channel.objects))
        b.bind("channel", self.channel_select, "source")
        folder = ("" if self.data_root is None else
                  f' Paths are inside the data folder <code>{html.escape(str(self.data_root))}</code>.')
        settings = [
            pn.pane.HTML('<p class="st-note">Open a recording by path (fast: read on the server) or upload a '
                         f'small one (up to {exports.MAX_UPLOAD_MB} MB).{folder}</p>'),
            self.path_input, pn.Row(open_button, demo_button), self.upload, b.message("source").pane,
            self.channel_select,
            b.bind("unit", pn.widgets.Select(label="Unit of the samples", options=list(s.param.unit.objects)),
                   "setup"),
            b.bind("quantity", pn.widgets.Select(label="Quantity", options=list(s.param.quantity.objects)), "setup"),
            pn.Row(b.bind("sensitivity", pn.widgets.FloatInput(label="Sensitivity (voltage channel)", width=160,
                                                               placeholder="none"), "setup",
                          to_state=_none_if_blank),
                   b.bind("sensitivity_unit", pn.widgets.Select(label="per", options=list(SENSITIVITY_UNITS),
                                                                width=130), "setup")),
            b.message("setup").pane,
            pn.Row(b.bind("crop_start_s", pn.widgets.FloatInput(label="Crop from (s)", width=140, start=0), "crop"),
                   b.bind("crop_end_s", pn.widgets.FloatInput(label="to (s)", width=140, placeholder="end"), "crop",
                          to_state=_none_if_blank)),
            b.bind("detrend", pn.widgets.Select(label="Remove", options={"nothing": "none", "the mean": "constant",
                                                                        "a straight line": "linear"}), "crop"),
            b.message("crop").pane,
            b.bind("decimation", pn.widgets.RadioButtonGroup(
                label="Display reduction", options={"min-max": "minmax", "min-max + LTTB": "minmax-lttb"}), "view"),
        ]
        self.time_pane = self._hv(self.time_plot.view())
        plots = [self.time_pane,
                 pn.pane.HTML('<p class="st-note">Wheel zooms the time axis; every time plot follows. Yellow: '
                              'filter edge zones (left out of statistics and spectra); red: quality findings.</p>')]
        return self._card("1 · Source", settings, plots)

    def _quality_card(self):
        self.findings = pn.pane.HTML("", sizing_mode="stretch_width",
                                     styles={"max-height": "340px", "overflow-y": "auto"})
        self.quality_stats = pn.pane.HTML("")
        full_scale = self.binder.bind("full_scale", pn.widgets.FloatInput(label="Full scale (peak, channel unit)",
                                                                           placeholder="unknown"), "quality",
                                      to_state=_none_if_blank)
        settings = [full_scale, self.binder.message("quality").pane, self.quality_stats]
        return self._card("2 · Quality", settings, [self.findings])

    def _conditioning_card(self):
        b, s = self.binder, self.state
        self.report = pn.pane.HTML("")
        self.advice = pn.pane.HTML("")
        self.alias_text = pn.pane.HTML("")
        nyquist = s.source_channel.nyquist
        self.cutoff_slider = pn.widgets.FloatSlider(label="Cutoff (Hz)", start=0.0, end=nyquist,
                                                    step=nyquist / 1000, value=s.cutoff)
        b.bind("cutoff", self.cutoff_slider, "filter", throttled=True,
               to_widget=lambda v: min(v, self.cutoff_slider.end))
        settings = [
            b.bind("filter_band", pn.widgets.Select(label="Filter", options={
                "none": "none", "low-pass": "lowpass", "high-pass": "highpass", "band-pass": "bandpass",
                "band-stop": "bandstop"}), "filter"),
            b.bind("filter_family", pn.widgets.Select(label="Family", options=list(s.param.filter_family.objects)),
                   "filter"),
            b.bind("filter_order", pn.widgets.IntSlider(label="Order", start=1, end=16), "filter", throttled=True),
            b.bind("cutoff", pn.widgets.FloatInput(label="Cutoff (Hz; band filters: low edge)"), "filter"),
            self.cutoff_slider,
            b.bind("cutoff_high", pn.widgets.FloatInput(label="High edge (Hz, band filters)"), "filter"),
            pn.Row(b.bind("ripple_db", pn.widgets.FloatInput(label="Ripple (dB)", width=140), "filter"),
                   b.bind("attenuation_db", pn.widgets.FloatInput(label="Attenuation (dB)", width=140), "filter")),
            b.bind("zero_phase", pn.widgets.Checkbox(label="Zero-phase (forward-backward)"), "filter"),
            b.bind("cutoff_mode", pn.widgets.Select(label="Cutoff means", options={
                "the design's edge": "design", "-3 dB as applied": "effective"}), "filter"),
            b.message("filter").pane,
            pn.pane.HTML("<b>Design report</b>"), self.report,
            b.bind("resample_by", pn.widgets.RadioButtonGroup(label="Resample", options={
                "no resampling": "none", "to a rate": "rate", "by a ratio": "ratio"}), "resample"),
            pn.Row(b.bind("resample_fs", pn.widgets.FloatInput(label="Target rate (Hz)", width=140), "resample",
                          to_state=_none_if_blank),
                   b.bind("resample_ratio", pn.widgets.FloatInput(label="Ratio (out/in)", width=140), "resample",
                          to_state=_none_if_blank)),
            b.message("resample").pane,
            pn.pane.HTML("<b>Advice</b>"), self.advice, b.message("advice").pane,
        ]
        response_views = self.response_plot.views()
        plots = [pn.Row(self._hv(response_views[0]), self._hv(response_views[1]), sizing_mode="stretch_width"),
                 pn.Row(self._hv(response_views[2]), self._hv(response_views[3]), sizing_mode="stretch_width"),
                 b.bind("response_extra", pn.widgets.RadioButtonGroup(label="Also show", options={
                     "no time response": "none", "impulse response": "impulse", "step response": "step"}), "filter"),
                 pn.pane.HTML("<b>Aliasing</b>"),
                 b.bind("alias_frequency", pn.widgets.FloatInput(label="Follow a frequency (Hz)", width=200,
                                                                 placeholder="e.g. 1200"), "resample",
                        to_state=_none_if_blank),
                 self.alias_text, self._hv(self.alias_plot.view())]
        return self._card("3 · Conditioning", settings, plots)

    def _motion_card(self):
        b = self.binder
        self.motion_table = pn.pane.HTML("", sizing_mode="stretch_width")
        settings = [
            b.bind("motion_target", pn.widgets.RadioButtonGroup(label="Integrate to",
                                                                options=["velocity", "displacement"]), "motion"),
            b.bind("motion_methods", pn.widgets.CheckButtonGroup(label="Methods", options=list(INTEGRATION_METHODS)),
                   "motion"),
            b.bind("motion_f_low", pn.widgets.FloatInput(label="Lowest frequency kept (Hz)", placeholder="auto"),
                   "motion", to_state=_none_if_blank),
            b.message("motion").pane,
            pn.pane.HTML('<p class="st-note">time: cumulative trapezoid after a high-pass; frequency: division '
                         'by j2πf; baseline: trapezoid with a fitted trend removed. The table gives each '
                         'method\'s metrics.</p>'),
        ]
        self.motion_pane = self._hv(self.motion_plot.view())
        return self._card("4 · Motion", settings, [self.motion_pane, self.motion_table])

    def _spectrum_card(self):
        b, s = self.binder, self.state
        self.spectrum_facts = pn.pane.HTML("")
        settings = [
            b.bind("scaling", pn.widgets.Select(label="Scaling", options={
                "power spectral density": "psd", "amplitude spectral density": "asd",
                "RMS spectrum": "linear-rms", "peak spectrum": "linear-peak"}), "spectrum"),
            b.bind("spectrum_window", pn.widgets.Select(label="Window", options=list(s.param.spectrum_window.objects)),
                   "spectrum"),
            b.bind("segment_s", pn.widgets.FloatInput(label="Segment (s)", placeholder="auto"), "spectrum",
                   to_state=_none_if_blank),
            b.bind("overlap", pn.widgets.FloatSlider(label="Overlap", start=0.0, end=0.95, step=0.05), "spectrum",
                   throttled=True),
            b.bind("averaging", pn.widgets.RadioButtonGroup(label="Averaging", options={"mean": "mean",
                                                                                       "peak hold": "peak"}),
                   "spectrum"),
            b.bind("band_fraction", pn.widgets.RadioButtonGroup(label="Bands", options={
                "no bands": 0, "octave": 1, "1/3 octave": 3}), "bands"),
            b.message("spectrum").pane, b.message("bands").pane, self.spectrum_facts,
        ]
        self.spectrum_pane = self._hv(self.spectrum_plot.view())
        plots = [self.spectrum_pane, self._hv(self.band_plot.view())]
        return self._card("5 · Spectrum", settings, plots)

    def _evaluation_card(self):
        b, s = self.binder, self.state
        self.summary_figures = pn.pane.HTML("")
        self.evaluation_result = pn.pane.HTML("", sizing_mode="stretch_width")
        self.evaluation_options = pn.widgets.TextInput(
            label="Evaluation settings (JSON object)", value=json.dumps(s.evaluation_options),
            placeholder='e.g. {"group": 2, "support": "rigid"}')
        self.evaluation_options.param.watch(self._evaluation_options_changed, "value")
        self.evaluation_hint = pn.pane.HTML(evaluation_hint(s.evaluation_kind))
        s.param.watch(lambda e: setattr(self.evaluation_hint, "object", evaluation_hint(e.new)), "evaluation_kind")
        settings = [
            b.bind("evaluation_kind", pn.widgets.Select(label="Evaluate against", options={
                "nothing": "none", "machine vibration severity": "machine_severity",
                "whole-body exposure": "whole_body", "building vibration (PPV)": "building_ppv"}), "evaluation"),
            self.evaluation_options, self.evaluation_hint,
            b.bind("n_peaks", pn.widgets.IntInput(label="Peaks listed", start=0, end=100), "evaluation"),
            b.message("evaluation").pane,
            pn.pane.HTML('<div class="st-caution">Evaluations are guidance only: the governing standard and a '
                         'competent professional decide.</div>'),
        ]
        return self._card("6 · Summary and evaluation", settings, [self.summary_figures, self.evaluation_result])

    def _evaluation_options_changed(self, event) -> None:
        try:
            options = json.loads(event.new or "{}")
            if not isinstance(options, dict):
                raise ValueError("must be a JSON object")
        except ValueError as err:
            self.binder.message("evaluation").show(f"evaluation settings: {err}; write e.g. "
                                                   '{"group": 2, "support": "rigid"}')
            return
        self.binder.propose("evaluation", evaluation_options=options)

    def _export_card(self):
        message = self.binder.message("export")
        self.session_download = pn.widgets.FileDownload(callback=self._session_bytes, filename="sigtune-session.json",
                                                        label="Download the session", color="primary")
        self.session_path = pn.widgets.TextInput(label="Session file path (on this computer)",
                                                 placeholder="sessions/pump.json")
        save_button = pn.widgets.Button(label="Save to path", width=120)
        save_button.on_click(lambda _e: self.save_session(self.session_path.value))
        load_button = pn.widgets.Button(label="Load from path", width=120)
        load_button.on_click(lambda _e: message.show(self.load_session_path(self.session_path.value)))
        self.session_upload = pn.widgets.FileInput(accept=".json", label="Load a session file")
        self.session_upload.param.watch(self._session_uploaded, "value")
        self.export_format = pn.widgets.Select(label="Processed channel as", options=list(exports.CHANNEL_FORMATS),
                                               width=120)
        channel_download = pn.widgets.FileDownload(callback=self._channel_file, filename="processed.h5",
                                                   label="Download the processed channel")
        self.export_format.param.watch(
            lambda e: setattr(channel_download, "filename", f"processed.{e.new}"), "value")
        summary_download = pn.widgets.FileDownload(callback=self._summary_bytes, filename="summary.json",
                                                   label="Download the summary (JSON)")
        notes = self.binder.bind("notes", pn.widgets.TextAreaInput(label="Notes saved with the session", height=80),
                                 "export")
        self.saved_note = pn.pane.HTML("")
        settings = [self.session_download, self.session_path, pn.Row(save_button, load_button), self.saved_note,
                    pn.pane.HTML('<p class="st-note">Load a session (upload):</p>'), self.session_upload, message.pane]
        plots = [notes, pn.Row(self.export_format, channel_download), summary_download,
                 pn.pane.HTML('<p class="st-note">A session holds the setup, the conditioning chain and the analysis '
                              'settings. Loading one applies it to the channel open now when its recording is not on '
                              'this computer; <code>sigtune batch SESSION FILES</code> replays it over a campaign.</p>')]
        return self._card("7 · Export", settings, plots)

    # ---- actions ----
    def _sync_channel_widgets(self) -> None:
        self.channel_select.options = list(self.state.param.channel.objects)
        self.channel_select.value = self.state.channel
        nyquist = self.state.source_channel.nyquist
        self.cutoff_slider.param.update(end=nyquist, step=nyquist / 1000, value=min(self.state.cutoff, nyquist))

    def open_path(self, path: str) -> str | None:
        """Open a recording by typed path (empty: the demo); return the message shown, if any."""
        path = path.strip()
        try:
            path = str(exports.typed_path(path, self.data_root, "recording")) if path else ""
        except SigtuneError as err:
            self.binder.message("source").show(str(err))
            return str(err)
        return self._open_file(path)

    def _open_file(self, path: str) -> str | None:
        try:
            self.state.open(path)
        except (SigtuneError, OSError) as err:
            text = str(err)
        else:
            text = None
            self.path_input.value = self.state.file_path
        self.binder.message("source").show(text)
        return text

    def _uploaded(self, event) -> None:
        if not event.new:
            return
        name, data = next(iter(event.new.items()))
        try:
            path = exports.store_upload(self.upload_dir, name, data)
        except SigtuneError as err:
            self.binder.message("source").show(str(err))
            return
        self._open_file(str(path))  # the private upload folder, outside the data folder

    def _session_bytes(self):
        try:
            return io.BytesIO(exports.session_bytes(self.state))
        except SigtuneError as err:
            self.binder.message("export").show(str(err))
            return io.BytesIO(b"")

    def save_session(self, path: str) -> str | None:
        """Save the session to ``path`` (relative to the data folder); return any error."""
        try:
            saved = exports.save_session(self.state, path, self.data_root)
        except (SigtuneError, OSError) as err:
            self.binder.message("export").show(str(err))
            return str(err)
        self.binder.message("export").show(None)
        self.saved_note.object = f'<p class="st-note">Saved {html.escape(str(saved))}</p>'
        return None

    def load_session_path(self, path: str) -> str | None:
        """Load a session file by path (relative to the data folder); return the message, if any."""
        try:
            return exports.load_session_file(self.state, path, self.data_root)
        except (SigtuneError, OSError) as err:
            return str(err)

    def _session_uploaded(self, event) -> None:
        if not event.new:
            return
        try:
            note = exports.load_session_bytes(self.state, event.new, self.session_upload.filename or "upload",
                                              self.data_root)
        except SigtuneError as err:
            note = str(err)
        self.binder.message("export").show(note)

    def _channel_file(self):
        try:
            return exports.channel_file(self.state, self.export_format.value, self.upload_dir)
        except (SigtuneError, OSError) as err:
            self.binder.message("export").show(str(err))
            return io.BytesIO(b"")

    def _summary_bytes(self):
        try:
            return io.BytesIO(json.dumps(self.state.summary, indent=2).encode())
        except SigtuneError as err:
            self.binder.message("export").show(str(err))
            return io.BytesIO(b"")

    def close(self) -> None:
        """Stop the worker (the session closed)."""
        self.runner.shutdown()

    def servable(self):
        """The layout (what ``create_app`` returns)."""
        return self.layout


def evaluation_hint(kind: str) -> str:
    """The settings the chosen evaluation accepts (its function's keywords), as a note."""
    import inspect

    if kind == "none":
        return ""
    parameters = list(inspect.signature(getattr(dsp.evaluation, kind)).parameters.values())[1:]
    names = ", ".join(f"{p.name}" + ("" if p.default is inspect.Parameter.empty else f" (default {p.default!r})")
                      for p in parameters)
    return f'<p class="st-note">Settings of {html.escape(kind)}: {html.escape(names)}</p>'


def evaluation_html(evaluation) -> str:
    """The evaluation result as a table with its caution right below (never without it)."""
    if not evaluation:
        return '<p class="st-muted">No evaluation chosen.</p>'
    if "skipped" in evaluation:
        return f'<p class="st-muted">{html.escape(str(evaluation["skipped"]))}</p>'
    rows = [(k.replace("_", " "), v) for k, v in evaluation.items()
            if k not in ("caution", "clause") and not isinstance(v, (dict, list))]
    clause = evaluation.get("clause")
    caution = evaluation.get("caution") or "No caution was given with this result; treat it as guidance only."
    return (key_value_table(rows) + (f'<p class="st-note">Clause: {html.escape(str(clause))}</p>' if clause else "")
            + f'<div class="st-caution">{html.escape(str(caution))}</div>')

