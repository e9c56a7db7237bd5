"""A measured value with its expanded uncertainty and whether it can be trusted."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Measurement:
    """One measured quantity.

    Parameters
    ----------
    name : str
        Registered measurement name (``frequency``, ``thd`` …).
    value : float
        The value in SI base units (Hz, V, s) or the stated unit (%, dB, bits, Hz/s).
        NaN when nothing could be measured.
    unit : str
        Unit symbol of ``value``.
    uncertainty : float or None
        Expanded uncertainty U (coverage factor k = 2, about 95 %; JCGM 100:2008), same unit
        as ``value``; None when no uncertainty can be stated.
    valid : bool
        False when the value cannot be trusted; ``reason`` then says why.
    reason : str or None
        Why the measurement is not valid (required when ``valid`` is False).
    details : mapping
        Extra facts about how it was measured (harmonics summed, taper, capture part used …).
    """

    name: str
    value: float
    unit: str
    uncertainty: float | None = None
    valid: bool = True
    reason: str | None = None
    details: Mapping[str, Any] | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", float(self.value))
        if self.uncertainty is not None:
            object.__setattr__(self, "uncertainty", float(self.uncertainty))
        if self.valid:
            if not math.isfinite(self.value):
                raise ValueError(f"a valid measurement needs a finite value ({self.name}={self.value})")
            if self.uncertainty is not None and not (math.isfinite(self.uncertainty) and self.uncertainty >= 0):
                raise ValueError(f"uncertainty must be finite and >= 0 ({self.name}: {self.uncertainty})")
        elif not self.reason:
            raise ValueError(f"an invalid measurement needs a reason ({self.name})")

    @classmethod
    def invalid(cls, name: str, unit: str, reason: str, value: float = math.nan, **details: Any) -> Measurement:
        """A measurement that could not be made or cannot be trusted."""
        return cls(name=name, value=value, unit=unit, uncertainty=None, valid=False,
                   reason=reason, details=details or None)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (NaN and infinities become null)."""
        from benchgate.common.evidence import finite as clean  # NaN and infinities become null

        out: dict[str, Any] = {
            "value": clean(self.value),
            "unit": self.unit,
            "uncertainty": clean(self.uncertainty),
            "valid": self.valid,
            "reason": self.reason,
        }
        if self.details:
            out["details"] = dict(self.details)
        return out

    @classmethod
    def from_dict(cls, name: str, d: Mapping[str, Any]) -> Measurement:
        value = d.get("value")
        return cls(
            name=name,
            value=math.nan if value is None else float(value),
            unit=str(d.get("unit", "")),
            uncertainty=None if d.get("uncertainty") is None else float(d["uncertainty"]),
            valid=bool(d.get("valid", False)),
            reason=d.get("reason"),
            details=d.get("details"),
        )
