"""Files in and out of the explorer: uploads, session files, processed channels.

Uploads go to the session's private temporary folder (removed when the
session closes). Session files use :class:`dsp.Session`, the format the batch
runner reads. Paths typed by the user are resolved against the data folder
(``data_root``: ``sigtune serve --data-root``, by default the folder it was
started in) and must lie inside it, as must the recording a loaded session
names; with no data folder (a notebook) they are taken as given.
"""

from __future__ import annotations

import json
import re
import tempfile
from pathlib import Path

from dsp import Recording, SigtuneError
from dsp._atomic import atomic_path

__all__ = ["MAX_UPLOAD_MB", "CHANNEL_FORMATS", "store_upload", "typed_path", "session_bytes", "save_session",
           "load_session_file", "load_session_bytes", "channel_file"]

MAX_UPLOAD_MB = 50  # uploads travel in one browser session; bigger recordings: open them by path
CHANNEL_FORMATS = ("h5", "csv", "npz", "wav")
_SAFE_NAME = re.compile(r"[^A-Za-z0-9._-]+")


def store_upload(folder, filename: str, data: bytes) -> Path:
    """Write an uploaded file into ``folder`` under a sanitised name; return its path.

    Raises SigtuneError when the file is larger than :data:`MAX_UPLOAD_MB`
    or there is no private folder (the app is not being served).
    """
    if len(data) > MAX_UPLOAD_MB * 2**20:
        raise SigtuneError(f"{filename!r} is {len(data) / 2**20:.1f} MB; uploads are limited to {MAX_UPLOAD_MB} "
                           f"MB. Open it by path instead (type the path on this computer)", "upload")
    name = _SAFE_NAME.sub("_", Path(filename).name).lstrip(".") or "upload"
    path = Path(folder) / name
    with atomic_path(path) as tmp:  # an interrupted upload never leaves a half-written file to open
        tmp.write_bytes(data)
    return path


def typed_path(path: str, data_root, what: str) -> Path:
    """A path the user typed: inside ``data_root`` (resolved against it), or as given if there is none.

    Raises SigtuneError, located at ``what``, for a path leading outside the data folder.
    """
    from dsp.session import resolve_in_folder

    if data_root is None:
        return Path(path).expanduser()
    return resolve_in_folder(path, data_root, what)


def session_bytes(state) -> bytes:
    """The current settings as session-file bytes (what "Download the session" sends)."""
    session = state.to_session()
    with tempfile.TemporaryDirectory(prefix="sigtune-session-") as folder:
        path = session.save(Path(folder) / "session.json")
        text = path.read_text(encoding="utf-8")
    # save() writes the source path relative to its folder; a download has no folder: keep it absolute
    data = json.loads(text)
    if data.get("source"):
        data["source"]["path"] = session.source["path"]
    return (json.dumps(data, indent=2) + "\n").encode("utf-8")


def save_session(state, path: str, data_root=None) -> Path:
    """Save the session to ``path`` (a ``.json`` file, inside ``data_root`` when given); return it."""
    path = str(path or "").strip()
    if not path:
        raise SigtuneError("type a file name for the session, e.g. sessions/pump.json", "session path")
    target = typed_path(path, data_root, "session path")
    if target.suffix.lower() != ".json":
        raise SigtuneError(f"session files end in .json; got {path!r}", "session path")
    target.parent.mkdir(parents=True, exist_ok=True)
    return state.to_session().save(target)


def load_session_file(state, path: str, data_root=None) -> str | None:
    """Load a session file by path into the state; return why its recording was not opened, if so.

    With ``data_root`` both the session file and the recording it names must lie inside that folder.
    """
    from dsp.session import Session

    path = str(path or "").strip()
    if not path:
        raise SigtuneError("type the path of a session file (.json)", "session path")
    target = typed_path(path, data_root, "session path")
    if not target.is_file():
        raise SigtuneError(f"no such session file: {path!r}", "session path")
    return state.load_session(Session.load(target, verify_source=False), data_root=data_root)


def load_session_bytes(state, data: bytes, filename: str, data_root=None) -> str | None:
    """Load an uploaded session file into the state; return why its recording was not opened, if so.

    A relative source path is read relative to ``data_root``; with ``data_root`` the recording must lie inside it.
    """
    from dsp.session import Session

    return state.load_session(Session.loads(data, where=filename, base=data_root), data_root=data_root)


def channel_file(state, fmt: str, folder) -> str:
    """Write the processed channel in ``fmt`` into the session's private ``folder``; return the path."""
    import dsp

    processed = state.processed
    path = Path(folder) / f"{_SAFE_NAME.sub('_', processed.name)}_processed.{fmt}"
    return str(dsp.io.write(Recording([processed], source=state.file_path or None), path, format=fmt))
