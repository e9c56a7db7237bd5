"""Shared pieces of the firmware-in-the-loop tests: which serial ADC devices to run a test
against, and a raw pyserial client for the protocol details the driver hides (STOP, a slow host).
"""

from __future__ import annotations

import contextlib
import os
import time

import pytest
import serial

from benchgate.instruments import open_station
from benchgate.instruments.framing import FrameDecoder
from benchgate.instruments.station import load_station
from benchgate.sim import UnderstudyBench
from benchgate.sim.firmware import find_build

# The Python device is paced by the wall clock and falls behind on a busy 2-core machine at
# 4x; the firmware's bench clock is the AVR's own, so 4x is only its ceiling.
SPEED = {"python": 2.0, "firmware": 4.0}
ON_CI = os.environ.get("CI", "").lower() == "true"
DEVICES = ("python", "firmware")


def need_firmware() -> None:
    """Skip without the built harness, except on CI, where that is a failure."""
    if find_build() is None:
        if ON_CI:
            pytest.fail("CI runs the firmware tests: .ci/run must build firmware/ (make -C firmware)")
        pytest.skip("the firmware harness is not built (make -C firmware)")


def bench(device: str, board: str = "tb3", **kw) -> UnderstudyBench:
    if device == "firmware":
        need_firmware()
    kw.setdefault("speed", SPEED[device])
    return UnderstudyBench(board, adc_device=device, **kw)


@contextlib.contextmanager
def instruments(vb: UnderstudyBench):
    with open_station(load_station(vb.station_path), clock=vb.clock) as opened:
        yield opened


def power_up(opened, vb: UnderstudyBench, settle: float = 0.3) -> None:
    supply = opened["supply"]
    supply.set_voltage(vb.board.supply)
    supply.set_current_limit(0.05)
    supply.output(True)
    vb.clock.sleep(settle)


class RawPort:
    """The serial ADC opened with pyserial directly, for what the driver does not expose."""

    def __init__(self, vb: UnderstudyBench, wall_timeout: float = 20.0):
        self.vb = vb
        self.ser = serial.Serial(vb.serial_port, 2_000_000, timeout=0.02, exclusive=True)
        self.wall_timeout = wall_timeout
        self.buf = bytearray()
        self.identify()

    def identify(self) -> str:
        """IDN? until the reply comes, as the driver does: a booting board hears nothing."""
        deadline = time.monotonic() + self.wall_timeout
        while time.monotonic() < deadline:
            self.send("IDN?")
            resend = time.monotonic() + 0.2
            while time.monotonic() < resend:
                self.read_more()
                at = self.buf.find(b"IDN ")
                if at >= 0 and self.buf.find(b"\n", at) >= 0:
                    return self.line("IDN ")
        raise AssertionError("the device never answered IDN?")

    def close(self) -> None:
        self.ser.close()

    def __enter__(self) -> RawPort:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def send(self, text: str) -> None:
        self.ser.write((text + "\n").encode("ascii"))

    def read_more(self) -> int:
        data = self.ser.read(65536)
        self.buf += data
        return len(data)

    def line(self, prefix: str) -> str:
        """The next text line starting with ``prefix`` (anything before it is kept in buf)."""
        deadline = time.monotonic() + self.wall_timeout
        key = prefix.encode("ascii")
        while True:
            at = self.buf.find(key)
            if at >= 0:
                end = self.buf.find(b"\n", at)
                if end >= 0:
                    text = self.buf[at:end].decode("ascii")
                    del self.buf[:end + 1]
                    return text
            if time.monotonic() > deadline:
                raise AssertionError(f"no {prefix!r} line; got {bytes(self.buf[-200:])!r}")
            self.read_more()

    def command(self, text: str, prefix: str) -> str:
        self.ser.reset_input_buffer()
        self.buf.clear()
        self.send(text)
        return self.line(prefix)

    def until(self, marker: bytes) -> bytes:
        """Everything received up to and including ``marker``."""
        deadline = time.monotonic() + self.wall_timeout
        while (at := self.buf.find(marker)) < 0:
            if time.monotonic() > deadline:
                raise AssertionError(f"no {marker!r}; got {bytes(self.buf[-200:])!r}")
            self.read_more()
        out = bytes(self.buf[:at + len(marker)])
        del self.buf[:at + len(marker)]
        return out

    def frames_until_end(self, decoder: FrameDecoder):
        """Decode frames until the END frame; returns the decoded results in order."""
        deadline = time.monotonic() + self.wall_timeout
        results = []
        while decoder.end_total is None:
            if time.monotonic() > deadline:
                raise AssertionError(f"no END frame after {decoder.next_index} sets")
            self.read_more()
            if self.buf:
                results.append(decoder.feed(bytes(self.buf)))
                self.buf.clear()
        return results
