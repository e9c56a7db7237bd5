"""Serial ADC driver (pyserial), protocol v1: framed or plain lines (``docs/serial-protocol.md``).

Port behaviour handled here: DTR/RTS held low at open when the station says so (many boards
reset on DTR); the identify reply awaited against a deadline, then stale input flushed; short
read timeouts inside an overall deadline; an unplugged adapter mapped to one
InstrumentDisconnected carrying the partial capture; exclusive opening with a clear "busy"
message; a single owner thread for all I/O on the port; the device's declared sample rate
cross-checked against the rate samples actually arrive at (host clock, ±5 %); losses above
``max_loss`` refused. What arrived becomes captures in :mod:`benchgate.instruments.serial_capture`.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from concurrent.futures import TimeoutError as FutureTimeout
from typing import Any

import numpy as np

from benchgate.analysis.capture import Capture
from benchgate.clock import Clock, SystemClock
from benchgate.errors import InstrumentDisconnected, InstrumentError
from benchgate.instruments import serial_options
from benchgate.instruments._looks import Looks
from benchgate.instruments._serial_port import SerialPort
from benchgate.instruments.framing import FrameDecoder, encode_frame
from benchgate.instruments.options import OptionSpec
from benchgate.instruments.preview import preview_sink
from benchgate.instruments.serial_capture import RATE_TOLERANCE, Arrived, LiveView, build_captures
from benchgate.instruments.serial_lines import LinesDecoder

WALL_GRACE = 1.0  # s of wall time added to accelerated deadlines


class SerialAdc:
    """A serial ADC streamer (the ``serial-adc`` kind). Open with :meth:`open`."""

    def __init__(self, config, port: SerialPort, clock: Clock):
        self.config = config
        self.name = config.role
        self.address = port.path
        self.clock = clock
        opts = config.options
        self.channels: tuple[str, ...] = tuple(opts.get("channels", ("ch0",)))
        self.bits = int(opts.get("bits", 12))
        self.vref = float(opts.get("vref", 3.3))
        self.protocol = opts.get("protocol", "framed")
        self.max_loss = float(opts.get("max_loss", 0.0) or 0.0)
        self.calibration = config.calibration
        self._port = port
        self._identity: str | None = None
        self._device_info: dict[str, str] = {}
        self._fixture_on = False
        self._closed = False
        self._abort = threading.Event()  # set by close(): a capture in progress stops at once
        self._lock = threading.Lock()
        # the one thread that touches the port
        self._owner = ThreadPoolExecutor(max_workers=1, thread_name_prefix=f"serial-adc {port.path}")

    # ------------------------------------------------------------------ station options
    @classmethod
    def station_options(cls) -> Mapping[str, OptionSpec]:
        return serial_options.ADC_OPTIONS

    @classmethod
    def check_options(cls, options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
        return serial_options.check(options, cls.station_options())

    @classmethod
    def complete_options(cls, options: Mapping[str, Any]) -> dict[str, Any]:
        return serial_options.complete(options, cls.station_options())

    # ------------------------------------------------------------------ life cycle
    @classmethod
    def open(cls, config, *, clock: Clock | None = None) -> SerialAdc:
        clock = clock or SystemClock()
        _warm_up()
        port = SerialPort.open(config, clock)
        adc = cls(config, port, clock)
        try:
            adc._call(adc._identify)
        except BaseException:
            adc.close()
            raise
        return adc

    def __enter__(self) -> SerialAdc:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def close(self) -> None:
        with self._lock:
            if self._closed:
                return
            self._closed = True
        self._abort.set()
        try:
            if self._fixture_on and self._port.alive:
                self._owner.submit(self._power_off_quietly).result(timeout=10)
        except FutureTimeout:
            pass
        finally:
            try:
                self._owner.submit(self._port.close).result(timeout=10)
            except FutureTimeout:  # the owner thread is stuck: close from here as a last resort
                self._port.close()
            self._owner.shutdown(wait=False)

    @property
    def identity(self) -> str | None:
        return self._identity

    def _call(self, fn, *args, **kwargs):
        if self._closed:
            raise InstrumentError(self.name, f"adc on {self.address} is closed")
        return self._owner.submit(fn, *args, **kwargs).result()

    # ------------------------------------------------------------------ commands
    @property
    def free_running(self) -> bool:
        """A lines device without commands: it streams from power-up at the station's rate."""
        return not self.config.options.get("handshake", True)

    def _identify(self) -> None:
        port = self._port
        timeout = float(self.config.options.get("identify_timeout", 2.0))
        if self.free_running:
            port.wait_for_line(timeout)  # proof of life instead of an identify reply
            return
        reply = port.identify(timeout)
        ident, _, rest = reply[4:].partition(";")
        info = dict(kv.split("=", 1) for kv in rest.split(";") if "=" in kv)
        self._identity, self._device_info = ident.strip(), info
        if info.get("proto") != "1":
            raise InstrumentError(self.name, f"device on {self.address} speaks protocol "
                                             f"{info.get('proto', '?')}; benchgate speaks version 1")
        mode = info.get("mode", self.protocol)
        if mode != self.protocol:
            raise InstrumentError(self.name, f"device on {self.address} streams {mode!r} but the station "
                                             f"says protocol {self.protocol!r}")
        if "bits" in info and int(info["bits"]) != self.bits:
            raise InstrumentError(self.name, f"device on {self.address} has {info['bits']} bits but the "
                                             f"station says {self.bits}")
        dev_channels = [c for c in info.get("channels", "").split(",") if c]
        if dev_channels and len(dev_channels) < len(self.channels):
            raise InstrumentError(self.name, f"device on {self.address} has {len(dev_channels)} channels, "
                                             f"the station names {len(self.channels)}")

    def fixture_power(self, on: bool) -> None:
        if self.free_running:
            raise InstrumentError(self.name, f"adc on {self.address} is a free-running lines device "
                                             f"(handshake: false); it has no fixture-power command")
        word = "ON" if on else "OFF"
        self._call(self._port.command, f"POWER {word}", f"OK POWER {word}")
        self._fixture_on = bool(on)

    def _power_off_quietly(self) -> None:
        try:
            self._port.command("POWER OFF", "OK POWER OFF")
            self._fixture_on = False
        except InstrumentError:
            pass

    # ------------------------------------------------------------------ capture
    def capture(self, channel: str, *, duration: float, rate: float | None = None,
                progress=None) -> Capture:
        """Record ``duration`` s of ``channel`` in volts (calibration applied). See module doc."""
        if channel not in self.channels:
            raise InstrumentError(self.name, f"no channel {channel!r} on this ADC "
                                             f"(channels: {', '.join(self.channels)})")
        if not duration > 0:
            raise InstrumentError(self.name, f"capture duration must be > 0 s, got {duration!r}")
        if not self._port.alive:
            raise InstrumentDisconnected(self.name, f"adc on {self.address} was disconnected; "
                                                    f"reconnect it and open the station again")
        return self._call(self._capture, (channel,), float(duration), rate, progress)[0]

    def capture_growing(self, channel: str, *, looks: Sequence[float], rate: float | None = None,
                        progress=None, decide: Callable[[Capture], bool]) -> Capture:
        """Capture up to ``looks[-1]`` s of ``channel``, handing the capture so far to ``decide``
        each time it reaches the next length in ``looks`` (s, increasing); stop as soon as
        ``decide`` returns True and return that capture (the device is told to stop).

        Each capture handed over passed the same verifications as a finished capture (loss, arrival
        rate). Framed protocol only: lines mode cannot place samples before its END count, so
        there it takes the whole longest capture (``decide`` is called once, at the end).
        """
        if self.protocol != "framed":
            return self.capture(channel, duration=float(looks[-1]), rate=rate, progress=progress)
        if channel not in self.channels:
            raise InstrumentError(self.name, f"no channel {channel!r} on this ADC "
                                             f"(channels: {', '.join(self.channels)})")
        if not self._port.alive:
            raise InstrumentDisconnected(self.name, f"adc on {self.address} was disconnected; "
                                                    f"reconnect it and open the station again")
        return self._call(self._capture, (channel,), float(looks[-1]), rate, progress,
                          looks=[float(x) for x in looks[:-1]], decide=decide)[0]

    def capture_channels(self, channels: tuple[str, ...], *, duration: float, rate: float | None = None,
                         progress=None) -> tuple[Capture, ...]:
        """Record several channels at the same instants (framed protocol: one channel mask)."""
        channels = tuple(channels)
        unknown = [c for c in channels if c not in self.channels]
        if unknown or not channels or len(set(channels)) != len(channels):
            raise InstrumentError(self.name, f"channels {', '.join(channels) or 'none'}: each must be one of "
                                             f"{', '.join(self.channels)}, named once")
        if len(channels) > 1 and self.protocol != "framed":
            raise InstrumentError(self.name, "lines mode streams one channel; two-channel capture needs "
                                             "protocol: framed")
        if not duration > 0:
            raise InstrumentError(self.name, f"capture duration must be > 0 s, got {duration!r}")
        return self._call(self._capture, channels, float(duration), rate, progress)

    def _capture(self, channels: tuple[str, ...], duration: float, rate: float | None, progress,
                 looks: Sequence[float] = (), decide: Callable[[Capture], bool] | None = None
                 ) -> tuple[Capture, ...]:
        port = self._port
        wanted = rate or self.config.options.get("rate")
        timestamps = bool(self.config.options.get("timestamps", False))
        if self.free_running:
            actual = float(self.config.options["rate"])
            if rate and abs(rate / actual - 1) > 1e-9:
                raise InstrumentError(self.name, f"adc on {self.address} runs free at the station's "
                                                 f"{actual:g} Hz; it cannot be set to {rate:g} Hz")
        else:
            reply = port.command(f"RATE {wanted:.6f}" if wanted else "RATE?", "OK RATE")
            actual = float(reply.split()[2])
        n = max(1, int(round(duration * actual)))
        mask = sum(1 << self.channels.index(c) for c in channels)
        decoder = FrameDecoder(mask=mask) if self.protocol == "framed" else LinesDecoder(
            self.bits, timestamps=timestamps, skip_first=self.free_running, expect_end=not self.free_running)
        state = Arrived(n)
        t_start = self.clock.monotonic()
        state.commanded_at = None if self.free_running else t_start
        if self.free_running:
            port.flush_input()  # start at the next line boundary, with nothing stale
        else:
            port.write_line(f"START {n} {mask}")
        if progress is not None:  # lets a caller tie its own events to the capture's time axis
            progress(0.0, f"acquisition of {n} samples started")
        sink = preview_sink(progress)  # previews of the first channel while it records
        live = None if sink is None else LiveView(self, channels[0], channels, state, decoder, n, actual, sink)
        looker = None
        if looks and decide is not None:  # an adaptive capture (instruments/_looks.py)
            looker = Looks([max(1, int(round(x * actual))) for x in looks],
                           lambda k: build_captures(self, channels, state, actual, decoder, k,
                                                    complete=True)[0], decide)
        try:
            self._receive(decoder, state, n, duration, progress, looker, live)
            if looker is not None and looker.stopped is not None:
                if not self.free_running:
                    port.stop_stream()
                return (looker.stopped,)
        except InstrumentDisconnected as exc:
            elapsed = self.clock.monotonic() - t_start
            partial = build_captures(self, channels, state, actual, decoder, n, complete=False)
            partial = partial[0] if partial else None
            port.close()
            raise InstrumentDisconnected(
                self.name, f"adc on {self.address} disconnected after {elapsed:.1f} s of a "
                           f"{duration:.1f} s capture ({getattr(exc, 'detail', exc.message)})", partial=partial) from exc
        except BaseException:  # an instrument error, the adaptive capture's decide failing, or a stop (Ctrl-C, Stop button)
            if not self.free_running:
                port.stop_stream()  # else the device streams on and the next open cannot identify it
            raise
        finally:
            if looker is not None:
                looker.close()
        captures = build_captures(self, channels, state, actual, decoder, n, complete=True)
        if not captures:  # only a partial capture can be empty
            raise InstrumentError(self.name, f"adc on {self.address} delivered no samples")
        return captures

    def _receive(self, decoder, state: Arrived, n: int, duration: float, progress, look=None,
                 live=None) -> None:
        """Read until the device has sent ``n`` samples (or END), within the deadlines.

        Deadlines are in the clock's time, each with a floor of wall time as well (WALL_GRACE),
        so a busy host running an accelerated understudy bench does not mistake its own delays
        for a silent device.
        """
        port, clock = self._port, self.clock
        speed = getattr(clock, "speed", 1.0) or 1.0
        stall = max(float(self.config.timeout), 0.1)
        start, wall_start = clock.monotonic(), time.monotonic()
        budget = duration * (1 + 2 * RATE_TOLERANCE) + stall + 0.5
        last_data, wall_last = start, wall_start
        while True:
            if self._abort.is_set():
                raise InstrumentError(self.name, f"adc on {self.address}: capture aborted, the "
                                                 f"instrument is being closed")
            data = port.read_available()
            now, wall = clock.monotonic(), time.monotonic()
            if data:
                last_data, wall_last = now, wall
                got = decoder.feed(data)
                state.add(got, decoder, framed=self.protocol == "framed")
                if state.index > state.last_point_index:
                    state.points.append((now, state.index))
                    state.last_point_index = state.index
                if progress is not None:
                    progress(min(1.0, state.index / n), f"{state.index} of {n} samples")
                if live is not None:
                    live()
                if look is not None and look(state.index):
                    return  # an adaptive capture decided: stop here
            if self.protocol == "lines" and not self.free_running:
                if decoder.ended:  # wait for END: its count shows split or repeated lines
                    return
            elif decoder.next_index >= n or decoder.end_total is not None:
                return
            if now - last_data > stall and wall - wall_last > min(stall, stall / speed + WALL_GRACE):
                if state.index and now - start >= duration:
                    return  # the tail went missing: counted as lost below
                raise InstrumentError(self.name, f"adc on {self.address} sent no data for {stall:g} s "
                                                 f"({state.index} of {n} samples received)")
            if now - start > budget and wall - wall_start > min(budget, budget / speed + WALL_GRACE):
                raise InstrumentError(self.name, f"adc on {self.address}: capture did not finish within "
                                                 f"{budget:.1f} s ({state.index} of {n} samples)")

_warm = False


def _warm_up() -> None:
    """Run the decoder once before any capture: numpy's first calls cost several ms, which
    would otherwise fall into the first frames of a capture and skew the arrival-rate verification."""
    global _warm
    if not _warm:
        frame = encode_frame(0, 20_000_000, 1, np.zeros(4, dtype=np.uint16))
        FrameDecoder(mask=1).feed(b"\x00" + frame + frame[:5])
        _warm = True
