"""Reading and writing recordings: round trips, files from writers we did not write, options."""

from __future__ import annotations

import json
import os

import h5py
import numpy as np
import pytest
import scipy.io.wavfile
import soundfile
from hypothesis import assume, given, settings
from hypothesis import strategies as st

import dsp
from dsp import Channel, Recording, SigtuneError
from dsp.io import FORMATS, format_for, hdf5, read, write
from dsp.io.wav import sidecar_path

ALL_FORMATS = list(FORMATS)
LOSSLESS_FLOAT64 = ["csv", "tsv", "wav", "h5", "npz"]  # wav written as DOUBLE by default


def _recording(n=500, fs=1024.0, dtype=np.float64, seed=3) -> Recording:
    rng = np.random.default_rng(seed)
    return Recording([
        Channel(rng.normal(0, 2.0, n).astype(dtype), fs, name="A1", unit="g",
                metadata={"location": "pump foot", "sensitivity": 100.0, "sensitivity_unit": "mV/g"}),
        Channel((rng.normal(0, 1e-3, n) + 1e-7).astype(dtype), fs, name="vel x", unit="mm/s",
                history=({"op": "gain", "factor": 2.0, "unit": None, "sigtune": "0.1.0"},)),
        Channel(np.linspace(-1e5, 1e5, n).astype(dtype), fs, name="P3", unit="Pa"),
    ], metadata={"site": "invented test rig", "run": 7})


def _snapshot(path):
    st_ = os.stat(path)
    with open(path, "rb") as fh:
        return fh.read(), st_.st_mtime_ns


# ---------------------------------------------------------------- round trips


@pytest.mark.parametrize("fmt", LOSSLESS_FLOAT64)
def test_float64_round_trip_is_bit_exact(tmp_path, fmt):
    rec = _recording()
    back = read(write(rec, tmp_path / f"r.{fmt}"))
    assert back.names == rec.names
    for a, b in zip(rec, back):
        assert b.fs == a.fs and b.unit == a.unit and b.quantity == a.quantity
        assert b.data.dtype == np.float64
        np.testing.assert_array_equal(b.data, a.data)  # lossless: exact equality, no tolerance


@pytest.mark.parametrize("fmt", ["h5", "npz", "wav", "csv"])
def test_float32_values_survive(tmp_path, fmt):
    rec = _recording(dtype=np.float32)
    options = {"subtype": "FLOAT"} if fmt == "wav" else {}
    back = read(write(rec, tmp_path / f"r.{fmt}", **options))
    for a, b in zip(rec, back):
        np.testing.assert_array_equal(b.data, a.data.astype(np.float64))
        if fmt != "csv":  # text holds decimals, which read back as float64
            assert b.data.dtype == np.float32


@pytest.mark.parametrize("fmt", ["h5", "npz", "wav"])
def test_metadata_and_history_round_trip(tmp_path, fmt):
    rec = _recording()
    back = read(write(rec, tmp_path / f"r.{fmt}"))
    for a, b in zip(rec, back):
        assert b.metadata == a.metadata
        assert list(b.history) == list(a.history)
        assert b.start_time == a.start_time
    assert back.metadata["site"] == "invented test rig" and back.metadata["run"] == 7


@pytest.mark.parametrize("fmt", ["h5", "npz"])
def test_channels_of_different_rates_and_lengths(tmp_path, fmt):
    rec = Recording([Channel(np.arange(10.0), 10.0, name="slow"),
                     Channel(np.arange(1000.0), 1000.0, name="fast", start_time=2.5)])
    back = read(write(rec, tmp_path / f"r.{fmt}"))
    assert [c.fs for c in back] == [10.0, 1000.0]
    assert [c.n_samples for c in back] == [10, 1000]
    assert back["fast"].start_time == 2.5


@pytest.mark.parametrize("fmt", ALL_FORMATS)
def test_writing_a_single_channel_and_format_override(tmp_path, fmt):
    ch = Channel(np.sin(np.arange(256) / 5.0), 256.0, name="A1", unit="m/s^2")
    path = write(ch, tmp_path / "no_extension.dat", format=fmt)
    back = read(path, format=fmt)
    np.testing.assert_array_equal(back["A1"].data, ch.data)
    assert format_for(path, fmt) == fmt


@pytest.mark.parametrize("fmt", ALL_FORMATS)
def test_reading_leaves_the_file_unchanged(tmp_path, fmt):
    path = write(_recording(), tmp_path / f"r.{fmt}")
    before = _snapshot(path)
    side = sidecar_path(path)
    side_before = _snapshot(side) if side.exists() else None
    read(path)
    assert _snapshot(path) == before
    if side_before is not None:
        assert _snapshot(side) == side_before


@pytest.mark.parametrize("fmt", ALL_FORMATS)
def test_write_is_atomic_and_leaves_no_temporary_files(tmp_path, fmt):
    write(_recording(), tmp_path / f"r.{fmt}")
    write(_recording(seed=4), tmp_path / f"r.{fmt}")  # replaces the first
    leftovers = [p.name for p in tmp_path.iterdir() if p.name.endswith(".part")]
    assert leftovers == []
    np.testing.assert_array_equal(read(tmp_path / f"r.{fmt}")[0].data, _recording(seed=4)[0].data)


@pytest.mark.parametrize("fmt", ALL_FORMATS)
def test_nonfinite_samples_kept_when_allowed(tmp_path, fmt):
    x = np.arange(100.0)
    x[10:13] = np.nan
    x[50] = np.inf
    path = write(Channel(x, 100.0, name="A1"), tmp_path / f"r.{fmt}")
    back = read(path, allow_nonfinite=True)
    np.testing.assert_array_equal(np.isnan(back[0].data), np.isnan(x))
    assert back[0].data[50] == np.inf


@settings(max_examples=40, deadline=None)
@given(values=st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=2, max_size=40),
       fs=st.sampled_from([1.0, 100.0, 5120.0, 48000.0, 12.5]),
       fmt=st.sampled_from(["csv", "tsv", "wav", "h5", "npz"]))
def test_property_any_finite_float64_round_trips(tmp_path_factory, values, fs, fmt):
    # Any finite doubles, including subnormals, -0.0 and 1e308, come back bit for bit.
    assume(fmt != "wav" or fs.is_integer())  # WAV stores an integer rate
    path = tmp_path_factory.mktemp("prop") / f"r.{fmt}"
    data = np.array(values, dtype=np.float64)
    back = read(write(Channel(data, fs, name="x", unit="V"), path))
    assert back["x"].fs == fs
    np.testing.assert_array_equal(back["x"].data.view(np.int64), data.view(np.int64))


# ---------------------------------------------------------------- WAV


@pytest.mark.parametrize("subtype,bits", [("PCM_16", 16), ("PCM_24", 24), ("PCM_32", 32)])
def test_pcm_round_trip_within_half_a_step(tmp_path, subtype, bits):
    rec = _recording(n=2000)
    back = read(write(rec, tmp_path / "p.wav", subtype=subtype))
    for a, b in zip(rec, back):
        peak = np.max(np.abs(a.data))
        step = peak * 2.0**(1 - bits) * 2.0**bits / (2.0**bits - 2)  # full scale = peak * top/(top-1)
        # analytic: rounding to the integer grid errs by at most half a step (+ float32 rounding)
        assert np.max(np.abs(b.data - a.data)) <= 0.5 * step + 2e-7 * peak
        assert b.unit == a.unit


def test_pcm_full_scale_option(tmp_path):
    ch = Channel(np.array([0.0, 0.5, 1.0, -1.0, -0.25, 0.3]), 8.0, name="A1", unit="g")
    back = read(write(ch, tmp_path / "p.wav", subtype="PCM_16", full_scale=1.0))
    # int16 codes: 0.5 -> 16384; +1.0 FS has no code and takes 32767; -1.0 -> -32768;
    # 0.3 -> round(9830.4) = 9830 (analytic, value / 32768 on reading)
    np.testing.assert_array_equal(back[0].data, np.array([0, 16384, 32767, -32768, -8192, 9830]) / 32768)
    assert back[0].unit == "g" and "calibration" not in back[0].metadata  # scale 1.0 is no calibration
    louder = ch.replace(data=ch.data * 4)
    with pytest.raises(SigtuneError, match=r"reaches 4 g, beyond full_scale=1 g: PCM_16 would clip"):
        write(louder, tmp_path / "q.wav", subtype="PCM_16", full_scale=1.0)
    assert not (tmp_path / "q.wav").exists()


@pytest.mark.parametrize("dtype,scale", [(np.int16, 32768.0), (np.int32, 2.0**31)])
def test_reads_integer_wav_from_scipy_as_fraction_of_full_scale(tmp_path, dtype, scale):
    rng = np.random.default_rng(5)
    info = np.iinfo(dtype)
    codes = rng.integers(info.min, info.max, size=(3000, 3), endpoint=True, dtype=dtype)
    codes[0] = [info.min, info.max, 0]
    path = tmp_path / "scipy.wav"
    scipy.io.wavfile.write(path, 8000, codes)
    rec = read(path)
    assert rec.names == ["ch1", "ch2", "ch3"] and rec[0].fs == 8000.0
    for i, ch in enumerate(rec):
        assert ch.unit == "FS"
        # libsndfile/soundfile convention: integer value / 2^(bits-1); int16 -32768 -> -1.0
        np.testing.assert_array_equal(ch.data.astype(np.float64), codes[:, i] / scale)


def test_reads_float32_wav_from_scipy(tmp_path):
    x = np.random.default_rng(6).normal(0, 0.3, (1000, 2)).astype(np.float32)
    x[0, 0] = 3.5  # float WAV may exceed +-1.0: must not be clipped
    scipy.io.wavfile.write(tmp_path / "f.wav", 2000, x)
    rec = read(tmp_path / "f.wav")
    np.testing.assert_array_equal(rec[0].data, x[:, 0])
    np.testing.assert_array_equal(rec[1].data, x[:, 1])
    assert rec[0].data.dtype == np.float32 and rec[0].unit == "FS"


def test_wav_calibration_from_sensitivity_option(tmp_path):
    codes = (np.array([0, 16384, -16384, 8192] * 4, dtype=np.int16))
    scipy.io.wavfile.write(tmp_path / "v.wav", 1000, codes)
    rec = read(tmp_path / "v.wav", calibration={0: {"name": "acc", "sensitivity": 100.0,
                                                    "sensitivity_unit": "mV/g", "full_scale_volts": 10.0}})
    # 0.5 FS * 10 V = 5 V; 5 V / 0.1 V/g = 50 g (analytic)
    assert rec[0].name == "acc" and rec[0].unit == "g"
    np.testing.assert_allclose(rec[0].data[:4], [0.0, 50.0, -50.0, 25.0], rtol=1e-12)
    assert rec[0].metadata["calibration"]["sensitivity"] == 100.0


def test_wav_calibration_with_target_unit_and_scale(tmp_path):
    codes = np.array([0, 16384, -16384, 8192], dtype=np.int16)
    scipy.io.wavfile.write(tmp_path / "v.wav", 1000, codes)
    rec = read(tmp_path / "v.wav", calibration=[{"sensitivity": 10.0, "sensitivity_unit": "mV/(m/s^2)",
                                                 "full_scale_volts": 5.0, "unit": "g"}])
    # 0.5 FS -> 2.5 V -> 250 m/s^2 -> 250 / 9.80665 g (g_n exact, ISO 80000-3); 16-bit samples
    # are held as float32, so the product carries float32 rounding (2^-24 relative)
    np.testing.assert_allclose(rec[0].data[1], 250.0 / 9.80665, rtol=1.2e-7)
    rec = read(tmp_path / "v.wav", calibration={"ch1": {"scale": 4.0, "unit": "mm/s"}})
    np.testing.assert_allclose(rec["ch1"].data, codes / 32768 * 4.0, rtol=1.2e-7)


def test_wav_sidecar_of_our_own_is_read_and_can_be_ignored(tmp_path):
    path = write(_recording(), tmp_path / "s.wav")
    side = json.loads(sidecar_path(path).read_text())
    assert side["layout"] == "sigtune-wav-sidecar"
    assert [c["name"] for c in side["channels"]] == ["A1", "vel x", "P3"]
    raw = read(path, sidecar=False)
    assert raw.names == ["ch1", "ch2", "ch3"] and raw[0].unit == "FS"
    renamed = read(path, calibration={"A1": {"name": "bearing"}})
    assert renamed.names == ["bearing", "vel x", "P3"] and renamed[0].unit == "g"
    # a sensitivity given on reading replaces the sidecar's stored scale:
    # 1 V per stored unit / (1000 mV/g) = 1 g per unit (analytic)
    recal = read(path, calibration={"P3": {"sensitivity": 1000.0, "sensitivity_unit": "mV/g",
                                           "full_scale_volts": 1.0}})
    assert recal["P3"].unit == "g"
    np.testing.assert_allclose(recal["P3"].data, _recording()["P3"].data, rtol=1e-15)


def test_wav_sidecar_from_a_hand_written_json(tmp_path):
    soundfile.write(tmp_path / "h.wav", np.full((20, 2), 0.25), 500, subtype="PCM_24")
    sidecar_path(tmp_path / "h.wav").write_text(json.dumps({
        "layout": "sigtune-wav-sidecar", "layout_version": 1,
        "channels": [{"name": "X", "unit": "m/s^2", "scale": 40.0},
                     {"name": "Y", "sensitivity": 1.0, "sensitivity_unit": "V/g", "full_scale_volts": 2.0}]}))
    rec = read(tmp_path / "h.wav")
    np.testing.assert_allclose(rec["X"].data, 10.0, rtol=1e-6)  # 0.25 FS * 40 m/s^2
    np.testing.assert_allclose(rec["Y"].data, 0.5, rtol=1e-6)  # 0.25 FS * 2 V / (1 V/g)
    assert rec["Y"].unit == "g"


# ---------------------------------------------------------------- CSV / TSV


def test_reads_csv_written_by_numpy_savetxt_with_time_column(tmp_path):
    fs, n = 2000.0, 4000
    t = np.arange(n) / fs
    x = np.random.default_rng(7).normal(0, 1, (n, 2))
    np.savetxt(tmp_path / "np.csv", np.column_stack([t, x]), delimiter=",",
               header="time [s],X [m/s^2],Y [g]", comments="")
    rec = read(tmp_path / "np.csv")
    assert rec.names == ["X", "Y"] and rec["Y"].unit == "g"
    # savetxt's default '%.18e' keeps every double: the rate is exact to float rounding
    assert rec["X"].fs == pytest.approx(fs, rel=1e-12)
    np.testing.assert_array_equal(rec["X"].data, x[:, 0])
    np.testing.assert_array_equal(rec.timestamps, t)


def test_reads_savetxt_with_rounded_time_column(tmp_path):
    # 6 decimals at 3000 Hz: every step is 333 or 334 us instead of 333.33 us (1e-6 s print
    # resolution), which the spacing check allows for.
    fs, n = 3000.0, 3000
    t = np.arange(n) / fs
    np.savetxt(tmp_path / "r.tsv", np.column_stack([t, np.cos(t)]), fmt=["%.6f", "%.10g"],
               delimiter="\t", header="t\tA1 [mm/s]", comments="")
    rec = read(tmp_path / "r.tsv")
    assert rec["A1"].fs == pytest.approx(fs, rel=1e-6)
    np.testing.assert_allclose(rec["A1"].data, np.cos(t), rtol=1e-9)


def test_reads_headerless_savetxt_with_fs(tmp_path):
    x = np.random.default_rng(8).normal(0, 1, (100, 3))
    np.savetxt(tmp_path / "plain.csv", x)  # whitespace-delimited, no header
    rec = read(tmp_path / "plain.csv", fs=50.0, unit="m/s^2")
    assert rec.names == ["ch1", "ch2", "ch3"] and rec[0].unit == "m/s^2" and rec[2].fs == 50.0
    np.testing.assert_array_equal(rec[2].data, x[:, 2])


@pytest.mark.parametrize("delimiter", [",", ";", "\t", "|", " ", "  "])
def test_delimiter_is_sniffed(tmp_path, delimiter):
    rows = ["time [s]{d}A1 [g]{d}A2".format(d=delimiter)]
    rows += [f"{i / 10!r}{delimiter}{i * 0.5!r}{delimiter}{-i!r}" for i in range(20)]
    (tmp_path / "d.csv").write_text("\n".join(rows) + "\n")
    rec = read(tmp_path / "d.csv", unit="mm/s")
    assert rec.names == ["A1", "A2"] and rec["A1"].unit == "g" and rec["A2"].unit == "mm/s"
    assert rec["A1"].fs == pytest.approx(10.0)
    np.testing.assert_array_equal(rec["A2"].data, -np.arange(20.0))


def test_header_units_comments_and_metadata(tmp_path):
    text = ("\ufeff# logger: invented DL-8\n# free remark line\n\n"
            "Time (ms);Bearing (m/s²);Shaft [µm]\n"
            "0;1.5;2\n# a comment among the rows\n1;2.5;3\n2;3.5;4 # trailing remark\n3;4.5;5\n")
    (tmp_path / "c.csv").write_text(text, encoding="utf-8")
    rec = read(tmp_path / "c.csv")
    assert rec.names == ["Bearing", "Shaft"]
    assert rec["Bearing"].unit == "m/s^2" and rec["Shaft"].unit == "um"
    assert rec["Bearing"].fs == pytest.approx(1000.0)  # 1 ms steps
    np.testing.assert_array_equal(rec["Shaft"].data, [2.0, 3.0, 4.0, 5.0])
    assert rec.metadata["logger"] == "invented DL-8" and rec.metadata["comments"] == ["free remark line"]
    np.testing.assert_allclose(rec.timestamps, [0.0, 1e-3, 2e-3, 3e-3])


def test_time_column_gives_start_time_and_timestamps(tmp_path):
    t = 12.0 + np.arange(50) / 25.0
    (tmp_path / "s.csv").write_text("t,A1 [g]\n" + "\n".join(f"{v!r},1.0" for v in t.tolist()) + "\n")
    rec = read(tmp_path / "s.csv")
    assert rec["A1"].start_time == 12.0 and rec["A1"].fs == pytest.approx(25.0)
    np.testing.assert_array_equal(rec.timestamps, t)


def test_fs_option_ignores_time_column_when_asked(tmp_path):
    (tmp_path / "s.csv").write_text("time,A1\n0,1\n1,2\n5,3\n")  # irregular on purpose
    rec = read(tmp_path / "s.csv", fs=10.0, time_column=None)
    assert rec.names == ["time", "A1"] and rec[0].fs == 10.0


def test_time_column_by_name(tmp_path):
    (tmp_path / "s.csv").write_text("A1,clock [s]\n1,0.0\n2,0.5\n3,1.0\n")
    rec = read(tmp_path / "s.csv", time_column="clock")
    assert rec.names == ["A1"] and rec[0].fs == 2.0


def test_large_csv_reads_across_blocks(tmp_path, monkeypatch):
    # Force tiny blocks so that the block-joining logic is exercised on a small file.
    monkeypatch.setattr(dsp.io.text, "_BLOCK_BYTES", 64)
    t = np.arange(3000) / 100.0
    x = np.sin(t)
    rows = [f"{a!r},{b!r}" for a, b in zip(t.tolist(), x.tolist())]
    (tmp_path / "b.csv").write_text("time,x\n" + "\n".join(rows))  # no final newline
    rec = read(tmp_path / "b.csv")
    np.testing.assert_array_equal(rec["x"].data, x)


def test_csv_writer_header_and_rate_comment(tmp_path):
    path = write(_recording(n=4, fs=5120.0), tmp_path / "w.csv")
    lines = path.read_text().splitlines()
    assert lines[1] == "# sample_rate_hz: 5120.0"
    assert lines[2] == "time [s],A1 [g],vel x [mm/s],P3 [Pa]"
    assert lines[4].split(",")[0] == repr(1 / 5120)


# ---------------------------------------------------------------- HDF5


def test_hdf5_layout_attributes(tmp_path):
    path = write(_recording(n=300_000), tmp_path / "l.h5")
    with h5py.File(path, "r") as f:
        assert f.attrs["sigtune_layout"] == "sigtune-recording" and f.attrs["sigtune_layout_version"] == 1
        ds = f["channels/000000"]
        assert ds.attrs["name"] == "A1" and ds.attrs["fs_hz"] == 1024.0 and ds.attrs["unit"] == "g"
        assert ds.attrs["quantity"] == "acceleration" and ds.attrs["sensitivity"] == 100.0
        assert ds.attrs["sensitivity_unit"] == "mV/g"
        assert ds.chunks == (131072,)
        assert json.loads(f.attrs["metadata"])["site"] == "invented test rig"


def test_hdf5_block_access_and_channel_info(tmp_path):
    rec = _recording(n=10_000)
    path = write(rec, tmp_path / "b.h5", chunk_samples=1000, compression="gzip")
    info = hdf5.channel_info(path)
    assert [r["name"] for r in info] == ["A1", "vel x", "P3"]
    assert info[1] == {"index": 1, "name": "vel x", "dataset": "/channels/000001", "fs_hz": 1024.0,
                       "n_samples": 10_000, "duration_s": 10_000 / 1024.0, "unit": "mm/s",
                       "quantity": "velocity", "start_time_s": 0.0, "dtype": "float64", "metadata": {},
                       "history": [{"op": "gain", "factor": 2.0, "unit": None, "sigtune": "0.1.0"}]}
    np.testing.assert_array_equal(hdf5.read_block(path, "P3", 1234, 5678), rec["P3"].data[1234:5678])
    np.testing.assert_array_equal(hdf5.read_block(path, 0, 9990), rec["A1"].data[9990:])


def test_hdf5_reads_only_selected_channels(tmp_path):
    path = write(_recording(), tmp_path / "s.h5")
    rec = read(path, channels=["P3", 0])
    assert rec.names == ["P3", "A1"]


def test_hdf5_calibrate_voltage_channel(tmp_path):
    volts = Channel(np.array([0.0, 0.1, -0.2, 0.05]), 100.0, name="raw", unit="V",
                    metadata={"sensitivity": 100.0, "sensitivity_unit": "mV/g"})
    path = write(Recording([volts, Channel(np.ones(4), 100.0, name="other", unit="g")]), tmp_path / "v.h5")
    rec = read(path, calibrate=True)
    # 0.1 V / (100 mV/g) = 1 g (analytic)
    np.testing.assert_allclose(rec["raw"].data, [0.0, 1.0, -2.0, 0.5], rtol=1e-12)
    assert rec["raw"].unit == "g" and rec["raw"].history[-1]["op"] == "calibrate"
    assert rec["other"].history == ()


def test_hdf5_timestamps_kept(tmp_path):
    (tmp_path / "t.csv").write_text("time,A1\n" + "\n".join(f"{i * 0.01!r},{i}" for i in range(10)))
    rec = read(tmp_path / "t.csv")
    back = read(write(rec, tmp_path / "t.h5"))
    np.testing.assert_array_equal(back.timestamps, rec.timestamps)


# ---------------------------------------------------------------- NPZ


def test_npz_layout_loads_without_pickle(tmp_path):
    path = write(_recording(), tmp_path / "n.npz", compressed=True)
    with np.load(path, allow_pickle=False) as z:
        assert sorted(z.files) == ["channel_000000", "channel_000001", "channel_000002", "sigtune_meta"]
        meta = json.loads(str(z["sigtune_meta"]))
    assert meta["layout"] == "sigtune-recording-npz"
    assert [c["name"] for c in meta["channels"]] == ["A1", "vel x", "P3"]


def test_dsp_exports_read_and_write():
    assert dsp.read is read and dsp.write is write
    assert set(dsp.io.__all__) >= {"read", "write", "FORMATS"}


def test_recording_without_source_gets_it_on_read(tmp_path):
    path = write(_recording(), tmp_path / "n.npz")
    assert read(path).source == str(path)


def test_metadata_that_json_cannot_hold_is_an_error(tmp_path):
    ch = Channel(np.zeros(4), 4.0, metadata={"when": object()})
    with pytest.raises(SigtuneError, match=r"metadata.*cannot be stored as JSON"):
        write(ch, tmp_path / "m.h5")
    assert not (tmp_path / "m.h5").exists()


def test_hdf5_read_holds_each_channel_once(tmp_path):
    import tracemalloc

    n = 2_000_000  # 16 MB of float64
    path = write(Channel(np.arange(n, dtype=np.float64), 1000.0, name="long"), tmp_path / "long.h5")
    tracemalloc.start()
    try:
        rec = read(path)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert rec["long"].data[-1] == n - 1
    assert peak < 1.3 * 8 * n  # one array of samples, not a second copy


def test_hdf5_integer_dataset_reads_as_float64(tmp_path):
    path = tmp_path / "int.h5"
    with h5py.File(path, "w") as f:
        f.attrs["sigtune_layout"] = "sigtune-recording"
        f.attrs["sigtune_layout_version"] = 1
        ds = f.create_dataset("channels/000000", data=np.array([-3, 0, 7], dtype=np.int16))
        ds.attrs.update({"name": "codes", "fs_hz": 10.0, "unit": "1"})
    rec = read(path)
    assert rec["codes"].data.dtype == np.float64
    np.testing.assert_array_equal(rec["codes"].data, [-3.0, 0.0, 7.0])
    assert rec["codes"].quantity == "other" and rec["codes"].start_time == 0.0


def test_quoted_numbers_in_text(tmp_path):
    (tmp_path / "q.csv").write_text('"time","A1 [g]"\n"0.0","1.5"\n"0.5","-2"\n')
    rec = read(tmp_path / "q.csv")
    np.testing.assert_array_equal(rec["A1"].data, [1.5, -2.0])
    assert rec["A1"].fs == 2.0
