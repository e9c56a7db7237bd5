"""A unit's verdict and the one-line reason that heads its report."""

from __future__ import annotations

from benchgate.analysis.context import NO_OSCILLATION
from benchgate.judge.rules import Verdict, combine
from benchgate.record import UnitRecord

#: the verdict a step's status stands for
STEP_VERDICT = {"failed": Verdict.FAIL, "error": Verdict.ERROR, "aborted": Verdict.ABORTED}


def unit_verdict(record: UnitRecord, failure: tuple[Verdict, str] | None) -> tuple[Verdict, str]:
    """The unit's verdict and its reason from the checks, the step outcomes and how the run ended.

    The reason names the most basic finding first (see :func:`findings`); how the run ended is
    added after it when that is not what decided the verdict.
    """
    checks = record.checks()
    found = [c.verdict for c in checks]
    found += [STEP_VERDICT[s.status] for s in record.steps if s.status in STEP_VERDICT]
    if failure is not None:
        found.append(failure[0])
    verdict = combine(found)
    if failure is not None and failure[0] == verdict:
        reason = failure[1]
    elif verdict == Verdict.PASS:
        reason = f"all {len(checks)} checks passed" if checks else "all steps done (no checks)"
    else:
        reason = next(iter(findings(record, verdict)), verdict.value)
    if failure is not None and failure[0] != verdict:
        reason += f"; then {failure[1]}"
    return verdict, reason


def findings(record: UnitRecord, verdict: Verdict) -> list[str]:
    """What went wrong with a unit, most basic first.

    1. A step that could not run or stopped the unit (an instrument error, a declined prompt):
       nothing after it means much.
    2. A capture in which nothing oscillates: every level, frequency or start-up figure of that
       capture (and a failing check on it) only follows from that, so it is named as such,
       whatever the order of the steps.
    3. The checks whose verdict is the unit's, in plan order; then any other check that did
       not pass.
    """
    out: list[str] = []
    for s in record.steps:
        if s.error and STEP_VERDICT.get(s.status) == verdict:
            out.append(f"{s.id}: {s.error}")
    for s in record.steps:
        dead = [c for c in s.checks if c.result is not None and not c.result.valid
                and c.result.reason in NO_OSCILLATION]
        if dead:
            bad = next((c for c in s.checks if c.verdict == verdict), None)
            detail = f" ({bad.reason})" if bad is not None and bad not in dead else ""
            out.append(f"{s.id}: no oscillation in the {s.id} record{detail}")
    checks = record.checks()
    out += [f"{c.step_id}: {c.reason}" for c in checks if c.verdict == verdict]
    out += [f"{c.step_id}: {c.reason}" for c in checks if c.verdict not in (verdict, Verdict.PASS)]
    return list(dict.fromkeys(out))
