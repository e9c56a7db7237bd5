"""Printing values with SI prefixes (the inverse of parsing, at the edges of the program)."""

from __future__ import annotations

import math

_PREFIXES = [(1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p")]
# Units printed without an SI prefix: they are ratios or already scaled.
_NO_PREFIX = {"%", "dB", "dBc", "bits", "ppm", "", "deg", "V/V"}


def format_quantity(value: float | None, unit: str, digits: int = 4) -> str:
    """Format ``value`` (SI base units) with an SI prefix and ``digits`` significant figures.

    >>> format_quantity(1182.0, "Hz")
    '1.182 kHz'
    >>> format_quantity(0.0004, "Hz")
    '400.0 µHz'
    >>> format_quantity(2.5, "%")
    '2.500 %'
    """
    if value is None:
        return "—"
    if not math.isfinite(value):
        return f"{value} {unit}".strip()
    mag = abs(value)
    if value != 0 and (mag >= 1e15 or mag < 1e-15 or (unit in _NO_PREFIX and not 1e-6 <= mag < 1e9)):
        return f"{value:.{max(digits - 1, 0)}e} {unit}".strip()  # beyond the prefixes: scientific
    if unit in _NO_PREFIX or value == 0:
        return f"{_sig(value, digits)} {unit}".strip()
    for scale, prefix in _PREFIXES:
        if mag >= scale * 0.9995:
            return f"{_sig(value / scale, digits)} {prefix}{unit}"
    scale, prefix = _PREFIXES[-1]
    return f"{_sig(value / scale, digits)} {prefix}{unit}"


def _sig(x: float, digits: int) -> str:
    if x == 0:
        return "0"
    mag = math.floor(math.log10(abs(x)))
    decimals = max(0, digits - 1 - mag)
    return f"{x:.{decimals}f}"


def window_text(low: float | None, high: float | None, unit: str, digits: int = 4) -> str:
    """An acceptance window as text: ``low … high``, ``≥ low`` or ``≤ high`` (SI prefixes).

    A window with neither limit is ``any value``.
    """
    if low is not None and high is not None:
        return f"{format_quantity(low, unit, digits)} … {format_quantity(high, unit, digits)}"
    if low is not None:
        return f"≥ {format_quantity(low, unit, digits)}"
    if high is not None:
        return f"≤ {format_quantity(high, unit, digits)}"
    return "any value"


def value_text(value: float, uncertainty: float | None, unit: str, digits: int = 4,
               u_digits: int | None = None) -> str:
    """``value ± U`` with SI prefixes; just the value when ``uncertainty`` is None.

    ``u_digits`` significant digits for U (default: as many as the value's; GUM, JCGM
    100:2008, 7.2.6, suggests at most two).
    """
    text = format_quantity(value, unit, digits)
    if uncertainty is None:
        return text
    return f"{text} ± {format_quantity(uncertainty, unit, digits if u_digits is None else u_digits)}"


def expected_count_text(x: float | None) -> str:
    """An expected number of events (e.g. false passes in a lot) for people: plain decimals,
    never an exponent; below 0.001 it says so instead of printing a vanishing number."""
    if x is None or not math.isfinite(x):
        return "—"
    if x <= 0.0:
        return "0"
    if x < 0.001:
        return "< 0.001"
    if x < 100.0:
        return f"{x:.3g}" if x >= 0.01 else f"{x:.3f}"
    return f"{x:.0f}"
