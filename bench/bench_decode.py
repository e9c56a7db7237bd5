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
    frames = [encode_frame(i, 20_000_000, 1, codes[i:i + m]) for i in range(0, args.samples, m)]
    clean = b"".join(frames) + encode_end(args.samples, 20_000_000, 1)
    damaged = bytearray()
    for k, frame in enumerate(frames):  # 1 % corrupted, 1 % dropped, garbage before 5 %
        if k % 20 == 3:
            damaged += rng.integers(0, 256, size=17, dtype=np.uint8).tobytes()
        if k % 100 == 7:
            continue
        frame = bytearray(frame)
        if k % 100 == 11:
            frame[40] ^= 0x5A
        damaged += frame
    damaged += encode_end(args.samples, 20_000_000, 1)
    for name, stream in (("clean", clean), ("damaged", bytes(damaged))):
        view = memoryview(stream)
        best = float("inf")
        for _ in range(3):
            dec = FrameDecoder(mask=1)
            got = lost = 0
            t0 = time.perf_counter()
            for off in range(0, len(stream), args.chunk):
                out = dec.feed(view[off:off + args.chunk])
                got += out.samples.shape[0]
                lost += out.lost
            best = min(best, time.perf_counter() - t0)
        if got + lost != args.samples:
            raise SystemExit(f"{name}: decoded {got} + lost {lost} != {args.samples} samples")
        rate = args.samples / best
        print(f"{name}: {args.samples} samples ({len(stream) / 1e6:.1f} MB, {m} per frame, "
              f"{args.chunk} B per feed; {lost} lost) in {best * 1e3:.1f} ms (best of 3): "
              f"{rate / 1e6:.1f} M samples/s = {rate / TARGET:.2f}x the 20 M target "
              f"({rate / GOAL:.2f}x the 50 M goal)")


if __name__ == "__main__":
    main()
