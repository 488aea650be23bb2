"""No data loss: inputs are opened read-only and left as they were; every write is atomic.

Every operation that reads a file is run between a snapshot and a check of
the folder's files (bytes, modification time in ns, permission bits, and the
set of names: nothing is created beside an input). While each reader holds its
input open, the descriptors on it are looked up in ``/proc/self/fdinfo`` and
must be read-only. Writes are interrupted part-way (by making the underlying
writer fail after writing some bytes) and must leave the previous file at
the target intact and no temporary file behind.
"""

from __future__ import annotations

import contextlib
import errno
import os
import stat
from pathlib import Path

import h5py
import numpy as np
import pytest
import soundfile

import dsp
import dsp._atomic
import dsp.io.hdf5
import dsp.io.npz
import dsp.io.text
import dsp.io.wav
from dsp import Channel, Recording, SigtuneError
from dsp.io.wav import sidecar_path
from explorer.cli import main

FORMATS = ("csv", "tsv", "wav", "h5", "npz")
pytestmark = pytest.mark.timeout(60)


def _recording(n: int = 256, scale: float = 1.0) -> Recording:
    t = np.arange(n) / 256.0
    return Recording([Channel(scale * np.sin(2 * np.pi * 8 * t), 256.0, name="A1", unit="g"),
                      Channel(scale * np.cos(2 * np.pi * 3 * t), 256.0, name="A2", unit="mm/s")],
                     metadata={"site": "Harlow Weir"})


def _snapshot(folder: Path) -> dict[str, tuple[bytes, int, int]]:
    return {str(p.relative_to(folder)): (p.read_bytes(), p.stat().st_mtime_ns, stat.S_IMODE(p.stat().st_mode))
            for p in sorted(folder.rglob("*")) if p.is_file()}


@contextlib.contextmanager
def unchanged(folder: Path):
    """Assert that every file under ``folder`` keeps its bytes, mtime and permissions, and none appears."""
    before = _snapshot(folder)
    yield
    after = _snapshot(folder)
    assert sorted(after) == sorted(before), f"files appeared or vanished: {sorted(set(after) ^ set(before))}"
    for name, (data, mtime, mode) in before.items():
        assert after[name][0] == data, f"{name}: bytes changed"
        assert after[name][1] == mtime, f"{name}: modification time changed"
        assert after[name][2] == mode, f"{name}: permissions changed"


def _inputs(folder: Path) -> dict[str, Path]:
    folder.mkdir(exist_ok=True)
    return {fmt: dsp.write(_recording(), folder / f"run.{fmt}") for fmt in FORMATS}


# ---------------------------------------------------------------- reading never modifies


def _open_modes(path: Path) -> list[int]:
    """Access modes (O_RDONLY=0, O_WRONLY=1, O_RDWR=2) of this process's descriptors open on ``path``."""
    modes, target = [], os.path.realpath(path)
    for fd in os.listdir("/proc/self/fd"):
        with contextlib.suppress(OSError):
            if os.readlink(f"/proc/self/fd/{fd}") == target:
                flags = Path(f"/proc/self/fdinfo/{fd}").read_text().split("flags:")[1].split()[0]
                modes.append(int(flags, 8) & os.O_ACCMODE)
    return modes


# A function each reader calls while it holds its input open; wrapped to look at the descriptors then.
_WHILE_OPEN = {"csv": (dsp.io.text, "_read_numbers"), "tsv": (dsp.io.text, "_read_numbers"),
               "wav": (soundfile.SoundFile, "read"), "h5": (dsp.io.hdf5, "_channel_datasets"),
               "npz": (dsp.io.npz, "_meta")}


@pytest.mark.skipif(not Path("/proc/self/fdinfo").is_dir(), reason="needs Linux /proc")
@pytest.mark.parametrize("fmt", FORMATS)
def test_readers_open_their_input_read_only(fmt, tmp_path, monkeypatch):
    path = _inputs(tmp_path)[fmt]
    owner, name = _WHILE_OPEN[fmt]
    original, seen = getattr(owner, name), []

    def spy(*args, **kwargs):
        seen.append(_open_modes(path))
        return original(*args, **kwargs)

    monkeypatch.setattr(owner, name, spy)
    dsp.read(path)
    assert seen and seen[0], f"{fmt}: the reader did not hold {path.name} open where expected"
    assert all(mode == os.O_RDONLY for modes in seen for mode in modes), seen


@pytest.mark.parametrize("read_only", [False, True], ids=["writable", "chmod_0444"])
@pytest.mark.parametrize("fmt", FORMATS)
def test_read_leaves_every_file_unchanged(fmt, read_only, tmp_path):
    folder = tmp_path / "in"
    path = _inputs(folder)[fmt]
    if read_only:
        for p in folder.iterdir():
            p.chmod(0o444)
    with unchanged(folder):
        recording = dsp.read(path)
        if fmt == "h5":
            dsp.io.hdf5.channel_info(path)
            dsp.io.hdf5.read_block(path, "A2", 10, 20)
            dsp.read(path, channels=["A2"], calibrate=True)
    np.testing.assert_array_equal(recording["A1"].data, _recording()["A1"].data)


@pytest.mark.parametrize("fmt", FORMATS)
def test_read_of_a_bad_file_leaves_it_unchanged(fmt, tmp_path):
    folder = tmp_path / "in"
    folder.mkdir()
    path = folder / f"bad.{fmt}"
    path.write_bytes(np.random.default_rng(3).bytes(2048))
    with unchanged(folder), pytest.raises(SigtuneError):
        dsp.read(path)


@pytest.mark.parametrize("fmt", FORMATS)
def test_sigtune_info_leaves_the_file_unchanged(fmt, tmp_path, capsys):
    folder = tmp_path / "in"
    path = _inputs(folder)[fmt]
    with unchanged(folder):
        assert main(["info", str(path)]) == 0
        assert main(["info", str(path), "--json"]) == 0
    assert "A1" in capsys.readouterr().out


def test_sigtune_demo_into_an_existing_folder_touches_only_its_own_files(tmp_path, capsys):
    folder = tmp_path / "campaign"
    (folder / "site_a").mkdir(parents=True)
    (folder / "notes.txt").write_text("bearing replaced 3 March\n")
    (folder / "site_a" / "run_017.csv").write_text("time [s],A1 [g]\n0,1\n0.5,2\n")
    dsp.write(_recording(), folder / "site_a" / "run_018.h5")
    mine = _snapshot(folder)
    assert main(["demo", str(folder)]) == 0
    written = {Path(line).name for line in capsys.readouterr().out.split()}
    after = _snapshot(folder)
    for name, state in mine.items():
        assert after[name][:2] == state[:2], f"demo changed the unrelated file {name}"
    assert set(after) == set(mine) | written  # nothing else, no temporary files
    assert not list(folder.rglob("*.part"))


@pytest.mark.parametrize("target", FORMATS)
@pytest.mark.parametrize("source", FORMATS)
def test_write_to_a_new_path_never_touches_the_source(source, target, tmp_path):
    folder = tmp_path / "in"
    path = _inputs(folder)[source]
    recording = dsp.read(path)
    out = tmp_path / "out"
    out.mkdir()
    with unchanged(folder):
        written = dsp.write(recording, out / f"copy.{target}")
    np.testing.assert_array_equal(dsp.read(written)["A2"].data, recording["A2"].data)


# ---------------------------------------------------------------- writing is atomic


def _parts(folder: Path) -> list[Path]:
    return [p for p in folder.iterdir() if p.name.endswith(".part")]


def _fail_part_way(fmt: str, monkeypatch, folder: Path, exc: BaseException) -> list[int]:
    """Make the writer of ``fmt`` fail after writing part of its temporary file; return the bytes it had."""
    written: list[int] = []

    def note_part():
        written.extend(p.stat().st_size for p in _parts(folder))

    if fmt in ("csv", "tsv"):  # fail inside the second block of rows, after the first reached the file
        calls = {"n": 0}

        def failing_repr(value):
            calls["n"] += 1
            if calls["n"] > 3 * 65536 + 7:
                note_part()
                raise exc
            return repr(value)

        monkeypatch.setattr(dsp.io.text, "repr", failing_repr, raising=False)
    elif fmt == "wav":
        def failing_write(file, data, *args, **kwargs):
            Path(file).write_bytes(b"RIFF" + bytes(1000))
            note_part()
            raise exc

        monkeypatch.setattr(soundfile, "write", failing_write)
    elif fmt == "h5":
        original = h5py.Group.create_dataset

        def failing_create(self, name, *args, **kwargs):
            if name != "000000":
                self.file.flush()
                note_part()
                raise exc
            return original(self, name, *args, **kwargs)

        monkeypatch.setattr(h5py.Group, "create_dataset", failing_create)
    else:
        def failing_savez(fh, **arrays):
            fh.write(b"PK\x03\x04" + bytes(1000))
            fh.flush()
            note_part()
            raise exc

        monkeypatch.setattr(np, "savez", failing_savez)
    return written


FAILURES = [OSError(errno.ENOSPC, "No space left on device (simulated)"), KeyboardInterrupt()]


@pytest.mark.parametrize("failure", FAILURES, ids=["disk_full", "interrupted"])
@pytest.mark.parametrize("fmt", FORMATS)
def test_a_write_failing_part_way_keeps_the_previous_file(fmt, failure, tmp_path, monkeypatch):
    folder = tmp_path / "out"
    target = _inputs(folder)[fmt]
    big = _recording(n=70_000, scale=2.0)  # text: more than one block of rows
    written = _fail_part_way(fmt, monkeypatch, folder, failure)
    with unchanged(folder), pytest.raises(type(failure)):
        dsp.write(big, target)
    assert written and written[0] > 0, "the failure did not happen part-way through writing"
    assert not _parts(folder)
    monkeypatch.undo()
    np.testing.assert_array_equal(dsp.read(target)["A1"].data, _recording()["A1"].data)


@pytest.mark.parametrize("fmt", FORMATS)
def test_a_failing_rename_keeps_the_previous_file(fmt, tmp_path, monkeypatch):
    folder = tmp_path / "out"
    target = _inputs(folder)[fmt]

    def failing_replace(src, dst):
        raise OSError(errno.EIO, "I/O error (simulated)")

    monkeypatch.setattr(dsp._atomic.os, "replace", failing_replace)
    with unchanged(folder), pytest.raises(OSError):
        dsp.write(_recording(scale=3.0), target)
    assert not _parts(folder)


def test_wav_and_sidecar_stay_a_pair_when_the_sidecar_cannot_be_made(tmp_path):
    folder = tmp_path / "out"
    target = _inputs(folder)["wav"]
    unstorable = _recording(scale=2.0).replace(metadata={"operator": object()})
    with unchanged(folder), pytest.raises(SigtuneError, match=r"cannot be stored as JSON"):
        dsp.write(unstorable, target)  # before the fix the WAV was replaced and the old sidecar kept


def test_wav_and_sidecar_stay_a_pair_when_the_sidecar_write_fails(tmp_path, monkeypatch):
    folder = tmp_path / "out"
    target = _inputs(folder)["wav"]

    def failing_text(path, text, encoding="utf-8"):
        raise OSError(errno.ENOSPC, "No space left on device (simulated)")

    monkeypatch.setattr(dsp.io.wav, "write_text_atomic", failing_text)
    with unchanged(folder), pytest.raises(OSError):
        dsp.write(_recording(scale=2.0), target)
    assert not _parts(folder)


def test_wav_without_sidecar_refuses_to_leave_a_stale_sidecar(tmp_path):
    folder = tmp_path / "out"
    target = _inputs(folder)["wav"]
    assert sidecar_path(target).exists()
    with unchanged(folder), pytest.raises(SigtuneError, match=r"run.wav.json: a sidecar 'run.wav.json' lies "
                                                               r"beside the target .* delete the sidecar"):
        dsp.write(_recording(scale=2.0), target, sidecar=False)
    sidecar_path(target).unlink()
    dsp.write(_recording(scale=2.0), target, sidecar=False)
    np.testing.assert_array_equal(dsp.read(target)[0].data, _recording(scale=2.0)[0].data)


# ---------------------------------------------------------------- sessions


def test_session_save_is_atomic_and_loading_touches_nothing(tmp_path, monkeypatch):
    from dsp.session import Session, describe_source

    folder = tmp_path / "work"
    source = _inputs(folder)["h5"]
    target = folder / "pump.json"
    Session(source=describe_source(source), notes="first").save(target)
    with unchanged(folder):
        loaded = Session.load(target, verify_source=True)
        assert loaded.check_source() == "match" and loaded.notes == "first"

    original = Path.write_text

    def failing_write_text(self, text, *args, **kwargs):
        original(self, text[: len(text) // 2], *args, **kwargs)
        raise OSError(errno.ENOSPC, "No space left on device (simulated)")

    monkeypatch.setattr(Path, "write_text", failing_write_text)
    with unchanged(folder), pytest.raises(OSError):
        Session(source=describe_source(source), notes="second").save(target)
    monkeypatch.undo()
    assert not _parts(folder)
    assert Session.load(target, verify_source=False).notes == "first"
