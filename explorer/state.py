"""The explorer's state: every setting, in one param.Parameterized object.

:class:`BenchState` is the single source of truth. The cards of the page
display and edit it; the session file saves it (:meth:`BenchState.to_session`)
and restores it (:meth:`BenchState.load_session`); the processing it
describes is a :class:`dsp.Chain` of the library's own steps, so the batch
runner replays exactly what the app shows. This module imports no Panel:
the state can be driven from a script, a notebook or a test.

Example
-------
>>> import numpy as np
>>> from dsp import Channel, Recording
>>> t = np.arange(20_000) / 2000.0
>>> rec = Recording([Channel(np.sin(2 * np.pi * 50 * t), 2000.0, name="x", unit="g")])
>>> state = BenchState(recording=rec, filter_band="lowpass", cutoff=200.0)
>>> state.processed.history[-1]["op"], state.param.cutoff.bounds
('filter', (0.0, 1000.0))
"""

from __future__ import annotations

from typing import Any

import param

import dsp
from dsp import Recording, SigtuneError
from dsp.filters import CUTOFF_MODES, FILTER_BANDS, FILTER_FAMILIES
from dsp.units import QUANTITIES, UNITS

from .stages import (DEMO_PREFIX, SOURCES, Pipeline, Results, SourceStore, filter_step, resample_step,
                     setup_entry)

__all__ = ["BenchState", "SENSITIVITY_UNITS", "SCALINGS", "INTEGRATION_METHODS", "DEFAULT_DEMO"]

DEFAULT_DEMO = "pump_skid"
SENSITIVITY_UNITS = ("mV/g", "V/g", "mV/(m/s^2)", "mV/(mm/s)", "mV/um", "mV/N", "mV/Pa")
SCALINGS = ("psd", "asd", "linear-rms", "linear-peak")
SPECTRUM_WINDOWS = ("hann", "hamming", "flattop", "rectangular", "kaiser:8.6")
INTEGRATION_METHODS = ("time", "frequency", "baseline")

# Parameters that are not settings (saved nowhere, never in a snapshot).
_NOT_SETTINGS = {"name", "dataset_id", "notes", "errors"}
# Settings saved in the session's ``view`` dict (display and comparison choices).
VIEW_SETTINGS = ("scaling", "decimation", "response_extra", "alias_frequency")
EVALUATION_KINDS = ("none", "machine_severity", "whole_body", "building_ppv")


class BenchState(param.Parameterized):
    """Every setting of the explorer, with bounds that follow the loaded channel.

    Parameters are grouped as the page's cards are: source, setup, crop,
    filter, resample, motion, spectrum, evaluation and view. Set them as
    attributes or with ``state.param.update(...)``; read the results from
    :attr:`processed`, :attr:`summary` or :meth:`results`.

    Parameters
    ----------
    recording : dsp.Recording, optional
        In-memory data to open instead of a file (a notebook's own channels).
    sources : SourceStore, optional
        Where recordings are shared; default the process-wide store.
    **params
        Initial values of any parameter.
    """

    # ---- source ----
    file_path = param.String(default="", doc="Recording file on this computer (csv, tsv, wav, h5, npz); "
                                             "empty for the built-in demo")
    demo_scenario = param.String(default=DEFAULT_DEMO, doc="Demo recording opened when no file is given")
    channel = param.Selector(default=None, objects=[], allow_None=True, doc="Channel to work on")
    dataset_id = param.String(default="", precedence=-1, doc="Id of the open data (path, time, size)")
    # ---- setup: what the samples are ----
    unit = param.Selector(default="m/s^2", objects=list(UNITS), doc="Unit of the recorded samples")
    quantity = param.Selector(default="acceleration", objects=list(QUANTITIES), doc="Measured quantity")
    sensitivity = param.Number(default=None, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
                               doc="Sensor sensitivity (for a voltage channel), in sensitivity_unit")
    sensitivity_unit = param.Selector(default="mV/g", objects=list(SENSITIVITY_UNITS))
    # ---- crop ----
    crop_start_s = param.Number(default=0.0, bounds=(0, None), doc="Start of the analysed part, s")
    crop_end_s = param.Number(default=None, allow_None=True, bounds=(0, None),
                              doc="End of the analysed part, s (empty: the end of the record)")
    detrend = param.Selector(default="none", objects=["none", "constant", "linear"],
                             doc="Remove the mean or a straight line before filtering")
    # ---- filter ----
    filter_band = param.Selector(default="highpass", objects=["none", *FILTER_BANDS], doc="Filter type")
    filter_family = param.Selector(default="butterworth", objects=list(FILTER_FAMILIES))
    filter_order = param.Integer(default=4, bounds=(1, 16), doc="Prototype order (band filters: 2x poles)")
    cutoff = param.Number(default=5.0, bounds=(0, None), inclusive_bounds=(False, False),
                          doc="Cutoff in Hz (the low edge for band-pass/band-stop), below Nyquist")
    cutoff_high = param.Number(default=1000.0, bounds=(0, None), inclusive_bounds=(False, False),
                               doc="High edge in Hz for band-pass/band-stop, below Nyquist")
    ripple_db = param.Number(default=1.0, bounds=(0, 20), inclusive_bounds=(False, True),
                             doc="Pass-band ripple, dB (Chebyshev I, elliptic)")
    attenuation_db = param.Number(default=60.0, bounds=(0, 200), inclusive_bounds=(False, True),
                                  doc="Stop-band attenuation, dB (Chebyshev II, elliptic)")
    zero_phase = param.Boolean(default=False, doc="Forward-backward (no phase lag) instead of causal")
    cutoff_mode = param.Selector(default="design", objects=list(CUTOFF_MODES),
                                 doc="'effective': the signal sees -3 dB at the cutoff")
    # ---- resample ----
    resample_by = param.Selector(default="none", objects=["none", "rate", "ratio"])
    resample_fs = param.Number(default=None, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
                               doc="Target sample rate, Hz")
    resample_ratio = param.Number(default=None, allow_None=True, bounds=(0, None),
                                  inclusive_bounds=(False, True), doc="Output rate / input rate")
    # ---- motion ----
    motion_target = param.Selector(default="velocity", objects=["velocity", "displacement"])
    motion_methods = param.ListSelector(default=list(INTEGRATION_METHODS), objects=list(INTEGRATION_METHODS),
                                        doc="Integration methods to compare")
    motion_f_low = param.Number(default=2.0, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
                                doc="Lowest frequency kept by the integration, Hz")
    # ---- spectrum ----
    spectrum_window = param.Selector(default="hann", objects=list(SPECTRUM_WINDOWS))
    segment_s = param.Number(default=None, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
                             doc="Welch segment length, s (resolution 1/segment Hz); empty: the library's rule")
    overlap = param.Number(default=0.5, bounds=(0, 0.95), doc="Segment overlap, fraction")
    averaging = param.Selector(default="mean", objects=["mean", "peak"], doc="Mean or peak hold")
    scaling = param.Selector(default="psd", objects=list(SCALINGS))
    band_fraction = param.Selector(default=3, objects=[0, 1, 3],
                                   doc="Band levels: none (0), octave (1) or one-third octave (3)")
    n_peaks = param.Integer(default=5, bounds=(0, 100), doc="Largest spectral peaks listed")
    # ---- evaluation and audit ----
    evaluation_kind = param.Selector(default="none", objects=list(EVALUATION_KINDS))
    evaluation_options = param.Dict(default={}, doc="Settings of the evaluation (its function's keywords)")
    full_scale = param.Number(default=None, allow_None=True, bounds=(0, None), inclusive_bounds=(False, True),
                              doc="Acquisition full scale in the channel's unit (clipping check)")
    # ---- view ----
    decimation = param.Selector(default="minmax", objects=["minmax", "minmax-lttb"],
                                doc="How long traces are reduced for display")
    response_extra = param.Selector(default="none", objects=["none", "impulse", "step"])
    alias_frequency = param.Number(default=None, allow_None=True, bounds=(0, None),
                                   doc="A frequency to follow through sampling, Hz")
    notes = param.String(default="", doc="Free text saved with the session")

    def __init__(self, recording: Recording | None = None, sources: SourceStore = SOURCES, **params):
        self._sources = sources
        self._setups: dict[str, dict] = {}
        self._pinned: list[str] = []
        self.pipeline = Pipeline(sources)
        file_path = params.pop("file_path", "")
        channel = params.pop("channel", None)
        super().__init__(**params)
        if recording is not None:
            self.open_recording(recording, channel=channel)
        else:
            self.open(file_path, channel=channel)
        self.param.watch(self._channel_changed, "channel")

    # ---- opening data ----
    def open(self, path: str | None = "", channel: str | None = None) -> None:
        """Open a recording file (or the demo for an empty path) and pick a channel.

        Raises SigtuneError (bad path, unreadable file, unknown channel) and
        leaves the current data open.
        """
        path = str(path or "")
        dataset_id = self._sources.dataset_id(path or DEMO_PREFIX + self.demo_scenario)
        recording = self._sources.get(dataset_id)
        self._use(recording, dataset_id, path, channel)

    def open_recording(self, recording: Recording, channel: str | None = None) -> str:
        """Open an in-memory recording; return its dataset id."""
        dataset_id = self._sources.pin(recording)
        self._pinned.append(dataset_id)
        self._use(recording, dataset_id, "", channel)
        return dataset_id

    def release(self) -> None:
        """Forget in-memory data and cached results (the session that owns this state closed)."""
        for dataset_id in self._pinned:
            self._sources.unpin(dataset_id)
        self._pinned.clear()
        self.pipeline.clear()

    def _use(self, recording: Recording, dataset_id: str, path: str, channel: str | None) -> None:
        name = recording.names[0] if channel is None else recording[channel].name
        with param.parameterized.discard_events(self):
            self.param.channel.objects = recording.names
            self.param.update(file_path=path, dataset_id=dataset_id, channel=name)
        self._channel_changed()
        # one event for views that follow the data (the discarded ones above)
        self.param.trigger("dataset_id")

    @property
    def recording(self) -> Recording:
        """The open recording."""
        return self._sources.get(self.dataset_id)

    @property
    def source_channel(self):
        """The chosen channel as stored in the file (before the declared unit)."""
        return self.recording[self.channel]

    def _channel_changed(self, *events) -> None:
        for event in events:  # remember the setup of the channel left, for when the user comes back
            if event.old is not None and event.old in self.param.channel.objects:
                self._setups[event.old] = setup_entry({**self.snapshot(), "channel": event.old})
        channel = self.source_channel
        setup = self._setups.get(channel.name) or self._setups.get("*") or {}
        unit = setup.get("unit") or channel.unit
        quantity = setup.get("quantity") or (UNITS[unit].quantity if setup.get("unit") else channel.quantity)
        self.param.update(unit=unit, quantity=quantity, sensitivity=setup.get("sensitivity"),
                          sensitivity_unit=setup.get("sensitivity_unit") or self.sensitivity_unit)
        self._follow_bounds(channel)

    def _follow_bounds(self, channel) -> None:
        """Bounds follow the channel: cutoffs below its Nyquist, crop inside its duration."""
        nyquist = channel.nyquist
        for name in ("cutoff", "cutoff_high"):
            self.param[name].bounds = (0.0, nyquist)
            self.param[name].softbounds = (0.0, nyquist)
        for name in ("crop_start_s", "crop_end_s"):
            self.param[name].bounds = (0.0, channel.duration)
        self.param.alias_frequency.softbounds = (0.0, 4 * channel.fs)

    # ---- proposing a change (the page's inputs go through here) ----
    def propose(self, **changes) -> str | None:
        """Apply ``changes`` if they are valid for the open channel; else return why not.

        The message is the library's SigtuneError text (e.g. a cutoff above
        Nyquist names the valid range for this recording); nothing is changed
        when a message is returned.
        """
        trial = {**self.snapshot(), **changes}
        try:
            self._check(trial, changes)
        except SigtuneError as err:
            return str(err)
        try:
            self.param.update(**changes)
        except ValueError as err:  # a param bound the library does not check (overlap, order ...)
            return f"{', '.join(changes)}: {err}"
        return None

    def _check(self, trial: dict, changes: dict) -> None:
        fs = self.source_channel.fs
        if set(changes) & _FILTER_SETTINGS:
            flt = filter_step(trial)
            if flt is not None:
                flt.check_for_rate(fs)
                flt.design(fs)
        if set(changes) & {"resample_by", "resample_fs", "resample_ratio"}:
            resample_step(trial)
        if set(changes) & _ANALYSIS_SETTINGS:
            from .stages import analysis_settings

            analysis_settings(trial)  # unknown evaluation settings, bad window names ...
        if "crop_end_s" in changes or "crop_start_s" in changes:
            from dsp.conditioning import Crop

            end = trial["crop_end_s"]
            Crop(trial["crop_start_s"], end)
            duration = self.source_channel.duration
            if end is not None and end > duration or trial["crop_start_s"] >= duration:
                raise SigtuneError(f"must lie within the record: 0 <= start < end <= {duration:g} s; got "
                                   f"start={trial['crop_start_s']:g} s, end={end}", "crop")

    # ---- derived values ----
    def snapshot(self) -> dict[str, Any]:
        """Every setting as a plain dict (what a pipeline run reads), plus the dataset id."""
        values = {k: v for k, v in self.param.values().items() if k not in _NOT_SETTINGS}
        values["motion_methods"] = list(values["motion_methods"])
        values["dataset_id"] = self.dataset_id
        return values

    def results(self, stages=None) -> Results:
        """Run the pipeline on the current settings (cached stages are reused)."""
        kwargs = {} if stages is None else {"stages": stages}
        return self.pipeline.run(self.snapshot(), **kwargs)

    def _result(self, stage: str, stages):
        res = self.results(stages=stages)
        if stage not in res:
            raise SigtuneError("; ".join(res.errors.values()) or f"{stage} could not be computed")
        return res[stage]

    @property
    def chain(self) -> dsp.Chain:
        """The conditioning chain the settings describe (the one the session saves)."""
        return self._result("chain", ("source",))

    @property
    def processed(self) -> dsp.Channel:
        """The processed channel: the chain applied to the chosen channel."""
        return self._result("conditioned", ("source",))

    @property
    def summary(self) -> dict:
        """``dsp.analysis.analyse(processed, settings)``: the figures the batch runner reports too."""
        return self._result("summary", ("summary",))

    @property
    def counts(self) -> dict[str, int]:
        """How often each stage has been computed (not served from its cache)."""
        return dict(self.pipeline.counts)

    # ---- sessions ----
    def to_session(self):
        """Return the settings as a :class:`dsp.Session` (source, setup, chain, analysis, view, notes)."""
        from dsp.session import Session

        from .stages import analysis_settings

        # in-memory data (a notebook's own) has no path: the session then applies to whatever is open
        path = self.file_path or (self.dataset_id if self.dataset_id.startswith(DEMO_PREFIX) else None)
        source = {"path": path, "sha256": self._sources.sha256(self.dataset_id) if self.file_path else None,
                  "channels": [self.channel]}
        setups = {**self._setups, self.channel: setup_entry(self.snapshot())}
        view = {name: _plain(getattr(self, name)) for name in VIEW_SETTINGS}
        return Session(source=source, setup=setups, chain=self.chain, analysis=analysis_settings(self.snapshot()),
                       view=view, notes=self.notes)

    def load_session(self, session, *, open_source: bool = True, data_root=None) -> str | None:
        """Restore the settings of a :class:`dsp.Session` (a validated one: ``Session.load``).

        With ``open_source`` the session's recording is opened when it exists
        on this computer; otherwise (or if it does not) the settings are
        applied to the channel open now: that is how a session is applied to
        another recording. With ``data_root`` (the folder a server lets its
        users read) a source path leading outside that folder is not opened
        (:func:`dsp.session.resolve_source`). Returns a note saying why the
        session's recording was not opened, or None. Raises SigtuneError
        naming the field that cannot be applied; the current settings then
        stay as they were.
        """
        source = dict(session.source or {})
        changes = settings_from_chain(session.chain)
        changes.update(_view_changes(session.view or {}))
        changes.update(_analysis_changes(session.analysis))
        setups = {str(k): dict(v) for k, v in (session.setup or {}).items()}
        channels = list(source.get("channels") or [])
        path = str(source.get("path") or "")
        note = self._open_session_source(session, data_root) if open_source and path else None
        self._setups = setups
        wanted = next((c for c in channels if c in self.param.channel.objects), None)
        with param.parameterized.batch_call_watchers(self):
            if wanted is not None and wanted != self.channel:
                self.channel = wanted
            self._channel_changed()
            defaults = {k: _ABSENT_STEP.get(k, self.param[k].default) for k in _CHAIN_SETTINGS
                        if k not in changes}
            self.param.update(**defaults, **changes, notes=str(session.notes or ""))
        return note

    def _open_session_source(self, session, data_root) -> str | None:
        """Open the session's recording; return why it was not opened (the settings then apply to the open data)."""
        from dsp.session import resolve_source

        path = str(session.source["path"])
        if path.startswith(DEMO_PREFIX):
            self.demo_scenario = path[len(DEMO_PREFIX):]
            self.open("", channel=None)
            return None
        instead = "the settings apply to the recording open now"
        try:
            if data_root is not None:
                path = str(resolve_source(session, data_root))
            self.open(path)
        except (SigtuneError, OSError) as err:  # outside the data folder, not on this computer, unreadable
            return f"the session's recording was not opened ({err}); {instead}"
        return None


_FILTER_SETTINGS = {"filter_band", "filter_family", "filter_order", "cutoff", "cutoff_high", "ripple_db",
                    "attenuation_db", "zero_phase", "cutoff_mode"}
_ANALYSIS_SETTINGS = {"spectrum_window", "segment_s", "overlap", "averaging", "band_fraction", "n_peaks",
                      "motion_methods", "motion_target", "motion_f_low", "evaluation_kind", "evaluation_options",
                      "full_scale"}
# Settings a session's chain determines (reset to defaults when its chain lacks the step).
_CHAIN_SETTINGS = ("sensitivity", "crop_start_s", "crop_end_s", "detrend", "filter_band", "resample_by")
# The value that stands for "no such step", where it is not the parameter's default (a new bench
# starts with a high-pass, but a session whose chain has no filter must load without one).
_ABSENT_STEP = {"filter_band": "none"}


def _plain(value):
    return list(value) if isinstance(value, (list, tuple)) else value


def settings_from_chain(chain) -> dict[str, Any]:
    """The state settings a saved chain stands for; SigtuneError for a step the explorer cannot edit."""
    changes: dict[str, Any] = {}
    for i, step in enumerate(chain):
        data = step.to_dict()
        op = data["op"]
        if op == "calibrate":
            changes.update(sensitivity=data["sensitivity"], sensitivity_unit=data["sensitivity_unit"])
        elif op == "crop":
            changes.update(crop_start_s=data["start_s"], crop_end_s=data["end_s"])
        elif op == "detrend" and data["kind"] in ("constant", "linear"):
            changes.update(detrend=data["kind"])
        elif op == "filter":
            changes.update(_filter_changes(data))
        elif op == "resample":
            changes.update(_resample_changes(data, f"chain.steps[{i}]"))
        else:
            raise SigtuneError(f"the explorer cannot edit a {op!r} step; it edits calibrate, crop, detrend "
                               f"(constant/linear), filter and resample. Remove that step from the "
                               f"session or run it with 'sigtune batch'", f"chain.steps[{i}]")
    return changes


def _filter_changes(data: dict) -> dict:
    cutoff = data["cutoff"]
    paired = isinstance(cutoff, (list, tuple))
    changes = {"filter_band": data["band"], "filter_family": data["family"], "filter_order": data["order"],
               "cutoff": float(cutoff[0] if paired else cutoff), "zero_phase": data["zero_phase"],
               "ripple_db": data["ripple_db"], "attenuation_db": data["attenuation_db"],
               "cutoff_mode": data["cutoff_mode"]}
    if paired:
        changes["cutoff_high"] = float(cutoff[1])
    return changes


def _resample_changes(data: dict, where: str) -> dict:
    if data.get("fs_out") is not None:
        return {"resample_by": "rate", "resample_fs": float(data["fs_out"])}
    if data.get("ratio") is not None:
        return {"resample_by": "ratio", "resample_ratio": float(data["ratio"])}
    raise SigtuneError("a resample step needs fs_out or ratio", where)


def _view_changes(view: dict) -> dict:
    unknown = sorted(set(view) - set(VIEW_SETTINGS))
    if unknown:
        raise SigtuneError(f"unknown view setting {unknown[0]!r}; known: {', '.join(VIEW_SETTINGS)}",
                           f"view.{unknown[0]}")
    return {k: (list(v) if k == "motion_methods" else v) for k, v in view.items()}


def _analysis_changes(analysis) -> dict:
    if analysis is None:
        return {}
    from dsp.analysis import AnalysisSettings

    settings = analysis if isinstance(analysis, AnalysisSettings) else AnalysisSettings.from_dict(analysis)
    evaluation = dict(settings.evaluation or {})
    kind = evaluation.pop("kind", "none")
    return {"spectrum_window": settings.spectrum.window, "segment_s": settings.spectrum.segment_s,
            "overlap": settings.spectrum.overlap, "averaging": settings.spectrum.average,
            "band_fraction": settings.band_fraction, "n_peaks": settings.n_peaks,
            "motion_methods": list(settings.integration.methods), "motion_target": settings.integration.target,
            "motion_f_low": settings.integration.f_low, "evaluation_kind": kind, "evaluation_options": evaluation,
            "full_scale": settings.audit.full_scale}

