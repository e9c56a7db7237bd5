"""Leaving the bench safe: supply output off, whatever happened, even on a second Ctrl-C.

:class:`InterruptGuard` lets the first Ctrl-C stop a run and holds every later one back while
the safe-state sequence and the evidence (reports, database row) are written. :func:`make_safe` switches the supply off (retrying)
and closes the bench through its own context manager.
"""

from __future__ import annotations

import signal
import threading
from typing import Any


class InterruptGuard:
    """SIGINT handling for one unit's run (main thread only; elsewhere it does nothing).

    The first Ctrl-C raises :class:`KeyboardInterrupt` as usual, so the run stops where it is.
    Every later one — and any Ctrl-C once :attr:`shielded` is set for the safe-state sequence and
    the evidence — is only counted: it can never cut the supply-off command or the reports short.
    """

    def __init__(self) -> None:
        self.count = 0
        self.raised = False
        self.shielded = False
        self._previous: Any = None
        self._active = False

    def _handler(self, signum: int, frame: Any) -> None:
        self.count += 1
        if self.shielded or self.raised:
            return
        self.raised = True
        raise KeyboardInterrupt

    @property
    def deferred(self) -> int:
        """Interrupts that were held back (all but the one that was raised)."""
        return self.count - (1 if self.raised else 0)

    def __enter__(self) -> InterruptGuard:
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._handler)
            self._active = True
        return self

    def __exit__(self, *exc: Any) -> None:
        if self._active:
            signal.signal(signal.SIGINT, self._previous)
            self._active = False


def make_safe(bench_cm: Any, bench: Any, exc: BaseException | None, attempts: int = 3) -> list[str]:
    """Switch the supply output off and close the bench; returns notes on anything that went wrong.

    The supply is switched off here first (retried up to ``attempts`` times) and again by the
    bench's own exit, so one lost command cannot leave the unit powered.
    """
    notes: list[str] = []
    supply = None
    if bench is not None:
        try:
            supply = bench.get("supply")
        except Exception:  # a broken bench object: the context manager below still closes it
            supply = None
    if supply is not None:
        for attempt in range(1, attempts + 1):
            try:
                supply.output(False)
                break
            except Exception as err:  # keep trying: this is the one command that must get through
                notes.append(f"supply output off failed (attempt {attempt}): {err}")
        else:
            notes.append("WARNING: the supply output could not be confirmed off; switch it off by hand")
    if bench_cm is not None:
        try:
            if exc is None:
                bench_cm.__exit__(None, None, None)
            else:
                bench_cm.__exit__(type(exc), exc, exc.__traceback__)
        except Exception as err:
            notes.append(f"closing the instruments: {err}")
    return notes
