"""Plain-lines mode parser."""

from __future__ import annotations

import numpy as np

from benchgate.instruments.serial_lines import LinesDecoder


def test_plain_integers_any_chunking():
    dec = LinesDecoder(12)
    text = b"".join(f"{v}\r\n".encode() for v in range(100, 140))
    got = np.concatenate([dec.feed(text[i:i + 7]) for i in range(0, len(text), 7)])
    assert got[:, 0].tolist() == list(range(100, 140)) and dec.lost == 0


def test_bad_lines_and_out_of_range_codes_count_as_lost():
    dec = LinesDecoder(12)
    got = dec.feed(b"10\n1x\n4096\n-1\n11\nEND 5\n")
    assert got[:, 0].tolist() == [10, 11]
    assert dec.lost == 3 and dec.gaps == [(1, 1), (2, 1), (3, 1)] and dec.end_total == 5


def test_timestamp_gap_counts_missing_samples_and_rate():
    dec = LinesDecoder(12, timestamps=True)
    lines = [f"{t},{t // 100}\n" for t in range(0, 2000, 100) if t not in (700, 800)]
    got = dec.feed("".join(lines).encode())
    assert got.shape[0] == 18
    assert dec.lost == 2 and dec.gaps == [(7, 2)]
    # 100 µs apart -> 10 kHz; first to last spans 19 periods including the 2 lost samples
    assert abs(dec.timestamp_rate() - 10_000.0) < 1e-6


def test_skip_first_cut_line():
    dec = LinesDecoder(12, skip_first=True)
    assert dec.feed(b"48\n2049\n2050\n")[:, 0].tolist() == [2049, 2050]
