"""Spectral windows: the names sigtune accepts and their measured properties.

The windows are scipy's, in the periodic ("DFT-even") form that
:func:`scipy.signal.welch` uses, so the properties reported here are the ones
the spectra actually see. Accepted names: ``"rectangular"``, ``"hann"``,
``"hamming"``, ``"flattop"`` (scipy's five-term flat-top) and Kaiser with its
shape factor beta, written ``"kaiser:8.6"`` or as a pair ``("kaiser", 8.6)``.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np
from scipy import signal

from ._validate import check_int, check_number
from .errors import SigtuneError

__all__ = ["WINDOWS", "WindowProperties", "window_properties", "window_samples"]

#: Window names accepted by the spectra (Kaiser also needs its beta).
WINDOWS = ("rectangular", "hann", "hamming", "flattop", "kaiser")

# scipy's own names for the windows whose name differs from ours.
_SCIPY_NAMES = {"rectangular": "boxcar"}

_KAISER_BETA_MAX = 50.0  # beyond this the main lobe is wider than any practical use


def _invalid(window, why: str) -> SigtuneError:
    return SigtuneError(
        f"{why}; got {window!r}. Valid: 'rectangular', 'hann', 'hamming', 'flattop', "
        f"or Kaiser with its beta as 'kaiser:8.6' or ('kaiser', 8.6)", "window")


def resolve_window(window) -> tuple[str, str | tuple[str, float]]:
    """Return ``(label, scipy_spec)`` for a window setting, or raise :class:`SigtuneError`.

    ``label`` is the canonical text (``"hann"``, ``"kaiser:8.6"``) stored in
    results and session files; ``scipy_spec`` is what
    :func:`scipy.signal.get_window` takes.

    Examples
    --------
    >>> resolve_window("kaiser:8.6")
    ('kaiser:8.6', ('kaiser', 8.6))
    >>> resolve_window("rectangular")
    ('rectangular', 'boxcar')
    """
    if isinstance(window, (tuple, list)):
        if len(window) != 2 or window[0] != "kaiser":
            raise _invalid(window, "a window given as a pair must be ('kaiser', beta)")
        name, beta = window
    elif isinstance(window, str):
        name, _, beta_text = window.strip().lower().partition(":")
        beta = _parse_beta(beta_text, window) if beta_text else None
    else:
        raise _invalid(window, "window must be a name or ('kaiser', beta)")
    if name not in WINDOWS:
        raise _invalid(window, "unknown window")
    if name != "kaiser":
        if beta is not None:
            raise _invalid(window, f"the {name} window takes no parameter")
        return name, _SCIPY_NAMES.get(name, name)
    if beta is None:
        # No silent default: the beta decides the leakage/resolution trade-off.
        raise _invalid(window, "the Kaiser window needs its shape factor beta (e.g. 8.6)")
    beta = check_number(beta, "window (Kaiser beta)", low=0.0, high=_KAISER_BETA_MAX)
    return f"kaiser:{beta:g}", ("kaiser", beta)


def _parse_beta(text: str, window) -> float:
    """The Kaiser beta written after the colon of ``"kaiser:8.6"``."""
    try:
        return float(text)
    except ValueError:
        raise _invalid(window, "the Kaiser beta must be a number") from None


def window_samples(window, n: int) -> np.ndarray:
    """Return the ``n`` periodic window samples scipy's Welch estimate uses.

    Parameters
    ----------
    window : str or (str, float)
        A window setting (see the module docstring).
    n : int
        Window length in samples (>= 2).

    Examples
    --------
    >>> window_samples("hann", 4)
    array([0. , 0.5, 1. , 0.5])
    """
    n = check_int(n, "n (window length)", low=2)
    return signal.get_window(resolve_window(window)[1], n, fftbins=True)


@dataclass(frozen=True)
class WindowProperties:
    """Properties of one window of ``n`` samples, measured from its samples.

    Attributes
    ----------
    window : str
        Canonical window label.
    n : int
        Length in samples.
    coherent_gain : float
        ``sum(w) / n``: the gain a tone at a bin centre sees (1 for rectangular).
    enbw_bins : float
        Equivalent noise bandwidth in bins, ``n * sum(w^2) / sum(w)^2``;
        multiply by the bin width ``fs / n`` for Hz.
    scalloping_loss_db : float
        Loss of a tone half-way between two bins relative to one at a bin
        centre, in dB (positive).
    amplitude_correction : float
        ``1 / coherent_gain``: the factor that restores a tone's amplitude.
    energy_correction : float
        ``1 / sqrt(mean(w^2))``: the factor that restores broadband RMS.
    """

    window: str
    n: int
    coherent_gain: float
    enbw_bins: float
    scalloping_loss_db: float
    amplitude_correction: float
    energy_correction: float

    def enbw_hz(self, fs: float) -> float:
        """Return the equivalent noise bandwidth in Hz for sample rate ``fs`` (Hz)."""
        return self.enbw_bins * fs / self.n

    def to_dict(self) -> dict:
        """Return the properties as JSON-ready data."""
        return asdict(self)


def window_properties(name, n: int = 4096) -> WindowProperties:
    """Return coherent gain, ENBW and scalloping loss of a window, from its samples.

    Parameters
    ----------
    name : str or (str, float)
        ``"rectangular"``, ``"hann"``, ``"hamming"``, ``"flattop"``,
        ``"kaiser:<beta>"`` or ``("kaiser", beta)``.
    n : int, default 4096
        Window length in samples; the periodic form is used, as in the spectra.

    Returns
    -------
    WindowProperties

    Notes
    -----
    The scalloping loss is ``-20 log10(|W(1/2 bin)| / W(0))`` with
    ``W(1/2 bin) = sum(w[k] exp(-j pi k / n))``, the window's response to a
    tone half a bin off the bin centre (Harris 1978, eq. for scalloping loss).

    Examples
    --------
    >>> p = window_properties("hann", 1024)
    >>> round(p.coherent_gain, 3), round(p.enbw_bins, 3), round(p.scalloping_loss_db, 2)
    (0.5, 1.5, 1.42)
    """
    label, _ = resolve_window(name)
    w = window_samples(name, n)
    total = float(w.sum())
    half_bin = abs(np.sum(w * np.exp(-1j * np.pi * np.arange(w.size) / w.size)))
    return WindowProperties(
        window=label,
        n=int(w.size),
        coherent_gain=total / w.size,
        enbw_bins=float(w.size * np.sum(w * w) / total**2),
        scalloping_loss_db=float(-20.0 * np.log10(half_bin / total)),
        amplitude_correction=w.size / total,
        energy_correction=float(1.0 / np.sqrt(np.mean(w * w))),
    )
