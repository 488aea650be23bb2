"""WAV recordings through soundfile (libsndfile), with a JSON sidecar for units.

A WAV file stores frames of samples and an integer rate, nothing else. Integer
samples are read as a fraction of full scale (``int16`` value / 32768, the
libsndfile convention; unit ``"FS"``), float samples as stored. The engineering
meaning of each channel (name, unit, calibration) lives in a *sidecar*: a JSON
file beside the WAV named ``<file>.wav.json`` (layout in ``docs/formats.md``),
or in the ``calibration=`` option, which overrides the sidecar per channel.
"""

from __future__ import annotations

import struct
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import soundfile

from .._atomic import atomic_path, write_text_atomic
from .._validate import check_choice, check_number
from ..channel import Channel, Recording
from ..errors import SigtuneError
from ..units import conversion_factor, sensitivity_factor, unit_info
from ._common import (as_recording, channel_from_header, channel_header, check_finite, checked_sensitivity,
                      common_timebase, from_json, json_object, recording_header, to_json)

__all__ = ["read_wav", "write_wav", "sidecar_path", "SIDECAR_LAYOUT", "WAV_SUBTYPES"]

SIDECAR_LAYOUT = "sigtune-wav-sidecar"
#: Subtypes the writer offers: integer PCM (scaled to a full scale) and IEEE float.
WAV_SUBTYPES = ("PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE")
_INT_BITS = {"PCM_16": 16, "PCM_24": 24, "PCM_32": 32}
_FLOAT32_EXACT = {"PCM_U8", "PCM_S8", "PCM_16", "PCM_24", "FLOAT"}  # float32 holds these exactly
_WAV_CONTAINERS = ("WAV", "WAVEX", "RF64", "W64")  # libsndfile's names for the WAV family
#: Sample encodings read; compressed ones (ADPCM, GSM ...) are refused.
_SUBTYPES_READ = ("PCM_U8", "PCM_S8", "ALAW", "ULAW", "PCM_16", "PCM_24", "PCM_32", "FLOAT", "DOUBLE")
_SENSITIVITY_KEYS = ("sensitivity", "sensitivity_unit", "full_scale_volts")
_CALIBRATION_KEYS = ("name", "unit", "quantity", "scale", *_SENSITIVITY_KEYS, "start_time_s", "metadata",
                     "history")


def sidecar_path(path) -> Path:
    """Return the sidecar path of a WAV file: ``<file>.wav.json`` beside it."""
    path = Path(path)
    return path.with_name(path.name + ".json")


def _check_not_truncated(path: Path) -> None:
    """Raise if the RIFF header declares more sample bytes than the file holds.

    libsndfile reads a cut-short file without complaint, returning fewer
    frames, so a truncated copy would pass unnoticed; the header tells.
    """
    size = path.stat().st_size
    with open(path, "rb") as fh:
        head = fh.read(12)
        if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
            return  # not plain RIFF/WAVE (RF64 ...): soundfile judges it
        for _ in range(64):  # a WAV has a handful of chunks; bound the walk
            chunk = fh.read(8)
            if len(chunk) < 8:
                return
            chunk_id, declared = chunk[:4], struct.unpack("<I", chunk[4:])[0]
            if chunk_id == b"data":
                available = size - fh.tell()
                if declared not in (0, 0xFFFFFFFF) and declared > available:  # 0/-1: written while streaming
                    raise SigtuneError(f"is truncated: its header declares {declared} bytes of samples but "
                                       f"only {available} are present (an interrupted copy or recording?). "
                                       "Copy the file again from its source", "data chunk")
                return
            fh.seek(declared + (declared & 1), 1)  # chunks are padded to an even length


def _open_info(path: Path):
    try:
        info = soundfile.info(str(path))
    except (soundfile.LibsndfileError, RuntimeError, OSError) as err:
        raise SigtuneError(f"is not a readable WAV file ({err}); expected RIFF/WAVE with PCM 16/24/32-bit "
                           "or float 32/64 samples") from None
    _check_wav_layout(info)
    return info


def _check_wav_layout(info) -> None:
    """Refuse what libsndfile can read but a WAV reader should not: other containers and compressed samples.

    libsndfile recognises files by their content, so a FLAC or Ogg file renamed
    ``.wav`` would be decoded, and soundfile allocates every frame the header
    declares before decoding: a 600-byte FLAC header claiming 2^36 frames
    would ask for 256 GiB. Within WAV containers (RIFF, RF64, Wave64) of
    uncompressed samples libsndfile bounds the declared frames by the file's size.
    """
    if info.format not in _WAV_CONTAINERS:
        raise SigtuneError(f"holds {info.format_info} audio ({info.format}), not WAV; sigtune reads WAV "
                           "(RIFF/WAVE, WAVE_FORMAT_EXTENSIBLE, RF64, Wave64). Convert it to WAV, or read it "
                           "with its own tool and dsp.write the result")
    if info.subtype not in _SUBTYPES_READ:
        raise SigtuneError(f"holds {info.subtype_info} samples ({info.subtype}); sigtune reads PCM "
                           "8/16/24/32-bit, A-law, u-law and float 32/64 WAV. Convert it to PCM or float WAV")


def _load_sidecar(path: Path, sidecar) -> tuple[dict, Path | None]:
    if sidecar is False or sidecar is None:
        return {}, None
    side = sidecar_path(path) if sidecar == "auto" else Path(sidecar)
    if not side.is_file():
        if sidecar == "auto":
            return {}, None
        raise SigtuneError("no such sidecar file; pass sidecar='auto', False or an existing path", str(side))
    with open(side, "rb") as fh:
        raw = fh.read(1 << 24)  # a sidecar is a few kB; never read a huge file whole
    data = from_json(raw, str(side))
    if not isinstance(data, dict) or data.get("layout") != SIDECAR_LAYOUT:
        raise SigtuneError(f"is not a sigtune WAV sidecar: expected a JSON object with \"layout\": "
                           f"\"{SIDECAR_LAYOUT}\" (see docs/formats.md)", str(side))
    return data, side


def _calibration_entries(n: int, sidecar: dict, side: Path | None, calibration) -> list[dict]:
    """Merge sidecar channel entries with the ``calibration`` option (which wins), per channel."""
    entries = sidecar.get("channels", [{} for _ in range(n)])
    if not isinstance(entries, list) or len(entries) != n or not all(isinstance(e, dict) for e in entries):
        raise SigtuneError(f"lists {len(entries) if isinstance(entries, list) else 'no'} channel(s) but "
                           f"the WAV has {n}; give one JSON object per channel", str(side))
    entries = [dict(e) for e in entries]
    names = [str(e.get("name", f"ch{i + 1}")) for i, e in enumerate(entries)]
    if calibration is None:
        return entries
    if isinstance(calibration, list | tuple):
        calibration = dict(enumerate(calibration))
    if not isinstance(calibration, Mapping):
        raise SigtuneError("must be a dict (channel name or index -> settings) or a list, one per channel",
                           "calibration")
    for key, settings in calibration.items():
        index = names.index(key) if key in names else key
        if not isinstance(index, int) or not 0 <= index < n or not isinstance(settings, Mapping):
            raise SigtuneError(f"must map a channel of this file ({', '.join(names)} or indices 0..{n - 1}) "
                               f"to a dict of settings; got {key!r}: {settings!r:.40}", "calibration")
        if set(settings) & {"scale", *_SENSITIVITY_KEYS}:  # a new calibration replaces the stored one
            for stale in ("scale", *_SENSITIVITY_KEYS, "unit", "quantity"):
                entries[index].pop(stale, None)
        entries[index].update(settings)
    return entries


def _apply_calibration(data: np.ndarray, entry: dict, index: int, fs: float) -> Channel:
    where = f"channel {index} ({entry.get('name', f'ch{index + 1}')!r}) calibration"
    unknown = sorted(set(entry) - set(_CALIBRATION_KEYS))
    if unknown:
        raise SigtuneError(f"unknown key {unknown[0]!r}; valid keys: {', '.join(_CALIBRATION_KEYS)}", where)
    header = {"name": f"ch{index + 1}", "unit": "FS", "fs_hz": fs, **entry}
    if "sensitivity" in entry:  # volts at full scale / sensor volts per unit
        if "full_scale_volts" not in entry or "scale" in entry:
            raise SigtuneError("a sensitivity needs 'full_scale_volts' (the volts that 1.0 FS stands for) "
                               "and excludes 'scale'", where)
        sensitivity, sensitivity_unit = checked_sensitivity(entry["sensitivity"],
                                                            entry.get("sensitivity_unit", "mV/g"), where)
        v_per_unit, measured = sensitivity_factor(sensitivity, sensitivity_unit)
        volts = check_number(entry["full_scale_volts"], f"{where}.full_scale_volts", low=0.0, low_open=True)
        target = entry.get("unit", measured)
        if unit_info(target, f"{where}.unit").quantity != unit_info(measured).quantity:
            raise SigtuneError(f"unit {target!r} does not measure {unit_info(measured).quantity}, the "
                               f"quantity of the sensitivity unit {sensitivity_unit!r}",
                               where)
        scale = volts / v_per_unit * conversion_factor(measured, target)
        header["unit"] = target
    else:
        scale = check_number(entry.get("scale", 1.0), f"{where}.scale")
        if "scale" in entry and "unit" not in entry:
            raise SigtuneError("a 'scale' needs the 'unit' it turns the samples into", where)
    unit_info(header["unit"], f"{where}.unit")
    if scale != 1.0:
        data = data * scale
    metadata = dict(json_object(header.get("metadata") or {}, f"{where}.metadata"))
    calibrated = {k: v for k, v in entry.items() if k in ("scale", *_SENSITIVITY_KEYS)}
    if calibrated and calibrated != {"scale": 1.0}:  # a unit scale is no calibration worth noting
        metadata["calibration"] = calibrated
    return channel_from_header(data, {**header, "metadata": metadata}, where)


def read_wav(path, *, calibration=None, sidecar="auto", allow_nonfinite: bool = False) -> Recording:
    """Read a WAV recording (PCM 8/16/24/32-bit or float 32/64, any channel count).

    Parameters
    ----------
    path : str or Path
        The WAV file (opened read-only).
    calibration : dict or list, optional
        Per channel (by name or index, or a list in order) a dict of
        ``name``, ``unit``, and either ``scale`` (units per stored value: per
        1.0 FS for integer files) or ``sensitivity`` + ``sensitivity_unit`` +
        ``full_scale_volts`` (the volts that 1.0 FS stands for). Overrides the
        sidecar's entries key by key.
    sidecar : 'auto', str, Path or False, default 'auto'
        'auto' reads ``<file>.wav.json`` if present; False ignores it.
    allow_nonfinite : bool, default False
        Keep NaN/Inf samples (float files) instead of raising.

    Returns
    -------
    Recording
        Uncalibrated channels are ``ch1``, ``ch2``, ... in unit ``"FS"``.
    """
    path = Path(path)
    _check_not_truncated(path)
    info = _open_info(path)
    if info.frames < 2:
        raise SigtuneError(f"holds {info.frames} frame(s); a recording needs at least 2 samples")
    dtype = "float32" if info.subtype in _FLOAT32_EXACT else "float64"
    try:
        frames, fs = soundfile.read(str(path), dtype=dtype, always_2d=True)
    except (soundfile.LibsndfileError, RuntimeError, OSError) as err:
        raise SigtuneError(f"could not be decoded ({err})") from None
    samples = np.ascontiguousarray(frames.T)  # one contiguous row per channel
    del frames
    side_data, side = _load_sidecar(path, sidecar)
    entries = _calibration_entries(info.channels, side_data, side, calibration)
    channels = []
    for i, entry in enumerate(entries):
        ch = _apply_calibration(samples[i], entry, i, float(fs))
        check_finite(ch, allow_nonfinite)
        channels.append(ch)
    side_metadata = json_object(side_data.get("metadata") or {}, f"{side} metadata") if side else {}
    metadata = {**side_metadata, "format": "wav", "wav_subtype": info.subtype}
    return Recording(channels, source=str(path), metadata=metadata)


def _integer_frames(recording: Recording, subtype: str, full_scale) -> tuple[np.ndarray, list[float]]:
    """Scale each channel to its full scale and round to integers (soundfile writes ints unscaled)."""
    bits = _INT_BITS[subtype]
    top = 2.0 ** (bits - 1)
    scales, columns = [], []
    for i, ch in enumerate(recording):
        chosen = full_scale.get(ch.name) if isinstance(full_scale, Mapping) else full_scale
        if chosen is None:
            peak = float(np.max(np.abs(ch.data))) if np.all(np.isfinite(ch.data)) else np.nan
            # The peak maps onto the top code (top - 1), so the default never clips.
            chosen = peak * top / (top - 1) if peak > 0 else 1.0
        scale = check_number(chosen, f"full_scale for channel {ch.name!r}", low=0.0, low_open=True,
                             unit=ch.unit)
        if not np.all(np.isfinite(ch.data)):
            raise SigtuneError("holds NaN/Inf samples, which integer PCM cannot store; write subtype "
                               "'FLOAT' or 'DOUBLE'", f"channel {ch.name!r}")
        peak = float(np.max(np.abs(ch.data)))
        if peak > scale:
            raise SigtuneError(f"reaches {peak:g} {ch.unit}, beyond full_scale={scale:g} {ch.unit}: "
                               f"{subtype} would clip it. Raise full_scale, leave it unset (the peak), or "
                               "write 'FLOAT'/'DOUBLE'", f"channel {ch.name!r}")
        # Round to the nearest code; exactly +1.0 FS has no code of its own and takes the top one.
        codes = np.clip(np.round(ch.data / scale * top), -top, top - 1)
        columns.append(codes)
        scales.append(scale)
    stacked = np.stack(columns, axis=1)
    if bits == 16:
        return stacked.astype(np.int16), scales
    if bits == 24:  # soundfile writes int32 frames to PCM_24 by keeping the top 24 bits
        return (stacked.astype(np.int32) << 8), scales
    return stacked.astype(np.int32), scales


def write_wav(recording, path, *, subtype: str = "DOUBLE", full_scale=None, sidecar: bool = True) -> Path:
    """Write a recording as a WAV file (and its sidecar), atomically.

    Parameters
    ----------
    recording : Recording or Channel
        Channels of one integer rate (Hz), length and start time.
    path : str or Path
        Target ``.wav`` file.
    subtype : str, default "DOUBLE"
        ``DOUBLE`` (float64, lossless), ``FLOAT`` (float32), or ``PCM_16``,
        ``PCM_24``, ``PCM_32`` (integers of a full scale).
    full_scale : float or dict, optional
        PCM only: the value (in the channel's unit) stored as 1.0 FS, for all
        channels or by name; default each channel's peak.
    sidecar : bool, default True
        Also write ``<file>.wav.json`` with names, units, scales, metadata and
        history, so that :func:`read_wav` returns engineering units.
    """
    recording = as_recording(recording)
    check_choice(subtype, "subtype", WAV_SUBTYPES)
    fs, _, _ = common_timebase(recording, "WAV")
    if fs != round(fs):
        raise SigtuneError(f"WAV stores an integer sample rate; got fs={fs:g} Hz. Resample to an integer "
                           "rate, or write .h5/.npz", "recording")
    if subtype in _INT_BITS:
        frames, scales = _integer_frames(recording, subtype, full_scale)
    else:
        frames = np.stack([ch.data for ch in recording], axis=1)
        scales = [1.0] * len(recording)
    path = Path(path)
    side = sidecar_path(path)
    if not sidecar and side.exists():
        raise SigtuneError(f"a sidecar {side.name!r} lies beside the target and would give the new file its "
                           "names, units and scales; write with sidecar=True, or delete the sidecar first",
                           str(side))
    # The sidecar text is made before anything is written, so a value JSON cannot hold fails with
    # both files untouched; the new sidecar then replaces the old one just before the WAV does.
    side_text = _sidecar_text(recording, scales) if sidecar else None
    try:
        with atomic_path(path) as tmp:
            soundfile.write(str(tmp), frames, int(round(fs)), subtype=subtype, format="WAV")
            if side_text is not None:
                write_text_atomic(side, side_text)
    except (soundfile.LibsndfileError, RuntimeError) as err:
        raise SigtuneError(f"could not be written ({err})") from None
    return path


def _sidecar_text(recording: Recording, scales: list[float]) -> str:
    entries = []
    for ch, scale in zip(recording, scales):
        header = channel_header(ch)
        del header["fs_hz"]  # the WAV header holds the rate
        entries.append({**header, "scale": scale})
    document = {"layout": SIDECAR_LAYOUT, "layout_version": 1, **recording_header(recording),
                "channels": entries}
    return to_json(document, "sidecar") + "\n"
