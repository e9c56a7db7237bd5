"""1e6-point digitizer fetch over loopback: through pyvisa-py ÷ a raw socket, same run.

Both paths send the same ``FETC:WAV?`` to the same emulated digitizer and receive the same
IEEE 488.2 block of 4 000 000 bytes of float32; the raw path reads it with plain
``socket.recv_into`` and ``numpy.frombuffer``. Target: ratio ≤ 2. Prints the medians and the
ratio; asserts nothing.

Run: ``.venv/bin/python bench/bench_scpi_fetch.py [--points 1000000] [--repeats 41]``
"""

from __future__ import annotations

import argparse
import socket
import statistics
import time

import numpy as np

from benchgate.clock import ManualClock
from benchgate.instruments.scpi_digitizer import ScpiDigitizer
from benchgate.instruments.station import InstrumentConfig
from benchgate.sim.scpi_server import ConstantBackend, ScpiBench


def raw_fetch(sock: socket.socket, points: int) -> np.ndarray:
    sock.sendall(b"FETC:WAV?\n")
    head = bytearray()
    while len(head) < 2:
        head += sock.recv(2 - len(head))
    ndigits = int(head[1:2])
    digits = bytearray()
    while len(digits) < ndigits:
        digits += sock.recv(ndigits - len(digits))
    length = int(digits)
    buf = bytearray(length + 1)
    view = memoryview(buf)
    got = 0
    while got < length + 1:
        got += sock.recv_into(view[got:], length + 1 - got)
    if buf[-1:] != b"\n" or length != 4 * points:
        raise RuntimeError("bad block")
    return np.frombuffer(buf, dtype="<f4", count=points).astype(np.float64)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=41)
    args = parser.parse_args()

    rate = 1e6
    with ScpiBench(ConstantBackend(frequency=1234.5), clock=ManualClock()) as bench:
        config = InstrumentConfig("digitizer", "scpi-digitizer", bench.resources["digitizer"], 5.0, {})
        with ScpiDigitizer.open(config, clock=ManualClock()) as dig:
            dig.setup("ch1", duration=args.points / rate, rate=rate)
            dig.arm()
            dig.wait()
            reference = dig.fetch()
            sock = socket.create_connection(("127.0.0.1", bench.ports["digitizer"]))
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            try:
                if not np.array_equal(raw_fetch(sock, args.points), reference):
                    raise RuntimeError("raw and pyvisa-py fetches differ")
                visa_times, raw_times = [], []
                for _ in range(args.repeats):  # interleaved, so both see the same machine load
                    t0 = time.perf_counter()
                    dig.fetch()
                    t1 = time.perf_counter()
                    raw_fetch(sock, args.points)
                    t2 = time.perf_counter()
                    visa_times.append(t1 - t0)
                    raw_times.append(t2 - t1)
            finally:
                sock.close()
    v, r = statistics.median(visa_times), statistics.median(raw_times)
    mb = args.points * 4 / 1e6
    print(f"points: {args.points}  block: {mb:.1f} MB  repeats: {args.repeats}")
    print(f"pyvisa-py fetch: median {v * 1e3:.1f} ms ({mb / v:.0f} MB/s)")
    print(f"raw socket     : median {r * 1e3:.1f} ms ({mb / r:.0f} MB/s)")
    print(f"ratio pyvisa-py / raw socket: {v / r:.2f} (target <= 2)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
