"""Serve the explorer: ``sigtune serve``, ``panel serve explorer/app.py`` or a notebook cell.

Bound to 127.0.0.1 unless told otherwise (a site laptop should not offer
its recordings to the network); every script, style sheet and font comes
from this server, never from another host. Each browser session gets its
own state, its own worker thread and a private temporary folder for
uploads and exports, removed when the session closes. Files named on the
page (by typed path, or as the recording of an uploaded session) must lie
inside the data folder, by default the folder the server was started in.
"""

from __future__ import annotations

import shutil
import sys
import tempfile
import weakref
from functools import partial
from pathlib import Path

import panel as pn

from dsp import SigtuneError

from .page import CSS, ExplorerPage
from .state import BenchState

__all__ = ["create_app", "data_folder", "serve", "start_server", "LOOPBACK", "UPLOAD_MESSAGE_BYTES"]

LOOPBACK = ("127.0.0.1", "localhost", "::1")
# Largest websocket message: the upload widget sends 10 MB chunks, so 20 MB leaves room.
UPLOAD_MESSAGE_BYTES = 20 * 2**20
_LIVE_PAGES: weakref.WeakSet = weakref.WeakSet()  # for tests and diagnostics; never keeps a page alive


def _configure_panel() -> None:
    """Panel settings the explorer needs (idempotent)."""
    if CSS not in pn.config.raw_css:
        pn.config.raw_css.append(CSS)
    pn.config.throttled = True  # sliders act when released, not on every pixel
    pn.extension("filedropper", notifications=False)


def _served_doc():
    doc = pn.state.curdoc
    return doc if doc is not None and getattr(doc, "session_context", None) is not None else None


def create_app(file=None, session=None, recording=None, data_root=None):
    """Build the explorer for one session and return its servable layout.

    Parameters
    ----------
    file : path, optional
        Recording to open; default the built-in demo recording.
    session : path, optional
        Session file to load (its settings, and its recording if no ``file``).
    recording : dsp.Recording, optional
        In-memory data (a notebook's own), instead of ``file``.
    data_root : path, optional
        The data folder: recordings and session files named on the page, and
        the recording an uploaded or typed-in session names, must lie inside
        it. ``file`` and ``session`` (given by whoever starts the app) may lie
        anywhere. None (a notebook): no such limit.

    In a notebook the layout displays inline, with Bokeh's scripts inlined
    (no network needed). A bad file or session shows its message beside the
    path and the demo opens instead.
    """
    _configure_panel()
    doc = _served_doc()
    if doc is None:
        pn.config.inline = True  # notebook output carries its own scripts: works offline
    folder = tempfile.mkdtemp(prefix="sigtune-ui-")
    state, problems = _initial_state(file, session, recording)
    page = ExplorerPage(state, doc=doc, upload_dir=folder, data_root=data_root)
    page.path_input.value = str(file or "")
    page.session_path.value = str(session or "")
    for group, text in problems.items():
        page.binder.message(group).show(text)
    _LIVE_PAGES.add(page)
    if doc is not None:
        pn.state.on_session_destroyed(partial(_session_closed, page, state, folder))
    # also when the page is collected or the process ends with the session still open (a stopped server)
    weakref.finalize(page, shutil.rmtree, folder, True)
    return page.layout


def _initial_state(file, session, recording) -> tuple[BenchState, dict[str, str]]:
    """The state the page starts from (the data and session opened before anything is drawn).

    Problems are returned by settings group for the page's message lines;
    the demo opens when the file cannot be read.
    """
    from dsp.session import Session

    problems: dict[str, str] = {}
    if recording is not None:
        state = BenchState(recording=recording)
    else:
        try:
            state = BenchState(file_path=str(file or ""))
        except (SigtuneError, OSError) as err:
            problems["source"] = f"{err}; the demo recording is open instead"
            state = BenchState()
    if session:  # named by whoever started the app: its recording may lie outside the data folder
        try:
            note = state.load_session(Session.load(session, verify_source=False), open_source=not file)
        except (SigtuneError, OSError) as err:
            note = str(err)
        if note:
            problems["export"] = note
    return state, problems


def _session_closed(page: ExplorerPage, state: BenchState, folder: str, session_context) -> None:
    """Free what the session held: its worker, its in-memory data, its private folder."""
    page.close()
    state.release()
    shutil.rmtree(folder, ignore_errors=True)


def data_folder(path=None) -> Path:
    """The data folder a server lets its users open files in: ``path`` resolved, default the working folder.

    Raises SigtuneError when it is not an existing folder.
    """
    root = Path.cwd() if path is None else Path(path).expanduser()
    if not root.is_dir():
        raise SigtuneError(f"{str(path)!r} is not a folder; give the folder holding the recordings and "
                           f"session files the dashboard may open", "data root")
    return root.resolve()


def _check_inputs(file, session) -> None:
    for label, path in (("file", file), ("session", session)):
        if path is not None and not Path(path).is_file():
            raise SigtuneError(f"no such file: {str(path)!r}", label)


def _origins(address: str, port: int) -> list[str]:
    origins = [f"127.0.0.1:{port}", f"localhost:{port}"]
    if address not in LOOPBACK and address not in ("0.0.0.0", "::"):
        origins.append(f"{address}:{port}")
    elif address in ("0.0.0.0", "::"):
        origins = ["*"]  # bound to every interface: any host name that reaches it
    return origins


def start_server(file=None, session=None, port: int = 0, address: str = "127.0.0.1", show: bool = False,
                 threaded: bool = True, data_root=None):
    """Start the explorer server and return Panel's server object (a thread when ``threaded``).

    ``port=0`` picks a free port (read it back from ``.port`` on the returned thread's
    ``server`` attribute, or pass one). Stop it with ``.stop()``. ``data_root`` is the
    data folder (see :func:`create_app`), default the current working folder.
    """
    _check_inputs(file, session)
    root = data_folder(data_root)
    if port == 0:
        port = free_port(address)
    _configure_panel()

    def app():  # Panel calls this once per browser session (a partial would be displayed, not called)
        return create_app(file, session, data_root=root)

    return pn.serve(app, port=port, address=address,
                    websocket_origin=_origins(address, port), show=show, threaded=threaded,
                    title="sigtune explorer", websocket_max_message_size=UPLOAD_MESSAGE_BYTES)


def free_port(address: str = "127.0.0.1") -> int:
    """A TCP port free on ``address`` right now."""
    import socket

    with socket.socket(socket.AF_INET6 if ":" in address else socket.AF_INET) as sock:
        sock.bind((address, 0))
        return sock.getsockname()[1]


def serve(file=None, session=None, port: int = 5006, address: str = "127.0.0.1", show: bool = False,
          data_root=None) -> int:
    """Run the explorer until interrupted (``sigtune serve``); return the exit code.

    ``data_root`` is the data folder (see :func:`create_app`), default the
    current working folder. Raises SigtuneError for a missing file, session
    or data folder (the CLI prints it and exits 2).
    """
    _check_inputs(file, session)
    root = data_folder(data_root)
    if address not in LOOPBACK:
        print(f"sigtune serve: warning: listening on {address}: anyone who can reach this computer on port "
              f"{port} can open the dashboard and read the files in its data folder {root}. Use the default "
              f"127.0.0.1 unless you mean to share it.", file=sys.stderr)
    host = "127.0.0.1" if address in ("0.0.0.0", "::") else address
    print(f"sigtune explorer: http://{host}:{port}/  (Ctrl-C to stop); data folder {root}", flush=True)
    try:
        start_server(file, session, port=port, address=address, show=show, threaded=False, data_root=root)
    except KeyboardInterrupt:
        pass
    return 0
