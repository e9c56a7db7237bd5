"""The SCPI session every SCPI driver shares: pyvisa with the pyvisa-py backend (``@py``).

:class:`ScpiSession` opens a VISA resource (``TCPIP0::host::port::SOCKET`` …), sets read and
write terminations explicitly, always sets a timeout, records ``*IDN?`` and optionally sends
``*RST``/``*CLS``. Its verbs follow pyvisa's family: :meth:`~ScpiSession.write` (a configuration
command, followed by draining ``SYSTem:ERRor?`` until ``0``), :meth:`~ScpiSession.query`,
:meth:`~ScpiSession.query_float` and :meth:`~ScpiSession.query_binary_values` (an IEEE 488.2
definite-length block, checked against its header). One lock per instrument covers each
write+read; after a timeout or a garbled reply the next use first drains stale replies.

Error attribution: the session remembers every command sent since it last read the error queue
empty. A checked write first drains entries left by those earlier commands (and blames them,
not itself); an entry found right after a command is that command's. Drivers check the queue
after their queries too (readings, ``*OPC?``, a waveform fetch), so an entry is named after the
command that caused it (:class:`ScpiQueueError`). Only the urgent "output off" goes out before
any drain (switching off must not wait); entries found after it name it together with the
unchecked commands before it.

Command templates: each driver has SCPI-99 style defaults; a station overrides any of them with
the instrument option ``commands: {name: "TEMPLATE {value}"}`` (see ``docs/scpi.md``).
"""

from __future__ import annotations

import os
import re
import socket
import threading
import time
from collections.abc import Mapping
from typing import Any

import numpy as np

from benchgate.errors import InstrumentDisconnected, InstrumentError, ScpiQueueError
from benchgate.instruments.scpi_commands import (
    COMMON_COMMANDS,
    _format_arg,
    command_templates,
    station_error,
)

__all__ = ["COMMON_COMMANDS", "ScpiSession", "command_templates", "station_error"]

DEFAULT_VISA_LIBRARY = "@py"
ERROR_QUEUE_CAP = 20  # SYSTem:ERRor? reads before we give up on an instrument's queue
CHUNK_SIZE = 1 << 20

_ERROR_REPLY = re.compile(r'^\s*([+-]?\d+)\s*,\s*"(.*)"\s*$', re.DOTALL)


def _is_timeout(exc: Exception) -> bool:
    from pyvisa import constants

    return getattr(exc, "error_code", None) == constants.StatusCode.error_timeout


def _socket_session(res: Any) -> Any:
    """pyvisa-py's raw-socket session object behind ``res``, or None (another backend/kind)."""
    sessions = getattr(getattr(res, "visalib", None), "sessions", None)
    backend_session = sessions.get(res.session) if isinstance(sessions, dict) else None
    return backend_session if type(backend_session).__name__ == "TCPIPSocketSession" else None


def _tune_socket_session(role: str, address: str, res: Any) -> None:
    """Three fixes for pyvisa-py raw sockets; they do nothing with another backend.

    pyvisa-py does not look at the outcome of its non-blocking connect, so a refused
    connection only shows later as a timeout: check ``SO_ERROR`` now and say so. A command
    and the ``SYST:ERR?`` right after it must not wait ~40 ms for a delayed ACK (Nagle): set
    TCP_NODELAY on the socket (pyvisa-py 0.8's VI_ATTR_TCPIP_NODELAY setter is not wired up).
    And it reads 4 KiB per recv(); let it take up to CHUNK_SIZE (a 4 MB waveform otherwise
    costs about a thousand select/recv rounds).
    """
    backend_session = _socket_session(res)
    if backend_session is None:
        return
    sock = getattr(backend_session, "interface", None)
    if isinstance(sock, socket.socket):
        err = sock.getsockopt(socket.SOL_SOCKET, socket.SO_ERROR)
        if err:
            raise InstrumentError(role, f"cannot open {address}: {os.strerror(err)}")
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    if isinstance(getattr(backend_session, "max_recv_size", None), int):
        backend_session.max_recv_size = max(backend_session.max_recv_size, CHUNK_SIZE)


class ScpiSession:
    """One open SCPI instrument (use :meth:`open`)."""

    def __init__(self, role: str, address: str, resource: Any, *, timeout: float,
                 templates: Mapping[str, str], resync_timeout: float | None = None):
        self.role = role
        self.address = address
        self.timeout = float(timeout)
        self.templates = dict(templates)
        self.identity: str | None = None
        self.stale_errors: list[tuple[int, str]] = []  # queue entries found at open
        self.discarded_replies = 0  # stale replies drained after timeouts (for diagnostics)
        self._res = resource
        self._lock = threading.RLock()
        self._stale = False
        self._closed = False
        self._unchecked: list[str] = []  # commands sent since the error queue was last read empty
        self._dead: str | None = None  # why the link was given up (no reply even to a resync)
        # after a timeout the link gets one more timeout's worth to answer, not several
        self._resync_timeout = resync_timeout or max(1.0, self.timeout)

    # ------------------------------------------------------------------ opening
    @classmethod
    def open(cls, config, defaults: Mapping[str, str]) -> ScpiSession:
        """Open ``config.address`` through pyvisa, identify, optionally reset, clear errors."""
        import pyvisa

        role = config.role
        templates = command_templates(config, defaults)
        timeout = float(config.timeout)
        if not timeout > 0:
            raise station_error(config, f"timeout must be > 0 s, got {timeout!r}")
        library = config.option("visa_library", DEFAULT_VISA_LIBRARY)
        try:
            rm = pyvisa.ResourceManager(library)
        except (OSError, ValueError, pyvisa.errors.Error) as exc:
            raise InstrumentError(role, f"VISA library {library!r} is not usable: {exc}") from exc
        try:
            res = rm.open_resource(config.address, read_termination="\n", write_termination="\n",
                                   timeout=round(timeout * 1000), open_timeout=round(timeout * 1000))
        except Exception as exc:  # pyvisa-py raises bare Exception for refused connections
            raise InstrumentError(role, f"cannot open {config.address}: {exc}") from exc
        session = cls(role, config.address, res, timeout=timeout, templates=templates,
                      resync_timeout=config.option("resync_timeout"))
        try:
            res.chunk_size = CHUNK_SIZE  # type: ignore[attr-defined]  # on message-based resources
            _tune_socket_session(role, config.address, res)
            session.identity = session.query(templates["identify"])
            session.stale_errors = session.read_errors()  # left by whoever used it before: kept
            if config.option("reset", False):
                session.write(templates["reset"])
                session.write(templates["clear"])
        except BaseException:
            session.close()
            raise
        return session

    # ------------------------------------------------------------------ templates
    def command(self, name: str, **params: Any) -> str:
        """The text of template ``name`` with ``params`` filled in."""
        return self.templates[name].format(**{k: _format_arg(v) for k, v in params.items()})

    # ------------------------------------------------------------------ verbs
    def write(self, command: str, *, check: bool = True, urgent: bool = False) -> None:
        """Send ``command``; with ``check`` raise :class:`ScpiQueueError` for any queue entry.

        A checked write first drains what earlier unchecked commands left in the queue (and
        blames them); ``urgent`` skips that, so the command goes out at once (switching a supply
        off). A write reads nothing, so it goes out even while stale replies wait to be drained.
        """
        with self._lock:
            if check and not urgent and self._unchecked:
                earlier = list(self._unchecked)
                entries = self.read_errors()
                if entries:
                    raise ScpiQueueError(self.role, entries, earlier, found_before=command)
            self._call("write", command, lambda: self._res.write(command))
            self._unchecked.append(command)
            if check:
                self.check_errors(command)

    def query(self, command: str, *, timeout: float | None = None, check: bool = False) -> str:
        """Send ``command`` and return the reply line (termination stripped).

        With ``check`` the error queue is read right after the reply, and an entry raises
        :class:`ScpiQueueError` naming ``command``.
        """
        with self._lock:
            self._prepare()
            self._note(command)
            reply = self._call("query", command, lambda: self._query_line(command, timeout))
            if check:
                self.check_errors(command)
            return reply

    def query_float(self, command: str, *, timeout: float | None = None, check: bool = False) -> float:
        """A query whose reply is one decimal number (``check`` as for :meth:`query`)."""
        with self._lock:
            reply = self.query(command, timeout=timeout, check=check)
            try:
                return float(reply.split(";")[0].strip())
            except ValueError:
                self._stale = True
                raise InstrumentError(self.role, f"{command!r} returned {reply[:40]!r}, not a number") from None

    def query_binary_values(self, command: str, *, datatype: str = "f", is_big_endian: bool = False,
                            points: int | None = None, timeout: float | None = None,
                            check: bool = False) -> np.ndarray:
        """Send ``command`` and read an IEEE 488.2 definite-length block of ``datatype`` values.

        The header ``#<n><length>`` is checked (digit count, length a whole number of values,
        ``points`` values when given), then exactly ``length`` bytes and the ``\\n`` termination
        are read with termination-character detection switched off (binary data may hold 0x0A).
        """
        dtype = np.dtype(datatype).newbyteorder(">" if is_big_endian else "<")
        with self._lock:
            self._prepare()
            self._note(command)
            values = self._call("binary query", command,
                                lambda: self._query_block(command, dtype, points, timeout))
            if check:
                self.check_errors(command)
            return values

    def check_errors(self, after: str) -> None:
        """Drain ``SYSTem:ERRor?``; raise :class:`ScpiQueueError` if it held anything.

        The entries are attributed to ``after`` when it is the only command sent since the
        queue was last read empty, otherwise to all those commands (``suspects``).
        """
        suspects = list(self._unchecked) or [after]
        entries = self.read_errors()
        if entries:
            raise ScpiQueueError(self.role, entries, suspects)

    def _note(self, command: str) -> None:
        if len(self._unchecked) >= 50:
            del self._unchecked[:25]
        self._unchecked.append(command)

    def read_errors(self) -> list[tuple[int, str]]:
        """Read ``SYSTem:ERRor?`` until it answers ``0`` (at most ERROR_QUEUE_CAP times)."""
        entries: list[tuple[int, str]] = []
        command = self.templates["error_query"]
        for _ in range(ERROR_QUEUE_CAP):
            with self._lock:
                self._prepare()
                reply = self._call("query", command, lambda: self._query_line(command, None))
            m = _ERROR_REPLY.match(reply)
            if not m:
                self._stale = True
                raise InstrumentError(self.role, f"{command!r} returned {reply[:60]!r}, "
                                                 "not <code>,\"<text>\"")
            code, text = int(m.group(1)), m.group(2)
            if code == 0:
                self._unchecked.clear()
                return entries
            entries.append((code, text))
        raise InstrumentError(self.role, f"error queue still not empty after {ERROR_QUEUE_CAP} reads "
                                         f"of {command!r} (last {entries[-1][0]},\"{entries[-1][1]}\")",
                              code=entries[0][0], code_text=entries[0][1])

    def close(self) -> None:
        with self._lock:
            if self._closed:
                return
            self._closed = True
            try:
                self._res.close()
            except Exception:  # closing a dead socket must not hide the original problem
                pass

    # ------------------------------------------------------------------ internals
    def _call(self, what: str, command: str, fn):
        import pyvisa

        if self._closed:
            raise InstrumentError(self.role, f"{what} {command!r} on a closed session")
        if self._dead is not None and what != "write":  # not waited on again; a write still goes out
            raise InstrumentDisconnected(self.role, f"{what} {command!r} not sent: {self._dead}")
        try:
            return fn()
        except pyvisa.errors.VisaIOError as exc:
            self._stale = True
            if _is_timeout(exc):
                raise InstrumentError(self.role, f"no reply to {command!r} within {self.timeout:g} s "
                                                 f"({self.address})") from exc
            raise InstrumentError(self.role, f"{what} {command!r} failed: {exc}") from exc
        except (OSError, UnicodeDecodeError) as exc:
            self._stale = True
            raise InstrumentError(self.role, f"{what} {command!r} failed: {exc}") from exc

    def _with_timeout(self, timeout: float | None, fn):
        if timeout is None:
            return fn()
        self._res.timeout = round(float(timeout) * 1000)
        try:
            return fn()
        finally:
            self._res.timeout = round(self.timeout * 1000)

    def _query_line(self, command: str, timeout: float | None) -> str:
        self._res.write(command)
        raw = self._with_timeout(timeout, self._res.read_raw)
        try:
            return raw.decode("ascii").rstrip("\r\n")
        except UnicodeDecodeError:
            self._stale = True
            raise InstrumentError(self.role, f"{command!r} returned non-text bytes {bytes(raw[:20])!r}") from None

    def _read_exact(self, count: int, timeout: float | None) -> bytes:
        """Exactly ``count`` bytes, through the VISA library's read (viRead) for the whole count.

        Going to ``visalib.read`` directly (pyvisa's documented low-level call) saves the two
        copies ``read_bytes`` makes of a 4 MB block; timeouts still raise VisaIOError.
        """
        from pyvisa.constants import StatusCode

        def run() -> bytes:
            parts: list[bytes] = []
            got = 0
            # "count reached" is the expected outcome here, not a warning
            with self._res.ignore_warning(StatusCode.success_max_count_read,
                                          StatusCode.success_device_not_present):
                while got < count:
                    chunk, _status = self._res.visalib.read(self._res.session, count - got)
                    if not chunk:
                        raise InstrumentError(self.role, f"connection to {self.address} ended mid-block")
                    parts.append(chunk)
                    got += len(chunk)
            return parts[0] if len(parts) == 1 else b"".join(parts)

        return self._with_timeout(timeout, run)

    def _query_block(self, command: str, dtype: np.dtype, points: int | None,
                     timeout: float | None) -> np.ndarray:
        from pyvisa import constants

        self._res.write(command)
        self._res.set_visa_attribute(constants.VI_ATTR_TERMCHAR_EN, constants.VI_FALSE)
        try:
            head = self._read_exact(2, timeout)
            if head[:1] != b"#" or not head[1:2].isdigit() or head[1:2] == b"0":
                self._stale = True
                raise InstrumentError(self.role, f"{command!r} did not return a definite-length block "
                                                 f"(starts {head!r})")
            digits = self._read_exact(int(head[1:2]), timeout)
            if not digits.isdigit():
                self._stale = True
                raise InstrumentError(self.role, f"{command!r}: bad block header {head + digits!r}")
            length = int(digits)
            if length % dtype.itemsize:
                self._stale = True
                raise InstrumentError(self.role, f"{command!r}: block of {length} bytes is not a whole "
                                                 f"number of {dtype.itemsize}-byte values")
            if points is not None and length != points * dtype.itemsize:
                self._stale = True
                raise InstrumentError(self.role, f"{command!r}: block holds {length // dtype.itemsize} "
                                                 f"values, expected {points}")
            data = self._read_exact(length, timeout) if length else b""
            end = self._read_exact(1, timeout)
            if end != b"\n":
                self._stale = True
                raise InstrumentError(self.role, f"{command!r}: block not followed by the newline "
                                                 f"termination (got {end!r})")
        finally:
            self._res.set_visa_attribute(constants.VI_ATTR_TERMCHAR_EN, constants.VI_TRUE)
        return np.frombuffer(data, dtype=dtype).astype(np.float64)

    def _prepare(self) -> None:
        """Before the next exchange after a timeout: drain stale replies.

        Sends ``*IDN?`` and discards every line until the identity recorded at open comes back
        (the instrument answers in order, so everything before it is stale).
        """
        if not self._stale or self._closed or self._dead is not None:
            return  # a given-up link fails at once in _call
        import pyvisa

        self._stale = False
        marker = self.templates["identify"]
        deadline = time.monotonic() + self._resync_timeout
        try:
            self._res.write(marker)
            while True:
                try:
                    raw = self._res.read_raw()
                except pyvisa.errors.VisaIOError as exc:
                    if not _is_timeout(exc) or time.monotonic() >= deadline:
                        raise
                    continue
                line = raw.decode("ascii", errors="replace").rstrip("\r\n")
                if self.identity is not None and line == self.identity:
                    return
                if self.identity is None and time.monotonic() >= deadline:
                    return
                self.discarded_replies += 1
        except (pyvisa.errors.VisaIOError, OSError) as exc:
            self._stale = True
            self._dead = (f"not answering after an earlier timeout ({self.address}), "
                          "so the link was given up")
            raise InstrumentDisconnected(self.role, f"{self._dead}: {exc}") from exc

