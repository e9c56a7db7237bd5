"""A live picture of a capture while it records: bounded in size, limited in rate, in volts.

A recorder hands the samples that arrived to a :class:`PreviewBuilder`, which keeps per picture
column the least and the greatest sample (so a single-sample spike stays visible however many
samples share its column) over the whole length asked for, plus the newest samples as they
are. Memory and the size of every :class:`CapturePreview` are fixed by the number of columns
and of newest samples, whatever the length or the rate of the capture. Previews are made at
most every :data:`PREVIEW_INTERVAL` s of wall time; between two, samples are only counted,
never queued: a fast stream or a slow viewer costs the capture nothing.

Who wants previews passes a progress callback that also has a ``preview(preview)`` method
(:class:`PreviewingProgress`); a plain progress callback gets fractions only, and the recorder
then builds no preview at all.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol, runtime_checkable

import numpy as np

#: columns of the picture of the whole capture (each a least/greatest pair)
PREVIEW_COLUMNS = 800
#: newest samples shown as they are (the waveform's shape)
RECENT_SAMPLES = 400
#: least wall time between two previews, s (at most 10 previews a second)
PREVIEW_INTERVAL = 0.1


@dataclass(frozen=True)
class CapturePreview:
    """What a capture being taken looks like so far (values in volts, NaN: no sample).

    Column ``c`` of :attr:`lo`/:attr:`hi` covers the samples ``i`` of the capture asked for
    with ``i * columns // expected == c``; columns not reached yet are NaN.
    """

    channel: str
    sample_rate: float  # Hz
    received: int  # samples arrived so far
    expected: int  # samples asked for
    lo: tuple[float, ...]  # least sample per column, V
    hi: tuple[float, ...]  # greatest sample per column, V
    recent: tuple[float, ...]  # the newest samples, V
    recent_start: int  # index of recent[0] in the capture

    @property
    def columns(self) -> int:
        return len(self.lo)

    @property
    def fraction(self) -> float:
        return min(1.0, self.received / self.expected)

    def to_dict(self) -> dict[str, Any]:
        """JSON-able (NaN as None), with the fields the page draws a finished capture from."""

        every = np.array((*self.lo, *self.hi, *self.recent), dtype=np.float64)
        seen = every[np.isfinite(every)]
        top = float(np.abs(seen).max()) if seen.size else 0.0
        # five significant digits of the largest value: far finer than a picture can show
        every = np.round(every, max(0, 5 - math.ceil(math.log10(top))) if top > 0 else 0)
        values = [None if v != v else v for v in every.tolist()]  # NaN (no sample) as null
        c = len(self.lo)
        return {"channel": self.channel, "rate": self.sample_rate, "received": self.received,
                "expected": self.expected, "n": self.received, "duration": self.expected / self.sample_rate,
                "lo": values[:c], "hi": values[c:2 * c], "detail": values[2 * c:],
                "vmin": float(seen.min()) if seen.size else 0.0, "vmax": float(seen.max()) if seen.size else 0.0,
                "detail_start": self.recent_start / self.sample_rate}


class PreviewBuilder:
    """Builds :class:`CapturePreview` s of one capture of ``expected`` samples at ``sample_rate``.

    Samples are given in the recorder's own units (ADC codes, volts); ``volts = gain * x +
    offset``. ``now`` is the wall clock the rate limit is measured with.
    """

    def __init__(self, channel: str, sample_rate: float, expected: int, *, gain: float = 1.0,
                 offset: float = 0.0, columns: int = PREVIEW_COLUMNS, recent: int = RECENT_SAMPLES,
                 interval: float = PREVIEW_INTERVAL, now: Callable[[], float] = time.monotonic):
        if int(expected) < 1 or int(columns) < 1 or int(recent) < 0:
            raise ValueError(f"a preview needs expected >= 1, columns >= 1 and recent >= 0 "
                             f"(got {expected}, {columns}, {recent})")
        if not (math.isfinite(sample_rate) and sample_rate > 0) or not interval >= 0:
            raise ValueError(f"a preview needs a sample rate > 0 Hz and an interval >= 0 s "
                             f"(got {sample_rate!r}, {interval!r})")
        self.channel = channel
        self.sample_rate = float(sample_rate)
        self.expected = int(expected)
        self.gain, self.offset = float(gain), float(offset)
        self.columns = min(int(columns), self.expected)
        self.recent = int(recent)
        self.interval = float(interval)
        self._now = now
        self.received = 0
        self._lo = np.full(self.columns, np.nan)
        self._hi = np.full(self.columns, np.nan)
        self._newest = np.empty(0)
        self._last: float | None = None  # wall time of the last preview taken

    def add(self, samples: Any) -> None:
        """The next samples of the capture, in order (NaN: a sample that could not be read)."""
        x = np.asarray(samples, dtype=np.float64).ravel()
        k = int(x.size)
        if k == 0:
            return
        start, e, c = self.received, self.expected, self.columns
        self.received += k
        stop = min(start + k, e)  # samples beyond the length asked for are not on the axis
        if start < stop:
            first, last = start * c // e, (stop - 1) * c // e
            cols = np.arange(first, last + 1, dtype=np.int64)
            # first sample index of each column touched, relative to this chunk
            begins = np.maximum((cols * e + c - 1) // c, start) - start
            part = x[: stop - start]
            self._lo[cols] = np.fmin(self._lo[cols], np.fmin.reduceat(part, begins))
            self._hi[cols] = np.fmax(self._hi[cols], np.fmax.reduceat(part, begins))
        if self.recent:
            self._newest = np.concatenate((self._newest, x[-self.recent:]))[-self.recent:]

    def due(self) -> bool:
        """Has the interval passed since the last preview (or was none taken yet)?"""
        return self._last is None or self._now() - self._last >= self.interval

    def take(self) -> CapturePreview:
        """The preview now (the interval starts again)."""
        self._last = self._now()
        lo = self.gain * self._lo + self.offset
        hi = self.gain * self._hi + self.offset
        if self.gain < 0:
            lo, hi = hi, lo
        return CapturePreview(
            channel=self.channel, sample_rate=self.sample_rate, received=self.received,
            expected=self.expected, lo=tuple(lo.tolist()), hi=tuple(hi.tolist()),
            recent=tuple((self.gain * self._newest + self.offset).tolist()),
            recent_start=self.received - int(self._newest.size))

    def poll(self) -> CapturePreview | None:
        """A preview when one is due, else None (the samples stay counted for the next)."""
        return self.take() if self.due() else None


@runtime_checkable
class PreviewingProgress(Protocol):
    """A progress callback that also takes previews of the capture being taken."""

    def __call__(self, fraction: float, text: str, /) -> None: ...

    def preview(self, preview: CapturePreview) -> None: ...


def preview_sink(progress: object) -> Callable[[CapturePreview], None] | None:
    """Where a recorder sends previews: the progress callback's ``preview``, or None."""
    return progress.preview if isinstance(progress, PreviewingProgress) else None


def whole_preview(channel: str, sample_rate: float, samples: Any, expected: int | None = None
                  ) -> CapturePreview:
    """The preview of samples a recorder hands over all at once (a digitizer's record)."""
    x = np.asarray(samples, dtype=np.float64).ravel()
    builder = PreviewBuilder(channel, sample_rate, max(1, expected or int(x.size)))
    builder.add(x)
    return builder.take()
