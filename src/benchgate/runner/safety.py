"""Leaving the bench safe: supply output off, whatever happened, whatever signal arrived.

:class:`StopSignals` is the one place benchgate handles the signals that ask a process to stop:
SIGINT (Ctrl-C), SIGTERM (a cancelled CI job, ``timeout``, ``kill``) and SIGHUP (a closed
terminal). The first one raises :class:`StopRequested` where the run is, so the unit stops
there; every later one — and any that arrives while :attr:`StopSignals.shielded` is set for the
safe-state sequence and the evidence — is only counted: nothing can cut the supply-off command
or the reports short. :func:`make_safe` switches the supply and the generator off (retrying a lost
command, not a dead link) and closes the bench through its own context manager.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Callable
from contextlib import AbstractContextManager
from types import FrameType
from typing import Any, Protocol

#: the signals that stop a run, and how the run's reason names them
STOP_SIGNALS: dict[int, str] = {
    signal.SIGINT: "interrupted by the operator (Ctrl-C)",
    signal.SIGTERM: "stopped by SIGTERM (the job was cancelled, timed out or killed)",
}
if hasattr(signal, "SIGHUP"):  # not on every platform
    STOP_SIGNALS[signal.SIGHUP] = "stopped by SIGHUP (the terminal was closed)"

#: the console line when the supply output cannot be confirmed off
SUPPLY_ALARM = "SWITCH THE SUPPLY OFF BY HAND"
#: the console line when the generator output cannot be confirmed off
GENERATOR_ALARM = "SWITCH THE GENERATOR OFF BY HAND"


class StopRequested(KeyboardInterrupt):
    """A stop signal arrived: the unit is aborted, the process exits 128 + the signal number.

    A subclass of :class:`KeyboardInterrupt`, so it travels through the same ``except``
    clauses (and is never swallowed by ``except Exception``).
    """

    def __init__(self, signum: int = signal.SIGINT):
        super().__init__(signum)
        self.signum = int(signum)

    @property
    def exit_code(self) -> int:
        """128 + the signal number: 130 for SIGINT, 143 for SIGTERM, 129 for SIGHUP (shell rule)."""
        return 128 + self.signum

    @property
    def description(self) -> str:
        return STOP_SIGNALS.get(self.signum, f"stopped by signal {self.signum}")


def as_stop(exc: BaseException) -> StopRequested:
    """A plain KeyboardInterrupt (raised by Python's own handler) counts as SIGINT."""
    return exc if isinstance(exc, StopRequested) else StopRequested(signal.SIGINT)


class StopSignals:
    """Handles SIGINT, SIGTERM and SIGHUP while entered (main thread only; elsewhere it does nothing).

    ``ignore_after_stop``: once a stop was requested, leave the signals ignored on exit instead
    of restoring the previous handlers (the process is ending; a late Ctrl-C must not print a
    traceback over the last lines).
    """

    def __init__(self, *, ignore_after_stop: bool = False) -> None:
        self.received: list[int] = []
        self.stop: StopRequested | None = None  # the one that was raised
        self.shielded = False
        self.ignore_after_stop = ignore_after_stop
        self._previous: dict[int, Any] = {}
        self._depth = 0

    def _handler(self, signum: int, frame: FrameType | None) -> None:
        self.received.append(signum)
        if self.shielded or self.stop is not None:
            return
        self.stop = StopRequested(signum)
        raise self.stop

    @property
    def count(self) -> int:
        return len(self.received)

    @property
    def deferred(self) -> int:
        """Signals that were held back (all but the one that was raised)."""
        return self.count - (1 if self.stop is not None else 0)

    @property
    def active(self) -> bool:
        return bool(self._previous)

    def __enter__(self) -> StopSignals:
        self._depth += 1
        if self._depth == 1 and threading.current_thread() is threading.main_thread():
            for signum in STOP_SIGNALS:
                self._previous[signum] = signal.signal(signum, self._handler)
        return self

    def __exit__(self, *exc: object) -> None:
        self._depth -= 1
        if self._depth > 0 or not self._previous:
            return
        keep_ignoring = self.ignore_after_stop and bool(self.received)
        for signum, previous in self._previous.items():
            signal.signal(signum, signal.SIG_IGN if keep_ignoring else previous)
        self._previous = {}


class _Supply(Protocol):
    def output(self, on: bool) -> None: ...


class _OpenBench(Protocol):
    def get(self, role: str, default: Any = None) -> Any: ...


def link_is_dead(err: BaseException) -> bool:
    """True for an error that says the instrument no longer answers (retrying cannot help)."""
    from benchgate.errors import InstrumentDisconnected

    return isinstance(err, InstrumentDisconnected)


def _switch_off(bench: _OpenBench | None, role: str, attempts: int,
                notes: list[str]) -> tuple[bool, BaseException | None]:
    """Switch the output of ``role`` off (retrying a lost command, not a dead link)."""
    inst: _Supply | None = None
    if bench is not None:
        try:
            inst = bench.get(role)
        except Exception:  # a broken bench object: the context manager still closes it
            inst = None
    if inst is None:
        return True, None
    last_error: BaseException | None = None
    for attempt in range(1, attempts + 1):
        try:
            inst.output(False)
            return True, None
        except Exception as err:  # keep trying: this is the one command that must get through
            last_error = err
            notes.append(f"{role} output off failed (attempt {attempt}): {err}")
            if link_is_dead(err):
                break
    return False, last_error


def make_safe(bench_cm: AbstractContextManager[Any] | None, bench: _OpenBench | None,
              exc: BaseException | None, attempts: int = 3,
              alarm: Callable[[str], None] | None = None) -> list[str]:
    """Switch the supply and generator outputs off and close the bench; returns notes on
    anything that went wrong.

    Each output is switched off here first (a lost command is retried up to ``attempts`` times; a
    link that no longer answers is not waited on again) and again by the bench's own exit, so one
    lost command cannot leave the unit powered or driven. When an output cannot be confirmed off,
    ``alarm`` is called with one line starting with :data:`SUPPLY_ALARM` or
    :data:`GENERATOR_ALARM`.
    """
    notes: list[str] = []
    confirmed, last_error = _switch_off(bench, "supply", attempts, notes)
    gen_confirmed, gen_error = _switch_off(bench, "generator", attempts, notes)
    close_error: BaseException | None = None
    if bench_cm is not None:
        try:
            if exc is None:
                bench_cm.__exit__(None, None, None)
            else:
                bench_cm.__exit__(type(exc), exc, exc.__traceback__)
        except Exception as err:
            close_error = err
            notes.append(f"closing the instruments: {err}")
        for err in getattr(bench, "close_errors", None) or ():
            if err is not close_error and f"closing the instruments: {err}" not in notes:
                notes.append(f"closing the instruments: {err}")
    for ok, err, head, what in ((confirmed, last_error, SUPPLY_ALARM, "supply"),
                                (gen_confirmed, gen_error, GENERATOR_ALARM, "generator")):
        if not ok:
            why = f" ({err})" if err is not None else ""
            line = f"{head}: the {what} did not confirm that its output is off{why}"
            notes.append(line)
            if alarm is not None:
                alarm(line)
    return notes
