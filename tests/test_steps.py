"""Steps as data: serialisation, the registry and the chain."""

import json

import numpy as np
import pytest

from dsp import Calibrate, Chain, Channel, ConvertUnit, Crop, Detrend, Gain, SigtuneError, step_from_dict
from dsp.units import STANDARD_GRAVITY

STEPS = [
    Gain(2.5), Gain(1e3, unit="mm/s^2"), Calibrate(100.0, "mV/g"), Calibrate(10.2, "mV/(m/s^2)", to_unit="g"),
    ConvertUnit("g"), Detrend("linear"), Detrend("polynomial", order=3), Crop(0.5, 1.5), Crop(0.25),
]


@pytest.mark.parametrize("step", STEPS, ids=lambda s: s.op)
def test_step_round_trips_through_json(step):
    data = json.loads(json.dumps(step.to_dict()))
    assert step_from_dict(data) == step


def test_chain_records_history_in_order_with_version():
    ch = Channel(np.linspace(-1, 1, 100), fs=100.0, unit="g")
    out = Chain([ConvertUnit("m/s^2"), Detrend("constant"), Gain(2.0)]).apply(ch)
    assert [h["op"] for h in out.history] == ["convert_unit", "detrend", "gain"]
    assert all("sigtune" in h for h in out.history)
    assert ch.history == ()  # the input channel is untouched


def test_chain_replays_from_a_channels_history():
    ch = Channel(np.linspace(0, 1, 50) ** 2, fs=50.0, unit="g")
    chain = Chain([ConvertUnit("m/s^2"), Detrend("linear"), Crop(0.1, 0.9)])
    first = chain.apply(ch)
    replayed = Chain.from_list(first.history).apply(ch)
    np.testing.assert_array_equal(first.data, replayed.data)
    assert Chain.from_list(first.history) == chain


def test_stages_yield_each_intermediate_channel():
    ch = Channel(np.ones(10), fs=10.0)
    stages = list(Chain([Gain(2.0), Gain(3.0)]).stages(ch))
    assert [s.data[0] for s in stages] == [2.0, 6.0]


def test_unknown_op_lists_the_valid_ones():
    with pytest.raises(SigtuneError, match=r"steps\[1\].op: unknown op 'smooth'; valid ops: .*gain"):
        Chain([{"op": "gain", "factor": 2.0}, {"op": "smooth"}])


def test_unknown_and_missing_settings_are_named():
    with pytest.raises(SigtuneError, match=r"step.gain_db: unknown setting 'gain_db' for op 'gain'; "
                                           r"valid settings: factor, unit"):
        step_from_dict({"op": "gain", "gain_db": 6})
    with pytest.raises(SigtuneError, match=r"op 'gain' needs setting 'factor'"):
        step_from_dict({"op": "gain"})


def test_bad_setting_values_name_the_step():
    with pytest.raises(SigtuneError, match=r"steps\[0\], order: must be a whole number from 1 to 10; got 99"):
        Chain([{"op": "detrend", "kind": "polynomial", "order": 99}])
    with pytest.raises(SigtuneError, match=r"kind: must be one of 'constant', 'linear', 'polynomial'"):
        Detrend("quadratic")


def test_calibrate_volts_to_acceleration():
    volts = Channel(np.full(8, 0.1), fs=8.0, unit="V")
    out = Calibrate(100.0, "mV/g", to_unit="m/s^2").apply(volts)
    assert out.unit == "m/s^2" and out.quantity == "acceleration"
    np.testing.assert_allclose(out.data, STANDARD_GRAVITY, rtol=1e-12)  # 0.1 V at 100 mV/g = 1 g
    mv = Channel(np.full(8, 100.0), fs=8.0, unit="mV")
    np.testing.assert_allclose(Calibrate(100.0, "mV/g").apply(mv).data, 1.0, rtol=1e-12)


def test_calibrate_refuses_a_channel_already_in_engineering_units():
    with pytest.raises(SigtuneError, match="expects a voltage channel"):
        Calibrate(100.0).apply(Channel(np.ones(4), 4.0, unit="g"))


def test_convert_unit_refuses_another_quantity():
    with pytest.raises(SigtuneError, match=r"cannot express acceleration \(g\) in mm/s"):
        ConvertUnit("mm/s").apply(Channel(np.ones(4), 4.0, unit="g"))


def test_detrend_removes_a_line_and_a_polynomial():
    t = np.linspace(0, 1, 200)
    ch = Channel(3.0 + 2.0 * t, fs=200.0)
    assert np.max(np.abs(Detrend("linear").apply(ch).data)) < 1e-12  # a line is removed exactly (analytic)
    quad = Channel(1 - 4 * t + 5 * t**2, fs=200.0)
    assert np.max(np.abs(Detrend("polynomial", order=2).apply(quad).data)) < 1e-10


def test_crop_keeps_the_interval_and_shifts_start_time():
    ch = Channel(np.arange(100.0), fs=10.0)
    out = Crop(2.0, 5.0).apply(ch)
    assert out.n_samples == 30 and out.data[0] == 20.0 and out.start_time == 2.0
    with pytest.raises(SigtuneError, match="fewer than 2 samples"):
        Crop(20.0, 30.0).apply(ch)
    with pytest.raises(SigtuneError, match=r"end_s: must be > 2 s; got 1"):
        Crop(2.0, 1.0)


def test_gain_refuses_zero():
    with pytest.raises(SigtuneError, match="factor: must be non-zero"):
        Gain(0.0)


@pytest.mark.parametrize("value", [True, "5", "2.0"])
def test_numeric_settings_refuse_booleans_and_text(value):
    with pytest.raises(SigtuneError, match=r"factor: must be a number; got"):
        Gain(value)
