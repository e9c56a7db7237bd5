"""Plain-lines mode of the serial ADC protocol: one sample per text line.

Two line forms (``docs/serial-protocol.md``): ``<code>`` or ``<microseconds>,<code>``, each
ended by LF (CR LF accepted); ``END <n>`` closes a capture and says how many samples the
device sent. The decoder keeps every line in order and decides where each sample belongs only
when the capture is over (:meth:`LinesDecoder.result`):

- a line that is not a valid sample (not decimal digits, the wrong number of fields, a code
  outside 0 .. 2**bits - 1) is one **lost** sample at its own index, never merged with a
  neighbour;
- the count of lines is checked against ``END <n>``: more lines than the device sent (a line
  split in two, a repeated line) makes the capture untrustworthy (:attr:`LinesResult.extra`,
  the driver refuses it); fewer is a loss whose place lines without timestamps cannot tell
  (:attr:`LinesResult.unlocated`);
- with timestamps, each sample's index comes from its time stamp, so a dropped line is a
  located gap, and one corrupted time stamp costs that one sample: spikes are found against
  a running median of the time residuals, and the rate is a trimmed least-squares fit of
  time against index over the remaining samples.

What lines mode cannot detect (a corrupted digit that still reads as a valid code, a split
line that forms two valid codes when a line is also dropped and no time stamps say where) is
listed in the protocol document; use the framed mode when that matters.

References
----------
Median filtering to reject isolated outliers before a least-squares fit: J. W. Tukey,
*Exploratory Data Analysis*, Addison-Wesley, 1977 (running medians); the trimmed refit is the
usual iteratively trimmed least squares (common practice).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np

_END = re.compile(rb"END[ \t]+([0-9]+)")
MEDIAN_SPAN = 5  # running median over time residuals: up to two adjacent spikes are rejected
SPIKE_FRACTION = 0.5  # a time stamp this many periods off its neighbours' line is an outlier


@dataclass
class LinesResult:
    """Where every sample of a lines capture belongs, decided at the end of the capture."""

    codes: np.ndarray  # (m, 1) uint16: the accepted samples, in index order
    indices: np.ndarray  # (m,) int64: the index of each accepted sample since START
    slots: int  # sample positions the received lines cover (accepted + lost inside them)
    gaps: list[tuple[int, int]] = field(default_factory=list)  # (index, length) lost, in order
    lost: int = 0
    bad_lines: list[int] = field(default_factory=list)  # indices of lines that were not samples
    time_outliers: list[int] = field(default_factory=list)  # indices whose time stamp was off
    repeats: int = 0  # lines whose time stamp repeated an earlier one (not samples, not lost)
    extra: int = 0  # lines beyond the device's END count (split or repeated lines)
    unlocated: int = 0  # samples the END count says were sent, at places lines cannot tell
    end_total: int | None = None
    rate: float | None = None  # Hz, from the time stamps
    fit: dict = field(default_factory=dict)


class LinesDecoder:
    """Streaming reader for lines mode: ``feed`` bytes in any chunking, then :meth:`result`.

    ``feed`` returns how many sample lines (valid or not) the chunk completed;
    :attr:`next_index` counts them all, for progress and for knowing when ``n`` have come.
    """

    def __init__(self, bits: int, *, timestamps: bool = False, skip_first: bool = False,
                 expect_end: bool = True):
        self.bits = int(bits)
        self.timestamps = timestamps
        self.expect_end = expect_end  # False: a free-running device, which sends no END
        self._skip = skip_first  # joining a running stream: the first line may be cut
        self._tail = b""
        self.codes: list[int] = []  # -1: not a valid sample line
        self.times: list[int] = []  # -1: no usable time stamp
        self.end_total: int | None = None
        self.ended = False  # an END line arrived (its count may be unreadable)

    @property
    def next_index(self) -> int:
        return len(self.codes)

    @property
    def bad_lines(self) -> int:
        return sum(1 for c in self.codes if c < 0)

    def feed(self, data: bytes) -> int:
        text = self._tail + data
        if self._skip:
            nl = text.find(b"\n")
            if nl < 0:
                self._tail = b""
                return 0
            text, self._skip = text[nl + 1:], False
        lines = text.split(b"\n")
        self._tail = lines.pop()
        before = len(self.codes)
        for raw in lines:
            if self.ended:
                break  # nothing after END belongs to the capture
            line = raw.strip(b" \t\r")
            if not line:
                continue  # an empty line holds no sample (a stray LF does not shift anything)
            if line.startswith(b"END"):
                m = _END.fullmatch(line)
                self.end_total = int(m.group(1)) if m else None
                self.ended = True
                continue
            t_us, code = self._parse(line)
            self.codes.append(code)
            self.times.append(t_us)
        return len(self.codes) - before

    def _parse(self, line: bytes) -> tuple[int, int]:
        if self.timestamps:
            fields = line.split(b",")
            if len(fields) != 2 or not (fields[0].isdigit() and fields[1].isdigit()):
                return -1, -1
            t_us, value = int(fields[0]), int(fields[1])
        else:
            if not line.isdigit():
                return -1, -1
            t_us, value = -1, int(line)
        if value >= 2**self.bits:
            return -1, -1
        return t_us, value

    # ------------------------------------------------------------------ the end
    def result(self, n: int, *, complete: bool = True) -> LinesResult:
        """Place every line received on the sample index axis; ``n`` samples were asked for.

        ``complete`` is False for the partial samples of a capture cut short (no tail loss
        is counted then).
        """
        codes = np.asarray(self.codes, dtype=np.int64)
        times = np.asarray(self.times, dtype=np.int64)
        if self.timestamps:
            index, outliers, repeats, fit = _place_by_time(codes, times)
        else:
            index = np.arange(codes.size, dtype=np.int64)
            outliers, repeats, fit = np.zeros(codes.size, dtype=bool), np.zeros(codes.size, dtype=bool), {}
        bad = codes < 0
        accepted = ~bad & ~outliers & ~repeats
        slots = int(index.max()) + 1 if index.size else 0
        res = LinesResult(codes=np.empty((0, 1), np.uint16), indices=np.empty(0, np.int64), slots=slots,
                          end_total=self.end_total, repeats=int(repeats.sum()), fit=fit)
        res.rate = fit.get("rate")
        # the count the lines are checked against: END's, or (END missing or unreadable) the n
        # asked for, which a device with commands sends exactly
        total = self.end_total if self.end_total is not None else (n if self.expect_end and complete else None)
        if total is not None:
            if slots > total:
                res.extra = slots - total
            elif slots < total:
                res.unlocated = total - slots
        acc_idx = index[accepted]
        keep = acc_idx < n
        res.indices = acc_idx[keep]
        res.codes = codes[accepted][keep].astype(np.uint16).reshape(-1, 1)
        res.bad_lines = [int(i) for i in index[bad] if i < n]
        res.time_outliers = [int(i) for i in index[outliers] if i < n]
        # lost: every index below the covered span that holds no accepted sample
        covered = min(slots, n)
        filled = np.zeros(covered, dtype=bool)
        filled[res.indices] = True
        gaps = _runs(~filled)
        end = covered
        if res.unlocated and end < n:  # joined at the end of what arrived, flagged as unlocated
            length = min(res.unlocated, n - end)
            gaps.append((end, length))
            end += length
        if complete and end < n:
            gaps.append((end, n - end))  # the tail never came
        res.gaps = _merge(gaps)
        res.lost = sum(b for _a, b in res.gaps)
        return res


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(start, length) of each run of True in ``mask``."""
    if not mask.any():
        return []
    edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    return [(int(a), int(b - a)) for a, b in zip(starts, stops, strict=True)]


def _merge(gaps: list[tuple[int, int]]) -> list[tuple[int, int]]:
    out: list[tuple[int, int]] = []
    for a, b in sorted(gaps):
        if out and out[-1][0] + out[-1][1] >= a:
            start = out[-1][0]
            out[-1] = (start, max(out[-1][0] + out[-1][1], a + b) - start)
        else:
            out.append((a, b))
    return out


def _running_median(x: np.ndarray, span: int) -> np.ndarray:
    half = span // 2
    if x.size <= half:
        return np.full(x.size, np.median(x)) if x.size else x.astype(np.float64)
    padded = np.concatenate([x[half:0:-1], x, x[-2:-half - 2:-1]])
    return np.median(np.lib.stride_tricks.sliding_window_view(padded, span), axis=1)


def _place_by_time(codes: np.ndarray, times: np.ndarray):
    """Index of every line from its time stamp; outliers and repeats flagged; rate fitted.

    Lines without a usable time stamp (bad lines) take the slot after the line before them.
    Returns (index, outlier mask, repeat mask, fit dict).
    """
    lines = codes.size
    index = np.arange(lines, dtype=np.int64)
    outliers = np.zeros(lines, dtype=bool)
    repeats = np.zeros(lines, dtype=bool)
    valid = np.flatnonzero(codes >= 0)
    if valid.size < 3:
        return index, outliers, repeats, {}
    t = times[valid].astype(np.float64)
    j = valid.astype(np.float64)  # line order (bad lines keep their place)
    # 1. a first period: the median of consecutive steps between neighbouring valid lines
    step = np.diff(t) / np.diff(j)
    positive = step[step > 0]
    if not positive.size:
        return index, outliers, repeats, {}
    period = float(np.median(positive))
    # 2. refine it over the steps that are one period (µs quantisation averages out)
    single = (np.diff(j) == 1) & (np.abs(np.diff(t) - period) < 0.5 * period)
    if single.any():
        period = float(np.diff(t)[single].mean())
    # 3. spikes: time residual against line order, compared with its running median
    resid = t - period * j
    spike = np.abs(resid - _running_median(resid, MEDIAN_SPAN)) > SPIKE_FRACTION * period
    # 4. chain the good lines: each step of k periods (k >= 1) moves the index by k
    good = valid[~spike]
    outliers[valid[spike]] = True
    if good.size < 2:
        return index, outliers, repeats, {}
    idx = np.empty(good.size, dtype=np.int64)
    idx[0] = good[0]  # the lines before the first good one each took one slot
    keep = np.ones(good.size, dtype=bool)
    prev = 0
    for _ in range(2):  # second pass with the period fitted on the first
        prev = 0
        keep[:] = True
        tg = times[good].astype(np.float64)
        for i in range(1, good.size):
            k = round((tg[i] - tg[prev]) / period)
            if k < 1:
                keep[i] = False  # same (or earlier) time as the last sample: a repeat
                continue
            idx[i] = idx[prev] + k
            prev = i
        sel = np.flatnonzero(keep)
        if sel.size >= 2:
            slope, _icpt = np.polyfit(idx[sel].astype(np.float64), tg[sel], 1)
            if slope > 0:
                period = float(slope)
    dropped = good[~keep]
    repeats[dropped] = True
    kept = good[keep]
    index[kept] = idx[keep]
    # lines without a placed time stamp follow the placed line before them
    placed = np.zeros(lines, dtype=bool)
    placed[kept] = True
    last = -1
    for i in range(lines):
        if placed[i]:
            last = int(index[i])
        else:
            last += 1 if not repeats[i] else 0
            index[i] = max(last, 0)
    fit = _fit_rate(idx[keep].astype(np.float64), times[kept].astype(np.float64))
    fit["outliers"] = int(outliers.sum())
    return index, outliers, repeats, fit


def _fit_rate(index: np.ndarray, t_us: np.ndarray) -> dict:
    """Least-squares time against index, refitted once without points beyond 4 robust sigmas."""
    if index.size < 2 or index[-1] == index[0]:
        return {}
    use = np.ones(index.size, dtype=bool)
    slope = icpt = 0.0
    for _ in range(3):
        slope, icpt = np.polyfit(index[use], t_us[use], 1)
        r = t_us - (slope * index + icpt)
        sigma = 1.4826 * float(np.median(np.abs(r[use] - np.median(r[use]))))
        new = np.abs(r) <= max(4.0 * sigma, 1.0)  # 1 µs: the time stamps' own resolution
        if new.sum() < 2 or np.array_equal(new, use):
            break
        use = new
    if not slope > 0:
        return {}
    return {"rate": 1e6 / float(slope), "method": "trimmed least squares, time vs index",
            "points": int(use.sum()), "trimmed": int((~use).sum())}
