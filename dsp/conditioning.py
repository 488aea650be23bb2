"""Simple conditioning steps: gain, calibration, unit change, detrend, crop."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal

from ._validate import check_choice, check_int, check_number
from .channel import Channel
from .errors import SigtuneError
from .steps import Step, register_step
from .units import conversion_factor, sensitivity_factor, unit_info

__all__ = ["Gain", "Calibrate", "ConvertUnit", "Detrend", "Crop", "detrend_samples"]


@register_step
@dataclass(frozen=True)
class Gain(Step):
    """Multiply the samples by a constant, optionally declaring the new unit.

    Parameters
    ----------
    factor : float
        Multiplier (finite, non-zero).
    unit : str, optional
        Unit of the result; default unchanged.
    """

    op = "gain"
    factor: float
    unit: str | None = None

    def __post_init__(self):
        factor = check_number(self.factor, "factor")
        if factor == 0:
            raise SigtuneError("must be non-zero; got 0", "factor")
        object.__setattr__(self, "factor", factor)
        if self.unit is not None:
            object.__setattr__(self, "unit", unit_info(self.unit, "unit").symbol)

    def process(self, channel: Channel) -> Channel:
        changes = {"data": channel.data * self.factor}
        if self.unit is not None:
            changes.update(unit=self.unit, quantity=unit_info(self.unit).quantity)
        return channel.replace(**changes)


@register_step
@dataclass(frozen=True)
class Calibrate(Step):
    """Turn a voltage channel into engineering units from the sensor's sensitivity.

    Parameters
    ----------
    sensitivity : float
        From the calibration certificate, e.g. ``100`` for 100 mV/g.
    sensitivity_unit : str, default ``"mV/g"``
        ``'mV/g'``, ``'mV/(m/s^2)'``, ``'mV/(mm/s)'``, ``'mV/N'``, ``'mV/Pa'`` ...
    to_unit : str, optional
        Unit of the result; default the sensitivity's measured unit.
    """

    op = "calibrate"
    sensitivity: float
    sensitivity_unit: str = "mV/g"
    to_unit: str | None = None

    def __post_init__(self):
        sensitivity_factor(self.sensitivity, self.sensitivity_unit)  # validates both
        object.__setattr__(self, "sensitivity", float(self.sensitivity))
        if self.to_unit is not None:
            object.__setattr__(self, "to_unit", unit_info(self.to_unit, "to_unit").symbol)

    def process(self, channel: Channel) -> Channel:
        if channel.quantity != "voltage":
            raise SigtuneError(f"calibration expects a voltage channel (V or mV); channel {channel.name!r} "
                               f"is already in {channel.unit}. Remove the calibrate step or use gain.",
                               "calibrate")
        v_per_unit, measured = sensitivity_factor(self.sensitivity, self.sensitivity_unit)
        to_unit = self.to_unit or measured
        factor = unit_info(channel.unit).to_si / v_per_unit * conversion_factor(measured, to_unit)
        return channel.replace(data=channel.data * factor, unit=to_unit, quantity=unit_info(to_unit).quantity)


@register_step
@dataclass(frozen=True)
class ConvertUnit(Step):
    """Express the channel in another unit of the same quantity (m/s^2 -> g ...)."""

    op = "convert_unit"
    to_unit: str

    def __post_init__(self):
        object.__setattr__(self, "to_unit", unit_info(self.to_unit, "to_unit").symbol)

    def process(self, channel: Channel) -> Channel:
        target = unit_info(self.to_unit)
        if target.quantity != channel.quantity:
            raise SigtuneError(f"cannot express {channel.quantity} ({channel.unit}) in {self.to_unit} "
                               f"({target.quantity})", "to_unit")
        factor = conversion_factor(channel.unit, self.to_unit)
        return channel.replace(data=channel.data * factor, unit=self.to_unit)


DETREND_KINDS = ("constant", "linear", "polynomial")


def detrend_samples(x: np.ndarray, kind: str = "constant", order: int = 2) -> np.ndarray:
    """Return ``x`` less its mean, its least-squares line or a fitted polynomial.

    Statistics are accumulated in float64; the result keeps the input's dtype.
    """
    if kind in ("constant", "linear"):
        return signal.detrend(x, type=kind).astype(x.dtype, copy=False)
    t = np.linspace(-1.0, 1.0, x.size)  # scaled abscissa keeps the fit well conditioned
    coef = np.polynomial.polynomial.polyfit(t, x.astype(np.float64, copy=False), order)
    return (x - np.polynomial.polynomial.polyval(t, coef)).astype(x.dtype, copy=False)


@register_step
@dataclass(frozen=True)
class Detrend(Step):
    """Remove the mean (``constant``), a straight line (``linear``) or a polynomial.

    Parameters
    ----------
    kind : {"constant", "linear", "polynomial"}, default ``"constant"``
    order : int, default 2
        Polynomial order for ``kind="polynomial"`` (1 to 10).
    """

    op = "detrend"
    kind: str = "constant"
    order: int = 2

    def __post_init__(self):
        check_choice(self.kind, "kind", DETREND_KINDS)
        object.__setattr__(self, "order", check_int(self.order, "order", low=1, high=10))

    def process(self, channel: Channel) -> Channel:
        return channel.replace(data=detrend_samples(channel.data, self.kind, self.order))


@register_step
@dataclass(frozen=True)
class Crop(Step):
    """Keep the samples between two instants.

    Parameters
    ----------
    start_s : float, default 0.0
        Start, in s from the channel's first sample.
    end_s : float, optional
        End in s from the first sample (exclusive); default the end of the record.
    """

    op = "crop"
    start_s: float = 0.0
    end_s: float | None = None

    def __post_init__(self):
        object.__setattr__(self, "start_s", check_number(self.start_s, "start_s", low=0, unit="s"))
        if self.end_s is not None:
            end = check_number(self.end_s, "end_s", low=self.start_s, low_open=True, unit="s")
            object.__setattr__(self, "end_s", end)

    def process(self, channel: Channel) -> Channel:
        i0 = int(round(self.start_s * channel.fs))
        i1 = channel.n_samples if self.end_s is None else int(round(self.end_s * channel.fs))
        i1 = min(i1, channel.n_samples)
        if i1 - i0 < 2:
            raise SigtuneError(f"keeps fewer than 2 samples; the record is {channel.duration:g} s long, "
                               f"choose 0 <= start_s < end_s <= {channel.duration:g}", "crop")
        return channel.replace(data=channel.data[i0:i1], start_time=channel.start_time + i0 / channel.fs)
