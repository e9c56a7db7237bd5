"""Decision rules (ILAC-G8:09/2019) and the verdict types."""

from __future__ import annotations

import enum
import math
import numbers
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

from benchgate.analysis.measurement import Measurement
from benchgate.judge.risk import (
    Risk,
    format_risk,
    probability_inside,
    probability_outside,
    specific_risk,
)
from benchgate.plan.limits import Window, window_problem
from benchgate.units.format import format_quantity, window_text

DECISION_RULES = ("simple", "guarded", "risk")


class Verdict(enum.StrEnum):
    """Outcome of one check, one step or one unit."""

    PASS = "pass"
    FAIL = "fail"
    INCONCLUSIVE = "inconclusive"
    ERROR = "error"
    ABORTED = "aborted"

    def __str__(self) -> str:
        return self.value


# Precedence when combining: a failure dominates, then an error, then inconclusive.
_ORDER = {Verdict.FAIL: 4, Verdict.ABORTED: 3, Verdict.ERROR: 2, Verdict.INCONCLUSIVE: 1, Verdict.PASS: 0}


@dataclass(frozen=True)
class CheckVerdict:
    """A verdict with the reason in words and the rule that produced it."""

    verdict: Verdict
    reason: str
    rule: str
    #: the specific risk of this decision (JCGM 106): of a false pass for a pass, of a false
    #: fail for a fail; None for other verdicts or without a stated uncertainty
    risk: Risk | None = None

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"verdict": self.verdict.value, "reason": self.reason, "rule": self.rule}
        if self.risk is not None:
            out["risk"] = {"probability": self.risk.probability, "kind": self.risk.kind}
        return out


def _fmt(x: float | None, unit: str) -> str:
    return "no limit" if x is None else format_quantity(x, unit)


def _describe(m: Measurement) -> str:
    if m.uncertainty is None:
        return f"{m.name} {_fmt(m.value, m.unit)}"
    return f"{m.name} {_fmt(m.value, m.unit)} ± {_fmt(m.uncertainty, m.unit)}"


def judge(measurement: Measurement | None, window: Window, rule: str = "simple",
          max_risk: float | None = None) -> CheckVerdict:
    """Decide one check and state the specific risk of the decision.

    The verdict comes from the rule (see :func:`_decide`); a pass or fail then carries its
    specific risk (JCGM 106:2012, clause 7, normal model; :mod:`benchgate.judge.risk`):
    the probability that the true value lies outside the window after a pass, inside it after a
    fail. ``max_risk`` (a fraction, 0.01 for 1 %) is the largest acceptable specific risk of the
    ``risk`` rule; ``window.max_risk`` overrides it.
    """
    cv = _decide(measurement, window, rule, max_risk)
    if cv.verdict not in (Verdict.PASS, Verdict.FAIL) or measurement is None or cv.risk is not None:
        return cv
    r = specific_risk(cv.verdict.value, measurement.value, measurement.uncertainty, window.low, window.high)
    return CheckVerdict(cv.verdict, cv.reason, cv.rule, r)


def _decide(measurement: Measurement | None, window: Window, rule: str = "simple",
            max_risk: float | None = None) -> CheckVerdict:
    """Decide one check.

    Parameters
    ----------
    measurement : Measurement or None
        The measured value; None when the measurement could not be made at all.
    window : Window
        Acceptance limits, in the measurement's unit.
    rule : {"simple", "guarded", "risk"}
        The plan's decision rule; ``window.decision`` overrides it when set.
    max_risk : float or None
        Largest acceptable specific risk under ``risk`` (``window.max_risk`` overrides it).

    Returns
    -------
    CheckVerdict

    Raises
    ------
    ValueError
        For an unknown rule, or a window whose unit differs from the measurement's.

    Notes
    -----
    Under ``guarded`` a measurement without a stated uncertainty cannot be shown to lie inside
    the window with the required confidence, so it is inconclusive unless it is outside
    (simple comparison then fails it).

    References
    ----------
    ILAC-G8:09/2019, Guidelines on decision rules and statements of conformity, 4.2.1 (simple
    acceptance) and 4.2.2 (binary statement with guard band w = U). The ``risk`` rule is the
    decision rule stated by a largest acceptable specific risk: JCGM 106:2012, clauses 7-8
    (guarded acceptance and guarded rejection with the acceptance limits where the specific
    consumer's or producer's risk equals the stated value); ILAC-G8:09/2019, 4.2.3 (guard band
    chosen for a required probability of false accept). Section numbers from memory.
    """
    rule = window.decision or rule
    if rule not in DECISION_RULES:
        raise ValueError(f"unknown decision rule {rule!r}; expected one of {', '.join(DECISION_RULES)}")
    problem = window_problem(window)
    if problem is not None:  # defence in depth: the loader refuses such windows
        return CheckVerdict(Verdict.ERROR, f"the window cannot be judged against: {problem}", rule)
    if measurement is None:
        return CheckVerdict(Verdict.ERROR, "measurement was not made", rule)
    if measurement.unit != window.unit:
        raise ValueError(f"{measurement.name}: window unit {window.unit!r} differs from measurement unit {measurement.unit!r}")
    if not measurement.valid:
        return CheckVerdict(Verdict.ERROR, f"{measurement.name} not valid: {measurement.reason}", rule)
    x = measurement.value
    u = measurement.uncertainty
    untrusted = _untrusted(x, u)
    if untrusted is not None:
        return CheckVerdict(Verdict.ERROR, f"{measurement.name} cannot be judged: {untrusted}", rule)
    lo, hi = window.low, window.high
    what = _describe(measurement)
    if rule == "risk":
        return _decide_by_risk(measurement, window, window.max_risk if window.max_risk is not None else max_risk)
    below = lo is not None and x < lo
    above = hi is not None and x > hi
    if rule == "simple":
        if below:
            return CheckVerdict(Verdict.FAIL, f"{what} below {_fmt(lo, window.unit)}", rule)
        if above:
            return CheckVerdict(Verdict.FAIL, f"{what} above {_fmt(hi, window.unit)}", rule)
        return CheckVerdict(Verdict.PASS, f"{what} inside {_window_text(window)}", rule)
    # guarded: acceptance zone shrunk by U, rejection zone grown by U
    if u is None:
        if below or above:
            edge = lo if below else hi
            side = "below" if below else "above"
            return CheckVerdict(Verdict.FAIL, f"{what} {side} {_fmt(edge, window.unit)}", rule)
        return CheckVerdict(Verdict.INCONCLUSIVE, f"{what} has no stated uncertainty; guarded rule cannot accept it", rule)
    if lo is not None and x + u < lo:
        return CheckVerdict(Verdict.FAIL, f"{what} below {_fmt(lo, window.unit)} by more than U", rule)
    if hi is not None and x - u > hi:
        return CheckVerdict(Verdict.FAIL, f"{what} above {_fmt(hi, window.unit)} by more than U", rule)
    if (lo is None or x - u >= lo) and (hi is None or x + u <= hi):
        return CheckVerdict(Verdict.PASS, f"{what} inside {_window_text(window)} with its uncertainty", rule)
    edge = lo if (lo is not None and x - u < lo) else hi
    return CheckVerdict(
        Verdict.INCONCLUSIVE,
        f"{what} within U of the limit {_fmt(edge, window.unit)}; guard band w = U",
        rule,
    )


def _decide_by_risk(m: Measurement, window: Window, max_risk: float | None) -> CheckVerdict:
    """The ``risk`` rule: pass only if the risk of a false pass is below ``max_risk``, fail only
    if the risk of a false fail is below it, otherwise inconclusive (JCGM 106:2012, clauses 7-8;
    ILAC-G8:09/2019, 4.2.3)."""
    rule = "risk"
    if max_risk is None or not (0 < max_risk < 0.5):
        return CheckVerdict(Verdict.ERROR, f"the risk rule needs a largest acceptable risk between 0 and 50 %, "
                                           f"got {max_risk!r}", rule)
    what = _describe(m)
    limit = format_risk(max_risk)
    if m.uncertainty is None:
        return CheckVerdict(Verdict.INCONCLUSIVE, f"{what} has no stated uncertainty; the risk rule "
                                                  "cannot state the risk of a decision", rule)
    u = m.uncertainty / 2.0  # U has k = 2
    p_out = probability_outside(m.value, u, window.low, window.high)
    p_in = probability_inside(m.value, u, window.low, window.high)
    if p_out < max_risk:
        r = Risk(p_out, "false pass")
        return CheckVerdict(Verdict.PASS, f"{what} inside {_window_text(window)}; {r.text()} below {limit}",
                            rule, r)
    if p_in < max_risk:
        r = Risk(p_in, "false fail")
        return CheckVerdict(Verdict.FAIL, f"{what} outside {_window_text(window)}; {r.text()} below {limit}",
                            rule, r)
    return CheckVerdict(Verdict.INCONCLUSIVE,
                        f"{what}: probability outside {_window_text(window)} is {format_risk(p_out)}, "
                        f"inside {format_risk(p_in)}; neither decision has a risk below {limit}", rule)


def _untrusted(x: object, u: object) -> str | None:
    """Why a measured value and its U cannot be compared with limits (None when they can)."""
    if isinstance(x, bool) or not isinstance(x, numbers.Real) or not math.isfinite(x):
        return f"the value {x!r} is not a finite number"
    if u is None:
        return None
    if isinstance(u, bool) or not isinstance(u, numbers.Real) or not math.isfinite(u):
        return f"its uncertainty {u!r} is not a finite number"
    if u < 0:
        return f"its uncertainty {u!r} is negative"
    return None


def _window_text(w: Window) -> str:
    return window_text(w.low, w.high, w.unit)


def combine(verdicts: Iterable[Verdict]) -> Verdict:
    """A unit's (or step's) verdict from its checks: fail if any failed; else aborted if aborted;
    else error if any errored; else inconclusive if any was; else pass (also for none)."""
    worst = Verdict.PASS
    for v in verdicts:
        if _ORDER[v] > _ORDER[worst]:
            worst = v
    return worst
