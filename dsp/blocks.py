"""Long records in bounded memory: a chain run block by block, equal to the whole-array result.

A chain is split into *runs* of steps that stream and the steps that need the
whole record (:func:`needs_whole_record`). A streamed run reads its input a
block at a time (from an HDF5 file through :func:`dsp.io.hdf5.read_block`, or
from an array already in memory) and writes its output into one new array:

* scalings (``gain``, ``calibrate``, ``convert_unit``) multiply each block by
  the step's factor, exactly as the step multiplies the whole array;
* ``crop`` keeps the part of each block inside the crop, by sample index;
* causal filters (``filter`` with ``zero_phase=False``) carry their section
  state from block to block (:meth:`dsp.Filter.block_processor`), starting
  in steady state for the first sample of their input as the whole-array
  filter does. No pre-pass and no overlap are needed: the carried state is
  the whole memory of the filter;
* ``integrate`` by the ``time`` method with causal high-passes
  (``zero_phase=False``) runs as the stages the step is made of: conversion to
  SI, mean removal, causal high-pass, then per stage a cumulative trapezoid
  carried across blocks (the same terms summed in the same order), mean
  removal and high-pass again. Each mean comes from a streaming pass, so a
  velocity takes three passes over the input.

Every other step (zero-phase filtering, which runs backwards from the end;
resampling, whose polyphase filter and edge padding see the whole record;
integration by the ``frequency`` and ``baseline`` methods or with zero-phase
high-passes; differentiation; detrend, which fits the whole record;
weighting) needs the whole record: it gets the array the previous run
produced, as a channel, and runs as in :meth:`dsp.Chain.apply`.

Tolerance
    The result equals ``Chain.apply`` on the whole array to within
    :data:`RELATIVE_TOLERANCE` (1e-9) of the output's peak, for float32 and
    float64 data. The means are summed as numpy sums them (the same pairwise
    tree, leaf by leaf, see :class:`_NumpyMean`), which matters: the
    integration removes a mean before each high-pass and then carries any
    rounding difference on through the cumulative sum. With numpy 2.x the
    result is then the whole-array result bit for bit (the tests and the
    10^8-sample bench measure a difference of 0); the tolerance leaves room
    for another numpy's summation order.
Memory
    :func:`run_in_blocks` itself holds at most **two** full-length arrays at
    once: the output of the current run or step and its input (none while a
    file is streamed), plus a few blocks of ``block_samples`` samples per
    stage. A chain that streams from a file therefore holds one copy: its
    output. A whole-record step adds the working memory it needs internally
    (the frequency-domain integration's padded FFT arrays, a zero-phase
    filter's padded copies); ``bench/results/campaign.md`` gives measured peaks.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from .channel import Channel
from .conditioning import Calibrate, ConvertUnit, Crop, Gain
from .errors import SigtuneError, SigtuneWarning
from .filters import Filter
from .steps import Step
from .units import conversion_factor, si_unit, unit_info

__all__ = ["needs_whole_record", "block_plan", "run_in_blocks", "RELATIVE_TOLERANCE",
           "DEFAULT_BLOCK_SAMPLES"]

#: Samples per block (8 MiB of float64): large enough that per-block overhead is negligible.
DEFAULT_BLOCK_SAMPLES = 1 << 20
#: Agreement with whole-array processing, relative to the output's peak.
RELATIVE_TOLERANCE = 1e-9
#: Steps that multiply every sample by one factor.
SCALINGS = (Gain, Calibrate, ConvertUnit)


def _is_causal_time_integration(step: Step) -> bool:
    from .motion import Integrate

    return isinstance(step, Integrate) and step.method == "time" and not step.zero_phase


def needs_whole_record(step: Step) -> bool:
    """True if ``step`` cannot run block by block with a result equal to the whole-array one.

    Streamed: ``gain``, ``calibrate``, ``convert_unit``, ``crop``, causal
    ``filter`` and ``integrate`` by the ``time`` method with causal high-passes
    (``zero_phase=False``). Everything else needs the whole record (see the
    module docstring).

    Examples
    --------
    >>> needs_whole_record(Filter(cutoff=10.0)), needs_whole_record(Filter(cutoff=10.0, zero_phase=True))
    (False, True)
    """
    if isinstance(step, SCALINGS + (Crop,)) or _is_causal_time_integration(step):
        return False
    return not (isinstance(step, Filter) and not step.zero_phase)


def block_plan(steps: Sequence[Step]) -> list[tuple[str, list[int]]]:
    """Group step indices into ``("stream", [...])`` runs and ``("whole", [i])`` steps, in order.

    Examples
    --------
    >>> from dsp import Gain, Detrend
    >>> block_plan([Gain(2.0), Filter(cutoff=10.0), Detrend(), Gain(0.5)])
    [('stream', [0, 1]), ('whole', [2]), ('stream', [3])]
    """
    plan: list[tuple[str, list[int]]] = []
    for i, step in enumerate(steps):
        if needs_whole_record(step):
            plan.append(("whole", [i]))
        elif plan and plan[-1][0] == "stream":
            plan[-1][1].append(i)
        else:
            plan.append(("stream", [i]))
    return plan


# ---------------------------------------------------------------- sources of blocks
@dataclass(frozen=True)
class _Source:
    """Where a run reads its input: ``read(start, stop)`` returns those samples."""

    n_samples: int
    dtype: np.dtype
    read: Callable[[int, int], np.ndarray]


def _array_source(data: np.ndarray) -> _Source:
    return _Source(int(data.shape[0]), data.dtype, lambda start, stop: data[start:stop])


def _file_source(path, channel, info: dict) -> _Source:
    from .io.hdf5 import read_block

    dtype = np.dtype(np.float32 if info["dtype"] == "float32" else np.float64)  # as read_block returns
    return _Source(int(info["n_samples"]), dtype, lambda start, stop: read_block(path, channel, start, stop))


def _template(n: int, dtype, like: Channel | dict) -> Channel:
    """A channel header of ``n`` samples backed by a zero-stride array (no memory)."""
    data = np.broadcast_to(np.zeros(1, dtype=dtype), (n,))
    if isinstance(like, Channel):
        return like.replace(data=data)
    return Channel(data, like["fs_hz"], name=like["name"], unit=like["unit"], quantity=like.get("quantity"),
                   start_time=like.get("start_time_s", 0.0), metadata=like.get("metadata") or {},
                   history=tuple(like.get("history") or ()))


# ---------------------------------------------------------------- streamed stages
class _Scale:
    def __init__(self, factor: float):
        self.factor = factor  # a Python float, so float32 blocks stay float32 as in the step

    def fresh(self):
        return self

    def process(self, block, start):
        return block * self.factor


class _Window:
    def __init__(self, i0: int, i1: int):
        self.i0, self.i1 = i0, i1

    def fresh(self):
        return self

    def process(self, block, start):
        lo, hi = max(self.i0 - start, 0), max(min(self.i1 - start, block.shape[0]), 0)
        return block[lo:hi] if hi > lo else block[:0]


class _Causal:
    def __init__(self, step: Filter, fs: float, dtype):
        self.step, self.fs, self.dtype = step, fs, dtype
        self.blocks = step.block_processor(fs, level=None)  # steady state for the first sample, as apply starts

    def fresh(self):
        return _Causal(self.step, self.fs, self.dtype)

    def process(self, block, start):
        return self.blocks.process(block).astype(self.dtype, copy=False)


class _Shift:
    def __init__(self, level: float):
        self.level = level

    def fresh(self):
        return self

    def process(self, block, start):
        return block - self.level


class _SI:
    """float64 in SI units, finite samples only (as the integration step reads its input)."""

    def __init__(self, to_si: float, name: str):
        self.to_si, self.name = to_si, name

    def fresh(self):
        return self

    def process(self, block, start):
        x = np.asarray(block, dtype=np.float64)
        bad = np.flatnonzero(~np.isfinite(x))
        if bad.size:
            raise SigtuneError(f"channel {self.name!r} has non-finite samples (first at sample {start + bad[0]}); "
                               f"integration needs a continuous record", "integrate")
        return x * self.to_si if self.to_si != 1.0 else x


class _Trapezoid:
    """Cumulative trapezoid carried across blocks: the same terms, summed in the same order."""

    def __init__(self, dx: float):
        self.dx, self.last, self.total = dx, None, 0.0

    def fresh(self):
        return _Trapezoid(self.dx)

    def process(self, block, start):
        if self.last is None:  # the record's first sample: the integral starts at 0
            out = np.cumsum(np.concatenate(([0.0], self.dx * (block[1:] + block[:-1]) / 2.0)))
        else:
            joined = np.concatenate(([self.last], block))
            out = np.cumsum(np.concatenate(([self.total], self.dx * (joined[1:] + joined[:-1]) / 2.0)))[1:]
        self.last, self.total = block[-1], out[-1]
        return out


def _stream(source: _Source, stages: list, block_samples: int, sink: Callable[[np.ndarray], None]) -> None:
    """Push the source through fresh copies of ``stages`` block by block; hand each output block to ``sink``."""
    stages = [s.fresh() for s in stages]
    positions = [0] * len(stages)  # index of the next input sample of each stage
    for start in range(0, source.n_samples, block_samples):
        block = source.read(start, min(start + block_samples, source.n_samples))
        for k, stage in enumerate(stages):
            n_in = block.shape[0]
            block = stage.process(block, positions[k]) if n_in else block
            positions[k] += n_in
        if block.shape[0]:
            sink(block)


#: Longest range summed by one np.sum call when reproducing numpy's pairwise tree.
_LEAF_SAMPLES = 1 << 16


def _pairwise_ranges(lo: int, hi: int) -> list[tuple[int, int]]:
    """The leaves, in order, of numpy's pairwise summation tree over ``[lo, hi)``, cut at _LEAF_SAMPLES."""
    if hi - lo <= _LEAF_SAMPLES:
        return [(lo, hi)]
    half = (hi - lo) // 2
    half -= half % 8  # numpy splits at a multiple of its 8-way unrolling
    return _pairwise_ranges(lo, lo + half) + _pairwise_ranges(lo + half, hi)


def _pairwise_total(leaves, lo: int, hi: int) -> float:
    """Combine leaf sums (an iterator, in order) as numpy's tree does."""
    if hi - lo <= _LEAF_SAMPLES:
        return next(leaves)
    half = (hi - lo) // 2
    half -= half % 8
    return _pairwise_total(leaves, lo, lo + half) + _pairwise_total(leaves, lo + half, hi)


class _NumpyMean:
    """Mean of a float64 stream, bit for bit ``np.mean`` of the whole array.

    The whole-array integration removes means taken with numpy and then sums
    cumulatively, which carries any rounding difference on as a ramp, so the
    mean must round exactly as numpy's does. For float64 data numpy sums
    pairwise over the whole array; this reproduces that tree leaf by leaf.
    """

    def __init__(self, n: int):
        self.n = n
        self.ranges = _pairwise_ranges(0, n)
        self.pending: list[np.ndarray] = []
        self.pending_from, self.pending_to, self.next_range, self.sums = 0, 0, 0, []

    def add(self, block: np.ndarray) -> None:
        self.pending.append(block)
        self.pending_to += block.shape[0]
        while self.next_range < len(self.ranges) and self.ranges[self.next_range][1] <= self.pending_to:
            lo, hi = self.ranges[self.next_range]
            joined = np.concatenate(self.pending) if len(self.pending) > 1 else self.pending[0]
            self.sums.append(float(np.sum(joined[lo - self.pending_from:hi - self.pending_from])))
            self.pending, self.pending_from = [joined[hi - self.pending_from:]], hi
            self.next_range += 1

    def mean(self) -> float:
        return _pairwise_total(iter(self.sums), 0, self.n) / self.n


def _stream_mean(source: _Source, stages: list, block_samples: int, n: int) -> float:
    """``np.mean`` of the float64 output of ``stages`` (``n`` samples), by one streaming pass."""
    accumulator = _NumpyMean(n)
    _stream(source, stages, block_samples, accumulator.add)
    return accumulator.mean()


def _last_entry_probe(step: Filter, template: Channel) -> dict:
    """The history entry the whole-array filter writes, from a probe as long as its settling time.

    A causal filter's entry (design facts and the edge zone at the record's
    start) depends on the rate, the start time and the settling time, not on
    the record's length once it is longer than the settling time.
    """
    settle = step.design(template.fs).settling_samples
    n = min(template.n_samples, settle + 2)
    probe = template.replace(data=np.zeros(n, dtype=template.data.dtype))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SigtuneWarning)  # the probe is short on purpose
        return step.apply(probe).history[-1]


def _build_run(steps, locations, source: _Source, template: Channel, block_samples: int):
    """Turn a run of streamable steps into stages; return them and the output header."""
    stages: list = []
    for step, location in zip(steps, locations):
        try:
            template = _add_stage(step, stages, source, template, block_samples)
        except SigtuneError as err:
            raise err.located(location) from None
    return stages, template


def _add_stage(step, stages: list, source: _Source, template: Channel, block_samples: int) -> Channel:
    """Append the stage for ``step`` to ``stages``; return the header after it."""
    if isinstance(step, SCALINGS):
        probe = step.apply(template.replace(data=np.ones(2)))  # float64 ones: the factor itself
        stages.append(_Scale(float(probe.data[0])))
        return template.replace(unit=probe.unit, quantity=probe.quantity, history=probe.history)
    if _is_causal_time_integration(step):
        return _add_time_integration(step, stages, source, template, block_samples)
    if isinstance(step, Crop):
        cropped = step.apply(template)
        i0 = int(round((cropped.start_time - template.start_time) * template.fs))
        stages.append(_Window(i0, i0 + cropped.n_samples))
        return cropped
    entry = _last_entry_probe(step, template)
    stages.append(_Causal(step, template.fs, template.data.dtype))
    return template.replace(history=template.history + (entry,))


def _add_time_integration(step, stages: list, source: _Source, template: Channel, block_samples: int) -> Channel:
    """Stages mirroring :class:`dsp.motion.Integrate`'s time method with causal high-passes.

    The whole-array step converts to SI float64, removes the mean, high-passes,
    then per stage integrates (cumulative trapezoid), removes the mean and
    high-passes again, and finally converts to the output unit. Each mean is
    found by a streaming pass through the stages before it.
    """
    from . import motion

    f_low = step.resolved_f_low()[0]
    settle = Filter("butterworth", "highpass", order=step.filter_order, cutoff=f_low).design(template.fs)
    # The step's history entry depends on the record's length only through the edge zones
    # (capped at half the record) and the corner check (f_low >= 1 / duration): a probe
    # twice as long as both (for two stages, acceleration to displacement) gives the same entry.
    n = min(template.n_samples, int(max(2 * motion.EDGE_SETTLING_PER_STAGE * 2 * settle.settling_samples,
                                        2 * template.fs / f_low)) + 4)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SigtuneWarning)  # the probe is short on purpose
        probe = step.apply(template.replace(data=np.zeros(n, dtype=template.data.dtype)))
    highpass = Filter("butterworth", "highpass", order=step.filter_order, cutoff=f_low, zero_phase=False)

    def mean():
        return _stream_mean(source, stages, block_samples, template.n_samples)

    def centre_and_filter():
        stages.append(_Shift(mean()))
        stages.append(_Causal(highpass, template.fs, np.float64))

    stages.append(_SI(unit_info(template.unit).to_si, template.name))
    centre_and_filter()
    for _ in probe.history[-1]["info"]["stages"]:
        stages.append(_Trapezoid(template.dt))
        centre_and_filter()
    factor = conversion_factor(si_unit(probe.quantity), probe.unit)
    if factor != 1.0:
        stages.append(_Scale(factor))
    return _template(template.n_samples, np.float64, probe)


def _run_streamed(steps, locations, source: _Source, template: Channel, block_samples: int) -> Channel:
    stages, header = _build_run(steps, locations, source, template, block_samples)
    out = np.empty(header.n_samples, dtype=header.data.dtype)
    filled = [0]

    def store(block):
        out[filled[0]:filled[0] + block.shape[0]] = block
        filled[0] += block.shape[0]

    _stream(source, stages, block_samples, store)
    return header.replace(data=out)


# ---------------------------------------------------------------- the runner
def run_in_blocks(steps: Sequence[Step], source: Channel | str | os.PathLike, *, channel: int | str | None = None,
                  block_samples: int = DEFAULT_BLOCK_SAMPLES, declare=None,
                  locations: Sequence[str] | None = None) -> Channel:
    """Apply ``steps`` to a long record block by block; return the processed channel.

    Parameters
    ----------
    steps : sequence of Step
        The chain's steps (a :class:`dsp.Chain` is a sequence of steps).
    source : Channel or path
        A channel in memory, or a sigtune HDF5 file streamed from disk.
    channel : int or str, optional
        Channel of the HDF5 file (name or index); required with a path.
    block_samples : int, default 2**20
    declare : callable, optional
        ``declare(channel) -> channel`` relabelling the input's unit and
        quantity before the steps (the session's setup).
    locations : sequence of str, optional
        How errors name each step; default ``"steps[i] (op)"`` as
        :meth:`dsp.Chain.apply`.

    Returns
    -------
    Channel
        Equal to ``Chain(steps).apply(channel)`` within :data:`RELATIVE_TOLERANCE`
        of its peak, with the same unit, start time and history.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> ch = Channel(rng.normal(size=10_000), fs=1000.0)
    >>> steps = [Filter(band="highpass", cutoff=5.0), Gain(2.0)]
    >>> out = run_in_blocks(steps, ch, block_samples=999)
    >>> whole = steps[1].apply(steps[0].apply(ch))
    >>> bool(np.max(np.abs(out.data - whole.data)) <= 1e-9 * np.max(np.abs(whole.data)))
    True
    """
    steps = list(steps)
    locations = list(locations) if locations is not None else [f"steps[{i}] ({s.op})" for i, s in enumerate(steps)]
    if block_samples < 2:
        raise SigtuneError(f"must be at least 2 samples; got {block_samples}", "block_samples")
    if isinstance(source, Channel):
        template, stream = _template(source.n_samples, source.data.dtype, source), _array_source(source.data)
    else:
        if channel is None:
            raise SigtuneError("name the channel of the HDF5 file to process (its name or index)", "channel")
        from .io.hdf5 import channel_info

        info = _select_info(channel_info(source), channel, source)
        stream = _file_source(source, channel, info)
        template = _template(info["n_samples"], stream.dtype, info)
    if declare is not None:
        template = declare(template)
    current: Channel | None = None
    for kind, indices in block_plan(steps):
        if kind == "stream":
            current = _run_streamed([steps[i] for i in indices], [locations[i] for i in indices], stream,
                                    template, block_samples)
        else:
            whole = current if current is not None else template.replace(data=stream.read(0, stream.n_samples))
            current = None  # only `whole` holds the input now, and only while the step needs it
            try:
                current = steps[indices[0]].apply(whole)
            except SigtuneError as err:
                raise err.located(locations[indices[0]]) from None
            del whole
        template = _template(current.n_samples, current.data.dtype, current)
        stream = _array_source(current.data)
    if current is None:  # no steps: the input itself
        current = template.replace(data=stream.read(0, stream.n_samples))
    return current


def _select_info(rows: list[dict], channel, path) -> dict:
    for row in rows:
        if row["name"] == channel or (isinstance(channel, int) and row["index"] == channel):
            return row
    names = ", ".join(r["name"] for r in rows)
    raise SigtuneError(f"no channel {channel!r}; channels: {names}", str(path))
