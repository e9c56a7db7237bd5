"""Deciding a check before the whole capture is in: a group-sequential rule with alpha spending.

An adaptive capture grows its capture block by block and re-measures after each block ("a
look"). Applying the plan's decision rule at every look would inflate the chance of a wrong
decision: every look is another chance for noise to carry an estimate across a limit. This
module decides at look ``j`` only with a per-look error budget ``α_j`` taken from an alpha
spending function, so the budgets of all looks together never exceed the stated total.

The rule at a look before the last
    With the measured value ``y_j`` and standard uncertainty ``u_j = U_j/2`` of the capture so far,
    form the interval ``y_j ± z_j·u_j`` with ``z_j = Φ⁻¹(1 − α_j/2)``. The check is decided as
    *pass* when the interval lies wholly inside the window, as *fail* when it lies wholly
    outside, and stays open otherwise. For any true value μ a wrong decision at look ``j``
    needs μ outside that interval, which has probability at most ``α_j`` under the normal model.
    By the union bound, the probability of any wrong early decision is at most
    ``Σ_{j<J} α_j = A(t_{J−1})`` whatever the correlation between looks (the captures are nested,
    so the estimates are strongly correlated; the union bound does not need the independent
    increments an exact group-sequential boundary would assume).

The last look (the longest capture)
    Judged exactly as a fixed-length capture: the plan's rule. Because the adaptive capture is a
    prefix of the fixed one, every wrong adaptive decision is either a wrong early decision or
    a wrong decision the fixed-length capture would also have made, so

        P(wrong, adaptive) ≤ P(wrong, fixed) + A(t_{J−1}).

The spending function
    Lan & DeMets' O'Brien-Fleming-type function A(t) = 2 − 2Φ(z_{1−a/2}/√t) for capture fraction
    ``t`` in (0, 1]; it spends almost nothing at early looks (a decision there needs a wide
    margin) and reaches its total a at t = 1. Only looks before the last spend from it, and its
    total is a = :data:`EARLY_SHARE` · α, so the early looks add at most a tenth of α.

α is the plan's own risk: ``max_risk`` under the ``risk`` rule, Φ(−2) ≈ 2.3 % under
``guarded`` (the specific risk at the acceptance limit with w = U). Since α_j < α, an early
decision always agrees with the plan's rule applied to the same capture (the interval half-width
z_j·u exceeds U = 2u, and each tail is below α_j/2).

References
----------
K. K. G. Lan and D. L. DeMets, "Discrete sequential boundaries for clinical trials",
Biometrika 70(3), 659-663, 1983 (alpha spending; the O'Brien-Fleming-type function).
S. R. Howard, A. Ramdas, J. McAuliffe, J. Sekhon, "Time-uniform, nonparametric, nonasymptotic
confidence sequences", Ann. Statist. 49(2), 2021 (confidence sequences: intervals valid
simultaneously at every look; the union-bound construction here is the simplest such sequence).
JCGM 106:2012 and ILAC-G8:09/2019 for the rules the total α comes from.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from benchgate.judge.risk import COVERAGE_FACTOR

#: the specific risk at the acceptance limit of the guarded rule (w = U = 2u): Φ(−2)
GUARDED_ALPHA = 0.5 * math.erfc(2.0 / math.sqrt(2.0))

#: decision rules under which a capture may stop early (simple acceptance states no risk)
ADAPTIVE_RULES = ("guarded", "risk")

#: the share of the rule's α the early looks may spend together: they add at most this share
#: of α to the fixed-length capture's wrong-decision probability (10 %: in simulation the
#: adaptive capture then made no more wrong decisions than the fixed one, tests/judge)
EARLY_SHARE = 0.1


def upper_quantile(q: float) -> float:
    """z with Q(z) = 1 − Φ(z) = q, for 0 < q < 1 (Abramowitz & Stegun 26.2.23 as the start,
    then Newton steps on Q computed with erfc, so tiny q keep their precision)."""
    if not 0.0 < q < 1.0:
        raise ValueError(f"q={q!r}: need 0 < q < 1")
    if q > 0.5:
        return -upper_quantile(1.0 - q)
    t = math.sqrt(-2.0 * math.log(q))
    z = t - (2.515517 + 0.802853 * t + 0.010328 * t * t) / (
        1.0 + 1.432788 * t + 0.189269 * t * t + 0.001308 * t ** 3)
    for _ in range(60):
        step = (0.5 * math.erfc(z / math.sqrt(2.0)) - q) / (math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi))
        z += step
        if abs(step) < 1e-15 * max(1.0, abs(z)):
            break
    return z


def obf_spending(t: np.ndarray | float, alpha: float) -> np.ndarray:
    """Lan-DeMets O'Brien-Fleming-type spending A(t) = 2 − 2Φ(z_{1−α/2}/√t), A(1) = α."""
    t = np.clip(np.asarray(t, dtype=float), 0.0, 1.0)
    z = upper_quantile(alpha / 2.0)
    with np.errstate(divide="ignore"):
        arg = np.where(t > 0, z / np.sqrt(np.where(t > 0, t, 1.0)), np.inf)
    erfc = np.frompyfunc(math.erfc, 1, 1)
    return np.asarray(erfc(arg / math.sqrt(2.0)), dtype=float)  # 2 − 2Φ(x) = erfc(x/√2)


def look_budgets(fractions: Sequence[float], alpha: float, share: float = EARLY_SHARE) -> np.ndarray:
    """α_j for each look before the last: A(t_j) − A(t_{j−1}) with A the spending function of
    total ``share·alpha``, ``fractions`` the capture fractions of all looks (increasing, the last
    = 1). The last look gets 0 (it is judged by the plan's rule, not by the spending)."""
    t = np.asarray(fractions, dtype=float)
    if t.ndim != 1 or t.size == 0 or np.any(np.diff(t) <= 0) or t[0] <= 0 or abs(t[-1] - 1.0) > 1e-12:
        raise ValueError("capture fractions must increase from above 0 to 1")
    a = obf_spending(t, share * alpha)
    out = np.diff(np.concatenate(([0.0], a)))
    out[-1] = 0.0
    return out


def early_bound(fractions: Sequence[float], alpha: float, share: float = EARLY_SHARE) -> float:
    """A(t_{J−1}): the most the early looks together add to the wrong-decision probability."""
    return float(np.sum(look_budgets(fractions, alpha, share)))


def rule_alpha(rule: str, max_risk: float | None) -> float:
    """The total α for the spending function under a decision rule."""
    if rule == "guarded":
        return GUARDED_ALPHA
    if rule == "risk":
        if max_risk is None or not 0 < max_risk < 0.5:
            raise ValueError(f"the risk rule needs max_risk in (0, 0.5), got {max_risk!r}")
        return max_risk
    raise ValueError(f"no adaptive capture under decision rule {rule!r}; use one of {', '.join(ADAPTIVE_RULES)}")


def look_schedule(shortest: float, longest: float, block: float | None = None) -> list[float]:
    """Capture lengths (s) at which to look: ``shortest``, then every ``block`` (default: the
    shortest capture) up to ``longest``, which is always the last look."""
    if not (0 < shortest <= longest) or not math.isfinite(longest):
        raise ValueError(f"need 0 < shortest <= longest, got {shortest!r}, {longest!r}")
    block = shortest if block is None else block
    if not block > 0:
        raise ValueError(f"block must be above 0, got {block!r}")
    k = max(0, math.ceil((longest - shortest) / block * (1 - 1e-9)))
    if k > 10_000:
        raise ValueError(f"{k + 1} looks: use a longer block")
    out = [shortest + i * block for i in range(k)]
    out.append(longest)
    return out


def early_decision(value: np.ndarray | float, expanded_u: np.ndarray | float, low: float | None,
                   high: float | None, alpha_j: float) -> np.ndarray:
    """Decision at a look before the last: +1 pass, −1 fail, 0 undecided (elementwise).

    Pass when ``value ± z·u`` lies inside ``[low, high]``, fail when it lies wholly outside,
    with u = U/2 and z = Φ⁻¹(1 − α_j/2) (:func:`upper_quantile` of α_j/2). A look with α_j = 0 decides nothing.
    """
    y = np.asarray(value, dtype=float)
    u = np.asarray(expanded_u, dtype=float) / COVERAGE_FACTOR
    if alpha_j <= 0:
        return np.zeros(np.broadcast(y, u).shape, dtype=int)
    z = upper_quantile(alpha_j / 2.0)
    lo_edge, hi_edge = y - z * u, y + z * u
    inside = np.ones_like(lo_edge, dtype=bool)
    outside = np.zeros_like(lo_edge, dtype=bool)
    if low is not None:
        inside &= lo_edge >= low
        outside |= hi_edge < low
    if high is not None:
        inside &= hi_edge <= high
        outside |= lo_edge > high
    ok = np.isfinite(y) & np.isfinite(u)
    return np.where(ok & inside, 1, np.where(ok & outside, -1, 0))


@dataclass
class LookRecord:
    """What one check showed at one look."""

    seconds: float
    value: float | None
    uncertainty: float | None  # U, k = 2
    budget: float  # α_j spent at this look (0 at the last)
    decided: str | None  # "pass" | "fail" | None

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


@dataclass
class SequentialState:
    """The running state of one adaptive capture: per check, its looks; and why it stopped."""

    schedule: list[float]
    alpha: float
    budgets: np.ndarray = field(init=False)
    looks: dict[str, list[LookRecord]] = field(default_factory=dict)
    stopped: str = ""

    def __post_init__(self) -> None:
        t = np.asarray(self.schedule, dtype=float) / self.schedule[-1]
        self.budgets = look_budgets(t.tolist(), self.alpha)

    @property
    def bound(self) -> float:
        """The most the early looks add to the wrong-decision probability of any check."""
        return float(np.sum(self.budgets))

    def look(self, j: int, results: dict[str, tuple[float | None, float | None, float | None, float | None]]) -> bool:
        """Note look ``j``: ``results`` maps a check key to (value, U, low, high). True when
        every check is decided (the capture may stop) or this was the last look."""
        last = j == len(self.schedule) - 1
        all_decided = True
        for key, (value, u, low, high) in results.items():
            decided = None
            if not last and value is not None and u is not None and math.isfinite(value) and math.isfinite(u):
                d = int(early_decision(value, u, low, high, float(self.budgets[j])))
                decided = {1: "pass", -1: "fail"}.get(d)
            self.looks.setdefault(key, []).append(
                LookRecord(self.schedule[j], value, u, float(self.budgets[j]), decided))
            all_decided = all_decided and decided is not None
        if last:
            self.stopped = (f"longest capture {self.schedule[-1]:g} s reached; judged as a fixed-length "
                            "capture")
            return True
        if all_decided:
            self.stopped = (f"every check decided at {self.schedule[j]:g} s (look {j + 1} of "
                            f"{len(self.schedule)}, this look's error budget {self.budgets[j]:.2g}; "
                            f"all early looks together at most {self.bound:.2g})")
            return True
        return False

    def to_dict(self) -> dict[str, Any]:
        return {"schedule": list(self.schedule), "alpha": self.alpha, "early_bound": self.bound,
                "stopped": self.stopped,
                "looks": {k: [lk.to_dict() for lk in v] for k, v in self.looks.items()}}
