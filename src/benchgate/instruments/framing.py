"""Serial ADC protocol version 1: the frame codec (byte layout in ``docs/serial-protocol.md``).

A frame, all multi-byte fields little-endian::

    offset size field
    0      2    sync        0xA5 0x5A
    2      1    type        1 = DATA, 2 = END
    3      4    seq         index of the frame's first sample set since START (mod 2**32);
                            for END: the number of sample sets sent
    7      8    period_ps   sample period in picoseconds, as the device's own clock measures it
    15     1    mask        channel mask (bit i = channel i)
    16     2    count       sample sets in this frame (END: 0)
    18     2*count*nch      samples, uint16, interleaved by channel within each set
    18+P   2    crc         CRC-16/CCITT-FALSE over bytes 2 .. 18+P-1 (type .. last sample)

The decoder is vectorised with numpy: it finds every sync candidate, checks each plausible
header's CRC (frames of equal length together, two bytes per table lookup), keeps the
non-overlapping frames that pass, and counts sequence gaps as lost samples. Bytes that belong
to no valid frame are counted as garbage; a decoded sample is therefore always one the device
sent, at the position its sequence number gives.

References
----------
CRC by table look-up (one table entry per input byte, the register shifted by eight bits per
step): D. V. Sarwate, "Computation of cyclic redundancy checks via table look-up",
*Communications of the ACM* 31(8), 1008-1013, 1988. The two-byte (16-bit index) table and the
per-position tables extend the same method: the CRC is linear over GF(2), so the contribution
of each byte at each distance from the end can be tabulated and XOR-ed (R. N. Williams, "A
painless guide to CRC error detection algorithms", 1993, on table-driven and parametrised
CRCs). CRC-16/CCITT-FALSE parameters and its reference CRC (the catalogue's "check") 0x29B1 for ``123456789``: the
parametrised CRC model of the same guide (width 16, poly 0x1021, init 0xFFFF, no reflection,
xorout 0), as listed in the published CRC catalogues.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

SYNC = b"\xa5\x5a"
TYPE_DATA = 1
TYPE_END = 2
HEADER_SIZE = 18
CRC_SIZE = 2
MAX_FRAME_SAMPLES = 2048  # count * channels, at most
MAX_CRC_REGION = HEADER_SIZE - 2 + 2 * MAX_FRAME_SAMPLES
_SEQ_MOD = 1 << 32

_POPCOUNT = np.array([bin(i).count("1") for i in range(256)], dtype=np.int64)


def _byte_table() -> np.ndarray:
    """CRC-16 (poly 0x1021, MSB first) register update for one byte from a zero register."""
    t = np.arange(256, dtype=np.uint32) << 8
    for _ in range(8):
        t = np.where(t & 0x8000, (t << 1) ^ 0x1021, t << 1) & 0xFFFF
    return t.astype(np.uint16)


T8 = _byte_table()


def _word_table() -> np.ndarray:
    """Update for two bytes at once: new = T16[crc ^ (b0 << 8 | b1)] (valid as width = 16)."""
    y = np.arange(65536, dtype=np.uint32)
    c1 = T8[y >> 8].astype(np.uint32)
    c2 = ((c1 & 0xFF) << 8) ^ T8[(c1 >> 8) ^ (y & 0xFF)]
    return c2.astype(np.uint16)


T16 = _word_table()

_positional: np.ndarray | None = None
_zero_init: np.ndarray | None = None


def _positional_tables() -> tuple[np.ndarray, np.ndarray]:
    """TP[k, v]: contribution of byte v followed by k more bytes; Z[n]: of the init over n bytes.

    The CRC is linear over GF(2), so crc(msg) = Z[n] ^ XOR_j TP[n-1-j, msg[j]]: one gather and
    one reduction per message, fast for the encoder's many short messages.
    """
    global _positional, _zero_init
    if _positional is None:
        # f advances a register by one zero byte; tables of f^m for m = 1, 2, 4 ... let each
        # doubling fill the next block of rows with one gather (about 13 gathers in all)
        regs = np.arange(65536, dtype=np.uint32)
        step = (((regs << 8) & 0xFFFF) ^ T8[regs >> 8]).astype(np.uint16)  # f
        tp = np.empty((MAX_CRC_REGION, 256), dtype=np.uint16)
        z = np.empty(MAX_CRC_REGION + 1, dtype=np.uint16)
        tp[0], z[0] = T8, 0xFFFF
        m = 1
        while m < MAX_CRC_REGION + 1:
            hi = min(2 * m, MAX_CRC_REGION + 1)
            z[m:hi] = step[z[:hi - m]]
            if m < MAX_CRC_REGION:
                top = min(2 * m, MAX_CRC_REGION)
                tp[m:top] = step[tp[:top - m]]
            step = step[step]  # f^(2m)
            m *= 2
        _positional, _zero_init = tp, z
        return tp, z
    return _positional, _zero_init  # type: ignore[return-value]  # both set together above


def crc16(data: bytes | np.ndarray) -> int:
    """CRC-16/CCITT-FALSE (poly 0x1021, init 0xFFFF, not reflected, no final xor).

    References
    ----------
    D. V. Sarwate, "Computation of cyclic redundancy checks via table look-up", Commun. ACM
    31(8), 1988 (the byte-at-a-time table; the two-byte and per-position tables extend it, the
    latter by the CRC's linearity over GF(2)). Parameters and reference CRC 0x29B1 for
    "123456789": the published CRC catalogue (docs/references.md).
    """
    buf = np.frombuffer(bytes(data), dtype=np.uint8) if not isinstance(data, np.ndarray) else data
    n = int(buf.size)
    if n == 0:
        return 0xFFFF
    if n <= MAX_CRC_REGION:
        tp, z = _positional_tables()
        return int(np.bitwise_xor.reduce(tp[np.arange(n - 1, -1, -1), buf]) ^ z[n])
    crc = 0xFFFF
    for b in buf.tolist():
        crc = ((crc << 8) & 0xFFFF) ^ int(T8[(crc >> 8) ^ b])
    return crc


def crc16_rows(rows: np.ndarray) -> np.ndarray:
    """CRC of each row of a 2-D uint8 array with an even number of columns (vectorised).

    Many rows: one pass per column pair through the two-byte table. Few rows (a live read of
    a few frames): per-position tables, one gather and one reduction for all of them.
    """
    nrows, ncols = rows.shape
    if nrows < 64 and ncols <= MAX_CRC_REGION:
        tp, z = _positional_tables()
        contrib = tp[np.arange(ncols - 1, -1, -1)[None, :], rows]
        return np.bitwise_xor.reduce(contrib, axis=1) ^ z[ncols]
    words = np.ascontiguousarray(rows).view(">u2").astype(np.uint16).T.copy()
    crc = np.full(rows.shape[0], 0xFFFF, dtype=np.uint16)
    for col in words:
        crc = T16[crc ^ col]
    return crc


def frame_header(ftype: int, seq: int, period_ps: int, mask: int, count: int) -> bytes:
    return (SYNC + bytes([ftype]) + (seq % _SEQ_MOD).to_bytes(4, "little")
            + int(period_ps).to_bytes(8, "little") + bytes([mask]) + int(count).to_bytes(2, "little"))


def encode_frame(seq: int, period_ps: int, mask: int, samples: np.ndarray) -> bytes:
    """One DATA frame. ``samples``: uint16 array of shape (count, channels in mask)."""
    samples = np.asarray(samples)
    nch = int(_POPCOUNT[mask])
    if samples.ndim == 1:
        samples = samples.reshape(-1, 1)
    if samples.shape[1] != nch or not 1 <= samples.size <= MAX_FRAME_SAMPLES:
        raise ValueError(f"frame needs 1..{MAX_FRAME_SAMPLES} samples on {nch} channels, got {samples.shape}")
    body = frame_header(TYPE_DATA, seq, period_ps, mask, samples.shape[0])[2:]
    body += np.ascontiguousarray(samples, dtype="<u2").tobytes()
    return SYNC + body + crc16(body).to_bytes(2, "little")


def encode_end(total: int, period_ps: int, mask: int) -> bytes:
    """The END frame: ``seq`` = number of sample sets sent."""
    body = frame_header(TYPE_END, total, period_ps, mask, 0)[2:]
    return SYNC + body + crc16(body).to_bytes(2, "little")


@dataclass
class Decoded:
    """What one ``feed`` produced."""

    samples: np.ndarray  # (n, channels) uint16
    frame_seq: np.ndarray  # absolute (unwrapped) index of each accepted DATA frame's first set
    frame_count: np.ndarray  # sets in each accepted DATA frame
    lost: int = 0  # sample sets missing by sequence number
    gaps: list[tuple[int, int]] = field(default_factory=list)  # (absolute index, sets lost)
    rejected: int = 0  # plausible frames failing CRC (or stale sequence numbers)
    garbage_bytes: int = 0
    periods_ps: tuple[int, ...] = ()  # distinct periods declared by accepted frames
    end_total: int | None = None  # from an END frame: sets the device says it sent


class FrameDecoder:
    """Streaming decoder: ``feed(bytes)`` any chunking; keeps an incomplete tail for later.

    Parameters
    ----------
    mask : int or None
        Channel mask expected (frames with another mask are not accepted); None accepts any
        mask, but all frames of one capture must share it.
    """

    def __init__(self, mask: int | None = None):
        self.mask = mask
        self._buf = np.empty(0, dtype=np.uint8)
        self._next = 0  # absolute index expected next
        self.end_total: int | None = None  # set once an END frame arrives

    @property
    def pending_bytes(self) -> int:
        return int(self._buf.size)

    @property
    def next_index(self) -> int:
        return self._next

    def feed(self, data: bytes | np.ndarray) -> Decoded:
        new = np.frombuffer(data, dtype=np.uint8) if isinstance(data, (bytes, bytearray, memoryview)) else data
        buf = np.concatenate([self._buf, new]) if self._buf.size else np.asarray(new, dtype=np.uint8)
        out, keep_from = self._decode(buf)
        self._buf = buf[keep_from:].copy()
        return out

    def _decode(self, buf: np.ndarray) -> tuple[Decoded, int]:
        n = int(buf.size)
        cand = np.flatnonzero((buf[:-1] == 0xA5) & (buf[1:] == 0x5A)) if n >= 2 else np.empty(0, np.int64)
        head_ok = cand + HEADER_SIZE <= n
        # a sync candidate without a full header yet: keep from there (or the last byte)
        tail_hold = int(cand[~head_ok][0]) if (~head_ok).any() else (n - 1 if n and buf[-1] == 0xA5 else n)
        cand = cand[head_ok]
        ftype = buf[cand + 2]
        mask = buf[cand + 15].astype(np.int64)
        count = buf[cand + 16].astype(np.int64) | (buf[cand + 17].astype(np.int64) << 8)
        nch = _POPCOUNT[mask]
        plausible = (mask != 0) & (count * nch <= MAX_FRAME_SAMPLES) & (
            ((ftype == TYPE_DATA) & (count > 0)) | ((ftype == TYPE_END) & (count == 0)))
        if self.mask is not None:
            plausible &= mask == self.mask
        cand, count, nch, mask, ftype = cand[plausible], count[plausible], nch[plausible], mask[plausible], ftype[plausible]
        length = HEADER_SIZE + 2 * count * nch + CRC_SIZE
        complete = cand + length <= n
        incomplete_pos = cand[~complete]
        cand, count, nch, length, mask, ftype = (a[complete] for a in (cand, count, nch, length, mask, ftype))

        good = np.zeros(cand.size, dtype=bool)
        for L in np.unique(length):
            sel = np.flatnonzero(length == L)
            rows = np.lib.stride_tricks.sliding_window_view(buf, int(L))[cand[sel]]
            stored = rows[:, -2].astype(np.uint16) | (rows[:, -1].astype(np.uint16) << 8)
            good[sel] = crc16_rows(rows[:, 2:-2]) == stored
        rejected = int(cand.size - good.sum())
        pos, count, length, mask, ftype = (a[good] for a in (cand, count, length, mask, ftype))
        ends = pos + length
        if pos.size > 1 and np.any(pos[1:] < ends[:-1]):  # overlapping frames: keep the first
            keep = np.zeros(pos.size, dtype=bool)
            last_end = -1
            for i, (p, e) in enumerate(zip(pos.tolist(), ends.tolist(), strict=True)):
                if p >= last_end:
                    keep[i] = True
                    last_end = e
            pos, count, length, mask, ftype, ends = (a[keep] for a in (pos, count, length, mask, ftype, ends))
        if self.mask is None and mask.size:
            self.mask = int(mask[0])
            same = mask == self.mask
            pos, count, length, ftype, ends = (a[same] for a in (pos, count, length, ftype, ends))
            rejected += int((~same).sum())
        last_end = int(ends[-1]) if ends.size else 0
        later = incomplete_pos[incomplete_pos >= last_end]
        holds = [tail_hold] + ([int(later[0])] if later.size else [])
        keep_from = max(min(holds), last_end)
        garbage = keep_from - int(length.sum())
        return self._frames(buf, pos, count, ftype, rejected, garbage), keep_from

    def _frames(self, buf, pos, count, ftype, rejected, garbage) -> Decoded:
        nch = int(_POPCOUNT[self.mask]) if self.mask else 1
        seq32 = (buf[pos + 3].astype(np.int64) | (buf[pos + 4].astype(np.int64) << 8)
                 | (buf[pos + 5].astype(np.int64) << 16) | (buf[pos + 6].astype(np.int64) << 24))
        periods = np.zeros(pos.size, dtype=np.uint64)
        for k in range(8):
            periods |= buf[pos + 7 + k].astype(np.uint64) << np.uint64(8 * k)
        out = Decoded(np.empty((0, nch), np.uint16), np.empty(0, np.int64), np.empty(0, np.int64),
                      rejected=rejected, garbage_bytes=garbage)
        is_end = ftype == TYPE_END
        counts = np.where(is_end, 0, count).astype(np.int64)
        base = self._next
        expected = np.concatenate([[base % _SEQ_MOD], (seq32[:-1] + counts[:-1]) % _SEQ_MOD])
        delta = (seq32 - expected) % _SEQ_MOD
        if np.all(delta < _SEQ_MOD // 2):  # the usual case: every frame at or after the last
            step = delta + counts
            absolute = base + np.concatenate([[0], np.cumsum(step)[:-1]]) + delta
            keep = np.ones(pos.size, dtype=bool)
            if pos.size:
                self._next = int(absolute[-1] + counts[-1])
        else:  # a stale or repeated frame somewhere: walk them in order
            absolute = np.zeros(pos.size, dtype=np.int64)
            keep = np.zeros(pos.size, dtype=bool)
            for i in range(pos.size):
                d = (int(seq32[i]) - self._next % _SEQ_MOD) % _SEQ_MOD
                if d >= _SEQ_MOD // 2:
                    continue
                absolute[i] = self._next + d
                delta[i] = d
                keep[i] = True
                self._next = int(absolute[i]) + int(counts[i])
            out.rejected += int((~keep).sum())
        for i in np.flatnonzero(keep & (delta > 0)).tolist():
            out.lost += int(delta[i])
            out.gaps.append((int(absolute[i] - delta[i]), int(delta[i])))
        ends_here = np.flatnonzero(keep & is_end)
        if ends_here.size:
            out.end_total = self.end_total = int(absolute[ends_here[-1]])
        data = keep & ~is_end
        if data.any():
            out.frame_seq = absolute[data]
            out.frame_count = counts[data]
            out.periods_ps = tuple(int(p) for p in np.unique(periods[data]))
            out.samples = _gather_payloads(buf, pos[data], counts[data] * nch).reshape(-1, nch)
        return out


def _gather_payloads(buf: np.ndarray, starts: np.ndarray, nsamples: np.ndarray) -> np.ndarray:
    """Concatenate the uint16 payloads of frames at ``starts``, one gather per run of equal sizes."""
    out = np.empty(int(nsamples.sum()), dtype=np.uint16)
    breaks = np.flatnonzero(np.diff(nsamples)) + 1
    bounds = np.concatenate([[0], breaks, [nsamples.size]])
    off = 0
    for a, b in zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True):
        m = int(nsamples[a])
        rows = np.lib.stride_tricks.sliding_window_view(buf, 2 * m)[starts[a:b] + HEADER_SIZE]
        out[off:off + (b - a) * m] = np.ascontiguousarray(rows).view("<u2").ravel()
        off += (b - a) * m
    return out
