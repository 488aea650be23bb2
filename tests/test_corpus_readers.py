"""The bad-input corpus: every malformed file ends in SigtuneError naming the file, or in a correct read.

One test id per case (``tests/corpus/make.py`` builds the files at test time);
each is bounded by a 10 s timeout, and cases declaring huge sizes are read
under tracemalloc. ``test_corpus_summary`` runs every case again and prints
the counts per reader (the table in docs/hardening.md).
"""

from __future__ import annotations

import collections

import pytest

from corpus.make import CASES, READERS, run_case, summary


def _param(case):
    marks = [pytest.mark.timeout(10)]
    if case.xfail:
        marks = [pytest.mark.timeout(5), pytest.mark.xfail(reason=case.xfail, strict=True)]
    return pytest.param(case, id=case.id, marks=marks)


@pytest.mark.parametrize("case", [_param(c) for c in CASES])
def test_corpus_case(case, tmp_path):
    assert run_case(case, tmp_path) in ("error", "read")


def test_corpus_ids_are_unique_and_every_reader_is_covered():
    ids = [c.id for c in CASES]
    assert len(ids) == len(set(ids))
    per_reader = collections.Counter(c.reader for c in CASES)
    assert set(per_reader) == set(READERS)
    assert min(per_reader.values()) >= 15, per_reader
    huge = [c.id for c in CASES if c.max_peak_mb is not None]
    assert {c.split("/")[0] for c in huge} >= {"wav", "h5", "npz"}, huge


@pytest.mark.timeout(60)
def test_corpus_summary(tmp_path, capsys):
    """Run every case once more and print the table of outcomes (the known defect cases excluded)."""
    outcomes = {}
    for i, case in enumerate(c for c in CASES if not c.xfail):
        outcomes[case.id] = run_case(case, tmp_path / f"case{i}")
    table = summary(outcomes)
    with capsys.disabled():
        print("\n\nbad-input corpus (tests/corpus/make.py):")
        print("\n".join(table))
    assert sum(v in ("error", "read") for v in outcomes.values()) == len(outcomes)


# ---------------------------------------------------------------- fixes no small file can reach
# A file whose declared size passes every check but is still too large for memory makes numpy's single
# allocation fail; the readers report it instead of raising MemoryError. Simulated, not allocated.


@pytest.mark.timeout(10)
def test_hdf5_channel_too_large_for_memory(tmp_path, monkeypatch):
    import numpy as np

    import dsp
    from dsp import SigtuneError

    path = dsp.write(dsp.Channel(np.arange(64.0), 64.0, name="A1"), tmp_path / "long.h5")
    real_empty = np.empty

    def empty(shape, *args, **kwargs):
        if tuple(np.atleast_1d(shape)) == (64,):
            raise MemoryError("simulated")
        return real_empty(shape, *args, **kwargs)

    monkeypatch.setattr(np, "empty", empty)
    with pytest.raises(SigtuneError, match=r"/channels/000000: holds 64 samples, more than the memory "
                                           r"available; read it in blocks with dsp.io.hdf5.read_block"):
        dsp.read(path)


@pytest.mark.timeout(10)
def test_npz_array_too_large_for_memory(tmp_path, monkeypatch):
    import numpy as np
    import numpy.lib.format

    import dsp
    from dsp import SigtuneError

    path = dsp.write(dsp.Channel(np.arange(64.0), 64.0, name="A1"), tmp_path / "long.npz")
    real_read = numpy.lib.format.read_array

    def read_array(fp, *args, **kwargs):
        array = real_read(fp, *args, **kwargs)
        if array.shape == (64,):
            raise MemoryError("simulated")
        return array

    monkeypatch.setattr(numpy.lib.format, "read_array", read_array)
    with pytest.raises(SigtuneError, match=r"array 'channel_000000': is larger than the memory available"):
        dsp.read(path)
