"""Frame codec of serial ADC protocol v1."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from benchgate.instruments.framing import (
    FrameDecoder,
    crc16,
    crc16_rows,
    encode_end,
    encode_frame,
)

PERIOD = 20_000_000  # 20 µs in ps: 50 kS/s


def crc16_bitwise(data: bytes) -> int:
    """Reference: the CRC definition bit by bit (poly 0x1021, init 0xFFFF, MSB first)."""
    crc = 0xFFFF
    for byte in data:
        crc ^= byte << 8
        for _ in range(8):
            crc = ((crc << 1) ^ 0x1021) if crc & 0x8000 else (crc << 1)
            crc &= 0xFFFF
    return crc


class TestCrc:
    def test_reference_crc(self):
        # CRC-16/CCITT-FALSE reference CRC ("check" in the catalogue) for ASCII "123456789" (published CRC catalogue value)
        assert crc16(b"123456789") == 0x29B1
        assert crc16_bitwise(b"123456789") == 0x29B1

    @given(st.binary(min_size=0, max_size=600))
    @settings(max_examples=60)
    def test_matches_bitwise_definition(self, data):
        assert crc16(data) == crc16_bitwise(data)

    def test_rows_match_single(self):
        rng = np.random.default_rng(3)
        rows = rng.integers(0, 256, size=(17, 40), dtype=np.uint8)
        expect = [crc16_bitwise(r.tobytes()) for r in rows]
        assert crc16_rows(rows).tolist() == expect


def frames_of(codes: np.ndarray, per_frame: int, mask: int = 1) -> list[bytes]:
    return [encode_frame(i, PERIOD, mask, codes[i:i + per_frame]) for i in range(0, len(codes), per_frame)]


def test_layout_matches_the_documented_example():
    # docs/serial-protocol.md, "Frame layout" example; CRC from the bitwise definition above
    frame = encode_frame(512, PERIOD, 1, np.array([0x0800, 0x0801], dtype=np.uint16))
    body = bytes.fromhex("01 00020000 002D310100000000 01 0200 0008 0108")
    assert frame == b"\xa5\x5a" + body + crc16_bitwise(body).to_bytes(2, "little")
    assert frame[-2:] == bytes.fromhex("5B96")


class TestRoundTrip:
    def test_single_channel(self):
        codes = np.arange(1000, dtype=np.uint16).reshape(-1, 1) % 4096
        stream = b"".join(frames_of(codes, 64)) + encode_end(1000, PERIOD, 1)
        out = FrameDecoder().feed(stream)
        np.testing.assert_array_equal(out.samples, codes)
        assert (out.lost, out.rejected, out.garbage_bytes, out.end_total) == (0, 0, 0, 1000)
        assert out.periods_ps == (PERIOD,)

    def test_two_channels_interleaved(self):
        codes = np.stack([np.arange(300), 4095 - np.arange(300)], axis=1).astype(np.uint16)
        stream = b"".join(frames_of(codes, 50, mask=0b11))
        out = FrameDecoder(mask=0b11).feed(stream)
        np.testing.assert_array_equal(out.samples, codes)

    def test_byte_by_byte_feeding(self):
        codes = (np.arange(200, dtype=np.uint16) * 7 % 4096).reshape(-1, 1)
        stream = b"".join(frames_of(codes, 33))
        dec = FrameDecoder()
        got = [dec.feed(stream[i:i + 1]).samples for i in range(len(stream))]
        np.testing.assert_array_equal(np.concatenate(got), codes)

    def test_gap_counted_not_joined(self):
        codes = np.arange(400, dtype=np.uint16).reshape(-1, 1)
        frames = frames_of(codes, 100)
        out = FrameDecoder().feed(frames[0] + frames[2] + frames[3] + encode_end(400, PERIOD, 1))
        assert out.lost == 100
        assert out.gaps == [(100, 100)]
        assert out.frame_seq.tolist() == [0, 200, 300]

    def test_lost_tail_seen_from_end_frame(self):
        codes = np.arange(300, dtype=np.uint16).reshape(-1, 1)
        frames = frames_of(codes, 100)
        out = FrameDecoder().feed(frames[0] + frames[1] + encode_end(300, PERIOD, 1))
        assert out.lost == 100 and out.end_total == 300

    def test_corrupted_frame_rejected(self):
        codes = np.arange(200, dtype=np.uint16).reshape(-1, 1)
        frames = frames_of(codes, 100)
        bad = bytearray(frames[0])
        bad[30] ^= 0x01
        out = FrameDecoder().feed(bytes(bad) + frames[1])
        assert out.rejected == 1 and out.lost == 100
        np.testing.assert_array_equal(out.samples, codes[100:])

    def test_repeated_frame_dropped(self):
        codes = np.arange(200, dtype=np.uint16).reshape(-1, 1)
        frames = frames_of(codes, 100)
        out = FrameDecoder().feed(frames[0] + frames[0] + frames[1])
        np.testing.assert_array_equal(out.samples, codes)
        assert out.rejected == 1

    def test_sequence_wraps(self):
        a = encode_frame(2**32 - 10, PERIOD, 1, np.arange(10, dtype=np.uint16))
        b = encode_frame(0, PERIOD, 1, np.arange(10, 20, dtype=np.uint16))
        dec = FrameDecoder()
        dec._next = 2**32 - 10
        out = dec.feed(a + b)
        assert out.lost == 0 and out.frame_seq.tolist() == [2**32 - 10, 2**32]


@st.composite
def damaged_streams(draw):
    nframes = draw(st.integers(1, 12))
    sizes = [draw(st.integers(1, 40)) for _ in range(nframes)]
    seed = draw(st.integers(0, 2**31))
    rng = np.random.default_rng(seed)
    bits16 = draw(st.booleans())  # full 16-bit codes can contain the sync word in payloads
    codes = rng.integers(0, 65536 if bits16 else 4096, size=(sum(sizes), 1), dtype=np.uint16)
    pieces, start = [], 0
    for size in sizes:
        frame = bytearray(encode_frame(start, PERIOD, 1, codes[start:start + size]))
        action = draw(st.sampled_from(["keep", "keep", "drop", "corrupt", "truncate"]))
        if action == "drop":
            frame = bytearray()
        elif action == "corrupt":
            at = draw(st.integers(0, len(frame) - 1))
            frame[at] ^= draw(st.integers(1, 255))
        elif action == "truncate":
            frame = frame[: draw(st.integers(0, len(frame) - 1))]
        garbage = draw(st.binary(max_size=30))
        if draw(st.booleans()):
            garbage += b"\xa5\x5a" + draw(st.binary(max_size=20))  # a false sync
        pieces.append(garbage + bytes(frame))
        start += size
    pieces.append(encode_end(start, PERIOD, 1))
    stream = b"".join(pieces)
    cuts = sorted(draw(st.lists(st.integers(0, len(stream)), max_size=6)))
    return codes, stream, cuts


@given(damaged_streams())
@settings(max_examples=150, deadline=None)
def test_damaged_stream_never_yields_a_wrong_sample(case):
    # common practice, no source: every decoded sample equals the sent sample at its index,
    # and decoded + lost accounts for everything sent
    codes, stream, cuts = case
    dec = FrameDecoder()
    bounds = [0, *cuts, len(stream)]
    got, lost, end_total = 0, 0, None
    for a, b in zip(bounds[:-1], bounds[1:], strict=True):
        out = dec.feed(stream[a:b])
        off = 0
        for seq, count in zip(out.frame_seq.tolist(), out.frame_count.tolist(), strict=True):
            np.testing.assert_array_equal(out.samples[off:off + count], codes[seq:seq + count])
            off += count
        assert off == out.samples.shape[0]
        got += off
        lost += out.lost
        end_total = out.end_total if out.end_total is not None else end_total
    assert end_total == len(codes)
    assert got + lost == len(codes)
