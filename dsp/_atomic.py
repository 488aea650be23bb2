"""Atomic file writes: write to a temporary name beside the target, then rename.

A crash or a full disk never leaves a half-written file under the target's
name, and an existing file is replaced only once the new one is complete.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; rename it onto ``target`` on success.

    On any exception the temporary file is removed and ``target`` is untouched.
    """
    target = Path(target)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    # mkstemp creates the file 0600; give it the mode a plain open() would (or keep the target's).
    os.fchmod(fd, _mode_for(target))
    os.close(fd)
    tmp_path = Path(tmp)
    try:
        yield tmp_path
        with open(tmp_path, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp_path, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp_path.unlink()
        raise


def _mode_for(target: Path) -> int:
    """The permission bits the target has, or those a new file gets under this process's umask."""
    try:
        return target.stat().st_mode & 0o777
    except FileNotFoundError:
        pass
    umask = 0o022
    try:  # read the umask without os.umask(), which would change it for every thread meanwhile
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("Umask:"):
                umask = int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    return 0o666 & ~umask


def write_text_atomic(target: str | os.PathLike, text: str, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``target`` atomically; return the target path."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding=encoding)
    return Path(target)
