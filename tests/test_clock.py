from __future__ import annotations

import time

import pytest

from benchgate.clock import ManualClock, ScaledClock, SystemClock


def test_manual_clock_moves_only_when_told():
    c = ManualClock(5.0)
    assert c.monotonic() == 5.0
    c.sleep(2.5)
    assert c.monotonic() == 7.5
    c.advance(-1)  # never backwards
    assert c.monotonic() == 7.5


def test_scaled_clock_runs_faster_than_wall_time():
    c = ScaledClock(100.0)
    w0, v0 = time.monotonic(), c.monotonic()
    c.sleep(1.0)  # 10 ms of wall time
    dw, dv = time.monotonic() - w0, c.monotonic() - v0
    assert dv >= 1.0
    assert dw < dv  # virtual time ran ahead of wall time


def test_scaled_clock_rejects_bad_speed():
    with pytest.raises(ValueError, match="speed"):
        ScaledClock(0)


def test_system_clock_is_monotonic():
    c = SystemClock()
    a = c.monotonic()
    c.sleep(0)
    assert c.monotonic() >= a
