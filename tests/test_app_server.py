"""Tier 2: serve the explorer on an ephemeral 127.0.0.1 port, fetch the page, stop the server."""

import re

import panel as pn
import pytest

from dsp import SigtuneError
from explorer.serve import _origins, free_port, start_server
from polling import fetch, wait_until

pytestmark = pytest.mark.server


@pytest.fixture
def server():
    port = free_port()
    thread = start_server(port=port)
    yield port
    thread.stop()
    thread.join(timeout=15)  # bounded: reset() below would try to stop a thread still stopping
    assert not thread.is_alive()
    pn.state.reset()


def test_page_is_served_on_loopback_with_its_own_resources(server):
    status, body = wait_until(lambda: fetch(f"http://127.0.0.1:{server}/"))
    page = body.decode("utf-8", "replace")
    assert status == 200
    assert "<title>sigtune explorer</title>" in page
    sources = re.findall(r'(?:src|href)="([^"]+)"', page)
    assert sources, "the page loads scripts"
    foreign = [s for s in sources if re.match(r"(https?:)?//", s) and not re.match(r"(https?:)?//(127\.0\.0\.1|localhost)", s)]
    assert foreign == []  # every script and style sheet comes from this server
    status, script = fetch(f"http://127.0.0.1:{server}/" + next(s for s in sources if s.endswith(".js") or ".js?" in s).lstrip("/"))
    assert status == 200 and len(script) > 1000


def test_missing_inputs_are_refused_before_serving(tmp_path):
    with pytest.raises(SigtuneError, match="no such file"):
        start_server(file=tmp_path / "none.h5")
    with pytest.raises(SigtuneError, match="session"):
        start_server(session=tmp_path / "none.json")


def test_websocket_origins_are_explicit():
    assert _origins("127.0.0.1", 5006) == ["127.0.0.1:5006", "localhost:5006"]
    assert _origins("192.168.1.20", 80) == ["127.0.0.1:80", "localhost:80", "192.168.1.20:80"]
