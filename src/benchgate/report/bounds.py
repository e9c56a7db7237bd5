"""What values a measured quantity can physically take, for drawing axes that make sense.

A frequency, an amplitude, an rms voltage, a distortion ratio or a start-up time cannot be
negative; a duty cycle or an envelope dip lies between 0 and 100 %. Quantities in decibels, DC
levels, drifts and currents can take either sign. Plots clip their axes to these bounds (a
histogram padded below zero would suggest values nobody measured), but only when the data
themselves respect them: a stored value outside the physical range is drawn, not hidden.
"""

from __future__ import annotations

import math

from benchgate.common.bounds import UNBOUNDED, bounds_of

#: by unit, for names the vocabulary does not bound: no negative frequencies or durations.
_UNIT_BOUNDS: dict[str, tuple[float | None, float | None]] = {"Hz": (0.0, None), "s": (0.0, None)}


def physical_bounds(name: str, unit: str = "") -> tuple[float | None, float | None]:
    """``(low, high)`` physical bounds of quantity ``name`` measured in ``unit`` (None: unbounded).

    One table serves the plan loader (impossible windows) and the plots:
    :data:`benchgate.common.bounds.PHYSICAL_BOUNDS`.
    """
    b = bounds_of(name)
    if b is UNBOUNDED:
        return _UNIT_BOUNDS.get(unit, (None, None))
    return (None if math.isinf(b.low) else b.low, None if math.isinf(b.high) else b.high)


def clip_axis(lo: float, hi: float, name: str, unit: str, data_min: float, data_max: float
              ) -> tuple[float, float]:
    """The axis range ``lo … hi`` clipped to the physical bounds, where the data allow it."""
    floor, ceiling = physical_bounds(name, unit)
    if floor is not None and lo < floor < hi and math.isfinite(data_min) and data_min >= floor:
        lo = floor
    if ceiling is not None and lo < ceiling < hi and math.isfinite(data_max) and data_max <= ceiling:
        hi = ceiling
    return lo, hi
