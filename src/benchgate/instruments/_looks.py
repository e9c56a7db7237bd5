"""Handing a growing capture to an adaptive capture step's ``decide`` while capturing goes on.

The reader calls a :class:`Looks` after every chunk of data. When the capture reaches the next
look length, the capture so far (built by the driver with every check a finished capture gets)
goes to ``decide`` on a worker thread, so the reader never stalls (a stalled reader would also
fail the arrival-rate check). When a decision comes back True the reader stops, and
:attr:`stopped` holds the capture decided on. A look passed while the previous one is still
being decided is skipped (its share of the error budget stays unspent;
``benchgate.judge.sequential``).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor

from benchgate.analysis.capture import Capture


class Looks:
    """Looks at sample counts ``at``; ``build(k)`` makes the capture of the first ``k`` samples."""

    def __init__(self, at: Sequence[int], build: Callable[[int], Capture | None],
                 decide: Callable[[Capture], bool]):
        self.pending = list(at)
        self.build = build
        self.decide = decide
        self.stopped: Capture | None = None
        self._asked: tuple[Future, Capture] | None = None
        self._worker = ThreadPoolExecutor(1, thread_name_prefix="adc-look")

    def __call__(self, received: int) -> bool:
        """After ``received`` samples: True when the capture should stop now. An exception
        raised by ``decide`` is raised here."""
        if self._asked is not None and self._asked[0].done():
            fut, capture = self._asked
            self._asked = None
            if fut.result():
                self.stopped = capture
                return True
        if self._asked is not None or not self.pending or received < self.pending[0]:
            return False
        while len(self.pending) > 1 and received >= self.pending[1]:
            self.pending.pop(0)
        capture = self.build(self.pending.pop(0))
        if capture is not None:
            self._asked = (self._worker.submit(self.decide, capture), capture)
        return False

    def close(self) -> None:
        """Wait for a decision still running and free the worker."""
        self._worker.shutdown(wait=True)
