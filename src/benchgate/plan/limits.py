"""The acceptance window of one check, however it was obtained (given or derived)."""

from __future__ import annotations

import math
import numbers
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
        A per-check decision rule overriding the plan's (``simple``, ``guarded`` or ``risk``).
    max_risk : float or None
        A per-check largest acceptable specific risk (a fraction) for the ``risk`` rule,
        overriding the plan's.
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
    max_risk: float | None = None

    def __post_init__(self) -> None:
        problem = window_problem(self)
        if problem:
            raise ValueError(problem)

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
            **({} if self.max_risk is None else {"max_risk": self.max_risk}),
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
            max_risk=d.get("max_risk"),
        )


def window_problem(w: Window) -> str | None:
    """Why ``w`` is not a proper finite interval (None when it is one).

    A proper window has at least one limit, every limit and the nominal finite numbers, and
    low <= high. :class:`Window` refuses others when built; the judge asks again, because a
    window can also arrive from a stored record or be altered after it was built.
    """
    low, high = getattr(w, "low", None), getattr(w, "high", None)
    if low is None and high is None:
        return "a window needs at least one limit"
    for name in ("low", "high", "nominal"):
        v = getattr(w, name, None)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, numbers.Real):
            return f"window {name} {v!r} is not a number"
        if not math.isfinite(v):
            return f"window {name} {v} is not a finite number"
    if low is not None and high is not None and low > high:
        return f"window low {low} is above high {high}"
    return None
