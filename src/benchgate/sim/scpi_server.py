"""A loopback SCPI bench: supply, DMM, counter and digitizer on raw TCP sockets.

:class:`ScpiBench` starts four emulated instruments (``sim.scpi_emulated``), each listening on
its own TCP port bound only to 127.0.0.1, newline-terminated messages, one thread per
connection. pyvisa-py reaches them as ``TCPIP0::127.0.0.1::<port>::SOCKET``, exactly like a
LAN instrument's raw socket port. What the instruments measure comes from a
:class:`~benchgate.sim.interfaces.ScpiBackend`; :class:`ConstantBackend` is a small stand-in.

Faults (:class:`ScpiFaults`) make the next replies of one instrument slow, missing, or preceded
by garbage; :meth:`ScpiBench.inject_error` queues a SCPI error.
"""

from __future__ import annotations

import math
import socket
import threading
from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from benchgate.clock import Clock, SystemClock
from benchgate.sim.interfaces import ScpiBackend
from benchgate.sim.scpi_emulated import EMULATED, EmulatedInstrument, EmulatedSupply

ROLES: tuple[str, ...] = ("supply", "generator", "dmm", "counter", "digitizer")
HOST = "127.0.0.1"


class ConstantBackend:
    """Fixed readings and a fixed sine, for tests of the server and the drivers.

    The supply draws ``load_current`` (capped by the current limit) while its output is on;
    the digitizer sees ``amplitude · sin(2π·frequency·t) + offset``.
    """

    def __init__(self, *, frequency: float = 1000.0, amplitude: float = 1.0, offset: float = 0.0,
                 dc_voltage: float = 1.25, ac_voltage: float = 0.7071, dc_current: float = 4e-3,
                 load_current: float = 4e-3):
        self.frequency, self.amplitude, self.offset = frequency, amplitude, offset
        self.dc_voltage, self.ac_voltage, self.dc_current = dc_voltage, ac_voltage, dc_current
        self.load_current = load_current
        self.voltage, self.current_limit, self.output = 0.0, 0.0, False
        self.changes: list[tuple[float, float, bool]] = []

    def supply_changed(self, voltage: float, current_limit: float, output: bool) -> None:
        self.voltage, self.current_limit, self.output = voltage, current_limit, output
        self.changes.append((voltage, current_limit, output))

    def supply_current(self) -> float:
        return min(self.load_current, self.current_limit) if self.output else 0.0

    def supply_voltage(self) -> float:
        return self.voltage if self.output else 0.0

    def dmm_dc_voltage(self) -> float:
        return self.dc_voltage

    def dmm_ac_voltage(self) -> float:
        return self.ac_voltage

    def dmm_dc_current(self) -> float:
        return self.dc_current

    def counter_frequency(self) -> float:
        return self.frequency

    def digitizer_record(self, rate: float, points: int) -> np.ndarray:
        t = np.arange(points) / rate
        return self.amplitude * np.sin(2 * math.pi * self.frequency * t) + self.offset

    # -- the generator and a two-channel response (a fixed gain and phase shift)
    generator: dict | None = None
    response_gain = 2.0
    response_phase_deg = -45.0

    def generator_changed(self, settings: dict) -> None:
        self.generator = dict(settings)

    def digitizer_channels_at(self, start: float, rate: float, points: int,
                              channels: tuple[str, ...]) -> np.ndarray:
        """The first channel sees the generator's sine (zero while its output is off), the
        others that sine times ``response_gain``, shifted by ``response_phase_deg``."""
        g = self.generator or {}
        t = np.arange(points) / rate
        on = bool(g.get("output"))
        amp = 0.5 * float(g.get("vpp", 0.0)) if on else 0.0
        f = float(g.get("frequency", 1000.0))
        offset = float(g.get("offset", 0.0)) if on else 0.0
        cols = [amp * np.sin(2 * math.pi * f * t) + offset]
        shift = math.radians(self.response_phase_deg)
        for _ in channels[1:]:
            cols.append(self.response_gain * amp * np.sin(2 * math.pi * f * t + shift))
        return np.column_stack(cols)


@dataclass
class _Fault:
    kind: str  # "slow" | "drop" | "garbage"
    count: int
    seconds: float = 0.0
    data: bytes = b""


class ScpiFaults:
    """Faults applied to the next replies of an instrument (thread-safe).

    ``slow(role, seconds)`` delays replies by wall-clock seconds; ``drop(role)`` never sends
    them; ``garbage(role, data)`` sends ``data`` just before them; ``error_on(role, header,
    code, text)`` queues a SCPI error when that command is executed.
    """

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._pending: dict[str, deque[_Fault]] = {r: deque() for r in ROLES}
        self._errors: dict[str, list[list]] = {}  # role -> [header, code, text, uses left]

    def _add(self, role: str, fault: _Fault) -> None:
        if role not in self._pending:
            raise ValueError(f"unknown role {role!r} (known: {', '.join(ROLES)})")
        if fault.count < 1:
            raise ValueError(f"fault count must be >= 1, got {fault.count}")
        with self._lock:
            self._pending[role].append(fault)

    def slow(self, role: str, seconds: float, count: int = 1) -> None:
        self._add(role, _Fault("slow", count, seconds=float(seconds)))

    def drop(self, role: str, count: int = 1) -> None:
        self._add(role, _Fault("drop", count))

    def garbage(self, role: str, data: bytes = b"\x15\xfe#garbage\n", count: int = 1) -> None:
        self._add(role, _Fault("garbage", count, data=bytes(data)))

    def error_on(self, role: str, header: str, code: int, text: str, count: int = 1) -> None:
        """Queue ``code,"text"`` on ``role`` when it next executes ``header`` (``count`` times).

        ``header`` is a program message unit's header as sent (``MEAS:CURR?``, ``OUTP``),
        compared without regard to case; the command itself still runs and answers normally,
        like an instrument that executes a command and flags it (a setting it clipped, a
        reading taken in a bad state).
        """
        if role not in self._pending:
            raise ValueError(f"unknown role {role!r} (known: {', '.join(ROLES)})")
        if count < 1:
            raise ValueError(f"fault count must be >= 1, got {count}")
        with self._lock:
            self._errors.setdefault(role, []).append([header.strip().upper(), int(code), text, count])

    def errors_for(self, role: str, message: str) -> list[tuple[int, str]]:
        """The errors to queue for program message ``message`` on ``role`` (consumes uses)."""
        with self._lock:
            armed = self._errors.get(role)
            if not armed:
                return []
            out = []
            for unit in message.split(";"):
                head = unit.strip().partition(" ")[0].upper()
                for entry in armed:
                    if entry[0] == head and entry[3] > 0:
                        entry[3] -= 1
                        out.append((entry[1], entry[2]))
            armed[:] = [e for e in armed if e[3] > 0]
            return out

    def clear(self) -> None:
        with self._lock:
            for q in self._pending.values():
                q.clear()
            self._errors.clear()

    def take(self, role: str) -> _Fault | None:
        """The fault for the reply about to be sent by ``role``, if any (consumes one use)."""
        with self._lock:
            q = self._pending.get(role)
            if not q:
                return None
            fault = q[0]
            fault.count -= 1
            if fault.count <= 0:
                q.popleft()
            return _Fault(fault.kind, 1, fault.seconds, fault.data)


class _Listener:
    """One instrument's TCP port: accept loop plus one thread per connection."""

    def __init__(self, instrument: EmulatedInstrument, faults: ScpiFaults, port: int = 0):
        self.instrument = instrument
        self.faults = faults
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self.sock.bind((HOST, port))  # loopback only, never all interfaces
        self.sock.listen(4)
        self.sock.settimeout(0.5)  # accept wakes up to look at the stop flag even without shutdown
        self.port = self.sock.getsockname()[1]
        self._stop = threading.Event()
        self._conns: set[socket.socket] = set()
        self._threads: list[threading.Thread] = []
        self._lock = threading.Lock()
        self._accept_thread = threading.Thread(
            target=self._accept_loop, name=f"scpi-{instrument.role}-accept", daemon=True)

    def start(self) -> None:
        self._accept_thread.start()

    def _accept_loop(self) -> None:
        while not self._stop.is_set():
            try:
                conn, _addr = self.sock.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            conn.settimeout(None)
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            with self._lock:
                if self._stop.is_set():
                    conn.close()
                    return
                self._conns.add(conn)
                t = threading.Thread(target=self._serve, args=(conn,),
                                     name=f"scpi-{self.instrument.role}-conn", daemon=True)
                self._threads.append(t)
            t.start()

    def _serve(self, conn: socket.socket) -> None:
        buf = bytearray()
        try:
            while not self._stop.is_set():
                chunk = conn.recv(65536)
                if not chunk:
                    return
                buf.extend(chunk)
                while (i := buf.find(b"\n")) >= 0:
                    line = bytes(buf[:i]).rstrip(b"\r")
                    del buf[: i + 1]
                    message = line.decode("ascii", errors="replace")
                    reply = self.instrument.handle(message)
                    for code, text in self.faults.errors_for(self.instrument.role, message):
                        self.instrument.push_error(code, text)
                    if reply is not None:
                        self._send(conn, reply)
        except OSError:
            return
        finally:
            with self._lock:
                self._conns.discard(conn)
            conn.close()

    def _send(self, conn: socket.socket, reply: str | bytes) -> None:
        fault = self.faults.take(self.instrument.role)
        if fault is not None:
            if fault.kind == "drop":
                return
            if fault.kind == "slow":
                self._stop.wait(fault.seconds)
            elif fault.kind == "garbage":
                conn.sendall(fault.data)
        data = reply.encode("ascii") if isinstance(reply, str) else reply
        if len(data) > 65536:
            conn.sendall(data)
            conn.sendall(b"\n")
        else:
            conn.sendall(data + b"\n")

    def signal_stop(self) -> None:
        """Stop accepting and wake every thread (shutdown wakes a blocked accept/recv)."""
        self._stop.set()
        for s in [self.sock, *self._connections()]:
            try:
                s.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
        try:
            self.sock.close()
        except OSError:
            pass

    def _connections(self) -> list[socket.socket]:
        with self._lock:
            return list(self._conns)

    def join(self) -> None:
        self._accept_thread.join(timeout=2.0)
        with self._lock:
            threads = list(self._threads)
        for t in threads:
            t.join(timeout=2.0)


class ScpiBench:
    """Four emulated SCPI instruments on loopback TCP ports.

    Parameters
    ----------
    backend : ScpiBackend
        What the instruments measure (the simulated board, or :class:`ConstantBackend`).
    clock : Clock, optional
        Paces the digitizer's acquisition time (default: real time).
    faults : ScpiFaults, optional
        Fault injection handle (one is made when not given; see ``.faults``).
    ports : mapping role -> int, optional
        Fixed ports; 0 or missing lets the OS choose.
    """

    def __init__(self, backend: ScpiBackend, *, clock: Clock | None = None,
                 faults: ScpiFaults | None = None, ports: Mapping[str, int] | None = None):
        self.backend = backend
        self.clock = clock or SystemClock()
        self.faults = faults or ScpiFaults()
        self._ports = dict(ports or {})
        unknown = set(self._ports) - set(ROLES)
        if unknown:
            raise ValueError(f"unknown roles in ports: {sorted(unknown)}")
        self.instruments: dict[str, EmulatedInstrument] = {
            role: EMULATED[role](backend, self.clock) for role in ROLES}
        self._listeners: dict[str, _Listener] = {}

    # -- lifecycle
    def start(self) -> ScpiBench:
        if self._listeners:
            return self
        try:
            for role in ROLES:
                listener = _Listener(self.instruments[role], self.faults, self._ports.get(role, 0))
                self._listeners[role] = listener
                listener.start()
        except OSError:
            self.stop()
            raise
        return self

    def stop(self) -> None:
        listeners, self._listeners = self._listeners, {}
        for listener in listeners.values():
            listener.signal_stop()
        for listener in listeners.values():
            listener.join()

    def __enter__(self) -> ScpiBench:
        return self.start()

    def __exit__(self, *exc) -> None:
        self.stop()

    # -- what tests and the understudy bench look at
    @property
    def ports(self) -> dict[str, int]:
        return {role: lst.port for role, lst in self._listeners.items()}

    @property
    def resources(self) -> dict[str, str]:
        """role -> VISA resource string (``TCPIP0::127.0.0.1::<port>::SOCKET``)."""
        return {role: f"TCPIP0::{HOST}::{port}::SOCKET" for role, port in self.ports.items()}

    @property
    def supply_output(self) -> bool:
        """Whether the emulated supply's output is on right now."""
        supply: EmulatedSupply = self.instruments["supply"]  # type: ignore[assignment]
        with supply.lock:
            return bool(supply.output)

    def inject_error(self, role: str, code: int, text: str) -> None:
        """Put ``code,"text"`` into ``role``'s SCPI error queue."""
        if role not in self.instruments:
            raise ValueError(f"unknown role {role!r} (known: {', '.join(ROLES)})")
        self.instruments[role].push_error(int(code), text)

