"""The channel and recording model."""

import numpy as np
import pytest

from dsp import Channel, Recording, SigtuneError


def test_channel_derived_values():
    ch = Channel(np.zeros(2048), fs=1024.0, name="bearing_x", unit="g", start_time=1.5)
    assert ch.duration == 2.0
    assert ch.nyquist == 512.0
    assert ch.quantity == "acceleration"
    assert ch.time()[0] == 1.5
    assert ch.time()[-1] == pytest.approx(1.5 + 2047 / 1024.0)


def test_channel_never_writes_into_the_callers_array():
    samples = np.arange(10.0)
    ch = Channel(samples, fs=10.0)
    with pytest.raises(ValueError):
        ch.data[0] = 99.0
    assert samples.flags.writeable  # the caller's own array keeps its flags
    assert samples[0] == 0.0


def test_float32_is_kept_and_integers_become_float64():
    assert Channel(np.zeros(4, np.float32), 4.0).data.dtype == np.float32
    assert Channel(np.zeros(4, np.int16), 4.0).data.dtype == np.float64


@pytest.mark.parametrize("fs, message", [
    (0, r"got fs=0"), (-5.0, r"got fs=-5"), (float("nan"), r"got fs=nan"),
    (float("inf"), r"got fs=inf"), ("fast", r"positive number in Hz; got 'fast'"),
])
def test_bad_rates_are_refused_with_the_value(fs, message):
    with pytest.raises(SigtuneError, match=message):
        Channel(np.zeros(4), fs=fs)


def test_too_few_samples_and_wrong_shapes_are_refused():
    with pytest.raises(SigtuneError, match="at least 2 samples; got 1"):
        Channel(np.zeros(1), 10.0)
    with pytest.raises(SigtuneError, match=r"1-D array; got shape \(2, 3\)"):
        Channel(np.zeros((2, 3)), 10.0)
    with pytest.raises(SigtuneError, match="numeric"):
        Channel(np.array(["a", "b"]), 10.0)


def test_unit_and_quantity_must_agree():
    with pytest.raises(SigtuneError, match="measures acceleration, not velocity"):
        Channel(np.zeros(4), 4.0, unit="g", quantity="velocity")
    assert Channel(np.zeros(4), 4.0, unit="1", quantity="force").quantity == "force"


def test_replace_returns_a_new_channel():
    ch = Channel(np.ones(4), 4.0, name="a")
    other = ch.replace(name="b")
    assert (ch.name, other.name) == ("a", "b")
    assert np.shares_memory(other.data, ch.data)  # no copy of the samples


def test_recording_selection_by_name_and_index():
    rec = Recording([Channel(np.zeros(4), 4.0, name=n) for n in ("x", "y", "z")], source="skid.h5")
    assert rec["y"] is rec[1]
    assert rec.select(["z", 0]).names == ["z", "x"]
    with pytest.raises(SigtuneError, match=r"skid.h5: no channel named 'w'; channels: x, y, z"):
        rec["w"]
    with pytest.raises(SigtuneError, match=r"index must be 0..2"):
        rec[7]


def test_recording_needs_unique_names_and_a_channel():
    with pytest.raises(SigtuneError, match="repeated: x"):
        Recording([Channel(np.zeros(4), 4.0, name="x")] * 2)
    with pytest.raises(SigtuneError, match="at least one channel"):
        Recording([])


def test_a_boolean_is_not_a_rate():
    with pytest.raises(SigtuneError, match=r"positive number in Hz; got True"):
        Channel(np.zeros(4), fs=True)
