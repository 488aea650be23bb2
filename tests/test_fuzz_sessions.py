"""Hypothesis fuzzing of the session loader: the only acceptable outcomes are a Session or SigtuneError.

Inputs: random JSON values (``st.recursive``) as data and as file text,
random JSON values under the format tag and version, mutations of the
sample sessions in ``sample_sessions/`` (keys dropped, values replaced by
other types or random JSON, keys and list items inserted), byte-level
mutations of their text, and random bytes. A Session must survive
``to_dict`` -> ``from_dict`` unchanged and save to a file that loads; an
error must be one line.

CI runs a fixed, reproducible set of ``SIGTUNE_FUZZ_EXAMPLES`` (default 150)
examples per test (``derandomize``); setting the variable, e.g.
``SIGTUNE_FUZZ_EXAMPLES=5000``, runs that many fresh random examples per
test instead (the convention of ``tests/test_fuzz_readers.py``).
"""

from __future__ import annotations

import atexit
import collections
import copy
import json
import os
import shutil
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dsp import SigtuneError
from dsp.session import Session

EXAMPLES = int(os.environ.get("SIGTUNE_FUZZ_EXAMPLES", "150"))
LONG_RUN = "SIGTUNE_FUZZ_EXAMPLES" in os.environ
FUZZ = settings(max_examples=EXAMPLES, deadline=None, database=None, derandomize=not LONG_RUN,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large], print_blob=True)
TIMEOUT = pytest.mark.timeout(max(120, EXAMPLES // 2))
SAMPLES = {p.stem: json.loads(p.read_text(encoding="utf-8"))
           for p in sorted((Path(__file__).resolve().parents[1] / "sample_sessions").glob("*.json"))}
OUTCOMES: collections.Counter = collections.Counter()
FOLDER = Path(tempfile.mkdtemp(prefix="sigtune-fuzz-sessions-"))  # hypothesis examples cannot use tmp_path
atexit.register(shutil.rmtree, FOLDER, True)

# JSON scalars, including the awkward ones: huge and tiny numbers, negative zero, long and odd text
SCALARS = (st.none() | st.booleans() | st.integers(min_value=-10**30, max_value=10**30)
           | st.floats(allow_nan=False, allow_infinity=False) | st.sampled_from([0, 1, 2, 3, 4, 16, -1, 10**6, 1e308,
                                                                               -0.0, 5e-324, 0.5, 1476.0])
           | st.text(max_size=20) | st.sampled_from(["", "*", "op", "gain", "filter", "hann", "kaiser:8.6",
                                                   "demo:pump_skid", "../x.h5", "/etc/passwd", "m/s^2", "mV/g",
                                                   "__class__", "__import__('os')", "velocity", "time"]))
KEYS = st.text(max_size=12) | st.sampled_from(["op", "format", "version", "chain", "source", "setup", "analysis",
                                               "view", "notes", "path", "channels", "unit", "cutoff", "order",
                                               "kind", "band_fraction", "n_peaks", "*", "spectrum", "factor"])
JSON = st.recursive(SCALARS, lambda inner: st.lists(inner, max_size=5) | st.dictionaries(KEYS, inner, max_size=5),
                    max_leaves=25)


def _check(load, label: str) -> str:
    """Run ``load``; a Session (which must round-trip and save) or a one-line SigtuneError; else fail."""
    try:
        session = load()
    except SigtuneError as err:
        assert "\n" not in str(err), str(err)
        OUTCOMES[label, "error"] += 1
        return "error"
    assert isinstance(session, Session)
    data = session.to_dict()
    assert Session.from_dict(data).to_dict() == data
    saved = session.save(FOLDER / "saved.json")
    assert Session.load(saved, verify_source=False).to_dict()["chain"] == data["chain"]
    OUTCOMES[label, "load"] += 1
    return "load"


def _both(data, label: str) -> None:
    """The data as a caller's dict, and as file text."""
    _check(lambda: Session.from_dict(copy.deepcopy(data)), label + " (data)")
    try:
        text = json.dumps(data)
    except (ValueError, TypeError):  # pragma: no cover - the strategies make JSON values only
        return
    _check(lambda: Session.loads(text, where="fuzz.json"), label + " (text)")


@TIMEOUT
@FUZZ
@given(JSON)
def test_random_json_values(value):
    _both(value, "random JSON")


@TIMEOUT
@FUZZ
@given(st.dictionaries(KEYS, JSON, max_size=8), st.sampled_from([0, 1]))
def test_random_objects_under_the_format_tag(extra, version):
    data = {**extra, "format": "sigtune-session", "version": version}
    _both(data, "random object, version 0/1")


def _paths(value, prefix=()):
    yield prefix
    members = value.items() if isinstance(value, dict) else enumerate(value) if isinstance(value, list) else ()
    for key, item in members:
        yield from _paths(item, prefix + (key,))


@st.composite
def mutated_samples(draw):
    """A sample session with 1-4 mutations: drop a key, replace a value, insert a key or a list item."""
    data = copy.deepcopy(SAMPLES[draw(st.sampled_from(sorted(SAMPLES)))])
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in _paths(data) if p]
        path = draw(st.sampled_from(paths))
        parent = data
        for part in path[:-1]:
            parent = parent[part]
        action = draw(st.sampled_from(["drop", "replace", "insert"]))
        if action == "drop":
            del parent[path[-1]]
        elif action == "replace":
            parent[path[-1]] = draw(JSON)
        elif isinstance(parent, list):
            parent.insert(draw(st.integers(0, len(parent))), draw(JSON))
        else:
            parent[draw(KEYS)] = draw(JSON)
    return data


@TIMEOUT
@FUZZ
@given(mutated_samples())
def test_mutated_sample_sessions(data):
    _both(data, "mutated sample")


@st.composite
def mutated_text(draw):
    """A sample session's bytes with flipped bits, cuts, inserted and overwritten byte runs."""
    raw = bytearray(json.dumps(SAMPLES[draw(st.sampled_from(sorted(SAMPLES)))], indent=1).encode())
    for _ in range(draw(st.integers(1, 6))):
        position = draw(st.integers(0, len(raw) - 1))
        action = draw(st.sampled_from(["flip", "cut", "insert", "overwrite"]))
        if action == "flip":
            raw[position] ^= 1 << draw(st.integers(0, 7))
        elif action == "cut":
            del raw[position:position + draw(st.integers(1, 64))]
        elif action == "insert":
            raw[position:position] = draw(st.binary(min_size=1, max_size=16) | st.sampled_from(
                [b"[", b"{", b"NaN", b"1e400", b'"\\ud800"', b",", b'"a":1,']))
        else:
            chunk = draw(st.binary(min_size=1, max_size=16))
            raw[position:position + len(chunk)] = chunk
        if not raw:
            break
    return bytes(raw)


@TIMEOUT
@FUZZ
@given(mutated_text())
def test_mutated_sample_bytes(raw):
    path = FOLDER / "mutated.json"
    path.write_bytes(raw)
    _check(lambda: Session.load(path, verify_source=False), "mutated bytes")


@TIMEOUT
@FUZZ
@given(st.binary(max_size=2048))
def test_random_bytes(raw):
    _check(lambda: Session.loads(raw, where="random.json"), "random bytes")


def test_fuzz_summary(capsys):
    """Print the outcome counts (run with -s to see them)."""
    with capsys.disabled():
        print(f"\n| session fuzz test ({EXAMPLES} examples each) | inputs | SigtuneError | Session |")
        print("| --- | ---: | ---: | ---: |")
        labels = sorted({label for label, _ in OUTCOMES})
        for label in labels:
            error, load = OUTCOMES[label, "error"], OUTCOMES[label, "load"]
            print(f"| {label} | {error + load} | {error} | {load} |")
