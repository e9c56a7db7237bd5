"""The acceptance window of one check, however it was obtained (given or derived)."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any


@dataclass(frozen=True)
class Window:
    """Lower and upper acceptance limits for one measurement, in SI base units.

    Parameters
    ----------
    unit : str
        Unit of the limits (the measurement's unit: Hz, V, %, dB, s …).
    low, high : float or None
        Lower and upper limit; None where the window is open on that side.
    nominal : float or None
        The design value, when one is known.
    derived_from : str
        How the window was obtained, in words: ``"given"``, ``"nominal 1 kHz ±5 %"``,
        ``"rc_ladder highpass 3 sections: worst case over 64 tolerance corners"`` …
    decision : str or None
        A per-check decision rule overriding the plan's (``simple`` or ``guarded``).
    details : mapping
        Derivation facts for reports: formula, corners, gain needed, Monte Carlo spread and yield.
    """

    unit: str
    low: float | None = None
    high: float | None = None
    nominal: float | None = None
    derived_from: str = "given"
    decision: str | None = None
    details: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.low is None and self.high is None:
            raise ValueError("a window needs at least one limit")
        if self.low is not None and self.high is not None and self.low > self.high:
            raise ValueError(f"window low {self.low} is above high {self.high}")

    def contains(self, x: float) -> bool:
        """Whether ``x`` lies inside the closed window."""
        if not math.isfinite(x):
            return False
        if self.low is not None and x < self.low:
            return False
        return not (self.high is not None and x > self.high)

    def to_dict(self) -> dict[str, Any]:
        return {
            "unit": self.unit,
            "low": self.low,
            "high": self.high,
            "nominal": self.nominal,
            "derived_from": self.derived_from,
            "decision": self.decision,
            "details": dict(self.details),
        }

    @classmethod
    def from_dict(cls, d: Mapping[str, Any]) -> Window:
        return cls(
            unit=d["unit"],
            low=d.get("low"),
            high=d.get("high"),
            nominal=d.get("nominal"),
            derived_from=d.get("derived_from", "given"),
            decision=d.get("decision"),
            details=d.get("details") or {},
        )
