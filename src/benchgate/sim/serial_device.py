"""A simulated serial ADC on a real pseudo-terminal, speaking protocol v1.

:class:`PtyAdcDevice` opens a pty pair, puts the slave side in raw mode and serves the host
commands of ``docs/serial-protocol.md`` on the master side from its own thread. The driver
opens :attr:`PtyAdcDevice.port` (``/dev/pts/N``) with pyserial exactly as it would a USB
adapter. Samples come from a :class:`~benchgate.sim.interfaces.SampleSource`, paced by the
injected clock (real time by default; a ``ScaledClock(speed)`` sends ``speed`` times faster).
:class:`DeviceFaults` injects what real links do: garbage, dropped and corrupted frames, a
disconnect, a slow or missing identify reply, a sample clock that disagrees with what the
device declares.
"""

from __future__ import annotations

import errno
import fcntl
import os
import select
import threading
import tty
from dataclasses import dataclass, field

import numpy as np

from benchgate.clock import Clock, SystemClock
from benchgate.instruments.framing import (
    MAX_FRAME_SAMPLES,
    _positional_tables,
    encode_end,
    encode_frame,
)
from benchgate.sim.interfaces import SampleSource

DEFAULT_IDENTITY = "Owl Hollow Kits,OH-ADC2,SIM-0001,1.0"
OSC_HZ = 16_000_000  # the simulated device's sample clock: rates are 16 MHz / integer divider
MAX_BACKLOG = 1 << 20  # bytes the device buffers before it drops frames (an overrun)


@dataclass
class DeviceFaults:
    """Faults to inject; mutable, read by the device each time it is about to use one."""

    garbage_probability: float = 0.0  # per frame: random bytes (1-32) sent before it
    drop_probability: float = 0.0  # per frame: not sent
    corrupt_probability: float = 0.0  # per frame: one byte flipped
    drop_frames: set[int] = field(default_factory=set)  # frame numbers (from 0 at START)
    corrupt_frames: set[int] = field(default_factory=set)
    disconnect_after: float | None = None  # clock seconds of streaming, then the cable is "pulled"
    identify_delay: float = 0.0  # clock seconds after start the board is "booting": commands are ignored
    identify_missing: bool = False  # never answer IDN?
    rate_error: float = 0.0  # true sample rate = declared × (1 + rate_error)
    startup_bytes: bytes = b""  # sent as soon as the device starts (a boot banner, noise)
    # lines mode, by sample index since START: "drop" (line not sent), "repeat" (sent twice),
    # "split" (a line feed after its first digit), "garble" (letters instead of digits),
    # "bad_time" (the time stamp off by a large amount)
    line_faults: dict[int, str] = field(default_factory=dict)
    seed: int = 0


class SineSource:
    """A tiny SampleSource for tests: a sine in ADC codes, exact phase from the sample index.

    Channel i carries ``amplitude / (i + 1)`` codes around mid-scale at ``frequency`` Hz.
    """

    def __init__(self, frequency: float = 1000.0, *, amplitude: float | None = None, bits: int = 12,
                 channels: tuple[str, ...] = ("out",), noise: float = 0.0, seed: int = 0):
        self.frequency = float(frequency)
        self.bits = int(bits)
        self.channels = tuple(channels)
        self.amplitude = 0.3 * 2**bits if amplitude is None else float(amplitude)
        self.noise = float(noise)
        self._rng = np.random.default_rng(seed)
        self._rate = 1.0
        self._mask = 1
        self._index = 0
        self.power = False

    def start(self, rate: float, channel_mask: int) -> None:
        self._rate, self._mask, self._index = float(rate), int(channel_mask), 0

    def read(self, n: int) -> np.ndarray:
        t = (self._index + np.arange(n)) / self._rate
        self._index += n
        cols = []
        for i in range(len(self.channels)):
            if self._mask >> i & 1:
                v = 2 ** (self.bits - 1) + self.amplitude / (i + 1) * np.sin(2 * np.pi * self.frequency * t)
                if self.noise:
                    v = v + self._rng.normal(0.0, self.noise, n)
                cols.append(np.clip(np.round(v), 0, 2**self.bits - 1))
        return np.stack(cols, axis=1).astype(np.uint16)

    def stop(self) -> None:
        pass

    def fixture_power(self, on: bool) -> None:
        self.power = bool(on)


class PtyAdcDevice:
    """The simulated ADC board. Use as a context manager, or ``start()`` / ``stop()``.

    Parameters
    ----------
    source : SampleSource
        Where the codes come from.
    protocol : {"framed", "lines"}
        Binary frames, or one text line per sample (``lines_timestamps`` adds microseconds).
    clock : Clock, optional
        Paces sending (default real time).
    faults : DeviceFaults, optional
    identity : str
        The vendor,model,serial,firmware part of the identify reply.
    frame_samples : int
        Sample sets per DATA frame.
    default_rate : float
        Sample rate before any ``RATE`` command, Hz.
    lines_timestamps : bool
        Lines mode: send ``microseconds,code`` instead of ``code``.
    vref : float
        Reference voltage the identify reply states, V.
    free_running : bool
        Lines mode only: the simplest firmware, with no command parser; it streams channel 0
        at ``default_rate`` from the moment it starts and ignores everything the host sends.
    """

    def __init__(self, source: SampleSource, *, protocol: str = "framed", clock: Clock | None = None,
                 faults: DeviceFaults | None = None, identity: str = DEFAULT_IDENTITY,
                 frame_samples: int = 256, default_rate: float = 50_000.0,
                 lines_timestamps: bool = False, vref: float = 3.3, free_running: bool = False):
        if protocol not in ("framed", "lines"):
            raise ValueError(f"protocol must be 'framed' or 'lines', got {protocol!r}")
        if free_running and protocol != "lines":
            raise ValueError("only a lines-mode device runs free (without commands)")
        self.free_running = free_running
        self.source = source
        self.protocol = protocol
        self.clock = clock or SystemClock()
        self.faults = faults or DeviceFaults()
        self.identity = identity
        self.frame_samples = int(frame_samples)
        self.lines_timestamps = lines_timestamps
        self.vref = vref
        self.rate = self._achievable(default_rate)
        self.port: str | None = None
        self.disconnected = threading.Event()
        self._pull = threading.Event()
        self._pulled = threading.Event()
        self.commands: list[str] = []  # every command line received, for tests
        self._master = self._slave = -1
        self._thread: threading.Thread | None = None
        self._running = threading.Event()
        self._out = bytearray()
        self._rng = np.random.default_rng(self.faults.seed)
        self._stream: dict | None = None
        self._pending_idn: float | None = None
        self._boot_until = 0.0

    # ----------------------------------------------------------------- life cycle
    def __enter__(self) -> PtyAdcDevice:
        self.start()
        return self

    def __exit__(self, *exc) -> None:
        self.stop()

    def start(self) -> None:
        _positional_tables()  # build the encoder's CRC tables now, not in the first frame's time
        self._master, self._slave = os.openpty()
        tty.setraw(self._slave)
        flags = fcntl.fcntl(self._master, fcntl.F_GETFL)
        fcntl.fcntl(self._master, fcntl.F_SETFL, flags | os.O_NONBLOCK)
        self.port = os.ttyname(self._slave)
        self._out += self.faults.startup_bytes
        self._boot_until = self.clock.monotonic() + self.faults.identify_delay
        if self.free_running:  # the simplest firmware: streams channel 0 from power-up, forever
            self._start(["0", "1"])
        self._running.set()
        self._thread = threading.Thread(target=self._serve, name=f"pty-adc {self.port}", daemon=True)
        self._thread.start()

    def stop(self) -> None:
        self._running.clear()
        if self._thread is not None:
            self._thread.join(timeout=5)
            self._thread = None
        self._close_fds()

    def disconnect(self) -> None:
        """Pull the cable now: close the master side (the host's reads fail)."""
        self.disconnected.set()  # first, so whoever sees the failure also sees the flag
        thread = self._thread
        if thread is not None and thread.is_alive() and threading.current_thread() is not thread:
            self._pull.set()  # the serving thread closes its own descriptors (no fd reuse race)
            if self._pulled.wait(timeout=2.0):
                return
        self._close_fds()

    def _close_fds(self) -> None:
        for name in ("_master", "_slave"):
            fd = getattr(self, name)
            if fd >= 0:
                setattr(self, name, -1)
                try:
                    os.close(fd)
                except OSError:
                    pass

    # ----------------------------------------------------------------- the loop
    def _serve(self) -> None:
        line = bytearray()
        while self._running.is_set() and self._master >= 0:
            if self._pull.is_set():
                self._close_fds()
                self._pulled.set()
                break
            try:
                wants_write = bool(self._out)
                r, w, _ = select.select([self._master], [self._master] if wants_write else [], [], 0.002)
                if r:
                    data = os.read(self._master, 4096)
                    for byte in data:
                        if byte in (10, 13):
                            if line:
                                self._command(line.decode("ascii", "replace").strip())
                                line.clear()
                        else:
                            line.append(byte)
                self._tick()
                if self._out and self._master >= 0:
                    n = os.write(self._master, bytes(self._out[:65536]))
                    del self._out[:n]
            except OSError as exc:
                if exc.errno in (errno.EAGAIN, errno.EINTR):
                    continue
                if self._master < 0:
                    break
                if exc.errno == errno.EIO:  # no reader on the slave side yet
                    self.clock.sleep(0.0)
                    continue
                raise

    def _reply(self, text: str) -> None:
        self._out += (text + "\n").encode("ascii")

    def _achievable(self, rate: float) -> float:
        divider = max(1, round(OSC_HZ / float(rate)))
        return OSC_HZ / divider

    def _command(self, cmd: str) -> None:
        self.commands.append(cmd)
        words = cmd.split()
        if not words or self.free_running or self.clock.monotonic() < self._boot_until:
            return  # still booting (a resetting board hears nothing), or no command parser at all
        head, args = words[0].upper(), words[1:]
        if head == "IDN?":
            if not self.faults.identify_missing:
                self._pending_idn = self.clock.monotonic()
        elif head == "RATE?":
            self._reply(f"OK RATE {self.rate:.6f}")
        elif head == "RATE" and len(args) == 1:
            try:
                wanted = float(args[0])
            except ValueError:
                wanted = -1.0
            if not 1.0 <= wanted <= 1_000_000.0:
                self._reply(f"ERR rate {args[0]} out of range 1..1000000 Hz")
            else:
                self.rate = self._achievable(wanted)
                self._reply(f"OK RATE {self.rate:.6f}")
        elif head == "START" and len(args) == 2:
            self._start(args)
        elif head == "STOP":
            if self._stream is not None:
                self._finish()
            self._reply("OK STOP")
        elif head == "POWER" and len(args) == 1 and args[0].upper() in ("ON", "OFF"):
            self.source.fixture_power(args[0].upper() == "ON")
            self._reply(f"OK POWER {args[0].upper()}")
        else:
            self._reply(f"ERR unknown command {cmd[:40]!r}")

    def _start(self, args: list[str]) -> None:
        try:
            n, mask = int(args[0]), int(args[1], 0)
        except ValueError:
            self._reply("ERR START needs a sample count and a channel mask")
            return
        nch = bin(mask).count("1")
        if n < 0 or mask <= 0 or mask >= 1 << len(self.source.channels):
            self._reply(f"ERR bad START {n} {args[1]} for {len(self.source.channels)} channels")
            return
        if self.protocol == "lines" and nch != 1:
            self._reply("ERR lines mode streams exactly one channel")
            return
        true_rate = self.rate * (1.0 + self.faults.rate_error)
        self.source.start(true_rate, mask)
        per_frame = max(1, min(self.frame_samples, MAX_FRAME_SAMPLES // nch))
        self._stream = {"n": n, "mask": mask, "sent": 0, "frame": 0, "per_frame": per_frame,
                        "t0": self.clock.monotonic(), "true_rate": true_rate,
                        "period_ps": round(1e12 / self.rate)}

    def _finish(self) -> None:
        s = self._stream
        self._stream = None
        self.source.stop()
        if self.protocol == "framed":
            self._out += encode_end(s["sent"], s["period_ps"], s["mask"])
        else:
            self._reply(f"END {s['sent']}")

    def _tick(self) -> None:
        now = self.clock.monotonic()
        if self._pending_idn is not None and now >= self._pending_idn:
            self._pending_idn = None
            bits = getattr(self.source, "bits", 12)
            chans = ",".join(self.source.channels)
            self._reply(f"IDN {self.identity};proto=1;bits={bits};vref={self.vref};channels={chans};"
                        f"mode={self.protocol}")
        s = self._stream
        if s is None:
            return
        elapsed = now - s["t0"]
        f = self.faults
        if f.disconnect_after is not None and elapsed >= f.disconnect_after:
            self.disconnect()
            return
        due = int(elapsed * s["true_rate"])
        if s["n"]:
            due = min(due, s["n"])
        while self._stream is not None:
            todo = due - s["sent"]
            last = bool(s["n"]) and s["sent"] + todo >= s["n"]
            if todo <= 0 or (todo < s["per_frame"] and not last):
                break
            m = min(todo, s["per_frame"])
            self._emit(s, self.source.read(m))
            if s["n"] and s["sent"] >= s["n"]:
                self._finish()

    def _lines(self, seq: int, codes: np.ndarray) -> str:
        """The text lines for samples ``seq`` …, with the line faults for those indices applied."""
        values = codes[:, 0].tolist()
        if self.lines_timestamps:
            micros = np.round((seq + np.arange(len(values))) / self.rate * 1e6).astype(np.int64).tolist()
            lines = [f"{t},{v}" for t, v in zip(micros, values, strict=True)]
        else:
            lines = [str(v) for v in values]
        faults = self.faults.line_faults
        if not faults:
            return "".join(f"{line}\n" for line in lines)
        out = []
        for i, line in enumerate(lines):
            kind = faults.get(seq + i)
            if kind == "drop":
                continue
            if kind == "repeat":
                out.append(line)
            elif kind == "split":
                cut = line.rfind(",") + 2
                line = line[:cut] + "\n" + line[cut:]
            elif kind == "garble":
                line = line.translate(str.maketrans("0123456789", "oIzEhSbTBq"))
            elif kind == "bad_time" and "," in line:
                t, _, v = line.partition(",")
                line = f"{int(t) + 7_777_777},{v}"
            out.append(line)
        return "".join(f"{line}\n" for line in out)

    def _emit(self, s: dict, codes: np.ndarray) -> None:
        seq, number = s["sent"], s["frame"]
        s["sent"] += codes.shape[0]
        s["frame"] += 1
        f, rng = self.faults, self._rng
        if self.protocol == "lines":
            payload = bytearray(self._lines(seq, codes).encode("ascii"))
        else:
            payload = bytearray(encode_frame(seq, s["period_ps"], s["mask"], codes))
        if number in f.drop_frames or (f.drop_probability and rng.random() < f.drop_probability):
            return
        if len(self._out) > MAX_BACKLOG:  # the host is not reading: the device overruns
            return
        if number in f.corrupt_frames or (f.corrupt_probability and rng.random() < f.corrupt_probability):
            at = int(rng.integers(0, len(payload)))
            payload[at] ^= int(rng.integers(1, 256))
        if f.garbage_probability and rng.random() < f.garbage_probability:
            self._out += rng.integers(0, 256, size=int(rng.integers(1, 33)), dtype=np.uint8).tobytes()
        self._out += payload
