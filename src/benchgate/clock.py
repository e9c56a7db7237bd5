"""Time, injectable: the runner's waits and the understudy bench's pacing share one clock.

``SystemClock`` is real time. ``ScaledClock(speed)`` runs ``speed`` times faster than real
time (an accelerated understudy bench: a 2 s warm-up takes 2/speed s of wall time while the
simulated board sees 2 s pass). ``ManualClock`` only moves when told (unit tests).
"""

from __future__ import annotations

import threading
import time
from typing import Protocol


class Clock(Protocol):
    def monotonic(self) -> float:
        """Seconds of (possibly virtual) time since an arbitrary origin."""

    def sleep(self, seconds: float) -> None:
        """Let ``seconds`` of this clock's time pass."""

    @property
    def speed(self) -> float:
        """How many seconds of this clock pass per second of wall time."""


class SystemClock:
    speed = 1.0

    def monotonic(self) -> float:
        return time.monotonic()

    def sleep(self, seconds: float) -> None:
        if seconds > 0:
            time.sleep(seconds)


class ScaledClock:
    """Virtual time running ``speed`` times faster than the wall clock."""

    def __init__(self, speed: float):
        if not speed > 0:
            raise ValueError(f"clock speed must be > 0, got {speed!r}")
        self.speed = float(speed)
        self._origin = time.monotonic()

    def monotonic(self) -> float:
        return (time.monotonic() - self._origin) * self.speed

    def sleep(self, seconds: float) -> None:
        if seconds > 0:
            time.sleep(seconds / self.speed)


class ManualClock:
    """A clock that advances only through ``sleep`` / ``advance`` (for tests)."""

    speed = float("inf")

    def __init__(self, start: float = 0.0):
        self._now = float(start)
        self._lock = threading.Lock()

    def monotonic(self) -> float:
        with self._lock:
            return self._now

    def sleep(self, seconds: float) -> None:
        self.advance(seconds)

    def advance(self, seconds: float) -> None:
        with self._lock:
            self._now += max(0.0, float(seconds))
