"""Malformed (and a few valid-but-odd) recording files for every reader, with their expected outcome.

Each :class:`Case` writes its file(s) into a folder and says what reading it
must give: ``error`` is a regular expression the :class:`dsp.SigtuneError`
message must match, or ``None`` for a correct read whose values ``check``
asserts. :func:`run_case` reads the file and enforces the contract: the
project's error naming the file on one line, or a correct read; any other
exception propagates (and fails the test). Cases marked ``max_peak_mb`` are
read under :mod:`tracemalloc` and must not allocate more than that, so a
header declaring 10^12 samples cannot make the reader reserve them.

Examples
--------
>>> sorted({case.reader for case in CASES})
['csv', 'h5', 'npz', 'tsv', 'wav']
"""

from __future__ import annotations

import io
import json
import os
import re
import struct
import tracemalloc
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import h5py
import numpy as np
import soundfile

import dsp
from dsp import Channel, Recording, SigtuneError

READERS = ("csv", "tsv", "wav", "h5", "npz")


@dataclass(frozen=True)
class Case:
    """One corpus file: how to build it and what reading it must give."""

    reader: str
    name: str
    build: Callable[[Path], Path]
    error: str | None = None  # regex of the SigtuneError message; None: a correct read
    check: Callable[[Recording], None] | None = None
    options: dict = field(default_factory=dict)
    max_peak_mb: float | None = None
    xfail: str | None = None  # a defect outside dsp/io, reported to the lead

    @property
    def id(self) -> str:
        return f"{self.reader}/{self.name}"


def run_case(case: Case, folder: Path) -> str:
    """Build and read ``case`` in ``folder``; return ``"error"`` or ``"read"``, or raise AssertionError."""
    folder.mkdir(parents=True, exist_ok=True)
    path = case.build(folder)
    if case.max_peak_mb is not None:
        tracemalloc.start()
    try:
        recording = dsp.read(path, **case.options)
    except SigtuneError as err:
        message = str(err)
        assert case.error is not None, f"{case.id}: expected a correct read, got {message}"
        assert re.search(case.error, message), f"{case.id}: {message!r} does not match {case.error!r}"
        assert str(path) in message, f"{case.id}: the message does not name the file: {message}"
        assert "\n" not in message, f"{case.id}: the message is not one line"
        return "error"
    finally:
        if case.max_peak_mb is not None:
            peak = tracemalloc.get_traced_memory()[1] / 2**20
            tracemalloc.stop()
            assert peak < case.max_peak_mb, f"{case.id}: reading allocated {peak:.1f} MiB"
    assert case.error is None, f"{case.id}: expected an error matching {case.error!r}, read {recording}"
    case.check(recording)
    return "read"


# ------------------------------------------------------------------ helpers

def _valid_recording(n: int = 64) -> Recording:
    t = np.arange(n) / 64.0
    return Recording([Channel(np.sin(2 * np.pi * 4 * t), 64.0, name="A1", unit="g"),
                      Channel(0.5 * np.cos(2 * np.pi * 2 * t), 64.0, name="A2", unit="m/s^2")],
                     metadata={"site": "Harlow Weir"})


def _written(fmt: str, **options) -> bytes:
    """The bytes of the valid recording written by ``dsp.write`` (no sidecar for WAV)."""
    import tempfile
    with tempfile.TemporaryDirectory() as tmp:
        if fmt == "wav":
            options.setdefault("sidecar", False)
        return dsp.write(_valid_recording(), Path(tmp) / f"valid.{fmt}", **options).read_bytes()


def _file(name: str, content: bytes | str | Callable[[], bytes]) -> Callable[[Path], Path]:
    def build(folder: Path) -> Path:
        data = content() if callable(content) else content
        path = folder / name
        path.write_bytes(data.encode("utf-8") if isinstance(data, str) else data)
        return path
    return build


def _same_as_valid(recording: Recording) -> None:
    expected = _valid_recording()
    assert recording.names == expected.names
    for got, want in zip(recording, expected):
        np.testing.assert_array_equal(got.data, want.data)  # exact: every writer is lossless by default
        assert got.fs == want.fs and got.unit == want.unit


def _values(*columns, fs=None, names=None) -> Callable[[Recording], None]:
    """Check a read against the values written into the file (analytic: we wrote them)."""
    def check(recording: Recording) -> None:
        assert len(recording) == len(columns)
        for ch, want in zip(recording, columns):
            np.testing.assert_array_equal(ch.data, np.asarray(want, dtype=float))
        if fs is not None:
            assert all(ch.fs == fs for ch in recording)
        if names is not None:
            assert recording.names == list(names)
    return check


PNG = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x10\x00\x00\x00\x10\x08\x02\x00\x00\x00" + bytes(64)
TEXT = "time [s],A1 [g]\n0.0,1.0\n0.5,2.0\n1.0,3.0\n"


def _garbage(n: int = 4096, seed: int = 8) -> bytes:
    return np.random.default_rng(seed).bytes(n)


def _zip(members: dict[str, bytes], compression=zipfile.ZIP_STORED) -> bytes:
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=compression) as z:
        for name, data in members.items():
            z.writestr(name, data)
    return buf.getvalue()


# ------------------------------------------------------------------ CSV / TSV

def _csv_cut_mid_row() -> bytes:
    data = _written("csv")
    last_comma = data.rstrip(b"\n").rfind(b",")
    return data[:last_comma]  # the last row loses its last field


def _csv_cut_at_row() -> bytes:
    lines = _written("csv").split(b"\n")
    return b"\n".join(lines[:-11]) + b"\n"  # header + 54 complete rows


def _first_rows(n: int) -> Callable[[Recording], None]:
    def check(recording: Recording) -> None:
        full = _valid_recording()
        for got, want in zip(recording, full):
            np.testing.assert_array_equal(got.data, want.data[:n])
    return check


def _fifo(folder: Path) -> Path:
    path = folder / "pipe.csv"
    os.mkfifo(path)
    return path


def _check_nonfinite(recording: Recording) -> None:
    x = recording[0].data
    assert np.isnan(x[1]) and np.isposinf(x[2]) and np.isneginf(x[3]) and x[0] == 1.0


def _check_wide(recording: Recording) -> None:
    assert len(recording) == 5000 and recording[4999].name == "c4999"
    np.testing.assert_array_equal(recording[4999].data, [1.0, 2.0])


def _wide(columns: int) -> str:
    """A header of ``columns`` names and two rows of numbers."""
    return "\n".join([",".join(f"c{i}" for i in range(columns)), ",".join(["1"] * columns),
                      ",".join(["2"] * columns)]) + "\n"


def _check_wider(recording: Recording) -> None:
    assert len(recording) == 50000


def _text_cases(reader: str) -> list[Case]:
    sep = "," if reader == "csv" else "\t"
    ext = reader

    def table(*rows: str) -> str:
        return "\n".join(r.replace(",", sep) for r in rows) + "\n"

    cases = [
        Case(reader, "valid_written_by_dsp", _file(f"ok.{ext}", lambda: _written(ext, delimiter=sep)),
             check=_same_as_valid),
        Case(reader, "empty", _file(f"empty.{ext}", b""), r"the file is empty \(0 bytes\)"),
        Case(reader, "truncated_mid_row", _file(f"cut.{ext}", _csv_cut_mid_row), r"has 2 field\(s\) but the "
             r"header has 3 column") if reader == "csv" else None,
        Case(reader, "truncated_at_a_row_end", _file(f"cut_row.{ext}", _csv_cut_at_row),
             check=_first_rows(54))
        if reader == "csv" else None,
        Case(reader, "truncated_in_the_preamble", _file(f"cut_head.{ext}", lambda: _written(ext)[:30]),
             r"holds no data rows"),
        Case(reader, "png_renamed", _file(f"image.{ext}", PNG), r"NUL bytes: this looks like binary data"),
        Case(reader, "binary_garbage", _file(f"garbage.{ext}", _garbage()), r"NUL bytes|carriage return"),
        Case(reader, "nul_bytes_only", _file(f"zeros.{ext}", bytes(4096)),
             r"NUL bytes: this looks like binary"),
        Case(reader, "utf16_with_bom", _file(f"u16.{ext}", table("time,A1", "0,1", "1,2").encode("utf-16")),
             r"line 1: holds NUL bytes: this looks like UTF-16 text"),
        Case(reader, "utf16be_without_bom", _file(f"u16be.{ext}",
                                                  table("time,A1", "0,1", "1,2").encode("utf-16-be")),
             r"UTF-16 text"),
        Case(reader, "utf8_bom_and_header",
             _file(f"bom.{ext}", "\ufeff" + table("time,A1 [g]", "0,1", "1,2")),
             check=_values([1, 2], fs=1.0, names=["A1"])),
        Case(reader, "utf8_bom_without_header", _file(f"bom_bare.{ext}", "\ufeff" + table("1,5", "2,6")),
             check=_values([1, 2], [5, 6], fs=10.0), options={"fs": 10.0}),
        Case(reader, "only_header", _file(f"header.{ext}", table("time,A1,A2")),
             r"header row but no data rows"),
        Case(reader, "only_comments", _file(f"comments.{ext}", "# a\n# b\n\n"), r"holds no data rows"),
        Case(reader, "zero_samples_blank_lines", _file(f"blank.{ext}", "\n \n\t\n"), r"holds no data rows"),
        Case(reader, "one_sample", _file(f"one.{ext}", table("time,A1", "0,1")), r"holds 1 data row\(s\)"),
        Case(reader, "two_samples", _file(f"two.{ext}", table("time,A1", "0,1", "0.5,2")),
             check=_values([1, 2], fs=2.0)),
        Case(reader, "text_in_numbers",
             _file(f"text.{ext}", table("time,A1,A2", "0,1,2", "1,1,oops", "2,1,2")),
             r"line 3, column 'A2': 'oops' is not a number"),
        Case(reader, "nan_inf_refused",
             _file(f"nan.{ext}", table("time,A1", "0,1", "1,nan", "2,inf", "3,-inf")),
             r"3 non-finite sample\(s\) \(NaN/Inf\) of 4 in 1 run\(s\): lines 3-5"),
        Case(reader, "nan_inf_allowed",
             _file(f"nan_ok.{ext}", table("time,A1", "0,1", "1,nan", "2,inf", "3,-inf")),
             check=_check_nonfinite, options={"allow_nonfinite": True}),
        Case(reader, "backwards_timestamps", _file(f"back.{ext}", table("time,A1", "0,1", "1,2", "0.5,3")),
             r"line 4: the time column goes backwards or repeats"),
        Case(reader, "duplicated_timestamps",
             _file(f"dup.{ext}", table("time,A1", "0,1", "1,2", "1,3", "2,4")),
             r"line 4: the time column goes backwards or repeats: t=1.0 s after t=1.0 s"),
        Case(reader, "unequal_channels", _file(f"short.{ext}", table("time,A1,A2", "0,1,2", "1,1,2", "2,1")),
             r"line 4: has 2 field\(s\) but the header has 3"),
        Case(reader, "rate_zero", _file(f"rate0.{ext}", "# sample_rate_hz: 0\n" + table("A1", "1", "2")),
             r"comment 'sample_rate_hz': sample rate must be a finite number > 0 Hz; got fs=0"),
        Case(reader, "rate_nan", _file(f"ratenan.{ext}", "# sample_rate_hz: nan\n" + table("A1", "1", "2")),
             r"got fs=nan"),
        Case(reader, "rate_negative_option", _file(f"rateneg.{ext}", table("A1", "1", "2")),
             r"fs: sample rate must be a finite number > 0 Hz; got fs=-5", options={"fs": -5.0}),
        Case(reader, "rate_1e30",
             _file(f"rate_huge.{ext}", "# sample_rate_hz: 1e30\n" + table("A1", "1", "2")),
             check=_values([1, 2], fs=1e30)),
        Case(reader, "rate_infinite_from_subnormal_times",
             _file(f"tiny.{ext}", table("time,A1", "0,1", "1e-320,2", "2e-320,3")),
             r"rate inferred from the time column .*got fs=inf"),
        Case(reader, "cr_only_line_endings",
             _file(f"mac.{ext}", table("time,A1", "0,1", "1,2").replace("\n", "\r")),
             r"line 1: holds a carriage return"),
        Case(reader, "crlf_line_endings",
             _file(f"dos.{ext}", table("time,A1", "0,1", "1,2").replace("\n", "\r\n")),
             check=_values([1, 2], fs=1.0)),
        Case(reader, "very_long_header_line", _file(f"long.{ext}", "A" * (2 << 20) + "\n1\n2\n"),
             r"line 1: is longer than 1048576 bytes"),
        Case(reader, "overflowing_number", _file(f"big.{ext}", table("time,A1", "0,1e999", "1,2")),
             r"1 non-finite sample\(s\)"),
        Case(reader, "fifo_instead_of_a_file", _fifo, r"is not a regular file \(a pipe"),
    ]
    if reader == "csv":
        cases += [
            Case(reader, "mixed_delimiters", _file("mixed.csv", "time,A1,A2\n0,1,2\n1,2;3\n2,3,4\n3,3,4\n"),
                 r"line 3: has 2 field\(s\) but the header has 3"),
            Case(reader, "decimal_commas", _file("comma.csv", "time;A1\n0;1,5\n1;2,5\n"),
                 r"'1,5' is not a number.*decimal commas are not supported"),
            Case(reader, "complex_values", _file("complex.csv", TEXT.replace("2.0", "1+2j")),
                 r"line 3, column 'A1': '1\+2j' is not a number"),
            Case(reader, "bool_values", _file("bool.csv", "time,A1\n0,True\n1,False\n"),
                 r"'True' is not a number"),
            Case(reader, "datetime_time_column", _file("dates.csv", "time,A1\n2026-03-01T08:00:00,1\n"
                                                                     "2026-03-01T08:00:01,2\n"),
                 r"column 'time': '2026-03-01T08:00:00' is not a number"),
            Case(reader, "nan_in_time_column", _file("tnan.csv", "time,A1\n0,1\nnan,2\n2,3\n"),
                 r"line 3: time value nan is not finite"),
            Case(reader, "gap_in_timestamps", _file("gap.csv", "time,A1\n0,1\n1,2\n2,3\n4,4\n5,5\n"),
                 r"line 5: the time column is not uniformly spaced"),
            Case(reader, "rate_text", _file("ratetxt.csv", "# sample_rate_hz: fast\nA1\n1\n2\n"),
                 r"sample rate must be a positive number in Hz; got 'fast'"),
            Case(reader, "duplicate_column_names", _file("dupnames.csv", "time,A1,A1\n0,1,2\n1,2,3\n"),
                 r"channel names must be unique; repeated: A1"),
            Case(reader, "quoted_fields", _file("quoted.csv", 'time,A1\n"0","1"\n"1","2"\n'),
                 check=_values([1, 2], fs=1.0)),
            Case(reader, "wide_5000_columns", _file("wide.csv", _wide(5000)), check=_check_wide,
                 options={"fs": 1.0}),
            Case(reader, "wide_50000_columns", _file("wider.csv", _wide(50000)), check=_check_wider,
                 options={"fs": 1.0}),  # regression: the duplicate-name check was O(n^2) (40 s here)
            Case(reader, "wav_renamed", _file("sound.csv", lambda: _written("wav")), r"NUL bytes"),
        ]
    else:
        cases += [
            Case(reader, "commas_in_a_tsv", _file("commas.tsv", TEXT),
                 r"line 2, column 'time \[s\],A1': '0.0,1.0' is not a number"),
        ]
    return [c for c in cases if c is not None]


# ------------------------------------------------------------------ WAV

def _riff(fmt_tag: int = 1, channels: int = 1, rate: int = 8000, bits: int = 16, data: bytes = b"\0\0" * 8,
          declared: int | None = None) -> bytes:
    """A RIFF/WAVE file built field by field, so that each field can hold a wrong value."""
    block = (channels * bits // 8) & 0xFFFF
    fmt = struct.pack("<HHIIHH", fmt_tag, channels & 0xFFFF, rate & 0xFFFFFFFF, (rate * block) & 0xFFFFFFFF,
                      block, bits)
    size = len(data) if declared is None else declared
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", size) + data
    return b"RIFF" + struct.pack("<I", len(body)) + body


CODES = np.array([0, 16384, -16384, 32767, -32768, 1, -1, 8192], dtype="<i2")


def _check_codes(recording: Recording) -> None:
    # libsndfile convention (docs/formats.md): int16 code / 2^15; analytic
    np.testing.assert_array_equal(recording[0].data, CODES / 32768.0)
    assert recording[0].fs == 8000.0 and recording[0].unit == "FS"


def _other_audio(fmt: str, subtype: str = "PCM_16") -> bytes:
    buf = io.BytesIO()
    soundfile.write(buf, np.sin(np.arange(1000) / 10.0), 1000, format=fmt, subtype=subtype)
    return buf.getvalue()


def _flac_declaring_2_36_frames() -> bytes:
    data = bytearray(_other_audio("FLAC"))
    info = 8  # 'fLaC' + metadata block header; STREAMINFO's 36-bit total-samples field ends at +18
    data[info + 13] |= 0x0F
    data[info + 14:info + 18] = b"\xff\xff\xff\xff"
    return bytes(data)


def _rf64_declaring_huge_sizes() -> bytes:
    data = bytearray(_other_audio("RF64"))
    ds64 = data.find(b"ds64")
    data[ds64 + 16:ds64 + 24] = struct.pack("<Q", 10**13)  # data size
    data[ds64 + 24:ds64 + 32] = struct.pack("<Q", 5 * 10**12)  # sample count
    return bytes(data)


def _check_rf64(recording: Recording) -> None:
    # Reference: soundfile (libsndfile) reading the unpatched file; libsndfile bounds the sizes by the file's.
    reference, _ = soundfile.read(io.BytesIO(_other_audio("RF64")), dtype="float32")
    np.testing.assert_array_equal(recording[0].data, reference)


def _wav_with_sidecar(mutate: Callable[[dict], object] | str) -> Callable[[Path], Path]:
    def build(folder: Path) -> Path:
        path = dsp.write(_valid_recording(), folder / "run.wav")
        side = dsp.io.wav.sidecar_path(path)
        if isinstance(mutate, str):
            side.write_text(mutate)
        else:
            document = json.loads(side.read_text())
            mutate(document)
            side.write_text(json.dumps(document))
        return path
    return build


def _set(path: str, value):
    def mutate(document: dict) -> None:
        keys = path.split(".")
        target = document
        for key in keys[:-1]:
            target = target[int(key)] if isinstance(target, list) else target[key]
        target[int(keys[-1]) if isinstance(target, list) else keys[-1]] = value
    return mutate


def _check_float_nan(recording: Recording) -> None:
    x = recording[0].data
    assert x.dtype == np.float32 and x[0] == 0.5 and np.isnan(x[1]) and np.isposinf(x[2]) and x[3] == -0.25


DEEP_JSON = "[" * 100_000 + "]" * 100_000


def _wav_cases() -> list[Case]:
    w = "wav"
    return [
        Case(w, "valid_written_by_dsp_with_sidecar", lambda d: dsp.write(_valid_recording(), d / "ok.wav"),
             check=_same_as_valid),
        Case(w, "pcm16_built_by_hand", _file("pcm16.wav", _riff(data=CODES.tobytes())), check=_check_codes),
        Case(w, "pcm_u8", _file("u8.wav", _riff(bits=8, data=bytes([0, 128, 255, 64]))),
             # unsigned 8-bit: (code - 128) / 128 (libsndfile convention); analytic
             check=_values([-1.0, 0.0, 127 / 128, -0.5])),
        Case(w, "empty", _file("empty.wav", b""), r"the file is empty"),
        Case(w, "truncated_in_data", _file("cut.wav", _riff(data=b"\1\0" * 100)[:100]),
             r"data chunk: is truncated: its header declares 200 bytes of samples but only 56 are present"),
        Case(w, "truncated_to_the_header", _file("head.wav", _riff()[:44]), r"is truncated"),
        Case(w, "truncated_inside_the_header", _file("head20.wav", _riff()[:20]),
             r"is not a readable WAV file"),
        Case(w, "riff_magic_only", _file("riff.wav", b"RIFF"), r"is not a readable WAV file"),
        Case(w, "png_renamed", _file("image.wav", PNG),
             r"is not a readable WAV file .*Format not recognised"),
        Case(w, "text_renamed", _file("text.wav", TEXT), r"is not a readable WAV file"),
        Case(w, "zip_renamed", _file("archive.wav", lambda: _written("npz")), r"is not a readable WAV file"),
        Case(w, "riff_avi_not_wave",
             _file("movie.wav", b"RIFF" + struct.pack("<I", 100) + b"AVI " + bytes(100)),
             r"is not a readable WAV file"),
        Case(w, "binary_garbage", _file("garbage.wav", _garbage()), r"is not a readable WAV file"),
        Case(w, "flac_renamed", _file("flac.wav", lambda: _other_audio("FLAC")), r"holds FLAC .* not WAV"),
        Case(w, "aiff_renamed", _file("aiff.wav", lambda: _other_audio("AIFF")), r"holds AIFF .* not WAV"),
        Case(w, "flac_declaring_2^36_frames", _file("flac_huge.wav", _flac_declaring_2_36_frames),
             r"not WAV", max_peak_mb=16),
        Case(w, "header_declaring_4GB_of_data", _file("huge.wav", _riff(declared=0xFFFFFFF0)),
             r"declares 4294967280 bytes of samples but only 16 are present", max_peak_mb=16),
        Case(w, "streamed_size_0xFFFFFFFF",
             _file("stream.wav", _riff(data=CODES.tobytes(), declared=0xFFFFFFFF)),
             check=_check_codes),
        Case(w, "rf64_declaring_10^13_bytes", _file("rf64.wav", _rf64_declaring_huge_sizes),
             check=_check_rf64,
             max_peak_mb=16),
        Case(w, "ima_adpcm_compressed", _file("adpcm.wav", lambda: _other_audio("WAV", "IMA_ADPCM")),
             r"holds .* samples \(IMA_ADPCM\)"),
        Case(w, "unknown_format_tag", _file("tag.wav", _riff(fmt_tag=0x1234)), r"is not a readable WAV file"),
        Case(w, "rate_zero", _file("rate0.wav", _riff(rate=0)), r"is not a readable WAV file"),
        Case(w, "rate_2^32-1", _file("ratemax.wav", _riff(rate=0xFFFFFFFF)), r"is not a readable WAV file"),
        Case(w, "zero_channels", _file("ch0.wav", _riff(channels=0)), r"Channel count is zero"),
        Case(w, "65535_channels", _file("ch65535.wav", _riff(channels=65535, data=bytes(4 * 65535))),
             r"is not a readable WAV file"),
        Case(w, "zero_frames", _file("frames0.wav", _riff(data=b"")), r"holds 0 frame\(s\)"),
        Case(w, "one_frame", _file("frames1.wav", _riff(data=b"\1\0")), r"holds 1 frame\(s\)"),
        Case(w, "float_nan_inf_refused", _file("nan.wav", _riff(3, bits=32, data=np.array(
            [0.5, np.nan, np.inf, -0.25], "<f4").tobytes())), r"channel 'ch1': 2 non-finite sample\(s\)"),
        Case(w, "float_nan_inf_allowed", _file("nan_ok.wav", _riff(3, bits=32, data=np.array(
            [0.5, np.nan, np.inf, -0.25], "<f4").tobytes())), check=_check_float_nan,
             options={"allow_nonfinite": True}),
        Case(w, "sidecar_not_json", _wav_with_sidecar("{not json"), r"run.wav.json: is not valid JSON"),
        Case(w, "sidecar_nested_100000_deep", _wav_with_sidecar(DEEP_JSON), r"nested too deeply"),
        Case(w, "sidecar_binary_garbage", _wav_with_sidecar(_garbage().decode("latin-1")),
             r"is not valid JSON"),
        Case(w, "sidecar_of_another_layout", _wav_with_sidecar(_set("layout", "other")),
             r"is not a sigtune WAV sidecar"),
        Case(w, "sidecar_metadata_a_list", _wav_with_sidecar(_set("metadata", [1, 2])),
             r"run.wav.json metadata: must be a JSON object"),
        Case(w, "sidecar_channel_metadata_text", _wav_with_sidecar(_set("channels.0.metadata", "0")),
             r"channel 0 \('A1'\) calibration.metadata: must be a JSON object"),
        Case(w, "sidecar_sensitivity_null", _wav_with_sidecar(_set("channels.0", {
            "sensitivity": None, "full_scale_volts": 5.0})), r"calibration sensitivity: must be a number > 0; "
             r"got None"),
        Case(w, "sidecar_sensitivity_unit_a_number", _wav_with_sidecar(_set("channels.0", {
            "sensitivity": 100, "sensitivity_unit": 7, "full_scale_volts": 5.0})),
             r"calibration sensitivity_unit: must be text such as 'mV/g'"),
        Case(w, "sidecar_wrong_channel_count", _wav_with_sidecar(lambda d: d["channels"].append({})),
             r"lists 3 channel\(s\) but the WAV has 2"),
        Case(w, "sidecar_history_of_numbers", _wav_with_sidecar(_set("channels.0.history", [1, 2])),
             r"'history' must list processing steps as JSON objects"),
        Case(w, "sidecar_start_time_nan", _wav_with_sidecar(_set("channels.0.start_time_s", float("nan"))),
             r"start_time_s: must be finite; got nan"),
        Case(w, "sidecar_scale_text", _wav_with_sidecar(_set("channels.0.scale", "1+2j")),
             r"scale: must be a number; got '1\+2j'"),
        Case(w, "sidecar_unknown_unit", _wav_with_sidecar(_set("channels.0.unit", "furlong")),
             r"unknown unit 'furlong'"),
    ]


# ------------------------------------------------------------------ HDF5

def _h5(edit: Callable[[h5py.File], None], name: str = "run.h5", start: str = "valid",
        libver=None) -> Callable[[Path], Path]:
    """Write the valid recording (or an empty file), then let ``edit`` damage it with h5py."""
    def build(folder: Path) -> Path:
        path = folder / name
        if start == "valid":
            dsp.write(_valid_recording(), path)
            mode = "a"
        else:
            mode = "w"
        with h5py.File(path, mode, libver=libver) as f:  # "latest": dense storage, attributes > 64 kB
            edit(f)
        return path
    return build


def _layout(f: h5py.File) -> None:
    f.attrs["sigtune_layout"] = "sigtune-recording"
    f.attrs["sigtune_layout_version"] = 1


def _channel(f: h5py.File, key: str = "000000", data=None, attrs=None, **create) -> h5py.Dataset:
    if "channels" not in f:
        f.create_group("channels")
    ds = f["channels"].create_dataset(key, data=data, **create)
    for k, v in {"name": "X1", "fs_hz": 8.0, "unit": "g", **(attrs or {})}.items():
        ds.attrs[k] = v
    return ds


def _replace_channel(data=None, attrs=None, **create):
    def edit(f: h5py.File) -> None:
        del f["channels/000001"]
        del f["channels/000000"]
        _channel(f, data=data, attrs=attrs, **create)
    return edit


def _set_attr(obj: str, key: str, value):
    def edit(f: h5py.File) -> None:
        f[obj].attrs[key] = value
    return edit


def _deep_groups(f: h5py.File, levels: int = 200) -> None:
    group = f
    for i in range(levels):
        group = group.create_group(f"level{i:03d}")


def _deep_inside_channels(f: h5py.File) -> None:
    _layout(f)
    _deep_groups(f.create_group("channels"))
    f["channels"].move("level000", "000000")


def _huge_chunked(f: h5py.File) -> None:
    _layout(f)
    _channel(f, shape=(10**12,), dtype="f8", chunks=(1 << 17,))


def _huge_virtual(f: h5py.File) -> None:
    _layout(f)
    f.create_group("channels")
    layout = h5py.VirtualLayout(shape=(10**12,), dtype="f8")
    layout[:] = h5py.VirtualSource("missing_source.h5", "data", shape=(10**12,))
    ds = f["channels"].create_virtual_dataset("000000", layout, fillvalue=0.0)
    for k, v in {"name": "X1", "fs_hz": 8.0, "unit": "g"}.items():
        ds.attrs[k] = v


def _external_storage(f: h5py.File) -> None:
    _layout(f)
    _channel(f, shape=(64,), dtype="f8", external=[("/etc/hostname", 0, 512)])


def _unallocated_contiguous(f: h5py.File) -> None:
    _layout(f)
    _channel(f, shape=(10**6,), dtype="f8")  # contiguous, never written


def _partly_written(f: h5py.File) -> None:
    _layout(f)
    ds = _channel(f, shape=(4096,), dtype="f8", chunks=(1024,))
    ds[:2048] = 1.0  # two of four chunks: the rest would read as zeros


def _timestamps_claiming_10_12(f: h5py.File) -> None:
    f.create_dataset("timestamps", shape=(10**12,), dtype="f8", chunks=(1 << 17,))


def _timestamps_unwritten(f: h5py.File) -> None:
    f.create_dataset("timestamps", shape=(64,), dtype="f8", chunks=(64,))


def _timestamps_elsewhere(f: h5py.File) -> None:
    layout = h5py.VirtualLayout(shape=(64,), dtype="f8")
    layout[:] = h5py.VirtualSource("/etc/other.h5", "data", shape=(64,))
    f.create_virtual_dataset("timestamps", layout)


def _voltage_channel(sensitivity):
    def edit(f: h5py.File) -> None:
        attrs = f["channels/000000"].attrs
        attrs["unit"], attrs["quantity"], attrs["sensitivity"], attrs["sensitivity_unit"] = (
            "V", "voltage", sensitivity, "mV/g")
    return edit


def _check_calibrated(recording: Recording) -> None:
    # 100 mV/g: volts / 0.1 V per g gives g (analytic)
    np.testing.assert_allclose(recording[0].data, _valid_recording()[0].data / 0.1, rtol=1e-12)
    assert recording[0].unit == "g"


def _heap_loop(folder: Path) -> Path:
    """A size-0 free-space object in the global heap: libhdf5 itself would loop on it forever."""
    path = dsp.write(_valid_recording(), folder / "heap.h5")
    data = bytearray(path.read_bytes())
    heap = data.find(b"GCOL\x01")
    second = heap + 16 + 16 + (int.from_bytes(data[heap + 24:heap + 32], "little") + 7) // 8 * 8
    data[second:second + 2] = b"\0\0"
    data[second + 8:second + 16] = bytes(8)
    path.write_bytes(bytes(data))
    return path


def _valid_without_timestamps(recording: Recording) -> None:
    _same_as_valid(recording)
    assert recording.timestamps is None  # checked by shape, never read


def _check_lengths(recording: Recording) -> None:
    assert [ch.n_samples for ch in recording] == [64, 10] and [ch.fs for ch in recording] == [64.0, 5.0]
    np.testing.assert_array_equal(recording[1].data, np.arange(10.0))


def _check_int16(recording: Recording) -> None:
    assert recording[0].data.dtype == np.float64
    np.testing.assert_array_equal(recording[0].data, CODES.astype(float))


def _check_rate(fs: float) -> Callable[[Recording], None]:
    def check(recording: Recording) -> None:
        assert recording[0].fs == fs
    return check


def _h5_cases() -> list[Case]:
    h = "h5"
    return [
        Case(h, "valid_written_by_dsp", lambda d: dsp.write(_valid_recording(), d / "ok.h5"),
             check=_same_as_valid),
        Case(h, "unequal_lengths_and_rates", lambda d: dsp.write(Recording([
            _valid_recording()[0], Channel(np.arange(10.0), 5.0, name="B", unit="V")]), d / "mixed.h5"),
             check=_check_lengths),
        Case(h, "int16_samples", _h5(_replace_channel(data=CODES)), check=_check_int16),
        Case(h, "empty", _file("empty.h5", b""), r"the file is empty"),
        Case(h, "truncated_half", _file("half.h5", lambda: _written("h5")[:len(_written("h5")) // 2]),
             r"not a readable HDF5 file|damaged"),
        Case(h, "truncated_to_the_superblock", _file("sb.h5", lambda: _written("h5")[:96]),
             r"not a readable HDF5 file"),
        Case(h, "png_renamed", _file("image.h5", PNG), r"is not a readable HDF5 file"),
        Case(h, "text_renamed", _file("text.h5", TEXT), r"is not a readable HDF5 file"),
        Case(h, "zip_renamed", _file("archive.h5", lambda: _written("npz")), r"is not a readable HDF5 file"),
        Case(h, "binary_garbage", _file("garbage.h5", _garbage()), r"is not a readable HDF5 file"),
        Case(h, "another_layout", _h5(lambda f: f.create_dataset("data", data=np.arange(5.0)), start="new"),
             r"is an HDF5 file of another layout.*holds /data"),
        Case(h, "deep_groups_200_levels", _h5(_deep_groups, start="new"),
             r"another layout.*holds /level000, /level000/level001, .*/level005\. sigtune reads its own"),
        Case(h, "deep_groups_200_levels_as_a_channel", _h5(_deep_inside_channels, start="new"),
             r"/channels/000000: is a group"),
        Case(h, "layout_version_2", _h5(_set_attr("/", "sigtune_layout_version", 2)),
             r"layout version 2 is not supported"),
        Case(h, "no_channels", _h5(_layout, start="new"), r"has no datasets under /channels"),
        Case(h, "chunked_dataset_claiming_10^12_samples", _h5(_huge_chunked, start="new"),
             r"declares 1000000000000 samples in 7629395 chunks but only 0 chunk\(s\) are stored",
             max_peak_mb=16),
        Case(h, "virtual_dataset_claiming_10^12_samples", _h5(_huge_virtual, start="new"),
             r"virtual dataset or external storage", max_peak_mb=16),
        Case(h, "external_raw_storage", _h5(_external_storage, start="new"),
             r"keeps its samples in other files"),
        Case(h, "contiguous_never_written", _h5(_unallocated_contiguous, start="new"),
             r"declares 1000000 samples \(8000000 bytes\) but stores 0 bytes", max_peak_mb=16),
        Case(h, "half_the_chunks_written", _h5(_partly_written, start="new"),
             r"declares 4096 samples in 4 chunks but only 2 chunk\(s\) are stored"),
        Case(h, "timestamps_claiming_10^12", _h5(_timestamps_claiming_10_12), check=_valid_without_timestamps,
             max_peak_mb=16),
        Case(h, "timestamps_never_written", _h5(_timestamps_unwritten), r"/timestamps: declares 64 samples"),
        Case(h, "timestamps_in_another_file", _h5(_timestamps_elsewhere),
             r"/timestamps: keeps its samples in other files"),
        Case(h, "timestamps_of_strings", _h5(lambda f: f.create_dataset("timestamps", data=[b"a"] * 64)),
             r"/timestamps: must be a 1-D array of times in s; got shape \(64,\), dtype object"),
        Case(h, "global_heap_that_would_loop_libhdf5", _heap_loop, r"global heap .* would loop on forever"),
        Case(h, "link_name_not_utf8",
             _h5(lambda f: f["channels"].create_dataset(b"\xff\xfe", data=np.arange(8.0))),
             r"is damaged or incomplete: the HDF5 library could not read it \('utf-8' codec can't decode"),
        Case(h, "dangling_soft_link",
             _h5(lambda f: f["channels"].__setitem__("000002", h5py.SoftLink("/nowhere"))),
             r"/channels/000002: is a link \(a soft link to /nowhere\)"),
        Case(h, "external_link", _h5(lambda f: f["channels"].__setitem__(
            "000002", h5py.ExternalLink("/etc/other.h5",
                                        "/data"))), r"an external link to /etc/other.h5:/data"),
        Case(h, "attribute_of_100000_rates", _h5(_replace_channel(data=np.arange(8.0), attrs={
            "fs_hz": np.zeros(10**5)}), libver="latest"),
             r"fs: sample rate must be a positive number in Hz"),
        Case(h, "metadata_attribute_nested_100000_deep", _h5(_set_attr("/", "metadata", DEEP_JSON)),
             r"/ attribute metadata: is JSON nested too deeply"),
        Case(h, "metadata_attribute_not_json", _h5(_set_attr("channels/000000", "metadata", "{oops")),
             r"attribute metadata: is not valid JSON"),
        Case(h, "root_metadata_a_list", _h5(_set_attr("/", "metadata", "[1, 2]")),
             r"/ attribute metadata: must be a JSON object"),
        Case(h, "history_of_numbers", _h5(_set_attr("channels/000000", "history", "[1, 2]")),
             r"'history' must list processing steps"),
        Case(h, "missing_required_attributes", _h5(lambda f: f["channels/000000"].attrs.__delitem__("unit")),
             r"lacks attribute\(s\) unit"),
        Case(h, "sensitivity_text_calibrated", _h5(_voltage_channel("abc")),
             r"/channels/000000 sensitivity: must be a number > 0; got 'abc'", options={"calibrate": True}),
        Case(h, "sensitivity_so_small_that_calibrating_overflows", _h5(_voltage_channel(1e-320)),
             r"sensitivity: 1e-320 is too small to be a sensor sensitivity", options={"calibrate": True}),
        Case(h, "sensitivity_calibrated", _h5(_voltage_channel(100.0)), check=_check_calibrated,
             options={"calibrate": True}),
        Case(h, "rate_zero", _h5(_set_attr("channels/000000", "fs_hz", 0.0)), r"got fs=0"),
        Case(h, "rate_negative", _h5(_set_attr("channels/000000", "fs_hz", -64.0)), r"got fs=-64"),
        Case(h, "rate_nan", _h5(_set_attr("channels/000000", "fs_hz", np.nan)), r"got fs=nan"),
        Case(h, "rate_text", _h5(_set_attr("channels/000000", "fs_hz", "fast")), r"got 'fast'"),
        Case(h, "rate_1e30", _h5(_set_attr("channels/000000", "fs_hz", 1e30)), check=_check_rate(1e30)),
        Case(h, "start_time_nan", _h5(_set_attr("channels/000000", "start_time_s", np.nan)),
             r"start_time_s: must be finite"),
        Case(h, "complex_samples", _h5(_replace_channel(data=np.ones(8, complex))),
             r"must be a 1-D numeric dataset; got shape \(8,\), dtype complex128"),
        Case(h, "string_samples", _h5(_replace_channel(data=np.array([b"1.0"] * 8))), r"dtype \|S3"),
        Case(h, "bool_samples", _h5(_replace_channel(data=np.ones(8, bool))), r"dtype bool"),
        Case(h, "compound_samples", _h5(_replace_channel(data=np.zeros(8, [("a", "f8"), ("b", "i4")]))),
             r"must be a 1-D numeric dataset"),
        Case(h, "two_dimensional", _h5(_replace_channel(data=np.zeros((8, 2)))), r"got shape \(8, 2\)"),
        Case(h, "scalar_dataset", _h5(_replace_channel(data=1.0)), r"got shape \(\)"),
        Case(h, "zero_samples", _h5(_replace_channel(shape=(0,), dtype="f8")),
             r"needs at least 2 samples; got 0"),
        Case(h, "one_sample", _h5(_replace_channel(data=[1.0])), r"needs at least 2 samples; got 1"),
        Case(h, "nan_inf_refused", _h5(_replace_channel(data=[1.0, np.nan, np.inf, 2.0])),
             r"2 non-finite sample\(s\)"),
        Case(h, "nan_inf_allowed", _h5(_replace_channel(data=[1.0, np.nan, np.inf, -np.inf])),
             check=_check_nonfinite,
             options={"allow_nonfinite": True}),
    ]


# ------------------------------------------------------------------ NPZ

def _npz_meta(**changes) -> dict:
    meta = {"layout": "sigtune-recording-npz", "layout_version": 1, "metadata": {},
            "channels": [{"array": "channel_000000", "name": "X1", "fs_hz": 8.0, "unit": "g"}]}
    meta.update(changes)
    return meta


def _npz(meta=None, entry: dict | None = None, arrays: dict | None = None, raw_meta=None,
         name: str = "run.npz") -> Callable[[Path], Path]:
    """An archive in the npz layout with one channel (``entry`` changes its description)."""
    def build(folder: Path) -> Path:
        described = meta if meta is not None else _npz_meta()
        if entry is not None:
            described = {**described, "channels": [{**described["channels"][0], **entry}]}
        content = {"channel_000000": np.arange(8.0), **(arrays or {})}
        content["sigtune_meta"] = raw_meta if raw_meta is not None else np.array(json.dumps(described))
        path = folder / name
        with open(path, "wb") as fh:
            np.savez(fh, **content)
        return path
    return build


def _npy_bytes(array: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, array)
    return buf.getvalue()


def _member_claiming(shape, descr: str = "<f8") -> bytes:
    """A .npy header declaring ``shape`` of ``descr``, followed by only 64 bytes."""
    buf = io.BytesIO()
    np.lib.format.write_array_header_1_0(buf, {"descr": descr, "fortran_order": False, "shape": shape})
    return buf.getvalue() + bytes(64)


def _zip_claiming_huge_size() -> bytes:
    data = bytearray(_zip({"channel_000000.npy": _npy_bytes(np.arange(8.0)),
                           "sigtune_meta.npy": _npy_bytes(np.array(json.dumps(_npz_meta())))}))
    central = data.find(b"PK\x01\x02")
    data[central + 24:central + 28] = struct.pack("<I", 0xFFFFFFF0)  # uncompressed size of the first member
    return bytes(data)


def _zip_needing_version_25() -> bytes:
    data = bytearray(_written("npz"))
    central = data.find(b"PK\x01\x02")
    data[central + 6:central + 8] = struct.pack("<H", 255)  # "version needed to extract": 25.5
    return bytes(data)


def _check_npz_arange(recording: Recording) -> None:
    np.testing.assert_array_equal(recording[0].data, np.arange(8.0))
    assert recording[0].fs == 8.0 and recording[0].unit == "g"


def _arange_without_timestamps(recording: Recording) -> None:
    _check_npz_arange(recording)
    assert recording.timestamps is None  # a time column of another length describes no channel


def _npz_cases() -> list[Case]:
    n = "npz"
    meta_ok = json.dumps(_npz_meta()).encode()
    return [
        Case(n, "valid_written_by_dsp", lambda d: dsp.write(_valid_recording(), d / "ok.npz"),
             check=_same_as_valid),
        Case(n, "valid_compressed", lambda d: dsp.write(_valid_recording(), d / "okz.npz", compressed=True),
             check=_same_as_valid),
        Case(n, "unequal_lengths_and_rates", lambda d: dsp.write(Recording([
            _valid_recording()[0], Channel(np.arange(10.0), 5.0, name="B", unit="V")]), d / "mixed.npz"),
             check=_check_lengths),
        Case(n, "int16_samples", _npz(arrays={"channel_000000": CODES}), check=_check_int16),
        Case(n, "empty", _file("empty.npz", b""), r"the file is empty"),
        Case(n, "truncated_half", _file("half.npz", lambda: _written("npz")[:len(_written("npz")) // 2]),
             r"is not a readable NPZ file"),
        Case(n, "truncated_to_10_bytes", _file("ten.npz", lambda: _written("npz")[:10]),
             r"not a readable NPZ"),
        Case(n, "png_renamed", _file("image.npz", PNG),
             r"zip archive starting with 'PK', this one starts with"),
        Case(n, "text_renamed", _file("text.npz", TEXT), r"this one starts with b'time \['"),
        Case(n, "hdf5_renamed", _file("h5.npz", lambda: _written("h5")), r"this one starts with b'\\x89HDF"),
        Case(n, "binary_garbage", _file("garbage.npz", _garbage()), r"is not a readable NPZ file"),
        Case(n, "zip_that_is_not_npz", _file("docs.npz", lambda: _zip({"readme.txt": b"hello"})),
             r"NPZ archive of another layout: no 'sigtune_meta' array; it holds readme.txt"),
        Case(n, "member_name_with_a_line_break", _file("names.npz", lambda: _zip({
            "channel_000000.npy": _npy_bytes(np.arange(8.0)), "odd\nname.npy": _npy_bytes(np.arange(8.0))})),
             r"another layout: no 'sigtune_meta' array; it holds channel_000000, odd\\nname"),
        Case(n, "empty_zip", _file("void.npz", lambda: _zip({})), r"another layout.*holds nothing"),
        Case(n, "single_npy_renamed", _file("one.npz", lambda: _npy_bytes(np.arange(5.0))),
             r"holds a single .npy array"),
        Case(n, "single_npy_claiming_10^12", _file("one_huge.npz", lambda: _member_claiming((10**12,))),
             r"holds a single .npy array", max_peak_mb=16),
        Case(n, "member_claiming_10^12_samples", _file("huge.npz", lambda: _zip({
            "channel_000000.npy": _member_claiming((10**12,)),
            "sigtune_meta.npy": _npy_bytes(np.array(json.dumps(_npz_meta())))})),
             r"array 'channel_000000': declares shape \(1000000000000,\) of float64 "
             r"\(8000000000000 bytes\) but holds only 64 bytes", max_peak_mb=16),
        Case(n, "meta_claiming_a_huge_string", _file("hugemeta.npz", lambda: _zip({
            "sigtune_meta.npy": _member_claiming((), "<U99999999")})),
             r"array 'sigtune_meta': declares shape \(\) of <U99999999 \(399999996 bytes\)", max_peak_mb=16),
        Case(n, "zip_member_claiming_4GB", _file("bomb.npz", _zip_claiming_huge_size),
             r"declares 4294967280 bytes from \d+ stored bytes, more than the archive", max_peak_mb=16),
        Case(n, "zip_version_too_new", _file("v63.npz", _zip_needing_version_25),
             r"is not a readable NPZ file \(zip file version 25.5\)"),
        Case(n, "bzip2_member", _file("bz.npz", lambda: _zip({"sigtune_meta.npy": _npy_bytes(np.array("{}"))},
                                                             zipfile.ZIP_BZIP2)),
             r"uses zip compression method 12"),
        Case(n, "meta_member_without_npy_suffix", _file("raw.npz", lambda: _zip({"sigtune_meta": meta_ok})),
             r"array 'sigtune_meta': is a member of the archive but not a numpy array"),
        Case(n, "object_array", _npz(arrays={"channel_000000": np.array([1.0, "x", None], dtype=object)}),
             r"array 'channel_000000': cannot be loaded .*object \(pickled\) arrays are never loaded"),
        Case(n, "meta_not_json", _npz(raw_meta=np.array("{oops")),
             r"array 'sigtune_meta': is not valid JSON"),
        Case(n, "meta_nested_100000_deep", _npz(raw_meta=np.array(DEEP_JSON)), r"nested too deeply"),
        Case(n, "meta_a_list", _npz(raw_meta=np.array("[1, 2]")), r"must be a JSON object with \"layout\""),
        Case(n, "meta_bytes_not_text", _npz(raw_meta=np.array(meta_ok)), r"must be a single unicode string"),
        Case(n, "meta_layout_version_7", _npz(meta=_npz_meta(layout_version=7)), r"needs layout_version 1"),
        Case(n, "meta_metadata_a_list", _npz(meta=_npz_meta(metadata=[1])),
             r"sigtune_meta metadata: must be a JSON object"),
        Case(n, "entry_without_array", _npz(meta=_npz_meta(channels=[{"name": "X1"}])),
             r"channels\[0\]: must be an object naming its 'array'"),
        Case(n, "array_missing", _npz(entry={"array": "channel_000009"}),
             r"is listed in sigtune_meta but missing"),
        Case(n, "complex_samples", _npz(arrays={"channel_000000": np.ones(8, complex)}),
             r"must be a 1-D numeric array; got shape \(8,\), dtype complex128"),
        Case(n, "string_samples", _npz(arrays={"channel_000000": np.array(["1.0"] * 8)}), r"dtype <U3"),
        Case(n, "bool_samples", _npz(arrays={"channel_000000": np.ones(8, bool)}), r"dtype bool"),
        Case(n, "datetime_samples", _npz(arrays={"channel_000000": np.arange(8).astype("datetime64[s]")}),
             r"dtype datetime64\[s\]"),
        Case(n, "two_dimensional", _npz(arrays={"channel_000000": np.zeros((8, 2))}), r"got shape \(8, 2\)"),
        Case(n, "zero_d", _npz(arrays={"channel_000000": np.array(1.0)}), r"got shape \(\)"),
        Case(n, "zero_samples", _npz(arrays={"channel_000000": np.zeros(0)}),
             r"needs at least 2 samples; got 0"),
        Case(n, "one_sample", _npz(arrays={"channel_000000": np.zeros(1)}),
             r"needs at least 2 samples; got 1"),
        Case(n, "rate_zero", _npz(entry={"fs_hz": 0}), r"got fs=0"),
        Case(n, "rate_negative", _npz(entry={"fs_hz": -8}), r"got fs=-8"),
        Case(n, "rate_nan", _npz(entry={"fs_hz": float("nan")}), r"got fs=nan"),
        Case(n, "rate_text", _npz(entry={"fs_hz": "fast"}), r"got 'fast'"),
        Case(n, "rate_1e30", _npz(entry={"fs_hz": 1e30}), check=_check_rate(1e30)),
        Case(n, "start_time_nan", _npz(entry={"start_time_s": float("nan")}),
             r"start_time_s: must be finite"),
        Case(n, "history_of_numbers", _npz(entry={"history": [1, "x"]}),
             r"'history' must list processing steps"),
        Case(n, "nan_inf_refused", _npz(arrays={"channel_000000": np.array([1.0, np.nan, np.inf, 2.0])}),
             r"2 non-finite sample\(s\)"),
        Case(n, "nan_inf_allowed", _npz(arrays={"channel_000000": np.array(
            [1.0, np.nan, np.inf, -np.inf])}), check=_check_nonfinite, options={"allow_nonfinite": True}),
        Case(n, "timestamps_of_strings", _npz(arrays={"timestamps": np.array(["t"] * 8)}),
             r"array 'timestamps': must be a 1-D array of times in s"),
        Case(n, "timestamps_of_another_length", _npz(arrays={"timestamps": np.arange(5.0)}),
             check=_arange_without_timestamps),
        Case(n, "duplicate_channel_names", _npz(meta=_npz_meta(channels=[
            {"array": "channel_000000", "name": "X1", "fs_hz": 8.0, "unit": "g"}] * 2)),
             r"channel names must be unique; repeated: X1"),
    ]


CASES: list[Case] = [*_text_cases("csv"), *_text_cases("tsv"), *_wav_cases(), *_h5_cases(), *_npz_cases()]


def summary(outcomes: dict[str, str]) -> list[str]:
    """Return a Markdown table of cases and outcomes per reader from ``{case id: "error"|"read"|...}``."""
    lines = ["| reader | cases | project error | correct read | other |",
             "| --- | ---: | ---: | ---: | ---: |"]
    for reader in READERS:
        mine = [v for k, v in outcomes.items() if k.startswith(f"{reader}/")]
        other = len(mine) - mine.count("error") - mine.count("read")
        lines.append(f"| {reader} | {len(mine)} | {mine.count('error')} | {mine.count('read')} | {other} |")
    return lines
