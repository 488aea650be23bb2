"""Bad recording files: every case raises SigtuneError naming the file, the place and what is valid."""

from __future__ import annotations

import json
import os
import re

import h5py
import numpy as np
import pytest
import scipy.io.wavfile
import soundfile

from dsp import Channel, Recording, SigtuneError
from dsp.io import FORMATS, hdf5, read, write
from dsp.io.wav import sidecar_path


def _csv(tmp_path, text: str, name: str = "bad.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def _raises(path, pattern: str, **options):
    """Read ``path`` expecting SigtuneError matching ``pattern``; also check the path is named."""
    with pytest.raises(SigtuneError, match=pattern) as info:
        read(path, **options)
    assert str(path) in str(info.value)
    assert "\n" not in str(info.value)  # one line, for the CLI
    return info.value


GOOD_CSV = "time [s],A1 [g],A2 [g]\n0.0,1,2\n0.5,1,2\n1.0,1,2\n1.5,1,2\n"


# ---------------------------------------------------------------- any format


@pytest.mark.parametrize("fmt", list(FORMATS))
def test_empty_file(tmp_path, fmt):
    path = tmp_path / f"empty.{fmt}"
    path.write_bytes(b"")
    _raises(path, rf"the file is empty \(0 bytes\); expected a {fmt} recording")


def test_unknown_extension_lists_valid_ones(tmp_path):
    path = _csv(tmp_path, GOOD_CSV, "data.xyz")
    _raises(path, r"unknown extension '\.xyz'; valid extensions: \.csv, \.tsv, \.wav, \.h5, \.hdf5, \.npz")
    with pytest.raises(SigtuneError, match=r"format: unknown format 'mat'; valid formats: csv, tsv, wav, h5, "
                                           r"npz"):
        read(path, format="mat")
    assert read(path, format="csv").names == ["A1", "A2"]


def test_unknown_option_lists_valid_ones(tmp_path):
    path = _csv(tmp_path, GOOD_CSV)
    with pytest.raises(SigtuneError, match=r"unknown option 'rate' for csv files; valid options: delimiter, "
                                           r"fs"):
        read(path, rate=5.0)
    with pytest.raises(SigtuneError, match=r"unknown option 'bits' for wav files; valid options: subtype, "
                                           r"full_scale, sidecar"):
        write(read(path), tmp_path / "x.wav", bits=16)


def test_missing_file_is_file_not_found(tmp_path):
    with pytest.raises(FileNotFoundError):
        read(tmp_path / "nothing.csv")


# ---------------------------------------------------------------- CSV / TSV


def test_text_in_a_numeric_column_names_line_and_column(tmp_path):
    path = _csv(tmp_path, "time [s],A1 [g],A2 [g]\n0.0,1,2\n0.5,1,oops\n1.0,1,2\n")
    _raises(path, r"line 3, column 'A2': 'oops' is not a number; expected a decimal number")


def test_empty_field_and_decimal_comma_get_hints(tmp_path):
    _raises(_csv(tmp_path, "time,A1,A2\n0,1,2\n1,,2\n2,1,2\n"), r"line 3, column 'A1': '' is not a number.*"
            r"write nan for a missing value")
    _raises(_csv(tmp_path, "time;A1\n0;1,5\n1;2,5\n", "comma.csv"), r"line 2, column 'A1': '1,5'.*decimal "
            r"commas are not supported")


def test_row_with_wrong_number_of_fields(tmp_path):
    _raises(_csv(tmp_path, GOOD_CSV + "2.0,1\n"), r"line 6: has 2 field\(s\) but the header has 3 "
            r"column\(s\) \(time, A1, A2\)")


def test_bad_field_found_beyond_the_first_block(tmp_path, monkeypatch):
    import dsp.io.text
    monkeypatch.setattr(dsp.io.text, "_BLOCK_BYTES", 100)
    rows = [f"{i / 10!r},{i}" for i in range(200)]
    rows[150] = "15.0,x"
    path = _csv(tmp_path, "time,A1\n" + "\n".join(rows) + "\n")
    _raises(path, r"line 152, column 'A1': 'x' is not a number")


def test_nan_run_reported_with_file_lines(tmp_path):
    rows = [f"{i / 100!r},{i}.0" for i in range(30)]
    for i in (10, 11, 12):
        rows[i] = f"{i / 100!r},nan"
    rows[20] = f"{20 / 100!r},-inf"
    path = _csv(tmp_path, "# note\ntime,A1 [g]\n" + "\n".join(rows) + "\n")
    _raises(path, r"channel 'A1': 4 non-finite sample\(s\) \(NaN/Inf\) of 30 in 2 run\(s\): lines 13-15; "
            r"lines 23-23\. Pass allow_nonfinite=True")
    assert np.isnan(read(path, allow_nonfinite=True)["A1"].data[10:13]).all()


def test_nan_lines_counted_past_comments_among_rows(tmp_path):
    text = "time,A1\n0,1\n# pause\n\n1,nan\n2,3\n"
    _raises(_csv(tmp_path, text), r"channel 'A1': 1 non-finite sample\(s\).*lines 5-5")


def test_time_column_going_backwards(tmp_path):
    path = _csv(tmp_path, "time,A1\n0.0,1\n0.1,1\n0.2,1\n0.15,1\n0.4,1\n")
    _raises(path, r"line 5: the time column goes backwards or repeats: t=0\.15 s after t=0\.2 s on line 4")


def test_time_column_repeating_a_value(tmp_path):
    _raises(_csv(tmp_path, "time,A1\n0.0,1\n0.1,1\n0.1,1\n0.3,1\n"), r"line 4: the time column goes "
            r"backwards or repeats")


def test_time_column_with_a_gap_says_where_and_by_how_much(tmp_path):
    t = [i / 100 for i in range(50)]
    del t[30]  # one missing row: the step at line 32 (header + 30 rows) is two intervals
    path = _csv(tmp_path, "time,A1\n" + "\n".join(f"{v!r},0" for v in t) + "\n")
    err = _raises(path, r"line 32: the time column is not uniformly spaced: the step to this row is 0\.02 s "
                  r"but the median step is 0\.01 s, off by 0\.01 s \(100\.0% of a step\)")
    assert re.search(r"allowed 0\.0001 s \(time_tolerance=0\.01 of a step\)", str(err))
    assert read(path, fs=100.0, time_column=None)["time"].n_samples == 49


def test_time_column_disagreeing_with_fs(tmp_path):
    _raises(_csv(tmp_path, GOOD_CSV), r"line 3: the time column is not uniformly spaced: the step to this "
            r"row is 0\.5 s but 1/fs = 0\.2 s \(fs=5 Hz\), off by 0\.3 s \(150\.0% of a step\)", fs=5.0)


def test_no_time_column_and_no_rate(tmp_path):
    _raises(_csv(tmp_path, "A1,A2\n1,2\n3,4\n"), r"has no time column and no sample rate: the first column "
            r"'A1' is not named like a time column.*Pass fs=")


@pytest.mark.parametrize("fs,shown", [(0, "fs=0"), (-100.0, "fs=-100"), (float("nan"), "fs=nan")])
def test_zero_or_negative_rate(tmp_path, fs, shown):
    path = _csv(tmp_path, "A1,A2\n1,2\n3,4\n")
    _raises(path, rf"fs: sample rate must be a finite number > 0 Hz; got {shown}", fs=fs)


def test_zero_rate_in_the_rate_comment(tmp_path):
    _raises(_csv(tmp_path, "# sample_rate_hz: 0\nA1\n1\n2\n"), r"comment 'sample_rate_hz': sample rate must "
            r"be a finite number > 0 Hz; got fs=0")


def test_fewer_than_two_samples(tmp_path):
    _raises(_csv(tmp_path, "time,A1\n0,1\n"), r"holds 1 data row\(s\); a recording needs at least 2 samples")


def test_header_without_rows_and_comments_only(tmp_path):
    _raises(_csv(tmp_path, "time,A1\n"), r"line 1: has a header row but no data rows")
    _raises(_csv(tmp_path, "# one\n\n# two\n", "c.csv"), r"holds no data rows \(3 line\(s\) of comments or "
            r"blanks only\)")


def test_enormous_header_line_is_not_read_whole(tmp_path):
    path = tmp_path / "huge.csv"
    with open(path, "wb") as fh:
        fh.write(b"A" * (3 << 20))  # 3 MiB without a line break
    _raises(path, r"line 1: is longer than 1048576 bytes \(no line break found\)")


def test_enormous_data_line(tmp_path):
    path = tmp_path / "huge_row.csv"
    with open(path, "wb") as fh:
        fh.write(b"time,A1\n0,1\n1,2\n" + b"3" * (3 << 20))
    _raises(path, r"line 4: is longer than 1048576 bytes")


def test_binary_file_read_as_text(tmp_path):
    path = tmp_path / "noise.wav"
    soundfile.write(path, np.zeros((1000, 2)), 1000, subtype="PCM_16")
    _raises(path, r"(line \d+|not a number)", format="csv")


def test_unknown_unit_in_header(tmp_path):
    _raises(_csv(tmp_path, "time,A1 [furlong/s]\n0,1\n1,2\n"), r"column 'A1' unit: unknown unit 'furlong/s'; "
            r"known units: m/s\^2")


def test_unknown_time_unit_and_bad_time_column_choice(tmp_path):
    _raises(_csv(tmp_path, "time [h],A1\n0,1\n1,2\n"), r"column 'time': time unit 'h' is not one of s, "
            r"sec, ms")
    _raises(_csv(tmp_path, GOOD_CSV, "b.csv"), r"time_column: no column named 'clock'; columns: time, A1, A2",
            time_column="clock")


def test_text_writer_refuses_mixed_rates_and_awkward_names(tmp_path):
    rec = Recording([Channel(np.zeros(8), 8.0, name="a"), Channel(np.zeros(16), 16.0, name="b")])
    with pytest.raises(SigtuneError, match=r"a text file holds channels of one rate, length and start time; "
                                           r"channel 'b' has fs=16 Hz.*Write \.h5 or \.npz instead"):
        write(rec, tmp_path / "m.csv")
    with pytest.raises(SigtuneError, match=r"channel 'a,b': cannot be written to a text header"):
        write(Channel(np.zeros(4), 4.0, name="a,b"), tmp_path / "n.csv")
    assert list(tmp_path.iterdir()) == []


def test_write_into_missing_directory(tmp_path):
    with pytest.raises(SigtuneError, match=r"directory '.*nowhere' does not exist; create it first"):
        write(Channel(np.zeros(4), 4.0), tmp_path / "nowhere" / "x.h5")


# ---------------------------------------------------------------- WAV


def _wav(tmp_path, frames=2000, name="w.wav"):
    path = tmp_path / name
    scipy.io.wavfile.write(path, 8000, np.arange(frames, dtype=np.int16))
    return path


def test_truncated_wav(tmp_path):
    path = _wav(tmp_path)
    data = path.read_bytes()
    cut = tmp_path / "cut.wav"
    cut.write_bytes(data[:3000])
    _raises(cut, r"data chunk: is truncated: its header declares 4000 bytes of samples but only 2956 are "
            r"present")


def test_wav_cut_inside_its_header(tmp_path):
    cut = tmp_path / "head.wav"
    cut.write_bytes(_wav(tmp_path).read_bytes()[:30])
    _raises(cut, r"is not a readable WAV file")


def test_not_a_wav_at_all(tmp_path):
    path = tmp_path / "text.wav"
    path.write_text(GOOD_CSV)
    _raises(path, r"is not a readable WAV file .*expected RIFF/WAVE")


def test_wav_with_one_frame(tmp_path):
    _raises(_wav(tmp_path, frames=1), r"holds 1 frame\(s\); a recording needs at least 2 samples")


def test_float_wav_with_nan_run(tmp_path):
    x = np.zeros((100, 2), dtype=np.float32)
    x[40:45, 1] = np.nan
    path = tmp_path / "nan.wav"
    scipy.io.wavfile.write(path, 100, x)
    _raises(path, r"channel 'ch2': 5 non-finite sample\(s\) \(NaN/Inf\) of 100 in 1 run\(s\): samples 40-44 "
            r"\(t=0\.4-0\.44 s\)")


@pytest.mark.parametrize("content,pattern", [
    ("{not json", r"w\.wav\.json: is not valid JSON"),
    ('{"channels": []}', r"is not a sigtune WAV sidecar: expected a JSON object with \"layout\""),
    ('{"layout": "sigtune-wav-sidecar", "channels": [{}, {}]}', r"lists 2 channel\(s\) but the WAV has 1"),
    ('{"layout": "sigtune-wav-sidecar", "channels": [{"gain": 2}]}', r"channel 0 \('ch1'\) calibration: "
     r"unknown key 'gain'; valid keys: name, unit"),
    ('{"layout": "sigtune-wav-sidecar", "channels": [{"scale": 2}]}', r"a 'scale' needs the 'unit'"),
    ('{"layout": "sigtune-wav-sidecar", "channels": [{"sensitivity": 100}]}', r"a sensitivity needs "
     r"'full_scale_volts'"),
])
def test_bad_sidecar(tmp_path, content, pattern):
    path = _wav(tmp_path)
    sidecar_path(path).write_text(content)
    _raises(path, pattern)
    assert read(path, sidecar=False)[0].unit == "FS"


def test_bad_calibration_option(tmp_path):
    path = _wav(tmp_path)
    _raises(path, r"calibration: must map a channel of this file \(ch1 or indices 0\.\.0\) to a dict of "
            r"settings; got 'Z'", calibration={"Z": {"scale": 2.0, "unit": "g"}})
    _raises(path, r"calibration: must map a channel .* got 0: 2\.0", calibration={0: 2.0})
    _raises(path, r"calibration: must be a dict", calibration="x")
    _raises(path, r"unknown unit 'parsec'", calibration=[{"scale": 2.0, "unit": "parsec"}])
    _raises(path, r"no such sidecar file", sidecar=tmp_path / "missing.json")
    _raises(path, r"unit 'Pa' does not measure acceleration, the quantity of the sensitivity unit 'mV/g'",
            calibration=[{"sensitivity": 100.0, "full_scale_volts": 1.0, "unit": "Pa"}])


def test_wav_writer_refusals(tmp_path):
    with pytest.raises(SigtuneError, match=r"WAV stores an integer sample rate; got fs=100\.5 Hz"):
        write(Channel(np.zeros(8), 100.5), tmp_path / "a.wav")
    x = np.zeros(8)
    x[3] = np.nan
    with pytest.raises(SigtuneError, match=r"channel 'ch1': holds NaN/Inf samples, which integer PCM cannot"):
        write(Channel(x, 100.0), tmp_path / "b.wav", subtype="PCM_16")
    with pytest.raises(SigtuneError, match=r"subtype: must be one of 'PCM_16', 'PCM_24', 'PCM_32', 'FLOAT', "
                                           r"'DOUBLE'; got 'ULAW'"):
        write(Channel(np.zeros(8), 100.0), tmp_path / "c.wav", subtype="ULAW")
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------- HDF5


def test_hdf5_of_another_layout_lists_what_it_holds(tmp_path):
    path = tmp_path / "other.h5"
    with h5py.File(path, "w") as f:
        f.create_dataset("acc/x", data=np.zeros(10))
        f.attrs["fs"] = 100.0
    _raises(path, r"/: is an HDF5 file of another layout: no attribute sigtune_layout='sigtune-recording' at "
            r"'/'; it holds /acc, /acc/x")
    with pytest.raises(SigtuneError, match=r"other\.h5, /: is an HDF5 file of another layout"):
        hdf5.channel_info(path)


def test_not_an_hdf5_file(tmp_path):
    path = _csv(tmp_path, GOOD_CSV, "text.h5")
    _raises(path, r"is not a readable HDF5 file")


def _layout_file(path, data, **attrs):
    with h5py.File(path, "w") as f:
        f.attrs["sigtune_layout"] = "sigtune-recording"
        f.attrs["sigtune_layout_version"] = 1
        ds = f.create_dataset("channels/000000", data=data)
        for key, value in attrs.items():
            ds.attrs[key] = value
    return path


def test_hdf5_channel_without_required_attributes(tmp_path):
    path = _layout_file(tmp_path / "a.h5", np.zeros(10), name="x")
    _raises(path, r"/channels/000000: lacks attribute\(s\) fs_hz, unit")


@pytest.mark.parametrize("fs", [0.0, -512.0])
def test_hdf5_zero_or_negative_rate(tmp_path, fs):
    path = _layout_file(tmp_path / "r.h5", np.zeros(10), name="x", fs_hz=fs, unit="g")
    _raises(path, rf"/channels/000000, channel 'x' fs: sample rate must be a finite number > 0 Hz; "
            rf"got fs={fs:g}")


def test_hdf5_too_short_and_wrong_shape(tmp_path):
    _raises(_layout_file(tmp_path / "s.h5", np.zeros(1), name="x", fs_hz=10.0, unit="g"),
            r"channel 'x' data: needs at least 2 samples; got 1")
    _raises(_layout_file(tmp_path / "t.h5", np.zeros((3, 3)), name="x", fs_hz=10.0, unit="g"),
            r"/channels/000000: must be a 1-D numeric dataset")


def test_hdf5_nan_run(tmp_path):
    x = np.ones(1000)
    x[100:300] = np.nan
    path = write(Channel(x, 100.0, name="A1"), tmp_path / "n.h5")
    _raises(path, r"channel 'A1': 200 non-finite sample\(s\).*samples 100-299 \(t=1-2\.99 s\)")


def test_hdf5_block_and_selection_errors(tmp_path):
    path = write(Recording([Channel(np.zeros(100), 10.0, name="A1")]), tmp_path / "b.h5")
    with pytest.raises(SigtuneError, match=r"b\.h5, stop: must be a whole number from 11 to 100; got 500"):
        hdf5.read_block(path, "A1", 10, 500)
    with pytest.raises(SigtuneError, match=r"channels: names no channel of this file: 'B2'; channels: A1"):
        hdf5.read_block(path, "B2")
    _raises(path, r"channels: names no channel of this file: 3", channels=[3])


def test_hdf5_compression_choice(tmp_path):
    with pytest.raises(SigtuneError, match=r"compression: must be one of None, 'gzip', 'lzf'; got 'zstd'"):
        write(Channel(np.zeros(4), 4.0), tmp_path / "c.h5", compression="zstd")


# ---------------------------------------------------------------- NPZ


def test_npz_of_another_layout(tmp_path):
    path = tmp_path / "other.npz"
    np.savez(path, x=np.zeros(4), y=np.ones(4))
    _raises(path, r"is an NPZ archive of another layout: no 'sigtune_meta' array; it holds x, y")


def test_npz_object_array_is_never_unpickled(tmp_path):
    path = tmp_path / "pickled.npz"
    meta = {"layout": "sigtune-recording-npz", "layout_version": 1,
            "channels": [{"array": "evil", "name": "A1", "fs_hz": 10.0, "unit": "g"}]}
    np.savez(path, evil=np.array([{"a": 1}, None], dtype=object), sigtune_meta=np.array(json.dumps(meta)))
    _raises(path, r"array 'evil': cannot be loaded .*object \(pickled\) arrays are never loaded")


def test_npz_not_a_zip_and_single_npy(tmp_path):
    _raises(_csv(tmp_path, GOOD_CSV, "text.npz"), r"is not (a readable NPZ file|an NPZ archive of plain "
            r"arrays)")
    npy = tmp_path / "single.npz"
    with open(npy, "wb") as fh:
        np.save(fh, np.zeros(5))
    _raises(npy, r"holds a single \.npy array, not an \.npz archive")


@pytest.mark.parametrize("change,pattern", [
    (lambda m: m["channels"][0].update(fs_hz=-1.0), r"channel 'A1' fs: sample rate must be a finite "
     r"number > 0"),
    (lambda m: m["channels"][0].pop("unit"), r"channel entry lacks 'unit'"),
    (lambda m: m["channels"][0].update(array="gone"), r"array 'gone': is listed in sigtune_meta but missing"),
    (lambda m: m.update(layout_version=9), r"needs layout_version 1"),
])
def test_npz_bad_description(tmp_path, change, pattern):
    path = write(Channel(np.zeros(8), 8.0, name="A1"), tmp_path / "d.npz")
    with np.load(path) as z:
        arrays = {k: z[k] for k in z.files}
    meta = json.loads(str(arrays["sigtune_meta"]))
    change(meta)
    arrays["sigtune_meta"] = np.array(json.dumps(meta))
    np.savez(path, **arrays)
    _raises(path, pattern)


def test_npz_too_short(tmp_path):
    path = write(Channel(np.zeros(8), 8.0, name="A1"), tmp_path / "s.npz")
    with np.load(path) as z:
        arrays = {k: z[k] for k in z.files}
    arrays["channel_000000"] = np.zeros(1)
    np.savez(path, **arrays)
    _raises(path, r"channel 'A1' data: needs at least 2 samples; got 1")


# ---------------------------------------------------------------- files are never modified


@pytest.mark.parametrize("fmt", ["csv", "wav", "h5", "npz"])
def test_failed_read_leaves_the_file_unchanged(tmp_path, fmt):
    x = np.ones(50)
    x[5] = np.nan
    path = write(Channel(x, 10.0, name="A1"), tmp_path / f"f.{fmt}")
    before = (path.read_bytes(), os.stat(path).st_mtime_ns)
    with pytest.raises(SigtuneError, match="non-finite"):
        read(path)
    assert (path.read_bytes(), os.stat(path).st_mtime_ns) == before


def test_unit_option_naming_an_unknown_column(tmp_path):
    _raises(_csv(tmp_path, GOOD_CSV.replace(" [g]", "")), r"unit: names no channel of this file: 'B7'; "
            r"channels: A1, A2", unit={"B7": "g"})


def test_hdf5_channel_info_with_zero_rate(tmp_path):
    path = _layout_file(tmp_path / "z.h5", np.zeros(10), name="x", fs_hz=0.0, unit="g")
    with pytest.raises(SigtuneError, match=r"z\.h5, /channels/000000 fs_hz: sample rate must be a finite "
                                           r"number > 0 Hz; got fs=0"):
        hdf5.channel_info(path)


def test_enormous_line_far_below_the_header(tmp_path, monkeypatch):
    import dsp.io.text
    monkeypatch.setattr(dsp.io.text, "_BLOCK_BYTES", 4096)  # the long line spans many blocks
    rows = "".join(f"{i},{i}\n" for i in range(100))
    path = tmp_path / "late.csv"
    path.write_bytes(b"time,A1\n" + rows.encode() + b"7" * (2 << 20) + b"\n1,1\n")
    _raises(path, r"line 102: is longer than 1048576 bytes")


def test_repeated_channel_names_and_missing_time(tmp_path):
    err = _raises(_csv(tmp_path, "time,A,A\n0,1,2\n1,2,3\n"), r"channel names must be unique; repeated: A")
    assert str(err).count(str(tmp_path)) == 1  # the path is named once
    _raises(_csv(tmp_path, "time,A\n0,1\nnan,2\n2,3\n", "t.csv"), r"line 3: time value nan is not finite")


@pytest.mark.parametrize("fmt", ["h5", "npz"])
def test_cut_short_container_files(tmp_path, fmt):
    path = write(Channel(np.random.default_rng(1).normal(size=50_000), 100.0, name="A1"), tmp_path / f"c.{fmt}")
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    _raises(path, r"(not a readable (HDF5|NPZ) file|could not be read|cannot be loaded)")
