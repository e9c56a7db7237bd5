"""What the live preview of a capture costs the thread that reads the serial ADC.

A 2 Mbaud framed stream (one channel, 12-bit codes; 200 000 bytes/s on the wire) is cut into
the chunks the reader gets and decoded (``FrameDecoder``) as the driver does. Against that, the
work one preview adds every 100 ms of the stream (``PREVIEW_INTERVAL``): the new samples into
the builder's columns (``PreviewBuilder.add``), the preview itself (``take``) and what the page
face does with it (``to_dict`` and the JSON the board keeps). Between two previews a chunk only
pays a clock read (``due``), timed too.

Run: python bench/bench_preview.py [seconds of stream]   (default 20; prints ratios)
"""

from __future__ import annotations

import json
import os
import sys
import time

import numpy as np

from benchgate.instruments.framing import FrameDecoder, encode_frame
from benchgate.instruments.preview import PREVIEW_INTERVAL, PreviewBuilder

BAUD = 2_000_000
CHUNK = 4096  # bytes per read, about what a USB serial adapter hands over at this rate
FRAME = 256  # samples per frame


def stream(seconds: float) -> tuple[bytes, int]:
    """Framed bytes of a noisy tone, as many as 2 Mbaud carries in ``seconds`` (8N1: 10 bits a byte)."""
    rng = np.random.default_rng(1)
    want = int(seconds * BAUD / 10)
    out, n = bytearray(), 0
    while len(out) < want:
        t = np.arange(n, n + FRAME)
        codes = 2048 + 1200 * np.sin(2 * np.pi * t / 97.3) + rng.normal(0, 3, FRAME)
        out += encode_frame(n, 10_000_000, 1, np.clip(codes, 0, 4095).astype(np.uint16))  # seq: first index
        n += FRAME
    return bytes(out[:want]), n


def main() -> None:
    seconds = float(sys.argv[1]) if len(sys.argv) > 1 else 20.0
    data, n = stream(seconds)
    chunks = [data[i:i + CHUNK] for i in range(0, len(data), CHUNK)]
    per_preview = max(1, round(len(chunks) * PREVIEW_INTERVAL / seconds))  # chunks in 100 ms

    decoder = FrameDecoder(mask=1)
    t0 = time.perf_counter()
    parts = [decoder.feed(c).samples for c in chunks]
    decode = time.perf_counter() - t0
    samples = sum(p.shape[0] for p in parts)

    builder = PreviewBuilder("out", samples / seconds, samples, gain=3.3 / 4096)
    previews, wire = 0, 0
    t0 = time.perf_counter()
    for i in range(0, len(parts), per_preview):
        for p in parts[i:i + per_preview]:
            builder.add(p[:, 0])
        wire += len(json.dumps(builder.take().to_dict(), allow_nan=False))
        previews += 1
    preview = time.perf_counter() - t0

    ticker = PreviewBuilder("out", 1.0, 1, interval=3600.0)
    ticker.take()
    t0 = time.perf_counter()
    for _ in chunks:
        ticker.due()
    ticks = time.perf_counter() - t0

    print(f"stream: {seconds:g} s at {BAUD / 1e6:g} Mbaud, {samples} samples in {len(chunks)} chunks; "
          f"{previews} previews (one per {per_preview} chunks)")
    print(f"decoding the stream      : {decode / seconds:.4f} s per s of stream")
    print(f"previews (add+take+JSON) : {preview / seconds:.4f} s per s of stream "
          f"({1e3 * preview / previews:.2f} ms each, {wire / previews / 1e3:.1f} kB of JSON each)")
    print(f"due() between previews   : {ticks / seconds:.6f} s per s of stream")
    print(f"ratio previews / decoding: {preview / decode:.3f}")
    print(f"share of one core the previews take at this rate: {100 * preview / seconds:.2f} %")
    print(f"load average: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
