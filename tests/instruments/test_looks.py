"""The adaptive capture's look feeder: decisions off the reading thread, skipped looks, stop."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from benchgate.analysis.capture import Capture
from benchgate.instruments._looks import Looks


def _build(k):
    return Capture(np.zeros(k), 1000.0)


def test_stops_when_a_decision_says_so_and_skips_looks_passed_meanwhile():
    release = threading.Event()
    seen = []

    def decide(cap):
        seen.append(cap.n)
        release.wait(10)  # deadline, not a sleep: the test sets it below
        return cap.n >= 300

    looks = Looks([100, 200, 300, 400], _build, decide)
    try:
        assert looks(150) is False  # look at 100 handed over; its decision is still running
        assert looks(350) is False  # 200 and 300 passed meanwhile: nothing new is asked
        release.set()
        looks._asked[0].result(timeout=10)
        assert looks(360) is False  # 100 decided "go on"; the next look asked is 300 (200 skipped)
        looks._asked[0].result(timeout=10)
        assert looks(370) is True and looks.stopped.n == 300
        assert seen == [100, 300]
    finally:
        release.set()
        looks.close()


def test_a_failing_decision_is_raised_on_the_reading_thread():
    def decide(cap):
        raise ValueError("analysis broke")

    looks = Looks([10], _build, decide)
    try:
        assert looks(10) is False
        looks._asked[0].exception(timeout=10)
        with pytest.raises(ValueError, match="analysis broke"):
            looks(11)
    finally:
        looks.close()
