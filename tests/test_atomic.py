"""Atomic writes: all or nothing, with ordinary file permissions."""

import os

import pytest

from dsp._atomic import atomic_path, write_text_atomic


def test_a_new_file_gets_the_umask_mode(tmp_path):
    old = os.umask(0o022)
    try:
        path = write_text_atomic(tmp_path / "s.json", "{}")
    finally:
        os.umask(old)
    assert path.stat().st_mode & 0o777 == 0o644  # 0666 & ~022, as open() would create it (POSIX)


def test_replacing_keeps_the_targets_mode(tmp_path):
    target = tmp_path / "s.json"
    target.write_text("old")
    target.chmod(0o640)
    write_text_atomic(target, "new")
    assert target.read_text() == "new" and target.stat().st_mode & 0o777 == 0o640


def test_a_failure_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "s.json"
    target.write_text("old")
    with pytest.raises(RuntimeError), atomic_path(target) as tmp:
        tmp.write_text("half")
        raise RuntimeError("disk full")
    assert target.read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json"]
