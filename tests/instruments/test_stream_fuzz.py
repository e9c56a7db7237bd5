"""Corrupted serial streams, both modes, fed through the decoders: no silent sample shift.

Every stream is built from known codes, damaged the way a serial link damages data, and fed in
random chunks. Whatever the decoder accepts must be a sample the device sent, at the index it
was sent at; everything else must be counted as lost (or, in lines mode, the capture refused or
its loss declared unlocated). Fixed seeds; each test runs in about a second.
"""

from __future__ import annotations

import numpy as np
import pytest

from benchgate.instruments.framing import FrameDecoder, encode_end, encode_frame
from benchgate.instruments.serial_lines import LinesDecoder

PERIOD_PS = 20_000_000  # 50 kS/s


def feed_in_chunks(decoder, data: bytes, rng: np.random.Generator):
    out = []
    i = 0
    while i < len(data):
        step = int(rng.integers(1, 600))
        out.append(decoder.feed(data[i:i + step]))
        i += step
    return out


# ----------------------------------------------------------------------------- framed
def framed_stream(truth: np.ndarray, per_frame: int) -> list[bytes]:
    frames = [encode_frame(seq, PERIOD_PS, 1, truth[seq:seq + per_frame].reshape(-1, 1))
              for seq in range(0, truth.size, per_frame)]
    return [*frames, encode_end(truth.size, PERIOD_PS, 1)]


def damage_frames(frames: list[bytes], rng: np.random.Generator) -> bytes:
    """Bit flips, dropped/duplicated/inserted bytes, truncated and repeated frames, bogus counts."""
    out = []
    for frame in frames:
        f = bytearray(frame)
        roll = rng.random()
        if roll < 0.08:
            f[int(rng.integers(len(f)))] ^= 1 << int(rng.integers(8))  # a bit flip
        elif roll < 0.14:
            del f[int(rng.integers(len(f)))]  # a byte dropped
        elif roll < 0.20:
            at = int(rng.integers(len(f)))
            f[at:at] = f[at:at + 1]  # a byte duplicated
        elif roll < 0.25:
            f = f[:int(rng.integers(1, len(f)))]  # truncated frame
        elif roll < 0.30:
            f[16:18] = int(rng.integers(1, 0x1000)).to_bytes(2, "little")  # bogus count field
        elif roll < 0.34:
            f = f + f  # the frame twice
        elif roll < 0.38:
            f[:0] = rng.integers(0, 256, int(rng.integers(1, 40)), dtype=np.uint8).tobytes()  # garbage
        elif roll < 0.40:
            f[:0] = b"\xa5\x5a" + bytes(rng.integers(0, 256, 20, dtype=np.uint8))  # a false sync
        elif roll < 0.43:
            continue  # frame lost whole
        out.append(bytes(f))
    if rng.random() < 0.3 and len(out) > 3:  # two frames swapped in transit
        i = int(rng.integers(len(out) - 2))
        out[i], out[i + 1] = out[i + 1], out[i]
    return b"".join(out)


@pytest.mark.parametrize("seed", range(4))
def test_framed_decoder_never_shifts_a_sample(seed):
    rng = np.random.default_rng(1000 + seed)
    for _trial in range(40):
        n = int(rng.integers(200, 3000))
        truth = rng.integers(0, 4096, n).astype(np.uint16)
        data = damage_frames(framed_stream(truth, int(rng.integers(16, 300))), rng)
        decoder = FrameDecoder(mask=1)
        parts = feed_in_chunks(decoder, data, rng)
        indices = np.concatenate([np.arange(s, s + c) for p in parts
                                  for s, c in zip(p.frame_seq.tolist(), p.frame_count.tolist(), strict=True)]
                                 or [np.empty(0, np.int64)]).astype(np.int64)
        values = np.concatenate([p.samples[:, 0] for p in parts])
        assert indices.size == values.size
        assert np.all(np.diff(indices) > 0)  # each index at most once, in order
        assert np.all(indices < n)
        np.testing.assert_array_equal(values, truth[indices])  # the true value at its true index
        # loss accounting: every index below the last one known (a sample or the END frame's
        # total) is accepted or lost, and no gap hides an accepted sample
        lost = sum(p.lost for p in parts)
        end = max([int(indices[-1]) + 1 if indices.size else 0] +
                  [p.end_total for p in parts if p.end_total is not None])
        assert lost == end - indices.size
        covered = np.zeros(end, dtype=bool)
        covered[indices] = True
        for start, length in (g for p in parts for g in p.gaps):
            assert not covered[start:start + length].any()


# ----------------------------------------------------------------------------- lines
def lines_text(truth: np.ndarray, timestamps: bool, rate: float) -> list[str]:
    if timestamps:
        t = np.round(np.arange(truth.size) / rate * 1e6).astype(np.int64)
        return [f"{a},{v}" for a, v in zip(t.tolist(), truth.tolist(), strict=True)]
    return [str(v) for v in truth.tolist()]


def damage_lines(lines: list[str], ops: int, rng: np.random.Generator) -> tuple[bytes, set[int]]:
    """Apply ``ops`` link faults; returns the bytes and the true indices of the lines touched."""
    items = [(i, line) for i, line in enumerate(lines)]  # (true index, text without LF)
    touched: set[int] = set()
    for _ in range(ops):
        k = int(rng.integers(len(items)))
        idx, text = items[k]
        kind = int(rng.integers(8))
        touched.add(idx)
        if kind == 0:  # a bit flip in a byte of the line or its line feed
            raw = bytearray((text + "\n").encode())
            raw[int(rng.integers(len(raw)))] ^= 1 << int(rng.integers(7))
            pieces = raw.decode("latin-1").split("\n")
            if raw.endswith(b"\n"):
                pieces = pieces[:-1]
            else:  # the line feed was hit: this line runs into the next
                if k + 1 < len(items):
                    touched.add(items[k + 1][0])
                    pieces[-1] += items[k + 1][1]
                    del items[k + 1]
            items[k:k + 1] = [(idx, p) for p in pieces]
        elif kind == 1:  # a byte dropped (a digit, a comma or the line feed)
            at = int(rng.integers(len(text) + 1))
            if at == len(text):
                if k + 1 < len(items):
                    touched.add(items[k + 1][0])
                    items[k:k + 2] = [(idx, text + items[k + 1][1])]
            else:
                items[k] = (idx, text[:at] + text[at + 1:])
        elif kind == 2:  # a stray byte inserted
            at = int(rng.integers(len(text) + 1))
            ch = "0123456789,\n x"[int(rng.integers(14))]
            new = text[:at] + ch + text[at:]
            items[k:k + 1] = [(idx, p) for p in new.split("\n")]
        elif kind == 3:  # the line repeated
            items.insert(k, (idx, text))
        elif kind == 4:  # the line lost
            del items[k]
        elif kind == 5:  # the line split in two
            at = int(rng.integers(1, max(2, len(text))))
            items[k:k + 1] = [(idx, text[:at]), (idx, text[at:])]
        elif kind == 6:  # two adjacent digits swapped
            if len(text) >= 2:
                at = int(rng.integers(len(text) - 1))
                items[k] = (idx, text[:at] + text[at + 1] + text[at] + text[at + 2:])
        else:  # one digit replaced
            at = int(rng.integers(len(text)))
            items[k] = (idx, text[:at] + "0123456789"[int(rng.integers(10))] + text[at + 1:])
        if not items:
            break
    return "".join(f"{t}\n" for _i, t in items).encode("latin-1"), touched


def lines_text_bytes(truth: np.ndarray) -> bytes:
    return "".join(f"{v}\n" for v in truth.tolist()).encode()


def check_lines(res, truth: np.ndarray, touched: set[int]) -> str:
    """The outcome class; asserts the no-silent-shift property for what was accepted."""
    n = truth.size
    if res.extra:
        return "refused"  # the driver refuses a capture with more lines than END says
    assert res.lost == sum(b for _a, b in res.gaps)
    assert res.indices.size + res.lost == n  # every requested sample is accepted or lost
    if res.unlocated:
        return "unlocated"  # declared: loss counted, its place (and the join) unknown
    assert np.all(np.diff(res.indices) > 0) and np.all(res.indices < n)
    wrong = res.indices[res.codes[:, 0] != truth[res.indices]]
    # a wrong value is only ever a damaged line read as a valid code, at its own index
    assert set(wrong.tolist()) <= touched, (sorted(set(wrong.tolist()) - touched), sorted(touched))
    return "accepted"


@pytest.mark.parametrize("seed", range(3))
def test_lines_decoder_one_fault_never_shifts_silently(seed):
    rng = np.random.default_rng(2000 + seed)
    outcomes: dict[str, int] = {}
    for _trial in range(150):
        n = int(rng.integers(20, 400))
        truth = rng.integers(0, 4096, n).astype(np.uint16)
        end = f"END {n}\n".encode()
        if rng.random() < 0.2:  # the one fault hits the END line instead
            end = [b"", b"EN %d\n" % n, b"END %dx\n" % n, b"END\n", b"END %d\n" % (n + 1),
                   b"END %d\n" % (n - 1)][int(rng.integers(6))]
            data, touched = lines_text_bytes(truth), set()
        else:
            data, touched = damage_lines(lines_text(truth, False, 0), 1, rng)
        dec = LinesDecoder(12)
        feed_in_chunks(dec, data + end, rng)
        kind = check_lines(dec.result(n), truth, touched)
        outcomes[kind] = outcomes.get(kind, 0) + 1
    assert outcomes.get("refused") and outcomes.get("accepted") and outcomes.get("unlocated")


@pytest.mark.parametrize("seed", range(3))
def test_lines_with_time_stamps_several_faults_never_shift(seed):
    rng = np.random.default_rng(3000 + seed)
    outcomes: dict[str, int] = {}
    for _trial in range(60):
        n = int(rng.integers(100, 1500))
        rate = float(rng.choice([2000.0, 44_100.0, 48_000.0, 50_000.0]))
        truth = rng.integers(0, 4096, n).astype(np.uint16)
        data, touched = damage_lines(lines_text(truth, True, rate), int(rng.integers(1, 6)), rng)
        dec = LinesDecoder(12, timestamps=True)
        feed_in_chunks(dec, data + f"END {n}\n".encode(), rng)
        res = dec.result(n)
        kind = check_lines(res, truth, touched)
        outcomes[kind] = outcomes.get(kind, 0) + 1
        if kind == "accepted" and res.rate is not None:
            assert res.rate == pytest.approx(rate, rel=1e-4)
    assert outcomes.get("accepted", 0) > 30
