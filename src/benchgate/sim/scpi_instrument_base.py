"""The common part of every emulated SCPI instrument: message parsing, error queue, status.

:class:`EmulatedInstrument` parses program messages (IEEE 488.2 common commands and SCPI-99 style
headers with short/long forms and optional nodes), keeps a SCPI error queue and an event status
register, and answers from a :class:`~benchgate.sim.interfaces.ScpiBackend`. The instruments
themselves are in :mod:`benchgate.sim.scpi_emulated`.
"""

from __future__ import annotations

import re
import threading
from collections import deque

from benchgate.clock import Clock, SystemClock
from benchgate.sim.interfaces import ScpiBackend
from benchgate.sim.scpi_parse import (
    ERROR_TEXTS,
    Handler,
    ScpiCommandError,
    _Command,
    _compile,
    _matches,
    _split_message_units,
)

#: error queue length before overflow (SCPI requires at least two entries)
QUEUE_LENGTH = 10

# event status register bits (IEEE 488.2): operation complete, query, device, execution, command
ESR_OPC, ESR_QYE, ESR_DDE, ESR_EXE, ESR_CME = 0x01, 0x04, 0x08, 0x10, 0x20


class EmulatedInstrument:
    """Shared behaviour: common commands, error queue, ESR, header dispatch."""

    role = "instrument"
    model = "EMU"

    def __init__(self, backend: ScpiBackend, clock: Clock | None = None, serial: str = "0001"):
        self.backend = backend
        self.clock = clock or SystemClock()
        self.identity = f"Owl Hollow Kits,BG-{self.model},{serial},1.0"
        self.lock = threading.RLock()
        self._errors: deque[tuple[int, str]] = deque()
        self._esr = 0
        self.received: deque[str] = deque(maxlen=500)  # program messages, newest last
        self._commands: list[_Command] = []
        self.add("*IDN", True, lambda _a: self.identity, False)
        self.add("*RST", False, lambda _a: self.reset(), False)
        self.add("*CLS", False, lambda _a: self.clear_status(), False)
        self.add("*OPC", True, lambda _a: self.operation_complete(), False)
        self.add("*OPC", False, lambda _a: self._set_esr(ESR_OPC), False)
        self.add("*ESR", True, lambda _a: str(self._read_esr()), False)
        self.add("SYSTem:ERRor[:NEXT]", True, lambda _a: self.next_error(), False)
        self.add("SYSTem:ERRor:COUNt", True, lambda _a: str(len(self._errors)), False)
        self.reset()

    # -- tables
    def add(self, spec: str, query: bool, handler: Handler, takes_argument: bool = True) -> None:
        if spec.startswith("*"):
            pattern = ((spec.upper(), spec.upper(), False),)
        else:
            pattern = _compile(spec)
        self._commands.append(_Command(pattern, query, handler, takes_argument))

    # -- status
    def reset(self) -> None:
        """``*RST``: instrument settings to their defaults (subclasses add theirs)."""

    def clear_status(self) -> None:
        self._errors.clear()
        self._esr = 0

    def operation_complete(self) -> str:
        return "1"

    def _set_esr(self, bit: int) -> None:
        self._esr |= bit

    def _read_esr(self) -> int:
        value, self._esr = self._esr, 0
        return value

    def push_error(self, code: int, text: str | None = None) -> None:
        """Add an entry to the error queue (the last entry becomes -350 when it is full)."""
        text = ERROR_TEXTS.get(code, "Error") if text is None else text
        with self.lock:
            if len(self._errors) >= QUEUE_LENGTH:
                self._errors[-1] = (-350, ERROR_TEXTS[-350])
            else:
                self._errors.append((int(code), text))
            if -199 <= code <= -100:
                self._set_esr(ESR_CME)
            elif -299 <= code <= -200:
                self._set_esr(ESR_EXE)
            elif -399 <= code <= -300 or code > 0:
                self._set_esr(ESR_DDE)
            elif -499 <= code <= -400:
                self._set_esr(ESR_QYE)

    def next_error(self) -> str:
        code, text = self._errors.popleft() if self._errors else (0, ERROR_TEXTS[0])
        return f'{code},"{text}"'

    # -- dispatch
    def handle(self, message: str) -> str | bytes | None:
        """Execute one program message; returns the response message (None if no query)."""
        replies: list[str | bytes] = []
        with self.lock:
            self.received.append(message)
            for message_unit in _split_message_units(message):
                try:
                    out = self._execute(message_unit)
                except ScpiCommandError as exc:
                    self.push_error(exc.code, exc.text)
                    continue
                except Exception as exc:  # a backend fault shows in the queue, not as a dead port
                    self.push_error(-300, f"Device-specific error; {type(exc).__name__}: {exc}")
                    continue
                if out is not None:
                    replies.append(out)
        if not replies:
            return None
        if any(isinstance(r, bytes) for r in replies):
            return b";".join(r if isinstance(r, bytes) else r.encode() for r in replies)
        return ";".join(replies)  # type: ignore[arg-type]

    def _execute(self, message_unit: str) -> str | bytes | None:
        header, _, arg = message_unit.partition(" ")
        arg = arg.strip() or None
        query = header.endswith("?")
        header = header.rstrip("?").lstrip(":").upper()
        if not header or not re.fullmatch(r"\*?[A-Z0-9:]+", header):
            raise ScpiCommandError(-102, f"bad header {message_unit!r}")
        words = [header] if header.startswith("*") else [w for w in header.split(":")]
        for cmd in self._commands:
            if cmd.query == query and _matches(words, cmd.pattern):
                if arg is not None and not cmd.takes_argument:
                    raise ScpiCommandError(-108, header)
                if arg is None and cmd.takes_argument and not query:
                    raise ScpiCommandError(-109, header)
                return cmd.handler(arg)
        raise ScpiCommandError(-113, f"{header}{'?' if query else ''}")


# ----------------------------------------------------------------------------- instruments
