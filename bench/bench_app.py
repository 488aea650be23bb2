"""Benchmark of the explorer: setting change -> new plot data, display overhead, bytes per update.

Run: ``python3 bench/bench_app.py [--quick] [--no-browser]``; writes ``bench/results/app.md``.

Measured in one run, medians of several repeats:

1. Server side, for 10^5, 10^6 and 10^7-sample channels: a cutoff change, from
   the widget's new value to new data in the plots' Bokeh models (the fast
   phase: filtered trace decimated and drawn, filter response, spectrum
   preview), and to the complete update (true spectrum, band levels,
   integration comparison, quality, summary). Beside it, the bare scipy chain
   a script would run for the same answer (``sosfilt`` + ``welch`` + a
   frequency-domain integration), and the ratio.
2. Display overhead at 10^8 samples: re-decimating a zoom of the time plot
   and pushing new data into it.
3. In Chromium (Playwright), on a 10^6-sample file served on 127.0.0.1: the
   round trip from typing a cutoff to the redrawn data in the browser, and
   the bytes the server sent over the websocket for that update.
"""

from __future__ import annotations

import argparse
import datetime
import os
import platform
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy import fft, signal

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

FS = 10_240.0  # Hz: a common analyser rate; 10^7 samples is about 16 minutes
GOALS = {"server_1e6_ms": 100.0, "server_1e7_ms": 500.0, "display_1e8_ms": 60.0, "bytes_kb": 250.0}


def synthetic_recording(n: int):
    """A pump-like channel: running speed, harmonics, a bearing tone, noise (seeded)."""
    from dsp import Channel, Recording

    rng = np.random.default_rng(2026)
    t = np.arange(n) / FS
    x = (2.0 * np.sin(2 * np.pi * 24.6 * t) + 0.6 * np.sin(2 * np.pi * 49.2 * t)
         + 0.3 * np.sin(2 * np.pi * 612.0 * t) + 0.2 * rng.standard_normal(n))
    return Recording([Channel(x.astype(np.float32), FS, name="bench", unit="m/s^2")], source="bench")


def bare_chain_s(x: np.ndarray, cutoff: float) -> float:
    """What a script needs for the same figures: filter, Welch PSD, frequency-domain integration."""
    started = time.perf_counter()
    sos = signal.butter(4, cutoff, btype="highpass", fs=FS, output="sos")
    y = signal.sosfilt(sos, x)
    signal.welch(y, fs=FS, nperseg=16_384)
    n = fft.next_fast_len(y.size, real=True)
    spec = fft.rfft(y, n)
    f = fft.rfftfreq(n, 1 / FS)
    spec[1:] /= 2j * np.pi * f[1:]
    spec[0] = 0
    fft.irfft(spec, n)[: y.size]
    return time.perf_counter() - started


def server_latency(n: int, repeats: int) -> dict:
    """Median times (s) of a cutoff change to the fast and to the complete plot update."""
    import panel as pn

    from explorer.page import ExplorerPage
    from explorer.state import BenchState

    state = BenchState(recording=synthetic_recording(n), filter_band="highpass", cutoff=5.0, motion_f_low=2.0)
    page = ExplorerPage(state)
    page.layout.get_root()  # render: updates now go through HoloViews into Bokeh models
    stamps = {}
    show = page.show

    def timed_show(res, final):
        show(res, final)
        if not final and "fast" not in stamps:  # the first partial delivery is the fast phase
            stamps["compute"] = sum(res.seconds.values())
        stamps.setdefault("final" if final else "fast", time.perf_counter())

    page.show = timed_show
    page.runner.show = timed_show
    fast, final, bare, compute = [], [], [], []
    for i in range(repeats):
        cutoff = 7.5 + (i % 2) * 2.5 + i * 0.01  # a new value every time: nothing served from the cache
        stamps.clear()
        started = time.perf_counter()
        page.binder.widgets["cutoff"].value = cutoff
        fast.append(stamps["fast"] - started)
        compute.append(stamps["compute"])
        final.append(stamps["final"] - started)
        bare.append(bare_chain_s(state.recording[0].data, cutoff))
    points = page.time_plot.last_points
    page.close()
    state.release()
    pn.state.reset()
    return {"n": n, "fast": statistics.median(fast), "final": statistics.median(final),
            "bare": statistics.median(bare), "compute": statistics.median(compute), "points": points}


def display_overhead(n: int, repeats: int) -> dict:
    """Median times (s) to re-decimate a zoom and to push new data, on an n-sample time plot."""
    import holoviews as hv

    from explorer.views.time import Trace, TraceData, TracePlot

    data = np.random.default_rng(1).standard_normal(n, dtype=np.float32)
    plot = TracePlot(("raw", "processed"), "signal", "Signal", "Raw and processed")
    trace = TraceData(traces={"processed": Trace("processed", data, FS)}, unit="m/s^2")
    bokeh_plot = hv.renderer("bokeh").get_plot(plot.rebuild(trace))
    duration = n / FS
    zoom, push = [], []
    for i in range(repeats):
        lo = duration * (0.1 + 0.05 * i)
        started = time.perf_counter()
        plot.range.event(x_range=(lo, lo + duration * 0.5))
        zoom.append(time.perf_counter() - started)
        started = time.perf_counter()
        plot.send(TraceData(traces={"processed": Trace("processed", data, FS, t0=0.0)}, unit="m/s^2"))
        push.append(time.perf_counter() - started)
    del bokeh_plot
    return {"n": n, "zoom": statistics.median(zoom), "push": statistics.median(push), "points": plot.last_points}


def browser_round_trip(n: int, repeats: int) -> dict | None:
    """Median round trip (s) and websocket bytes of a cutoff change, in Chromium."""
    if not Path("/usr/bin/chromium").exists():
        return None
    from playwright.sync_api import sync_playwright

    import dsp
    from explorer.serve import free_port, start_server

    folder = Path(tempfile.mkdtemp(prefix="sigtune-bench-"))
    path = dsp.io.write(synthetic_recording(n), folder / "bench.h5")
    port = free_port()
    server = start_server(file=path, port=port)
    received: list[int] = []
    gain_sum = """() => { for (const doc of Bokeh.documents) for (const m of doc.all_models) {
        if (!m.data) continue; const d = m.data instanceof Map ? Object.fromEntries(m.data) : m.data;
        if (d.gain) { let s = 0; for (const v of d.gain) s += v; return s; } } return null; }"""
    times, sizes = [], []
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path="/usr/bin/chromium",
                                         args=["--no-sandbox", "--disable-gpu", "--disable-background-networking"])
            page = browser.new_page(viewport={"width": 1500, "height": 1000})
            page.on("websocket", lambda ws: ws.on("framereceived", lambda payload: received.append(
                len(payload) if isinstance(payload, (bytes, str)) else 0)))
            page.goto(f"http://127.0.0.1:{port}/")
            page.get_by_text("updated:").wait_for(timeout=120_000)
            box = page.locator(".bk-input-group", has_text="Cutoff (Hz; band filters: low edge)").locator("input").first
            for i in range(repeats):
                before = page.evaluate(gain_sum)
                page.wait_for_timeout(1500)  # let the slow phase of the previous change land
                received.clear()
                box.fill(f"{6.0 + i * 0.5:g}")
                started = time.perf_counter()
                box.press("Enter")
                while page.evaluate(gain_sum) == before:
                    if time.perf_counter() - started > 30:
                        raise TimeoutError("no update in the browser within 30 s")
                times.append(time.perf_counter() - started)
                page.wait_for_timeout(300)  # the rest of the fast update's messages
                sizes.append(sum(received))
            browser.close()
    finally:
        server.stop()
        server.join(timeout=15)
    return {"n": n, "round_trip": statistics.median(times), "bytes": statistics.median(sizes)}


def machine() -> str:
    import panel
    import scipy

    load = ", ".join(f"{v:.1f}" for v in os.getloadavg())
    return (f"{platform.processor() or platform.machine()}, {os.cpu_count()} cores, Python "
            f"{platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}, panel {panel.__version__}"
            f"; load average at the end of the run {load} (other jobs shared the machine when above 2)")


def verdict(value: float, goal: float) -> str:
    return "meets" if value <= goal else f"misses by {value - goal:.0f} ({value / goal:.1f}x)"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, no 10^8 display case")
    parser.add_argument("--no-browser", action="store_true")
    args = parser.parse_args(argv)
    repeats = 3 if args.quick else 7
    rows = [server_latency(n, repeats) for n in (10**5, 10**6, 10**7)]
    display = display_overhead(10**7 if args.quick else 10**8, repeats)
    browser = None if args.no_browser else browser_round_trip(10**6, 3 if args.quick else 5)
    lines = [
        "# Explorer benchmark", "",
        f"Machine: {machine()}. Date: {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC. "
        f"Medians of {repeats} repeats. Produced by `python3 bench/bench_app.py`.", "",
        "## A cutoff change, server side (high-pass Butterworth, order 4, causal; fs = 10,240 Hz)", "",
        "| samples | to new plot data (ms) | of which computing (ms) | complete update (ms) | bare scipy chain (ms) "
        "| ratio new data / bare | points per trace sent |",
        "|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in rows:
        lines.append(f"| {r['n']:,} | {r['fast'] * 1e3:.0f} | {r['compute'] * 1e3:.0f} | {r['final'] * 1e3:.0f} | "
                     f"{r['bare'] * 1e3:.0f} | "
                     f"{r['fast'] / r['bare']:.2f} | {r['points'] // 2:,} |")
    by_n = {r["n"]: r for r in rows}
    lines += ["", "*New plot data* is the fast phase, the one a user waits for: the filtered trace decimated "
              "and drawn, the filter's response and gain curve, and a preview of the processed spectrum (raw PSD "
              "x |H|^2). The *complete update* adds the true processed spectrum, band levels, the integration "
              "comparison of three methods and the summary (`dsp.analysis.analyse`, the batch runner's figures), "
              "computed on the session's worker thread while the page stays responsive. The bare chain is "
              "`sosfilt` + `welch` (16,384-point segments) + one FFT integration on the same samples.", "",
              "## Display overhead", "",
              "| samples | re-decimate a zoom (ms) | push new data (ms) | points sent |", "|---:|---:|---:|---:|",
              f"| {display['n']:,} | {display['zoom'] * 1e3:.1f} | {display['push'] * 1e3:.1f} | "
              f"{display['points']:,} |", ""]
    if browser:
        lines += ["## In the browser (Chromium, 10^6-sample file on 127.0.0.1)", "",
                  "| samples | cutoff typed -> data redrawn (ms) | sent per update (KB) |", "|---:|---:|---:|",
                  f"| {browser['n']:,} | {browser['round_trip'] * 1e3:.0f} | {browser['bytes'] / 1024:.0f} |", ""]
    lines += ["## Goals", "",
              f"- <= 100 ms server side at 10^6 samples: {by_n[10**6]['fast'] * 1e3:.0f} ms, "
              f"{verdict(by_n[10**6]['fast'] * 1e3, GOALS['server_1e6_ms'])}.",
              f"- <= 500 ms server side at 10^7 samples: {by_n[10**7]['fast'] * 1e3:.0f} ms, "
              f"{verdict(by_n[10**7]['fast'] * 1e3, GOALS['server_1e7_ms'])}.",
              f"- <= 60 ms display overhead at {display['n']:.0e} samples: "
              f"{max(display['zoom'], display['push']) * 1e3:.0f} ms, "
              f"{verdict(max(display['zoom'], display['push']) * 1e3, GOALS['display_1e8_ms'])}."]
    if browser:
        lines.append(f"- <= 250 KB sent per update: {browser['bytes'] / 1024:.0f} KB, "
                     f"{verdict(browser['bytes'] / 1024, GOALS['bytes_kb'])}.")
    lines += ["", "## Why a goal is missed, where it is", "",
              "- The fast update's own computing (filtering, the filter's response, the spectrum preview) is the "
              "*of which computing* column; the rest is drawing: each HoloViews plot update costs a fixed 25-40 ms "
              "here (three plots change on a cutoff change: the time plot, the magnitude and the spectrum), "
              "whatever the record length, because the traces are decimated first. That fixed cost is what "
              "separates 10^6 samples from the 100 ms goal when it is missed; it grows with the machine's load.",
              "- The complete update is dominated by `dsp.motion.compare_integration` (three methods), which the "
              "explorer runs once and shares with the summary; it runs on a second worker thread and never delays "
              "the next change's fast update.",
              f"- Display overhead at {display['n']:.0e} samples: a zoom re-decimates the visible half of the record "
              f"({display['n'] // 2:,} samples, min-max in tsdownsample, about 20-25 ms on an idle core here) and "
              "then pays the same fixed plot update; both parts slow down in proportion when other jobs share "
              "the two cores (see the load average above).",
              "- In the browser the round trip adds Bokeh's document bookkeeping on the server (it re-walks every "
              "model of the page after an update) and the browser's own drawing; no goal is set for it here.", ""]
    text = "\n".join(lines)
    print(text)
    if not args.quick:
        out = ROOT / "bench" / "results" / "app.md"
        out.parent.mkdir(exist_ok=True)
        out.write_text(text, encoding="utf-8")
        print(f"written {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
