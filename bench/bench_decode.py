"""Decode rate of the serial ADC frame decoder (protocol v1), measured in one run.

Prints samples/s and the ratio to the 20 M samples/s target (goal 50 M). Not a test.
Run: .venv/bin/python bench/bench_decode.py [--samples N] [--frame-samples M]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from benchgate.instruments.framing import FrameDecoder, encode_end, encode_frame

TARGET = 20e6
GOAL = 50e6


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--samples", type=int, default=10_000_000)
    parser.add_argument("--frame-samples", type=int, default=256)
    parser.add_argument("--chunk", type=int, default=1 << 20, help="bytes per feed() call")
    args = parser.parse_args()
    rng = np.random.default_rng(7)
    codes = rng.integers(0, 4096, size=(args.samples, 1), dtype=np.uint16)
    m = args.frame_samples
    stream = b"".join(encode_frame(i, 20_000_000, 1, codes[i:i + m]) for i in range(0, args.samples, m))
    stream += encode_end(args.samples, 20_000_000, 1)
    view = memoryview(stream)
    best = float("inf")
    for _ in range(3):
        dec = FrameDecoder(mask=1)
        got = 0
        t0 = time.perf_counter()
        for off in range(0, len(stream), args.chunk):
            got += dec.feed(view[off:off + args.chunk]).samples.shape[0]
        best = min(best, time.perf_counter() - t0)
    if got != args.samples:
        raise SystemExit(f"decoded {got} of {args.samples} samples")
    rate = args.samples / best
    print(f"decoded {args.samples} samples ({len(stream) / 1e6:.1f} MB, {m} per frame, "
          f"{args.chunk} B per feed) in {best * 1e3:.1f} ms (best of 3)")
    print(f"{rate / 1e6:.1f} M samples/s = {rate / TARGET:.2f}x the 20 M target "
          f"({rate / GOAL:.2f}x the 50 M goal)")


if __name__ == "__main__":
    main()
