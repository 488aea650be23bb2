"""Spectra of a channel: PSD, ASD, linear spectrum, spectrogram and peak list.

Band levels, which build on the PSD here, live in :mod:`dsp.bands` and window
properties in :mod:`dsp.windows`.

All estimates are Welch's averaged, windowed periodograms computed by
:func:`scipy.signal.welch` (or :func:`scipy.signal.spectrogram` where each
segment is kept), one-sided. Scalings:

``"psd"``
    power spectral density in unit^2/Hz (``scaling="density"`` in scipy):
    integrating it over frequency gives the mean square
    (:meth:`Spectrum.mean_square`).
``"asd"``
    its square root, unit/sqrt(Hz).
``"rms"`` / ``"peak"``
    linear (amplitude) spectrum in the channel's unit: scipy's
    ``scaling="spectrum"`` divides by ``sum(w)^2`` (the window's amplitude
    correction), so a sinusoid at a bin centre reads its RMS^2; ``"rms"`` is
    the square root of that and ``"peak"`` is ``sqrt(2)`` times it (the
    amplitude of a sinusoid). The DC and Nyquist bins are not doubled by the
    one-sided fold, so there both read ``sqrt(value)``.

Segment length
    Given by duration (``segment_s``) or samples (``nperseg``), not both. The
    default is resolved, reported in ``settings["segment_rule"]`` and never
    silent: the largest power of two <= min(8 s, max(record / 4, 256
    samples)), so that a short record still gets about 7 averages at 50 %
    overlap.
Edge zones
    A filter step may record transient zones near the ends of the record
    (``info["edge_zones_s"]`` in the channel history, absolute seconds). With
    ``exclude_edges=True`` (the default) the estimate uses the longest
    stretch of samples outside every zone and says so in ``notes`` and
    ``settings["valid_duration_s"]``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import signal

from ._json import json_ready
from ._validate import check_choice, check_int, check_number
from .channel import Channel
from .errors import SigtuneError
from .windows import resolve_window, window_samples

__all__ = ["Spectrum", "Spectrogram", "psd", "asd", "linear_spectrum", "spectrogram", "find_peaks"]

DETRENDS = ("none", "constant", "linear")
AVERAGES = ("mean", "peak")
_OVERLAP_MAX = 0.95
_DEFAULT_SEGMENT_S = 8.0
_MIN_DEFAULT_NPERSEG = 256


# ----------------------------------------------------------------- results
def _frozen_array(values) -> np.ndarray:
    arr = np.asarray(values)
    arr = arr.view()
    arr.flags.writeable = False
    return arr


_LABELS = {"psd": "PSD", "asd": "ASD", "rms": "RMS amplitude", "peak": "peak amplitude"}


@dataclass(frozen=True, eq=False)
class Spectrum:
    """A one-sided spectrum with the settings that produced it.

    Attributes
    ----------
    frequencies : ndarray
        Bin centre frequencies in Hz, from 0 to Nyquist.
    values : ndarray
        One value per frequency in ``unit``.
    unit : str
        e.g. ``"(m/s^2)^2/Hz"`` (psd), ``"(m/s^2)/sqrt(Hz)"`` (asd),
        ``"m/s^2"`` (rms/peak).
    scaling : str
        ``"psd"``, ``"asd"``, ``"rms"`` or ``"peak"``.
    channel : str
        Name of the channel analysed.
    settings : dict
        The settings as resolved: window, nperseg, noverlap, overlap,
        resolution_hz, enbw_hz, n_averages, detrend, average, segment_rule,
        valid_duration_s ...
    notes : tuple of str
        What the user should know (default rules applied, samples left out).
    """

    frequencies: np.ndarray
    values: np.ndarray
    unit: str
    scaling: str
    channel: str = "ch1"
    settings: Mapping[str, Any] = field(default_factory=dict)
    notes: tuple = ()

    def __post_init__(self):
        object.__setattr__(self, "frequencies", _frozen_array(self.frequencies))
        object.__setattr__(self, "values", _frozen_array(self.values))
        object.__setattr__(self, "settings", dict(self.settings))
        object.__setattr__(self, "notes", tuple(self.notes))

    @property
    def resolution_hz(self) -> float:
        """Bin spacing in Hz (``fs / nperseg``)."""
        return float(self.settings["resolution_hz"])

    def mean_square(self, f_low: float = 0.0, f_high: float | None = None) -> float:
        """Return the mean square between ``f_low`` and ``f_high`` (Hz) of a PSD, in unit^2.

        Each bin stands for the band ``f +- resolution/2`` at constant
        density (the undoubled DC and Nyquist bins for their half inside
        0..fs/2); the cumulative integral is interpolated linearly inside the
        bins the limits fall in, so partial bins count by their fraction.
        Defaults integrate 0 to fs/2, the whole spectrum (Parseval: the mean
        square of the analysed samples after detrending, window-weighted).
        """
        if self.scaling != "psd":
            raise SigtuneError(f"mean_square needs a PSD; this spectrum is {self.scaling!r}. "
                               f"Compute it with dsp.psd", "scaling")
        top = self.settings["fs_hz"] / 2 if f_high is None else f_high
        return float(_band_integrals(self, np.array([f_low]), np.array([top]))[0])

    def to_table(self) -> dict[str, list]:
        """Return the columns ``{"frequency (Hz)": [...], "<scaling> (<unit>)": [...]}``."""
        return {"frequency (Hz)": self.frequencies.tolist(),
                f"{_LABELS[self.scaling]} ({self.unit})": self.values.tolist()}

    def to_dict(self) -> dict[str, Any]:
        """Return the spectrum as JSON-ready data."""
        return {"kind": "spectrum", "channel": self.channel, "scaling": self.scaling, "unit": self.unit,
                "frequencies_hz": self.frequencies.tolist(), "values": self.values.tolist(),
                "settings": json_ready(self.settings), "notes": list(self.notes)}


@dataclass(frozen=True, eq=False)
class Spectrogram:
    """Segment-by-segment spectra of a channel.

    Attributes
    ----------
    times : ndarray
        Segment centre instants in s on the channel's time axis (including
        its ``start_time``).
    frequencies : ndarray
        Bin centre frequencies in Hz.
    values : ndarray
        Shape ``(len(frequencies), len(times))`` in ``unit``.
    unit, scaling, channel, settings, notes
        As for :class:`Spectrum`.
    """

    times: np.ndarray
    frequencies: np.ndarray
    values: np.ndarray
    unit: str
    scaling: str
    channel: str = "ch1"
    settings: Mapping[str, Any] = field(default_factory=dict)
    notes: tuple = ()

    def __post_init__(self):
        for name in ("times", "frequencies", "values"):
            object.__setattr__(self, name, _frozen_array(getattr(self, name)))
        object.__setattr__(self, "settings", dict(self.settings))
        object.__setattr__(self, "notes", tuple(self.notes))

    def to_table(self) -> dict[str, list]:
        """Return long-form columns: one row per (time, frequency) cell."""
        t, f = np.meshgrid(self.times, self.frequencies)
        return {"time (s)": t.ravel().tolist(), "frequency (Hz)": f.ravel().tolist(),
                f"{_LABELS[self.scaling]} ({self.unit})": self.values.ravel().tolist()}

    def to_dict(self) -> dict[str, Any]:
        """Return the spectrogram as JSON-ready data (values as a list of rows per frequency)."""
        return {"kind": "spectrogram", "channel": self.channel, "scaling": self.scaling,
                "unit": self.unit, "times_s": self.times.tolist(),
                "frequencies_hz": self.frequencies.tolist(), "values": self.values.tolist(),
                "settings": json_ready(self.settings), "notes": list(self.notes)}


# ----------------------------------------------------------------- set-up
@dataclass(frozen=True)
class _Setup:
    """Samples and resolved Welch settings shared by every estimate."""

    x: np.ndarray
    fs: float
    start_s: float
    window: str
    window_array: np.ndarray
    nperseg: int
    noverlap: int
    detrend: str
    settings: dict
    notes: tuple

    @property
    def scipy_detrend(self):
        return False if self.detrend == "none" else self.detrend


def _need_channel(channel) -> Channel:
    if not isinstance(channel, Channel):
        raise SigtuneError(f"expected a dsp.Channel; got {type(channel).__name__}. "
                           f"Wrap samples as dsp.Channel(data, fs=...)", "channel")
    return channel


def _history_edge_zones(channel: Channel) -> list[tuple[float, float]]:
    # Read the history directly (same contract as dsp.edge_zones) so spectra
    # do not depend on the filters module being importable.
    zones = []
    for entry in channel.history:
        info = entry.get("info") or {}
        for zone in info.get("edge_zones_s") or ():
            zones.append((float(zone[0]), float(zone[1])))
    return zones


def _longest_clear_run(channel: Channel, zones) -> tuple[int, int]:
    """Return ``(start, stop)`` sample indices of the longest run outside every zone."""
    n = channel.n_samples
    blocked = []
    for t0, t1 in zones:
        i0 = max(0, math.ceil((min(t0, t1) - channel.start_time) * channel.fs - 1e-9))
        i1 = min(n, math.floor((max(t0, t1) - channel.start_time) * channel.fs + 1e-9) + 1)
        if i1 > i0:
            blocked.append((i0, i1))
    best, cursor = (0, 0), 0
    for i0, i1 in sorted(blocked) + [(n, n)]:
        if i0 - cursor > best[1] - best[0]:
            best = (cursor, i0)
        cursor = max(cursor, i1)
    return best


def _usable_samples(channel: Channel, exclude_edges: bool) -> tuple[np.ndarray, float, list[str], dict]:
    zones = _history_edge_zones(channel) if exclude_edges else []
    if not zones:
        return channel.data, channel.start_time, [], {"valid_duration_s": channel.duration}
    start, stop = _longest_clear_run(channel, zones)
    if (start, stop) == (0, channel.n_samples):  # the zones lie outside this record
        return channel.data, channel.start_time, [], {"valid_duration_s": channel.duration}
    if stop - start < 2:
        raise SigtuneError(f"the filter edge zones {zones} cover the whole record "
                           f"({channel.duration:g} s); use a longer record or exclude_edges=False",
                           f"channel {channel.name!r}")
    used_s = (stop - start) / channel.fs
    note = (f"edge zones left out: analysed {used_s:g} s of {channel.duration:g} s "
            f"(samples {start} to {stop}); set exclude_edges=False to use everything")
    return (channel.data[start:stop], channel.start_time + start / channel.fs, [note],
            {"valid_duration_s": used_s, "valid_start_s": channel.start_time + start / channel.fs,
             "excluded_s": channel.duration - used_s})


def _default_nperseg(n: int, fs: float, cap_s: float, divisor: int) -> tuple[int, str]:
    target = min(cap_s * fs, max(n / divisor, min(n, _MIN_DEFAULT_NPERSEG)))
    nperseg = 1 << int(math.floor(math.log2(max(target, 2))))
    rule = (f"default: largest power of two <= min({cap_s:g} s, max(record/{divisor}, "
            f"{_MIN_DEFAULT_NPERSEG} samples)) = {nperseg} samples ({nperseg / fs:g} s)")
    return nperseg, rule


def _resolve_nperseg(n, fs, segment_s, nperseg, where, cap_s, divisor) -> tuple[int, str]:
    if segment_s is not None and nperseg is not None:
        raise SigtuneError(f"give the segment length once, as segment_s (s) or nperseg (samples); "
                           f"got segment_s={segment_s!r} and nperseg={nperseg!r}", where)
    longest = f"at most {n} samples (segment_s <= {n / fs:g} s) for this record"
    if segment_s is not None:
        seconds = check_number(segment_s, "segment_s", low=0.0, low_open=True, unit="s")
        nperseg = int(round(seconds * fs)) if seconds * fs <= n else n + 1  # 1e308 s must not overflow int()
        if nperseg < 4 or nperseg > n:
            raise SigtuneError(f"a segment of {seconds:g} s is {nperseg} samples at fs={fs:g} Hz; "
                               f"needs at least 4 samples ({4 / fs:g} s) and {longest}", "segment_s")
        return nperseg, f"segment_s={seconds:g} s"
    if nperseg is not None:
        value = check_int(nperseg, "nperseg", low=4)
        if value > n:
            raise SigtuneError(f"segment of {value} samples ({value / fs:g} s) is longer than the "
                               f"record analysed ({n} samples, {n / fs:g} s); use {longest}", "nperseg")
        return value, f"nperseg={value}"
    if n < 4:
        raise SigtuneError(f"needs at least 4 samples for a spectrum; got {n}", where)
    return _default_nperseg(n, fs, cap_s, divisor)


def _setup(channel, window, segment_s, nperseg, overlap, detrend, exclude_edges, *,
           cap_s=_DEFAULT_SEGMENT_S, divisor=4) -> _Setup:
    channel = _need_channel(channel)
    where = f"channel {channel.name!r}"
    label, spec = resolve_window(window)
    overlap = check_number(overlap, "overlap", low=0.0, high=_OVERLAP_MAX,
                           hint="overlap is a fraction of the segment, e.g. 0.5 for 50 %")
    detrend = check_choice("none" if detrend in (None, False) else detrend, "detrend", DETRENDS)
    x, start_s, notes, valid = _usable_samples(channel, bool(exclude_edges))
    n = int(x.shape[0])
    nper, rule = _resolve_nperseg(n, channel.fs, segment_s, nperseg, where, cap_s, divisor)
    noverlap = min(int(round(overlap * nper)), nper - 1)
    n_avg = 1 + (n - nper) // (nper - noverlap)
    if rule.startswith("default"):
        notes.append(f"segment length {rule}")
    # The window is computed once and handed to scipy as an array, so the ENBW
    # reported costs no second window evaluation.
    w = signal.get_window(spec, nper, fftbins=True)
    # np.square + sum rather than np.dot: a BLAS call may wake threads on a busy machine.
    enbw_hz = channel.fs * float(np.sum(np.square(w))) / float(w.sum()) ** 2
    settings = {
        "fs_hz": channel.fs, "window": label, "nperseg": nper, "segment_s": nper / channel.fs,
        "noverlap": noverlap, "overlap": noverlap / nper, "detrend": detrend,
        "resolution_hz": channel.fs / nper, "enbw_hz": enbw_hz,
        "n_averages": n_avg, "unused_tail_samples": (n - nper) % (nper - noverlap) if n > nper else 0,
        "segment_rule": rule, "exclude_edges": bool(exclude_edges), "channel_unit": channel.unit,
        **valid,
    }
    return _Setup(x, channel.fs, start_s, label, w, nper, noverlap, detrend, settings, tuple(notes))


def _check_finite(values: np.ndarray, setup: _Setup, name: str) -> None:
    # Checking the small result costs nothing; the samples are only searched if it failed.
    if np.all(np.isfinite(values)):
        return
    bad = np.flatnonzero(~np.isfinite(setup.x))
    where = f"first at {setup.start_s + bad[0] / setup.fs:g} s" if bad.size else "overflow"
    raise SigtuneError(f"the samples hold {bad.size} non-finite values ({where}); "
                       f"repair the drop-outs or crop them out before a spectrum", f"channel {name!r}")


def _power_unit(unit: str) -> str:
    return f"({unit})" if any(c in unit for c in "/*^ ") else unit


def _welch(setup: _Setup, scaling: str, average: str) -> tuple[np.ndarray, np.ndarray]:
    common = dict(fs=setup.fs, window=setup.window_array, nperseg=setup.nperseg,
                  noverlap=setup.noverlap, detrend=setup.scipy_detrend, scaling=scaling)
    if average == "mean":
        return signal.welch(setup.x, **common)
    # Peak hold: the same per-segment spectra welch averages, maximum per frequency.
    f, _, per_segment = signal.spectrogram(setup.x, mode="psd", **common)
    return f, per_segment.max(axis=-1)


def _spectrum(channel, scaling_kind, window, segment_s, nperseg, overlap, detrend, average,
              exclude_edges) -> tuple[np.ndarray, np.ndarray, _Setup]:
    average = check_choice(average, "average", AVERAGES)
    setup = _setup(channel, window, segment_s, nperseg, overlap, detrend, exclude_edges)
    f, values = _welch(setup, scaling_kind, average)
    _check_finite(values, setup, channel.name)
    setup.settings["average"] = average
    return f, values, setup


# ----------------------------------------------------------------- spectra
def psd(channel: Channel, window="hann", segment_s: float | None = None, nperseg: int | None = None,
        overlap: float = 0.5, detrend: str = "constant", average: str = "mean",
        exclude_edges: bool = True) -> Spectrum:
    """Return the one-sided Welch power spectral density of a channel, in unit^2/Hz.

    Parameters
    ----------
    channel : Channel
    window : str or (str, float), default ``"hann"``
        ``"rectangular"``, ``"hann"``, ``"hamming"``, ``"flattop"``,
        ``"kaiser:<beta>"`` or ``("kaiser", beta)``.
    segment_s : float, optional
        Segment length in s; or give ``nperseg`` in samples (not both).
        Default: the rule in the module docstring, reported in ``settings``.
    nperseg : int, optional
        Segment length in samples.
    overlap : float, default 0.5
        Fraction of a segment shared with the next, 0 to 0.95.
    detrend : {"constant", "linear", "none"}, default ``"constant"``
        Removed from each segment before windowing.
    average : {"mean", "peak"}, default ``"mean"``
        Linear average of the segment periodograms, or peak hold (the
        per-frequency maximum over segments).
    exclude_edges : bool, default True
        Leave out filter edge zones recorded in the channel history.

    Returns
    -------
    Spectrum
        ``scaling="psd"``, ``unit`` e.g. ``"(m/s^2)^2/Hz"``.

    Examples
    --------
    White noise of variance 4 at 1 kHz has a one-sided PSD of 2 * 4 / 1000:

    >>> rng = np.random.default_rng(1)
    >>> ch = Channel(2.0 * rng.standard_normal(200_000), fs=1000.0, unit="m/s^2")
    >>> spec = psd(ch, nperseg=1000)
    >>> spec.unit, round(float(np.median(spec.values)), 3)
    ('(m/s^2)^2/Hz', 0.008)
    """
    f, values, setup = _spectrum(channel, "density", window, segment_s, nperseg, overlap, detrend,
                                 average, exclude_edges)
    return Spectrum(f, values, f"{_power_unit(channel.unit)}^2/Hz", "psd", channel.name,
                    setup.settings, setup.notes)


def asd(channel: Channel, window="hann", segment_s: float | None = None, nperseg: int | None = None,
        overlap: float = 0.5, detrend: str = "constant", average: str = "mean",
        exclude_edges: bool = True) -> Spectrum:
    """Return the amplitude spectral density, the square root of :func:`psd`, in unit/sqrt(Hz).

    Parameters are those of :func:`psd`.

    Examples
    --------
    >>> ch = Channel(np.random.default_rng(2).standard_normal(8192), fs=512.0, unit="g")
    >>> asd(ch).unit
    'g/sqrt(Hz)'
    """
    spec = psd(channel, window, segment_s, nperseg, overlap, detrend, average, exclude_edges)
    return Spectrum(spec.frequencies, np.sqrt(spec.values), f"{_power_unit(channel.unit)}/sqrt(Hz)",
                    "asd", spec.channel, spec.settings, spec.notes)


def linear_spectrum(channel: Channel, amplitude: str = "peak", window="flattop",
                    segment_s: float | None = None, nperseg: int | None = None, overlap: float = 0.5,
                    detrend: str = "constant", average: str = "mean",
                    exclude_edges: bool = True) -> Spectrum:
    """Return the amplitude spectrum in the channel's unit, window-corrected for tones.

    A sinusoid of amplitude A reads A (``amplitude="peak"``) or A/sqrt(2)
    (``"rms"``) at its bin; with the default flat-top window the reading is
    within about 0.01 dB wherever the tone falls between bins. Broadband
    noise is *not* correctly scaled here (use :func:`psd`).

    Parameters
    ----------
    channel : Channel
    amplitude : {"peak", "rms"}, default ``"peak"``
        ``"rms"`` is ``sqrt`` of scipy's ``scaling="spectrum"`` (a
        sinusoid's RMS^2); ``"peak"`` is ``sqrt(2)`` times that, except at
        the DC and Nyquist bins, which are not doubled by the one-sided fold.
    window : default ``"flattop"``
        As for :func:`psd`; flat-top gives the smallest amplitude error.
    segment_s, nperseg, overlap, detrend, average, exclude_edges
        As for :func:`psd`.

    Returns
    -------
    Spectrum
        ``scaling`` is ``amplitude``; ``unit`` is the channel's unit.

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(20_000) / fs
    >>> ch = Channel(3.0 * np.sin(2 * np.pi * 123.4 * t), fs=fs, unit="m/s^2")
    >>> spec = linear_spectrum(ch, nperseg=2000)
    >>> round(float(spec.values.max()), 2)
    3.0
    """
    amplitude = check_choice(amplitude, "amplitude", ("peak", "rms"))
    f, values, setup = _spectrum(channel, "spectrum", window, segment_s, nperseg, overlap, detrend,
                                 average, exclude_edges)
    factor = np.full(values.shape, 2.0 if amplitude == "peak" else 1.0)
    if amplitude == "peak":
        factor[0] = 1.0
        if setup.nperseg % 2 == 0:
            factor[-1] = 1.0
    return Spectrum(f, np.sqrt(values * factor), channel.unit, amplitude, channel.name,
                    setup.settings, setup.notes)


def spectrogram(channel: Channel, window="hann", segment_s: float | None = None,
                nperseg: int | None = None, overlap: float = 0.5, detrend: str = "constant",
                scaling: str = "psd", exclude_edges: bool = True) -> Spectrogram:
    """Return the spectrum of each segment of a channel against time.

    Parameters
    ----------
    channel : Channel
    window, overlap, detrend, exclude_edges
        As for :func:`psd`.
    segment_s, nperseg : optional
        Segment length; default the largest power of two <= min(1 s,
        max(record / 16, 256 samples)), reported in ``settings``.
    scaling : {"psd", "asd", "rms", "peak"}, default ``"psd"``
        As for :func:`psd`, :func:`asd` and :func:`linear_spectrum`.

    Returns
    -------
    Spectrogram
        ``values`` of shape (frequencies, times); ``times`` are segment centres in s.

    Examples
    --------
    >>> ch = Channel(np.random.default_rng(3).standard_normal(4096), fs=1024.0)
    >>> sg = spectrogram(ch, nperseg=256, overlap=0.5)
    >>> sg.values.shape, float(sg.times[0])
    ((129, 31), 0.125)
    """
    scaling = check_choice(scaling, "scaling", ("psd", "asd", "rms", "peak"))
    setup = _setup(channel, window, segment_s, nperseg, overlap, detrend, exclude_edges,
                   cap_s=1.0, divisor=16)
    kind = "density" if scaling in ("psd", "asd") else "spectrum"
    f, t, values = signal.spectrogram(setup.x, fs=setup.fs, window=setup.window_array,
                                      nperseg=setup.nperseg, noverlap=setup.noverlap,
                                      detrend=setup.scipy_detrend, scaling=kind, mode="psd")
    _check_finite(values, setup, channel.name)
    if scaling == "peak":
        values = 2.0 * values
        values[0] /= 2.0
        if setup.nperseg % 2 == 0:
            values[-1] /= 2.0
    if scaling != "psd":
        values = np.sqrt(values)
    unit = {"psd": f"{_power_unit(channel.unit)}^2/Hz", "asd": f"{_power_unit(channel.unit)}/sqrt(Hz)"}
    return Spectrogram(setup.start_s + t, f, values, unit.get(scaling, channel.unit), scaling,
                       channel.name, setup.settings, setup.notes)


# ----------------------------------------------------------------- band integrals
def _band_integrals(spec: Spectrum, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Mean square in each band of a PSD: rectangle rule, partial edge bins by fraction."""
    df = spec.resolution_hz
    # Bin k stands for f_k +- df/2; the one-sided fold leaves the DC bin (and the Nyquist
    # bin of an even segment) undoubled, which is the same as giving them only the half
    # [0, df/2] (resp. [fs/2 - df/2, fs/2]). So the cumulative integral runs from 0 at
    # 0 Hz to the whole mean square at fs/2. Summed in float64 so float32 loses nothing.
    knots = np.concatenate(([0.0], spec.frequencies[:-1] + df / 2, [spec.settings["fs_hz"] / 2]))
    cumulative = np.concatenate(([0.0], np.cumsum(spec.values, dtype=np.float64) * df))
    return np.interp(upper, knots, cumulative) - np.interp(lower, knots, cumulative)


# ----------------------------------------------------------------- peaks
def _parabolic(log_mag: np.ndarray, k: int) -> tuple[float, float]:
    """Vertex ``(offset in bins, log magnitude)`` of the parabola through bins k-1, k, k+1."""
    a, b, c = log_mag[k - 1], log_mag[k], log_mag[k + 1]
    denominator = a - 2.0 * b + c
    if denominator >= 0:  # not a strict maximum: keep the bin
        return 0.0, b
    p = 0.5 * (a - c) / denominator
    return p, b - 0.25 * (a - c) * p


def find_peaks(spectrum: Spectrum, n: int = 10, min_distance_hz: float | None = None,
               f_min: float | None = None, f_max: float | None = None) -> list[dict[str, Any]]:
    """Return the ``n`` largest spectral peaks with interpolated frequency and amplitude.

    Each local maximum (:func:`scipy.signal.find_peaks`) is refined by
    fitting a parabola to the log magnitude of the three bins around it
    (quadratic interpolation, common practice): the vertex gives the
    frequency between bins; the amplitude is the bin's magnitude corrected
    by the window's response at that offset. Frequency accuracy for an
    isolated tone: about 0.02 bin with Hann, Hamming or Kaiser, about 0.15
    bin with the flat-top and rectangular windows (their main lobes are not
    near-parabolic in log magnitude); pick Hann for frequencies, flat-top
    for amplitudes.

    Parameters
    ----------
    spectrum : Spectrum
        ``psd``, ``asd``, ``rms`` or ``peak`` scaling.
    n : int, default 10
        Most peaks returned, largest first.
    min_distance_hz : float, optional
        Peaks closer than this (Hz) to a larger one are dropped; default: none.
    f_min, f_max : float, optional
        Frequency range searched, Hz; default the whole spectrum.

    Returns
    -------
    list of dict
        ``frequency_hz``, ``value`` (the spectrum at the vertex, in its
        ``unit``), ``unit``, ``amplitude`` (the tone's amplitude in the
        channel's unit: for a linear spectrum the value itself, for a PSD or
        ASD the RMS ``sqrt(PSD * ENBW)`` of a tone), ``amplitude_kind``
        (``"peak"`` or ``"rms"``), ``amplitude_unit``, ``bin`` and
        ``interpolated``.

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(10_000) / fs
    >>> ch = Channel(np.sin(2 * np.pi * 60.3 * t), fs=fs)
    >>> peak = find_peaks(linear_spectrum(ch, window="hann", nperseg=1000), n=1)[0]
    >>> round(peak["frequency_hz"], 1), round(peak["amplitude"], 3)
    (60.3, 1.0)
    """
    if not isinstance(spectrum, Spectrum) or spectrum.scaling not in ("psd", "asd", "rms", "peak"):
        raise SigtuneError(f"expected a Spectrum from psd, asd or linear_spectrum; got "
                           f"{type(spectrum).__name__}", "spectrum")
    n = check_int(n, "n", low=1)
    df = spectrum.resolution_hz
    f = spectrum.frequencies
    lo = 0.0 if f_min is None else check_number(f_min, "f_min", low=0.0, unit="Hz")
    hi = f[-1] if f_max is None else check_number(f_max, "f_max", low=lo, low_open=True, unit="Hz")
    distance = None
    if min_distance_hz is not None:
        distance = max(1.0, check_number(min_distance_hz, "min_distance_hz", low=0.0, low_open=True,
                                         unit="Hz") / df)
    values = np.asarray(spectrum.values, dtype=np.float64)
    found, _ = signal.find_peaks(values, distance=distance)
    found = found[(f[found] >= lo) & (f[found] <= hi)]
    found = found[np.argsort(values[found])[::-1][:n]]
    power = spectrum.scaling == "psd"
    with np.errstate(divide="ignore"):
        log_mag = 0.5 * np.log(values) if power else np.log(values)
    window = window_samples(spectrum.settings["window"], spectrum.settings["nperseg"])
    return [_peak_record(spectrum, int(k), log_mag, window) for k in found]


def _peak_record(spectrum: Spectrum, k: int, log_mag: np.ndarray, window: np.ndarray) -> dict[str, Any]:
    neighbours = log_mag[k - 1:k + 2]
    interpolated = 0 < k < log_mag.size - 1 and bool(np.all(np.isfinite(neighbours)))
    offset = _parabolic(log_mag, k)[0] if interpolated else 0.0
    # Amplitude: the bin's magnitude divided by the window's own response at the
    # fitted offset (exact for an isolated tone; the parabola's vertex overshoots
    # by up to ~0.3 dB for Hann and ~0.17 dB for the flat-top).
    response = abs(np.sum(window * np.exp(-2j * np.pi * offset * np.arange(window.size) / window.size)))
    magnitude = math.exp(log_mag[k]) * window.sum() / response
    density = spectrum.scaling in ("psd", "asd")
    value = magnitude**2 if spectrum.scaling == "psd" else magnitude
    amplitude = magnitude * math.sqrt(spectrum.settings["enbw_hz"]) if density else magnitude
    return {"frequency_hz": float((k + offset) * spectrum.resolution_hz + spectrum.frequencies[0]),
            "value": float(value), "unit": spectrum.unit, "amplitude": float(amplitude),
            "amplitude_kind": "peak" if spectrum.scaling == "peak" else "rms",
            "amplitude_unit": spectrum.settings.get("channel_unit", ""), "bin": k,
            "interpolated": bool(interpolated and offset != 0.0)}

