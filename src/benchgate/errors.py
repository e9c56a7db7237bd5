"""The one error family of benchgate.

Every error a user can cause (a bad plan, a bad capture file, an instrument that misbehaves)
is a :class:`BenchgateError`. The command line prints ``benchgate: <where>: <message>`` for it
and exits non-zero; only ``--debug`` shows a traceback.
"""

from __future__ import annotations

from dataclasses import dataclass


class BenchgateError(Exception):
    """Root of every error benchgate raises on purpose."""

    exit_code = 2

    def where(self) -> str | None:
        """The place the error is about (file position, instrument name), or None."""
        return None

    def one_line(self) -> str:
        """The error as the single line the CLI prints (without the ``benchgate:`` prefix)."""
        where = self.where()
        text = " ".join(str(self).split())
        return f"{where}: {text}" if where else text


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


class PlanError(BenchgateError):
    """A test plan or station file that cannot be used, with where the problem is."""

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


class PlanErrors(BenchgateError):
    """Several plan errors found in one pass; a plan reports all of them at once."""

    def __init__(self, errors: list[PlanError]):
        if not errors:
            raise ValueError("PlanErrors needs at least one error")
        super().__init__(errors[0].one_line())
        self.errors = list(errors)

    def one_line(self) -> str:
        return self.errors[0].one_line()

    def lines(self) -> list[str]:
        return [e.one_line() for e in self.errors]


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


class CaptureError(BenchgateError):
    """A capture file or record that cannot be read or used, naming the file (and line)."""

    def __init__(self, message: str, file: str | None = None, line: int | None = None):
        super().__init__(message)
        self.message = message
        self.file = file
        self.line = line

    def where(self) -> str | None:
        if self.file is None:
            return None
        return f"{self.file}:{self.line}" if self.line is not None else self.file
