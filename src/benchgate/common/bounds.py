"""What values each measurement and reading can physically take, for refusing impossible windows.

A window that no value of its quantity could ever fall in (``thd: {max: -5 %}``, a duty cycle
of at least 150 %, a frequency of at most 0 Hz) is a plan error, not a check that always fails.
Names missing here are unbounded (a DC offset, a level in dB, a drift can take any sign).
"""

from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True)
class Bounds:
    """The closed (or, with ``low_open``, left-open) range of possible values, in SI units."""

    low: float = -math.inf
    high: float = math.inf
    low_open: bool = False
    why: str = ""

    def admits(self, lo: float | None, hi: float | None) -> bool:
        """Whether some possible value lies in the window ``lo … hi`` (None: open side)."""
        a = self.low if lo is None else max(lo, self.low)
        b = self.high if hi is None else min(hi, self.high)
        if a > b:
            return False
        return not (a == b and self.low_open and a == self.low)

    def describe(self, unit: str) -> str:
        if self.low_open:
            return f"above {self.low:g} {unit}"
        if math.isinf(self.high):
            return f"at least {self.low:g} {unit}"
        return f"from {self.low:g} to {self.high:g} {unit}"


_POSITIVE = Bounds(0.0, low_open=True, why="a frequency is above zero")
_NON_NEGATIVE = Bounds(0.0, why="it cannot be negative")
_PERCENT_OF_WHOLE = Bounds(0.0, 100.0, why="it is a part of a whole")

#: measurement or reading name -> possible values. THD and THD+N are ratios to the
#: fundamental and can exceed 100 %; levels in dB and ENOB can be negative.
PHYSICAL_BOUNDS: dict[str, Bounds] = {
    "frequency": _POSITIVE,
    "amplitude": _NON_NEGATIVE,
    "vpp": _NON_NEGATIVE,
    "rms": _NON_NEGATIVE,
    "thd": _NON_NEGATIVE,
    "thd_n": _NON_NEGATIVE,
    "startup_time": _NON_NEGATIVE,
    "duty_cycle": _PERCENT_OF_WHOLE,
    "amplitude_dip": _PERCENT_OF_WHOLE,
    "ac_voltage": _NON_NEGATIVE,
}

UNBOUNDED = Bounds()


def bounds_of(name: str) -> Bounds:
    """The possible values of measurement or reading ``name`` (unbounded when not listed)."""
    return PHYSICAL_BOUNDS.get(name, UNBOUNDED)
