"""The reference firmware in the loop: harness speed and the highest lossless rate per baud rate.

1. Harness speed, unpaced: bench (AVR) seconds per wall second while the firmware streams
   50 kS/s framed at 2 Mbaud to a host that keeps up, and while it idles between commands.
   Ratios against real time (1.0) and against the demo's speed setting (4x): below 1 there, the
   understudy bench's clock (the AVR's) runs slower than asked, and says so.
2. For each baud rate, the highest sample rate the firmware sustains without losing a set
   (framed and lines, one channel), found by bisection on 2 s captures, with the ratio to what
   the link itself can carry (simavr sends 11 bit times per byte; a real UART sends 10, so real
   boards carry about 10 % more than these figures).

Builds the firmware for each baud rate into a temporary folder (needs gcc-avr, avr-libc and
the harness built by 'make -C firmware'). Not a test. Run: .venv/bin/python bench/bench_firmware.py
"""

from __future__ import annotations

import subprocess
import tempfile
import time
from pathlib import Path

import serial

from benchgate.instruments.framing import FrameDecoder
from benchgate.sim.adc import VirtualAdc
from benchgate.sim.backend import BenchState
from benchgate.sim.boards import draw_unit
from benchgate.sim.firmware import (
    DEFAULT_BAUD,
    F_AVR,
    FirmwareAdcDevice,
    FirmwareBuild,
    require_build,
)

FIRMWARE = Path(__file__).resolve().parents[1] / "firmware"
BAUDS = (115_200, 500_000, 1_000_000, 2_000_000)
DEMO_SPEED = 4.0
PACE = 4.0  # the searches run paced, so this process reads the port as fast as the AVR writes
DURATION = 2.0  # bench seconds per trial: the 512-code ring must not hide a 1 % overrun


def device(build: FirmwareBuild, protocol: str = "framed", speed: float = 0.0) -> FirmwareAdcDevice:
    dev = FirmwareAdcDevice(speed=speed, protocol=protocol, build=build)
    unit = draw_unit("tb3", "BENCH-1")
    unit.steady_frequency()
    state = BenchState(unit, dev.clock)
    dev.attach(state, VirtualAdc(state, bits=10, vref=5.0))
    state.set_relay(True)  # a powered, oscillating unit on A0
    return dev


def open_port(dev: FirmwareAdcDevice) -> serial.Serial:
    port = serial.Serial(dev.port, 2_000_000, timeout=0.05)
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        port.write(b"IDN?\n")
        if port.readline().startswith(b"IDN "):
            return port
    raise RuntimeError("the firmware did not answer IDN?")


def command(port: serial.Serial, text: str, prefix: bytes) -> bytes:
    port.reset_input_buffer()
    port.write(text.encode() + b"\n")
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        line = port.readline()
        if line.startswith(prefix):
            return line.strip()
    raise RuntimeError(f"no reply to {text}")


def capture(dev: FirmwareAdcDevice, port: serial.Serial, protocol: str, rate: float, n: int) -> tuple[int, int]:
    """(sets received, sets lost) of one capture of ``n`` sets at ``rate``."""
    command(port, f"RATE {rate:.3f}", b"OK RATE")
    port.write(f"START {n} 1\n".encode())
    deadline = time.monotonic() + 60
    if protocol == "framed":
        decoder = FrameDecoder(mask=1)
        received = lost = 0
        while decoder.end_total is None and time.monotonic() < deadline:
            got = decoder.feed(port.read(65536))
            received += got.samples.shape[0]
            lost += got.lost
        return received, (decoder.end_total or n) - received
    buf = bytearray()
    while b"END " not in buf and time.monotonic() < deadline:
        buf += port.read(65536)
    text = bytes(buf).split(b"END ")
    lines = [x for x in text[0].split(b"\n") if x.strip().isdigit()]
    return len(lines), n - len(lines)


def lossless(dev: FirmwareAdcDevice, port: serial.Serial, protocol: str, low: float, high: float) -> float:
    """Highest rate in [low, high] (S/s, to 1 %) at which a capture loses nothing."""
    best = 0.0
    for _ in range(9):
        rate = (low * high) ** 0.5
        before = dev.bridge_dropped
        n = max(2048, int(rate * DURATION))
        received, lost = capture(dev, port, protocol, rate, n)
        if dev.bridge_dropped != before:
            raise RuntimeError("the host fell behind (bytes dropped at the bridge); rerun on a quieter machine")
        if lost == 0 and received == n:
            best, low = rate, rate
        else:
            high = rate
        if high / low < 1.01:
            break
    return best


def link_limit(baud: int, protocol: str) -> float:
    """Sets/s the link carries: simavr's 11 bit times per byte; framed 2 bytes a code plus 20 per
    128-set frame, lines 4 bytes (the TB-3's tone has 3-digit codes around mid-scale, "511\\n")."""
    ubrr = round(F_AVR / 8 / baud) - 1
    bytes_per_s = F_AVR / 8 / (ubrr + 1) / 11
    return bytes_per_s / (2 + 20 / 128 if protocol == "framed" else 4.0)


def build_for(baud: int, folder: Path) -> FirmwareBuild:
    subprocess.run(["make", "-s", "-C", str(FIRMWARE), f"BUILD={folder}", f"BAUD={baud}", "firmware"],
                   check=True, capture_output=True)
    sub = folder if baud == DEFAULT_BAUD else folder / f"baud-{baud}"
    return FirmwareBuild(require_build().harness, sub / "adc328p.elf")


def harness_speed(build: FirmwareBuild) -> tuple[float, float]:
    with device(build) as dev:
        port = open_port(dev)
        t0, c0 = time.monotonic(), dev.clock.monotonic()
        time.sleep(0.5)
        idle = (dev.clock.monotonic() - c0) / (time.monotonic() - t0)
        command(port, "RATE 50000", b"OK RATE")
        n = 100_000  # 2 s of bench time
        port.write(f"START {n} 1\n".encode())
        decoder = FrameDecoder(mask=1)
        first = None  # (wall time, sets) when the first frame arrived: timing starts there, so
        received = 0  # the idle time before START reached the AVR is not counted as streaming
        while decoder.end_total is None:
            got = decoder.feed(port.read(65536))
            received += got.samples.shape[0]
            if first is None and received:
                first = (time.monotonic(), received)
        wall = time.monotonic() - first[0]
        streaming = (n - first[1]) / 50_000 / wall  # bench seconds of sampling per wall second
        port.close()
        dropped = dev.bridge_dropped
    return streaming, idle, dropped


def main() -> None:
    main_build = require_build()
    streaming, idle, dropped = harness_speed(main_build)
    print("harness speed (bench seconds per wall second, unpaced):")
    print(f"  streaming 50 kS/s framed at 2 Mbaud: {streaming:6.2f}x real time "
          f"(ratio to the demo's x{DEMO_SPEED:g}: {streaming / DEMO_SPEED:.2f})")
    print(f"  idle between commands:               {idle:6.0f}x real time")
    if dropped:
        print(f"  ({dropped} bytes were dropped at the bridge: this process read slower than the AVR "
              f"wrote; the AVR's speed is not affected)")
    print("highest lossless rate, one channel (2 s captures; ratio to what the link carries):")
    with tempfile.TemporaryDirectory(prefix="benchgate-fw-bauds-") as tmp:
        for baud in BAUDS:
            build = main_build if baud == DEFAULT_BAUD else build_for(baud, Path(tmp))
            row = []
            for protocol in ("framed", "lines"):
                limit = link_limit(baud, protocol)
                with device(build, protocol, speed=PACE) as dev:
                    port = open_port(dev)
                    best = lossless(dev, port, protocol, 1000.0, min(100_000.0, 1.5 * limit))
                    port.close()
                row.append(f"{protocol} {best:8.0f} S/s ({best / limit:.2f})")
            print(f"  {baud:>8} baud: " + ",  ".join(row))


if __name__ == "__main__":
    main()
