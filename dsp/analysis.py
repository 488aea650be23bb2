"""The summary figures of a processed channel, computed one way for the app and the batch runner.

:class:`AnalysisSettings` holds what a user picks for the analysis (spectrum,
band levels, peaks, integration methods to compare, evaluation, audit);
:func:`analyse` turns a channel and those settings into one JSON-ready dict.
The dashboard's summary and every row of ``sigtune batch`` come from this
function, so the numbers are the same everywhere.

Statistics (mean, RMS, peak, crest factor) are accumulated in float64 over
the finite samples outside the edge zones that filters record in the
channel's history (``info["edge_zones_s"]``); the zones left out are listed
in the result. Spectra and band levels leave the edge zones out in the same
way (see :func:`dsp.psd`).
"""

from __future__ import annotations

import dataclasses
import inspect
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import evaluation as _evaluation
from . import motion as _motion
from . import quality as _quality
from . import bands as _bands
from . import spectra as _spectra
from ._validate import check_choice, check_int, check_number
from ._version import __version__
from .channel import Channel
from .errors import SigtuneError
from .windows import resolve_window

__all__ = ["AnalysisSettings", "SpectrumSettings", "IntegrationSettings", "AuditSettings", "analyse",
           "BAND_FRACTIONS", "EVALUATION_KINDS", "INTEGRATION_METHODS", "INTEGRATION_TARGETS"]

#: 0: no band levels; 1: octave bands; 3: one-third-octave bands.
BAND_FRACTIONS = (0, 1, 3)
INTEGRATION_METHODS = ("time", "frequency", "baseline")
INTEGRATION_TARGETS = ("velocity", "displacement")
#: Evaluation kinds and the dsp function each one calls with the processed channel.
EVALUATION_KINDS = ("machine_severity", "whole_body", "building_ppv")
MAX_PEAKS = 100
# Which quantities can be integrated to which target (the rest is reported as skipped).
_INTEGRABLE = {"acceleration": ("velocity", "displacement"), "velocity": ("displacement",)}


def _relocated(err: SigtuneError, prefix: str) -> SigtuneError:
    """Return ``err`` with its location read as a dotted path under ``prefix``."""
    return SigtuneError(err.detail, f"{prefix}.{err.where}" if err.where else prefix)


def _section_from(cls, value, where: str):
    """Build the settings section ``cls`` from an instance, a mapping or None (defaults)."""
    if value is None:
        return cls()
    if isinstance(value, cls):
        return value
    if not isinstance(value, Mapping):
        raise SigtuneError(f"must be an object with keys {', '.join(cls.keys())}; got {value!r}", where)
    unknown = sorted(set(value) - set(cls.keys()))
    if unknown:
        raise SigtuneError(f"unknown key {unknown[0]!r}; valid keys: {', '.join(cls.keys())}",
                           f"{where}.{unknown[0]}")
    return cls(**value)  # the sections' own errors already name "<section>.<key>"


class _Section:
    """Shared behaviour of the settings sections: dict round trip and read access by key."""

    @classmethod
    def keys(cls) -> list[str]:
        return [f.name for f in dataclasses.fields(cls)]

    def __getitem__(self, key: str):
        if key not in self.keys():
            raise KeyError(key)
        return getattr(self, key)

    def to_dict(self) -> dict[str, Any]:
        """Return the section as JSON-ready data."""
        return {name: list(v) if isinstance(v, tuple) else v
                for name, v in ((n, getattr(self, n)) for n in self.keys())}


@dataclass(frozen=True)
class SpectrumSettings(_Section):
    """Welch spectrum settings (see :func:`dsp.psd`).

    Parameters
    ----------
    window : str, default ``"hann"``
        ``"rectangular"``, ``"hann"``, ``"hamming"``, ``"flattop"`` or ``"kaiser:<beta>"``.
    segment_s : float, optional
        Segment length in s; default the rule of :func:`dsp.psd`.
    overlap : float, default 0.5
        Fraction of a segment shared with the next (0 to 0.95).
    average : {"mean", "peak"}, default ``"mean"``
    detrend : {"constant", "linear", "none"}, default ``"constant"``
    """

    window: str = "hann"
    segment_s: float | None = None
    overlap: float = 0.5
    average: str = "mean"
    detrend: str = "constant"

    def __post_init__(self):
        try:
            label, _ = resolve_window(self.window)
        except SigtuneError as err:
            raise SigtuneError(err.detail, "spectrum.window") from None
        object.__setattr__(self, "window", label)
        if self.segment_s is not None:
            object.__setattr__(self, "segment_s", check_number(self.segment_s, "spectrum.segment_s", low=0,
                                                               low_open=True, unit="s"))
        object.__setattr__(self, "overlap", check_number(self.overlap, "spectrum.overlap", low=0.0,
                                                         high=_spectra._OVERLAP_MAX))
        check_choice(self.average, "spectrum.average", _spectra.AVERAGES)
        check_choice(self.detrend, "spectrum.detrend", _spectra.DETRENDS)


@dataclass(frozen=True)
class IntegrationSettings(_Section):
    """Integration methods compared in the summary (see :func:`dsp.compare_integration`).

    Parameters
    ----------
    methods : list of {"time", "frequency", "baseline"}, default all three
        An empty list compares none.
    target : {"velocity", "displacement"}, default ``"velocity"``
    f_low : float, optional
        Low-frequency corner in Hz; default the rule of :func:`dsp.integrate`.
    """

    methods: tuple = INTEGRATION_METHODS
    target: str = "velocity"
    f_low: float | None = None

    def __post_init__(self):
        if isinstance(self.methods, str) or not isinstance(self.methods, (list, tuple)):
            raise SigtuneError(f"must be a list of methods from {', '.join(map(repr, INTEGRATION_METHODS))}; "
                               f"got {self.methods!r}", "integration.methods")
        for i, method in enumerate(self.methods):
            check_choice(method, f"integration.methods[{i}]", INTEGRATION_METHODS)
        if len(set(self.methods)) != len(self.methods):
            raise SigtuneError(f"lists a method twice; got {list(self.methods)}", "integration.methods")
        object.__setattr__(self, "methods", tuple(self.methods))
        check_choice(self.target, "integration.target", INTEGRATION_TARGETS)
        if self.f_low is not None:
            object.__setattr__(self, "f_low", check_number(self.f_low, "integration.f_low", low=0,
                                                           low_open=True, unit="Hz"))


@dataclass(frozen=True)
class AuditSettings(_Section):
    """Quality audit settings (see :func:`dsp.audit`).

    Parameters
    ----------
    full_scale : float, optional
        The acquisition's full scale in the channel's unit, for the clipping
        check; default: clipping is judged from runs at the extreme values.
    """

    full_scale: float | None = None

    def __post_init__(self):
        if self.full_scale is not None:
            object.__setattr__(self, "full_scale", check_number(self.full_scale, "audit.full_scale", low=0,
                                                                low_open=True))


def _check_evaluation(value) -> dict | None:
    """Return the evaluation settings as a plain dict, checked against the function they call."""
    if value is None:
        return None
    if not isinstance(value, Mapping):
        raise SigtuneError(f"must be null or an object with a 'kind' key; got {value!r}", "evaluation")
    kind = check_choice(value.get("kind"), "evaluation.kind", EVALUATION_KINDS)
    accepted = _evaluation_parameters(kind)
    for key in value:
        if key != "kind" and key not in accepted:
            raise SigtuneError(f"unknown setting {key!r} for {kind}; valid settings: {', '.join(accepted)}",
                               f"evaluation.{key}")
    return {k: (list(v) if isinstance(v, tuple) else v) for k, v in value.items()}


def _evaluation_parameters(kind: str) -> list[str]:
    """Keyword settings the evaluation function accepts (all but the channel argument)."""
    params = list(inspect.signature(getattr(_evaluation, kind)).parameters.values())[1:]
    return [p.name for p in params if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)]


@dataclass(frozen=True)
class AnalysisSettings:
    """What :func:`analyse` computes, as data (saved in session files).

    Sections may be given as their settings objects or as plain dicts;
    missing keys take the defaults.

    Parameters
    ----------
    spectrum : SpectrumSettings or dict
        Welch PSD settings, also used for the band levels.
    band_fraction : {0, 1, 3}, default 3
        0 no band levels, 1 octave, 3 one-third octave.
    n_peaks : int, default 5
        Largest spectral peaks listed (0 to 100).
    integration : IntegrationSettings or dict
        Integration methods compared (skipped, with the reason, for channels
        that are not acceleration or velocity).
    evaluation : dict, optional
        ``{"kind": "machine_severity", "group": 1, "support": "rigid", ...}``,
        ``{"kind": "whole_body", ...}`` or ``{"kind": "building_ppv", ...}``:
        the keys other than ``kind`` are passed to :func:`dsp.machine_severity`,
        :func:`dsp.whole_body` or :func:`dsp.building_ppv` with the channel.
    audit : AuditSettings or dict
        Quality audit settings.

    Examples
    --------
    >>> s = AnalysisSettings(spectrum={"window": "hamming"}, band_fraction=1)
    >>> s.spectrum.window, s.to_dict()["band_fraction"]
    ('hamming', 1)
    >>> AnalysisSettings.from_dict(s.to_dict()) == s
    True
    """

    spectrum: SpectrumSettings = field(default_factory=SpectrumSettings)
    band_fraction: int = 3
    n_peaks: int = 5
    integration: IntegrationSettings = field(default_factory=IntegrationSettings)
    evaluation: dict | None = None
    audit: AuditSettings = field(default_factory=AuditSettings)

    def __post_init__(self):
        set_ = object.__setattr__
        set_(self, "spectrum", _section_from(SpectrumSettings, self.spectrum, "spectrum"))
        set_(self, "integration", _section_from(IntegrationSettings, self.integration, "integration"))
        set_(self, "audit", _section_from(AuditSettings, self.audit, "audit"))
        check_choice(self.band_fraction, "band_fraction", BAND_FRACTIONS)
        set_(self, "n_peaks", check_int(self.n_peaks, "n_peaks", low=0, high=MAX_PEAKS))
        set_(self, "evaluation", _check_evaluation(self.evaluation))

    def to_dict(self) -> dict[str, Any]:
        """Return the settings as JSON-ready data (the ``analysis`` object of a session file)."""
        return {"spectrum": self.spectrum.to_dict(), "band_fraction": self.band_fraction,
                "n_peaks": self.n_peaks, "integration": self.integration.to_dict(),
                "evaluation": None if self.evaluation is None else dict(self.evaluation),
                "audit": self.audit.to_dict()}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any] | None, where: str = "analysis") -> "AnalysisSettings":
        """Build settings from :meth:`to_dict` data; errors name the dotted path under ``where``."""
        if data is None:
            return cls()
        if not isinstance(data, Mapping):
            raise SigtuneError(f"must be an object; got {data!r}", where)
        valid = [f.name for f in dataclasses.fields(cls)]
        unknown = sorted(set(data) - set(valid))
        if unknown:
            raise SigtuneError(f"unknown key {unknown[0]!r}; valid keys: {', '.join(valid)}",
                               f"{where}.{unknown[0]}")
        try:
            return cls(**data)
        except SigtuneError as err:
            raise _relocated(err, where) from None


# ---------------------------------------------------------------- analyse
def _json_ready(value):
    """Plain JSON types only: numpy scalars become Python numbers, NaN and infinities None."""
    if isinstance(value, Mapping):
        return {str(k): _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, np.ndarray)):
        return [_json_ready(v) for v in value]
    if isinstance(value, (np.generic,)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _kept_ranges(channel: Channel) -> tuple[list[tuple[int, int]], list[list[float]]]:
    """Sample ranges outside the channel's edge zones, and the zones (s) they leave out."""
    zones = []
    for entry in channel.history:
        for zone in (entry.get("info") or {}).get("edge_zones_s") or ():
            zones.append([float(min(zone)), float(max(zone))])
    blocked = sorted((max(0, math.ceil((t0 - channel.start_time) * channel.fs - 1e-9)),
                      min(channel.n_samples, math.floor((t1 - channel.start_time) * channel.fs + 1e-9) + 1))
                     for t0, t1 in zones)
    kept, cursor = [], 0
    for i0, i1 in blocked + [(channel.n_samples, channel.n_samples)]:
        if i0 > cursor:
            kept.append((cursor, i0))
        cursor = max(cursor, i1)
    return kept, zones


#: Samples per chunk of the statistics pass (bounded temporaries on long records).
_STATISTICS_CHUNK = 1 << 20


def _statistics(channel: Channel) -> dict[str, Any]:
    """Mean, RMS, peak and crest factor (float64) over the finite samples outside edge zones.

    Sums use numpy's pairwise summation in fixed chunks, never BLAS (whose
    result depends on its thread count), so every process gets the same bits.
    """
    kept, zones = _kept_ranges(channel)
    count, total, squares, peak = 0, 0.0, 0.0, 0.0
    for i0, i1 in kept:
        for start in range(i0, i1, _STATISTICS_CHUNK):
            x = np.asarray(channel.data[start:min(start + _STATISTICS_CHUNK, i1)], dtype=np.float64)
            x = x[np.isfinite(x)]
            if x.size:
                count += x.size
                total += float(np.sum(x))
                squares += float(np.sum(np.square(x)))
                peak = max(peak, float(np.max(np.abs(x))))
    if count == 0:
        raise SigtuneError(f"no finite sample outside the filter edge zones {zones} "
                           f"(record {channel.duration:g} s); use a longer record or a higher cutoff",
                           f"channel {channel.name!r}")
    rms = math.sqrt(squares / count)
    return {"mean": total / count, "rms": rms, "peak": peak,
            "crest_factor": peak / rms if rms > 0 else None,
            "statistics_samples": count, "edge_zones_excluded_s": zones}


def _integration(channel: Channel, settings: IntegrationSettings):
    if not settings.methods:
        return None
    if settings.target not in _INTEGRABLE.get(channel.quantity, ()):
        return {"skipped": f"a {channel.quantity} channel cannot be integrated to {settings.target}"}
    comparison = _motion.compare_integration(channel, methods=settings.methods, target=settings.target,
                                             f_low=settings.f_low)
    return {"target": settings.target, "rows": comparison.rows}


def _evaluate(channel: Channel, evaluation: dict | None):
    if evaluation is None:
        return None
    params = {k: v for k, v in evaluation.items() if k != "kind"}
    try:
        result = getattr(_evaluation, evaluation["kind"])(channel, **params)
    except SigtuneError as err:
        raise _relocated(err, "evaluation") from None
    return {"kind": evaluation["kind"], **result.to_dict()}


def analyse(channel: Channel, settings: AnalysisSettings | Mapping | None = None) -> dict[str, Any]:
    """Return the summary figures of a channel as JSON-ready data.

    Parameters
    ----------
    channel : Channel
        The processed channel.
    settings : AnalysisSettings or dict, optional
        Default ``AnalysisSettings()``.

    Returns
    -------
    dict
        ``channel``, ``unit``, ``quantity``, ``fs_hz``, ``n_samples``,
        ``duration_s``; ``mean``, ``rms``, ``peak`` (largest absolute value)
        in the channel's unit and ``crest_factor`` (float64, finite samples
        outside edge zones; ``statistics_samples`` counts them and
        ``edge_zones_excluded_s`` lists the zones); ``valid_duration_s`` (from
        the audit); ``spectrum`` (the PSD's resolved settings and unit);
        ``peaks`` (see :func:`dsp.find_peaks`); ``band_levels``
        (:meth:`dsp.BandLevels.to_dict`, or None); ``findings`` (the audit's,
        with ``start_s``/``stop_s``); ``integration`` (the comparison
        rows, or a ``skipped`` reason, or None); ``evaluation`` (the result's
        dict with its clause and caution, or None); ``sigtune`` (version).
        NaN and infinities appear as None.

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(20_000) / fs
    >>> ch = Channel(np.sin(2 * np.pi * 50.0 * t), fs=fs, name="x", unit="m/s^2")
    >>> s = analyse(ch, AnalysisSettings(band_fraction=0, integration={"methods": []}))
    >>> round(s["rms"], 4), round(s["crest_factor"], 3), round(s["peaks"][0]["frequency_hz"], 1)
    (0.7071, 1.414, 50.0)
    """
    if not isinstance(channel, Channel):
        raise SigtuneError(f"expected a dsp.Channel; got {type(channel).__name__}", "channel")
    if settings is None or isinstance(settings, Mapping):
        settings = AnalysisSettings.from_dict(settings)
    spec_opts = settings.spectrum.to_dict()
    report = _quality.audit(channel, full_scale=settings.audit.full_scale)
    spectrum = _spectra.psd(channel, **spec_opts)
    peaks = _spectra.find_peaks(spectrum, n=settings.n_peaks) if settings.n_peaks else []
    bands = None
    if settings.band_fraction:
        options = {k: v for k, v in spec_opts.items() if k != "average"}  # band RMS uses the mean PSD
        bands = _bands.band_levels(channel, fraction=settings.band_fraction, **options).to_dict()
    summary = {
        "channel": channel.name, "unit": channel.unit, "quantity": channel.quantity, "fs_hz": channel.fs,
        "n_samples": channel.n_samples, "duration_s": channel.duration,
        **_statistics(channel),
        "valid_duration_s": report.valid_duration_s,
        "spectrum": {"unit": spectrum.unit, "settings": spectrum.settings, "notes": list(spectrum.notes)},
        "peaks": peaks,
        "band_levels": bands,
        "findings": [f.to_dict(channel.fs, channel.start_time) for f in report.findings],
        "integration": _integration(channel, settings.integration),
        "evaluation": _evaluate(channel, settings.evaluation),
        "sigtune": __version__,
    }
    return _json_ready(summary)
