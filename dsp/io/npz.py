"""NPZ recordings: numpy arrays plus a JSON description, loaded without pickle.

Layout (version 1; see ``docs/formats.md``): one array ``channel_000000``,
``channel_000001``, ... per channel (1-D float32/float64), an optional
``timestamps`` array (s), and ``sigtune_meta``, a 0-d unicode string array
holding JSON: ``{"layout": "sigtune-recording-npz", "layout_version": 1,
"sigtune_version": ..., "metadata": {...}, "channels": [{"array": ...,
"name": ..., "fs_hz": ..., "unit": ..., "quantity": ..., "start_time_s": ...,
"metadata": {...}, "history": [...]}, ...]}``. Files are always opened with
``allow_pickle=False``, so loading one can never run code.
"""

from __future__ import annotations

import math
import zipfile
from pathlib import Path

import numpy as np

from .._atomic import atomic_path
from ..channel import Recording
from ..errors import SigtuneError
from ._common import (as_recording, channel_from_header, channel_header, check_finite, checked_timestamps,
                      from_json, json_object, recording_header, to_json)

__all__ = ["read_npz", "write_npz", "NPZ_LAYOUT"]

NPZ_LAYOUT = "sigtune-recording-npz"
_META = "sigtune_meta"


_ZIP_MAGIC = (b"PK\x03\x04", b"PK\x05\x06")  # a zip archive's first member, or an empty archive
#: Deflate cannot expand data more than about 1032-fold, so a member claiming
#: more is damaged or hostile (a "zip bomb"); it is refused before inflating.
_DEFLATE_MAX_RATIO = 1032


def _load(path: Path):
    with open(path, "rb") as fh:
        head = fh.read(6)
    if head == b"\x93NUMPY":  # checked first: loading a lone .npy would read its whole array
        raise SigtuneError("holds a single .npy array, not an .npz archive; save it with numpy.savez, or "
                           "build a dsp.Recording and dsp.write it")
    if head[:4] not in _ZIP_MAGIC:
        raise SigtuneError(f"is not a readable NPZ file: an .npz file is a zip archive starting with 'PK', "
                           f"this one starts with {head!r}. Is it another kind of file renamed .npz?")
    try:
        archive = np.load(path, allow_pickle=False)
    except ValueError as err:  # pickled content refused, or not numpy data at all
        raise SigtuneError(f"is not an NPZ archive of plain arrays ({err})") from None
    except (OSError, EOFError, NotImplementedError, zipfile.BadZipFile) as err:  # NotImplementedError: a
        raise SigtuneError(f"is not a readable NPZ file ({err})") from None  # zip version Python cannot read
    if not isinstance(archive, np.lib.npyio.NpzFile):
        raise SigtuneError("holds a single .npy array, not an .npz archive; save it with numpy.savez, or "
                           "build a dsp.Recording and dsp.write it")
    return archive


def _check_member(archive, name: str, archive_bytes: int) -> None:
    """Refuse a member whose declared size its stored bytes cannot back, before numpy allocates it.

    numpy allocates the whole array its header declares before reading any
    data, so a 100-byte member claiming 10^12 samples would exhaust memory.
    """
    where = f"array {name!r}"
    try:
        info = archive.zip.getinfo(f"{name}.npy")
    except KeyError:
        raise SigtuneError("is a member of the archive but not a numpy array (.npy); the archive was not "
                           "written by numpy.savez", where) from None
    if info.compress_type not in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED):
        raise SigtuneError(f"uses zip compression method {info.compress_type}; NPZ archives are stored or "
                           "deflated (numpy.savez, numpy.savez_compressed)", where)
    ratio = 1 if info.compress_type == zipfile.ZIP_STORED else _DEFLATE_MAX_RATIO
    if info.compress_size > archive_bytes or info.file_size > info.compress_size * ratio:
        raise SigtuneError(f"declares {info.file_size} bytes from {info.compress_size} stored bytes, more "
                           f"than the archive ({archive_bytes} bytes) can hold; the archive is damaged",
                           where)
    try:
        with archive.zip.open(info) as fh:
            version = np.lib.format.read_magic(fh)
            read_header = (np.lib.format.read_array_header_1_0 if version == (1, 0)
                           else np.lib.format.read_array_header_2_0)  # 3.0 differs only in text encoding
            shape, _, dtype = read_header(fh)
            available = info.file_size - fh.tell()
    except (ValueError, OSError, EOFError, RuntimeError, NotImplementedError, zipfile.BadZipFile) as err:
        raise SigtuneError(f"has no readable .npy header ({err})", where) from None
    declared = math.prod(shape) * dtype.itemsize
    if not dtype.hasobject and declared > available:
        raise SigtuneError(f"declares shape {shape} of {dtype} ({declared} bytes) but holds only {available} "
                           "bytes; the archive is truncated or damaged", where)


def _array(archive, name: str, archive_bytes: int) -> np.ndarray:
    if name not in archive.files:
        raise SigtuneError(f"is listed in {_META} but missing; arrays present: {', '.join(archive.files)}",
                           f"array {name!r}")
    _check_member(archive, name, archive_bytes)
    try:
        return archive[name]
    except MemoryError:  # one allocation of the declared size failed; nothing else was held
        raise SigtuneError("is larger than the memory available; split the recording into shorter files",
                           f"array {name!r}") from None
    except (ValueError, OSError, EOFError, RuntimeError, NotImplementedError, zipfile.BadZipFile) as err:
        raise SigtuneError(f"cannot be loaded ({err}); object (pickled) arrays are never loaded",
                           f"array {name!r}") from None


def _meta(archive, archive_bytes: int) -> dict:
    if _META not in archive.files:
        raise SigtuneError(f"is an NPZ archive of another layout: no {_META!r} array; it holds "
                           f"{', '.join(archive.files[:8]) or 'nothing'}. sigtune reads its own layout "
                           "(docs/formats.md); build a dsp.Recording from the arrays and dsp.write it")
    raw = _array(archive, _META, archive_bytes)
    if raw.dtype.kind != "U" or raw.size != 1:
        raise SigtuneError("must be a single unicode string of JSON", f"array {_META!r}")
    meta = from_json(str(raw.reshape(())), f"array {_META!r}")
    if not isinstance(meta, dict) or meta.get("layout") != NPZ_LAYOUT:
        raise SigtuneError(f"must be a JSON object with \"layout\": \"{NPZ_LAYOUT}\"", f"array {_META!r}")
    if meta.get("layout_version") != 1 or not isinstance(meta.get("channels"), list) or not meta["channels"]:
        raise SigtuneError("needs layout_version 1 and a non-empty 'channels' list", f"array {_META!r}")
    return meta


def read_npz(path, *, allow_nonfinite: bool = False) -> Recording:
    """Read a recording stored in sigtune's NPZ layout (never unpickles).

    Parameters
    ----------
    path : str or Path
        The ``.npz`` file (opened read-only).
    allow_nonfinite : bool, default False
        Keep NaN/Inf samples instead of raising.
    """
    path = Path(path)
    size = path.stat().st_size
    with _load(path) as archive:
        meta = _meta(archive, size)
        metadata = json_object(meta.get("metadata") or {}, f"{_META} metadata")
        channels = []
        for i, entry in enumerate(meta["channels"]):
            where = f"{_META} channels[{i}]"
            if not isinstance(entry, dict) or "array" not in entry:
                raise SigtuneError("must be an object naming its 'array'", where)
            data = _array(archive, str(entry["array"]), size)
            if data.ndim != 1 or data.dtype.kind not in "fiu":
                raise SigtuneError(f"must be a 1-D numeric array; got shape {data.shape}, dtype {data.dtype}",
                                   f"array {entry['array']!r}")
            ch = channel_from_header(data, entry, where)
            check_finite(ch, allow_nonfinite)
            channels.append(ch)
        stamps = _array(archive, "timestamps", size) if "timestamps" in archive.files else None
        timestamps = checked_timestamps(stamps, channels, "array 'timestamps'")
    return Recording(channels, source=str(path), metadata={**metadata, "format": "npz"},
                     timestamps=timestamps)


def write_npz(recording, path, *, compressed: bool = False) -> Path:
    """Write a recording in sigtune's NPZ layout, atomically.

    Parameters
    ----------
    recording : Recording or Channel
        Channels may differ in rate and length.
    path : str or Path
        Target file.
    compressed : bool, default False
        Deflate the arrays (lossless; smaller, slower).
    """
    recording = as_recording(recording)
    arrays, entries = {}, []
    for i, ch in enumerate(recording):
        name = f"channel_{i:06d}"
        arrays[name] = ch.data
        entries.append({"array": name, **channel_header(ch)})
    if recording.timestamps is not None:
        arrays["timestamps"] = recording.timestamps
    meta = {"layout": NPZ_LAYOUT, "layout_version": 1, **recording_header(recording), "channels": entries}
    arrays[_META] = np.array(to_json(meta, "recording"))
    save = np.savez_compressed if compressed else np.savez
    path = Path(path)
    with atomic_path(path) as tmp, open(tmp, "wb") as fh:  # a file object: savez would append '.npz'
        save(fh, **arrays)
    return path
