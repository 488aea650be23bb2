"""Benchmark: sigtune's integration methods beside the bare scipy/numpy calls.

Each method integrates acceleration to velocity (f_low = 1 Hz) on 10^6 and
10^7 samples of white noise (fs = 10 kHz), alternating with its bare
counterpart in one run:

``time``
    :func:`scipy.signal.sosfiltfilt` (the same Butterworth high-pass),
    :func:`scipy.integrate.cumulative_trapezoid`, ``sosfiltfilt`` again.
``frequency``
    :func:`scipy.fft.rfft` at :func:`scipy.fft.next_fast_len`, multiplication
    by ``1 / (j 2 pi f)`` with the low cut, :func:`scipy.fft.irfft` (no end
    taper or padding).
``baseline``
    ``cumulative_trapezoid`` and :func:`numpy.polyfit` / :func:`numpy.polyval`
    of order 2.

Prints a table of medians and the ratio ours / bare, and writes it to
``bench/results/motion.md``. Run: ``python3 bench/bench_motion.py``.
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
from scipy import fft as sfft
from scipy import signal
from scipy.integrate import cumulative_trapezoid

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from dsp import Channel, Filter, integrate  # noqa: E402
from dsp._atomic import write_text_atomic  # noqa: E402

FS = 10_000.0
F_LOW = 1.0
SIZES = (10**6, 10**7)
REPEATS = {10**6: 7, 10**7: 3}
RESULTS = Path(__file__).resolve().parent / "results" / "motion.md"


def _bare_time(x, sos):
    v = signal.sosfiltfilt(sos, x)
    return signal.sosfiltfilt(sos, cumulative_trapezoid(v, dx=1.0 / FS, initial=0.0))


def _bare_frequency(x):
    nfft = sfft.next_fast_len(x.size, real=True)
    f = sfft.rfftfreq(nfft, 1.0 / FS)
    with np.errstate(divide="ignore", invalid="ignore"):
        gain = np.clip((f - F_LOW / 2) / (F_LOW / 2), 0, 1) / (2j * np.pi * f)
    gain[0] = 0.0
    return sfft.irfft(sfft.rfft(x, nfft) * gain, nfft)[:x.size]


def _bare_baseline(x):
    v = cumulative_trapezoid(x, dx=1.0 / FS, initial=0.0)
    t = np.linspace(-1.0, 1.0, v.size)
    return v - np.polyval(np.polyfit(t, v, 2), t)


def cases(ch: Channel):
    """(name, ours, bare) triples."""
    x = np.asarray(ch.data)
    sos = np.array(Filter("butterworth", "highpass", order=4, cutoff=F_LOW, zero_phase=True).sos(FS))
    return [
        ("time (trapezoid + zero-phase Butterworth)", lambda: integrate(ch, method="time", f_low=F_LOW),
         lambda: _bare_time(x, sos)),
        ("frequency (j omega, tapered low cut)", lambda: integrate(ch, method="frequency", f_low=F_LOW),
         lambda: _bare_frequency(x)),
        ("baseline (trapezoid + order-2 fit)", lambda: integrate(ch, method="baseline"),
         lambda: _bare_baseline(x)),
    ]


def _median_pair(ours, bare, repeats):
    times_ours, times_bare = [], []
    for _ in range(repeats):  # alternate so that drift in machine load hits both alike
        start = time.perf_counter()
        ours()
        times_ours.append(time.perf_counter() - start)
        start = time.perf_counter()
        bare()
        times_bare.append(time.perf_counter() - start)
    return statistics.median(times_ours), statistics.median(times_bare)


def run() -> list[tuple[str, int, float, float]]:
    rows = []
    rng = np.random.default_rng(0)
    for n in SIZES:
        ch = Channel(rng.standard_normal(n), FS)
        for name, ours, bare in cases(ch):
            ours()  # warm caches (filter design, FFT plans)
            t_ours, t_bare = _median_pair(ours, bare, REPEATS[n])
            rows.append((name, n, t_ours, t_bare))
            print(f"{name:45s} n={n:>9,d}  ours {t_ours:8.3f} s  bare {t_bare:8.3f} s  "
                  f"ratio {t_ours / t_bare:5.2f}", flush=True)
    return rows


def machine() -> str:
    return (f"{platform.platform()}, {platform.processor() or platform.machine()}, {os.cpu_count()} CPUs; "
            f"Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}")


def report(rows) -> str:
    date = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    lines = [
        "# Integration benchmark", "",
        f"Run {date} on {machine()}.", "",
        f"Acceleration -> velocity, white noise at fs = {FS:g} Hz, f_low = {F_LOW:g} Hz. Medians of "
        f"{REPEATS[SIZES[0]]} (10^6) and {REPEATS[SIZES[1]]} (10^7) runs, alternating ours and bare. "
        "Ours includes unit conversion, validation, mean removal, the frequency method's end taper and "
        "zero padding (two periods of f_low at each end) and the new channel with its history entry; "
        "bare is the scipy/numpy core of each method. The baseline method is faster than its bare "
        "counterpart because it fits the polynomial by normal equations on a Legendre basis "
        "(dsp.motion.remove_polynomial) where numpy.polyfit solves a least-squares problem over the "
        "whole n x 3 matrix. The machine was shared with other jobs; ratios, measured side by side, "
        "are steadier than the absolute times.", "",
        "| method | samples | ours (s) | bare (s) | ratio ours / bare |",
        "|---|---:|---:|---:|---:|",
    ]
    for name, n, t_ours, t_bare in rows:
        lines.append(f"| {name} | {n:,d} | {t_ours:.3f} | {t_bare:.3f} | {t_ours / t_bare:.2f} |")
    lines += ["", "Run: `python3 bench/bench_motion.py`.", ""]
    return "\n".join(lines)


def main() -> None:
    text = report(run())
    write_text_atomic(RESULTS, text)
    print(f"\nwritten {RESULTS}")


if __name__ == "__main__":
    main()
