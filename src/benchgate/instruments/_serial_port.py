"""One serial port as the ADC driver uses it: opening, line commands, raw reads.

Every method here runs on the driver's owner thread (see ``serial_adc``). Reads use a short
pyserial timeout inside deadlines measured with the injected clock, so an understudy bench running
``speed`` times faster keeps its deadlines in its own time.
"""

from __future__ import annotations

import errno
import threading
import time

import numpy as np

from benchgate.clock import Clock
from benchgate.errors import InstrumentDisconnected, InstrumentError

POLL_S = 0.01  # wall seconds one pyserial read may block
IDENTIFY_RESEND_S = 0.5  # clock seconds between IDN? while waiting for a booting board

_open_ports: set[str] = set()  # ports open in this process (URL transports have no lock file)
_open_lock = threading.Lock()


def make_serial(address: str):
    """An unopened pyserial object for a path or a pyserial URL (tests may monkeypatch this)."""
    import serial

    if "://" in address:
        return serial.serial_for_url(address, do_not_open=True)
    port = serial.Serial()
    port.port = address
    return port


def resolve_usb(role: str, address: str) -> str:
    """``usb:VID:PID[:SERIAL]`` -> the device path of the one matching port."""
    from serial.tools import list_ports

    parts = address.split(":", 3)
    vid, pid = int(parts[1], 16), int(parts[2], 16)
    serial_no = parts[3] if len(parts) > 3 else None
    ports = list(list_ports.comports())
    hits = [p for p in ports if p.vid == vid and p.pid == pid
            and (serial_no is None or p.serial_number == serial_no)]
    want = f"USB {vid:04x}:{pid:04x}" + (f" serial {serial_no}" if serial_no else "")
    if not hits:
        seen = ", ".join(f"{p.device} ({p.vid or 0:04x}:{p.pid or 0:04x})" for p in ports) or "none"
        raise InstrumentError(role, f"no serial port matches {want} (ports: {seen})")
    if len(hits) > 1:
        raise InstrumentError(role, f"{len(hits)} ports match {want} ({', '.join(p.device for p in hits)}); "
                                    f"add 'serial' to the station's usb entry")
    return hits[0].device


def arrival_rate(points: list[tuple[float, int]], declared: float) -> float | None:
    """Samples per second from (clock time, samples so far) pairs, as the host saw them arrive.

    Samples cannot arrive before the device has taken them, only late (buffering, a busy
    host), so each sixth of the capture is represented by its least-late point (lateness
    judged against ``declared``); the rate is the median of the five segment-to-segment
    rates. A stall of the host, and the catch-up after it, moves one or two of the five;
    a device clock that disagrees with its declaration moves all of them.

    References
    ----------
    Keeping the least-delayed observation of each interval is the minimum-delay clock filter
    of NTP: D. L. Mills, "Internet time synchronization: the Network Time Protocol", IEEE
    Transactions on Communications 39(10), 1482-1493, 1991.
    """
    if len(points) < 12:
        return None
    arr = np.asarray(points, dtype=np.float64)
    t, c = arr[:, 0], arr[:, 1]
    late = t - c / declared
    segments = np.array_split(np.arange(len(arr)), 6)
    best = [int(q[np.argmin(late[q])]) for q in segments]
    rates = [(c[j] - c[i]) / (t[j] - t[i]) for i, j in zip(best[:-1], best[1:], strict=True) if t[j] > t[i]]
    return float(np.median(rates)) if rates else None


def least_rate(points: list[tuple[float, int]], since: float, min_count: int = 64) -> float | None:
    """The lowest sample rate the device must have had: max over (t, c) of (c - 1)/(t - since).

    A device cannot deliver its c-th sample sooner than (c - 1) sample periods after it was told
    to start at ``since``; transport and host delays only make arrivals later. So this is a
    lower bound on the device's true rate that no stall or catch-up burst can raise. Points
    with fewer than ``min_count`` samples are left out (the clock's resolution matters there).
    """
    best = None
    for t, c in points:
        if c >= min_count and t > since:
            r = (c - 1) / (t - since)
            best = r if best is None or r > best else best
    return best


class SerialPort:
    """An open serial port with a line buffer. Not thread-safe: one owner thread uses it."""

    def __init__(self, config, ser, path: str, clock: Clock):
        self.config = config
        self.role = config.role
        self.ser = ser
        self.path = path
        self.clock = clock
        self.alive = True
        self._buf = b""

    @classmethod
    def open(cls, config, clock: Clock) -> SerialPort:
        import serial

        role, opts = config.role, config.options
        path = resolve_usb(role, config.address) if config.address.startswith("usb:") else config.address
        with _open_lock:
            if path in _open_ports:
                raise InstrumentError(role, f"port {path} is busy: already open in this program")
            _open_ports.add(path)
        try:
            ser = make_serial(path)
            ser.baudrate = int(opts.get("baudrate", 115200))
            ser.timeout = POLL_S
            ser.write_timeout = max(float(config.timeout), 0.1)
            if opts.get("exclusive", True) and hasattr(ser, "exclusive") and "://" not in path:
                ser.exclusive = True
            if opts.get("dtr_low"):
                ser.dtr = False  # applied as the port opens: no reset pulse on boards wired to DTR
            if opts.get("rts_low"):
                ser.rts = False
            ser.open()
        except serial.SerialException as exc:
            _release(path)
            raise InstrumentError(role, _open_message(path, exc)) from None
        except (OSError, ValueError) as exc:
            _release(path)
            raise InstrumentError(role, f"cannot open {path}: {exc}") from None
        return cls(config, ser, path, clock)

    # ------------------------------------------------------------------ low level
    def _fail(self, exc: Exception) -> InstrumentDisconnected:
        self.alive = False
        detail = f"{type(exc).__name__}: {exc}"
        err = InstrumentDisconnected(self.role, f"adc on {self.path} disconnected ({detail})")
        err.detail = detail  # type: ignore[attr-defined]  # read back by the capture's message
        return err

    def read_available(self) -> bytes:
        """Whatever is there (waits at most POLL_S wall seconds for the first byte)."""
        if self._buf:
            data, self._buf = self._buf, b""
            return data
        return self._read_port()

    def _read_port(self) -> bytes:
        import serial

        try:
            return self.ser.read(max(1, self.ser.in_waiting))
        except (serial.SerialException, OSError) as exc:
            raise self._fail(exc) from exc

    def write_line(self, text: str) -> None:
        import serial

        try:
            self.ser.write(text.encode("ascii") + b"\n")
            self.ser.flush()
        except serial.SerialTimeoutException:
            raise InstrumentError(self.role, f"write to {self.path} timed out ({text!r})") from None
        except (serial.SerialException, OSError) as exc:
            raise self._fail(exc) from exc

    def _backstop(self, seconds: float) -> float:
        speed = getattr(self.clock, "speed", 1.0) or 1.0
        return time.monotonic() + seconds / speed + 1.0

    def read_line(self, deadline: float, backstop: float) -> str | None:
        """One text line, or None if the clock passes ``deadline`` first."""
        while True:
            nl = self._buf.find(b"\n")
            if nl >= 0:
                line, self._buf = self._buf[:nl], self._buf[nl + 1:]
                return line.decode("ascii", errors="replace").strip()
            if self.clock.monotonic() >= deadline or time.monotonic() >= backstop:
                return None
            self._buf += self._read_port()

    def flush_input(self) -> None:
        import serial

        self._buf = b""
        try:
            self.ser.reset_input_buffer()
        except (serial.SerialException, OSError) as exc:
            raise self._fail(exc) from exc

    # ------------------------------------------------------------------ protocol
    def identify(self, timeout: float) -> str:
        """Send ``IDN?`` (again every 0.5 s while a board boots) until an ``IDN`` line or the deadline."""
        start = self.clock.monotonic()
        deadline, backstop = start + timeout, self._backstop(timeout)
        next_send = start
        while True:
            now = self.clock.monotonic()
            if now >= deadline or time.monotonic() >= backstop:
                raise InstrumentError(self.role, f"adc on {self.path} did not identify within {timeout:g} s "
                                                 f"(no reply to IDN?; check the port, the firmware and "
                                                 f"that it speaks protocol v1)")
            if now >= next_send:
                self.write_line("IDN?")
                next_send = now + IDENTIFY_RESEND_S
            line = self.read_line(min(deadline, next_send), backstop)
            if line and line.startswith("IDN "):
                self.flush_input()  # boot banners, a second reply: nothing stale survives
                return line

    def wait_for_line(self, timeout: float) -> None:
        """A device without commands: wait until it has sent a whole line, then flush."""
        start = self.clock.monotonic()
        deadline, backstop = start + timeout, self._backstop(timeout)
        first = self.read_line(deadline, backstop)
        second = self.read_line(deadline, backstop) if first is not None else None
        if second is None:
            raise InstrumentError(self.role, f"adc on {self.path} sent no lines within {timeout:g} s "
                                             f"(a free-running lines device streams from power-up)")
        self.flush_input()

    def command(self, text: str, expect: str) -> str:
        """Send one command; return its reply (from ``expect`` on); an ``ERR ...`` reply raises.

        Whatever is waiting before the command is stale and dropped; a reply that arrives glued
        to late binary bytes (the tail of a frame) is still found by its prefix.
        """
        timeout = max(float(self.config.timeout), 0.1)
        self.flush_input()
        self.write_line(text)
        deadline, backstop = self.clock.monotonic() + timeout, self._backstop(timeout)
        while True:
            line = self.read_line(deadline, backstop)
            if line is None:
                raise InstrumentError(self.role, f"adc on {self.path} did not answer {text!r} "
                                                 f"within {timeout:g} s")
            at = line.find(expect)
            if at >= 0:
                return line[at:]
            at = line.find("ERR ")
            if at >= 0:
                raise InstrumentError(self.role, f"adc refused {text!r}: {line[at + 4:].strip()}")
            # anything else is stale (a late IDN reply, a banner): skip it

    def stop_stream(self) -> None:
        """Best effort: ask the device to stop and drop what it was sending."""
        if not self.alive:
            return
        try:
            self.write_line("STOP")
            timeout = max(float(self.config.timeout), 0.1)
            deadline, backstop = self.clock.monotonic() + timeout, self._backstop(timeout)
            while self.clock.monotonic() < deadline and time.monotonic() < backstop:
                data = self.read_available()
                if b"OK STOP" in data:
                    break
            self.flush_input()
        except InstrumentError:
            pass

    def close(self) -> None:
        self.alive = False
        try:
            self.ser.close()
        except Exception:  # noqa: BLE001 - closing a port that went away must not raise
            pass
        finally:
            _release(self.path)


def _release(path: str) -> None:
    with _open_lock:
        _open_ports.discard(path)


def _open_message(path: str, exc: Exception) -> str:
    code = getattr(exc, "errno", None)
    text = str(exc)
    if code in (errno.EAGAIN, errno.EWOULDBLOCK, errno.EBUSY) or "exclusively lock" in text:
        return f"port {path} is busy: another program has it open"
    if code == errno.ENOENT or "No such file" in text:
        return f"no such serial port {path} (is the adapter plugged in?)"
    if code == errno.EACCES or "Permission denied" in text:
        return f"permission denied opening {path} (is your user in the dialout group?)"
    return f"cannot open {path}: {text}"
