"""Throughput of the serial ADC path over a real pty: simulated device -> pyserial -> decoder.

For each sample rate (device paced in real time), one 0.5 s capture through SerialAdc; prints
the wall time it took and the ratio of delivered samples/s to the rate asked for (1.00 = the host
kept up). Shows how far rate × understudy-bench speed can go on this machine. Not a test.
Run: .venv/bin/python bench/bench_serial_pty.py
"""

from __future__ import annotations

import time

from benchgate.clock import SystemClock
from benchgate.errors import InstrumentError
from benchgate.instruments.serial_adc import SerialAdc
from benchgate.instruments.station import InstrumentConfig
from benchgate.sim.serial_device import PtyAdcDevice, SineSource

RATES = (50_000, 200_000, 400_000, 800_000)
DURATION = 0.5


def main() -> None:
    clock = SystemClock()
    for rate in RATES:
        with PtyAdcDevice(SineSource(), clock=clock) as dev:
            cfg = InstrumentConfig("adc", "serial-adc", dev.port, 1.0,
                                   {"channels": ("out",), "bits": 12, "vref": 3.3, "max_loss": 0.0})
            with SerialAdc.open(cfg, clock=clock) as adc:
                t0 = time.perf_counter()
                try:
                    cap = adc.capture("out", duration=DURATION, rate=rate)
                except InstrumentError as exc:
                    print(f"{rate / 1e3:7.0f} kS/s: {exc.message}")
                    continue
                wall = time.perf_counter() - t0
        delivered = cap.n / wall
        print(f"{rate / 1e3:7.0f} kS/s: {cap.n} samples in {wall:.3f} s wall, delivered "
              f"{delivered / 1e3:.0f} kS/s = {delivered / rate:.2f}x the asked rate "
              f"(arrival rate verified: {cap.metadata['rate']['verified']})")


if __name__ == "__main__":
    main()
