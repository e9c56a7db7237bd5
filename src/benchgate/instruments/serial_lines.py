"""Plain-lines mode of the serial ADC protocol: one sample per text line.

Two line forms (``docs/serial-protocol.md``): ``<code>`` or ``<microseconds>,<code>``, each
ended by LF (CR LF accepted). ``END <n>`` closes a capture. A line that cannot be read, or
a code outside 0 .. 2**bits - 1, is counted as one lost sample; with timestamps, a step of
more than 1.5 sample periods counts the missing samples. Lines mode has no checksum: a
corrupted digit that still reads as a valid code cannot be detected (use the framed mode when
that matters).
"""

from __future__ import annotations

import numpy as np


class LinesDecoder:
    """Streaming parser for lines mode; ``feed`` returns the codes of the complete lines."""

    def __init__(self, bits: int, *, timestamps: bool = False, skip_first: bool = False):
        self.bits = int(bits)
        self.timestamps = timestamps
        self._skip = skip_first  # joining a running stream: the first line may be cut
        self._tail = b""
        self.bad_lines = 0
        self.end_total: int | None = None
        self.next_index = 0  # samples seen so far, lost ones included
        self._last_us: int | None = None
        self._period_us: float | None = None
        self.lost = 0
        self.gaps: list[tuple[int, int]] = []
        self.first_us: int | None = None
        self.last_us: int | None = None
        self._first_index = self._last_index = 0

    def feed(self, data: bytes) -> np.ndarray:
        text = self._tail + data
        if self._skip:
            nl = text.find(b"\n")
            if nl < 0:
                self._tail = b""
                return np.empty((0, 1), dtype=np.uint16)
            text, self._skip = text[nl + 1:], False
        lines = text.split(b"\n")
        self._tail = lines.pop()
        codes: list[int] = []
        for raw in lines:
            line = raw.strip()
            if not line:
                continue
            if line.startswith(b"END"):
                try:
                    self.end_total = int(line[3:].strip() or b"-1")
                except ValueError:
                    self.end_total = -1
                continue
            value = self._parse(line)
            if value is None:
                self.bad_lines += 1
                self.lost += 1
                self.gaps.append((self.next_index, 1))
                self.next_index += 1
                continue
            codes.append(value)
            self.next_index += 1
        return np.asarray(codes, dtype=np.uint16).reshape(-1, 1)

    def _parse(self, line: bytes) -> int | None:
        try:
            if self.timestamps:
                t_text, _, v_text = line.partition(b",")
                t_us, value = int(t_text), int(v_text)
            else:
                t_us, value = None, int(line)
        except ValueError:
            return None
        if not 0 <= value < 2**self.bits:
            return None
        if t_us is not None:
            if self._last_us is not None:
                step = t_us - self._last_us
                if step <= 0:
                    return None  # time going backwards: not a sample we can place
                if self._period_us is None:
                    self._period_us = float(step)
                elif step > 1.5 * self._period_us:
                    missing = round(step / self._period_us) - 1
                    self.lost += missing
                    self.gaps.append((self.next_index, missing))
                    self.next_index += missing
                else:
                    self._period_us += 0.05 * (step - self._period_us)
            if self.first_us is None:
                self.first_us, self._first_index = t_us, self.next_index
            self._last_us = self.last_us = t_us
            self._last_index = self.next_index
        return value

    def timestamp_rate(self) -> float | None:
        """Sample rate from the device's timestamps (first to last, lost samples included), Hz."""
        if self.first_us is None or self.last_us is None or self.last_us <= self.first_us:
            return None
        return (self._last_index - self._first_index) / ((self.last_us - self.first_us) * 1e-6)
