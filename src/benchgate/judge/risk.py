"""Specific conformity risk of one decision (JCGM 106:2012, normal model).

Given the measured value y and its standard uncertainty u = U/k (k = 2, the coverage factor every
benchgate measurement states its expanded uncertainty with), the state of knowledge about the true
value is a normal distribution N(y, u²) (JCGM 106:2012, clause 7: normal PDFs with the measured
value as expectation). The conformance probability is the mass of that distribution inside the
tolerance interval (JCGM 106:2012, clause 7, one- and two-sided intervals):

    p_c = Φ((T_U − y)/u) − Φ((T_L − y)/u)

with one of the two terms dropped for a one-sided window. The *specific risk* of a decision is
the probability that it is wrong for this item:

- after a pass, the specific consumer's risk ``1 − p_c`` (``risk of a false pass``);
- after a fail, the specific producer's risk ``p_c`` (``risk of a false fail``).

Both are computed from complementary error functions of the distances to the limits, so a tiny
risk (1e-12) keeps its digits rather than vanishing in ``1 − (1 − ε)``.

References
----------
JCGM 106:2012, Evaluation of measurement data — The role of measurement uncertainty in conformity
assessment, clause 7 (conformance probability with normal PDFs), clause 8 (acceptance intervals
and guard bands; for w = U = 2u the specific consumer's risk at the acceptance limit of a one-sided
interval is Φ(−2) ≈ 2.3 %). Sub-clause numbers are given from memory.
ILAC-G8:09/2019, Guidelines on decision rules and statements of conformity, 4.2.2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: coverage factor of every expanded uncertainty benchgate states (JCGM 100:2008, 6.2)
COVERAGE_FACTOR = 2.0

_ERFC = np.frompyfunc(math.erfc, 1, 1)


def _upper_tail(z: float) -> float:
    """Q(z) = 1 − Φ(z) = P(Z > z) for a standard normal Z, accurate far into both tails."""
    return 0.5 * math.erfc(z / math.sqrt(2.0))


def upper_tail(z: np.ndarray | float) -> np.ndarray:
    """Vectorised Q(z) = 1 − Φ(z), elementwise, as float64."""
    z = np.asarray(z, dtype=float)
    return 0.5 * np.asarray(_ERFC(z / math.sqrt(2.0)), dtype=float)


def probability_outside(y: float, u: float, low: float | None, high: float | None) -> float:
    """Probability that the true value lies outside ``[low, high]`` given N(y, u²).

    ``low`` or ``high`` may be None (a one-sided window). ``u = 0`` gives 0 or 1 (a value known
    exactly is inside or outside; a value exactly on a limit is inside, the window being closed).
    """
    if u < 0 or not math.isfinite(u) or not math.isfinite(y):
        raise ValueError(f"y={y!r}, u={u!r}: need a finite value and a finite u >= 0")
    if u == 0:
        inside = (low is None or y >= low) and (high is None or y <= high)
        return 0.0 if inside else 1.0
    below = 0.0 if low is None else _upper_tail((y - low) / u)  # P(X < low)
    above = 0.0 if high is None else _upper_tail((high - y) / u)  # P(X > high)
    if (low is not None and y < low) or (high is not None and y > high):
        # the bulk lies outside: 1 − P(inside) loses nothing, P(inside) is the small number
        return 1.0 - probability_inside(y, u, low, high)
    return below + above


def probability_inside(y: float, u: float, low: float | None, high: float | None) -> float:
    """Conformance probability p_c (JCGM 106:2012, clause 7) for N(y, u²) and ``[low, high]``."""
    if u < 0 or not math.isfinite(u) or not math.isfinite(y):
        raise ValueError(f"y={y!r}, u={u!r}: need a finite value and a finite u >= 0")
    if u == 0:
        return 1.0 - probability_outside(y, u, low, high)
    if high is not None and y > high:  # both tails measured from above: Q(a) − Q(b), a < b
        return _upper_tail((y - high) / u) - (0.0 if low is None else _upper_tail((y - low) / u))
    if low is not None and y < low:
        return _upper_tail((low - y) / u) - (0.0 if high is None else _upper_tail((high - y) / u))
    return 1.0 - probability_outside(y, u, low, high)


def probability_outside_array(y: np.ndarray, u: np.ndarray, low: float | None,
                              high: float | None) -> np.ndarray:
    """:func:`probability_outside` elementwise for arrays with u > 0 (used by simulations)."""
    y = np.asarray(y, dtype=float)
    u = np.asarray(u, dtype=float)
    below = np.zeros_like(y) if low is None else upper_tail((y - low) / u)
    above = np.zeros_like(y) if high is None else upper_tail((high - y) / u)
    out: np.ndarray = np.minimum(below + above, 1.0)
    return out


@dataclass(frozen=True)
class Risk:
    """The specific risk of one decision: its probability and which wrong decision it is."""

    probability: float
    kind: str  # "false pass" | "false fail"

    @property
    def label(self) -> str:
        return f"risk of a {self.kind}"

    def text(self) -> str:
        return f"{self.label} {format_risk(self.probability)}"


def specific_risk(verdict: str, y: float, expanded_u: float | None, low: float | None,
                  high: float | None) -> Risk | None:
    """The specific risk of ``verdict`` ("pass" or "fail") for a value ``y`` ± ``expanded_u``.

    None for other verdicts and when no uncertainty is stated (no distribution, no risk).
    ``expanded_u`` is U with k = 2; the standard uncertainty is U/2.
    """
    if expanded_u is None or verdict not in ("pass", "fail"):
        return None
    u = expanded_u / COVERAGE_FACTOR
    if verdict == "pass":
        return Risk(probability_outside(y, u, low, high), "false pass")
    return Risk(probability_inside(y, u, low, high), "false fail")


def format_risk(p: float) -> str:
    """A probability as a short percentage: 2.28 %, 0.0013 %, < 1e-9 %."""
    pct = 100.0 * p
    if pct == 0.0:
        return "0 %"
    if pct < 1e-9:
        return "< 1e-9 %"
    if pct >= 1:
        return f"{pct:.3g} %"
    return f"{pct:.2g} %"
