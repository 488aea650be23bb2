"""Tier 1 (no browser): decimation, the views' data and the page's Bokeh models."""

import numpy as np
import panel as pn
import pytest
from bokeh.plotting import figure

from dsp import Channel, Recording
from explorer.decimate import MAX_POINTS, points_for_width, reduce_log, reduce_trace, visible_slice
from explorer.page import ExplorerPage, evaluation_html
from explorer.runner import Runner
from explorer.stages import Results
from explorer.state import BenchState
from explorer.views.time import Trace, TraceData, TracePlot


@pytest.fixture(autouse=True)
def _reset_panel():
    yield
    pn.state.reset()


# ---- decimation ----
@pytest.mark.parametrize("method", ["minmax", "minmax-lttb"])
@pytest.mark.parametrize("n", [10_000, 1_000_003])
def test_decimation_keeps_the_extremes(method, n):
    x = np.random.default_rng(3).standard_normal(n).astype(np.float32)
    r = reduce_trace(x, fs=1000.0, t0=5.0, n_out=1600, method=method)
    assert r.x.size <= 1600 and r.reduced
    if method == "minmax":  # numpy reference: every bin's extremes are kept, so the peaks survive
        assert r.y.max() == x.max() and r.y.min() == x.min()
    else:  # LTTB picks among pre-selected extremes by shape: the largest may go, the envelope stays
        assert r.y.max() > 0.85 * x.max() and r.y.min() < 0.85 * x.min()
    assert np.all(np.diff(r.x) > 0)
    assert r.x[0] >= 5.0 and r.x[-1] <= 5.0 + (n - 1) / 1000.0


def test_decimation_of_a_zoomed_window_uses_absolute_times():
    fs, t0 = 100.0, 1e6  # a late start: the uint64 indices must not wrap or lose the offset
    x = np.arange(1_000_000, dtype=np.float64)
    r = reduce_trace(x, fs, t0, x_range=(t0 + 2000.0, t0 + 3000.0), n_out=400)
    # sample i is at t0 + i/fs, so each reduced point's value (its own index) gives its time
    np.testing.assert_allclose(r.x, t0 + r.y.astype(np.float64) / fs, rtol=0, atol=1e-6)  # analytic
    assert r.x[0] <= t0 + 2000.0 + 0.02 and r.x[-1] >= t0 + 3000.0 - 0.02
    assert r.n_visible == pytest.approx(1000 * fs, abs=4)


def test_short_windows_are_sent_whole():
    x = np.linspace(0, 1, 500)
    r = reduce_trace(x, 100.0, 0.0, n_out=2000)
    assert not r.reduced and r.x.size == 500
    assert visible_slice(500, 100.0, 0.0, (10.0, 20.0)) == slice(500, 500)  # window after the end: empty


def test_points_stay_under_the_cap():
    assert points_for_width(50_000) == MAX_POINTS
    assert points_for_width(640) == 1280


def test_log_reduction_keeps_low_frequencies_and_peaks():
    f = np.linspace(0.25, 2560.0, 10_240)
    y = 1.0 / f
    y[9000] = 50.0
    fx, yx = reduce_log(f, y, 1000)
    assert fx.size <= 1000 and yx.max() == 50.0
    assert np.sum(fx < 2.0) >= 7  # every bin below 2 Hz (spacing 0.25 Hz) survives on a log axis


# ---- the time plot ----
def _trace_data(n, fs=1000.0):
    x = np.sin(np.arange(n) / 50.0)
    return TraceData(traces={"raw": Trace("raw", x, fs), "processed": Trace("processed", 0.5 * x, fs)},
                     zones=[(0.0, 0.1)], unit="m/s^2")


def test_time_plot_reduces_and_says_so():
    plot = TracePlot(("raw", "processed"), "signal", "Signal", "Raw and processed")
    overlay = plot._render(_trace_data(1_000_000), None, 800, 300)
    assert plot.last_points <= 2 * points_for_width(800)
    assert "display reduced" in overlay.opts.get().kwargs["title"]
    overlay = plot._render(_trace_data(1000), None, 800, 300)
    assert plot.last_points == 2000 and "display reduced" not in overlay.opts.get().kwargs["title"]


def test_time_plot_redecimates_on_zoom():
    plot = TracePlot(("raw", "processed"), "signal", "Signal", "Raw and processed")
    overlay = plot._render(_trace_data(1_000_000), (100.0, 100.5), 800, 300)
    curve = overlay.get(0)
    times = curve.dimension_values("time")
    assert times.min() >= 100.0 - 0.002 and times.max() <= 100.5 + 0.003
    assert len(times) == 503  # 0.5 s at 1 kHz plus the margins: fewer than the pixels, sent whole


# ---- the page ----
def _recording():
    rng = np.random.default_rng(11)
    t = np.arange(40_000) / 4000.0
    x = np.sin(2 * np.pi * 30 * t) + 0.5 * np.sin(2 * np.pi * 900 * t) + 0.02 * rng.standard_normal(t.size)
    short = np.sin(2 * np.pi * 5 * np.arange(2000) / 400.0)
    return Recording([Channel(x, 4000.0, name="long", unit="m/s^2"), Channel(short, 400.0, name="short", unit="g")])


@pytest.fixture
def page():
    state = BenchState(recording=_recording(), filter_band="lowpass", cutoff=500.0, motion_f_low=5.0)
    p = ExplorerPage(state)
    yield p
    p.close()
    state.release()


def test_cutoff_change_updates_trace_and_spectrum(page):
    before_trace = page.time_plot.data.traces["processed"].data
    before_gain = page.spectrum_plot.data.gain_db[1].copy()
    page.binder.widgets["cutoff"].value = 100.0
    assert page.state.cutoff == 100.0
    after_trace = page.time_plot.data.traces["processed"].data
    assert after_trace is not before_trace
    # the 900 Hz tone is gone: RMS falls from ~0.79 (both tones) to ~0.71 (30 Hz only)  # analytic
    assert np.sqrt(np.mean(after_trace[4000:] ** 2)) == pytest.approx(np.sqrt(0.5), rel=0.01)
    gain_f, gain_db = page.spectrum_plot.data.gain_db
    assert not np.allclose(gain_db, before_gain)
    assert np.interp(100.0, gain_f, gain_db) == pytest.approx(-3.01, abs=0.05)  # Butterworth half power


def test_bad_cutoff_shows_the_message_and_keeps_the_plots(page):
    trace = page.time_plot.data.traces["processed"].data
    page.binder.widgets["cutoff"].value = 2500.0
    message = page.binder.messages["filter"]
    assert message.pane.visible and "Nyquist for fs=4000 Hz" in message.text
    assert page.state.cutoff == 500.0
    assert page.time_plot.data.traces["processed"].data is trace
    page.binder.widgets["cutoff"].value = 400.0
    assert not message.pane.visible


def test_bad_path_shows_the_message(page, tmp_path):
    text = page.open_path(str(tmp_path / "nothing.wav"))
    assert "no such recording file" in text and page.binder.messages["source"].pane.visible
    assert page.state.channel == "long"


def test_integration_methods_switch(page):
    assert set(page.time_plot.data.traces) == {"raw", "processed"}
    assert set(page.motion_plot.data.traces) == {"time", "frequency", "baseline"}
    page.binder.widgets["motion_methods"].value = ["frequency"]
    assert set(page.motion_plot.data.traces) == {"frequency"}
    assert "frequency" in page.motion_table.object and "baseline" not in page.motion_table.object


def test_time_plots_share_the_time_axis_after_a_new_channel(page):
    page.binder.widgets["channel"].value = "short"
    root = page.layout.get_root()
    figures = {f.title.text.split(" ·")[0]: f for f in root.select({"type": figure}) if f.title}
    assert figures["Raw and processed"].x_range is figures["Integration methods compared"].x_range
    assert figures["Magnitude (as applied)"].x_range is figures["Spectrum: raw, processed and the filter's gain"].x_range
    assert figures["Raw and processed"].y_range is not figures["Integration methods compared"].y_range


def test_findings_are_marked_on_the_time_plot():
    x = np.sin(np.arange(20_000) / 20.0)
    x[5000:5100] = 1.0  # a flat run at the maximum: clipping
    state = BenchState(recording=Recording([Channel(x, 1000.0, name="c")]), filter_band="none")
    p = ExplorerPage(state)
    marks = p.time_plot.data.marks
    assert any(a <= 5.0 + 1e-9 and b >= 5.099 for a, b in marks)
    assert "clipping" in p.findings.object
    p.close()
    state.release()


def test_evaluation_always_shows_its_caution():
    text = evaluation_html({"kind": "machine_severity", "zone": "B", "clause": "5.3", "caution": "guidance only"})
    assert "guidance only" in text and "st-caution" in text
    assert "st-caution" in evaluation_html({"kind": "x", "value": 1.0})


def test_stale_results_are_dropped():
    shown = []
    runner = Runner(lambda res, final: shown.append(final), lambda on: None)
    runner.generation = 3
    runner._apply(2, Results(), True)
    assert shown == []
    runner._apply(3, Results(), True)
    assert shown == [True] and runner.completed == 3


def test_evaluation_result_sits_beside_its_caution(page):
    page.binder.widgets["evaluation_kind"].value = "machine_severity"
    result = page.evaluation_result.object
    assert "zone" in result and "st-caution" in result
    assert page.state.summary["evaluation"]["caution"] in result.replace("&#x27;", "'")
    assert "group (default 1)" in page.evaluation_hint.object
    page.evaluation_options.value = '{"group": 9}'
    assert "group" in page.binder.messages["evaluation"].text
    assert "st-caution" in page.evaluation_result.object  # the last good result stays, caution with it
    page.evaluation_options.value = "not json"
    assert "JSON object" in page.binder.messages["evaluation"].text or "evaluation settings" in \
        page.binder.messages["evaluation"].text


def test_unknown_evaluation_setting_is_refused_by_name(page):
    page.binder.widgets["evaluation_kind"].value = "machine_severity"
    page.evaluation_options.value = '{"grup": 2}'
    assert "unknown setting 'grup'" in page.binder.messages["evaluation"].text
    assert page.state.evaluation_options == {}
