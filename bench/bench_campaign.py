"""Benchmark of campaign batch runs and of long records processed in blocks.

Part 1, a campaign of 40 HDF5 files x 10^6 samples (one channel, 10240 Hz) with the
default analysis (PSD, one-third-octave bands, peaks, audit, three integration methods
compared) after a causal high-pass, run three ways in one benchmark:

* a plain serial loop in one process calling ``dsp`` (read, ``Session.apply``, write the
  processed channels and the summary): the baseline a user would write;
* ``run_batch`` (what ``sigtune batch`` calls) with 1 and with 2 local workers;
* ``run_batch`` with 2 workers and Dask's default worker settings
  (``MALLOC_TRIM_THRESHOLD_=65536``, the statistical profiler on), to measure what
  ``dsp.campaign.WORKER_CONFIG`` buys;
* ``run_batch`` against the address of a 2-worker cluster that is already running
  (``sigtune batch --scheduler``), its workers started with ``dsp.campaign`` preloaded, as a
  site that runs campaigns keeps one: no cluster start or worker imports in the run.

Part 2, one channel of 10^8 float64 samples in an HDF5 file through a filter-and-integrate
chain (causal high-pass, then time-domain integration to velocity with causal high-passes)
with ``dsp.blocks.run_in_blocks``, beside the whole-array chain (``dsp.read`` +
``Chain.apply``), and the same with frequency-domain integration (a whole-record step): wall
time and peak RSS, also relative to the channel's size; and the streamed result's largest
difference from the whole-array one.

Every variant runs in a fresh Python process (clean peak RSS, no environment leaked from an
earlier Dask cluster). Usage::

    python bench/bench_campaign.py            # writes bench/results/campaign.md
    python bench/bench_campaign.py --quick    # 8 files, 10^7-sample long channel (a smoke run)
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

FS = 10240.0
RESULTS = Path(__file__).resolve().parent / "results" / "campaign.md"
RUNNING = "run_batch on a running 2-worker cluster (`--scheduler`)"


def _session():
    import dsp
    from dsp.session import Session

    return Session(chain=[dsp.Filter(band="highpass", cutoff=2.0)])


def _status_mb(key: str) -> float:
    """``VmHWM`` (peak) or ``VmRSS`` (now) of this process in MiB, from /proc (Linux).

    Not ``ru_maxrss``: a child process inherits its parent's peak there.
    """
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith(key + ":"):
            return int(line.split()[1]) / 1024.0
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _peak_rss_mb() -> float:
    return _status_mb("VmHWM")


# ------------------------------------------------------------------ data
def make_campaign(folder: Path, n_files: int, n_samples: int) -> list[Path]:
    import dsp

    folder.mkdir(parents=True, exist_ok=True)
    t = np.arange(n_samples) / FS
    paths = []
    for i in range(n_files):
        rng = np.random.default_rng(1000 + i)
        x = (rng.normal(0.0, 0.3, n_samples) + np.sin(2 * np.pi * (24.0 + 0.1 * i) * t)
             + 0.4 * np.sin(2 * np.pi * 310.0 * t) + 0.05)
        paths.append(dsp.write(dsp.Channel(x, FS, name="acc", unit="m/s^2"), folder / f"file_{i:03d}.h5"))
    return paths


def make_long(path: Path, n_samples: int) -> None:
    import dsp

    rng = np.random.default_rng(5)
    x = rng.normal(0.0, 1.0, n_samples)
    x += 0.2  # an offset the high-pass removes
    dsp.write(dsp.Channel(x, FS, name="long", unit="m/s^2"), path)


# ------------------------------------------------------------------ variants (each in its own process)
def variant_serial(folder: Path, out: Path) -> dict:
    """The loop a user would write: read, apply the session, write the outputs, file after file."""
    import dsp

    session = _session()
    (out / "processed").mkdir(parents=True)
    started = time.perf_counter()
    samples = 0
    for path in sorted(folder.glob("*.h5")):
        result = session.apply(dsp.read(path))
        dsp.write(result.recording, out / "processed" / path.name)
        (out / f"{path.stem}.json").write_text(json.dumps(result.summaries))
        samples += sum(ch.n_samples for ch in result.channels.values())
    seconds = time.perf_counter() - started
    return {"seconds": seconds, "samples": samples, "peak_rss_mb": [_peak_rss_mb()]}


def variant_batch(folder: Path, out: Path, workers: int, dask_default_env: bool, scheduler: str | None = None) -> dict:
    import dsp.campaign

    if dask_default_env:
        dsp.campaign.WORKER_CONFIG = {}  # Dask's own worker settings
    started = time.perf_counter()
    result = dsp.campaign.run_batch(_session(), [folder], out, workers=workers, scheduler=scheduler,
                                    progress=False)
    seconds = time.perf_counter() - started
    assert result.ok, result.failed
    per_worker: dict[int, float] = {}
    finished = []
    for record in result.records:
        per_worker[record["pid"]] = max(per_worker.get(record["pid"], 0.0), record["peak_rss_bytes"] / 2**20)
        finished.append(record["seconds"])
    return {"seconds": seconds, "samples": result.n_samples, "peak_rss_mb": sorted(per_worker.values()),
            "task_seconds_sum": float(np.sum(finished))}


def serve_cluster(workers: int) -> None:
    """Keep a local cluster running, as a site would: print its address, stop when stdin closes.

    The cluster ``run_batch`` starts itself (``dsp.campaign._Cluster``), its workers preloading sigtune.
    """
    import dask

    import dsp.campaign

    with dask.config.set({"distributed.worker.preload": ["dsp.campaign"]}), \
            dsp.campaign._Cluster(workers, None) as client:
        client.wait_for_workers(workers)
        print(json.dumps({"address": client.scheduler.address}), flush=True)
        sys.stdin.read()


def _with_running_cluster(workers: int, args: list[str]) -> dict:
    """Run a batch variant against a cluster started (and stopped) in another process beforehand."""
    server = subprocess.Popen([sys.executable, __file__, "--variant", "cluster", str(workers)],
                              stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        address = json.loads(server.stdout.readline())["address"]
        return _run_variant([*args, address])
    finally:
        server.stdin.close()
        server.wait(timeout=60)


def variant_imports() -> dict:
    """Time to import sigtune's batch task in a fresh process (what each new worker pays once)."""
    started = time.perf_counter()
    import dsp.campaign  # noqa: F401  (imported for its cost)

    return {"dsp": time.perf_counter() - started}


def variant_cluster_overhead(workers: int) -> dict:
    """Start a local cluster as run_batch does, run one trivial task, stop it."""
    import dsp.campaign

    started = time.perf_counter()
    with dsp.campaign._Cluster(workers, None) as client:
        client.submit(sum, [1, 2], pure=False).result()
    return {"seconds": time.perf_counter() - started}


def _long_chains():
    import dsp
    from dsp.motion import Integrate

    highpass = dsp.Filter(band="highpass", cutoff=1.0)
    return {"time": [highpass, Integrate(method="time", zero_phase=False, f_low=1.0)],
            "frequency": [highpass, Integrate(method="frequency", f_low=1.0)]}


def variant_long(path: Path, mode: str, method: str, block_samples: int) -> dict:
    import dsp
    from dsp.blocks import run_in_blocks

    chain = _long_chains()[method]
    baseline = _status_mb("VmRSS")
    started = time.perf_counter()
    if mode == "whole":
        out = dsp.Chain(chain).apply(dsp.read(path)["long"])
    else:
        out = run_in_blocks(chain, path, channel="long", block_samples=block_samples)
    seconds = time.perf_counter() - started
    return {"seconds": seconds, "samples": out.n_samples, "peak_rss_mb": [_peak_rss_mb()],
            "baseline_rss_mb": baseline, "unit": out.unit}


def variant_agreement(path: Path, block_samples: int) -> dict:
    """Largest difference between the streamed and the whole-array time-integration chain, / peak."""
    import dsp
    from dsp.blocks import run_in_blocks

    chain = _long_chains()["time"]
    streamed = run_in_blocks(chain, path, channel="long", block_samples=block_samples).data
    whole = dsp.Chain(chain).apply(dsp.read(path)["long"]).data
    return {"relative_error": float(np.max(np.abs(streamed - whole)) / np.max(np.abs(whole)))}


def variant_capacity() -> dict:
    """A fixed CPU-bound numpy loop (filtering noise), timed: run it in 1 and in 2 processes at once."""
    from scipy import signal

    x = np.random.default_rng(0).normal(size=200_000)
    sos = signal.butter(4, 0.1, output="sos")
    started = time.perf_counter()
    for _ in range(150):
        signal.sosfilt(sos, x)
    return {"seconds": time.perf_counter() - started}


def _capacity() -> float:
    """How many cores' worth of work the machine delivered to 2 simultaneous processes just now."""
    alone = _run_variant(["capacity"])["seconds"]
    procs = [subprocess.Popen([sys.executable, __file__, "--variant", "capacity"], stdout=subprocess.PIPE, text=True)
             for _ in range(2)]
    together = [json.loads(p.communicate()[0].strip().splitlines()[-1])["seconds"] for p in procs]
    return 2 * alone / max(together)


def _run_variant(args: list[str]) -> dict:
    env = {k: v for k, v in os.environ.items() if k not in ("MALLOC_TRIM_THRESHOLD_",)}
    done = subprocess.run([sys.executable, __file__, "--variant", *args], capture_output=True, text=True,
                          env=env, check=False)
    if done.returncode != 0:
        raise RuntimeError(f"variant {args} failed:\n{done.stderr[-4000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


# ------------------------------------------------------------------ report
def _machine() -> str:
    cpu = "unknown CPU"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    return f"{cpu}, {os.cpu_count()} cores, {mem:.0f} GiB RAM, {platform.system()} {platform.release()}"


def _versions() -> str:
    import dask
    import distributed
    import h5py
    import scipy

    import dsp

    return (f"Python {platform.python_version()}, sigtune {dsp.__version__}, numpy {np.__version__}, "
            f"scipy {scipy.__version__}, dask {dask.__version__}, distributed {distributed.__version__}, "
            f"h5py {h5py.__version__}")


def run(quick: bool, repeat: int) -> str:
    n_files, n_samples, long_samples = (8, 10**6, 10**7) if quick else (40, 10**6, 10**8)
    block_samples = 1 << 20
    work = Path(tempfile.mkdtemp(prefix="sigtune-bench-"))
    try:
        folder = work / "campaign"
        print(f"writing {n_files} files x {n_samples} samples ...", file=sys.stderr)
        make_campaign(folder, n_files, n_samples)
        plan = [("serial loop (1 process)", ["serial"]),
                ("run_batch, 1 worker", ["batch", "1", "0"]),
                ("run_batch, 2 workers", ["batch", "2", "0"]),
                ("run_batch, 2 workers, Dask's default worker settings", ["batch", "2", "1"]),
                (RUNNING, ["batch", "2", "0"])]
        runs: dict[str, list[dict]] = {label: [] for label, _ in plan}
        capacity = [_capacity()]
        for rep in range(repeat):  # interleaved, so that a slow spell of the machine hits every way alike
            for k, (label, args) in enumerate(plan):
                print(f"[{rep + 1}/{repeat}] running {label} ...", file=sys.stderr)
                out = work / f"out_{rep}_{k}"
                kind, *rest = args
                if label == RUNNING:
                    runs[label].append(_with_running_cluster(2, [kind, str(folder), str(out), *rest]))
                else:
                    runs[label].append(_run_variant([kind, str(folder), str(out), *rest]))
                shutil.rmtree(out, ignore_errors=True)
        rows = {label: {"seconds": float(np.median([r["seconds"] for r in found])),
                        "task_seconds": float(np.median([r.get("task_seconds_sum", np.nan) for r in found])),
                        "all_seconds": [r["seconds"] for r in found], "samples": found[0]["samples"],
                        "peak_rss_mb": [max(values) for values in zip(*(r["peak_rss_mb"] for r in found))]}
                for label, found in runs.items()}
        capacity.append(_capacity())
        overhead = {w: _run_variant(["overhead", str(w)])["seconds"] for w in (1, 2)}
        imports = _run_variant(["imports"])
        print(f"writing a {long_samples}-sample channel ...", file=sys.stderr)
        long_path = work / "long.h5"
        _run_variant(["make_long", str(long_path), str(long_samples)])
        long_rows = {}
        for label, args in (
                ("whole array: dsp.read + Chain.apply", ["whole", "time"]),
                ("run_in_blocks (all streamed)", ["blocks", "time"]),
                ("whole array, frequency-domain integration", ["whole", "frequency"]),
                ("run_in_blocks, frequency-domain integration (a whole-record step)", ["blocks", "frequency"])):
            print(f"running {label} ...", file=sys.stderr)
            long_rows[label] = _run_variant(["long", str(long_path), *args, str(block_samples)])
        print("checking the streamed result against the whole-array one ...", file=sys.stderr)
        agreement = _run_variant(["agree", str(long_path), str(block_samples)])["relative_error"]
    finally:
        shutil.rmtree(work, ignore_errors=True)
    load = os.getloadavg()
    return _report(rows, overhead, imports, long_rows, agreement, n_files, n_samples, long_samples, block_samples,
                   quick, repeat, load, capacity)


def _report(rows, overhead, imports, long_rows, agreement, n_files, n_samples, long_samples, block_samples, quick,
            repeat, load, capacity) -> str:
    serial = rows["serial loop (1 process)"]["seconds"]
    lines = [
        "# Campaign batch runs and long records: benchmark results",
        "",
        f"Measured {datetime.now(timezone.utc):%Y-%m-%d %H:%M} UTC on {_machine()}.",
        f"{_versions()}.",
        "Produced by `python bench/bench_campaign.py`" + (" --quick (a smoke run, smaller sizes)" if quick else "")
        + f"; every way ran {repeat} times, interleaved, each in a fresh process (medians below). "
        f"Load average at the end: {load[0]:.1f} / {load[1]:.1f} / {load[2]:.1f} (1 / 5 / 15 min; the "
        "benchmark's own processes keep it near 1-2). The parallel capacity line below shows how much of "
        "the 2 cores other work left.",
        "",
        f"## Campaign: {n_files} files x {n_samples:.0e} samples (float64 HDF5, 10240 Hz)",
        "",
        "Session: causal 4th-order Butterworth high-pass at 2 Hz, then the default analysis (Welch PSD, "
        "one-third-octave bands, 5 peaks, quality audit, time/frequency/baseline integration compared). "
        "Each way reads every file, processes it and writes the processed channel and the summary. "
        "The run_batch times include starting and stopping the local cluster, except on the running "
        "cluster, which was started before the clock and stopped after it.",
        "",
        "| way | wall time, median (s) | all runs (s) | throughput (samples/s) | speed-up over the serial loop "
        "| peak RSS per process (MiB) |",
        "| --- | ---: | --- | ---: | ---: | --- |",
    ]
    for label, row in rows.items():
        rate = row["samples"] / row["seconds"]
        rss = ", ".join(f"{v:.0f}" for v in row["peak_rss_mb"])
        every = ", ".join(f"{v:.1f}" for v in row["all_seconds"])
        lines.append(f"| {label} | {row['seconds']:.1f} | {every} | {rate:.3g} | {serial / row['seconds']:.2f}x "
                     f"| {rss} |")
    two, running = rows["run_batch, 2 workers"], rows[RUNNING]
    fixed = two["seconds"] - two["task_seconds"] / 2
    lines += [
        "",
        f"Parallel capacity of the machine during the run: two processes running a fixed CPU-bound "
        f"filtering loop at once got through {capacity[0]:.2f}x (before the campaign) and {capacity[1]:.2f}x "
        f"(after it) the work of one alone; 2.0x would be two free cores. The speed-ups above cannot exceed it.",
        "",
        f"Where a cold run's time goes: with 2 workers the tasks themselves took {two['task_seconds']:.1f} s "
        f"(the sum over files, median run), against {serial:.1f} s for the serial loop "
        f"({100 * (two['task_seconds'] / serial - 1):+.0f} % with two processes at work at once). "
        f"The remaining {fixed:.1f} s of the wall time are fixed costs "
        f"of a run: the local cluster's start, one task and stop take {overhead[1]:.1f} s with 1 worker and "
        f"{overhead[2]:.1f} s with 2 (measured alone), and each new worker process imports sigtune "
        f"({imports['dsp']:.1f} s here, of which scipy.signal is most) before its first file, while the "
        f"serial loop imported it before its clock started. These costs do not grow with the campaign: "
        f"they are {100 * fixed / two['seconds']:.0f} % of this {two['seconds']:.0f} s run. A cluster kept "
        f"running (started once with `--preload dsp.campaign`, as a site that runs campaigns would) has none "
        f"of them.",
        "",
        f"Goal: >= 1.7x with 2 workers on this 2-core machine. Measured: {serial / running['seconds']:.2f}x on "
        f"a running 2-worker cluster (`sigtune batch --scheduler ADDRESS`), "
        f"{serial / two['seconds']:.2f}x with `--workers 2`, which starts and stops its own cluster inside "
        f"the run.",
        "",
        f"## One channel of {long_samples:.0e} float64 samples ({long_samples * 8 / 2**20:.0f} MiB) "
        f"in an HDF5 file, blocks of {block_samples} samples",
        "",
        "Filter-and-integrate chain: causal 4th-order Butterworth high-pass at 1 Hz, then integration to "
        "velocity by the time method with causal high-passes at 1 Hz (`Integrate(method='time', "
        "zero_phase=False)`), which streams. For contrast, the same with frequency-domain integration, "
        "which needs the whole record. RSS at the start is that of Python with sigtune imported.",
        "",
        "| way | wall time (s) | peak RSS (MiB) | peak RSS / channel size | (peak - start RSS) / channel size |",
        "| --- | ---: | ---: | ---: | ---: |",
    ]
    size_mb = long_samples * 8 / 2**20
    for label, row in long_rows.items():
        peak = row["peak_rss_mb"][0]
        lines.append(f"| {label} | {row['seconds']:.1f} | {peak:.0f} | {peak / size_mb:.2f} | "
                     f"{(peak - row['baseline_rss_mb']) / size_mb:.2f} |")
    lines += [
        "",
        f"Streamed and whole-array results of the time-integration chain differ by at most "
        f"{agreement:.1e} of the output's peak (the stated tolerance is 1e-9).",
        "",
        "Goal: peak RSS <= 2x the channel's size for the filter-and-integrate chain. The streamed chain "
        "holds its output array plus a few blocks per stage; a whole-record step holds its input, its output "
        "and its own working arrays (see `dsp/blocks.py`, Memory).",
        "",
    ]
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--repeat", type=int, default=3, help="runs of each campaign way (median reported)")
    parser.add_argument("--variant", nargs="+")
    args = parser.parse_args()
    if args.variant:
        kind, *rest = args.variant
        if kind == "serial":
            result = variant_serial(Path(rest[0]), Path(rest[1]))
        elif kind == "batch":
            result = variant_batch(Path(rest[0]), Path(rest[1]), int(rest[2]), rest[3] == "1",
                                   rest[4] if len(rest) > 4 else None)
        elif kind == "cluster":
            serve_cluster(int(rest[0]))
            return
        elif kind == "overhead":
            result = variant_cluster_overhead(int(rest[0]))
        elif kind == "make_long":
            make_long(Path(rest[0]), int(rest[1]))
            result = {}
        elif kind == "imports":
            result = variant_imports()
        elif kind == "capacity":
            result = variant_capacity()
        elif kind == "agree":
            result = variant_agreement(Path(rest[0]), int(rest[1]))
        else:
            result = variant_long(Path(rest[0]), rest[1], rest[2], int(rest[3]))
        print(json.dumps(result))
        return
    report = run(args.quick, args.repeat)
    print(report)
    if not args.quick:
        RESULTS.parent.mkdir(parents=True, exist_ok=True)
        from dsp._atomic import write_text_atomic

        write_text_atomic(RESULTS, report)


if __name__ == "__main__":
    main()
