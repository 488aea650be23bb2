"""Hypothesis fuzzing of the readers: the only acceptable outcomes are a Recording or SigtuneError.

Inputs: random bytes (bare, and behind each format's magic bytes), valid
files written by ``dsp.write`` with bit flips, truncations, inserted and
overwritten bytes, and valid files whose descriptions (NPZ ``sigtune_meta``,
WAV sidecar, HDF5 attributes) hold random JSON values.

CI runs a fixed, reproducible set of ``SIGTUNE_FUZZ_EXAMPLES`` (default 150)
examples per test (``derandomize``); setting the variable, e.g.
``SIGTUNE_FUZZ_EXAMPLES=20000``, runs that many fresh random examples per
test instead. A hang inside a C library cannot be interrupted by a signal, so
these tests use pytest-timeout's thread method: it dumps the stacks and ends
the run rather than waiting forever.
"""

from __future__ import annotations

import collections
import json
import os

import h5py
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import dsp
from dsp import Channel, Recording, SigtuneError

EXAMPLES = int(os.environ.get("SIGTUNE_FUZZ_EXAMPLES", "150"))
LONG_RUN = "SIGTUNE_FUZZ_EXAMPLES" in os.environ
FUZZ = settings(max_examples=EXAMPLES, deadline=None, database=None, derandomize=not LONG_RUN,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large], print_blob=True)
TIMEOUT = pytest.mark.timeout(max(120, EXAMPLES // 2), method="thread")
FORMATS = ("csv", "tsv", "wav", "h5", "npz")
MAGIC = {"csv": b"time [s],A1 [g]\n", "tsv": b"time [s]\tA1 [g]\n", "wav": b"RIFF\x24\x08\x00\x00WAVEfmt ",
         "h5": b"\x89HDF\r\n\x1a\n", "npz": b"PK\x03\x04"}
OUTCOMES: collections.Counter = collections.Counter()


def _recording() -> Recording:
    t = np.arange(64) / 64.0
    return Recording([Channel(np.sin(2 * np.pi * 4 * t), 64.0, name="A1", unit="g"),
                      Channel(np.cos(2 * np.pi * 2 * t), 64.0, name="A2", unit="mm/s")],
                     metadata={"site": "Harlow Weir"}, timestamps=t)


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@pytest.fixture(scope="module")
def valid(folder) -> dict[str, bytes]:
    """The bytes of one valid file per format, written by dsp.write."""
    written = {fmt: dsp.write(_recording(), folder / f"valid.{fmt}",
                              **({"sidecar": False} if fmt == "wav" else {}))
               for fmt in FORMATS}
    written["wav_pcm16"] = dsp.write(_recording(), folder / "valid16.wav", subtype="PCM_16", sidecar=False)
    return {key: path.read_bytes() for key, path in written.items()}


def _outcome(path, label: str, **options) -> str:
    """Read ``path``: a Recording or SigtuneError naming the file on one line; anything else fails."""
    try:
        recording = dsp.read(path, **options)
    except SigtuneError as err:
        message = str(err)
        assert str(path) in message and "\n" not in message, message
        OUTCOMES[label, "error"] += 1
        return "error"
    assert isinstance(recording, Recording) and len(recording) >= 1
    for ch in recording:
        assert ch.n_samples >= 2 and np.isfinite(ch.fs) and ch.fs > 0
        assert options.get("allow_nonfinite") or np.all(np.isfinite(ch.data))
    OUTCOMES[label, "read"] += 1
    return "read"


def _report(label: str) -> str:
    return f"{label}: {OUTCOMES[label, 'error']} project errors, {OUTCOMES[label, 'read']} reads"


# ---------------------------------------------------------------- byte-level

MUTATION = st.one_of(
    st.tuples(st.just("flip"), st.integers(0, 2**20), st.integers(0, 7)),
    st.tuples(st.just("truncate"), st.integers(0, 2**20)),
    st.tuples(st.just("insert"), st.integers(0, 2**20), st.binary(min_size=1, max_size=16)),
    st.tuples(st.just("overwrite"), st.integers(0, 2**20), st.binary(min_size=1, max_size=16)),
)


def mutate(data: bytes, operations) -> bytes:
    """Apply bit flips, truncations, insertions and overwrites (positions wrap round the length)."""
    out = bytearray(data)
    for op, position, *arg in operations:
        at = position % (len(out) + 1)
        if op == "flip" and at < len(out):
            out[at] ^= 1 << arg[0]
        elif op == "truncate":
            del out[at:]
        elif op == "insert":
            out[at:at] = arg[0]
        elif op == "overwrite":
            out[at:at + len(arg[0])] = arg[0]
    return bytes(out)


def test_mutate_applies_each_operation():
    assert mutate(b"abcd", [("flip", 0, 0)]) == b"`bcd"  # 'a' ^ 1
    assert mutate(b"abcd", [("truncate", 2)]) == b"ab"
    assert mutate(b"abcd", [("insert", 1, b"XY")]) == b"aXYbcd"
    assert mutate(b"abcd", [("overwrite", 3, b"XY")]) == b"abcXY"
    assert mutate(b"abcd", [("truncate", 9)]) == b"abcd"  # 9 % 5 = 4: nothing cut


@TIMEOUT
@pytest.mark.parametrize("base", [*FORMATS, "wav_pcm16"])
def test_mutated_valid_files(base, valid, folder, capsys):
    fmt = base.split("_")[0]
    label = f"mutated {base}"

    @FUZZ
    @given(operations=st.lists(MUTATION, min_size=1, max_size=6))
    def run(operations):
        path = folder / f"mutated_{base}.{fmt}"
        path.write_bytes(mutate(valid[base], operations))
        _outcome(path, label)

    run()
    with capsys.disabled():
        print(f"\n{_report(label)}")
    assert OUTCOMES[label, "error"] > 0  # the mutations do reach the readers' checks


@TIMEOUT
@pytest.mark.parametrize("fmt", FORMATS)
def test_random_bytes(fmt, folder, capsys):
    label = f"random bytes {fmt}"

    @FUZZ
    @given(magic=st.booleans(), body=st.binary(min_size=1, max_size=4096))
    def run(magic, body):
        path = folder / f"random.{fmt}"
        path.write_bytes((MAGIC[fmt] if magic else b"") + body)
        _outcome(path, label)

    run()
    with capsys.disabled():
        print(f"\n{_report(label)}")


# ---------------------------------------------------------------- structured: random descriptions

JSON = st.recursive(
    st.none() | st.booleans() | st.integers(-2**70, 2**70) | st.floats() | st.text(max_size=12),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner, max_size=4),
    max_leaves=12)
CHANNEL_KEYS = ("array", "name", "fs_hz", "unit", "quantity", "start_time_s", "metadata", "history")
SIDECAR_KEYS = ("name", "unit", "quantity", "scale", "sensitivity", "sensitivity_unit", "full_scale_volts",
                "start_time_s", "metadata", "history")


def _entry_changes(keys):
    """Some keys of a description replaced by random JSON values, or removed."""
    return st.dictionaries(st.sampled_from(keys), st.one_of(JSON, st.just("<removed>")), max_size=4)


def _changed(entry: dict, changes: dict) -> dict:
    out = dict(entry)
    for key, value in changes.items():
        if value == "<removed>":
            out.pop(key, None)
        else:
            out[key] = value
    return out


@TIMEOUT
def test_npz_with_random_descriptions(folder, capsys):
    label = "random sigtune_meta npz"
    entry = {"array": "channel_000000", "name": "A1", "fs_hz": 64.0, "unit": "g", "quantity": "acceleration",
             "start_time_s": 0.0, "metadata": {}, "history": []}

    @FUZZ
    @given(changes=_entry_changes(CHANNEL_KEYS),
           top=_entry_changes(("metadata", "layout_version", "channels")))
    def run(changes, top):
        meta = _changed({"layout": "sigtune-recording-npz", "layout_version": 1, "metadata": {},
                         "channels": [_changed(entry, changes)]}, top)
        path = folder / "described.npz"
        with open(path, "wb") as fh:
            np.savez(fh, channel_000000=np.arange(64.0), sigtune_meta=np.array(json.dumps(meta)))
        _outcome(path, label, allow_nonfinite=True)

    run()
    with capsys.disabled():
        print(f"\n{_report(label)}")
    assert OUTCOMES[label, "read"] > 0 and OUTCOMES[label, "error"] > 0


@TIMEOUT
def test_wav_with_random_sidecars(folder, capsys):
    label = "random sidecar wav"
    path = dsp.write(_recording(), folder / "sidecar.wav")
    side = dsp.io.wav.sidecar_path(path)
    base = json.loads(side.read_text())

    @FUZZ
    @given(changes=_entry_changes(SIDECAR_KEYS), top=_entry_changes(("layout", "metadata", "channels")))
    def run(changes, top):
        document = _changed({**base,
                             "channels": [_changed(base["channels"][0], changes), base["channels"][1]]},
                            top)
        side.write_text(json.dumps(document))
        _outcome(path, label)

    run()
    with capsys.disabled():
        print(f"\n{_report(label)}")
    assert OUTCOMES[label, "read"] > 0 and OUTCOMES[label, "error"] > 0


ATTRIBUTE = st.one_of(st.text(alphabet=st.characters(blacklist_categories=("Cs",),
                                                     blacklist_characters="\x00"),
                              max_size=12),  # HDF5 text attributes cannot hold NUL
                      st.floats(), st.integers(-2**63, 2**63 - 1), JSON.map(json.dumps))


@TIMEOUT
def test_hdf5_with_random_attributes(folder, capsys):
    label = "random attributes h5"
    volts = Channel(np.sin(np.arange(64) / 3.0), 64.0, name="V1", unit="V",
                    metadata={"sensitivity": 100.0, "sensitivity_unit": "mV/g"})
    valid_path = dsp.write(Recording([volts, _recording()[1]]), folder / "attrs_valid.h5")
    keys = ("name", "fs_hz", "unit", "quantity", "start_time_s", "metadata", "history", "sensitivity",
            "sensitivity_unit")

    @FUZZ
    @given(channel=st.dictionaries(st.sampled_from(keys), st.one_of(ATTRIBUTE, st.just("<removed>")),
                                   max_size=4),
           root=st.dictionaries(st.sampled_from(("sigtune_layout_version", "metadata")), ATTRIBUTE,
                                max_size=2))
    def run(channel, root):
        path = folder / "attrs.h5"
        path.write_bytes(valid_path.read_bytes())
        with h5py.File(path, "a") as f:
            attrs = f["channels/000000"].attrs
            for key, value in channel.items():
                if value == "<removed>":
                    attrs.pop(key, None)
                else:
                    attrs[key] = value
            for key, value in root.items():
                f.attrs[key] = value
        _outcome(path, label)
        _outcome(path, label, calibrate=True)  # also turns voltage channels with a sensitivity into units

    run()
    with capsys.disabled():
        print(f"\n{_report(label)}")
    assert OUTCOMES[label, "read"] > 0 and OUTCOMES[label, "error"] > 0
