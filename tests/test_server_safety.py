"""Server safety (issue 8, item 3): loopback only, upload limit, private upload folder removed with its
session, sessions isolated, memory released after sessions close."""

from __future__ import annotations

import errno
import gc
import os
import socket
import stat
import tempfile
import weakref
from pathlib import Path

import panel as pn
import psutil
import pytest

from dsp import SigtuneError
from explorer import exports, serve
from explorer.serve import create_app, free_port, start_server
from polling import fetch, wait_until
from test_soak import Client

pytestmark = pytest.mark.server


def _stop(thread) -> None:
    try:
        thread.stop()
    except RuntimeError:  # "already stopping": another test's kill_all_servers() reached this server first
        pass
    thread.join(timeout=15)
    assert not thread.is_alive()
    pn.state.kill_all_servers()
    pn.state.reset()


@pytest.fixture(scope="module")
def quick_server():
    """The explorer's app on 127.0.0.1, with Bokeh discarding closed sessions after 0.3 s (default 15 s)."""
    port = free_port()
    serve._configure_panel()
    thread = pn.serve(lambda: create_app(), port=port, address="127.0.0.1", threaded=True, show=False,
                      websocket_origin=[f"127.0.0.1:{port}"], check_unused_sessions_milliseconds=100,
                      unused_session_lifetime_milliseconds=300)
    url = f"http://127.0.0.1:{port}/"
    wait_until(lambda: fetch(url), timeout_s=60, what="server answering")
    yield url
    _stop(thread)


# ---- bound to loopback ----
def _other_addresses() -> list[str]:
    return [a.address for addrs in psutil.net_if_addrs().values() for a in addrs
            if a.family == socket.AF_INET and not a.address.startswith("127.")]


def test_server_listens_on_loopback_only():
    port = free_port()
    thread = start_server(port=port)
    try:
        wait_until(lambda: fetch(f"http://127.0.0.1:{port}/"), timeout_s=60, what="server answering")
        listening = [c for c in psutil.Process().net_connections(kind="inet")
                     if c.status == psutil.CONN_LISTEN and c.laddr.port == port]
        assert listening, "the server listens"
        assert {c.laddr.ip for c in listening} == {"127.0.0.1"}
        for address in _other_addresses():  # this machine's other interfaces refuse the port
            with socket.socket() as sock, pytest.raises(OSError) as err:
                sock.settimeout(5)
                sock.connect((address, port))
            assert err.value.errno in (errno.ECONNREFUSED, errno.EHOSTUNREACH, errno.ENETUNREACH, None)
    finally:
        _stop(thread)


def test_serve_defaults_to_loopback_and_warns_for_another_address(monkeypatch, capsys):
    calls = []
    monkeypatch.setattr(serve, "start_server", lambda *a, **k: calls.append(k))
    assert serve.serve() == 0
    assert calls[-1]["address"] == "127.0.0.1"
    assert "warning" not in capsys.readouterr().err
    for address in ("0.0.0.0", "192.168.1.20"):
        assert serve.serve(address=address, port=5010) == 0
        err = capsys.readouterr().err
        assert f"warning: listening on {address}" in err and "anyone who can reach this computer" in err
        assert calls[-1]["address"] == address


def test_cli_default_address_is_loopback():
    from explorer.cli import build_parser

    args = build_parser().parse_args(["serve"])
    assert args.address == "127.0.0.1"


def test_served_pages_keep_to_the_data_folder(tmp_path):
    """Every page of a server has its data folder (the working folder unless told otherwise)."""
    port = free_port()
    thread = start_server(port=port, data_root=tmp_path)
    client = None
    try:
        wait_until(lambda: fetch(f"http://127.0.0.1:{port}/"), timeout_s=60, what="server answering")
        client = Client(f"http://127.0.0.1:{port}/")
        page = client.page
        assert page.data_root == tmp_path.resolve()
        text = page.open_path("../elsewhere.csv")
        assert text.startswith("recording: ") and "leads outside the data folder" in text
    finally:
        if client is not None:
            client.close()
        _stop(thread)


# ---- uploads ----
def test_oversize_upload_is_refused_with_a_clear_message_and_nothing_written(tmp_path):
    data = b"\0" * (exports.MAX_UPLOAD_MB * 2**20 + 1)
    with pytest.raises(SigtuneError, match=r"'big\.h5' is 50\.0 MB; uploads are limited to 50 MB\. Open it by path"):
        exports.store_upload(tmp_path, "big.h5", data)
    assert list(tmp_path.iterdir()) == []


def test_upload_names_cannot_leave_the_folder(tmp_path):
    for name, expected in (("../../etc/passwd", "passwd"), ("/abs/x.csv", "x.csv"), (".hidden.csv", "hidden.csv"),
                           ("a b;c.csv", "a_b_c.csv"), ("..", "upload")):
        path = exports.store_upload(tmp_path, name, b"t,x\n0,1\n")
        assert path == tmp_path / expected and path.read_bytes() == b"t,x\n0,1\n"


def test_upload_is_written_atomically(tmp_path, monkeypatch):
    exports.store_upload(tmp_path, "run.csv", b"old")

    def fail_half_way(self, data):  # a full disk after half the bytes
        with open(self, "wb") as fh:
            fh.write(data[: len(data) // 2])
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(Path, "write_bytes", fail_half_way)
    with pytest.raises(OSError, match="No space"):
        exports.store_upload(tmp_path, "run.csv", b"new data, longer")
    assert [p.name for p in tmp_path.iterdir()] == ["run.csv"]  # no temporary file left
    assert (tmp_path / "run.csv").read_bytes() == b"old"


def test_upload_folder_is_private_and_removed_when_the_session_closes(quick_server):
    client = Client(quick_server)
    try:
        page = client.page
        folder = Path(page.upload_dir)
        info = folder.stat()
        assert stat.S_IMODE(info.st_mode) == 0o700 and info.st_uid == os.getuid()
        assert folder.parent == Path(tempfile.gettempdir())
        stored = exports.store_upload(folder, "site.csv", b"t,x\n0,1\n1,2\n")
        assert stored.parent == folder
    finally:
        client.close()
    del page
    wait_until(lambda: not folder.exists(), timeout_s=30, what="upload folder removed")


# ---- isolation and memory ----
def test_sessions_do_not_share_state(quick_server):
    first, second = Client(quick_server), Client(quick_server)
    try:
        page_a, page_b = first.page, second.page
        assert page_a.state is not page_b.state and page_a.state.pipeline is not page_b.state.pipeline
        assert page_a.upload_dir != page_b.upload_dir
        before_b = page_b.state.snapshot()
        first.set_cutoff(33.0)
        assert page_a.state.cutoff == 33.0
        assert page_b.state.snapshot() == before_b  # the other session's settings are untouched
        assert second.cutoff_input.value == before_b["cutoff"]  # and so is what its browser shows
        assert page_b.state.processed.history[-1]["cutoff"] == before_b["cutoff"]
    finally:
        first.close()
        second.close()


def test_memory_is_released_after_sessions_close(quick_server):
    process = psutil.Process()
    states, rss = [], []
    for cycle in range(6):
        client = Client(quick_server)
        page = client.page
        wait_until(lambda: page.runner.completed >= 1, timeout_s=60, what="first complete update")
        states.append(weakref.ref(page.state))
        page_ref = weakref.ref(page)
        del page
        client.close()
        wait_until(lambda: gc.collect() >= 0 and page_ref() is None, timeout_s=30, what="page released")
        rss.append(process.memory_info().rss / 2**20)
    gc.collect()
    assert [ref() for ref in states] == [None] * len(states)  # every session's BenchState collected
    print(f"\nRSS after each open/close cycle (MB): {[round(r) for r in rss]}")
    # after warming up, 4 more cycles add less than one page's worth (a page with its caches is ~20 MB)
    assert rss[-1] - rss[1] < 40


def test_a_page_fetched_without_a_websocket_computes_nothing_more():
    """A bare GET (a scan, a crawler) builds the page but starts no pipeline run until a browser connects."""
    from explorer.serve import _LIVE_PAGES

    port = free_port()
    thread = start_server(port=port)
    try:
        wait_until(lambda: fetch(f"http://127.0.0.1:{port}/"), timeout_s=60, what="server answering")
        pages = wait_until(lambda: [p for p in list(_LIVE_PAGES) if p.runner.doc is not None
                                    and getattr(p.runner.doc, "session_context", None) is not None
                                    and p.runner.doc.session_context.server_context is not None],
                           timeout_s=30, what="the GET's page")
        assert all(p.runner.generation == 0 for p in pages)  # nothing queued: the process stays idle
        assert all("motion" not in p.state.counts for p in pages)  # only the fast first frame was computed
    finally:
        _stop(thread)
