"""dsp.blocks: a chain run block by block equals the whole-array chain (stated tolerance)."""

import numpy as np
import pytest

import dsp
from dsp import (Calibrate, Chain, Channel, ConvertUnit, Crop, Detrend, Filter, Gain, Recording, SigtuneError)
from dsp.blocks import RELATIVE_TOLERANCE, block_plan, needs_whole_record, run_in_blocks

N = 2_000_000  # CI size; the 10^8-sample case is in bench/bench_campaign.py
FS = 2000.0


@pytest.fixture(scope="module")
def long_channel():
    rng = np.random.default_rng(7)
    t = np.arange(N) / FS
    x = rng.normal(0.0, 1.0, N) + 0.8 * np.sin(2 * np.pi * 37.0 * t) + 2.5 + 1e-3 * t  # offset and drift
    return Channel(x, FS, name="long", unit="m/s^2", start_time=12.5, metadata={"axis": "z"})


def _assert_equal_within_tolerance(block, whole):
    assert block.n_samples == whole.n_samples and block.data.dtype == whole.data.dtype
    peak = np.max(np.abs(whole.data.astype(np.float64)))
    error = np.max(np.abs(block.data.astype(np.float64) - whole.data.astype(np.float64)))
    assert error <= RELATIVE_TOLERANCE * peak, f"{error / peak:.2e} of the peak"
    assert (block.unit, block.quantity, block.start_time, block.fs) == (whole.unit, whole.quantity,
                                                                        whole.start_time, whole.fs)
    assert block.history == whole.history


CHAINS = {
    "highpass": [Filter(band="highpass", cutoff=1.0)],
    "lowpass_elliptic": [Filter(family="elliptic", band="lowpass", order=6, cutoff=200.0)],
    "bandpass_chebyshev2": [Filter(family="chebyshev2", band="bandpass", order=4, cutoff=[10.0, 300.0])],
    "bandstop_bessel": [Filter(family="bessel", band="bandstop", order=3, cutoff=[45.0, 55.0])],
    "scalings_then_filter": [Gain(2.0, unit="g"), ConvertUnit("mm/s^2"), Filter(band="highpass", cutoff=2.0)],
    "crop_filter_filter": [Crop(100.5, 900.25), Filter(band="highpass", cutoff=0.5, order=2),
                           Filter(band="lowpass", cutoff=400.0)],
    "whole_record_between": [Filter(band="highpass", cutoff=1.0), Detrend("linear"), Gain(0.5),
                             Filter(band="lowpass", cutoff=100.0)],
    "zero_phase": [Filter(band="lowpass", cutoff=100.0, zero_phase=True), Filter(band="highpass", cutoff=3.0)],
}


@pytest.mark.parametrize("name", list(CHAINS))
@pytest.mark.parametrize("block_samples", [65_536, 99_991])
def test_blocks_equal_the_whole_array_chain(long_channel, name, block_samples):
    steps = CHAINS[name]
    whole = Chain(steps).apply(long_channel)  # the reference: the whole record at once
    _assert_equal_within_tolerance(run_in_blocks(steps, long_channel, block_samples=block_samples), whole)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_blocks_read_from_hdf5_equal_the_whole_array_chain(long_channel, tmp_path, dtype):
    ch = long_channel.replace(data=long_channel.data.astype(dtype))
    path = tmp_path / "long.h5"
    dsp.write(Recording([ch.replace(name="other"), ch]), path)
    steps = [Gain(3.0), Filter(band="highpass", cutoff=2.0), Filter(band="lowpass", cutoff=500.0)]
    whole = Chain(steps).apply(dsp.read(path)["long"])
    block = run_in_blocks(steps, path, channel="long", block_samples=131_071)
    assert block.data.dtype == dtype
    _assert_equal_within_tolerance(block.replace(metadata=whole.metadata), whole)


def test_scalings_and_crops_are_exact(long_channel):
    steps = [Calibrate(10.0, "mV/(m/s^2)", to_unit="g"), Crop(1.0, 500.0), Gain(-1.5)]
    volts = long_channel.replace(unit="V", quantity="voltage")
    np.testing.assert_array_equal(run_in_blocks(steps, volts, block_samples=4097).data,
                                  Chain(steps).apply(volts).data)


def test_a_last_block_of_one_sample(long_channel):
    ch = long_channel.replace(data=long_channel.data[:10_001])
    steps = [Gain(2.0), Filter(band="highpass", cutoff=5.0)]
    _assert_equal_within_tolerance(run_in_blocks(steps, ch, block_samples=1000), Chain(steps).apply(ch))


def test_no_steps_returns_the_input(long_channel):
    np.testing.assert_array_equal(run_in_blocks([], long_channel).data, long_channel.data)


def test_the_plan_says_which_steps_need_the_whole_record():
    from dsp.motion import Integrate
    from dsp.resampling import Resample

    assert [needs_whole_record(s) for s in (Gain(2.0), Calibrate(1.0), ConvertUnit("g"), Crop(0.0, 1.0),
                                            Filter(cutoff=5.0))] == [False] * 5
    assert [needs_whole_record(s) for s in (Filter(cutoff=5.0, zero_phase=True), Detrend(), Resample(fs_out=100.0),
                                            Integrate(method="time"), Integrate(method="frequency"))] == [True] * 5
    assert block_plan([Gain(1.5), Filter(cutoff=5.0), Detrend(), Detrend("linear"), Gain(2.0)]) == [
        ("stream", [0, 1]), ("whole", [2]), ("whole", [3]), ("stream", [4])]


def test_errors_name_the_step(long_channel, tmp_path):
    with pytest.raises(SigtuneError, match=r"steps\[1\] \(filter\).*cutoff"):
        run_in_blocks([Gain(2.0), Filter(cutoff=5000.0)], long_channel)
    with pytest.raises(SigtuneError, match=r"chain\[0\] \(detrend\)"):
        run_in_blocks([Crop(0.0, 0.0005), Detrend()], long_channel.replace(data=long_channel.data[:3]),
                      locations=["chain[0] (detrend)", "chain[0] (detrend)"])
    dsp.write(Recording([long_channel.replace(data=long_channel.data[:100])]), tmp_path / "x.h5")
    with pytest.raises(SigtuneError, match=r"x\.h5: no channel 'nope'; channels: long"):
        run_in_blocks([Gain(2.0)], tmp_path / "x.h5", channel="nope")
    with pytest.raises(SigtuneError, match=r"channel: name the channel"):
        run_in_blocks([Gain(2.0)], tmp_path / "x.h5")


@pytest.mark.parametrize("unit, target, output_unit", [("g", None, "mm/s"), ("m/s^2", "displacement", None),
                                                      ("mm/s", None, "um")])
def test_time_integration_with_causal_high_passes_streams(long_channel, unit, target, output_unit):
    from dsp.motion import Integrate

    ch = long_channel.replace(unit=unit, quantity=None)
    steps = [Filter(band="highpass", cutoff=2.0),
             Integrate(method="time", zero_phase=False, f_low=1.0, target=target, output_unit=output_unit)]
    assert [needs_whole_record(s) for s in steps] == [False, False]
    _assert_equal_within_tolerance(run_in_blocks(steps, ch, block_samples=99_991), Chain(steps).apply(ch))


def test_integration_of_a_record_with_a_gap_is_refused_as_the_step_refuses_it(long_channel):
    from dsp.motion import Integrate

    data = long_channel.data.copy()
    data[1_234_567] = np.nan
    with pytest.raises(SigtuneError, match=r"steps\[0\] \(integrate\).*non-finite samples \(first at sample "
                                           r"1234567\)"):
        run_in_blocks([Integrate(method="time", zero_phase=False)], long_channel.replace(data=data))
