"""Campaign batch runs: one session replayed over many recordings on Dask.

:func:`run_batch` applies a session's setup, chain and analysis (exactly
:meth:`dsp.Session.apply_channel`, so the numbers are the dashboard's) to
every selected channel of every input file. Each file is one Dask task: the
task reads its own file on the worker, processes it and writes its outputs
there, and only a small record travels back (a task round trip costs about
10 ms, so whole files are the right grain). Dask is imported on first use,
so ``import dsp`` stays light.

Output folder ``OUT``::

    processed/<name>.h5        the processed channels of each input (dsp.write; other formats on request)
    summaries/<name>.json      the dsp.analyse summary of each channel of that input
    done/<name>.json           the done marker, written last (see Resuming)
    summary.csv, summary.json  one row per input and channel, over all inputs of the run
    logs/run-<UTC time>.json   the run log: session, its hash, versions, one record per input

``<name>`` is the input's file stem (with a short hash of its path added when
two inputs share a stem). Every file is written atomically (a temporary name
in the same folder, then a rename), so an interrupted run never leaves a
half-written output under a final name.

Resuming
    A done marker records the session hash (:meth:`dsp.Session.fingerprint`),
    the output format and the input's size and modification time (and its
    SHA-256, for the record). A rerun skips an input whose marker matches and
    whose outputs exist; ``force=True`` redoes it. A failed input has no
    marker, so a rerun tries it again.
Failures
    A file that cannot be read or processed is recorded with its error (in
    the summary's ``error`` column and the run log) and the run goes on;
    ``BatchResult.ok`` is False if any input failed. A task starts by removing
    its input's old done marker and, if it fails, removes the outputs it may
    have written, so an input has either a marker and complete outputs or
    neither. A worker that dies is replaced by Dask and its task retried on
    another worker (``distributed.scheduler.allowed-failures`` times); an input
    that kills every worker trying it is recorded as failed, with why.
    Temporaries (``.<name>.<random>.part``) left by a process that died while
    writing are removed at the start and end of a run. One run at a time may
    use an output folder.
Long records
    HDF5 channels of :data:`LONG_RECORD_SAMPLES` samples or more are streamed
    from the file through :func:`dsp.blocks.run_in_blocks` (equal to the whole-
    array result within its stated tolerance), then analysed.
Cluster
    By default a local cluster of ``workers`` processes with one thread each,
    bound to 127.0.0.1 with no dashboard. With ``scheduler`` an existing
    cluster is used; its workers must have sigtune installed and see the
    input and output paths (a shared file system). A local cluster's start,
    and each new worker's import of sigtune (mostly scipy.signal), cost a
    few seconds per run whatever its size; a cluster kept running, its
    workers started with ``--preload dsp.campaign``, pays them once
    (``bench/results/campaign.md``).
Worker settings
    Dask's nanny sets ``MALLOC_TRIM_THRESHOLD_=65536`` in each worker, which
    turns off glibc's adaptive allocation threshold, so every large numpy
    temporary is mapped and unmapped afresh; and each worker runs a
    statistical profiler that takes the GIL every 10 ms. :data:`WORKER_CONFIG`
    turns both off for local clusters (the effect is measured in
    ``bench/bench_campaign.py``). Workers keep Dask's one BLAS thread each.
"""

from __future__ import annotations

import contextlib
import csv
import glob
import hashlib
import json
import logging
import os
import platform
import resource
import sys
import time
import traceback
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

from ._atomic import atomic_path, write_text_atomic
from ._version import __version__
from .analysis import analyse
from .errors import SigtuneError
from .session import Session, declare_units, file_sha256

__all__ = ["run_batch", "BatchResult", "expand_inputs", "LONG_RECORD_SAMPLES", "WORKER_CONFIG"]

#: HDF5 channels at least this long (16.8 M samples, 134 MB as float64) are streamed in blocks.
LONG_RECORD_SAMPLES = 1 << 24
#: Dask configuration of local workers (None unsets a variable Dask's nanny would set):
#: glibc's adaptive allocation threshold back on, and no statistical profiler taking the
#: GIL every 10 ms. Both measured in ``bench/bench_campaign.py``.
WORKER_CONFIG = {"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None,
                 "distributed.worker.profile.enabled": False}
#: ``run_batch(scheduler=SYNCHRONOUS)`` runs every input in the calling process, without Dask.
SYNCHRONOUS = "synchronous"
#: File name endings read as recordings when an input is a folder.
RECORDING_SUFFIXES = (".csv", ".tsv", ".wav", ".h5", ".hdf5", ".npz")
MARKER_VERSION = 1


# ------------------------------------------------------------------ inputs and names
def expand_inputs(inputs: Iterable[str | os.PathLike], exclude: str | os.PathLike | None = None) -> list[Path]:
    """Return the recording files named by ``inputs`` (files, folders, glob patterns), in order, once each.

    A folder contributes its recordings (by extension, not recursive, sorted);
    a pattern its matching files (``**`` recurses). Files under ``exclude``
    (the output folder) are left out. An input that names nothing raises.
    """
    found: dict[Path, None] = {}
    skip = Path(exclude).resolve() if exclude is not None else None
    for item in inputs:
        text = os.fspath(item)
        path = Path(text)
        if path.is_file():
            matches = [path]
        elif path.is_dir():
            matches = sorted(p for p in path.iterdir() if p.is_file() and not p.name.startswith(".")
                             and p.suffix.lower() in RECORDING_SUFFIXES)
            if not matches:
                raise SigtuneError(f"the folder holds no recording (extensions {', '.join(RECORDING_SUFFIXES)})",
                                   f"input {text!r}")
        elif glob.has_magic(text):
            matches = sorted(Path(p) for p in glob.glob(text, recursive=True) if Path(p).is_file())
            if not matches:
                raise SigtuneError("the pattern matches no file", f"input {text!r}")
        else:
            raise SigtuneError("no such file or folder, and not a glob pattern", f"input {text!r}")
        for match in matches:
            resolved = match.resolve()
            if skip is None or skip not in resolved.parents:
                found.setdefault(resolved, None)
    return list(found)


def _output_names(paths: Sequence[Path]) -> dict[Path, str]:
    """File stem per input; inputs sharing a stem get a short hash of their path appended."""
    stems = [p.stem for p in paths]
    return {p: (p.stem if stems.count(p.stem) == 1 else
                f"{p.stem}-{hashlib.sha1(str(p).encode()).hexdigest()[:8]}") for p in paths}


# ------------------------------------------------------------------ the task (runs on a worker)
def _input_key(path: Path) -> dict[str, int]:
    st = path.stat()
    return {"input_size": st.st_size, "input_mtime_ns": st.st_mtime_ns}


def _process_file(session: Session, path: Path, block_samples: int):
    """Process every selected channel of one file; return (Recording of processed channels, summaries)."""
    from .blocks import run_in_blocks
    from .channel import Recording
    from .io import format_for, read
    from .io.hdf5 import channel_info

    if format_for(path) == "h5":  # read the long channels' facts only; stream them later
        rows = channel_info(path)
        names = session.channel_names([row["name"] for row in rows])
        long = {row["name"] for row in rows if row["name"] in names and row["n_samples"] >= LONG_RECORD_SAMPLES}
        short = [n for n in names if n not in long]
        recording = read(path, channels=short) if short else None
    else:
        recording = read(path)
        names, long = session.channel_names(recording), set()
    processed, summaries = [], {}
    for name in names:
        if name in long:
            declared, steps, locations = session.steps_for(name)
            channel = run_in_blocks(steps, path, channel=name, block_samples=block_samples,
                                    declare=lambda ch, d=declared: declare_units(ch, d), locations=locations)
            summary = analyse(channel, session.analysis)
        else:
            channel, summary = session.apply_channel(recording[name])
        processed.append(channel)
        summaries[name] = summary
    return Recording(processed, source=str(path)), summaries


def _peak_rss_bytes() -> int:
    """Peak resident memory of this process in bytes.

    Linux's ``VmHWM`` counts this process image only; ``ru_maxrss`` would also
    count the parent's memory at the time it started the worker.
    """
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024  # kB
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # KiB on Linux


def process_input(path: str, session_data: dict, out: str, name: str, output_format: str = "h5",
                  block_samples: int = 1 << 20) -> dict[str, Any]:
    """Process one input file and write its outputs; return the record of what happened.

    This is the Dask task of :func:`run_batch` (a plain function, callable
    in-process too). It never raises for a problem with the file: a failure
    is returned as ``{"status": "failed", "error": ...}``.
    """
    started = time.perf_counter()
    path_obj, out_dir = Path(path), Path(out)
    record: dict[str, Any] = {"input": str(path_obj), "name": name, "pid": os.getpid(),
                              "host": platform.node()}
    from .io import FORMATS

    output = out_dir / "processed" / f"{name}{FORMATS[output_format][0]}"
    summary_file = out_dir / "summaries" / f"{name}.json"
    marker_file = out_dir / "done" / f"{name}.json"
    try:
        # An old marker would vouch for outputs this attempt is about to replace: it goes first.
        marker_file.unlink(missing_ok=True)
        session = Session.from_dict(session_data, where="session")
        key = _input_key(path_obj)
        record["input_sha256"] = file_sha256(path_obj)
        recording, summaries = _process_file(session, path_obj, block_samples)
        from .io import write

        write(recording, output, format=output_format)
        write_text_atomic(summary_file, json.dumps({"input": str(path_obj), "channels": summaries},
                                                   allow_nan=False) + "\n")
        record.update(status="done", channels=summaries, outputs=[str(output.relative_to(out_dir))],
                      n_samples=sum(ch.n_samples for ch in recording))
        marker = {"marker_version": MARKER_VERSION, "input": str(path_obj), **key,
                  "input_sha256": record["input_sha256"], "session_hash": session.fingerprint(),
                  "output_format": output_format, "outputs": record["outputs"],
                  "summary": str(summary_file.relative_to(out_dir)), "finished_utc": _utc_now(),
                  "sigtune": __version__}
        write_text_atomic(marker_file, json.dumps(marker, indent=1) + "\n")  # last
    except Exception as err:  # noqa: BLE001 - any failure of one file is recorded and the run goes on
        record.update(status="failed", error=_error_text(err, path_obj), error_type=type(err).__name__)
        if not isinstance(err, (SigtuneError, OSError)):
            record["traceback"] = traceback.format_exc(limit=8)
        # No marker, so no outputs either: a file in processed/ or summaries/ is always a finished one.
        sidecar = [output.with_name(output.name + ".json")] if output_format == "wav" else []
        for leftover in (output, *sidecar, summary_file):
            with contextlib.suppress(OSError):
                leftover.unlink(missing_ok=True)
    record["seconds"] = time.perf_counter() - started
    record["peak_rss_bytes"] = _peak_rss_bytes()
    return record


def _error_text(err: BaseException, path: Path) -> str:
    if isinstance(err, FileNotFoundError) and Path(err.filename or "") == path:
        return (f"{path}: not found ({err.strerror}); was it deleted or moved after the run started? "
                f"The other inputs went on")
    if isinstance(err, SigtuneError):
        text = str(err)
        return text if str(path) in text else f"{path}: {text}"
    if isinstance(err, OSError) and err.strerror:
        return f"{err.filename or path}: {err.strerror}"
    return f"{path}: {type(err).__name__}: {err}"


def _utc_now() -> str:
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


# ------------------------------------------------------------------ resuming
def _marker_matches(out: Path, name: str, path: Path, session_hash: str, output_format: str) -> dict | None:
    """Return the done marker of ``name`` if it is still valid for this input and session, else None."""
    marker_file = out / "done" / f"{name}.json"
    try:
        marker = json.loads(marker_file.read_text(encoding="utf-8"))
        same = (marker.get("marker_version") == MARKER_VERSION and marker.get("input") == str(path)
                and marker.get("session_hash") == session_hash and marker.get("output_format") == output_format
                and {k: marker.get(k) for k in ("input_size", "input_mtime_ns")} == _input_key(path))
        complete = all((out / rel).is_file() for rel in [*marker.get("outputs", []), marker.get("summary", "")])
    except (OSError, ValueError, TypeError, AttributeError):
        return None
    return marker if same and complete else None


def _skipped_record(out: Path, name: str, path: Path, marker: dict) -> dict | None:
    """The record of an input done by an earlier run, or None if its summary cannot be read (redo it)."""
    try:
        summary = json.loads((out / marker["summary"]).read_text(encoding="utf-8"))
        summary["channels"].items()
    except (OSError, ValueError, TypeError, KeyError, AttributeError):
        return None
    return {"input": str(path), "name": name, "status": "skipped", "channels": summary["channels"],
            "outputs": marker["outputs"], "input_sha256": marker.get("input_sha256"),
            "done_utc": marker.get("finished_utc")}


#: Sub-folders of the output folder that sigtune writes into (and the folder itself).
_OUTPUT_FOLDERS = ("", "processed", "summaries", "done", "logs")


def _remove_temporaries(out: Path) -> list[str]:
    """Remove the temporaries of :func:`dsp._atomic.atomic_path` (``.<name>.<random>.part``) left in the
    output folders by a process that died while writing; return their paths relative to ``out``.

    Only one run at a time may use an output folder: another run's temporaries would be removed too.
    """
    removed = []
    for folder in _OUTPUT_FOLDERS:
        for tmp in sorted((out / folder).glob(".*.part")):
            with contextlib.suppress(FileNotFoundError):
                tmp.unlink()
                removed.append(str(tmp.relative_to(out)))
    return removed


# ------------------------------------------------------------------ summary table
def _flat_row(record: dict, channel: str | None, summary: dict | None) -> dict[str, Any]:
    row: dict[str, Any] = {"file": record["input"], "status": record["status"], "channel": channel,
                           "error": record.get("error")}
    if summary is None:
        return row
    for key in ("unit", "quantity", "fs_hz", "n_samples", "duration_s", "valid_duration_s", "mean", "rms",
                "peak", "crest_factor"):
        row[key] = summary.get(key)
    findings = summary.get("findings") or []
    row["n_findings"] = len(findings)
    row["findings"] = "; ".join(f"{f.get('severity')}:{f.get('kind')}" for f in findings)
    for k, peak in enumerate(summary.get("peaks") or [], start=1):
        row[f"peak{k}_hz"], row[f"peak{k}_value"] = peak.get("frequency_hz"), peak.get("value")
    bands = summary.get("band_levels") or {}
    for label, value in zip(bands.get("nominal", []), bands.get("values", [])):
        row[f"band_{label}_hz"] = value
    for key, value in (summary.get("evaluation") or {}).items():
        if isinstance(value, (int, float, str, bool)) or value is None:
            row[f"eval_{key}"] = value
    row["output"] = ";".join(record.get("outputs", []))
    return row


def _summary_rows(records: list[dict]) -> list[dict]:
    rows = []
    for record in records:
        channels = record.get("channels") or {}
        if not channels:
            rows.append(_flat_row(record, None, None))
        rows.extend(_flat_row(record, name, summary) for name, summary in channels.items())
    return rows


def _write_summaries(out: Path, records: list[dict], session_hash: str) -> tuple[Path, Path]:
    rows = _summary_rows(records)
    columns: dict[str, None] = {}
    for row in rows:
        columns.update(dict.fromkeys(row))
    csv_path = out / "summary.csv"
    with atomic_path(csv_path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(columns))
        writer.writeheader()
        writer.writerows(rows)
    details = [{"file": r["input"], "status": r["status"], "error": r.get("error"), "outputs": r.get("outputs", []),
                "channels": r.get("channels") or {}} for r in records]
    json_path = write_text_atomic(out / "summary.json", json.dumps(
        {"session_hash": session_hash, "rows": rows, "files": details}, indent=1, allow_nan=False) + "\n")
    return csv_path, json_path


def _versions() -> dict[str, str]:
    import numpy
    import scipy

    found = {"sigtune": __version__, "python": platform.python_version(), "numpy": numpy.__version__,
             "scipy": scipy.__version__}
    for module in ("dask", "distributed", "h5py"):
        try:
            found[module] = __import__(module).__version__
        except ImportError:  # pragma: no cover - dependencies of sigtune
            found[module] = "not installed"
    return found


# ------------------------------------------------------------------ the run
@dataclass
class BatchResult:
    """What :func:`run_batch` did.

    Attributes
    ----------
    done, skipped : list of str
        Inputs processed in this run, and inputs already done by an earlier run.
    failed : dict
        Input -> error message.
    records : list of dict
        One record per input (status, summaries, outputs, seconds, worker peak RSS ...).
    out, summary_csv, summary_json, run_log : Path
    session_hash : str
    seconds : float
        Wall time of the run.
    n_samples : int
        Samples processed in this run (skipped inputs not counted).
    """

    out: Path
    session_hash: str
    done: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    failed: dict[str, str] = field(default_factory=dict)
    records: list[dict] = field(default_factory=list)
    summary_csv: Path | None = None
    summary_json: Path | None = None
    run_log: Path | None = None
    seconds: float = 0.0
    n_samples: int = 0

    @property
    def ok(self) -> bool:
        """True when no input failed."""
        return not self.failed

    @property
    def samples_per_s(self) -> float:
        """Throughput of this run in samples/s."""
        return self.n_samples / self.seconds if self.seconds > 0 else 0.0


class _Cluster:
    """A Dask client on an existing scheduler, or on a local cluster started (and stopped) here."""

    def __init__(self, workers: int, scheduler: str | None):
        import dask
        from dask.distributed import Client, LocalCluster

        self.cluster = None
        if scheduler:
            try:  # Dask's own connect timeout (distributed.comm.timeouts.connect, 30 s by default)
                self.client = Client(scheduler, timeout=dask.config.get("distributed.comm.timeouts.connect"))
            except (OSError, TimeoutError) as err:
                raise SigtuneError(f"cannot reach the Dask scheduler at {scheduler!r} ({err}); check the "
                                   f"address (e.g. tcp://127.0.0.1:8786) and that it is running",
                                   "scheduler") from None
            return
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            raise SigtuneError(f"must be a whole number >= 1; got {workers!r}", "workers")
        with dask.config.set(WORKER_CONFIG):
            self.cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                                        host="127.0.0.1", dashboard_address=None, silence_logs=logging.ERROR)
        self.client = Client(self.cluster)

    def __enter__(self):
        return self.client

    def __exit__(self, *exc):
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def _as_session(session) -> tuple[Session, str | None]:
    if isinstance(session, Session):
        return session, str(session.location) if session.location else None
    return Session.load(session, verify_source=False), str(session)


def run_batch(session, inputs, out, workers: int = 2, scheduler: str | None = None, force: bool = False,
              output_format: str = "h5", progress: bool = True, block_samples: int = 1 << 20) -> BatchResult:
    """Apply a session to every selected channel of every input, on Dask.

    Parameters
    ----------
    session : Session or path
        The session (a file is loaded with :meth:`Session.load`).
    inputs : iterable of str or path
        Files, folders and glob patterns (see :func:`expand_inputs`).
    out : str or path
        Output folder (created if missing); layout in the module docstring.
    workers : int, default 2
        Processes of the local cluster (one thread each).
    scheduler : str, optional
        Address of an existing Dask scheduler, used instead of a local cluster;
        ``"synchronous"`` runs every input in this process, one after another,
        without Dask (for debugging and tests: a debugger or a patched
        function sees the work).
    force : bool, default False
        Redo inputs already done with this session.
    output_format : str, default ``"h5"``
        Format of the processed channels: ``h5``, ``npz``, ``csv``, ``tsv`` or ``wav``.
    progress : bool, default True
        Show a progress bar on stderr (files done, samples/s, time left).
    block_samples : int, default 2**20
        Block length for long HDF5 channels.

    Returns
    -------
    BatchResult
        ``.ok`` is False if any input failed; failures carry their error.
    """
    from .io import format_for

    started_utc, started = _utc_now(), time.perf_counter()
    session, session_file = _as_session(session)
    output_format = format_for("x", output_format)
    out = Path(out).absolute()
    paths = expand_inputs(inputs, exclude=out)
    for sub in ("processed", "summaries", "done", "logs"):
        (out / sub).mkdir(parents=True, exist_ok=True)
    names = _output_names(paths)
    session_hash = session.fingerprint()
    result = BatchResult(out=out, session_hash=session_hash)
    records: dict[Path, dict] = {}
    todo = []
    removed = _remove_temporaries(out)  # of an earlier run whose process died mid-write
    for path in paths:
        marker = None if force else _marker_matches(out, names[path], path, session_hash, output_format)
        skipped = None if marker is None else _skipped_record(out, names[path], path, marker)
        if skipped is not None:
            records[path] = skipped
        else:
            todo.append(path)
    if progress and records:
        print(f"sigtune batch: {len(records)} input(s) already done with this session, skipped "
              f"(use --force to redo them)", file=sys.stderr)
    status = "interrupted"
    try:
        if todo:
            _run_tasks(todo, names, session, out, output_format, block_samples, workers, scheduler, progress,
                       records)
        status = "finished"
    finally:
        ordered = [records[p] for p in paths if p in records]
        result.records = ordered
        for record in ordered:
            if record["status"] == "done":
                result.done.append(record["input"])
            elif record["status"] == "skipped":
                result.skipped.append(record["input"])
            else:
                result.failed[record["input"]] = record["error"]
        result.n_samples = sum(r.get("n_samples", 0) for r in ordered if r["status"] == "done")
        removed += _remove_temporaries(out)  # of workers that died mid-write in this run
        result.summary_csv, result.summary_json = _write_summaries(out, ordered, session_hash)
        result.seconds = time.perf_counter() - started
        log = {"status": status, "started_utc": started_utc, "finished_utc": _utc_now(),
               "seconds": result.seconds, "session_file": session_file, "session_hash": session_hash,
               "session": session.to_dict(), "versions": _versions(),
               "cluster": {"scheduler": scheduler, "workers": None if scheduler else workers},
               "force": force, "output_format": output_format, "temporaries_removed": removed,
               "counts": {"inputs": len(paths), "done": len(result.done), "skipped": len(result.skipped),
                          "failed": len(result.failed)},
               "samples_per_s": result.samples_per_s, "files": ordered}
        stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S.%fZ")
        result.run_log = write_text_atomic(out / "logs" / f"run-{stamp}.json",
                                           json.dumps(log, indent=1, allow_nan=False) + "\n")
    return result


def _run_tasks(todo, names, session, out, output_format, block_samples, workers, scheduler, progress,
               records) -> None:
    from dask.distributed import as_completed
    from tqdm import tqdm

    session_data = session.to_dict()
    todo = sorted(todo, key=_size_or_zero, reverse=True)  # longest first: less idle time at the end
    if scheduler == SYNCHRONOUS:
        _run_in_process(todo, names, session_data, out, output_format, block_samples, progress, records)
        return
    with _Cluster(workers, scheduler) as client, tqdm(total=len(todo), unit="file", desc="sigtune batch",
                                                      file=sys.stderr, disable=not progress) as bar:
        futures = {client.submit(process_input, str(p), session_data, str(out), names[p], output_format,
                                 block_samples, pure=False, key=f"sigtune-{names[p]}-{os.urandom(4).hex()}"): p
                   for p in todo}
        samples, t0 = 0, time.perf_counter()
        for future in as_completed(futures):
            path = futures[future]
            try:
                record = future.result()
            except Exception as err:  # noqa: BLE001 - a lost worker or task: record it, go on
                record = {"input": str(path), "name": names[path], "status": "failed",
                          "error": _task_error_text(err, path), "error_type": type(err).__name__}
            records[path] = record
            samples = _advance(bar, record, records, samples, t0)


def _task_error_text(err: BaseException, path: Path) -> str:
    """Why a Dask task ended without a record (process_input itself never raises)."""
    if type(err).__name__ == "KilledWorker":  # distributed.scheduler.KilledWorker
        return (f"{path}: the worker process died while processing this file, on every worker that tried it "
                f"(out of memory, a crash in a compiled library, or killed from outside); the other inputs "
                f"went on. Rerun to retry it; run it alone with --workers 1 to see whether it fails again "
                f"({err})")
    return f"{path}: the Dask task failed ({type(err).__name__}: {err})"


def _advance(bar, record: dict, records: dict, samples: int, t0: float) -> int:
    """Count one finished input on the progress bar; return the samples processed so far."""
    samples += record.get("n_samples", 0)
    bar.set_postfix_str(f"{samples / max(time.perf_counter() - t0, 1e-9) / 1e6:.2f} Msamples/s, "
                        f"{sum(r['status'] == 'failed' for r in records.values())} failed", refresh=False)
    bar.update(1)
    return samples


def _size_or_zero(path: Path) -> int:
    """The file's size; 0 for a file gone since the inputs were listed (its task reports it)."""
    try:
        return path.stat().st_size
    except OSError:
        return 0


def _run_in_process(todo, names, session_data, out, output_format, block_samples, progress, records) -> None:
    """``scheduler="synchronous"``: every input in this process, one after another (debugging, tests)."""
    from tqdm import tqdm

    t0, samples = time.perf_counter(), 0
    with tqdm(total=len(todo), unit="file", desc="sigtune batch", file=sys.stderr, disable=not progress) as bar:
        for path in todo:
            record = process_input(str(path), session_data, str(out), names[path], output_format, block_samples)
            records[path] = record
            samples = _advance(bar, record, records, samples, t0)
