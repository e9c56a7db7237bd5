"""The one error family of benchgate, every class in one place.

Every error a user can cause (a bad plan or station file, a bad capture file, an instrument that
misbehaves, a run refused before it starts) is a :class:`BenchgateError`. The command line
prints ``benchgate: <where>: <message>`` for it and exits non-zero; only ``--debug`` shows a
traceback. This module is part of the shared bottom layer: it imports nothing of benchgate, and
any layer may raise its classes.

::

    BenchgateError
    ├── FileError                 a place in a text file: file:line:column
    │   ├── PlanError             a test plan
    │   ├── StationError          a station file
    │   └── ReportError           a stored report
    ├── FileErrors                several FileErrors of one file, reported at once
    │   ├── PlanErrors
    │   └── StationErrors
    ├── QuantityError (ValueError)    an engineering number that cannot be read
    │   └── NotFiniteError        NaN or infinity where a finite number is meant
    ├── InstrumentError           an instrument, by name (and its error-queue entry)
    │   ├── InstrumentDisconnected
    │   └── ScpiQueueError        error-queue entries, attributed to the command that caused them
    ├── CaptureError              a capture file or a capture's samples
    ├── PreflightError            a run refused before anything was touched
    │   └── StationBusy           another run holds the station
    ├── StepError                 a step that cannot go on
    ├── StoreError                the results database
    ├── BrowserError              the headless browser that prints reports
    └── SimError                  an understudy-bench request that cannot be met
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import ClassVar

#: exit code for bad input (a plan, a station, arguments) and refused runs
EXIT_USAGE = 2


class BenchgateError(Exception):
    """Root of every error benchgate raises on purpose."""

    exit_code = EXIT_USAGE

    def where(self) -> str | None:
        """The place the error is about (file position, instrument name), or None."""
        return None

    def one_line(self) -> str:
        """The error as the single line the CLI prints (without the ``benchgate:`` prefix)."""
        where = self.where()
        text = " ".join(str(self).split())
        return f"{where}: {text}" if where else text

    def lines(self) -> list[str]:
        """Every line the CLI prints for this error (one, unless several were collected)."""
        return [self.one_line()]


@dataclass(frozen=True)
class Position:
    """A place in a text file; line and column count from 1."""

    file: str
    line: int | None = None
    column: int | None = None

    def __str__(self) -> str:
        parts = [self.file]
        if self.line is not None:
            parts.append(str(self.line))
            if self.column is not None:
                parts.append(str(self.column))
        return ":".join(parts)


# ----------------------------------------------------------------------------- files


class FileError(BenchgateError):
    """A problem at a place in a text file (a plan, a station file, a stored report)."""

    def __init__(self, message: str, file: str, line: int | None = None, column: int | None = None):
        super().__init__(message)
        self.message = message
        self.position = Position(file, line, column)

    @property
    def file(self) -> str:
        return self.position.file

    @property
    def line(self) -> int | None:
        return self.position.line

    @property
    def column(self) -> int | None:
        return self.position.column

    def where(self) -> str:
        return str(self.position)


class PlanError(FileError):
    """A test plan that cannot be used, with where the problem is."""


class StationError(FileError):
    """A station file that cannot be used, with where the problem is."""


class ReportError(FileError):
    """A stored report that cannot be read, with the file and (for bad JSON) line and column."""


class FileErrors(BenchgateError):
    """Several errors found in one pass over one file; all are reported at once.

    ``item`` is the class of the single errors (a reader of any file kind makes them with it).
    """

    item: ClassVar[type[FileError]] = FileError

    def __init__(self, errors: list[FileError]):
        if not errors:
            raise ValueError(f"{type(self).__name__} needs at least one error")
        super().__init__(errors[0].one_line())
        self.errors = list(errors)

    def one_line(self) -> str:
        return self.errors[0].one_line()

    def lines(self) -> list[str]:
        return [e.one_line() for e in self.errors]


class PlanErrors(FileErrors):
    """Several plan errors found in one pass; a plan reports all of them at once."""

    item = PlanError


class StationErrors(FileErrors):
    """Several station-file errors found in one pass."""

    item = StationError


# ----------------------------------------------------------------------------- values


class QuantityError(BenchgateError, ValueError):
    """A value that is not a number, has an unknown unit of measure, or has the wrong dimension."""


class NotFiniteError(QuantityError):
    """A number that is NaN or infinite (``.nan``, ``inf``, ``1e999``) where a finite one is meant."""


# ----------------------------------------------------------------------------- bench


class InstrumentError(BenchgateError):
    """An instrument that cannot be reached or misbehaves.

    ``code`` and ``code_text`` carry an entry of the instrument's own error queue
    (for SCPI: ``SYSTem:ERRor?`` as ``-222,"Data out of range"``) when there is one.
    """

    exit_code = 3

    def __init__(
        self,
        instrument: str,
        message: str,
        *,
        code: int | None = None,
        code_text: str | None = None,
    ):
        super().__init__(message)
        self.instrument = instrument
        self.message = message
        self.code = code
        self.code_text = code_text

    def where(self) -> str:
        return self.instrument


class InstrumentDisconnected(InstrumentError):
    """The instrument went away (cable pulled, device reset) during use.

    ``partial`` holds whatever was received before the loss (for an ADC: a Capture), or None.
    """

    def __init__(self, instrument: str, message: str, *, partial=None):
        super().__init__(instrument, message)
        self.partial = partial


class ScpiQueueError(InstrumentError):
    """Entries of an instrument's SCPI error queue, attributed to the command(s) that caused them.

    ``code``/``code_text`` are the first entry; ``entries`` all of them; ``command`` the command
    they are attributed to (or, when the queue had not been read since several commands, the
    last of them, with ``suspects`` listing all); ``found_before`` the command that was about to
    be sent when they were found (None when found right after ``command``).
    """

    def __init__(self, instrument: str, entries: list[tuple[int, str]], suspects: list[str], *,
                 found_before: str | None = None, note: str | None = None):
        code, text = entries[0]
        more = f" (and {len(entries) - 1} more: " + "; ".join(
            f"{c},{t!r}" for c, t in entries[1:]) + ")" if len(entries) > 1 else ""
        if len(suspects) == 1:
            cause = f"{suspects[0]!r} rejected"
        else:
            cause = ("one of " + ", ".join(repr(c) for c in suspects[-4:])
                     + (f" (and {len(suspects) - 4} earlier)" if len(suspects) > 4 else "") + " rejected")
        where = f"; found in the queue before sending {found_before!r}" if found_before else ""
        where += f"; {note}" if note else ""
        super().__init__(instrument, f"{cause}: {code},\"{text}\"{more}{where}", code=code, code_text=text)
        self.entries = list(entries)
        self.suspects = list(suspects)
        self.command = suspects[-1] if suspects else None
        self.found_before = found_before


class CaptureError(BenchgateError):
    """A capture file or a capture's samples that cannot be read or used, naming the file (and line)."""

    def __init__(self, message: str, file: str | None = None, line: int | None = None):
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line

    def where(self) -> str | None:
        if self.file is None:
            return None
        return f"{self.file}:{self.line}" if self.line is not None else self.file


# ----------------------------------------------------------------------------- runs and results


class PreflightError(BenchgateError):
    """The run was refused before anything was touched (station, calibration, hazards).

    ``hint`` names what a face could offer to get past it (``benchgate.runner.attendant.Hint``:
    an option of its own, a button); the message itself never names one.
    """

    exit_code = EXIT_USAGE

    def __init__(self, message: str, where: str | None = None, hint: str | None = None):
        super().__init__(message)
        self.message = message
        self._where = where
        self.hint = hint

    def where(self) -> str | None:
        return self._where


class StationBusy(PreflightError):
    """Another process holds the station's lock; nothing was touched."""


class StepError(BenchgateError):
    """A step that cannot go on (no operator answer, unusable instrument reply); the unit is error."""

    exit_code = 3

    def __init__(self, step_id: str, message: str):
        super().__init__(message)
        self.step_id = step_id
        self.message = message

    def where(self) -> str:
        return f"step {self.step_id}"


class NobodyAnswers(BenchgateError, EOFError):
    """A face of the person at the bench that cannot ask anyone (unattended, end of input).

    An :class:`EOFError` too, so a step waiting for an answer ends as "no operator input".
    """


class StoreError(BenchgateError):
    """A results database that cannot be opened, read or written."""

    exit_code = 2

    def __init__(self, message: str, path: str | os.PathLike[str] | None = None):
        super().__init__(message)
        self.message = message
        self.path = None if path is None else str(path)

    def where(self) -> str | None:
        return self.path


class ServerUnreachable(StoreError):
    """The results database server could not be reached, or the connection to it broke: for a
    station a reason to queue the run (it is safe in the local file), never to lose it."""


class BrowserError(BenchgateError):
    """Chromium or Playwright missing, Chromium failing to start, or a page failing to load."""

    def where(self) -> str:
        return "chromium"


class SimError(BenchgateError):
    """An understudy-bench request that cannot be met (unknown board or defect)."""
