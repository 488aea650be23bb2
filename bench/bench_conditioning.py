"""Overhead of sigtune's filter and resample steps over the bare scipy calls they wrap.

Run from the repository root::

    python3 bench/bench_conditioning.py [--repeats 5] [--sizes 1000000 10000000]

Each operation runs beside its bare scipy call in the same process, on the same
float64 data, alternating between the two, and the medians of the repeats are
compared. Designs are made (and cached) before timing, as they are when a
dashboard or batch run filters many records; the one-off design times are
listed separately. Writes ``bench/results/conditioning.md``.
"""

from __future__ import annotations

import argparse
import datetime as _dt
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

from dsp._atomic import write_text_atomic  # noqa: E402
from dsp.channel import Channel  # noqa: E402
from dsp.filters import Filter  # noqa: E402
from dsp.resampling import Resample  # noqa: E402

FS = 5120.0
FS_OUT = 2000.0  # 25/64: a rational factor, one polyphase stage
RESULTS = Path(__file__).resolve().parent / "results" / "conditioning.md"


def _timed(fn) -> float:
    start = time.perf_counter()
    fn()
    return time.perf_counter() - start


def _timed_both(fn) -> tuple[float, float]:
    """Wall-clock and process CPU seconds of one call (the operations here are single-threaded)."""
    wall, cpu = time.perf_counter(), time.process_time()
    fn()
    return time.perf_counter() - wall, time.process_time() - cpu


def _compare(ours, bare, repeats: int) -> tuple[float, float, float]:
    """Median wall seconds of ``ours`` and ``bare`` (run alternately so drifts hit both alike), and the ratio
    of their median CPU times, which other work on a shared machine disturbs less than wall time."""
    ours(), bare()  # warm caches and allocators
    runs_ours, runs_bare = [], []
    for _ in range(repeats):
        runs_ours.append(_timed_both(ours))
        runs_bare.append(_timed_both(bare))
    wall_ours, cpu_ours = (statistics.median(v) for v in zip(*runs_ours))
    wall_bare, cpu_bare = (statistics.median(v) for v in zip(*runs_bare))
    return wall_ours, wall_bare, cpu_ours / cpu_bare


def _cases(n: int):
    """(operation, bare call described, ours, bare) for a record of n samples."""
    x = np.random.default_rng(0).normal(0.2, 1.0, n)
    channel = Channel(x, FS)
    causal = Filter("butterworth", "lowpass", 4, 500.0)
    zero_phase = Filter("butterworth", "highpass", 4, 2.0, zero_phase=True)
    step = Resample(fs_out=FS_OUT, energy_warning_fraction=1.0)  # white noise: most of it lies above the band
    sos_c, sos_z = np.array(causal.sos(FS)), np.array(zero_phase.sos(FS))
    pad = min(zero_phase.design(FS).settling_samples, n - 1)
    (stage,) = step.plan(FS)
    taps, up, down = np.array(stage["taps"]), stage["up"], stage["down"]
    return [
        ("causal filter (Butterworth 4, low-pass 500 Hz)", "sosfilt(sos, x)",
         lambda: causal.apply(channel), lambda: signal.sosfilt(sos_c, x)),
        ("zero-phase filter (Butterworth 4, high-pass 2 Hz)", f"sosfiltfilt(sos, x, padlen={pad})",
         lambda: zero_phase.apply(channel), lambda: signal.sosfiltfilt(sos_z, x, padtype="even", padlen=pad)),
        ("zero-phase filter (Butterworth 4, high-pass 2 Hz)", "sosfiltfilt(sos, x) (scipy's default pad)",
         lambda: zero_phase.apply(channel), lambda: signal.sosfiltfilt(sos_z, x)),
        (f"resample 5120 -> 2000 Hz ({up}/{down}, {taps.size}-tap 90 dB FIR)",
         "resample_poly(x, up, down, window=our FIR, padtype='line')",
         lambda: step.apply(channel), lambda: signal.resample_poly(x, up, down, window=taps, padtype="line")),
        (f"resample 5120 -> 2000 Hz ({up}/{down}, {taps.size}-tap 90 dB FIR)",
         "resample_poly(x, up, down) (scipy's default filter, ~-6 dB at Nyquist)",
         lambda: step.apply(channel), lambda: signal.resample_poly(x, up, down)),
    ]


def _design_times() -> list[tuple[str, float]]:
    """One-off design times, each on a spec never designed before in this process."""
    specs = [("Butterworth 4 low-pass, design mode", Filter(cutoff=123.0)),
             ("elliptic 8 band-pass, zero-phase, effective mode",
              Filter("elliptic", "bandpass", 8, (40.0, 400.0), zero_phase=True, ripple_db=0.5,
                     cutoff_mode="effective")),
             ("Butterworth 4 high-pass 0.5 Hz (long settling)", Filter(band="highpass", cutoff=0.5))]
    rows = [(label, _timed(lambda spec=spec: spec.design(FS))) for label, spec in specs]
    for fs_out in (2048.0, 1999.0):  # a simple ratio (2/5), and an awkward one (large p and q)
        step = Resample(fs_out=fs_out)
        seconds = _timed(lambda step=step: step.plan(FS))
        factor, taps = step.factor(FS), sum(s["taps"].size for s in step.plan(FS))
        rows.append((f"resample FIR 5120 -> {fs_out:g} Hz (p/q = {factor}, {taps} taps, Kaiser, checked)", seconds))
    return rows


def _machine() -> str:
    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            names = [line.split(":", 1)[1].strip() for line in fh if line.startswith("model name")]
        cpu = names[0] if names else cpu
    except OSError:
        pass
    return (f"{cpu}, {os.cpu_count()} logical CPUs; {platform.system()} {platform.release()}; "
            f"Python {platform.python_version()}, numpy {np.__version__}, scipy {scipy.__version__}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--sizes", type=int, nargs="+", default=[10**6, 10**7])
    parser.add_argument("--output", type=Path, default=RESULTS)
    args = parser.parse_args(argv)

    load_before = os.getloadavg()[0]
    designs = _design_times()
    rows = []
    for n in args.sizes:
        for operation, bare_label, ours, bare in _cases(n):
            t_ours, t_bare, cpu_ratio = _compare(ours, bare, args.repeats)
            rows.append((f"{n:.0e}".replace("+0", ""), operation, bare_label, t_ours, t_bare, t_ours / t_bare,
                         cpu_ratio))
            print(f"{rows[-1][0]:>5}  {operation:<55} {t_ours * 1e3:9.1f} ms  vs {bare_label:<60} "
                  f"{t_bare * 1e3:9.1f} ms  ratio {t_ours / t_bare:5.2f} (CPU time {cpu_ratio:5.2f})", flush=True)

    lines = [
        "# Conditioning benchmark: filter and resample steps against bare scipy",
        "",
        f"- Date: {_dt.datetime.now(_dt.timezone.utc):%Y-%m-%d %H:%M} UTC",
        f"- Machine: {_machine()}",
        f"- Command: `python3 bench/bench_conditioning.py --repeats {args.repeats}`",
        f"- 1-minute load average before / after: {load_before:.2f} / {os.getloadavg()[0]:.2f} "
        "(other work on the machine makes single runs noisy: compare the ratios, which were measured side by "
        "side, rather than the absolute times; the CPU-time ratio, from medians of process CPU time, is the "
        "one least disturbed by that work)",
        f"- Data: float64 white noise plus an offset at {FS:g} Hz; medians of {args.repeats} repeats, "
        "ours and bare alternating in one run. Goal: ratio <= 1.1.",
        "- The fair comparison for resampling is scipy's `resample_poly` given the same FIR; the row against "
        "its default filter shows the price of 90 dB stopband attenuation instead of about 6 dB at the new "
        "Nyquist. Each step also records itself in the channel's history.",
        "",
        "| samples | operation | bare scipy call | ours (ms) | bare (ms) | ratio (wall) | ratio (CPU time) |",
        "|---:|---|---|---:|---:|---:|---:|",
    ]
    lines += [f"| {n} | {op} | `{bare}` | {a * 1e3:.1f} | {b * 1e3:.1f} | {r:.2f} | {c:.2f} |"
              for n, op, bare, a, b, r, c in rows]
    lines += [
        "",
        "Where the overhead goes: the causal filter adds only fixed costs (the cached design, the "
        "steady-state start for the first sample, the history entry); it starts from the first sample "
        "rather than the record's mean because the mean pass cost 10-20 % of a 4th-order sosfilt at "
        "10^6 samples (1.20x in the previous table). The zero-phase filter centres the record while writing "
        "its padded buffer (one pass, no extra copy); the resample step centres the record, sums squares "
        "before and after (the energy check) and restores the mean. A pass over 10^6 float64 samples that "
        "are not in cache costs about 1 ms here.",
    ]
    lines += ["", "One-off design times (cached afterwards per filter and rate):", "",
              "| design | ms |", "|---|---:|"]
    lines += [f"| {label} | {t * 1e3:.1f} |" for label, t in designs]
    args.output.parent.mkdir(parents=True, exist_ok=True)
    write_text_atomic(args.output, "\n".join(lines) + "\n")
    print(f"wrote {args.output}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
