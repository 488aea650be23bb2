"""The explorer's processing pipeline: stages with their own caches.

Stages, in working order (an arrow means "feeds")::

    source -> channel -> conditioned (the dsp.Chain, cached step by step) -> motion
                      \\-> quality           \\-> spectrum, bands, summary
    reference (calibrated/cropped/detrended input of the filter) -> raw_spectrum
    response (the filter design alone)

Each stage is cached on a key made of the dataset id plus the settings that
stage reads, chained to the key of the stage it consumes, so a change of a
setting recomputes exactly the stages downstream of it. ``Pipeline.counts``
counts the computations per stage (tests assert on it). Keys are built from
settings, never by hashing arrays (hashing samples a large array and can hit a
stale entry after a one-sample change).

Recordings are shared process-wide (:data:`SOURCES`): two sessions on the same
file hold one copy of its samples.
"""

from __future__ import annotations

import hashlib
import json
import threading
import time
import uuid
from collections import Counter, OrderedDict
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

import dsp
from dsp import Chain, Channel, Recording, SigtuneError
from dsp.conditioning import Crop, Detrend
from dsp.filters import Filter

__all__ = ["Pipeline", "Results", "SourceStore", "SOURCES", "build_chain", "setup_entry", "step_group",
           "FAST_STAGES", "SLOW_STAGES", "DEMO_PREFIX"]

DEMO_PREFIX = "demo:"
FAST_STAGES = ("source", "channel", "conditioned", "response", "raw_spectrum", "preview")
SLOW_STAGES = ("spectrum", "bands", "motion", "quality", "advice", "summary")

# Which settings group (and so which card's message line) a failing step belongs to.
_STEP_GROUPS = {"crop": "crop", "detrend": "crop", "filter": "filter",
                "resample": "resample"}


def step_group(op: str) -> str:
    """Return the settings group whose message line reports a failure of step ``op``."""
    return _STEP_GROUPS.get(op, "conditioning")


class _LRU:
    """A tiny least-recently-used map (a few entries: toggling back is instant)."""

    def __init__(self, size: int):
        self.size = size
        self._items: OrderedDict = OrderedDict()

    def get(self, key):
        if key in self._items:
            self._items.move_to_end(key)
            return True, self._items[key]
        return False, None

    def put(self, key, value):
        self._items[key] = value
        self._items.move_to_end(key)
        while len(self._items) > self.size:
            self._items.popitem(last=False)

    def clear(self):
        self._items.clear()


class SourceStore:
    """Recordings shared by every session of the process, keyed by dataset id.

    A file's id is its resolved path plus modification time and size, so an
    edited file is read again. In-memory recordings (the demo, a notebook's
    own data) get an id of their own.
    """

    def __init__(self, size: int = 4):
        self._lock = threading.Lock()
        self._cache = _LRU(size)
        self._pinned: dict[str, Recording] = {}
        self._sha: dict[str, str | None] = {}

    def dataset_id(self, path: str) -> str:
        """Return the id of ``path`` ("demo:<scenario>" or a file), or raise SigtuneError."""
        if path.startswith(DEMO_PREFIX) or path in self._pinned:
            return path
        p = Path(path).expanduser()
        if not p.is_file():
            hint = "it is a folder; name a file inside it" if p.is_dir() else "check the path"
            raise SigtuneError(f"no such recording file: {str(p)!r} ({hint}). Readable formats: "
                               f"csv, tsv, wav, h5/hdf5, npz", "file")
        st = p.resolve().stat()
        return f"file:{p.resolve()}:{st.st_mtime_ns}:{st.st_size}"

    def get(self, dataset_id: str) -> Recording:
        """Return the recording with this id, reading it on first use."""
        if dataset_id in self._pinned:
            return self._pinned[dataset_id]
        with self._lock:
            hit, rec = self._cache.get(dataset_id)
            if hit:
                return rec
        rec = self._read(dataset_id)
        with self._lock:
            self._cache.put(dataset_id, rec)
        return rec

    @staticmethod
    def _read(dataset_id: str) -> Recording:
        if dataset_id.startswith(DEMO_PREFIX):
            from dsp.demo import demo_recording

            return demo_recording(dataset_id[len(DEMO_PREFIX):])
        path = dataset_id[len("file:"):].rsplit(":", 2)[0]
        try:
            return dsp.io.read(path)
        except SigtuneError as err:
            raise err if str(path) in str(err) else err.located(path) from None

    def pin(self, recording: Recording, dataset_id: str | None = None) -> str:
        """Keep an in-memory recording under an id (returned) until :meth:`unpin`."""
        dataset_id = dataset_id or f"memory:{recording.source or 'recording'}:{uuid.uuid4().hex[:8]}"
        self._pinned[dataset_id] = recording
        return dataset_id

    def unpin(self, dataset_id: str) -> None:
        """Forget an in-memory recording (when the session that made it closes)."""
        self._pinned.pop(dataset_id, None)

    def sha256(self, dataset_id: str) -> str | None:
        """SHA-256 of the file behind ``dataset_id`` (None for in-memory data), computed once."""
        if not dataset_id.startswith("file:"):
            return None
        if dataset_id not in self._sha:
            digest = hashlib.sha256()
            with open(dataset_id[len("file:"):].rsplit(":", 2)[0], "rb") as fh:
                for block in iter(lambda: fh.read(1 << 20), b""):
                    digest.update(block)
            self._sha[dataset_id] = digest.hexdigest()
        return self._sha[dataset_id]


SOURCES = SourceStore()


def _key(*parts) -> str:
    return json.dumps(parts, sort_keys=True, default=str)


def filter_step(snap: Mapping[str, Any]) -> Filter | None:
    """The filter the settings describe, or None when filtering is off (may raise SigtuneError)."""
    if snap["filter_band"] == "none":
        return None
    paired = snap["filter_band"] in ("bandpass", "bandstop")
    cutoff = [snap["cutoff"], snap["cutoff_high"]] if paired else snap["cutoff"]
    return Filter(family=snap["filter_family"], band=snap["filter_band"], order=snap["filter_order"],
                  cutoff=cutoff, zero_phase=snap["zero_phase"], ripple_db=snap["ripple_db"],
                  attenuation_db=snap["attenuation_db"], cutoff_mode=snap["cutoff_mode"])


def resample_step(snap: Mapping[str, Any]):
    """The resampling step the settings describe, or None (may raise SigtuneError)."""
    if snap["resample_by"] == "none":
        return None
    from dsp.resampling import Resample

    if snap["resample_by"] == "rate":
        return Resample(fs_out=snap["resample_fs"])
    return Resample(ratio=snap["resample_ratio"])


def build_chain(snap: Mapping[str, Any]) -> tuple[Chain, int]:
    """Build the conditioning chain from the settings, in working order (crop, detrend, filter, resample).

    Returns the chain and the number of leading steps that make the
    *reference* (the filter's input: cropped and detrended), whose spectrum
    is the "raw" one plotted beside the processed spectrum. Calibration is
    not a chain step: the session's ``setup`` does it before the chain, as the
    batch runner does. A step whose settings are invalid raises SigtuneError
    located at its settings group.
    """
    steps = []
    builders = [
        ("crop", lambda: Crop(snap["crop_start_s"], snap["crop_end_s"])
         if snap["crop_start_s"] > 0 or snap["crop_end_s"] is not None else None),
        ("crop", lambda: Detrend(snap["detrend"]) if snap["detrend"] != "none" else None),
        ("filter", lambda: filter_step(snap)),
        ("resample", lambda: resample_step(snap)),
    ]
    n_reference = 0
    for group, build in builders:
        try:
            step = build()
        except SigtuneError as err:
            raise _Located(group, err) from None
        if step is not None:
            steps.append(step)
            if group == "crop":
                n_reference = len(steps)
    return Chain(steps), n_reference


def setup_entry(snap: Mapping[str, Any]) -> dict:
    """The session ``setup`` entry of the chosen channel: declared unit/quantity and calibration."""
    return {"unit": snap["unit"], "quantity": snap["quantity"], "sensitivity": snap["sensitivity"],
            "sensitivity_unit": snap["sensitivity_unit"]}


class _Located(Exception):
    """A SigtuneError together with the settings group it belongs to."""

    def __init__(self, group: str, error: SigtuneError):
        super().__init__(str(error))
        self.group, self.error = group, error


@dataclass
class Results:
    """What one run of the pipeline produced.

    ``values`` maps a stage name to its output (absent when the stage could
    not run); ``errors`` maps a settings group to the SigtuneError text to
    show beside those settings; ``recomputed`` names the stages computed
    afresh in this run (the rest came from the caches); ``cancelled`` says
    the run was dropped part-way because newer settings were waiting.
    """

    values: dict[str, Any] = field(default_factory=dict)
    errors: dict[str, str] = field(default_factory=dict)
    recomputed: set[str] = field(default_factory=set)
    seconds: dict[str, float] = field(default_factory=dict)
    cancelled: bool = False
    should_stop: Callable[[], bool] = field(default=lambda: False, repr=False)

    def copy(self) -> "Results":
        """A shallow copy (safe to read on another thread while this run goes on)."""
        return Results(dict(self.values), dict(self.errors), set(self.recomputed), dict(self.seconds),
                       self.cancelled, self.should_stop)

    def __getitem__(self, stage: str):
        return self.values[stage]

    def get(self, stage: str, default=None):
        return self.values.get(stage, default)

    def __contains__(self, stage: str) -> bool:
        return stage in self.values


class Pipeline:
    """Per-session stage caches and the runs that walk them.

    ``counts[stage]`` is the number of times the stage was computed (not
    served from its cache). Thread-safe: runs may overlap (the page runs the
    fast stages of a new change while the slow stages of the previous one
    finish); the caches are locked only while read or written, never while a
    stage computes.
    """

    def __init__(self, sources: SourceStore = SOURCES, cache_size: int = 3):
        self.sources = sources
        self.counts: Counter = Counter()
        self._caches: dict[str, _LRU] = {}
        self._cache_size = cache_size
        self._lock = threading.Lock()

    def clear(self) -> None:
        """Drop every cached result (the shared recordings stay)."""
        with self._lock:
            for cache in self._caches.values():
                cache.clear()

    def _cached(self, res: Results, stage: str, key: str, compute: Callable[[], Any]):
        with self._lock:
            hit, value = self._caches.setdefault(stage, _LRU(self._cache_size)).get(key)
        if not hit:
            if res.should_stop():
                raise _Stop
            started = time.perf_counter()
            value = compute()
            res.seconds[stage] = time.perf_counter() - started
            res.recomputed.add(stage)
            with self._lock:
                self.counts[stage] += 1
                self._caches[stage].put(key, value)
        res.values[stage] = value
        return value

    def is_cached(self, stage: str, key: str) -> bool:
        """True if ``stage`` holds a result for ``key``."""
        with self._lock:
            return self._caches.get(stage, _LRU(1)).get(key)[0]

    # ---- the run ----
    def run(self, snap: Mapping[str, Any], *, stages=FAST_STAGES + SLOW_STAGES,
            on_progress: Callable[[Results], None] | None = None,
            cancelled: Callable[[], bool] | None = None) -> Results:
        """Compute the requested stages for the settings ``snap`` (``BenchState.snapshot()``).

        ``on_progress(results)`` is called with a copy of the results once
        the fast stages are done (the processed trace, the filter response and
        a preview of the processed spectrum) and again once the quick slow
        stages are (true spectrum, bands, quality, advice), before the
        integration comparison and the summary, so a view can show them at
        once. ``cancelled()`` is asked before each computation; when it says
        True the run ends early (its settings are stale: a newer change is
        waiting).
        """
        res = Results(should_stop=cancelled or (lambda: False))
        keys: dict[str, str] = {}
        progress = (lambda: on_progress(res.copy())) if on_progress is not None else (lambda: None)
        try:
            self._run_fast(snap, stages, res, keys)
            if set(stages) & set(SLOW_STAGES):
                progress()
            self._run_slow(snap, stages, res, keys, progress)
        except _Stop:
            res.cancelled = res.should_stop()
        return res

    def _guard(self, res: Results, group: str, fn: Callable[[], Any], stop: bool = False):
        try:
            return fn()
        except _Located as err:
            res.errors[err.group] = str(err.error)
        except SigtuneError as err:
            res.errors[group] = str(err)
        if stop:
            raise _Stop
        return None

    def _run_fast(self, snap, stages, res: Results, keys: dict) -> None:
        keys["source"] = snap["dataset_id"]
        self._guard(res, "source", lambda: self._cached(
            res, "source", keys["source"], lambda: self.sources.get(keys["source"])), stop=True)
        keys["channel"] = _key(keys["source"], snap["channel"], setup_entry(snap))
        self._guard(res, "setup", lambda: self._cached(
            res, "channel", keys["channel"], lambda: _declared_channel(res["source"], snap)), stop=True)
        if "response" in stages:
            self._guard(res, "filter", lambda: self._response(snap, res))
        self._guard(res, "conditioning", lambda: self._conditioned(snap, res, keys), stop=True)
        if "raw_spectrum" in stages:
            keys["raw_spectrum"] = _key(keys["reference"], _spectrum_settings(snap))
            self._guard(res, "spectrum", lambda: self._cached(
                res, "raw_spectrum", keys["raw_spectrum"], lambda: spectrum_of(res["reference"], snap)))
        keys["spectrum"] = _key(keys["conditioned"], _spectrum_settings(snap))
        if ("preview" in stages and "raw_spectrum" in res and res.get("filter") is not None
                and not self.is_cached("spectrum", keys["spectrum"])):
            self._guard(res, "spectrum", lambda: res.values.__setitem__(
                "preview", preview_spectrum(res["raw_spectrum"], res["filter"], res["reference"].fs,
                                            res["conditioned"].nyquist, snap["scaling"])))

    def _run_slow(self, snap, stages, res: Results, keys: dict, progress: Callable[[], None]) -> None:
        processed = res["conditioned"]
        if "spectrum" in stages:
            self._guard(res, "spectrum", lambda: self._cached(
                res, "spectrum", keys["spectrum"], lambda: spectrum_of(processed, snap)))
        if "bands" in stages:
            key = _key(keys["conditioned"], snap["band_fraction"], snap["spectrum_window"], snap["segment_s"],
                       snap["overlap"])
            self._guard(res, "bands", lambda: self._cached(res, "bands", key, lambda: bands_of(processed, snap)))
        if "quality" in stages:
            key = _key(keys["channel"], snap["full_scale"])
            self._guard(res, "quality", lambda: self._cached(
                res, "quality", key, lambda: dsp.quality.audit(res["channel"], full_scale=snap["full_scale"])))
        if "advice" in stages:
            key = _key(keys["channel"], res["chain"].to_list())
            self._guard(res, "advice", lambda: self._cached(
                res, "advice", key, lambda: dsp.advice.advise(channel=res["channel"], chain=res["chain"])))
        if {"motion", "summary"} & set(stages):
            progress()
        if "motion" in stages:
            key = _key(keys["conditioned"], _motion_settings(snap))
            self._guard(res, "motion", lambda: self._cached(res, "motion", key, lambda: motion_of(processed, snap)))
        if "summary" in stages:
            self._guard(res, "evaluation", lambda: self._summary(snap, res, keys))

    def _response(self, snap, res: Results):
        flt = filter_step(snap)
        res.values["filter"] = flt
        if flt is None:
            return None
        fs = res["channel"].fs
        key = _key(flt.to_dict(), fs, snap["response_extra"])
        return self._cached(res, "response", key, lambda: filter_response(flt, fs, snap["response_extra"]))

    def _conditioned(self, snap, res: Results, keys: dict):
        channel = res["channel"]
        chain, n_reference = build_chain(snap)
        res.values["chain"] = chain
        key = keys["channel"]
        out = channel
        keys["reference"] = key
        res.values["reference"] = channel
        for i, step in enumerate(chain):
            key = _key(key, step.to_dict())
            try:
                out = self._cached(res, "conditioned", key, lambda s=step, c=out: s.apply(c))
            except SigtuneError as err:
                raise _Located(step_group(step.op), err) from None
            if i + 1 == n_reference:
                keys["reference"] = key
                res.values["reference"] = out
        keys["conditioned"] = key
        res.values["conditioned"] = out
        return out

    def _summary(self, snap, res: Results, keys: dict):
        settings = analysis_settings(snap)
        key = _key(keys["conditioned"], settings.to_dict())
        return self._cached(res, "summary", key, lambda: summary_of(res["conditioned"], settings, res.get("motion")))


class _Stop(Exception):
    """A stage every later stage needs has failed: end the run here."""


def _declared_channel(recording: Recording, snap) -> Channel:
    """The chosen channel after the setup (declared unit, calibration), as ``Session.apply`` does it."""
    from dsp.session import apply_setup

    channel = recording[snap["channel"]] if snap["channel"] is not None else recording[0]
    return apply_setup(channel, {channel.name: setup_entry(snap)})


def _spectrum_settings(snap) -> dict:
    return {k: snap[k] for k in ("spectrum_window", "segment_s", "overlap", "averaging", "scaling")}


def _motion_settings(snap) -> dict:
    return {k: snap[k] for k in ("motion_target", "motion_methods", "motion_f_low")}


def spectrum_of(channel: Channel, snap):
    """The spectrum of ``channel`` in the scaling the settings ask for (a dsp Spectrum)."""
    common = dict(window=snap["spectrum_window"], segment_s=snap["segment_s"], overlap=snap["overlap"],
                  average=snap["averaging"])
    scaling = snap["scaling"]
    if scaling == "psd":
        return dsp.spectra.psd(channel, **common)
    if scaling == "asd":
        return dsp.spectra.asd(channel, **common)
    return dsp.spectra.linear_spectrum(channel, amplitude=scaling.split("-")[1], **common)


def preview_spectrum(raw, flt: Filter, fs: float, nyquist_out: float, scaling: str) -> dict:
    """Preview of the processed spectrum: the raw one times the filter's effective gain.

    ``|H_eff(f)|^2`` scales a power spectrum, ``|H_eff(f)|`` an amplitude one.
    Shown while the true spectrum is computed, and labelled as a preview.
    """
    f = np.asarray(raw.frequencies, float)
    gain = np.abs(flt.effective_response(fs, np.clip(f, 0, fs / 2 * (1 - 1e-9))))
    values = np.asarray(raw.values, float) * (gain**2 if scaling == "psd" else gain)
    keep = f <= nyquist_out
    return {"frequencies": f[keep], "values": values[keep]}


RESPONSE_POINTS = 800  # log-spaced: smooth on screen, small on the wire


def filter_response(flt: Filter, fs: float, extra: str = "none") -> dict:
    """Magnitude (dB), phase (deg) and group delay (s) of the filter as the signal sees it.

    Frequencies are log-spaced from 1e-4 fs to just below Nyquist; ``extra``
    adds the ``"impulse"`` or ``"step"`` response (one pass).
    """
    design = flt.design(fs)
    f = np.geomspace(fs * 1e-4, fs / 2 * 0.999, RESPONSE_POINTS)
    out = {"frequency": f,
           "magnitude_db": flt.magnitude_db(fs, f, effective=True),
           "phase_deg": np.degrees(np.unwrap(flt.phase(fs, f, effective=True))),
           "group_delay_s": flt.group_delay_s(fs, f, effective=True),
           "report": design.to_dict()}
    if extra in ("impulse", "step"):
        n = int(min(max(4 * design.settling_samples, 64), 20_000))
        values = flt.impulse_response(fs, n) if extra == "impulse" else flt.step_response(fs, n)
        out["extra"] = {"kind": extra, "time": np.arange(n) / fs, "values": np.asarray(values, float)}
    return out


def bands_of(channel: Channel, snap):
    """Octave or one-third-octave band RMS (None when bands are off), as the summary computes them."""
    if not snap["band_fraction"]:
        return None
    return dsp.bands.band_levels(channel, fraction=snap["band_fraction"], window=snap["spectrum_window"],
                                   segment_s=snap["segment_s"], overlap=snap["overlap"])


def motion_of(channel: Channel, snap):
    """Integration comparison of the chosen methods (a dsp IntegrationComparison)."""
    methods = tuple(snap["motion_methods"])
    if not methods:
        raise SigtuneError("choose at least one integration method to compare", "motion methods")
    return dsp.motion.compare_integration(channel, methods=methods, target=snap["motion_target"],
                                          f_low=snap["motion_f_low"])


def summary_of(channel: Channel, settings, comparison=None) -> dict:
    """``dsp.analysis.analyse(channel, settings)``, reusing the motion stage's comparison if there is one.

    The integration comparison is the costliest part of the analysis and the
    motion stage has just computed it with the same channel and settings;
    ``analyse`` would report exactly its rows (``{"target", "rows"}``), so
    they are put in instead of computing them twice. Without a comparison (the
    motion stage failed, or no method is chosen) ``analyse`` runs as it is.
    """
    import dataclasses

    from dsp.analysis import analyse

    methods = settings.integration.methods
    if comparison is None or not methods or tuple(comparison.channels) != tuple(methods):
        return analyse(channel, settings)
    summary = analyse(channel, dataclasses.replace(settings, integration={**settings.integration.to_dict(),
                                                                            "methods": []}))
    summary["integration"] = _json_ready({"target": settings.integration.target, "rows": comparison.rows})
    return summary


def _json_ready(value):
    """NaN and infinities as None, numpy scalars as Python numbers (as ``analyse`` returns them)."""
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_ready(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


def analysis_settings(snap):
    """The :class:`dsp.analysis.AnalysisSettings` the settings describe (saved in the session)."""
    from dsp.analysis import AnalysisSettings

    return AnalysisSettings(
        spectrum={"window": snap["spectrum_window"], "segment_s": snap["segment_s"], "overlap": snap["overlap"],
                  "average": snap["averaging"]},
        band_fraction=snap["band_fraction"], n_peaks=snap["n_peaks"],
        integration={"methods": list(snap["motion_methods"]), "target": snap["motion_target"],
                     "f_low": snap["motion_f_low"]},
        evaluation=None if snap["evaluation_kind"] == "none"
        else {"kind": snap["evaluation_kind"], **snap["evaluation_options"]},
        audit={"full_scale": snap["full_scale"]})
