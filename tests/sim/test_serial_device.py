"""The simulated serial ADC on a real pseudo-terminal (protocol v1)."""

from __future__ import annotations

import sys
import time

import numpy as np
import pytest
import serial

from benchgate.clock import ScaledClock
from benchgate.instruments.framing import FrameDecoder
from benchgate.sim.serial_device import DeviceFaults, PtyAdcDevice, SineSource

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="needs POSIX pseudo-terminals")

SPEED = 20.0


def open_port(dev: PtyAdcDevice) -> serial.Serial:
    return serial.Serial(dev.port, 115200, timeout=0.05, exclusive=True)


def read_reply(port: serial.Serial, limit: float = 5.0) -> str:
    end = time.monotonic() + limit
    while time.monotonic() < end:
        line = port.readline()
        if line:
            return line.decode().strip()
    raise AssertionError("no reply")


def read_frames(port: serial.Serial, limit: float = 10.0):
    dec = FrameDecoder()
    parts, lost, rejected, end_total = [], 0, 0, None
    end = time.monotonic() + limit
    while end_total is None and time.monotonic() < end:
        out = dec.feed(port.read(max(1, port.in_waiting)))
        parts.append(out.samples)
        lost += out.lost
        rejected += out.rejected
        end_total = out.end_total
    return np.concatenate(parts), lost, rejected, end_total


def test_identify_and_rate_replies():
    with PtyAdcDevice(SineSource(bits=12, channels=("out", "rail")), clock=ScaledClock(SPEED)) as dev:
        port = open_port(dev)
        port.write(b"IDN?\n")
        reply = read_reply(port)
        assert reply.startswith("IDN ") and "proto=1" in reply and "channels=out,rail" in reply
        port.write(b"RATE 30000\n")
        # 16 MHz / 533 is the nearest the device's divider can do (common practice, no source)
        assert read_reply(port) == f"OK RATE {16e6 / 533:.6f}"
        port.write(b"FROB\n")
        assert read_reply(port).startswith("ERR ")
        port.close()


def test_framed_stream_carries_the_source_codes():
    source = SineSource(frequency=500.0)
    with PtyAdcDevice(SineSource(frequency=500.0), clock=ScaledClock(SPEED), frame_samples=100) as dev:
        port = open_port(dev)
        port.write(b"RATE 10000\nSTART 2050 1\n")
        codes, lost, rejected, end_total = read_frames(port)
        port.close()
    source.start(10000.0, 1)
    np.testing.assert_array_equal(codes, source.read(2050))
    assert (lost, rejected, end_total) == (0, 0, 2050)


def test_dropped_and_corrupted_frames_are_counted():
    faults = DeviceFaults(drop_frames={2}, corrupt_frames={5}, garbage_probability=0.5, seed=4)
    with PtyAdcDevice(SineSource(), clock=ScaledClock(SPEED), faults=faults, frame_samples=100) as dev:
        port = open_port(dev)
        port.write(b"RATE 10000\nSTART 1000 1\n")
        codes, lost, rejected, end_total = read_frames(port)
        port.close()
    assert end_total == 1000 and lost == 200 and len(codes) == 800
    assert rejected >= 1


def test_lines_mode_with_timestamps():
    with PtyAdcDevice(SineSource(), protocol="lines", lines_timestamps=True, clock=ScaledClock(SPEED)) as dev:
        port = open_port(dev)
        port.write(b"RATE 1000\nSTART 20 1\n")
        port.readline()  # OK RATE
        lines = [read_reply(port) for _ in range(21)]
        port.close()
    assert lines[-1] == "END 20"
    micros = [int(x.split(",")[0]) for x in lines[:-1]]
    assert micros == [1000 * k for k in range(20)]  # 1 kHz: 1000 µs apart


def test_disconnect_fails_the_host_read():
    faults = DeviceFaults(disconnect_after=0.2)
    with PtyAdcDevice(SineSource(), clock=ScaledClock(SPEED), faults=faults) as dev:
        port = open_port(dev)
        port.write(b"START 0 1\n")
        with pytest.raises((serial.SerialException, OSError)):  # in_waiting raises OSError
            end = time.monotonic() + 10
            while time.monotonic() < end:
                port.read(max(1, port.in_waiting))
        assert dev.disconnected.is_set()
        port.close()


def test_missing_identify_never_replies():
    with PtyAdcDevice(SineSource(), clock=ScaledClock(SPEED), faults=DeviceFaults(identify_missing=True)) as dev:
        port = open_port(dev)
        port.write(b"IDN?\nPOWER ON\n")
        # the device handles commands in order: the first line back answers POWER ON, so the
        # IDN? before it got nothing (an event to wait for, not a fixed sleep)
        assert read_reply(port) == "OK POWER ON"
        assert dev.commands == ["IDN?", "POWER ON"] and dev._pending_idn is None
        port.close()


def test_power_command_reaches_the_source():
    source = SineSource()
    with PtyAdcDevice(source, clock=ScaledClock(SPEED)) as dev:
        port = open_port(dev)
        port.write(b"POWER ON\n")
        assert read_reply(port) == "OK POWER ON"
        port.close()
    assert source.power is True


def test_disconnect_from_another_thread():
    with PtyAdcDevice(SineSource(), clock=ScaledClock(SPEED)) as dev:
        port = open_port(dev)
        dev.disconnect()  # e.g. the understudy bench's fault handle, called by a test
        with pytest.raises((serial.SerialException, OSError)):
            port.read(10)
            port.read(10)
        port.close()
