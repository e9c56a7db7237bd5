"""Waiting in tests: on a condition with a deadline, never for a fixed time.

Where nothing signals the change (a file another process appends to, a flag a simulator thread
sets), the test polls the condition; the poll interval only bounds how late the test notices,
never what it asserts. Everything that waits without an event goes through :func:`wait_until`.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from typing import TypeVar

T = TypeVar("T")

#: how often a condition is looked at (seconds); a latency, not a wait for an outcome
POLL_S = 0.005


def wait_until(condition: Callable[[], T], *, timeout: float, what: str,
               abandon: Callable[[], str | None] | None = None) -> T:
    """The first truthy value of ``condition()``, looked at until ``timeout`` seconds pass.

    ``abandon`` (optional) is asked on every look; a non-None answer ends the wait at once with
    that text (e.g. "the run ended early: ..."). Fails with ``what`` in the message on timeout.
    """
    deadline = time.monotonic() + timeout
    while True:
        value = condition()
        if value:
            return value
        if abandon is not None and (why := abandon()) is not None:
            raise AssertionError(f"{what}: {why}")
        if time.monotonic() >= deadline:
            raise AssertionError(f"{what}: not within {timeout} s")
        time.sleep(POLL_S)


def run_together(work: Callable[[int, threading.Barrier], object], count: int, *,
                 timeout: float) -> None:
    """Run ``work(k, start)`` on ``count`` threads at once and wait for them all (at most
    ``timeout`` s each). Each thread calls ``start.wait()`` where its race begins; any
    exception in any thread fails the test with all of them listed."""
    errors: list[BaseException] = []
    start = threading.Barrier(count)

    def one(k: int) -> None:
        try:
            work(k, start)
        except BaseException as exc:  # noqa: BLE001 - reported below
            errors.append(exc)

    threads = [threading.Thread(target=one, args=(k,)) for k in range(count)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout)
    assert not any(t.is_alive() for t in threads), f"a thread still ran after {timeout} s"
    assert not errors, errors
