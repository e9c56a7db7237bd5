"""How a run ended, and which runs count for yields and capability (see docs/results.md).

A run that *finished* has an end time and a verdict. It may still have been *cut short*: stopped
by the operator or a signal (``aborted``), or by the station itself (``station error``: a lost
instrument, a bench that could not be opened, an internal error) before the plan ran to its end.
A *complete* run is one that decided something about the unit: it finished and either ran to its
end, or had already found a valid value outside its window before it was cut short (a unit
known to be bad is bad whatever stopped the run afterwards). Everything else is an attempt that
did not complete: it is counted as an attempt, listed in the Pareto by its reason, and never
makes a unit "tested".
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from benchgate.judge.rules import Verdict

if TYPE_CHECKING:
    from benchgate.record import UnitRecord

ABORTED = "aborted"
STATION_ERROR = "station error"

#: SQL over a ``runs`` row (alias ``r``): true for a complete run. The one place the rule lives
#: in SQL; :func:`is_complete` is the same rule in Python.
COMPLETE_SQL = "(r.complete = 1 AND (r.cut_short IS NULL OR r.verdict = 'fail'))"


def cut_short(record: UnitRecord) -> str | None:
    """``aborted``, ``station error`` or None for a finished run that ran to its end.

    Read from what the runner records: the unit verdict ``aborted``; a step that ended in
    ``aborted`` or ended in ``error`` with its own error text (the executor's mark for a step
    stopped by an exception; an error from an untrusted measurement leaves the text empty and
    the reason on the check); or an ``error`` verdict that no check explains (the bench could
    not be opened, or something failed between the steps).
    """
    steps = record.steps
    if record.verdict == Verdict.ABORTED or any(s.status == "aborted" for s in steps):
        return ABORTED
    if any(s.status == "error" and s.error for s in steps):
        return STATION_ERROR
    if record.verdict == Verdict.ERROR and not any(c.verdict == Verdict.ERROR
                                                     for c in record.checks()):
        return STATION_ERROR
    return None


def is_complete(finished: bool, cut: str | None, verdict: str | None) -> bool:
    """The rule of :data:`COMPLETE_SQL` for one run."""
    return bool(finished) and (cut is None or verdict == Verdict.FAIL.value)
