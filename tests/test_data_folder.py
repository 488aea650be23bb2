"""The dashboard's data folder (issue 8, item 2): paths typed on the page, and the recording an uploaded or
typed-in session names, must lie inside it; ``../``, absolute paths and symbolic links out are refused with a
message and the page keeps working. Without a data folder (a notebook) paths are taken as given."""

from __future__ import annotations

import json
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import panel as pn
import pytest

import dsp
from dsp import Channel, Filter, Recording, SigtuneError
from dsp.session import Session
from explorer import exports
from explorer.page import ExplorerPage
from explorer.serve import data_folder
from explorer.state import BenchState

FS = 1000.0
OUTSIDE = "leads outside the data folder"


def _write_recording(path: Path, frequency: float) -> Path:
    t = np.arange(20_000) / FS  # 20 s: longer than the integration's settling
    path.parent.mkdir(parents=True, exist_ok=True)
    return dsp.io.write(Recording([Channel(np.sin(2 * np.pi * frequency * t), FS, name="acc_z")]), path)


@pytest.fixture
def folders(tmp_path):
    """A data folder with one recording and a link to a recording outside it."""
    root, outside = tmp_path / "data", tmp_path / "outside"
    inside = _write_recording(root / "site" / "run.csv", 20.0)
    secret = _write_recording(outside / "run.csv", 30.0)
    (root / "link.csv").symlink_to(secret)
    (root / "linked_folder").symlink_to(outside, target_is_directory=True)
    return SimpleNamespace(root=root.resolve(), inside=inside.resolve(), secret=secret, tmp=tmp_path)


@pytest.fixture
def page(folders):
    state = BenchState(filter_band="lowpass", cutoff=200.0)
    p = ExplorerPage(state, upload_dir=folders.tmp / "uploads", data_root=folders.root)
    yield p
    p.close()
    state.release()
    pn.state.reset()


# the ways out of a folder: a parent, a parent after a detour, an absolute path, a linked file, a linked folder
def _escapes(folders) -> list[str]:
    return ["../outside/run.csv", "site/../../outside/run.csv", str(folders.secret), "link.csv",
            "linked_folder/run.csv"]


ESCAPES = range(5)


# ---- recordings typed on the page ----
def test_a_relative_path_opens_inside_the_data_folder(page, folders):
    assert page.open_path("site/run.csv") is None
    assert page.state.file_path == str(folders.inside)
    assert page.state.channel == "acc_z"


@pytest.mark.parametrize("case", ESCAPES)
def test_a_path_leading_out_of_the_data_folder_is_refused(page, folders, case):
    before = page.state.dataset_id
    text = page.open_path(_escapes(folders)[case])
    assert text.startswith("recording: ") and OUTSIDE in text and str(folders.root) in text
    assert page.binder.messages["source"].pane.visible
    assert page.state.dataset_id == before  # the demo stays open, the page keeps working
    assert page.open_path("site/run.csv") is None


def test_an_upload_opens_from_the_private_folder_outside_the_data_folder(page, folders):
    (folders.tmp / "uploads").mkdir()
    page._uploaded(SimpleNamespace(new={"site.csv": folders.inside.read_bytes()}))
    assert page.state.file_path == str(folders.tmp / "uploads" / "site.csv")
    assert not page.binder.messages["source"].pane.visible


def test_without_a_data_folder_paths_are_taken_as_given(folders):
    state = BenchState()
    p = ExplorerPage(state)  # a notebook's page
    try:
        assert p.open_path(str(folders.secret)) is None
        assert state.file_path == str(folders.secret)
    finally:
        p.close()
        state.release()


# ---- sessions: their recording, and session files by path ----
def _session_bytes(source_path: str, cutoff: float = 12.5) -> bytes:
    session = Session(source={"path": source_path, "channels": ["acc_z"]},
                      chain=[Filter("butterworth", "lowpass", 4, cutoff)])
    return json.dumps(session.to_dict()).encode()


def _upload_session(page, data: bytes, name: str = "colleague.json") -> None:
    page.session_upload.filename = name
    page._session_uploaded(SimpleNamespace(new=data))


@pytest.mark.parametrize("case", ESCAPES)
def test_an_uploaded_session_naming_a_recording_outside_is_applied_without_opening_it(page, folders, case):
    before = page.state.dataset_id
    _upload_session(page, _session_bytes(_escapes(folders)[case]))
    message = page.binder.messages["export"]
    assert message.pane.visible and OUTSIDE in message.text
    assert "the settings apply to the recording open now" in message.text
    assert page.state.dataset_id == before  # the file outside was not opened
    assert page.state.cutoff == 12.5  # the settings were applied
    assert page.state.processed.history[-1]["cutoff"] == 12.5


def test_an_uploaded_session_with_a_relative_source_opens_it_in_the_data_folder(page, folders):
    _upload_session(page, _session_bytes("site/run.csv"))
    assert page.state.file_path == str(folders.inside)
    assert page.state.cutoff == 12.5
    assert not page.binder.messages["export"].pane.visible


def test_an_uploaded_session_whose_recording_is_missing_says_so(page, folders):
    before = page.state.dataset_id
    _upload_session(page, _session_bytes("site/later.csv"))
    text = page.binder.messages["export"].text
    assert "no such recording file" in text and "the settings apply to the recording open now" in text
    assert page.state.dataset_id == before and page.state.cutoff == 12.5


def test_a_session_saved_by_path_stays_in_the_data_folder(page, folders):
    assert page.save_session("sessions/pump.json") is None
    saved = folders.root / "sessions" / "pump.json"
    filters = [step for step in Session.load(saved, verify_source=False).chain.steps if step.op == "filter"]
    assert [f.cutoff for f in filters] == [200.0]
    for target in ("../evil.json", str(folders.tmp / "evil.json"), "linked_folder/evil.json"):
        text = page.save_session(target)
        assert text.startswith("session path: ") and OUTSIDE in text
    assert sorted(p.name for p in folders.tmp.iterdir()) == ["data", "outside"]  # nothing written outside
    assert sorted(p.name for p in (folders.tmp / "outside").iterdir()) == ["run.csv"]


def test_a_session_file_by_path_must_be_in_the_data_folder(page, folders):
    (folders.tmp / "outside" / "s.json").write_bytes(_session_bytes("run.csv"))
    text = page.load_session_path("../outside/s.json")
    assert text.startswith("session path: ") and OUTSIDE in text
    assert page.state.cutoff == 200.0

    (folders.root / "s.json").write_bytes(_session_bytes("../outside/run.csv", cutoff=15.0))
    text = page.load_session_path("s.json")
    assert OUTSIDE in text and "s.json: source.path" in text  # the settings came, the recording did not
    assert page.state.cutoff == 15.0 and page.state.file_path == ""

    (folders.root / "sessions").mkdir()
    (folders.root / "sessions" / "t.json").write_bytes(_session_bytes("../site/run.csv", cutoff=17.0))
    assert page.load_session_path("sessions/t.json") is None  # relative to the session file, inside
    assert page.state.file_path == str(folders.inside) and page.state.cutoff == 17.0


def test_typed_path_resolves_against_the_folder(folders):
    assert exports.typed_path("site/run.csv", folders.root, "recording") == folders.inside
    assert exports.typed_path("x/y.csv", None, "recording") == Path("x/y.csv")
    with pytest.raises(SigtuneError, match=f"^recording: '../x' {OUTSIDE}"):
        exports.typed_path("../x", folders.root, "recording")


# ---- the server's data folder ----
def test_data_folder_defaults_to_the_working_folder(folders, monkeypatch):
    monkeypatch.chdir(folders.root / "site")
    assert data_folder() == folders.inside.parent
    assert data_folder(folders.tmp / "outside") == (folders.tmp / "outside").resolve()
    for bad in (folders.inside, folders.tmp / "missing"):
        with pytest.raises(SigtuneError, match="^data root: .* is not a folder"):
            data_folder(bad)


def test_serve_passes_the_data_folder(folders, monkeypatch, capsys):
    from explorer import serve

    calls = []
    monkeypatch.setattr(serve, "start_server", lambda *a, **k: calls.append(k))
    monkeypatch.chdir(folders.root)
    assert serve.serve() == 0
    assert calls[-1]["data_root"] == folders.root
    assert serve.serve(data_root=folders.tmp / "outside") == 0
    assert calls[-1]["data_root"] == (folders.tmp / "outside").resolve()
    assert f"data folder {(folders.tmp / 'outside').resolve()}" in capsys.readouterr().out


def test_cli_data_root_option(folders, capsys):
    from explorer.cli import build_parser, main

    assert build_parser().parse_args(["serve"]).data_root is None
    assert build_parser().parse_args(["serve", "--data-root", "d"]).data_root == Path("d")
    assert main(["serve", "--data-root", str(folders.tmp / "missing")]) == 2
    assert "sigtune serve: error: data root: " in capsys.readouterr().err
