"""How a window was derived, in engineering words for the reports.

A derived window carries a free-form ``details`` mapping (from :mod:`benchgate.plan.derive`):
component values, tolerance corners, Monte Carlo percentiles, flags. :func:`derivation_rows`
turns it into ``(label, text)`` rows a reader understands: ``10 nF ±10 %`` instead of
``nominal 1e-08; unit F``, ``99.865th percentile`` instead of ``p99_865``, ``no`` instead of
Python's ``False``. Unknown keys are still shown (label from the key, value formatted by type).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from typing import Any

from benchgate.units.format import format_quantity

#: readable labels for the keys the derivation writes; other keys fall back to the key's words.
LABELS = {
    "topology": "circuit",
    "options": "circuit options",
    "formula": "formula",
    "parts": "parts",
    "corners": "tolerance corners evaluated",
    "worst_case": "worst case over the corners",
    "low_corner": "parts at the lowest corner",
    "high_corner": "parts at the highest corner",
    "margin": "margin added",
    "gain_needed": "amplifier gain needed",
    "monte_carlo": "Monte Carlo spread",
    "draws": "draws",
    "seed": "seed",
    "distribution": "distribution",
    "mean": "mean",
    "std": "standard deviation",
    "min": "smallest",
    "max": "largest",
    "yield": "share inside the window",
    "yield_u": "standard uncertainty of that share",
    "widened_by_mc": "window widened by the Monte Carlo spread",
    "nominal": "nominal",
    "worst": "worst case",
}
#: keys whose numbers are in the window's own unit.
_IN_UNIT = {"mean", "std", "min", "max", "worst_case", "nominal_value", "low", "high"}
#: keys whose numbers are fractions shown as per cent.
_FRACTION = {"yield", "yield_u"}
_PERCENTILE = re.compile(r"^(?:(?P<what>.+)_)?p(?P<int>\d+)(?:_(?P<frac>\d+))?$")


def trim(text: str) -> str:
    """``6.800 kΩ`` → ``6.8 kΩ``, ``10.00 nF`` → ``10 nF`` (trailing zeros of a mantissa)."""
    return re.sub(r"(\d)\.(\d*?)0+(?=\D|$)", lambda m: m.group(1) + ("." + m.group(2) if m.group(2) else ""),
                  text, count=1)


def number(x: float, digits: int = 4) -> str:
    """A plain number for reading: ``34.11``, ``2.5e-07``; never ``nan`` or ``inf``."""
    if not math.isfinite(x):
        return "not a finite number"
    if x == int(x) and abs(x) < 1e9:
        return str(int(x))
    return f"{x:.{digits}g}"


def part_text(part: Mapping[str, Any]) -> str:
    """``{"nominal": 1e-08, "unit": "F", "tolerance": "±10 %"}`` → ``10 nF ±10 %``."""
    nominal = part.get("nominal")
    unit = str(part.get("unit", ""))
    if isinstance(nominal, (int, float)) and not isinstance(nominal, bool) and math.isfinite(nominal):
        text = trim(format_quantity(float(nominal), unit))
    else:
        text = f"{value_text('nominal', nominal, unit)} {unit}".strip()
    tol = part.get("tolerance")
    return f"{text} {tol}" if tol else text


def _label(key: str) -> str:
    if key in LABELS:
        return LABELS[key]
    m = _PERCENTILE.match(key)
    if m:
        pct = m.group("int") + (f".{m.group('frac')}" if m.group("frac") else "")
        what = m.group("what")
        head = f"{LABELS.get(what, what.replace('_', ' '))}, " if what else ""
        return f"{head}{pct}th percentile"
    return key.replace("_", " ")


def _is_part(v: Any) -> bool:
    return isinstance(v, Mapping) and "nominal" in v and "unit" in v


def _corner_text(corner: Mapping[str, Any]) -> str:
    ups = [str(k) for k, v in corner.items() if v == "+"]
    downs = [str(k) for k, v in corner.items() if v == "-"]
    parts = []
    if ups:
        parts.append(f"{', '.join(ups)} at their upper tolerance")
    if downs:
        parts.append(f"{', '.join(downs)} at their lower tolerance")
    return "; ".join(parts) or "—"


def value_text(key: str, value: Any, unit: str) -> str:
    """One detail value as text; ``unit`` is the window's unit (for means, limits and spreads)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            return "not a finite number"
        if key in _FRACTION:
            return f"{100.0 * x:.4g} %"
        if key in _IN_UNIT or _PERCENTILE.match(key) and not key.startswith("gain"):
            return format_quantity(x, unit)
        return number(x)
    if _is_part(value):
        return part_text(value)
    if isinstance(value, Mapping):
        if key.endswith("_corner"):
            return _corner_text(value)
        return "; ".join(f"{_label(str(k))} {value_text(str(k), v, unit)}" for k, v in value.items()
                         if v is not None)
    if isinstance(value, (list, tuple)):
        if key in _IN_UNIT and len(value) == 2:
            lo, hi = (value_text(key, v, unit) for v in value)
            return f"{lo} … {hi}"
        return ", ".join(value_text(key, v, unit) for v in value)
    return str(value)


def derivation_rows(details: Mapping[str, Any], unit: str, *, limit: int = 40) -> list[tuple[str, str]]:
    """The rows of the derivation box: ``(label, text)``, parts one per row.

    Parameters
    ----------
    details : mapping
        ``Window.details`` as stored in the record.
    unit : str
        The window's unit, for values in the measured quantity (Monte Carlo mean, percentiles…).
    limit : int
        At most this many rows (a hostile plan cannot blow the report up).
    """
    rows: list[tuple[str, str]] = []
    for key, value in details.items():
        key = str(key)
        if key == "parts" and isinstance(value, Mapping):
            rows.extend((f"part {name}", part_text(p) if _is_part(p) else value_text("part", p, unit))
                        for name, p in value.items())
        elif key == "monte_carlo" and isinstance(value, Mapping):
            how = [f"{value_text('draws', value[k], unit)} draws" if k == "draws" else
                   f"{value_text(k, value[k], unit)}" if k == "distribution" else
                   f"seed {value_text(k, value[k], unit)}"
                   for k in ("draws", "distribution", "seed") if value.get(k) is not None]
            rows.append((_label(key), ", ".join(how) or "—"))
            rows.extend((f"Monte Carlo {_label(str(k))}", value_text(str(k), v, unit))
                        for k, v in value.items()
                        if v is not None and k not in ("draws", "distribution", "seed"))
        else:
            rows.append((_label(key), value_text(key, value, unit)))
    if len(rows) > limit:
        rows = rows[: limit - 1] + [("…", f"{len(rows) - limit + 1} more entries in the JSON report")]
    return rows
