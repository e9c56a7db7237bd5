"""IEC 60063 preferred number series (E6 … E96) and the nearest preferred value.

E6, E12 and E24 are listed as the standard prints them: several E24 values (2.7, 3.0, 3.3,
3.6, 3.9, 4.3, 4.7, 5.1, 8.2, 9.1) differ from 10^(i/24) rounded to two figures. E48 and E96
are 10^(i/n) rounded to three significant figures (docs/references.md).
"""

from __future__ import annotations

import math

E24: tuple[float, ...] = (
    1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
    3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
)
E12: tuple[float, ...] = E24[::2]
E6: tuple[float, ...] = E24[::4]


def _geometric(n: int) -> tuple[float, ...]:
    return tuple(float(f"{10 ** (i / n):.3g}") for i in range(n))


E96: tuple[float, ...] = _geometric(96)
E48: tuple[float, ...] = _geometric(48)

SERIES: dict[str, tuple[float, ...]] = {"E6": E6, "E12": E12, "E24": E24, "E48": E48, "E96": E96}

#: the series a part of a given ± tolerance (percent) is normally chosen from.
_SERIES_FOR_TOLERANCE = ((1.0, "E96"), (2.0, "E48"), (5.0, "E24"), (10.0, "E12"), (20.0, "E6"))


def series(name: str) -> tuple[float, ...]:
    """The mantissas (1 ≤ m < 10) of series ``name`` (``"E24"``); raises KeyError if unknown."""
    return SERIES[name.upper()]


def series_for_tolerance(percent: float) -> str:
    """The series matching a part tolerance: ±1 % -> E96, ±2 % -> E48, ±5 % -> E24, ±10 % -> E12,
    ±20 % -> E6 (common practice, from memory); finer than 1 % -> E96, coarser than 20 % -> E6."""
    for limit, name in _SERIES_FOR_TOLERANCE:
        if percent <= limit + 1e-9:
            return name
    return "E6"


def _decade(value: float) -> tuple[float, int]:
    if not (value > 0 and math.isfinite(value)):
        raise ValueError(f"preferred values are positive and finite, got {value!r}")
    exp = math.floor(math.log10(value))
    mant = value / 10**exp
    if mant >= 10 - 1e-9:
        mant /= 10
        exp += 1
    return mant, exp


def is_preferred(value: float, name: str = "E24", *, rel_tol: float = 1e-6) -> bool:
    """Whether ``value`` (any decade) is a member of series ``name``."""
    mant, _ = _decade(value)
    return any(math.isclose(mant, m, rel_tol=rel_tol) for m in (*series(name), 10.0))


def nearest_preferred(value: float, name: str = "E24") -> float:
    """The member of series ``name`` nearest to ``value`` on a logarithmic scale."""
    mant, exp = _decade(value)
    candidates = [*series(name), 10.0]
    best = min(candidates, key=lambda m: abs(math.log(mant / m)))
    return float(f"{best * 10**exp:.6g}")
