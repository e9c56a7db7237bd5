"""Station-file options a driver declares: the key, its type, and a line of help.

A driver class lists its options (:meth:`~benchgate.instruments.base.DriverClass.station_options`)
and checks their values (``check_options``); the station loader asks the driver through the
registry, so a misspelt key (``reest: true``) or a value of the wrong type is refused with the
station file's line and column, before any instrument is touched.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

Kind = Literal["bool", "text", "quantity", "number", "mapping", "list_or_mapping"]


@dataclass(frozen=True)
class OptionSpec:
    """One option: ``kind`` of value; for a quantity its SI ``unit``; ``positive`` for > 0."""

    kind: Kind
    help: str
    unit: str | None = None
    positive: bool = False
    minimum: float | None = None


def check_value(key: str, spec: OptionSpec, value: Any) -> str | None:
    """The problem with ``value`` for option ``key`` (already unit-parsed), or None."""
    if spec.kind == "bool":
        return None if isinstance(value, bool) else f"'{key}' must be true or false, got {value!r}"
    if spec.kind == "text":
        return None if isinstance(value, str) and value.strip() else f"'{key}' must be a non-empty text"
    if spec.kind in ("quantity", "number"):
        unit = f" in {spec.unit}" if spec.unit else ""
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            return f"'{key}' must be a number{unit}, got {value!r}"
        if not math.isfinite(value):
            return f"'{key}' must be a finite number{unit}, got {value!r}"
        if spec.positive and not value > 0:
            return f"'{key}' must be greater than zero, got {value!r}"
        if spec.minimum is not None and value < spec.minimum:
            return f"'{key}' must be at least {spec.minimum:g}, got {value!r}"
        return None
    if spec.kind == "mapping":
        return None if isinstance(value, Mapping) else f"'{key}' must be a mapping"
    if spec.kind == "list_or_mapping":
        ok = isinstance(value, (Mapping, list, tuple))
        return None if ok else f"'{key}' must be a list or a mapping"
    raise ValueError(f"unknown option kind {spec.kind!r}")


def check_all(specs: Mapping[str, OptionSpec], options: Mapping[str, Any]) -> list[tuple[tuple[str, ...], str]]:
    """Unknown keys and values of the wrong type, as (key path, message) pairs."""
    problems: list[tuple[tuple[str, ...], str]] = []
    for key, value in options.items():
        spec = specs.get(key)
        if spec is None:
            problems.append(((key,), f"unknown option {key!r} (expected: {', '.join(sorted(specs))})"))
            continue
        msg = check_value(key, spec, value)
        if msg:
            problems.append(((key,), msg))
    return problems
