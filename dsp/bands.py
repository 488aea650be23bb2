"""Octave and one-third-octave band levels (IEC 61260-1 base-10 bands) and band RMS.

Two ways to find a band's RMS:

``method="psd"`` (default)
    The Welch PSD (:func:`dsp.psd`) integrated over the band: each bin
    stands for ``f +- df/2`` at constant density and the cumulative integral
    is interpolated inside the bins the band edges fall in, so partial bins
    count by their fraction. The bands are ideal (brick-wall), so the bands'
    mean squares add up exactly to the mean square of the covered range.
    Resolution limit: a band narrower than ``min_bins`` (default 5) bins is
    omitted with a note; with no segment length given the segment is chosen
    to give the lowest band ``min_bins`` bins.
``method="filter"``
    A bank of Butterworth band-pass filters (order 3 per band by default,
    the usual choice for octave-band filters, common practice) run causally
    over the record (:func:`scipy.signal.sosfilt`); each band's RMS leaves out
    its own settling time (impulse response down to -60 dB). Real filter
    skirts overlap: for white noise an order-n Butterworth band reads
    ``(pi/2n) / sin(pi/2n)`` times the ideal band's mean square (+0.2 dB for
    n = 3, analytic), so the bands add up to a little more than the total.
"""

from __future__ import annotations

import dataclasses
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
from .spectra import (_DEFAULT_SEGMENT_S, _MIN_DEFAULT_NPERSEG, DETRENDS, _band_integrals, _default_nperseg,
                      _frozen_array, _need_channel, _usable_samples, psd)

__all__ = ["BandLevels", "band_levels", "band_rms", "iec_bands", "MIN_BAND_BINS"]

#: A band narrower than this many frequency bins is omitted from band levels:
#: with fewer bins the partial bins at its edges and the window's leakage
#: (Hann's main lobe is 4 bins wide) decide the result more than the data do.
MIN_BAND_BINS = 5

_G = 10.0 ** (3.0 / 10.0)  # IEC 61260-1:2014 octave frequency ratio, base 10
_R10 = (1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0)  # IEC 61260-1 nominal mantissas
_LOWEST_RELATIVE_EDGE = 1e-4  # band-pass edges below 1e-4 * fs give ill-conditioned sections
_SETTLED_DB = -60.0  # a band filter has settled once its impulse response is 60 dB down


@dataclass(frozen=True, eq=False)
class BandLevels:
    """RMS in frequency bands (octave, one-third octave or one arbitrary band).

    Attributes
    ----------
    frequencies : ndarray
        Exact band mid-frequencies in Hz (IEC 61260-1 base-10 for octave
        bands; the geometric mean of the limits for an arbitrary band).
    nominal : tuple of str
        Labels: the standard's nominal mid-frequencies (``"31.5"``, ``"1000"``)
        or ``"f_low-f_high"`` for an arbitrary band.
    lower_edges, upper_edges : ndarray
        Band limits in Hz.
    values : ndarray
        Band RMS in ``unit`` (the channel's unit).
    unit : str
    scaling : str
        ``"band_rms"``.
    fraction : int
        1 (octave), 3 (one-third octave) or 0 (an arbitrary band).
    channel, settings, notes
        As for :class:`dsp.Spectrum`; ``settings["method"]`` says how the RMS was found.
    """

    frequencies: np.ndarray
    nominal: tuple
    lower_edges: np.ndarray
    upper_edges: np.ndarray
    values: np.ndarray
    unit: str
    scaling: str = "band_rms"
    fraction: int = 3
    channel: str = "ch1"
    settings: Mapping[str, Any] = field(default_factory=dict)
    notes: tuple = ()

    def __post_init__(self):
        for name in ("frequencies", "lower_edges", "upper_edges", "values"):
            object.__setattr__(self, name, _frozen_array(getattr(self, name)))
        object.__setattr__(self, "nominal", tuple(self.nominal))
        object.__setattr__(self, "settings", dict(self.settings))
        object.__setattr__(self, "notes", tuple(self.notes))

    @property
    def total_rms(self) -> float:
        """Root-sum-square of all bands, in ``unit`` (the RMS over the covered range)."""
        return float(np.sqrt(np.sum(np.square(self.values, dtype=np.float64))))

    def to_table(self) -> dict[str, list]:
        """Return the columns nominal, mid, lower and upper edge (Hz) and band RMS."""
        return {"band (Hz)": list(self.nominal), "mid frequency (Hz)": self.frequencies.tolist(),
                "lower edge (Hz)": self.lower_edges.tolist(), "upper edge (Hz)": self.upper_edges.tolist(),
                f"band RMS ({self.unit})": self.values.tolist()}

    def to_dict(self) -> dict[str, Any]:
        """Return the band levels as JSON-ready data."""
        return {"kind": "band_levels", "channel": self.channel, "scaling": self.scaling,
                "unit": self.unit, "fraction": self.fraction, "nominal": list(self.nominal),
                "frequencies_hz": self.frequencies.tolist(), "lower_edges_hz": self.lower_edges.tolist(),
                "upper_edges_hz": self.upper_edges.tolist(), "values": self.values.tolist(),
                "total_rms": self.total_rms, "settings": json_ready(self.settings),
                "notes": list(self.notes)}



# ----------------------------------------------------------------- IEC 61260-1 bands
def _nominal_label(third_index: int) -> str:
    """Nominal mid-frequency text of the one-third-octave band ``1000 * G^(index/3)``."""
    decade, step = divmod(third_index, 10)
    value = _R10[step] * 10.0 ** (decade + 3)
    return f"{round(value, 6):g}"


def iec_bands(fraction: int = 3, f_min: float = 1.0, f_max: float = 20_000.0) -> dict[str, list]:
    """Return the IEC 61260-1 base-10 octave or one-third-octave bands overlapping a range.

    Exact mid-frequencies are ``fm = 1000 * G^(x/b)`` with ``G = 10^(3/10)``
    and ``b = fraction`` (IEC 61260-1:2014, odd b); the band edges are
    ``fm * G^(-1/(2b))`` and ``fm * G^(+1/(2b))``. Nominal labels are the
    standard's preferred values (1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8 per
    decade; octaves 31.5, 63, 125, ...).

    Parameters
    ----------
    fraction : {1, 3}, default 3
        1 for octave bands, 3 for one-third-octave bands.
    f_min, f_max : float, Hz
        Every band whose range overlaps ``[f_min, f_max]`` is listed
        (``f_min == f_max`` gives the band containing that frequency).

    Returns
    -------
    dict
        ``{"index": [...], "nominal": [...], "mid_hz": [...], "lower_hz": [...], "upper_hz": [...]}``.

    Examples
    --------
    >>> bands = iec_bands(3, 900, 1100)
    >>> bands["nominal"], [round(f, 2) for f in bands["lower_hz"]]
    (['1000'], [891.25])
    """
    b = check_choice(fraction, "fraction", (1, 3))
    f_min = check_number(f_min, "f_min", low=0.0, low_open=True, unit="Hz")
    f_max = check_number(f_max, "f_max", low=f_min, unit="Hz")
    half = _G ** (1.0 / (2 * b))
    # Indices of the bands whose edges straddle f_min and f_max.
    x_low = math.ceil(b * math.log(f_min / half / 1000.0, _G) - 1e-9)
    x_high = math.floor(b * math.log(f_max * half / 1000.0, _G) + 1e-9)
    x = np.arange(x_low, x_high + 1)
    mid = 1000.0 * _G ** (x / b)
    keep = (mid * half > f_min) & (mid / half < f_max)
    x, mid = x[keep], mid[keep]
    return {"index": x.tolist(), "nominal": [_nominal_label(int(i) * (3 // b)) for i in x],
            "mid_hz": mid.tolist(), "lower_hz": (mid / half).tolist(), "upper_hz": (mid * half).tolist()}


def _width_ratio(b: int) -> float:
    """Band width divided by mid-frequency for 1/b-octave bands."""
    return _G ** (1.0 / (2 * b)) - _G ** (-1.0 / (2 * b))


# ----------------------------------------------------------------- band levels
def band_levels(channel: Channel, fraction: int = 3, f_min: float | None = None,
                f_max: float | None = None, method: str = "psd", window="hann",
                segment_s: float | None = None, nperseg: int | None = None, overlap: float = 0.5,
                detrend: str = "constant", exclude_edges: bool = True,
                min_bins: int = MIN_BAND_BINS, filter_order: int = 3) -> BandLevels:
    """Return octave or one-third-octave band RMS levels (IEC 61260-1 base-10 bands).

    Parameters
    ----------
    channel : Channel
    fraction : {1, 3}, default 3
        Octave (1) or one-third-octave (3) bands; mid-frequencies, nominal
        labels and edges as :func:`iec_bands`.
    f_min : float, optional
        Lowest frequency of interest in Hz: bands from the one containing it.
        Default: the lowest band at least ``min_bins`` bins wide with the
        default segment length of :func:`dsp.psd`.
    f_max : float, optional
        Highest frequency of interest in Hz (<= Nyquist). Default ``fs/2.56``,
        the usable bandwidth of an anti-aliased recording (common practice).
        Bands reaching above Nyquist are omitted with a note.
    method : {"psd", "filter"}, default ``"psd"``
        PSD integrated over each band, or a Butterworth filter bank (see the
        module docstring).
    window, segment_s, nperseg, overlap
        PSD settings as for :func:`dsp.psd` (``method="psd"`` only). When no
        segment length is given and ``f_min`` is, the segment is the
        smallest power of two (>= 256 samples) giving ``min_bins`` bins across
        the lowest band, capped at the record length; the rule is in ``settings``.
    detrend : {"constant", "linear", "none"}, default ``"constant"``
        Per segment (psd) or over the whole record before filtering (filter).
    exclude_edges : bool, default True
        Leave out filter edge zones recorded in the channel history.
    min_bins : int, default 5
        Resolution limit of ``method="psd"``: bands narrower than this many
        frequency bins are omitted and listed in ``notes``.
    filter_order : int, default 3
        Butterworth order of each band-pass prototype (``method="filter"``), 1 to 6.

    Returns
    -------
    BandLevels
        Band RMS in the channel's unit.

    Examples
    --------
    >>> fs = 4096.0
    >>> t = np.arange(int(20 * fs)) / fs
    >>> ch = Channel(np.sqrt(2) * np.sin(2 * np.pi * 1000.0 * t), fs=fs, unit="m/s^2")
    >>> bands = band_levels(ch, fraction=3, f_min=500, f_max=1500)
    >>> bands.nominal[int(np.argmax(bands.values))], round(bands.total_rms, 3)
    ('1000', 1.0)
    >>> round(band_levels(ch, fraction=3, f_min=500, f_max=1500, method="filter").total_rms, 2)
    1.0
    """
    channel = _need_channel(channel)
    b = check_choice(fraction, "fraction", (1, 3))
    method = check_choice(method, "method", ("psd", "filter"))
    min_bins = check_int(min_bins, "min_bins", low=1)
    nyquist = channel.nyquist
    hint = f"for fs={channel.fs:g} Hz the band edges must stay below Nyquist ({nyquist:g} Hz)"
    f_max_given = f_max is not None
    f_max = channel.fs / 2.56 if f_max is None else check_number(
        f_max, "f_max", low=0.0, high=nyquist, low_open=True, unit="Hz", hint=hint)
    if f_min is not None:
        f_min = check_number(f_min, "f_min", low=0.0, high=f_max, low_open=True, high_open=True,
                             unit="Hz", hint="f_min must be below f_max")
    if method == "filter":
        psd_only = {k: v for k, v in (("window", window != "hann"), ("segment_s", segment_s is not None),
                                      ("nperseg", nperseg is not None), ("overlap", overlap != 0.5)) if v}
        if psd_only:
            raise SigtuneError(f"{', '.join(psd_only)} apply to method='psd' only; the filter bank uses "
                               f"the whole record. Drop them or use method='psd'", "method")
        order = check_int(filter_order, "filter_order", low=1, high=6)
        levels = _filter_bank_levels(channel, b, f_min, f_max, order, detrend, exclude_edges, min_bins)
    else:
        levels = _psd_band_levels(channel, b, f_min, f_max, window, segment_s, nperseg, overlap,
                                  detrend, exclude_edges, min_bins)
    return dataclasses.replace(levels, notes=levels.notes + _default_notes(levels, f_min, f_max_given,
                                                                             f_max, min_bins))


def _default_notes(levels, f_min, f_max_given, f_max, min_bins) -> tuple[str, ...]:
    """Say which band limits were resolved by default (never silently)."""
    notes = []
    if f_min is None:
        notes.append(f"f_min not given: bands start at the lowest band at least {min_bins} frequency "
                     f"bins wide, the {levels.nominal[0]} Hz band; give f_min to choose")
    if not f_max_given:
        notes.append(f"f_max not given: fs/2.56 = {f_max:g} Hz (usable bandwidth of an "
                     f"anti-aliased recording); bands up to the {levels.nominal[-1]} Hz band")
    return tuple(notes)


def _band_segment(fs, n, bandwidth_hz, min_bins) -> tuple[int, str]:
    """Smallest power-of-two segment giving ``min_bins`` bins across the narrowest band."""
    needed = fs * min_bins / bandwidth_hz
    nperseg = max(_MIN_DEFAULT_NPERSEG, 1 << math.ceil(math.log2(needed)))
    longest = 1 << int(math.floor(math.log2(n)))
    nperseg = min(nperseg, longest)
    return nperseg, (f"chosen to resolve the lowest band ({min_bins} bins across "
                     f"{bandwidth_hz:g} Hz): {nperseg} samples ({nperseg / fs:g} s)")


def _candidate_bands(channel, b, f_min, f_max, resolvable, min_bins) -> dict[str, list]:
    """Bands from f_min (default: the lowest resolvable band) to f_max, or raise if none."""
    low = f_min if f_min is not None else resolvable / _G ** (1 / (2 * b))
    if low >= f_max:
        raise SigtuneError(f"no band up to f_max={f_max:g} Hz is {min_bins} bins wide: the lowest "
                           f"resolvable mid-frequency is {resolvable:g} Hz; raise f_max or use a "
                           f"longer segment or record", f"channel {channel.name!r}")
    return iec_bands(b, low, f_max)


def _psd_band_levels(channel, b, f_min, f_max, window, segment_s, nperseg, overlap, detrend,
                     exclude_edges, min_bins) -> BandLevels:
    rule = None
    if segment_s is None and nperseg is None and f_min is not None:
        n_valid = _usable_samples(channel, bool(exclude_edges))[0].shape[0]
        low_band = iec_bands(b, f_min, f_max)["mid_hz"][0]
        nperseg, rule = _band_segment(channel.fs, n_valid, low_band * _width_ratio(b), min_bins)
    spec = psd(channel, window, segment_s, nperseg, overlap, detrend, "mean", exclude_edges)
    notes = list(spec.notes)
    settings = {**spec.settings, "method": "psd integrated over each band", "min_bins": min_bins,
                "fraction": b}
    if rule:
        settings["segment_rule"] = rule
        notes.append(f"segment length {rule}")
    resolvable = min_bins * spec.resolution_hz / _width_ratio(b)  # lowest resolvable mid-frequency
    bands = _candidate_bands(channel, b, f_min, f_max, resolvable, min_bins)
    mid, labels = np.array(bands["mid_hz"]), np.array(bands["nominal"])
    narrow = mid < resolvable * (1 - 1e-9)
    if narrow.any():
        notes.append(f"bands {', '.join(labels[narrow])} Hz omitted: narrower than {min_bins} bins "
                     f"of {spec.resolution_hz:g} Hz (lowest resolvable mid-frequency {resolvable:g} "
                     f"Hz); use a longer segment (nperseg/segment_s) or record to include them")
    keep = ~narrow & _below_nyquist(bands, channel.nyquist, notes)
    if not keep.any():
        raise SigtuneError(f"no band between {f_min or resolvable:g} and {f_max:g} Hz can be resolved "
                           f"with {spec.resolution_hz:g} Hz bins and {min_bins} bins per band; "
                           f"use a longer segment or record, or raise f_min", f"channel {channel.name!r}")
    lower, upper = np.array(bands["lower_hz"])[keep], np.array(bands["upper_hz"])[keep]
    rms = np.sqrt(np.maximum(_band_integrals(spec, lower, upper), 0.0))
    settings.update(f_min_hz=float(lower[0]), f_max_hz=float(upper[-1]))
    return BandLevels(mid[keep], labels[keep].tolist(), lower, upper, rms, channel.unit, "band_rms",
                      b, channel.name, settings, notes)


def _below_nyquist(bands, nyquist, notes) -> np.ndarray:
    upper, labels = np.array(bands["upper_hz"]), np.array(bands["nominal"])
    ok = upper < nyquist
    if not ok.all():
        notes.append(f"bands {', '.join(labels[~ok])} Hz omitted: their upper edge reaches Nyquist "
                     f"({nyquist:g} Hz)")
    return ok


# ----------------------------------------------------------------- filter bank
def _settling_samples(sos: np.ndarray, fs: float, bandwidth_hz: float, n: int) -> int:
    """Samples until the band filter's impulse response stays 60 dB below its peak."""
    # An order-n Butterworth band-pass decays about as exp(-pi B sin(pi/2n) t); 40/B s
    # is several times the -60 dB time for every order allowed, capped at the record.
    length = min(n, math.ceil(40.0 * fs / bandwidth_hz))
    impulse = np.zeros(length)
    impulse[0] = 1.0
    envelope = np.abs(signal.sosfilt(sos, impulse))
    loud = np.flatnonzero(envelope > envelope.max() * 10 ** (_SETTLED_DB / 20))
    return int(loud[-1]) + 1


def _filter_bank_levels(channel, b, f_min, f_max, order, detrend, exclude_edges,
                        min_bins) -> BandLevels:
    detrend = check_choice("none" if detrend in (None, False) else detrend, "detrend", DETRENDS)
    x, _, notes, valid = _usable_samples(channel, bool(exclude_edges))
    if detrend != "none":
        # Removing the mean (or trend) first keeps the band filters' start-up transient small.
        x = signal.detrend(x.astype(np.float64), type=detrend)
    fs, n = channel.fs, x.shape[0]
    default_nperseg, _ = _default_nperseg(n, fs, _DEFAULT_SEGMENT_S, 4)
    resolvable = min_bins * fs / default_nperseg / _width_ratio(b)
    bands = _candidate_bands(channel, b, f_min, f_max, resolvable, min_bins)
    keep = _below_nyquist(bands, channel.nyquist, notes)
    lower_all = np.array(bands["lower_hz"])
    unsound = lower_all < _LOWEST_RELATIVE_EDGE * fs
    if unsound.any():
        notes.append(f"bands {', '.join(np.array(bands['nominal'])[unsound])} Hz omitted: a band-pass "
                     f"below {_LOWEST_RELATIVE_EDGE * fs:g} Hz is numerically unsound at fs={fs:g} Hz; "
                     f"resample first or use method='psd'")
    keep &= ~unsound
    rows, short = [], []
    for i in np.flatnonzero(keep):
        lo, hi = bands["lower_hz"][i], bands["upper_hz"][i]
        sos = signal.butter(order, [lo, hi], btype="bandpass", fs=fs, output="sos")
        settle = _settling_samples(sos, fs, hi - lo, n)
        if n - settle < n // 2:  # less than half the record left after settling
            short.append(bands["nominal"][i])
            continue
        y = signal.sosfilt(sos, x)[settle:]
        rows.append((i, math.sqrt(float(np.mean(np.square(y, dtype=np.float64)))), settle / fs))
    if short:
        notes.append(f"bands {', '.join(short)} Hz omitted: their filters take more than half the "
                     f"record ({n / fs:g} s) to settle; use a longer record or raise f_min")
    if not rows:
        raise SigtuneError(f"no band between {f_min or resolvable:g} and {f_max:g} Hz can be measured "
                           f"with the filter bank on {n / fs:g} s of record", f"channel {channel.name!r}")
    index = [r[0] for r in rows]
    pick = lambda key: np.array(bands[key])[index]  # noqa: E731
    settings = {"fs_hz": fs, "method": f"filter bank: Butterworth band-pass, order {order} per band "
                f"(sosfilt), each band's settling time left out", "filter_order": order, "fraction": b,
                "detrend": detrend, "exclude_edges": bool(exclude_edges), "channel_unit": channel.unit,
                "settling_s": [r[2] for r in rows], "f_min_hz": float(pick("lower_hz")[0]),
                "f_max_hz": float(pick("upper_hz")[-1]), **valid}
    return BandLevels(pick("mid_hz"), pick("nominal").tolist(), pick("lower_hz"), pick("upper_hz"),
                      [r[1] for r in rows], channel.unit, "band_rms", b, channel.name, settings, notes)


# ----------------------------------------------------------------- band RMS
def band_rms(channel: Channel, f_low: float, f_high: float, window="hann",
             segment_s: float | None = None, nperseg: int | None = None, overlap: float = 0.5,
             detrend: str = "constant", exclude_edges: bool = True,
             min_bins: int = MIN_BAND_BINS) -> BandLevels:
    """Return the RMS between two frequencies, from the PSD integrated over the band.

    Parameters
    ----------
    channel : Channel
    f_low, f_high : float
        Band limits in Hz, ``0 <= f_low < f_high <= Nyquist``.
    window, segment_s, nperseg, overlap, detrend, exclude_edges
        As for :func:`dsp.psd`; with no segment length given it is chosen to put
        ``min_bins`` bins across the band (capped at the record length).
    min_bins : int, default 5
        A band narrower than this many bins is rejected.

    Returns
    -------
    BandLevels
        One band (``fraction=0``); ``.total_rms`` is the RMS in the channel's unit.

    Examples
    --------
    >>> fs = 1000.0
    >>> t = np.arange(10_000) / fs
    >>> ch = Channel(2.0 * np.sin(2 * np.pi * 50.0 * t) + np.sin(2 * np.pi * 200.0 * t), fs=fs)
    >>> round(band_rms(ch, 20.0, 100.0).total_rms, 3)  # 2 / sqrt(2)
    1.414
    """
    channel = _need_channel(channel)
    nyquist = channel.nyquist
    f_high = check_number(f_high, "f_high", low=0.0, high=nyquist, low_open=True, unit="Hz",
                          hint=f"Nyquist is {nyquist:g} Hz for fs={channel.fs:g} Hz")
    f_low = check_number(f_low, "f_low", low=0.0, high=f_high, high_open=True, unit="Hz",
                         hint="f_low must be below f_high")
    min_bins = check_int(min_bins, "min_bins", low=1)
    rule = None
    if segment_s is None and nperseg is None:
        n_valid = _usable_samples(channel, bool(exclude_edges))[0].shape[0]
        nperseg, rule = _band_segment(channel.fs, n_valid, f_high - f_low, min_bins)
    spec = psd(channel, window, segment_s, nperseg, overlap, detrend, "mean", exclude_edges)
    if (f_high - f_low) < min_bins * spec.resolution_hz * (1 - 1e-9):
        raise SigtuneError(f"the band {f_low:g} to {f_high:g} Hz spans fewer than {min_bins} bins of "
                           f"{spec.resolution_hz:g} Hz; use a longer segment or a wider band",
                           f"channel {channel.name!r}")
    notes = list(spec.notes) + ([f"segment length {rule}"] if rule else [])
    settings = {**spec.settings, "method": "psd integrated over the band", "min_bins": min_bins}
    if rule:
        settings["segment_rule"] = rule
    ms = max(float(_band_integrals(spec, np.array([f_low]), np.array([f_high]))[0]), 0.0)
    mid = math.sqrt(f_low * f_high) if f_low > 0 else f_high / 2
    return BandLevels([mid], [f"{f_low:g}-{f_high:g}"], [f_low], [f_high], [math.sqrt(ms)],
                      channel.unit, "band_rms", 0, channel.name, settings, notes)
