"""Benchmark: sigtune's spectra beside the bare scipy calls they wrap.

Each operation runs on 10^6 and 10^7 samples of white noise (fs = 10 kHz),
alternating with the bare scipy/numpy call using the same resolved settings,
in one run. Prints a table of medians and the ratio ours / bare (goal <= 1.1)
and writes it to ``bench/results/spectra.md``.

Run: ``python3 bench/bench_spectra.py`` (about two minutes on 2 cores).
"""

from __future__ import annotations

import datetime
import os
import platform
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import scipy
from scipy import signal

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from dsp import Channel  # noqa: E402
from dsp._atomic import write_text_atomic  # noqa: E402
from dsp.bands import band_levels  # noqa: E402
from dsp.spectra import linear_spectrum, psd, spectrogram  # noqa: E402

FS = 10_000.0
SIZES = (10**6, 10**7)
REPEATS = {10**6: 21, 10**7: 9}
RESULTS = Path(__file__).resolve().parent / "results" / "spectra.md"


def _bare_welch(x, settings, scaling="density"):
    return signal.welch(x, FS, window=settings["window"], nperseg=settings["nperseg"],
                        noverlap=settings["noverlap"], detrend=settings["detrend"], scaling=scaling)


def _bare_peak_hold(x, settings):
    _, _, s = signal.spectrogram(x, FS, window="hann", nperseg=settings["nperseg"],
                                 noverlap=settings["noverlap"], detrend="constant", mode="psd")
    return s.max(axis=-1)


def _bare_linear(x, settings):
    f, s = _bare_welch(x, {**settings, "window": "flattop"}, scaling="spectrum")
    return f, np.sqrt(2.0 * s)


def _bare_spectrogram(x, settings):
    return signal.spectrogram(x, FS, window="hann", nperseg=settings["nperseg"],
                              noverlap=settings["noverlap"], detrend="constant", mode="psd")


def _bare_filter_bank(x, result):
    # The same per-band work the filter method does: design, filter, mean square.
    out = []
    for lo, hi in zip(result.lower_edges, result.upper_edges):
        sos = signal.butter(3, [lo, hi], btype="bandpass", fs=FS, output="sos")
        out.append(np.sqrt(np.mean(signal.sosfilt(sos, x - x.mean()) ** 2)))
    return out


def cases(ch: Channel):
    """(name, ours, bare) triples; bare uses the settings ours resolved."""
    x = ch.data
    spec = psd(ch)
    s = {**spec.settings, "window": "hann"}
    bands = band_levels(ch, fraction=3)
    filt = band_levels(ch, fraction=1, f_min=250.0, method="filter")
    sg = spectrogram(ch)
    return [
        ("psd (hann, mean)", lambda: psd(ch), lambda: _bare_welch(x, s)),
        ("psd (peak hold)", lambda: psd(ch, average="peak"), lambda: _bare_peak_hold(x, s)),
        ("linear_spectrum (flattop, peak)", lambda: linear_spectrum(ch), lambda: _bare_linear(x, s)),
        ("band_levels (1/3 octave, psd)", lambda: band_levels(ch, fraction=3),
         lambda: _bare_welch(x, {**bands.settings, "window": "hann"})),
        ("band_levels (octave, filter bank)",
         lambda: band_levels(ch, fraction=1, f_min=250.0, method="filter"),
         lambda: _bare_filter_bank(x, filt)),
        ("spectrogram (hann)", lambda: spectrogram(ch), lambda: _bare_spectrogram(x, sg.settings)),
    ]


def _time(fn) -> tuple[float, float]:
    """Wall-clock and process CPU time of one call, s (CPU time ignores waiting for a core)."""
    wall, cpu = time.perf_counter(), time.process_time()
    fn()
    return time.perf_counter() - wall, time.process_time() - cpu


def run() -> list[tuple]:
    rows = []
    rng = np.random.default_rng(20261202)
    for n in SIZES:
        ch = Channel(rng.standard_normal(n), fs=FS, name="bench")
        for name, ours, bare in cases(ch):
            for _ in range(2):  # warm-up: caches, allocator, CPU clock
                ours(), bare()
            t_ours, t_bare = [], []
            for i in range(REPEATS[n]):  # alternate, and swap who goes first, so drift hits both alike
                pair = ((t_ours, ours), (t_bare, bare))
                for times, fn in pair if i % 2 == 0 else pair[::-1]:
                    times.append(_time(fn))
            mo, mb = (statistics.median(t[0] for t in ts) for ts in (t_ours, t_bare))
            co, cb = (statistics.median(t[1] for t in ts) for ts in (t_ours, t_bare))
            rows.append((name, n, mo, mb, mo / mb, co / cb))
            print(f"{name:36s} n={n:>9,d}  ours {mo * 1e3:9.1f} ms  bare {mb * 1e3:9.1f} ms  "
                  f"ratio {mo / mb:5.2f}  (CPU time {co / cb:5.2f})", flush=True)
    return rows


def report(rows, load_before, load_after) -> str:
    now = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    lines = [
        "# Spectra benchmark", "",
        f"- date: {now}",
        f"- machine: {platform.machine()}, {os.cpu_count()} CPUs, {platform.system()} {platform.release()}",
        f"- python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}",
        f"- signal: white noise, fs = {FS:g} Hz, float64; default settings (segment rule as reported)",
        "- medians of alternating repeats (21 at 10^6, 9 at 10^7; who runs first swaps each "
        "repeat), after two warm-up calls of each; goal: ratio <= 1.1",
        f"- 1-min load average {load_before:.2f} before, {load_after:.2f} after. Other jobs may share "
        "the machine: the ratio of median process CPU times (which leaves out waiting for a core) "
        "is the steadier figure when the load is above the number of CPUs", "",
        "| operation | samples | sigtune median (ms) | bare median (ms) | ratio | CPU-time ratio |",
        "|---|---:|---:|---:|---:|---:|",
    ]
    for name, n, mo, mb, ratio, cpu_ratio in rows:
        lines.append(f"| {name} | {n:,d} | {mo * 1e3:.1f} | {mb * 1e3:.1f} | {ratio:.2f} | "
                     f"{cpu_ratio:.2f} |")
    lines += ["", "Bare calls: `scipy.signal.welch` with the resolved window, nperseg, noverlap and "
              "detrend (psd, linear spectrum with `scaling=\"spectrum\"`, 1/3-octave band levels); "
              "`scipy.signal.spectrogram` + max (peak hold) or alone (spectrogram); "
              "`butter` + `sosfilt` per band (filter bank).", ""]
    return "\n".join(lines)


if __name__ == "__main__":
    load_before = os.getloadavg()[0]
    rows = run()
    text = report(rows, load_before, os.getloadavg()[0])
    RESULTS.parent.mkdir(parents=True, exist_ok=True)
    write_text_atomic(RESULTS, text)
    print(f"\nwrote {RESULTS}")
