"""Session files: the settings tuned on one channel, saved to replay on others.

A session file is JSON of our own layout, described by the JSON Schema
``dsp/session.schema.json`` (draft 2020-12)::

    {"format": "sigtune-session", "version": 1, "sigtune": "0.1.0",
     "source": {"path": "../sigtune-demo/pump_skid.h5", "sha256": "9f2c...",
                "channels": ["motor_de_h"]},
     "setup": {"*": {"unit": "g", "quantity": "acceleration",
                     "sensitivity": null, "sensitivity_unit": null}},
     "chain": [{"op": "filter", "band": "highpass", "cutoff": 2.0, ...}],
     "analysis": {"spectrum": {...}, "band_fraction": 3, "n_peaks": 5,
                  "integration": {...}, "evaluation": null, "audit": {...}},
     "view": {}, "notes": "free text"}

``source``
    The recording the settings were tuned on: its path *relative to the
    session file's folder* (absolute in memory once loaded), or
    ``"demo:<scenario>"`` for a built-in demo recording
    (:func:`dsp.demo_recording`); its SHA-256; and the channels selected
    (null: every channel). On load the file is
    hashed again; a mismatch or a missing file is a :class:`SigtuneWarning`,
    not an error, because a campaign applies the session to other files.
``setup``
    Per channel name, or ``"*"`` for every channel without its own entry,
    applied before the chain: ``unit`` and ``quantity`` *declare* what the
    samples are (the values are not changed; use a ``convert_unit`` step to
    convert), then ``sensitivity`` (with ``sensitivity_unit``, default
    ``"mV/g"``) calibrates a voltage channel with a ``calibrate`` step.
``chain``
    The steps' ``to_dict()`` data, rebuilt by :func:`dsp.steps.step_from_dict`.
``analysis``
    :class:`dsp.analysis.AnalysisSettings` data.

Loading is plain :func:`json.loads` of at most :data:`MAX_SESSION_BYTES`
bytes nested at most :data:`MAX_NESTING` deep, with duplicate keys and
``NaN``/``Infinity`` refused; steps are built from a registry of known ops.
Non-finite numbers, numbers beyond the float range and lone surrogates are
refused anywhere in the data, and the schema's size limits are checked
before the items of a list (a 10 MiB file loads or fails in about 2 s).
Nothing in a session file is ever evaluated as code. A server passes the
folder it serves as ``data_root`` (:meth:`Session.load`, :meth:`Session.loads`,
:func:`resolve_source`): a source path leading outside it is refused. Every problem raises
:class:`SigtuneError` naming the file and the JSON path (``chain[2].cutoff``)
with the valid values.

Versions
    A file newer than :data:`FORMAT_VERSION` is refused. Version 0 (the
    layout ``$defs/session_v0`` of the schema) is migrated on load: it had
    ``steps`` instead of ``chain``; ``source`` was a bare path with a
    separate ``channels`` list; one ``unit`` was declared for every channel
    instead of ``setup``; the analysis was flat (``spectrum``, ``bands`` for
    the band fraction, ``peaks`` for the number of peaks); it had no ``view``.
    Saving always writes the current version, atomically.
"""

from __future__ import annotations

import copy
import dataclasses
import functools
import hashlib
import itertools
import json
import math
import os
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ._atomic import write_text_atomic
from ._validate import check_choice
from ._version import __version__
from .analysis import AnalysisSettings, analyse
from .channel import Channel, Recording
from .conditioning import Calibrate
from .errors import SigtuneError, SigtuneWarning
from .steps import Chain, step_from_dict
from .units import QUANTITIES, sensitivity_factor, unit_info

__all__ = ["Session", "SessionResult", "apply_setup", "describe_source", "file_sha256", "resolve_in_folder",
           "resolve_source"]

FORMAT_TAG = "sigtune-session"
FORMAT_VERSION = 1
#: Largest session file read (10 MiB): settings are small; anything bigger is not a session.
MAX_SESSION_BYTES = 10 * 1024 * 1024
#: Deepest JSON nesting accepted (a version-1 file needs about 6 levels).
MAX_NESTING = 64
#: Most problems listed in one error message.
MAX_REPORTED = 10
#: Most schema problems collected before the message is made (hostile files can hold millions).
MAX_COLLECTED = 1000
#: Longest text of one problem in an error message (the value shown is cut, not the JSON path).
MAX_PROBLEM_CHARS = 300
#: Most digits of a whole number in a session file (Python refuses to convert over 4300).
MAX_INT_DIGITS = 100
SCHEMA_PATH = Path(__file__).with_name("session.schema.json")
#: A source path starting with this names a built-in demo recording, not a file.
DEMO_SOURCE_PREFIX = "demo:"
_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


# ------------------------------------------------------------------ JSON paths and schema
def _path_text(parts) -> str:
    """``["chain", 2, "cutoff"]`` -> ``"chain[2].cutoff"``; keys that are not names are quoted."""
    text = ""
    for part in parts:
        if isinstance(part, int):
            text += f"[{part}]"
        elif _IDENTIFIER.match(str(part)):
            text += f".{part}" if text else str(part)
        else:
            text += f"[{json.dumps(part)}]"
    return text or "(top level)"


@functools.cache
def _schema() -> dict:
    return json.loads(SCHEMA_PATH.read_text(encoding="utf-8"))


#: Keywords that look at every item of an array / every member of an object, and the size limit
#: that makes looking pointless: a hostile file's list of 10^6 steps or channels is refused by
#: its maxItems alone, instead of checking each item (minutes) and collecting 10^6 errors.
_SIZE_GUARDED = {"items": ("maxItems", list), "prefixItems": ("maxItems", list),
                 "contains": ("maxItems", list), "uniqueItems": ("maxItems", list),
                 "properties": ("maxProperties", dict), "additionalProperties": ("maxProperties", dict),
                 "patternProperties": ("maxProperties", dict), "propertyNames": ("maxProperties", dict)}


def _size_guarded(keyword: str, check):
    limit_keyword, kind = _SIZE_GUARDED[keyword]

    def guarded(validator, value, instance, schema):
        limit = schema.get(limit_keyword)
        if limit is not None and isinstance(instance, kind) and len(instance) > limit:
            return  # the limit's own error reports the container
        yield from check(validator, value, instance, schema)

    return guarded


@functools.cache
def _validator(definition: str | None = None):
    from jsonschema import Draft202012Validator, validators  # a dependency; imported on first use

    schema = _schema()
    if definition is not None:  # one of the $defs (an older layout) as the root
        schema = {"$schema": schema["$schema"], "$defs": schema["$defs"], "$ref": f"#/$defs/{definition}"}
    Draft202012Validator.check_schema(schema)
    # JSON Schema counts 3.0 as an integer; Python does not (a band fraction of 3.0 cannot index a table)
    strict_integers = Draft202012Validator.TYPE_CHECKER.redefine(
        "integer", lambda checker, value: isinstance(value, int) and not isinstance(value, bool))
    guarded = validators.extend(Draft202012Validator, {
        keyword: _size_guarded(keyword, Draft202012Validator.VALIDATORS[keyword]) for keyword in _SIZE_GUARDED},
        type_checker=strict_integers)
    return guarded(schema)


def _show(value) -> str:
    if isinstance(value, str) and len(value) > 60:
        value = value[:60]  # of a text of megabytes only the start is shown: do not encode it all
    text = json.dumps(value, default=repr)
    return text if len(text) <= 60 else text[:57] + "..."


def _json_type(value) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "boolean"
    return {dict: "object", list: "array", str: "string", int: "integer", float: "number"}.get(
        type(value), type(value).__name__)


_BOUNDS = {"minimum": ">=", "maximum": "<=", "exclusiveMinimum": ">", "exclusiveMaximum": "<"}


def _describe(error) -> tuple[str, str]:
    """Return ``(json_path, message)`` for one jsonschema error, naming the valid values."""
    path, kind, expected, found = list(error.absolute_path), error.validator, error.validator_value, error.instance
    if kind == "additionalProperties":
        valid = list(error.schema.get("properties", {}))
        extra = sorted(set(found) - set(valid))[0]
        return _path_text(path + [extra]), f"unknown key; valid keys: {', '.join(valid)}"
    if kind == "required":
        missing = [k for k in expected if k not in found][0]
        return _path_text(path + [missing]), "is required"
    if kind == "enum":
        return _path_text(path), f"must be one of {', '.join(map(_show, expected))}; got {_show(found)}"
    if kind == "const":
        return _path_text(path), f"must be {_show(expected)}; got {_show(found)}"
    if kind == "type":
        types = expected if isinstance(expected, list) else [expected]
        return _path_text(path), f"must be {' or '.join(types)}; got {_json_type(found)} {_show(found)}"
    if kind in _BOUNDS:
        return _path_text(path), f"must be {_BOUNDS[kind]} {expected}; got {_show(found)}"
    if kind == "pattern":
        valid = error.schema.get("description") or f"text matching {expected}"
        return _path_text(path), f"must be {valid}; got {_show(found)}"
    if kind in ("maxItems", "maxLength", "maxProperties"):
        return _path_text(path), f"is too long: at most {expected} allowed; got {len(found)}"
    if kind == "uniqueItems":
        return _path_text(path), f"must not repeat an item; got {_show(found)}"
    return _path_text(path), error.message


def _raise_problems(problems: list[tuple[str, str]], where: str | None) -> None:
    if not problems:
        return
    shown = [_cut(f"{path}: {message}") for path, message in problems[:MAX_REPORTED]]
    more = len(problems) - len(shown)
    at_least = "at least " if len(problems) >= MAX_COLLECTED else ""
    raise SigtuneError("; ".join(shown) + (f"; and {at_least}{more} more" if more else ""), where)


def _cut(text: str) -> str:
    """One problem's text, cut to :data:`MAX_PROBLEM_CHARS` (a step's own check may show a huge value)."""
    text = " ".join(text.splitlines())
    return text if len(text) <= MAX_PROBLEM_CHARS else text[:MAX_PROBLEM_CHARS - 3] + "..."


def _check_schema(data: dict, where: str | None, definition: str | None = None) -> None:
    found = itertools.islice(_validator(definition).iter_errors(data), MAX_COLLECTED)
    errors = sorted(found, key=lambda e: [str(p) for p in e.absolute_path])
    _raise_problems([_describe(e) for e in errors], where)


# ------------------------------------------------------------------ reading JSON safely
def _refuse_duplicates(pairs):
    seen = {}
    for key, value in pairs:
        if key in seen:
            raise SigtuneError(f"key {key!r} appears twice in one object; keep one")
        seen[key] = value
    return seen


def _refuse_constant(name):
    raise SigtuneError(f"{name} is not a JSON number; write a finite number or null")


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):  # 1e400: Python reads it as infinity
        raise SigtuneError(f"the number {_show(text)} is beyond the largest a session can hold (about 1.8e308); "
                           f"write a finite number or null")
    return value


def _bounded_int(text: str) -> int:
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise SigtuneError(f"a whole number of {len(text.lstrip('-'))} digits ({_show(text)}); a session's whole "
                           f"numbers have at most {MAX_INT_DIGITS} digits")
    return int(text)


_SURROGATE = re.compile(r"[\ud800-\udfff]")
_NESTED_TOO_DEEPLY = f"nests deeper than {MAX_NESTING} levels; a session file needs about 6"


def _escape_breaks(text: str | None) -> str | None:
    return None if text is None else text.replace("\r", "\\r").replace("\n", "\\n")


def _bad_scalar(value) -> str | None:
    """Why ``value`` cannot be in a session (it could not be saved as JSON, or used as text), or None."""
    if type(value) is float and not math.isfinite(value):
        return f"is {value}, not a finite number; a session file stores finite numbers or null"
    if type(value) is str and _SURROGATE.search(value):
        return ("holds a lone UTF-16 surrogate (a \\ud800-\\udfff escape without its pair), which is not "
                "text; remove it")
    return None


def _scan(data, where: str | None) -> None:
    """Refuse what no schema keyword catches, anywhere in ``data``: nesting deeper than
    :data:`MAX_NESTING`, NaN and infinities, lone surrogates in text (keys too).

    Iterative, so a hostile input cannot exhaust the stack; a problem names its JSON path.
    """
    stack = [(data, 1, ())]
    while stack:
        item, depth, path = stack.pop()
        members = item.items() if isinstance(item, dict) else enumerate(item)
        for key, value in members:
            problem = _bad_scalar(key) if isinstance(key, str) else None
            if isinstance(value, (dict, list)):
                if depth >= MAX_NESTING:
                    raise SigtuneError(_NESTED_TOO_DEEPLY, where)
                if value:  # an empty container holds nothing to check
                    stack.append((value, depth + 1, path + (key,)))
            elif problem is None:
                problem = _bad_scalar(value)
            if problem is not None:
                raise SigtuneError(f"{_path_text(path + (key,))}: {problem}", where)


def parse_session_text(text: str | bytes, where: str | None = None):
    """Parse session JSON text (or UTF-8 bytes) within the size and nesting limits; return the data.

    Also refused: duplicate keys, ``NaN``/``Infinity``, numbers beyond the
    float range (``1e400``) or of more than :data:`MAX_INT_DIGITS` digits, and
    lone surrogates in text.
    """
    size = len(text if isinstance(text, bytes) else text.encode("utf-8", "surrogatepass"))
    if size > MAX_SESSION_BYTES:
        raise SigtuneError(f"is {size} bytes; a session file is at most {MAX_SESSION_BYTES} bytes "
                           f"({MAX_SESSION_BYTES // 2**20} MiB). Is this really a session file?", where)
    if isinstance(text, bytes):
        try:
            text = text.decode("utf-8")
        except UnicodeDecodeError as err:
            raise SigtuneError(f"is not UTF-8 text (byte {err.start}); a session file is JSON text",
                               where) from None
    try:
        data = json.loads(text.lstrip("\ufeff"), object_pairs_hook=_refuse_duplicates,
                          parse_constant=_refuse_constant, parse_float=_finite_float, parse_int=_bounded_int)
    except json.JSONDecodeError as err:
        raise SigtuneError(f"is not valid JSON: {err.msg} at line {err.lineno} column {err.colno}",
                           where) from None
    except RecursionError:
        raise SigtuneError(_NESTED_TOO_DEEPLY, where) from None
    except SigtuneError as err:
        raise err.located(where) if where else err from None
    if isinstance(data, (dict, list)):
        _scan(data, where)
    return data


# ------------------------------------------------------------------ versions
def _migrate_v0(data: dict) -> dict:
    """Version 0 -> 1 (the version-0 layout is described in the module docstring)."""
    source = None
    if data.get("source") is not None or data.get("channels") is not None:
        source = {"path": data.get("source"), "sha256": None, "channels": data.get("channels")}
    analysis = {new: data[old] for old, new in (("spectrum", "spectrum"), ("bands", "band_fraction"),
                                                ("peaks", "n_peaks")) if old in data}
    migrated = {"format": FORMAT_TAG, "version": 1, "source": source,
                "setup": {"*": {"unit": data["unit"]}} if data.get("unit") else {},
                "chain": data["steps"], "analysis": analysis, "view": {}, "notes": data.get("notes", "")}
    if "sigtune" in data:
        migrated["sigtune"] = data["sigtune"]
    return migrated


#: version -> (the schema $defs entry describing that layout, the function lifting it by one version)
MIGRATIONS = {0: ("session_v0", _migrate_v0)}


def _current_layout(data, where: str | None) -> tuple[dict, int | None]:
    """Check format tag and version; migrate older versions. Return the data and the version migrated from."""
    if not isinstance(data, dict):
        raise SigtuneError(f"a session file holds one JSON object; got {_json_type(data)}", where)
    if data.get("format") != FORMAT_TAG:
        raise SigtuneError(f"format: not a sigtune session (format {_show(data.get('format'))}; "
                           f"expected {FORMAT_TAG!r})", where)
    version = data.get("version")
    if isinstance(version, bool) or not isinstance(version, int) or version < 0:
        raise SigtuneError(f"version: must be a whole number >= 0; got {_show(version)}", where)
    if version > FORMAT_VERSION:
        writer = data.get("sigtune", "(unknown)")
        writer = writer[:64] if isinstance(writer, str) else _show(writer)
        raise SigtuneError(f"version: the file is session version {_show(version)}, written by sigtune "
                           f"{writer}; this sigtune ({__version__}) reads versions up to {FORMAT_VERSION}. "
                           f"Upgrade sigtune to open it", where)
    original = version
    while version < FORMAT_VERSION:
        definition, lift = MIGRATIONS[version]
        _check_schema(data, where, definition)
        data, version = lift(data), version + 1
    return data, (original if original != FORMAT_VERSION else None)


# ------------------------------------------------------------------ building the parts
def _step_error_path(err: SigtuneError, prefix: str) -> str:
    """``"chain[2], cutoff"`` (a step's own check) -> ``"chain[2].cutoff"``."""
    where = err.where or prefix
    head, sep, tail = where.partition(", ")
    return f"{head}.{tail}" if sep and _IDENTIFIER.match(tail) else where


def _build_chain(steps, where: str | None) -> Chain:
    built, problems = [], []
    for i, item in enumerate(steps):
        try:
            built.append(item if not isinstance(item, Mapping) else step_from_dict(item, where=f"chain[{i}]"))
        except SigtuneError as err:
            problems.append((_step_error_path(err, f"chain[{i}]"), err.detail))
    _raise_problems(problems, where)
    return Chain(built)


_SETUP_KEYS = ("unit", "quantity", "sensitivity", "sensitivity_unit")


def _check_setup_entry(entry: Mapping) -> dict:
    """Return the entry with its unit in canonical form, or raise naming the key."""
    entry = dict(entry or {})
    unknown = sorted(set(entry) - set(_SETUP_KEYS))
    if unknown:
        raise SigtuneError(f"unknown key; valid keys: {', '.join(_SETUP_KEYS)}", unknown[0])
    if entry.get("unit") is not None:
        entry["unit"] = unit_info(entry["unit"], "unit").symbol
    if entry.get("quantity") is not None:
        check_choice(entry["quantity"], "quantity", QUANTITIES)
    if entry.get("sensitivity") is not None or entry.get("sensitivity_unit") is not None:
        sensitivity_factor(entry.get("sensitivity") or 1.0, entry.get("sensitivity_unit") or "mV/g")
    return entry


def _check_setup(setup: Mapping, where: str | None) -> dict:
    problems, checked = [], {}
    for name, entry in setup.items():
        try:
            checked[str(name)] = _check_setup_entry(entry)
        except SigtuneError as err:
            problems.append((_path_text(["setup", str(name), err.where or ""]), err.detail))
    _raise_problems(problems, where)
    return checked


def _check_source(source, where: str | None) -> dict | None:
    if source is None:
        return None
    unknown = sorted(set(source) - {"path", "sha256", "channels"})
    if unknown:
        raise SigtuneError(f"source.{unknown[0]}: unknown key; valid keys: path, sha256, channels", where)
    path = source.get("path")
    if path is not None and "\0" in str(path):  # no file system allows it; os functions would raise ValueError
        raise SigtuneError("source.path: holds a NUL character, which no file name can; give the recording's "
                           "path relative to the session file", where)
    channels = source.get("channels")
    return {"path": None if path is None else str(path), "sha256": source.get("sha256"),
            "channels": None if channels is None else [str(c) for c in channels]}


def _is_file(source: Mapping | None) -> bool:
    """True if ``source`` names a recording file (not nothing, not a built-in demo)."""
    path = (source or {}).get("path")
    return bool(path) and not str(path).startswith(DEMO_SOURCE_PREFIX)


def resolve_in_folder(path: str | os.PathLike, data_root: str | os.PathLike, where: str = "path") -> Path:
    """Return ``path`` resolved, if it lies inside the folder ``data_root``.

    A relative ``path`` is taken relative to ``data_root``. Every ``..`` and
    symbolic link is followed (:meth:`pathlib.Path.resolve`), so neither
    ``../``, an absolute path nor a link pointing out of the folder reaches
    another file. Open the path returned, not the one given.

    Raises
    ------
    SigtuneError
        (located at ``where``) ``path`` leads outside ``data_root``, or cannot
        be resolved (a loop of symbolic links).

    Examples
    --------
    >>> root = Path("/no-such-folder/sigtune-data")  # need not exist
    >>> str(resolve_in_folder("site_a/run_1.h5", root))
    '/no-such-folder/sigtune-data/site_a/run_1.h5'
    >>> resolve_in_folder("../elsewhere.h5", root, "recording")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    dsp.errors.SigtuneError: recording: '../elsewhere.h5' leads outside the data folder ...
    """
    given = os.fspath(path)
    root = Path(data_root).resolve()
    try:
        resolved = (root / Path(given).expanduser()).resolve()  # an absolute `given` replaces `root`
    except (OSError, RuntimeError) as err:  # RuntimeError: a loop of symbolic links (Python < 3.13)
        raise SigtuneError(f"{given!r} cannot be resolved ({err}); give a file inside the data folder "
                           f"{str(root)!r}", where) from None
    if not resolved.is_relative_to(root):
        raise SigtuneError(f"{given!r} leads outside the data folder {str(root)!r} (after following '..' and "
                           f"symbolic links); only files inside it are opened. Put the file in the data "
                           f"folder and give its path relative to that folder", where)
    return resolved


def resolve_source(session: "Session", data_root: str | os.PathLike) -> Path | None:
    """Return the session's source file, resolved, if it lies inside the folder ``data_root``.

    As :func:`resolve_in_folder` for ``source.path``. Returns None when the
    session names no file (none, or a built-in demo).

    Raises
    ------
    SigtuneError
        ``source.path`` leads outside ``data_root``, or cannot be resolved
        (a loop of symbolic links).

    Examples
    --------
    >>> root = Path("/no-such-folder/sigtune-data")  # need not exist
    >>> str(resolve_source(Session(source={"path": "site_a/run_1.h5"}), root))
    '/no-such-folder/sigtune-data/site_a/run_1.h5'
    >>> resolve_source(Session(source={"path": "../elsewhere.h5"}), root)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    dsp.errors.SigtuneError: source.path: '../elsewhere.h5' leads outside the data folder ...
    """
    if not _is_file(session.source):
        return None
    where = f"{session.location}: source.path" if session.location else "source.path"
    return resolve_in_folder(session.source["path"], data_root, where)


def file_sha256(path: str | os.PathLike, block_bytes: int = 1 << 22) -> str:
    """Return the SHA-256 of a file's bytes as 64 hex digits (read in 4 MiB blocks)."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(block_bytes):
            digest.update(block)
    return digest.hexdigest()


def describe_source(path: str | os.PathLike, channels=None) -> dict:
    """Return the ``source`` entry for a recording file: absolute path, SHA-256, channel selection."""
    path = Path(path).absolute()
    return {"path": str(path), "sha256": file_sha256(path),
            "channels": None if channels is None else [str(c) for c in channels]}


# ------------------------------------------------------------------ setup
def setup_for(name: str, setup: Mapping[str, Mapping]) -> tuple[dict, list, str]:
    """Return what the setup does to channel ``name``: declared header changes, steps, and its JSON path.

    The declared changes (``unit``, ``quantity``) relabel the samples; the
    steps (a :class:`dsp.Calibrate` when a sensitivity is given) run first in
    the chain. Channels with no entry get ``({}, [], "setup")``.
    """
    key = name if name in setup else "*" if "*" in setup else None
    if key is None:
        return {}, [], "setup"
    entry = setup[key]
    declared = {k: entry[k] for k in ("unit", "quantity") if entry.get(k) is not None}
    steps = []
    if entry.get("sensitivity") is not None:
        steps.append(Calibrate(entry["sensitivity"], entry.get("sensitivity_unit") or "mV/g"))
    return declared, steps, _path_text(["setup", key])


def declare_units(channel: Channel, declared: Mapping[str, str]) -> Channel:
    """Relabel ``channel`` with a declared ``unit`` and/or ``quantity`` (samples unchanged)."""
    if not declared:
        return channel
    unit = declared.get("unit", channel.unit)
    return channel.replace(unit=unit, quantity=declared.get("quantity") or unit_info(unit).quantity)


def apply_setup(channel: Channel, setup: Mapping[str, Mapping]) -> Channel:
    """Apply the session's setup entry for ``channel`` (its name, else ``"*"``).

    ``unit``/``quantity`` declare what the samples are (values unchanged,
    as when a file's own metadata is corrected); ``sensitivity`` then
    calibrates a voltage channel with a :class:`dsp.Calibrate` step (in the
    history). Channels with no entry pass unchanged.

    Examples
    --------
    >>> import numpy as np
    >>> ch = Channel(np.full(4, 0.2), fs=4.0, name="acc", unit="V")
    >>> out = apply_setup(ch, {"*": {"sensitivity": 100.0, "sensitivity_unit": "mV/g"}})
    >>> out.unit, float(out.data[0])
    ('g', 2.0)
    """
    declared, steps, where = setup_for(channel.name, setup)
    try:
        channel = declare_units(channel, declared)
        for step in steps:
            channel = step.apply(channel)
    except SigtuneError as err:
        raise err.located(f"{where} (channel {channel.name!r})") from None
    return channel


# ------------------------------------------------------------------ the session
@dataclass(frozen=True)
class SessionResult:
    """What :meth:`Session.apply` produced: processed channels and their summaries, by name."""

    channels: dict[str, Channel]
    summaries: dict[str, dict]
    source: str | None = None

    @property
    def recording(self) -> Recording:
        """The processed channels as a :class:`Recording` (for :func:`dsp.write`)."""
        return Recording(list(self.channels.values()), source=self.source)


@dataclass
class Session:
    """Settings to replay: setup, processing chain and analysis, plus view state and notes.

    Parameters
    ----------
    source : dict, optional
        ``{"path", "sha256", "channels"}`` of the recording they were tuned on
        (see :func:`describe_source`); ``channels`` selects what
        :meth:`apply` processes (None: every channel).
    setup : dict
        Channel name (or ``"*"``) -> ``{"unit", "quantity", "sensitivity",
        "sensitivity_unit"}``, applied before the chain (see :func:`apply_setup`).
    chain : Chain or list
        The processing steps (or their ``to_dict()`` data).
    analysis : AnalysisSettings or dict
    view : dict
        Free-form view state of the dashboard (JSON-ready).
    notes : str
    written_by : str, optional
        sigtune version that wrote the file (set on load).
    migrated_from : int, optional
        The file's version when it was older than :data:`FORMAT_VERSION`.
    location : Path, optional
        The file it was loaded from or last saved to.

    Examples
    --------
    >>> import numpy as np
    >>> from dsp import Gain
    >>> s = Session(chain=[Gain(2.0)], analysis={"band_fraction": 0, "integration": {"methods": []}})
    >>> ch, summary = s.apply_channel(Channel(np.ones(1000), fs=100.0, name="a"))
    >>> float(ch.data[0]), summary["rms"]
    (2.0, 2.0)
    >>> Session.from_dict(s.to_dict()).to_dict() == s.to_dict()
    True
    """

    source: dict | None = None
    setup: dict = field(default_factory=dict)
    chain: Chain = field(default_factory=Chain)
    analysis: AnalysisSettings = field(default_factory=AnalysisSettings)
    view: dict = field(default_factory=dict)
    notes: str = ""
    written_by: str | None = None
    migrated_from: int | None = None
    location: Path | None = None

    def __post_init__(self):
        where = str(self.location) if self.location else None
        if not isinstance(self.chain, Chain):
            self.chain = _build_chain(self.chain, where)
        if not isinstance(self.analysis, AnalysisSettings):
            try:
                self.analysis = AnalysisSettings.from_dict(self.analysis)
            except SigtuneError as err:
                raise SigtuneError(f"{err.where}: {err.detail}", where) from None
        self.source = _check_source(self.source, where)
        self.setup = _check_setup(self.setup or {}, where)
        self.view = dict(self.view or {})
        self.notes = str(self.notes or "")

    # ---- files ----
    @classmethod
    def load(cls, path: str | os.PathLike, *, verify_source: bool = True,
             data_root: str | os.PathLike | None = None) -> "Session":
        """Read a session file (any version up to :data:`FORMAT_VERSION`).

        The source path is resolved against the file's folder. With
        ``verify_source`` the source's SHA-256 is checked (a mismatch or a
        missing file warns; see :meth:`check_source`). With ``data_root`` (the
        folder a server lets its users read) a source path leading outside it
        is refused (see :func:`resolve_source`).
        """
        path = Path(path)
        size = path.stat().st_size  # FileNotFoundError names the path
        if size > MAX_SESSION_BYTES:
            raise SigtuneError(f"is {size} bytes; a session file is at most {MAX_SESSION_BYTES} bytes "
                               f"({MAX_SESSION_BYTES // 2**20} MiB). Is this really a session file?", str(path))
        with open(path, "rb") as fh:
            raw = fh.read(MAX_SESSION_BYTES + 1)
        session = cls._from_checked(parse_session_text(raw, str(path)), str(path), path.parent)
        session.location = path
        if data_root is not None:
            resolve_source(session, data_root)
        if verify_source:
            session.check_source(data_root=data_root)
        return session

    @classmethod
    def loads(cls, text: str | bytes, *, where: str | None = None, base: str | os.PathLike | None = None,
              verify_source: bool = False, data_root: str | os.PathLike | None = None) -> "Session":
        """Read a session from JSON text or bytes (an upload, say); ``base`` resolves a relative source.

        With ``data_root`` a source path leading outside that folder is refused
        (see :func:`resolve_source`); a relative path is then read relative to
        ``base``, else to ``data_root``.
        """
        base = data_root if base is None else base
        session = cls._from_checked(parse_session_text(text, where), where, base)
        if data_root is not None:
            try:
                resolve_source(session, data_root)
            except SigtuneError as err:
                raise SigtuneError(f"{err.where}: {err.detail}", where) from None
        if verify_source:
            session.check_source(data_root=data_root)
        return session

    @classmethod
    def from_dict(cls, data, where: str | None = None, base: str | os.PathLike | None = None) -> "Session":
        """Build a session from file data: check the version (migrating older ones) and the schema.

        ``where`` (a file name) prefixes error messages; ``base`` is the
        folder a relative ``source.path`` is resolved against. ``data`` is
        not changed, and the session shares no part of it.
        """
        if isinstance(data, (dict, list)):
            _scan(data, where)
        session = cls._from_checked(data, where, base)
        session.view, session.analysis = copy.deepcopy(session.view), copy.deepcopy(session.analysis)
        return session

    @classmethod
    def _from_checked(cls, data, where: str | None, base) -> "Session":
        """:meth:`from_dict` of data already scanned (parsed here or by :func:`_scan`); may share parts of it."""
        try:
            return cls._build(data, where, base)
        except SigtuneError as err:
            if "\n" not in str(err) and "\r" not in str(err):
                raise
            # a key or value with a line break, quoted raw by a step's or setting's own check: one line
            raise SigtuneError(_escape_breaks(err.detail), _escape_breaks(err.where)) from None

    @classmethod
    def _build(cls, data, where: str | None, base) -> "Session":
        data, migrated_from = _current_layout(data, where)
        _check_schema(data, where)
        chain = _build_chain(data.get("chain", []), where)
        try:
            analysis = AnalysisSettings.from_dict(data.get("analysis"))
        except SigtuneError as err:
            raise SigtuneError(f"{err.where}: {err.detail}", where) from None
        source = data.get("source")
        if _is_file(source) and base is not None and not os.path.isabs(source["path"]):
            source = {**source, "path": os.path.normpath(os.path.join(os.fspath(base), source["path"]))}
        try:
            return cls(source=source, setup=data.get("setup", {}), chain=chain, analysis=analysis,
                       view=data.get("view", {}), notes=data.get("notes", ""), written_by=data.get("sigtune"),
                       migrated_from=migrated_from)
        except SigtuneError as err:
            raise (err.located(where) if where else err) from None

    def to_dict(self, relative_to: str | os.PathLike | None = None) -> dict[str, Any]:
        """Return the session as version-:data:`FORMAT_VERSION` data.

        With ``relative_to`` (a folder) the source path is written relative to it.
        """
        source = None if self.source is None else dict(self.source)
        if _is_file(source) and relative_to is not None:
            source["path"] = Path(os.path.relpath(os.path.abspath(source["path"]),
                                                  os.path.abspath(relative_to))).as_posix()
        return {"format": FORMAT_TAG, "version": FORMAT_VERSION, "sigtune": __version__, "source": source,
                "setup": copy.deepcopy(self.setup), "chain": self.chain.to_list(),
                "analysis": self.analysis.to_dict(), "view": copy.deepcopy(self.view), "notes": self.notes}

    def save(self, path: str | os.PathLike) -> Path:
        """Write the session file atomically (temporary file, then rename); return its path.

        The source path is stored relative to the file's folder. The data are
        checked against the schema first, so a saved file always loads.
        """
        path = Path(path)
        data = self.to_dict(relative_to=path.absolute().parent)
        _check_schema(data, str(path))
        try:
            text = json.dumps(data, indent=2, allow_nan=False, ensure_ascii=False) + "\n"
            size = len(text.encode("utf-8"))  # UnicodeEncodeError (a ValueError): a lone surrogate
        except (TypeError, ValueError) as err:
            raise SigtuneError(f"view or notes hold a value JSON cannot store ({err})", str(path)) from None
        if size > MAX_SESSION_BYTES:
            raise SigtuneError(f"the session would exceed {MAX_SESSION_BYTES} bytes; trim the view state",
                               str(path))
        write_text_atomic(path, text)
        self.location = path
        return path

    # ---- identity ----
    def fingerprint(self) -> str:
        """SHA-256 of what decides the results: channel selection, setup, chain and analysis.

        Notes, view state and the source's path and hash are left out, so the
        same settings saved twice (or in another folder) give the same value.
        """
        data = self.to_dict()
        key = {"version": FORMAT_VERSION, "channels": (data["source"] or {}).get("channels"),
               "setup": data["setup"], "chain": data["chain"], "analysis": data["analysis"]}
        return hashlib.sha256(json.dumps(key, sort_keys=True, separators=(",", ":")).encode()).hexdigest()

    @property
    def source_path(self) -> Path | None:
        """The source recording's file (absolute once loaded from a file); None for none or a demo."""
        return Path(self.source["path"]) if _is_file(self.source) else None

    def check_source(self, *, data_root: str | os.PathLike | None = None) -> str:
        """Compare the source file's SHA-256 with the recorded one.

        Returns ``"match"``, ``"mismatch"``, ``"missing"`` or ``"unchecked"``
        (no path or no hash recorded). A mismatch or a missing file is
        reported with a :class:`SigtuneWarning`, not an error: the settings
        remain valid for other recordings. With ``data_root`` a source
        leading outside that folder raises :class:`SigtuneError` before any
        file is opened (see :func:`resolve_source`).
        """
        path, expected = self.source_path, (self.source or {}).get("sha256")
        if data_root is not None:
            path = resolve_source(self, data_root)
        if path is None or not expected:
            return "unchecked"
        where = f"{self.location}: " if self.location else ""
        if not path.is_file():
            warnings.warn(f"{where}source recording {str(path)!r} not found; the settings can still be "
                          f"applied to other recordings", SigtuneWarning, stacklevel=2)
            return "missing"
        actual = file_sha256(path)
        if actual != expected:
            warnings.warn(f"{where}source recording {str(path)!r} has changed since the session was saved "
                          f"(SHA-256 {actual[:12]}..., recorded {expected[:12]}...); the settings are "
                          f"applied anyway, check that they still suit it", SigtuneWarning, stacklevel=2)
            return "mismatch"
        return "match"

    # ---- replay ----
    def channel_names(self, recording: Recording | list[str]) -> list[str]:
        """The channels the session processes: its selection, else every channel of ``recording``.

        ``recording`` may be a :class:`Recording` or the list of its channel names.
        """
        names = recording.names if isinstance(recording, Recording) else list(recording)
        selected = (self.source or {}).get("channels")
        if not selected:
            return names
        missing = [n for n in selected if n not in names]
        if missing:
            where = recording.source if isinstance(recording, Recording) else None
            raise SigtuneError(f"the session selects channel(s) {', '.join(map(repr, missing))}, which the "
                               f"recording does not have; its channels: {', '.join(names)}. "
                               f"Edit source.channels in the session", where or "recording")
        return list(selected)

    def steps_for(self, name: str) -> tuple[dict, list, list[str]]:
        """Return the declared unit/quantity, the steps (setup, then chain) and their locations for a channel."""
        declared, setup_steps, where = setup_for(name, self.setup)
        steps = setup_steps + list(self.chain)
        locations = [f"{where} (channel {name!r})"] * len(setup_steps) + [
            f"chain[{i}] ({step.op})" for i, step in enumerate(self.chain)]
        return declared, steps, locations

    def process(self, channel: Channel) -> Channel:
        """Apply the setup, then the chain, to one channel."""
        channel = apply_setup(channel, self.setup)
        for i, step in enumerate(self.chain):
            try:
                channel = step.apply(channel)
            except SigtuneError as err:
                raise err.located(f"chain[{i}] ({step.op})") from None
        return channel

    def apply_channel(self, channel: Channel) -> tuple[Channel, dict]:
        """Return the processed channel and its :func:`dsp.analyse` summary."""
        processed = self.process(channel)
        return processed, analyse(processed, self.analysis)

    def apply(self, recording: Recording) -> SessionResult:
        """Process and analyse every selected channel of ``recording``."""
        channels, summaries = {}, {}
        for name in self.channel_names(recording):
            channels[name], summaries[name] = self.apply_channel(recording[name])
        return SessionResult(channels, summaries, recording.source)

    def replace(self, **changes) -> "Session":
        """Return a copy with some fields changed."""
        return dataclasses.replace(self, **changes)
