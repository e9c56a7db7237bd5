"""Measurement + window -> verdict, under a decision rule stated before measuring.

Decision rules follow ILAC-G8:09/2019:

``simple``
    Simple acceptance (guard band w = 0): pass when the measured value lies inside the window,
    fail when outside. The risk of a false accept at the limit is about 50 %.
``guarded``
    Guard band w = U (the expanded uncertainty, k = 2): pass only when value ± U lies wholly
    inside the window, fail only when value ± U lies wholly outside, otherwise inconclusive.
    For a normal distribution this keeps the false-accept risk at the limit below 2.5 %.
``risk``
    A largest acceptable specific risk (``max_risk``, JCGM 106:2012 clauses 7-8; ILAC-G8:09/2019
    4.2.3): pass only if the probability of a false pass is below it, fail only if the
    probability of a false fail is below it, otherwise inconclusive.

Every pass and fail states its specific risk (:mod:`benchgate.judge.risk`).

A measurement that is not valid is always ``error``, never ``pass``.
"""

from benchgate.judge.rules import (
    DECISION_RULES,
    CheckVerdict,
    Verdict,
    combine,
    judge,
)

__all__ = ["DECISION_RULES", "CheckVerdict", "Verdict", "combine", "judge"]
