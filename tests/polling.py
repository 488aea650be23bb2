"""Bounded polling and fetching for the tests that serve the explorer (no sleeps of a guessed length)."""

from __future__ import annotations

import time
import urllib.request


def wait_until(condition, timeout_s: float = 30.0, interval_s: float = 0.05, what: str = "condition"):
    """Poll ``condition()`` until it returns a true value (returned), or fail after ``timeout_s`` seconds."""
    deadline = time.monotonic() + timeout_s
    while True:
        value = condition()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"{what} not met within {timeout_s} s")
        time.sleep(interval_s)


def fetch(url: str, timeout_s: float = 10.0):
    """``(status, body bytes)`` of a GET, or None when the server does not answer."""
    try:
        with urllib.request.urlopen(url, timeout=timeout_s) as response:
            return response.status, response.read()
    except OSError:  # refused, reset, timed out; urllib's URLError is an OSError
        return None
