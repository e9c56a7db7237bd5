"""The serial ADC board of the understudy bench as real firmware: the reference firmware
(``firmware/``, ATmega328P at 16 MHz) running on simavr inside ``avr-harness``.

:class:`FirmwareAdcDevice` starts the harness on a pseudo-terminal (the host opens
:attr:`~FirmwareAdcDevice.port` with pyserial, as it does the Python device model) and serves
its link (``firmware/harness/link.h``) from a thread:

- at each ADC conversion start the harness asks for the input voltage of the pin being
  converted, in blocks along that pin's sampling grid; they come from the same circuit
  simulation the Python device model samples (:meth:`VirtualAdc.voltages` plus its input
  noise), pin A0 = channel ``out``, A1 = ``rail``;
- the firmware's fixture-power pin (D2) closes the bench's relay;
- when the simulated world changes (supply switched, relay, another unit) the generation on the
  shared clock page is bumped and the harness drops the voltages it asked for ahead.

Time: the bench clock is the AVR's own cycle count (:class:`HarnessClock`), published by the
harness, divided by its crystal frequency (16 MHz off by ``crystal_ppm``). The harness runs at
most ``speed`` times real time; when it cannot keep up, the whole bench (runner waits, SCPI
instruments, the host's arrival-rate verification) runs slower with it instead of drifting apart, and
:meth:`HarnessClock.measured_speed` states what it achieved.
"""

from __future__ import annotations

import mmap
import os
import socket
import struct
import subprocess
import tempfile
import threading
import time
import tty

import numpy as np

from benchgate.errors import SimError
from benchgate.sim.avr_harness import (  # noqa: F401  (re-exported: the module's public face)
    _PAGE,
    BUILD_ENV,
    DEFAULT_BAUD,
    DROPPED,
    F_AVR,
    GENERATION,
    SENT,
    STATE,
    STOP,
    TRIG_COUNT,
    TRIG_FIRST,
    TRIG_LAST,
    TRIG_MAX,
    TRIG_MIN,
    TRIG_RESET,
    FirmwareBuild,
    HarnessClock,
    build_dir,
    find_build,
    require_build,
)

PIN_CHANNELS = ("out", "rail")  # A0, A1; A2..A5 read 0 V
_MSG = struct.Struct("<BBHIQQ")
MSG_VOLTS, MSG_POWER = 1, 2
START_TIMEOUT = 10.0  # wall seconds for the harness to come up

AVCC_MV = 5000  # the harness's AVcc, the firmware's ADC reference


def chip_code_millivolts(volts: np.ndarray) -> np.ndarray:
    """Whole-mV pin levels that simavr's ADC converts to the codes a real ATmega328P gives for
    ``volts`` (see :meth:`FirmwareAdcDevice.millivolts`)."""
    codes = np.clip(np.rint(np.asarray(volts, dtype=np.float64) / (AVCC_MV / 1000) * 1024), 0, 1023)
    return np.ceil(codes * AVCC_MV / 1023).astype("<u2")


class FirmwareAdcDevice:
    """The reference firmware in the loop. Create it first (its :attr:`clock` is the bench's),
    :meth:`attach` the bench state and virtual ADC, then :meth:`start`.

    Parameters
    ----------
    speed : float
        At most this many bench seconds per wall second (0: as fast as the harness can).
    protocol : {"framed", "lines"}
        Sets the firmware's mode jumper (D3).
    crystal_ppm : float
        The board's 16 MHz crystal error; samples are really taken at rate × (1 + error).
    bridge_bytes : int
        What the USB-serial bridge holds while the host does not read; more is dropped.
    baud : int
        Which firmware build to run (its USART baud rate).
    """

    def __init__(self, *, speed: float = 1.0, protocol: str = "framed", crystal_ppm: float = 18.0,
                 bridge_bytes: int = 65536, baud: int = DEFAULT_BAUD, build: FirmwareBuild | None = None,
                 seed: int = 1):
        if protocol not in ("framed", "lines"):
            raise ValueError(f"protocol must be 'framed' or 'lines', got {protocol!r}")
        self.build = build or require_build(baud)
        self.protocol = protocol
        self.speed = float(speed)
        self.baud = int(baud)
        self.bridge_bytes = int(bridge_bytes)
        self.crystal_hz = F_AVR * (1.0 + crystal_ppm * 1e-6)
        fd, self._page_path = tempfile.mkstemp(prefix="benchgate-avr-", suffix=".page")
        try:
            os.write(fd, bytes(_PAGE.size))
            self._page = mmap.mmap(fd, _PAGE.size)
        finally:
            os.close(fd)
        self.clock = HarnessClock(self._page, self.crystal_hz, self.speed)
        self.port: str | None = None
        self.disconnected = threading.Event()
        self.state = None
        self.adc = None
        self.stderr_text = ""
        self._rng = np.random.default_rng(seed)
        self._proc: subprocess.Popen | None = None
        self._sock: socket.socket | None = None
        self._slave = -1
        self._thread: threading.Thread | None = None
        self._closed = False

    # ----------------------------------------------------------------- wiring
    def attach(self, state, adc) -> FirmwareAdcDevice:
        """Serve the circuit of ``state`` through ``adc``'s channel voltages; changes of the
        state (power, relay, unit) invalidate what the harness asked for ahead."""
        self.state, self.adc = state, adc
        for name in ("set_supply", "set_relay", "load_unit"):
            original = getattr(state, name)

            def changed(*args, _original=original, **kwargs):
                result = _original(*args, **kwargs)
                self.bump()
                return result

            setattr(state, name, changed)
        return self

    def bump(self) -> None:
        """The simulated world changed: voltages the harness holds for later are stale."""
        g = struct.unpack_from("<Q", self._page, 8 * GENERATION)[0]
        struct.pack_into("<Q", self._page, 8 * GENERATION, g + 1)

    @property
    def bridge_dropped(self) -> int:
        """Bytes the bridge dropped because the host was not reading."""
        return struct.unpack_from("<Q", self._page, 8 * DROPPED)[0]

    @property
    def bytes_sent(self) -> int:
        return struct.unpack_from("<Q", self._page, 8 * SENT)[0]

    def restart_start_stats(self) -> None:
        """Restart the statistics of A0's conversion starts (see :meth:`start_stats`)."""
        struct.pack_into("<Q", self._page, 8 * TRIG_RESET, 1)

    @property
    def start_stats_restarting(self) -> bool:
        """A restart was asked for and no conversion has started since (the harness restarts
        the statistics at the next one)."""
        return struct.unpack_from("<Q", self._page, 8 * TRIG_RESET)[0] != 0

    def start_stats(self) -> tuple[int, int, int, int]:
        """Conversion starts on A0 since :meth:`restart_start_stats`: (count, cycles from the
        first to the last, shortest and longest interval between two, in AVR cycles)."""
        def read():
            return tuple(struct.unpack_from("<Q", self._page, 8 * i)[0]
                         for i in (TRIG_COUNT, TRIG_MIN, TRIG_MAX, TRIG_FIRST, TRIG_LAST))

        now = read()
        while (again := read()) != now:  # the harness may be updating them: take a settled copy
            now = again
        count, lo, hi, first, last = now
        return count, last - first, lo, hi

    @property
    def running(self) -> bool:
        return self._proc is not None and self._proc.poll() is None

    # ----------------------------------------------------------------- life cycle
    def __enter__(self) -> FirmwareAdcDevice:
        self.start()
        return self

    def __exit__(self, *exc) -> None:
        self.stop()

    def start(self) -> None:
        if self.state is None:
            raise RuntimeError("attach() the bench state before start()")
        master, self._slave = os.openpty()
        tty.setraw(self._slave)
        os.set_blocking(master, False)
        self.port = os.ttyname(self._slave)
        ours, theirs = socket.socketpair()
        self._sock = ours
        cmd = [str(self.build.harness), "--elf", str(self.build.elf), "--pty-fd", str(master),
               "--link-fd", str(theirs.fileno()), "--page", self._page_path, "--speed", repr(self.speed),
               "--crystal-hz", repr(self.crystal_hz), "--bridge-bytes", str(self.bridge_bytes)]
        if self.protocol == "lines":
            cmd.append("--lines")
        try:
            self._proc = subprocess.Popen(cmd, pass_fds=(master, theirs.fileno()), stdin=subprocess.DEVNULL,
                                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        finally:
            os.close(master)
            theirs.close()
        proc = self._proc
        self.clock.alive = lambda: proc.poll() is None
        threading.Thread(target=self._drain_stderr, name="avr-harness stderr", daemon=True).start()
        self._thread = threading.Thread(target=self._serve, name=f"avr-harness link {self.port}", daemon=True)
        self._thread.start()
        deadline = time.monotonic() + START_TIMEOUT
        while not self.clock._running():
            if self._proc.poll() is not None or time.monotonic() > deadline:
                self.stop()
                raise SimError(f"the firmware harness did not start: {self.stderr_text.strip() or 'no output'}")
            time.sleep(0.002)
        self.clock.started()

    def _drain_stderr(self) -> None:
        proc = self._proc
        if proc is None or proc.stderr is None:
            return
        for raw in proc.stderr:
            self.stderr_text = (self.stderr_text + raw.decode("utf-8", "replace"))[-4000:]

    def stop(self) -> None:
        if self._closed:
            return
        self._closed = True
        struct.pack_into("<Q", self._page, 8 * STOP, 1)
        proc = self._proc
        if proc is not None:
            try:
                proc.wait(timeout=5)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait(timeout=5)
        if self._sock is not None:
            self._sock.close()
        if self._thread is not None:
            self._thread.join(timeout=5)
        self._close_slave()
        try:
            os.unlink(self._page_path)
        except OSError:
            pass

    def disconnect(self) -> None:
        """Pull the cable: the harness stops and the port goes away under the host."""
        self.disconnected.set()
        proc = self._proc
        if proc is not None and proc.poll() is None:
            proc.kill()
            proc.wait(timeout=5)
        self._close_slave()

    def _close_slave(self) -> None:
        if self._slave >= 0:
            fd, self._slave = self._slave, -1
            try:
                os.close(fd)
            except OSError:
                pass

    # ----------------------------------------------------------------- the link
    def _recv(self, n: int) -> bytes | None:
        buf = bytearray()
        while len(buf) < n:
            try:
                chunk = self._sock.recv(n - len(buf))
            except OSError:
                return None
            if not chunk:
                return None
            buf += chunk
        return bytes(buf)

    def _serve(self) -> None:
        try:
            self._serve_link()
        finally:
            # the board is gone (stopped, crashed, cable pulled): its pins float and the
            # fixture relay, driven through D4, drops out
            if self.state is not None and self.state.relay:
                self.state.set_relay(False)

    def _serve_link(self) -> None:
        while True:
            head = self._recv(_MSG.size)
            if head is None:
                return
            kind, arg, _zero, n, t0, step = _MSG.unpack(head)
            try:
                if kind == MSG_VOLTS:
                    reply = self.millivolts(arg, t0, step, n).tobytes()
                elif kind == MSG_POWER:
                    self.state.set_relay(bool(arg))
                    reply = b"\x01"
                else:
                    return
                self._sock.sendall(reply)
            except OSError:
                return

    def millivolts(self, pin: int, t0: int, step: int, n: int) -> np.ndarray:
        """Input of analog pin ``pin`` at AVR cycles ``t0 + k·step`` (k < n), in whole millivolts
        (simavr's input unit).

        simavr converts ``mV × 1023 // 5000`` where the chip converts ``V × 1024 / 5 V`` (datasheet
        formula; rounded, with the ideal half-LSB offset, as the Python device model quantises);
        the pin gets the smallest whole-mV level that simavr converts to the chip's code, so the
        firmware reads what a real ATmega328P would read."""
        t = (t0 + step * np.arange(n, dtype=np.float64)) / self.crystal_hz
        if pin < len(PIN_CHANNELS):
            v = self.adc.voltages(PIN_CHANNELS[pin], t) + self._rng.normal(0.0, self.adc.noise, size=n)
        else:
            v = np.zeros(n)
        return chip_code_millivolts(v)
