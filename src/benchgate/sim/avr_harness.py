"""The AVR harness's files and clock: where ``make -C firmware`` put the harness and the firmware
(:func:`find_build`), the layout of the shared clock page (``firmware/harness/link.h``) and
:class:`HarnessClock`, the understudy bench's clock when the reference firmware serves its ADC.
"""

from __future__ import annotations

import mmap
import os
import struct
import threading
import time
from dataclasses import dataclass
from pathlib import Path

from benchgate.errors import SimError

F_AVR = 16_000_000  # the firmware's F_CPU
DEFAULT_BAUD = 2_000_000
BUILD_ENV = "BENCHGATE_FIRMWARE_BUILD"
_PAGE = struct.Struct("<16Q")
(CYCLES_A, CYCLES_B, GENERATION, STATE, DROPPED, STOP, SENT, TRIG_RESET, TRIG_COUNT, TRIG_MIN, TRIG_MAX,
 TRIG_FIRST, TRIG_LAST) = range(13)


@dataclass(frozen=True)
class FirmwareBuild:
    harness: Path
    elf: Path


def build_dir() -> Path:
    """Where ``make -C firmware`` puts its output (``$BENCHGATE_FIRMWARE_BUILD`` overrides)."""
    env = os.environ.get(BUILD_ENV)
    if env:
        return Path(env)
    import benchgate

    return Path(benchgate.__file__).resolve().parent.parent.parent / "firmware" / "build"


def find_build(baud: int = DEFAULT_BAUD) -> FirmwareBuild | None:
    """The built harness and firmware for ``baud``, or None when they have not been built."""
    root = build_dir()
    folder = root if baud == DEFAULT_BAUD else root / f"baud-{baud}"
    harness, elf = root / "avr-harness", folder / "adc328p.elf"
    if harness.is_file() and os.access(harness, os.X_OK) and elf.is_file():
        return FirmwareBuild(harness, elf)
    return None


def require_build(baud: int = DEFAULT_BAUD) -> FirmwareBuild:
    build = find_build(baud)
    if build is None:
        raise SimError(f"the firmware harness is not built (looked in {build_dir()}); run "
                       f"'make -C firmware' (needs gcc-avr, avr-libc and libsimavr-dev)")
    return build


class HarnessClock:
    """Bench time = the AVR's cycles / crystal frequency, read from the harness's clock page.

    :attr:`ceiling` is the speed the harness is paced to; :attr:`speed` is what it achieves,
    over the last second or so of wall time (never above the ceiling), so whoever scales a
    deadline by it (the serial driver's wall-clock backstops) is told the truth;
    :meth:`measured_speed` is the average since start. Once the harness has exited the clock
    goes on at the ceiling from where it stopped, so no wait can hang on a dead harness.
    """

    WINDOW = 1.0  # wall seconds over which speed is measured

    def __init__(self, page: mmap.mmap, crystal_hz: float, speed: float):
        self._page = page
        self.crystal_hz = float(crystal_hz)
        self.ceiling = float(speed) if speed > 0 else 1e6
        self._lock = threading.Lock()
        self._dead_at: tuple[float, float] | None = None  # (bench time, wall time) at exit
        self._wall0: float | None = None
        self._marks: list[tuple[float, float]] = []  # (wall, bench), a few per WINDOW
        self.alive = lambda: True  # the device tells whether the harness process still runs

    @property
    def speed(self) -> float:
        wall, bench = time.monotonic(), self.monotonic()
        with self._lock:
            marks = self._marks
            if not marks or wall - marks[-1][0] >= self.WINDOW / 4:
                marks.append((wall, bench))
                while len(marks) > 2 and wall - marks[1][0] >= self.WINDOW:
                    del marks[0]
            w0, b0 = marks[0]
        if wall - w0 < self.WINDOW / 2 or self._dead_at is not None:
            return self.ceiling
        return max(min((bench - b0) / (wall - w0), self.ceiling), self.ceiling / 100)

    def cycles(self) -> int:
        while True:
            b = struct.unpack_from("<Q", self._page, 8 * CYCLES_B)[0]
            a = struct.unpack_from("<Q", self._page, 8 * CYCLES_A)[0]
            if a == b:
                return a

    def _running(self) -> bool:
        return struct.unpack_from("<Q", self._page, 8 * STATE)[0] == 1 and self.alive()

    def started(self) -> None:
        self._wall0 = time.monotonic()

    def monotonic(self) -> float:
        t = self.cycles() / self.crystal_hz
        if self._wall0 is None or self._running():
            return t
        with self._lock:
            if self._dead_at is None:
                self._dead_at = (t, time.monotonic())
            t0, w0 = self._dead_at
        return t0 + (time.monotonic() - w0) * self.ceiling

    def sleep(self, seconds: float) -> None:
        if not seconds > 0:
            return
        target = self.monotonic() + seconds
        while True:
            left = target - self.monotonic()
            if left <= 0:
                return
            time.sleep(min(0.005, max(left / self.ceiling, 0.0002)))

    def measured_speed(self) -> float | None:
        """Bench seconds per wall second since the harness started (None before)."""
        if self._wall0 is None:
            return None
        wall = time.monotonic() - self._wall0
        return self.monotonic() / wall if wall > 0 else None
