"""Station-file options a driver declares: the key, its type, its default, and a line of help.

A driver class lists its options (:meth:`~benchgate.instruments.base.DriverClass.station_options`),
checks what depends on several of them or on the driver itself (``check_options``) and fills
in its defaults (``complete_options``). The station loader asks the driver through the
registry and reads each value by its declared kind (a quantity with its unit, a fraction, a
choice …), so a misspelt key (``reest: true``) or a value of the wrong type is refused with the
station file's line and column, before any instrument is touched.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

#: bool, text, whole number, one of ``choices``, a quantity in ``unit`` (SI after parsing), a
#: plain number, a fraction (``0.1 %`` or ``0.001``), a mapping, a list of distinct names, a
#: list or a mapping
Kind = Literal["bool", "text", "integer", "choice", "quantity", "number", "fraction", "mapping", "names",
               "list_or_mapping"]

_NO_DEFAULT = object()


@dataclass(frozen=True)
class OptionSpec:
    """One option of a driver.

    ``minimum``/``maximum`` bound numbers (``maximum`` excluded for a fraction), ``positive``
    asks for > 0, ``choices`` lists the values of a choice; ``default`` is what the driver
    uses when the station does not give the key (none: the driver decides in its own code).
    """

    kind: Kind
    help: str
    unit: str | None = None
    positive: bool = False
    minimum: float | None = None
    maximum: float | None = None
    choices: tuple[str, ...] = ()
    default: Any = _NO_DEFAULT

    @property
    def has_default(self) -> bool:
        return self.default is not _NO_DEFAULT


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else f"{x:g}"


def check_value(key: str, spec: OptionSpec, value: Any) -> str | None:
    """The problem with ``value`` (already read: units parsed to SI) for option ``key``, or None."""
    kind = spec.kind
    if kind == "bool":
        return None if isinstance(value, bool) else f"'{key}' must be true or false, got {value!r}"
    if kind == "text":
        return None if isinstance(value, str) and value.strip() else f"'{key}' must be a non-empty text"
    if kind == "choice":
        if value in spec.choices:
            return None
        return f"'{key}' must be " + " or ".join(repr(c) for c in spec.choices) + f", got {value!r}"
    if kind == "integer":
        lo, hi = spec.minimum, spec.maximum
        ok = isinstance(value, int) and not isinstance(value, bool) and (lo is None or value >= lo) and (
            hi is None or value <= hi)
        if ok:
            return None
        span = f" from {_num(lo)} to {_num(hi)}" if lo is not None and hi is not None else ""
        return f"'{key}' must be a whole number{span}, got {value!r}"
    if kind in ("quantity", "number", "fraction"):
        unit = f" in {spec.unit}" if spec.unit else ""
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            return f"'{key}' must be a number{unit}, got {value!r}"
        if not math.isfinite(value):
            return f"'{key}' must be a finite number{unit}, got {value!r}"
        if kind == "fraction":
            if not 0 <= value < (spec.maximum if spec.maximum is not None else 1.0):
                return f"'{key}' must be a fraction from 0 to below {_num(spec.maximum or 1.0)}, got {value!r}"
            return None
        if spec.positive and not value > 0:
            return f"'{key}' must be greater than zero, got {value!r}"
        if spec.minimum is not None and value < spec.minimum:
            return f"'{key}' must be at least {_num(spec.minimum)}, got {value!r}"
        if spec.maximum is not None and value > spec.maximum:
            return f"'{key}' must be at most {_num(spec.maximum)}, got {value!r}"
        return None
    if kind == "mapping":
        return None if isinstance(value, Mapping) else f"'{key}' must be a mapping"
    if kind == "names":
        names = list(value) if isinstance(value, (list, tuple)) else None
        if not names or not all(isinstance(c, str) and c for c in names) or len(set(names)) != len(names):
            return f"'{key}' must be a list of distinct channel names, e.g. [out, rail]"
        return None
    if kind == "list_or_mapping":
        return None if isinstance(value, (Mapping, list, tuple)) else f"'{key}' must be a list or a mapping"
    raise ValueError(f"unknown option kind {kind!r}")


def check_all(specs: Mapping[str, OptionSpec], options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
    """Unknown keys and values of the wrong kind, as (key path, message) pairs."""
    problems: list[tuple[tuple[str, ...], str]] = []
    for key, value in options.items():
        spec = specs.get(key)
        if spec is None:
            problems.append(((key,), f"unknown key {key!r} (expected: {', '.join(sorted(specs))})"))
            continue
        msg = check_value(key, spec, value)
        if msg:
            problems.append(((key,), msg))
    return problems


def with_defaults(specs: Mapping[str, OptionSpec], options: Mapping[str, Any]) -> dict[str, Any]:
    """``options`` with every declared default filled in for keys not given."""
    out = {k: s.default for k, s in specs.items() if s.has_default}
    out.update(options)
    return out
