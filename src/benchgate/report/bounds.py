"""What values a measured quantity can physically take, for drawing axes that make sense.

A frequency, an amplitude, an rms voltage, a distortion ratio or a start-up time cannot be
negative; a duty cycle or an envelope dip lies between 0 and 100 %. Quantities in decibels, DC
levels, drifts and currents can take either sign. Plots clip their axes to these bounds (a
histogram padded below zero would suggest values nobody measured), but only when the data
themselves respect them: a stored value outside the physical range is drawn, not hidden.
"""

from __future__ import annotations

import math

#: measurement or reading name -> (lowest, highest) physically possible value, in SI units
#: (per cent for "%"); None where the quantity is unbounded on that side.
PHYSICAL_BOUNDS: dict[str, tuple[float | None, float | None]] = {
    "frequency": (0.0, None),
    "amplitude": (0.0, None),
    "vpp": (0.0, None),
    "rms": (0.0, None),
    "ac_voltage": (0.0, None),
    "thd": (0.0, None),
    "thd_n": (0.0, None),
    "startup_time": (0.0, None),
    "duty_cycle": (0.0, 100.0),
    "amplitude_dip": (0.0, 100.0),
}
#: by unit, for names not in the table: no negative frequencies or durations.
_UNIT_BOUNDS: dict[str, tuple[float | None, float | None]] = {"Hz": (0.0, None), "s": (0.0, None)}


def physical_bounds(name: str, unit: str = "") -> tuple[float | None, float | None]:
    """``(low, high)`` physical bounds of quantity ``name`` measured in ``unit`` (None: unbounded)."""
    if name in PHYSICAL_BOUNDS:
        return PHYSICAL_BOUNDS[name]
    return _UNIT_BOUNDS.get(unit, (None, None))


def clip_axis(lo: float, hi: float, name: str, unit: str, data_min: float, data_max: float
              ) -> tuple[float, float]:
    """The axis range ``lo … hi`` clipped to the physical bounds, where the data allow it."""
    floor, ceiling = physical_bounds(name, unit)
    if floor is not None and lo < floor < hi and math.isfinite(data_min) and data_min >= floor:
        lo = floor
    if ceiling is not None and lo < ceiling < hi and math.isfinite(data_max) and data_max <= ceiling:
        hi = ceiling
    return lo, hi
