"""Reading and writing recording files: CSV/TSV, WAV, HDF5 and NPZ.

:func:`read` and :func:`write` choose the format from the file's extension
(see :data:`FORMATS`) unless ``format=`` says otherwise; every other keyword
is an option of that format's reader or writer:

==========  ============================================  ===========================================
format      read options                                  write options
==========  ============================================  ===========================================
csv, tsv    delimiter, fs, time_column, unit,             delimiter, time_column
            time_tolerance, allow_nonfinite
wav         calibration, sidecar, allow_nonfinite         subtype, full_scale, sidecar
h5          channels, calibrate, allow_nonfinite          compression, chunk_samples
npz         allow_nonfinite                               compressed
==========  ============================================  ===========================================

Input files are opened read-only and never modified; every file is written
atomically (a temporary name, renamed when complete). The layouts are
documented in ``docs/formats.md``.

Examples
--------
>>> import tempfile, pathlib
>>> import numpy as np
>>> from dsp import Channel, Recording
>>> rec = Recording([Channel(np.sin(np.arange(64) / 8.0), 64.0, name="A1", unit="g")])
>>> with tempfile.TemporaryDirectory() as tmp:
...     back = read(write(rec, pathlib.Path(tmp) / "a.csv"))
>>> back["A1"].unit, back["A1"].fs, bool(np.array_equal(back["A1"].data, rec["A1"].data))
('g', 64.0, True)
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

from ..channel import Recording
from ..errors import SigtuneError
from . import hdf5, npz, text, wav
from ._common import as_recording, check_options

__all__ = ["read", "write", "FORMATS", "format_for"]

#: Format names and the file extensions that select them.
FORMATS: dict[str, tuple[str, ...]] = {
    "csv": (".csv",), "tsv": (".tsv",), "wav": (".wav",), "h5": (".h5", ".hdf5"), "npz": (".npz",),
}

_READERS: dict[str, Callable[..., Recording]] = {
    "csv": text.read_text, "tsv": text.read_text, "wav": wav.read_wav, "h5": hdf5.read_hdf5,
    "npz": npz.read_npz,
}
_WRITERS: dict[str, Callable[..., Path]] = {
    "csv": text.write_text, "tsv": text.write_text, "wav": wav.write_wav, "h5": hdf5.write_hdf5,
    "npz": npz.write_npz,
}
_DEFAULT_OPTIONS = {"tsv": {"delimiter": "\t"}}


def format_for(path: str | os.PathLike, format: str | None = None) -> str:
    """Return the format name for ``path`` (``format`` wins), or raise listing the valid ones.

    Examples
    --------
    >>> format_for("run_03.HDF5"), format_for("log.txt", format="tsv")
    ('h5', 'tsv')
    """
    if format is not None:
        name = str(format).lower().lstrip(".")
        name = {"hdf5": "h5"}.get(name, name)
        if name not in FORMATS:
            raise SigtuneError(f"unknown format {format!r}; valid formats: {', '.join(FORMATS)}", "format")
        return name
    suffix = Path(path).suffix.lower()
    for name, suffixes in FORMATS.items():
        if suffix in suffixes:
            return name
    valid = ", ".join(s for suffixes in FORMATS.values() for s in suffixes)
    raise SigtuneError(f"unknown extension {suffix or '(none)'!r}; valid extensions: {valid}. "
                       "Rename the file or pass format=... (csv, tsv, wav, h5, npz)", str(path))


def read(path: str | os.PathLike, format: str | None = None, **options) -> Recording:
    """Read a recording file into a :class:`~dsp.Recording`.

    Parameters
    ----------
    path : str or Path
        The file; opened read-only, never modified.
    format : str, optional
        ``csv``, ``tsv``, ``wav``, ``h5`` or ``npz``; default from the extension.
    **options
        Options of the format's reader (see the module docstring); an unknown
        option is an error.

    Returns
    -------
    Recording
        Its ``source`` is ``str(path)``.

    Raises
    ------
    SigtuneError
        For any problem with the file's contents, naming the file and the
        row, channel or dataset concerned.
    FileNotFoundError
        If there is no such file.
    """
    path = Path(path)
    name = format_for(path, format)
    reader = _READERS[name]
    check_options(reader, options, name)
    options = {**_DEFAULT_OPTIONS.get(name, {}), **options}
    if not path.is_file():
        if path.exists() and not path.is_dir():  # opening a pipe would wait for a writer, maybe forever
            raise SigtuneError("is not a regular file (a pipe, socket or device); sigtune reads recordings "
                               "from files", str(path))
        open(path, "rb").close()  # raises the accurate OSError (missing, a directory, no permission)
    if path.stat().st_size == 0:
        raise SigtuneError(f"the file is empty (0 bytes); expected a {name} recording", str(path))
    try:
        return reader(path, **options)
    except SigtuneError as err:
        raise _located(err, path) from None


def write(recording, path: str | os.PathLike, format: str | None = None, **options) -> Path:
    """Write a recording (or a single channel) to a file, atomically.

    Parameters
    ----------
    recording : Recording or Channel
    path : str or Path
        Target file; its directory must exist. An existing file is replaced
        only once the new one is complete.
    format : str, optional
        Default from the extension.
    **options
        Options of the format's writer (see the module docstring).

    Returns
    -------
    Path
        The path written.
    """
    path = Path(path)
    name = format_for(path, format)
    writer = _WRITERS[name]
    check_options(writer, options, name)
    options = {**_DEFAULT_OPTIONS.get(name, {}), **options}
    if not path.parent.is_dir():
        raise SigtuneError(f"directory {str(path.parent)!r} does not exist; create it first", str(path))
    try:
        return writer(as_recording(recording), path, **options)
    except SigtuneError as err:
        raise _located(err, path) from None


def _located(err: SigtuneError, path: Path) -> SigtuneError:
    """Prefix the file's path to an error, unless it already names the file; keep it on one line."""
    located = err if err.where and err.where.startswith(str(path)) else err.located(str(path))
    if "\n" in str(located) or "\r" in str(located):  # a name read from the file may hold a line break
        located = SigtuneError(_one_line(located.detail), _one_line(located.where))
    return located


def _one_line(text: str | None) -> str | None:
    return text if text is None else text.replace("\r", "\\r").replace("\n", "\\n")
