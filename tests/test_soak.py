"""Load: 8 simultaneous websocket sessions change the cutoff for a fixed time (issue 8, item 4).

Each client is a Bokeh client session (``bokeh.client.pull_session``) on its own thread and event
loop: it announces itself ready as a browser does (without that, Panel holds back plot updates), then
repeatedly types a new cutoff into the "Cutoff" input (value and value_throttled, as the browser's
input sends on Enter) and waits for new plot data to arrive and for the page to show the change's complete results.
That is the server's whole per-session update path: widget -> BenchState -> worker thread -> pipeline
-> plots -> websocket. Meanwhile the test fetches the page over HTTP, samples the process's RSS and
watches the server's log for errors.

CI runs 6 s of soak (about 50 s with connecting the 8 sessions); set ``SIGTUNE_SOAK_SECONDS`` for a longer one, e.g.
``SIGTUNE_SOAK_SECONDS=120 python3 -m pytest tests/test_soak.py -s`` (figures printed with ``-s``).
"""

from __future__ import annotations

import logging
import os
import statistics
import threading
import time

import panel as pn
import psutil
import pytest

from explorer.serve import _LIVE_PAGES, free_port, start_server
from polling import fetch, wait_until

pytestmark = pytest.mark.server

SESSIONS = 8
SOAK_SECONDS = float(os.environ.get("SIGTUNE_SOAK_SECONDS", "6"))
UPDATE_TIMEOUT_S = 60.0  # one update slower than this counts as an error (2 cores, 8 sessions)


def cutoff_for(step: int, index: int) -> float:
    """A high-pass edge in 5-95 Hz never used before in the run: each change recomputes (no cache hit)."""
    return 5.0 + ((step * SESSIONS + index) % 9000) * 0.01


class Client:
    """One websocket session of the explorer, driven from the test thread.

    The Bokeh client runs its event loop only inside blocking calls, so each client owns a thread
    that runs the loop until the connection closes; the test hands it work with ``call``.
    """

    def __init__(self, url: str):
        from bokeh.client import pull_session
        from bokeh.events import DocumentReady
        from tornado.ioloop import IOLoop

        self.error: BaseException | None = None
        self._ready = threading.Event()
        self._data_seen = threading.Event()
        self.session = None

        def run():
            loop = IOLoop()
            try:
                self.loop = loop
                self.session = pull_session(url=url, io_loop=loop)
                self.session.document.on_change(self._changed)
                # what a browser sends once the page is drawn; Panel starts pushing plot updates then
                self.session.document.callbacks.send_event(DocumentReady())
                self._ready.set()
                self.session._loop_until_closed()  # the client API's own loop, ends when the socket closes
            except BaseException as err:  # reported by the test thread
                self.error = err
                self._ready.set()
            finally:
                loop.close(all_fds=True)

        self.thread = threading.Thread(target=run, name="soak-client", daemon=True)
        self.thread.start()
        if not self._ready.wait(60) or self.error is not None:
            raise AssertionError(f"client could not connect: {self.error!r}")
        from bokeh.models import NumericInput

        self.cutoff_input = next(m for m in list(self.session.document.models)
                                 if isinstance(m, NumericInput) and (m.title or "").startswith("Cutoff"))

    @property
    def id(self) -> str:
        return self.session.id

    @property
    def page(self):
        """The server-side page of this session (the server runs in this process)."""
        def find():
            return next((p for p in list(_LIVE_PAGES)
                         if getattr(getattr(p.runner.doc, "session_context", None), "id", None) == self.id), None)
        return wait_until(find, timeout_s=30, what="page of the session")

    def _changed(self, event) -> None:
        if getattr(event, "attr", None) == "data":  # new plot data arrived (ColumnDataSource.data)
            self._data_seen.set()

    def call(self, function) -> None:
        """Run ``function`` on the client's event loop (the only thread that may touch its document)."""
        self.loop.add_callback(function)

    def set_cutoff(self, value: float) -> float:
        """Type ``value`` into the Cutoff input; return the seconds until the change was complete.

        Complete: the page has shown the final results of this change (its runner's newest
        generation) and this client has received new plot data.
        """
        runner = self.page.runner
        before = runner.generation
        self._data_seen.clear()
        started = time.perf_counter()

        def type_value():
            self.cutoff_input.value = value
            self.cutoff_input.set_from_json("value_throttled", value)  # a read-only property on this side

        self.call(type_value)
        if not self._data_seen.wait(UPDATE_TIMEOUT_S):
            raise TimeoutError(f"no new plot data for cutoff {value} within {UPDATE_TIMEOUT_S} s")
        wait_until(lambda: runner.generation > before and runner.completed == runner.generation,
                   timeout_s=UPDATE_TIMEOUT_S, interval_s=0.01, what=f"complete update for cutoff {value}")
        return time.perf_counter() - started

    def close(self) -> None:
        if self.session is not None:
            self.call(lambda: self.session.close("test done"))
        self.thread.join(timeout=15)


class LogErrors(logging.Handler):
    """Collects WARNING+ records of the server's loggers (tornado, bokeh, panel)."""

    def __init__(self):
        super().__init__(level=logging.WARNING)
        self.records: list[logging.LogRecord] = []

    def emit(self, record):
        self.records.append(record)


def _soak(url: str, seconds: float) -> dict:
    """Run the soak; return its figures."""
    process = psutil.Process()
    clients = [Client(url) for _ in range(SESSIONS)]
    rss = [process.memory_info().rss]
    stop = threading.Event()
    counts = {"updates": 0, "errors": [], "latencies": [], "gets": 0}
    lock = threading.Lock()

    def drive(index: int, client: Client):
        step = 0
        while not stop.is_set():
            step += 1
            try:
                latency = client.set_cutoff(cutoff_for(step, index))
            except Exception as err:  # counted, then the test fails on it
                with lock:
                    counts["errors"].append(repr(err))
                return
            with lock:
                counts["updates"] += 1
                counts["latencies"].append(latency)

    drivers = [threading.Thread(target=drive, args=(i, c), daemon=True) for i, c in enumerate(clients)]
    started = time.monotonic()
    for d in drivers:
        d.start()
    while time.monotonic() - started < seconds:
        answer = fetch(url)
        counts["gets"] += 1
        if answer is None or answer[0] != 200:
            counts["errors"].append(f"GET {url} -> {answer and answer[0]}")
        rss.append(process.memory_info().rss)
        time.sleep(min(1.0, max(0.0, seconds - (time.monotonic() - started))))
    stop.set()
    for d in drivers:
        d.join(timeout=UPDATE_TIMEOUT_S + 5)
    rss.append(process.memory_info().rss)
    for c in clients:
        c.close()
    latencies = counts["latencies"]
    return {"sessions": SESSIONS, "seconds": round(time.monotonic() - started, 1), "updates": counts["updates"],
            "gets": counts["gets"], "errors": counts["errors"],
            "median_s": statistics.median(latencies) if latencies else None,
            "p95_s": statistics.quantiles(latencies, n=20)[-1] if len(latencies) >= 20 else None,
            "rss_start_mb": rss[0] / 2**20, "rss_peak_mb": max(rss) / 2**20, "rss_end_mb": rss[-1] / 2**20,
            "alive_after": [c.thread.is_alive() for c in clients]}


@pytest.fixture
def server_log():
    handler = LogErrors()
    loggers = [logging.getLogger(n) for n in ("tornado", "bokeh", "panel", "explorer")]
    for logger in loggers:
        logger.addHandler(handler)
    yield handler
    for logger in loggers:
        logger.removeHandler(handler)


def test_eight_sessions_change_settings_and_the_server_keeps_answering(server_log, capsys):
    port = free_port()
    thread = start_server(port=port)
    url = f"http://127.0.0.1:{port}/"
    try:
        wait_until(lambda: fetch(url), timeout_s=60, what="server answering")
        figures = _soak(url, SOAK_SECONDS)
        # after the soak the server still serves the page
        status, body = wait_until(lambda: fetch(url), timeout_s=30, what="page after the soak")
    finally:
        thread.stop()
        thread.join(timeout=15)
        pn.state.kill_all_servers()
        pn.state.reset()
    with capsys.disabled():
        print(f"\nsoak: {figures}")
    assert figures["errors"] == []
    assert status == 200 and b"sigtune explorer" in body
    # every session made changes and got their results (the first needs the slowest full run)
    assert figures["updates"] >= SESSIONS
    problems = [r for r in server_log.records if r.levelno >= logging.ERROR or "Traceback" in r.getMessage()]
    assert problems == [], [r.getMessage()[:300] for r in problems]
    # memory bounded: 8 pages with their caches; a leak per update (hundreds of them) would exceed this
    assert figures["rss_peak_mb"] - figures["rss_start_mb"] < 400
    assert not any(figures["alive_after"])  # every client closed
