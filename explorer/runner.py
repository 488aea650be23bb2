"""Run the pipeline off the event loop and hand fresh results back to it.

Each change of a setting bumps a generation counter and queues its fast
stages on one worker thread of the session and, once they are shown, the
slow stages on a second one, so a long integration comparison never delays
the trace of the next change. scipy's filters and FFTs release the GIL, so
the server keeps serving this and other sessions meanwhile. A run whose
generation is no longer the latest is skipped, or stopped between stages,
and its results are dropped, so only the newest settings ever reach the
screen. Without a Bokeh document (a script, a test) runs are synchronous.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from functools import partial

from .stages import FAST_STAGES, Results

__all__ = ["Runner", "BUSY_AFTER_S"]

BUSY_AFTER_S = 0.3  # show the busy indicator only for work longer than this
DRAW_WAIT_S = 3.0  # longest a worker waits for the page to draw its partial results


class Runner:
    """Queue pipeline runs; deliver ``(results, final)`` to ``show`` on the document's event loop.

    Parameters
    ----------
    show : callable
        ``show(results, final)``: called for the fast preview (``final=False``) and the
        complete results (``final=True``) of the latest generation only.
    busy : callable
        ``busy(on: bool)``.
    doc : bokeh Document, optional
        Where to schedule the callbacks; None runs synchronously.
    """

    def __init__(self, show: Callable[[Results, bool], None], busy: Callable[[bool], None], doc=None):
        self.show, self.busy, self.doc = show, busy, doc
        self.generation = 0
        self.completed = 0  # generation of the latest results shown as final
        self._lock = threading.Lock()
        self._executor = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sigtune-fast") if doc else None
        self._slow = ThreadPoolExecutor(max_workers=1, thread_name_prefix="sigtune-slow") if doc else None
        self.last_started = 0.0
        self.last_latency_s: dict[str, float] = {}

    @property
    def background(self) -> bool:
        return self._executor is not None

    def submit(self, run: Callable[..., Results]) -> int:
        """Queue ``run(stages=..., on_progress=..., cancelled=...)`` as the newest generation; return its number.

        ``run`` is a pipeline run bound to one settings snapshot.
        """
        with self._lock:
            self.generation += 1
            generation = self.generation
        self.last_started = time.perf_counter()
        if not self.background:
            self._work(generation, run)
            return generation
        self._executor.submit(self._work, generation, run)
        self.doc.add_timeout_callback(partial(self._busy_if_running, generation), int(BUSY_AFTER_S * 1000))
        return generation

    def _stale(self, generation: int) -> bool:
        return generation != self.generation

    def _work(self, generation: int, run) -> None:
        if self._stale(generation):
            return
        if not self.background:
            results = run(on_progress=partial(self._deliver, generation, final=False),
                          cancelled=partial(self._stale, generation))
            if not results.cancelled:
                self._deliver(generation, results, final=True)
            return
        fast = run(stages=FAST_STAGES, cancelled=partial(self._stale, generation))
        if fast.cancelled or self._stale(generation):
            return
        self._deliver(generation, fast, final=False)
        self._slow.submit(self._work_slow, generation, run)

    def _work_slow(self, generation: int, run) -> None:
        if self._stale(generation):
            return
        # the fast stages come from the cache now; progress after the quick slow stages
        results = run(on_progress=lambda res: self._deliver(generation, res, final=False) if res.recomputed - set(
            FAST_STAGES) else None, cancelled=partial(self._stale, generation))
        if not results.cancelled:
            self._deliver(generation, results, final=True)

    def _deliver(self, generation: int, results: Results, final: bool) -> None:
        if not self.background:
            self._apply(generation, results, final)
            return
        # Wait until the event loop has drawn these results before computing on: a worker thread
        # busy in numpy competes for the GIL with the drawing and can slow it several times over.
        drawn = threading.Event()
        self.doc.add_next_tick_callback(partial(self._apply, generation, results, final, drawn))
        if not final and generation > 1:  # the first run is queued before the page is connected
            drawn.wait(timeout=DRAW_WAIT_S)

    def _apply(self, generation: int, results: Results, final: bool, drawn: threading.Event | None = None) -> None:
        try:
            if self._stale(generation):
                return  # a newer change is being computed: these results would flash old settings
            self.last_latency_s["final" if final else "fast"] = time.perf_counter() - self.last_started
            self.show(results, final)
            if final:
                self.completed = generation
                self.busy(False)
        finally:
            if drawn is not None:
                drawn.set()

    def _busy_if_running(self, generation: int) -> None:
        if self.completed < generation and not self._stale(generation):
            self.busy(True)

    def shutdown(self) -> None:
        """Stop taking work (queued runs are dropped); called when the session closes."""
        with self._lock:
            self.generation += 1  # every queued run is now stale
        for executor in (self._executor, self._slow):
            if executor is not None:
                executor.shutdown(wait=False, cancel_futures=True)
