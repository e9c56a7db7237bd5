"""Leaving the bench safe: supply output off, whatever happened, whatever signal arrived.

:class:`StopSignals` is the one place benchgate handles the signals that ask a process to stop:
SIGINT (Ctrl-C), SIGTERM (a cancelled CI job, ``timeout``, ``kill``) and SIGHUP (a closed
terminal). The first one raises :class:`StopRequested` where the run is, so the unit stops
there; every later one — and any that arrives while :attr:`StopSignals.shielded` is set for the
safe-state sequence and the evidence — is only counted: nothing can cut the supply-off command
:func:`safe_bench` opens the bench as one context manager that switches the supply and the
generator off (retrying a lost command, not a dead link) and closes it, whatever happened.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager, contextmanager
from types import FrameType
from typing import Any, Protocol, TypeVar

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
    """What the safe-state sequence needs of an open bench."""

    def get(self, role: str, default: Any = None) -> Any: ...


B = TypeVar("B", bound=_OpenBench)


def link_is_dead(err: BaseException) -> bool:
    """True for an error that says the instrument no longer answers (retrying cannot help)."""
    from benchgate.errors import InstrumentDisconnected

    return isinstance(err, InstrumentDisconnected)


#: the outputs made safe on the way out, and the console line when one cannot be confirmed off
OUTPUTS = (("supply", SUPPLY_ALARM), ("generator", GENERATOR_ALARM))


def switch_off(bench: _OpenBench, notes: list[str], role: str = "supply", attempts: int = 3) -> BaseException | None:
    """Switch the output of ``role`` off (a lost command is retried up to ``attempts`` times; a
    link that no longer answers is not waited on again). Returns the last error when it could not
    be confirmed off, None when it is off (or there is no such instrument); notes every failed
    attempt."""
    try:
        inst: _Supply | None = bench.get(role)
    except Exception:  # a broken bench object: its own exit still closes it
        inst = None
    if inst is None:
        return None
    last: BaseException | None = None
    for attempt in range(1, attempts + 1):
        try:
            inst.output(False)
            return None
        except Exception as err:  # keep trying: this is the one command that must get through
            last = err
            notes.append(f"{role} output off failed (attempt {attempt}): {err}")
            if link_is_dead(err):
                break
    return last


@contextmanager
def safe_bench(opener: Callable[[], AbstractContextManager[B]], *, notes: list[str],
               signals: StopSignals | None = None,
               alarm: Callable[[str], None] | None = None) -> Iterator[B]:
    """The open bench, as one context manager that always leaves it safe.

    On the way out, whatever happened: stop signals are held back (``signals.shielded``), the
    supply and generator outputs are switched off here (:func:`switch_off`) and again by the
    bench's own exit, which closes every instrument. What went wrong on the way out is appended
    to ``notes`` (closing errors do not change how the block ended); when an output could not be
    confirmed off, ``alarm`` gets one line starting with :data:`SUPPLY_ALARM` or
    :data:`GENERATOR_ALARM`. An error while opening propagates (the bench's opener has closed
    what it opened).
    """
    opened: B | None = None
    body_error: BaseException | None = None
    unconfirmed: dict[str, BaseException] = {}
    try:
        with opener() as bench:
            opened = bench
            try:
                yield bench
            except BaseException as exc:
                body_error = exc
                raise
            finally:
                if signals is not None:
                    signals.shielded = True
                for role, _ in OUTPUTS:
                    err = switch_off(bench, notes, role)
                    if err is not None:
                        unconfirmed[role] = err
    except BaseException as exc:
        if opened is None or exc is body_error:
            raise
        notes.append(f"closing the instruments: {exc}")  # the bench's own exit failed
    finally:
        for err in getattr(opened, "close_errors", None) or ():
            if f"closing the instruments: {err}" not in notes:
                notes.append(f"closing the instruments: {err}")
        for role, head in OUTPUTS:
            if opened is not None and role in unconfirmed:
                line = f"{head}: the {role} did not confirm that its output is off ({unconfirmed[role]})"
                notes.append(line)
                if alarm is not None:
                    alarm(line)
