"""CSV/TSV text recordings: one row per instant, one column per channel.

The header convention (see ``docs/formats.md``): optional ``#`` comment lines,
of which ``# key: value`` lines become recording metadata and
``# sample_rate_hz: 5120`` sets the rate; then a header row of channel names,
each with an optional unit in brackets (``A1 [m/s^2]`` or ``A1 (g)``); then
the numbers. A first column named ``time``/``t``/``timestamp`` (unit s, ms or
us) is the time axis: the rate is inferred from it and its spacing checked.

Numbers are parsed by :func:`numpy.loadtxt` in blocks of a few MiB, so that a
file of millions of rows reads at numpy's C speed while no single line larger
than :data:`~dsp.io._common.MAX_LINE_BYTES` is ever held in memory.
"""

from __future__ import annotations

import io
import re
import warnings
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._atomic import atomic_path
from .._validate import check_fs, check_number
from .._version import __version__
from ..channel import Channel, Recording
from ..errors import SigtuneError
from ..units import unit_info
from ._common import MAX_LINE_BYTES, as_recording, check_finite, common_timebase

__all__ = ["read_text", "write_text", "TIME_COLUMN_NAMES"]

#: Header names (case-insensitive, unit removed) taken as the time column.
TIME_COLUMN_NAMES = ("time", "t", "timestamp", "time_s", "elapsed")
_TIME_UNITS = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6}
_DELIMITER_CANDIDATES = ("\t", ";", ",", "|")
_SNIFF_LINES = 20
_COMMENTS_KEPT = 200  # leading comment lines kept as metadata; a longer preamble is only skipped
_UTF8_BOM = b"\xef\xbb\xbf"
_BLOCK_BYTES = 1 << 23  # 8 MiB: large enough for loadtxt's speed, small enough to bound memory
_COLUMN = re.compile(r"^(?P<name>.*?)\s*[\[(]\s*(?P<unit>[^\])]*?)\s*[\])]$")


@dataclass
class _Preamble:
    """What precedes the numbers: comments, the header, where the data starts."""

    metadata: dict = field(default_factory=dict)
    comments: list = field(default_factory=list)
    fields: list | None = None  # header fields, None if the file has no header row
    delimiter: str | None = None  # None: runs of whitespace
    n_columns: int = 0
    quoted: bool = False  # numbers in double quotes ("1.5"): costs loadtxt some speed, so only if seen
    data_offset: int = 0  # byte offset of the first data line
    data_line: int = 1  # 1-based line number of the first data line


def _read_line(fh, line_no: int) -> bytes:
    raw = fh.readline(MAX_LINE_BYTES + 1)
    if len(raw) > MAX_LINE_BYTES:
        raise SigtuneError(f"is longer than {MAX_LINE_BYTES} bytes (no line break found); a text "
                           "recording has one row per line. Is this a binary file? Choose its format "
                           "with format=...", f"line {line_no}")
    if b"\x00" in raw:  # never in UTF-8/Latin-1 text; every other byte of UTF-16 text
        utf16 = raw[:2] in (b"\xff\xfe", b"\xfe\xff") or 0.3 < raw.count(b"\x00") / len(raw) < 0.7
        kind = "UTF-16 text" if utf16 else "binary data"
        raise SigtuneError(f"holds NUL bytes: this looks like {kind}, not a CSV/TSV recording. Save text as "
                           "UTF-8 (or ASCII), or choose the file's real format with format=...",
                           f"line {line_no}")
    if b"\r" in raw.rstrip(b"\r\n"):  # lines ended by CR alone (old Mac) read as one enormous line
        raise SigtuneError("holds a carriage return (CR) inside the line: the file's lines end with CR "
                           "alone. Convert its line endings to LF or CRLF", f"line {line_no}")
    return raw


def _decode(raw: bytes) -> str:
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:  # older loggers write Latin-1 units such as 'm/s²'
        return raw.decode("latin-1")


def _split(line: str, delimiter: str | None) -> list[str]:
    parts = line.split() if delimiter is None else line.split(delimiter)
    return [p.strip().strip('"').strip() for p in parts]


_WHITESPACE_FIELD = re.compile(r"[^\s\[(]+(?:\s*[\[(][^\])]*[\])])?")


def _split_header(line: str, delimiter: str | None) -> list[str]:
    """Split a header row; with whitespace delimiting, ``A1 [m/s^2]`` stays one field."""
    if delimiter is None:
        return [f.strip('"') for f in _WHITESPACE_FIELD.findall(line)]
    return _split(line, delimiter)


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _sniff(lines: list[str]) -> str | None:
    """Pick the delimiter that splits most sampled lines into the same number of fields.

    A majority rather than unanimity, so that one malformed row among the first
    few is reported as such instead of spoiling the guess.
    """
    best, best_share = ",", 0.0  # one column: no delimiter appears, any will do
    for candidate in (*_DELIMITER_CANDIDATES, None):
        counts = Counter(len(line.split()) - 1 if candidate is None else line.count(candidate)
                         for line in lines)
        count, times = counts.most_common(1)[0]
        if count > 0 and times / len(lines) > best_share:
            best, best_share = candidate, times / len(lines)
    return best


def _read_preamble(fh, delimiter: str | None, sniff: bool) -> _Preamble:
    pre = _Preamble(delimiter=delimiter)
    line_no, content = 0, []
    while len(content) < _SNIFF_LINES:
        offset = fh.tell()
        line_no += 1
        raw = _read_line(fh, line_no)
        if not raw:
            break
        text = _decode(raw).strip()
        if not text:
            continue
        if text.startswith("#"):
            if not content and len(pre.comments) < _COMMENTS_KEPT:
                _take_comment(pre, text)
            continue
        content.append((text, offset, line_no))
    if not content:
        raise SigtuneError(f"holds no data rows ({line_no - 1} line(s) of comments or blanks only); "
                           "expected a header row of channel names and rows of numbers")
    if sniff:  # from the rows below the first line: a header may hold spaces the data lack
        pre.delimiter = _sniff([c[0] for c in content[1:]] or [content[0][0]])
    pre.quoted = any('"' in c[0] for c in content[1:])
    first, first_offset, first_line = content[0]
    fields = _split_header(first, pre.delimiter)
    pre.n_columns = len(fields)
    if all(_is_number(f) for f in fields):
        pre.data_offset, pre.data_line = first_offset, first_line
    elif len(content) < 2:
        raise SigtuneError("has a header row but no data rows; expected rows of numbers below it",
                           f"line {first_line}")
    else:
        pre.fields = fields
        pre.data_offset, pre.data_line = content[1][1], content[1][2]
    return pre


def _take_comment(pre: _Preamble, text: str) -> None:
    body = text.lstrip("#").strip()
    key, sep, value = body.partition(":")
    if sep and key.strip() and " " not in key.strip():
        pre.metadata[key.strip()] = value.strip()
    elif body:
        pre.comments.append(body)


def _parse_block(block: bytes, pre: _Preamble, first_line: int, names: list[str]) -> np.ndarray:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "input contained no data" for comment-only blocks
        try:
            values = np.loadtxt(io.BytesIO(block), delimiter=pre.delimiter, comments="#", ndmin=2,
                                dtype=np.float64, quotechar='"' if pre.quoted else None)
        except ValueError as err:
            raise _locate_bad_field(block, pre, first_line, names, err) from None
    if values.size and values.shape[1] != pre.n_columns:
        raise _locate_bad_field(block, pre, first_line, names, None)
    return values


def _locate_bad_field(block: bytes, pre: _Preamble, first_line: int, names: list[str],
                      err: Exception | None) -> SigtuneError:
    """Find the first bad field of a block (slow path, only after a parse failure)."""
    for i, raw in enumerate(block.split(b"\n")):
        where = f"line {first_line + i}"
        text = raw.decode("latin-1").split("#", 1)[0].strip()
        if not text:
            continue
        fields = _split(text, pre.delimiter)
        if len(fields) != pre.n_columns:
            return SigtuneError(f"has {len(fields)} field(s) but the header has {pre.n_columns} column(s) "
                                f"({', '.join(names)}); every row needs one number per column", where)
        for j, value in enumerate(fields):
            if not _is_number(value) or "_" in value:
                hint = ("; decimal commas are not supported: use a point (0.25)" if "," in value
                        else "; write nan for a missing value" if not value else "")
                return SigtuneError(f"{value!r} is not a number; expected a decimal number such as 0.25, "
                                    f"-1.5e-3 or nan{hint}", f"{where}, column {names[j]!r}")
    last = first_line + block.count(b"\n")
    return SigtuneError(f"could not be parsed as numbers ({err})", f"lines {first_line}-{last}")


def _read_numbers(fh, pre: _Preamble, names: list[str]) -> tuple[np.ndarray, int]:
    """Parse every data row into a ``(rows, columns)`` float64 array, block by block.

    Also returns the number of lines the data occupy (comments and blanks included).
    """
    fh.seek(pre.data_offset)
    parts, rest, line = [], b"", pre.data_line
    while True:
        chunk = fh.read(_BLOCK_BYTES)
        block = rest + chunk
        cut = block.rfind(b"\n") + 1
        # The unfinished last line is carried into the next block; bounding it bounds memory.
        if len(block) - cut > MAX_LINE_BYTES:
            long_line = line + block.count(b"\n")
            raise SigtuneError(f"is longer than {MAX_LINE_BYTES} bytes (no line break found); a text "
                               "recording has one row per line", f"line {long_line}")
        if chunk:
            block, rest = block[:cut], block[cut:]
        if block:
            values = _parse_block(block, pre, line, names)
            if values.size:
                parts.append(values)
            line += block.count(b"\n") + (not block.endswith(b"\n"))
        if not chunk:
            break
    n_lines = line - pre.data_line
    if not parts:
        return np.empty((0, pre.n_columns)), n_lines
    return (parts[0] if len(parts) == 1 else np.concatenate(parts)), n_lines


def _line_numbers(path: Path, pre: _Preamble, rows: list[int]) -> dict[int, int]:
    """Map data-row indices to 1-based file line numbers (error path: rescans the file)."""
    wanted, found, row = set(rows), {}, 0
    with open(path, "rb") as fh:
        fh.seek(pre.data_offset)
        for line_no, raw in enumerate(fh, start=pre.data_line):
            text = raw.split(b"#", 1)[0].strip()
            if not text:
                continue
            if row in wanted:
                found[row] = line_no
                if len(found) == len(wanted):
                    break
            row += 1
    return found


def _column_name_unit(text: str, index: int) -> tuple[str, str | None]:
    match = _COLUMN.match(text)
    name, unit = (match["name"].strip(), match["unit"]) if match else (text.strip(), None)
    if not name:
        raise SigtuneError("has no name; every header field needs a channel name, e.g. 'A1 [m/s^2]'",
                           f"header column {index + 1}")
    return name, unit


def _time_index(time_column, names: list[str], has_header: bool) -> int | None:
    if time_column is None:
        return None
    if time_column == "auto":
        return 0 if has_header and names[0].lower() in TIME_COLUMN_NAMES and len(names) > 1 else None
    if isinstance(time_column, str):
        if time_column not in names:
            raise SigtuneError(f"no column named {time_column!r}; columns: {', '.join(names)}", "time_column")
        return names.index(time_column)
    if isinstance(time_column, int) and not isinstance(time_column, bool) and 0 <= time_column < len(names):
        return time_column
    raise SigtuneError(f"must be 'auto', None, a column name or an index 0..{len(names) - 1}; "
                       f"got {time_column!r}", "time_column")


def _time_resolution(t: np.ndarray) -> float:
    """Return the decimal step the time column was printed with (0 if printed in full).

    Timestamps written with, say, 6 decimals carry up to 1 us of rounding in
    every interval; the spacing check allows for it instead of failing.
    """
    head = t[:1000]
    for decimals in range(0, 16):
        scaled = head * 10.0**decimals
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-6 * np.maximum(1.0, np.abs(scaled)) + 1e-3):
            return 10.0**-decimals
    return 0.0


def _rate_from_time(t: np.ndarray, fs_stated: float | None, tolerance: float, line_of) -> float:
    """Check a time column (s) and return the rate.

    Each step is compared with ``1/fs`` when a rate was stated, else with the
    median step (so that one gap is reported as a gap rather than skewing the
    reference). The rate returned is the stated one, else ``(n-1) / (t[-1] - t[0])``,
    the most precise estimate once the spacing is known to be uniform.
    """
    steps = np.diff(t)
    backwards = np.flatnonzero(~(steps > 0))
    if backwards.size:
        i = int(backwards[0]) + 1
        raise SigtuneError(f"the time column goes backwards or repeats: t={float(t[i])!r} s after "
                           f"t={float(t[i - 1])!r} s on line {line_of(i - 1)}; a time column must "
                           "increase by one sample interval per row. Sort or repair the file, or pass fs= "
                           "and time_column=None", f"line {line_of(i)}")
    dt = 1.0 / fs_stated if fs_stated is not None else float(np.median(steps))
    resolution = _time_resolution(t)
    # Rounding to a print resolution much finer than a step jitters each step by up to one
    # resolution unit; a resolution near the step itself would hide a missing row, so it earns no allowance.
    allowance = resolution if resolution <= 0.1 * dt else 0.0
    allowed = tolerance * dt + allowance
    deviation = np.abs(steps - dt)
    worst = int(np.argmax(deviation))
    if deviation[worst] > allowed:
        reference = f"1/fs = {dt:.9g} s (fs={1 / dt:.9g} Hz)" if fs_stated is not None else \
            f"the median step is {dt:.9g} s"
        raise SigtuneError(
            f"the time column is not uniformly spaced: the step to this row is {steps[worst]:.9g} s but "
            f"{reference}, off by {deviation[worst]:.3g} s ({deviation[worst] / dt:.1%} of a step); allowed "
            f"{allowed:.3g} s (time_tolerance={tolerance:g} of a step"
            f"{f' + {allowance:g} s print resolution' if allowance else ''}). A gap or a repeated row? "
            "Repair the file, raise time_tolerance, or pass fs= and time_column=None to ignore the "
            "time column",
            f"line {line_of(worst + 1)}")
    if fs_stated is not None:
        return fs_stated
    with np.errstate(over="ignore"):  # a span of a few subnormal seconds gives an infinite rate, refused here
        rate = (t.size - 1) / (t[-1] - t[0])
    return check_fs(rate, f"rate inferred from the time column ({t.size} rows from t={float(t[0])!r} s to "
                          f"t={float(t[-1])!r} s)")


def _units(names: list[str], header_units: list[str | None], unit) -> list[str]:
    if isinstance(unit, dict) and set(unit) - set(names):
        raise SigtuneError(f"names no channel of this file: {sorted(set(unit) - set(names))[0]!r}; channels: "
                           f"{', '.join(names)}", "unit")
    units = []
    for name, found in zip(names, header_units):
        chosen = found if found is not None else (unit.get(name) if isinstance(unit, dict) else unit)
        units.append(unit_info(chosen if chosen is not None else "1", f"column {name!r} unit").symbol)
    return units


def read_text(path, *, delimiter: str | None = None, fs: float | None = None, time_column="auto",
              unit: str | dict | None = None, time_tolerance: float = 0.01,
              allow_nonfinite: bool = False) -> Recording:
    """Read a CSV/TSV recording.

    Parameters
    ----------
    path : str or Path
        The text file (opened read-only).
    delimiter : str, optional
        Field separator; default sniffed from the first rows (tab, ``;``,
        ``,``, ``|`` or runs of whitespace). Use ``" "`` for whitespace.
    fs : float, optional
        Sample rate in Hz, for files without a time column. With a time
        column it must agree with the column's rate.
    time_column : 'auto', str, int or None, default 'auto'
        'auto' takes the first column if it is named ``time``, ``t``,
        ``timestamp``, ``time_s`` or ``elapsed``; None means no time column.
    unit : str or dict, optional
        Unit of columns whose header gives none (one for all, or by name);
        default ``"1"`` (dimensionless).
    time_tolerance : float, default 0.01
        Largest allowed deviation of a time step from ``1/fs``, as a fraction
        of a step (plus the resolution the timestamps were printed with).
    allow_nonfinite : bool, default False
        Keep NaN/Inf values instead of raising.

    Returns
    -------
    Recording
        One channel per non-time column; ``timestamps`` holds the time column
        in s, and every channel starts at its first value.
    """
    path = Path(path)
    tolerance = check_number(time_tolerance, "time_tolerance", low=0.0, high=0.5)
    if delimiter == " ":
        delimiter = None
    with open(path, "rb") as fh:
        if fh.read(len(_UTF8_BOM)) != _UTF8_BOM:  # a BOM before the first row would be read as part of it
            fh.seek(0)
        pre = _read_preamble(fh, delimiter, sniff=delimiter is None)
        header = pre.fields or [f"ch{i + 1}" for i in range(pre.n_columns)]
        parsed = [_column_name_unit(text, i) for i, text in enumerate(header)]
        names = [p[0] for p in parsed]
        values, n_lines = _read_numbers(fh, pre, names)
    if values.shape[0] < 2:
        raise SigtuneError(f"holds {values.shape[0]} data row(s); a recording needs at least 2 samples")
    line_of = _line_mapper(path, pre, contiguous=n_lines == values.shape[0])
    t_index = _time_index(time_column, names, pre.fields is not None)
    fs_nominal = _nominal_rate(fs, pre)
    columns = np.ascontiguousarray(values.T)  # one contiguous row per channel: channels are views of it
    timestamps, start = None, 0.0
    if t_index is not None:
        timestamps = columns[t_index] * _time_scale(parsed[t_index][1], names[t_index])
        if not np.all(np.isfinite(timestamps)):
            bad = int(np.flatnonzero(~np.isfinite(timestamps))[0])
            raise SigtuneError(f"time value {float(timestamps[bad])!r} is not finite; a time column needs a "
                               "number on every row", f"line {line_of(bad)}")
        fs_nominal = _rate_from_time(timestamps, fs_nominal, tolerance, line_of)
        start = float(timestamps[0])
    elif fs_nominal is None:
        raise SigtuneError(f"has no time column and no sample rate: the first column {names[0]!r} is not "
                           f"named like a time column ({', '.join(TIME_COLUMN_NAMES)}). Pass "
                           "fs=<rate in Hz>, or time_column=<name> to use a column as the time axis")
    keep = [i for i in range(len(names)) if i != t_index]
    units = _units([names[i] for i in keep], [parsed[i][1] for i in keep], unit)
    channels = []
    for i, u in zip(keep, units):
        ch = Channel(columns[i], fs_nominal, name=names[i], unit=u, start_time=start)
        check_finite(ch, allow_nonfinite, lambda a, b: f"lines {line_of(a)}-{line_of(b - 1)}")
        channels.append(ch)
    metadata = {**pre.metadata, "format": "text", "delimiter": pre.delimiter or " "}
    if pre.comments:
        metadata["comments"] = pre.comments
    if t_index is not None:
        metadata["time_column"] = names[t_index]
    return Recording(channels, source=str(path), metadata=metadata, timestamps=timestamps)


def _line_mapper(path: Path, pre: _Preamble, contiguous: bool):
    """Return a ``row -> line number`` function; it rescans the file only if
    comments or blank lines sit among the rows (and only when asked, on an error path)."""
    def line_of(row: int) -> int:
        if contiguous:
            return pre.data_line + row
        return _line_numbers(path, pre, [row]).get(row, pre.data_line + row)

    return line_of


def _nominal_rate(fs, pre: _Preamble) -> float | None:
    stated = pre.metadata.get("sample_rate_hz")
    if fs is not None:
        return check_fs(fs)
    if stated is not None:
        return check_fs(stated, "comment 'sample_rate_hz'")
    return None


def _time_scale(unit: str | None, name: str) -> float:
    if unit is None:
        return 1.0
    if unit not in _TIME_UNITS:
        raise SigtuneError(f"time unit {unit!r} is not one of {', '.join(_TIME_UNITS)}", f"column {name!r}")
    return _TIME_UNITS[unit]


def _check_name(name: str, delimiter: str) -> None:
    if delimiter in name or any(c in name for c in "\n\r#[]()") or name != name.strip():
        raise SigtuneError(f"cannot be written to a text header: it holds the delimiter {delimiter!r}, a "
                           "bracket, '#', a line break or outer spaces. Rename the channel, or write "
                           ".h5/.npz", f"channel {name!r}")


def write_text(recording, path, *, delimiter: str = ",", time_column: bool = True) -> Path:
    """Write a recording as CSV/TSV text, atomically.

    Values are written with Python's shortest round-trip ``repr``, so float64
    (and float32) data read back bit for bit. A ``# sample_rate_hz:`` comment
    keeps the rate exact.

    Parameters
    ----------
    recording : Recording or Channel
        Channels of one rate, length and start time.
    path : str or Path
        Target file; replaced only once complete.
    delimiter : str, default ","
        Field separator (``"\\t"`` for TSV).
    time_column : bool, default True
        Write a first column ``time [s]`` (the recording's timestamps if it has
        matching ones, else ``start + i/fs``).
    """
    recording = as_recording(recording)
    fs, n, start = common_timebase(recording, "text")
    for ch in recording:
        _check_name(ch.name, delimiter)
    columns = [ch.data for ch in recording]
    header = [f"{ch.name} [{ch.unit}]" for ch in recording]
    if time_column:
        stamps = recording.timestamps
        t = stamps if stamps is not None and stamps.shape == (n,) else start + np.arange(n) / fs
        columns, header = [t, *columns], ["time [s]", *header]
    path = Path(path)
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(f"# sigtune {__version__} text recording\n# sample_rate_hz: {fs!r}\n")
        fh.write(delimiter.join(header) + "\n")
        rows_per_block = 65536  # bounds the memory the formatted strings take
        for a in range(0, n, rows_per_block):
            texts = [map(repr, c[a:a + rows_per_block].tolist()) for c in columns]
            fh.write("\n".join(map(delimiter.join, zip(*texts))) + "\n")
    return path
