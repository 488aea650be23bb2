"""HDF5 recordings in sigtune's own layout (h5py), with block access for long records.

Layout (version 1; full description in ``docs/formats.md``)::

    /                       attrs: sigtune_layout="sigtune-recording", sigtune_layout_version=1,
                                   sigtune_version, metadata (JSON text)
    /channels/000000        1-D float32/float64 dataset, chunked; attrs: name, fs_hz, unit,
    /channels/000001 ...             quantity, start_time_s, metadata (JSON), history (JSON),
                                     and sensitivity, sensitivity_unit when the metadata has them
    /timestamps             optional 1-D float64, the time column (s) a text file had

Datasets are named by position (channel names may hold ``/``); the ``name``
attribute carries the channel's name. Reading fills one numpy array per
channel straight from the file (no second copy), and :func:`read_block` /
:func:`channel_info` let the batch runner work through records too long to hold.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from .._atomic import atomic_path
from .._validate import check_choice, check_fs, check_int
from ..channel import Channel, Recording
from ..conditioning import Calibrate
from ..errors import SigtuneError
from ._common import (as_recording, channel_from_header, channel_header, check_finite, checked_sensitivity,
                      checked_timestamps, from_json, json_object, recording_header, to_json)

__all__ = ["read_hdf5", "write_hdf5", "read_block", "channel_info", "LAYOUT", "LAYOUT_VERSION"]

LAYOUT = "sigtune-recording"
LAYOUT_VERSION = 1
_DEFAULT_CHUNK = 1 << 17  # samples: 0.5-1 MiB chunks read efficiently and compress well
_REQUIRED_ATTRS = ("name", "fs_hz", "unit")
_HEAP_SIGNATURE = b"GCOL\x01"  # a global heap collection, version 1 (the only version)
#: How much of one heap collection is walked: collections hold text attributes (a few kB); the bound
#: keeps a damaged size field from making the walk read a whole large file into memory.
_HEAP_WALK_BYTES = 1 << 26


def _open(path: Path) -> h5py.File:
    try:
        return h5py.File(path, "r")
    except OSError as err:
        raise SigtuneError(f"is not a readable HDF5 file ({err})") from None


@contextlib.contextmanager
def _opened(path: Path) -> Iterator[h5py.File]:
    """Open ``path`` read-only, refuse a damaged global heap, and turn the HDF5 library's
    complaints about a damaged file into SigtuneError.

    h5py reports damage as OSError, KeyError or RuntimeError, and a garbled
    datatype or a link name that is not UTF-8 as ValueError.
    """
    try:
        with _open(path) as f:
            _check_global_heaps(path, f)
            yield f
    except SigtuneError:
        raise
    except (OSError, KeyError, RuntimeError, ValueError) as err:
        raise SigtuneError(f"is damaged or incomplete: the HDF5 library could not read it ({err})") from None


def _raw_extents(f: h5py.File) -> list[tuple[int, int]]:
    """Return ``(offset, length)`` of the stored samples of the channel and time datasets.

    Only their layout is read (no attribute values), so this is safe before
    :func:`_check_global_heaps`; the heap scan skips these bytes.
    """
    datasets = []
    group = f.get("channels")
    if isinstance(group, h5py.Group):
        datasets += [group[key] for key in group if isinstance(group.get(key, getlink=True), h5py.HardLink)]
    if isinstance(f.get("timestamps", getlink=True), h5py.HardLink):
        datasets.append(f["timestamps"])
    extents = []
    for ds in datasets:
        if not isinstance(ds, h5py.Dataset) or ds.is_virtual:
            continue
        layout = ds.id.get_create_plist().get_layout()
        if layout == h5py.h5d.CHUNKED:
            ds.id.chunk_iter(lambda info: extents.append((info.byte_offset, info.size)))
        elif layout == h5py.h5d.CONTIGUOUS and ds.id.get_offset() is not None:
            extents.append((ds.id.get_offset(), ds.id.get_storage_size()))
    return sorted(extents)


def _check_global_heaps(path: Path, f: h5py.File) -> None:
    """Refuse a file whose global heap would send the HDF5 library into an endless loop.

    Text attributes live in "global heap collections" (signature ``GCOL``).
    libhdf5 (2.0.0 and earlier) walks a collection's objects by their stated
    sizes and never ends if a free-space object states size 0 (a bit flip or an
    inserted byte is enough), hanging the process where no timeout can reach.
    Before any attribute is read, every collection outside the sample data is
    walked the same way here. Sample data is skipped, so the cost is that of
    reading the file's metadata, not its samples.
    """
    size = path.stat().st_size
    position = 0
    with open(path, "rb") as fh:
        for offset, length in [*_raw_extents(f), (size, 0)]:
            offset = min(offset, size)  # a damaged layout may point past the end
            if offset > position:
                _scan_for_heaps(fh, position, offset, size)
            position = max(position, offset + length)


def _scan_for_heaps(fh, start: int, stop: int, file_size: int) -> None:
    block = 1 << 22
    for a in range(start, stop, block):
        fh.seek(a)
        data = fh.read(min(block, stop - a) + len(_HEAP_SIGNATURE) - 1)
        found = data.find(_HEAP_SIGNATURE)
        while found >= 0:
            _walk_heap(fh, a + found, file_size)
            found = data.find(_HEAP_SIGNATURE, found + 1)


def _walk_heap(fh, at: int, file_size: int) -> None:
    """Walk one global heap collection as libhdf5 does (H5HG deserialise), refusing a walk that stalls."""
    fh.seek(at + 8)
    stated = int.from_bytes(fh.read(8), "little")
    fh.seek(at)
    heap = fh.read(min(stated, file_size - at, _HEAP_WALK_BYTES))
    p = 16  # signature, version, 3 reserved bytes, collection size
    while p + 16 <= len(heap):
        index = int.from_bytes(heap[p:p + 2], "little")
        object_size = int.from_bytes(heap[p + 8:p + 16], "little")
        # libhdf5's arithmetic is 64-bit unsigned: a huge size can wrap round to a step of 0.
        step = (16 + (object_size + 7) // 8 * 8 if index else object_size) % 2**64
        if step == 0 or step >= 2**63:
            raise SigtuneError(f"is damaged: the global heap at byte {at} (where HDF5 keeps text attributes) "
                               f"states an object of {object_size} bytes at byte {at + p}, which the HDF5 "
                               "library would loop on forever. Copy the file again from its source")
        p += step


def _attr(value: Any) -> Any:
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="replace")
    if isinstance(value, np.generic):
        return value.item()
    return value


def _describe_contents(f: h5py.File) -> str:
    names: list[str] = []

    def note(name: str):
        names.append("/" + name)
        return True if len(names) >= 6 else None  # a value other than None stops the walk

    f.visit(note)
    return ", ".join(names) if names else "nothing"


def _channel_datasets(f: h5py.File) -> list[h5py.Dataset]:
    """Return the channel datasets in order, or raise if ``f`` is not in our layout."""
    layout = _attr(f.attrs.get("sigtune_layout"))
    if layout != LAYOUT:
        raise SigtuneError(
            f"is an HDF5 file of another layout: no attribute sigtune_layout={LAYOUT!r} at '/'; it holds "
            f"{_describe_contents(f)}. sigtune reads its own layout (docs/formats.md): copy the data into "
            "it with h5py, or export CSV/NPZ", "/")
    version = _attr(f.attrs.get("sigtune_layout_version"))
    if version != LAYOUT_VERSION:
        raise SigtuneError(f"layout version {version!r} is not supported; this sigtune reads version "
                           f"{LAYOUT_VERSION}", "/")
    group = f.get("channels")
    if not isinstance(group, h5py.Group) or not len(group):
        raise SigtuneError("has no datasets under /channels; a sigtune HDF5 file holds one dataset per "
                           "channel there", "/channels")
    datasets = []
    for key in sorted(group):
        link = group.get(key, getlink=True)
        if not isinstance(link, h5py.HardLink):  # a link could point anywhere, even into another file
            raise SigtuneError(f"is a link ({_link_text(link)}), not a dataset stored in the file; sigtune "
                               "reads channels held in the file itself", f"/channels/{key}")
        datasets.append(group[key])
    for ds in datasets:
        if not isinstance(ds, h5py.Dataset):
            raise SigtuneError("is a group; each entry of /channels must be a 1-D numeric dataset", ds.name)
        if ds.ndim != 1 or ds.dtype.kind not in "fiu":
            raise SigtuneError(f"must be a 1-D numeric dataset; got shape {ds.shape}, dtype {ds.dtype}",
                               ds.name)
        _check_held_in_file(ds)
        missing = [a for a in _REQUIRED_ATTRS if a not in ds.attrs]
        if missing:
            raise SigtuneError(f"lacks attribute(s) {', '.join(missing)}; each channel dataset needs "
                               f"{', '.join(_REQUIRED_ATTRS)}", ds.name)
    return datasets


def _check_held_in_file(ds: h5py.Dataset) -> None:
    if ds.is_virtual or ds.external:  # reading them would read whatever other files they name
        raise SigtuneError("keeps its samples in other files (a virtual dataset or external storage); "
                           "sigtune reads data held in the file itself", ds.name)


def _link_text(link) -> str:
    if isinstance(link, h5py.ExternalLink):
        return f"an external link to {link.filename}:{link.path}"
    return f"a soft link to {link.path}" if isinstance(link, h5py.SoftLink) else type(link).__name__


def _header(ds: h5py.Dataset) -> dict[str, Any]:
    attrs = {key: _attr(value) for key, value in ds.attrs.items()}
    metadata = from_json(attrs.get("metadata", "{}"), f"{ds.name} attribute metadata")
    if not isinstance(metadata, dict):
        raise SigtuneError("attribute metadata must be a JSON object", ds.name)
    for key in ("sensitivity", "sensitivity_unit"):  # attrs written by other tools following the layout
        if key in attrs:
            metadata.setdefault(key, attrs[key])
    return {"name": attrs["name"], "fs_hz": attrs["fs_hz"], "unit": attrs["unit"],
            "quantity": attrs.get("quantity"), "start_time_s": attrs.get("start_time_s", 0.0),
            "metadata": metadata,
            "history": from_json(attrs.get("history", "[]"), f"{ds.name} attribute history")}


def _check_stored(ds: h5py.Dataset) -> None:
    """Refuse a dataset whose declared length its stored data cannot back.

    HDF5 returns the fill value (0) for chunks never written, so a dataset
    created for 10^12 samples but holding none would read as 8 TB of zeros,
    and an interrupted logger's file as a tail of silent zeros.
    """
    layout = ds.id.get_create_plist().get_layout()
    if layout == h5py.h5d.CHUNKED:
        needed = int(np.prod([-(-n // c) for n, c in zip(ds.shape, ds.chunks)]))
        stored = ds.id.get_num_chunks()
        if stored < needed:
            raise SigtuneError(f"declares {ds.size} samples in {needed} chunks but only {stored} chunk(s) "
                               "are stored; the rest would read as zeros. The file is incomplete (an "
                               "interrupted recording or copy?)", ds.name)
    elif layout == h5py.h5d.CONTIGUOUS and ds.id.get_storage_size() < ds.size * ds.dtype.itemsize:
        raise SigtuneError(f"declares {ds.size} samples ({ds.size * ds.dtype.itemsize} bytes) but stores "
                           f"{ds.id.get_storage_size()} bytes; the file is incomplete", ds.name)


def _samples(ds: h5py.Dataset, dtype=None) -> np.ndarray:
    """Read a whole dataset into one new array (float32 kept, other types as float64)."""
    dtype = dtype or (np.float32 if ds.dtype == np.float32 else np.float64)
    _check_stored(ds)
    try:
        out = np.empty(ds.shape, dtype=dtype)
    except MemoryError:  # one allocation of the declared size failed; nothing else was held
        raise SigtuneError(f"holds {ds.size} samples, more than the memory available; read it in blocks "
                           "with dsp.io.hdf5.read_block", ds.name) from None
    if out.size:
        try:
            ds.read_direct(out)  # HDF5 converts into our buffer: the samples are held once
        except OSError as err:  # a damaged or cut-short file
            raise SigtuneError(f"could not be read ({err}); the file may be damaged or incomplete",
                               ds.name) from None
    return out


def _select(datasets: list[h5py.Dataset], channels) -> list[h5py.Dataset]:
    if channels is None:
        return datasets
    names = [_attr(ds.attrs["name"]) for ds in datasets]
    keys = [channels] if isinstance(channels, str | int) else list(channels)
    chosen = []
    for key in keys:
        if key in names:
            chosen.append(datasets[names.index(key)])
        elif isinstance(key, int) and not isinstance(key, bool) and 0 <= key < len(datasets):
            chosen.append(datasets[key])
        else:
            raise SigtuneError(f"names no channel of this file: {key!r}; channels: {', '.join(names)} or "
                               f"indices 0..{len(names) - 1}", "channels")
    return chosen


def read_hdf5(path, *, channels=None, calibrate: bool = False, allow_nonfinite: bool = False) -> Recording:
    """Read a recording stored in sigtune's HDF5 layout.

    Parameters
    ----------
    path : str or Path
        The ``.h5``/``.hdf5`` file (opened read-only).
    channels : str, int or list, optional
        Read only these channels (names or indices), in this order; the others
        are never loaded.
    calibrate : bool, default False
        Turn voltage channels that carry a ``sensitivity`` into engineering
        units with a :class:`~dsp.Calibrate` step (recorded in the history).
    allow_nonfinite : bool, default False
        Keep NaN/Inf samples instead of raising.
    """
    path = Path(path)
    with _opened(path) as f:
        datasets = _select(_channel_datasets(f), channels)
        metadata = json_object(from_json(_attr(f.attrs.get("metadata", "{}")), "/ attribute metadata"),
                               "/ attribute metadata")
        result = []
        for ds in datasets:
            ch = channel_from_header(_samples(ds), _header(ds), ds.name)
            ch = _calibrated(ch, ds.name) if calibrate else ch
            check_finite(ch, allow_nonfinite)  # after calibrating: a tiny sensitivity can overflow
            result.append(ch)
        stamps = f["timestamps"] if isinstance(f.get("timestamps", getlink=True), h5py.HardLink) else None
        stamps = checked_timestamps(stamps, result, "/timestamps")  # checked before it is read
        if stamps is not None:
            _check_held_in_file(stamps)
        timestamps = None if stamps is None else _samples(stamps, np.float64)
    return Recording(result, source=str(path), metadata={**metadata, "format": "h5"}, timestamps=timestamps)


def _calibrated(channel: Channel, where: str) -> Channel:
    if channel.quantity != "voltage":
        return channel
    if "sensitivity" not in channel.metadata:
        raise SigtuneError("is a voltage channel without a 'sensitivity' attribute, so calibrate=True "
                           "cannot convert it; add the attribute or read with calibrate=False", where)
    step = Calibrate(*checked_sensitivity(channel.metadata["sensitivity"],
                                          channel.metadata.get("sensitivity_unit", "mV/g"), where))
    return step.apply(channel)


def channel_info(path) -> list[dict[str, Any]]:
    """Return the facts of every channel of an HDF5 recording without reading samples.

    Returns
    -------
    list of dict
        ``index``, ``name``, ``dataset``, ``fs_hz``, ``n_samples``,
        ``duration_s``, ``unit``, ``quantity``, ``start_time_s``, ``dtype``,
        ``metadata`` and ``history`` (so a channel processed block by block
        keeps its header).
    """
    path = Path(path)
    try:
        with _opened(path) as f:
            rows = []
            for i, ds in enumerate(_channel_datasets(f)):
                header = _header(ds)
                fs = check_fs(header["fs_hz"], f"{ds.name} fs_hz")
                rows.append({"index": i, "name": header["name"], "dataset": ds.name,
                             "fs_hz": fs, "n_samples": int(ds.shape[0]),
                             "duration_s": ds.shape[0] / fs, "unit": header["unit"],
                             "quantity": header["quantity"], "start_time_s": float(header["start_time_s"]),
                             "dtype": str(ds.dtype), "metadata": header["metadata"],
                             "history": header["history"]})
            return rows
    except SigtuneError as err:
        raise err.located(str(path)) from None


def read_block(path, channel: int | str, start: int = 0, stop: int | None = None) -> np.ndarray:
    """Read samples ``start:stop`` of one channel (only those chunks are read).

    Parameters
    ----------
    path : str or Path
        A sigtune HDF5 recording.
    channel : int or str
        Index or name.
    start, stop : int
        Sample indices, ``0 <= start < stop <= n_samples``; ``stop`` default the end.

    Returns
    -------
    ndarray
        The samples, float32 if stored so, else float64.
    """
    path = Path(path)
    try:
        with _opened(path) as f:
            ds = _select(_channel_datasets(f), [channel])[0]
            n = int(ds.shape[0])
            start = check_int(start, "start", low=0, high=n - 1)
            stop = n if stop is None else check_int(stop, "stop", low=start + 1, high=n)
            dtype = np.float32 if ds.dtype == np.float32 else np.float64
            out = np.empty(stop - start, dtype=dtype)
            ds.read_direct(out, np.s_[start:stop])
            return out
    except SigtuneError as err:
        raise err.located(str(path)) from None


def write_hdf5(recording, path, *, compression: str | None = None,
               chunk_samples: int = _DEFAULT_CHUNK) -> Path:
    """Write a recording in sigtune's HDF5 layout, atomically.

    Parameters
    ----------
    recording : Recording or Channel
        Channels may differ in rate and length.
    path : str or Path
        Target file.
    compression : {None, "gzip", "lzf"}, default None
        Lossless dataset compression (slower to write and read).
    chunk_samples : int, default 131072
        Samples per HDF5 chunk (fewer if a channel is shorter).
    """
    recording = as_recording(recording)
    check_choice(compression, "compression", (None, "gzip", "lzf"))
    chunk = check_int(chunk_samples, "chunk_samples", low=16)
    head = recording_header(recording)
    path = Path(path)
    with atomic_path(path) as tmp, h5py.File(tmp, "w") as f:
        f.attrs["sigtune_layout"] = LAYOUT
        f.attrs["sigtune_layout_version"] = LAYOUT_VERSION
        f.attrs["sigtune_version"] = head["sigtune_version"]
        f.attrs["metadata"] = to_json(head["metadata"], "recording metadata")
        group = f.create_group("channels")
        for i, ch in enumerate(recording):
            ds = group.create_dataset(f"{i:06d}", data=ch.data, chunks=(min(chunk, ch.n_samples),),
                                      compression=compression)
            _write_attrs(ds, channel_header(ch))
        if recording.timestamps is not None:
            f.create_dataset("timestamps", data=recording.timestamps).attrs["unit"] = "s"
    return path


def _write_attrs(ds: h5py.Dataset, header: dict[str, Any]) -> None:
    where = f"channel {header['name']!r}"
    for key in ("name", "fs_hz", "unit", "quantity", "start_time_s"):
        ds.attrs[key] = header[key]
    ds.attrs["metadata"] = to_json(header["metadata"], f"{where} metadata")
    ds.attrs["history"] = to_json(header["history"], f"{where} history")
    for key in ("sensitivity", "sensitivity_unit"):  # plain attributes too, for other HDF5 readers
        if isinstance(header["metadata"].get(key), int | float | str):
            ds.attrs[key] = header["metadata"][key]
