"""`sigtune info` and `sigtune demo`: facts on every demo format, one-line errors with exit code 2."""

from __future__ import annotations

import json
import re
import shutil
import subprocess

import h5py
import numpy as np
import pytest
import scipy.io.wavfile

from dsp.demo import demo_recording
from explorer.cli import main

FORMATS = ["csv", "tsv", "wav", "h5", "npz"]


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    directory = tmp_path_factory.mktemp("cli_demo")
    assert main(["demo", str(directory)]) == 0
    return directory


def _info_json(capsys, path, *extra):
    capsys.readouterr()
    assert main(["info", str(path), "--json", *extra]) == 0
    out = capsys.readouterr()
    assert out.err == ""
    return json.loads(out.out)


def test_demo_command_lists_the_files(demo_dir, capsys):
    out_dir = demo_dir / "again"
    capsys.readouterr()
    assert main(["demo", str(out_dir)]) == 0
    printed = capsys.readouterr().out.split()
    assert len(printed) == 21 and all((out_dir / p.split("/")[-1]).is_file() for p in printed)


@pytest.mark.parametrize("fmt", FORMATS)
def test_info_table(demo_dir, capsys, fmt):
    capsys.readouterr()
    assert main(["info", str(demo_dir / f"pump_skid.{fmt}")]) == 0
    out = capsys.readouterr().out
    assert "3 channel(s)" in out
    for name in ("DE_H", "DE_V", "NDE_A"):
        line = next(row for row in out.splitlines() if row.startswith(name))
        assert "5120" in line and "102400" in line and "20.000" in line and "m/s^2" in line


@pytest.mark.parametrize("fmt", FORMATS)
def test_info_json_facts_are_correct(demo_dir, capsys, fmt):
    facts = _info_json(capsys, demo_dir / f"pump_skid.{fmt}")
    rec = demo_recording()
    assert [c["name"] for c in facts["channels"]] == rec.names
    for row, ch in zip(facts["channels"], rec):
        x = ch.data
        assert row["fs_hz"] == 5120.0 and row["n_samples"] == 102400 and row["duration_s"] == 20.0
        assert row["unit"] == "m/s^2" and row["quantity"] == "acceleration"
        # numpy reference statistics of the generated samples
        assert row["rms"] == pytest.approx(float(np.sqrt(np.mean(x**2))), rel=1e-12)
        assert row["peak"] == pytest.approx(float(np.max(np.abs(x))), rel=1e-12)
        assert row["mean"] == pytest.approx(float(np.mean(x)), rel=1e-9, abs=1e-12)
        assert row["non_finite_samples"] == 0
    assert facts["channels"][0]["peak"] == pytest.approx(5 * 9.80665)  # DE_H is clipped at +-5 g


@pytest.mark.parametrize("scenario", ["pump_skid", "floor_footfall", "vehicle_seat"])
def test_info_json_is_the_same_in_every_format(demo_dir, capsys, scenario):
    reports = {fmt: _info_json(capsys, demo_dir / f"{scenario}.{fmt}")["channels"] for fmt in FORMATS}
    for fmt in FORMATS[1:]:
        assert reports[fmt] == reports["csv"], fmt  # lossless formats: identical statistics


def test_info_format_override(demo_dir, capsys, tmp_path):
    copy = tmp_path / "pump.bin"
    shutil.copy(demo_dir / "pump_skid.npz", copy)
    facts = _info_json(capsys, copy, "--format", "npz")
    assert [c["name"] for c in facts["channels"]] == ["DE_H", "DE_V", "NDE_A"]


def _bad_files(tmp_path, demo_dir):
    cases = {}
    (tmp_path / "empty.csv").write_bytes(b"")
    cases["empty"] = (tmp_path / "empty.csv", r"the file is empty \(0 bytes\)")
    (tmp_path / "data.xyz").write_text("x")
    cases["unknown extension"] = (tmp_path / "data.xyz",
                                  r"unknown extension '\.xyz'; valid extensions: \.csv")
    wav = (demo_dir / "floor_footfall.wav").read_bytes()
    (tmp_path / "cut.wav").write_bytes(wav[: len(wav) // 2])
    cases["truncated wav"] = (tmp_path / "cut.wav", r"data chunk: is truncated")
    (tmp_path / "text.csv").write_text("time,A1\n0,1\n1,abc\n2,3\n")
    cases["text in numeric column"] = (tmp_path / "text.csv", r"line 3, column 'A1': 'abc' is not a number")
    (tmp_path / "nan.csv").write_text("time,A1\n0,1\n1,nan\n2,nan\n3,1\n")
    cases["nan run"] = (tmp_path / "nan.csv", r"channel 'A1': 2 non-finite sample\(s\).*lines 3-4")
    (tmp_path / "back.csv").write_text("time,A1\n0,1\n1,1\n0.5,1\n")
    cases["time backwards"] = (tmp_path / "back.csv", r"line 4: the time column goes backwards")
    scipy.io.wavfile.write(tmp_path / "one.wav", 100, np.zeros(1, np.int16))
    cases["one sample"] = (tmp_path / "one.wav", r"holds 1 frame\(s\); a recording needs at least 2 samples")
    (tmp_path / "huge.csv").write_bytes(b"x" * (2 << 20))
    cases["enormous header"] = (tmp_path / "huge.csv", r"line 1: is longer than 1048576 bytes")
    with h5py.File(tmp_path / "other.h5", "w") as f:
        f["signals/ch0"] = np.zeros(4)
    cases["other hdf5 layout"] = (tmp_path / "other.h5", r"is an HDF5 file of another layout")
    np.savez(tmp_path / "other.npz", a=np.zeros(3))
    cases["other npz layout"] = (tmp_path / "other.npz", r"is an NPZ archive of another layout")
    (tmp_path / "nofs.csv").write_text("A1\n1\n2\n")
    cases["no rate"] = (tmp_path / "nofs.csv", r"has no time column and no sample rate")
    cases["missing file"] = (tmp_path / "missing.h5", r"missing\.h5: No such file or directory")
    (tmp_path / "folder.csv").mkdir()
    cases["a directory"] = (tmp_path / "folder.csv", r"folder\.csv: Is a directory")
    return cases


BAD_CASES = ["empty", "unknown extension", "truncated wav", "text in numeric column", "nan run",
             "time backwards", "one sample", "enormous header", "other hdf5 layout", "other npz layout",
             "no rate", "missing file", "a directory"]


@pytest.mark.parametrize("case", BAD_CASES)
@pytest.mark.parametrize("as_json", [False, True])
def test_bad_input_gives_one_line_and_exit_2(demo_dir, tmp_path, capsys, case, as_json):
    path, pattern = _bad_files(tmp_path, demo_dir)[case]
    capsys.readouterr()
    code = main(["info", str(path), *(["--json"] if as_json else [])])
    out = capsys.readouterr()
    assert code == 2
    assert out.out == ""
    lines = out.err.splitlines()
    assert len(lines) == 1, out.err
    assert lines[0].startswith("sigtune info: error: ") and str(path) in lines[0]
    assert re.search(pattern, lines[0]), lines[0]


def test_bad_format_option(demo_dir, capsys):
    capsys.readouterr()
    assert main(["info", str(demo_dir / "pump_skid.h5"), "--format", "xls"]) == 2
    assert "unknown format 'xls'; valid formats: csv, tsv, wav, h5, npz" in capsys.readouterr().err


def test_console_script(demo_dir, tmp_path):
    exe = shutil.which("sigtune")
    assert exe, "the sigtune console script is not installed: pip install -e '.[test]'"
    good = subprocess.run([exe, "info", "--json", str(demo_dir / "vehicle_seat.h5")], capture_output=True,
                          text=True, timeout=120)
    assert good.returncode == 0, good.stderr
    assert [c["name"] for c in json.loads(good.stdout)["channels"]] == ["SEAT_X", "SEAT_Y", "SEAT_Z"]
    (tmp_path / "bad.csv").write_text("time,A1\n0,1\n1,zz\n")
    bad = subprocess.run([exe, "info", str(tmp_path / "bad.csv")], capture_output=True, text=True,
                         timeout=120)
    assert bad.returncode == 2 and bad.stdout == ""
    assert bad.stderr.count("\n") == 1 and "Traceback" not in bad.stderr
    assert "line 3, column 'A1': 'zz' is not a number" in bad.stderr
