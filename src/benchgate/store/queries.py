"""Questions asked of the results database: a unit's history and a lot summary.

The summary is aggregated by the database (window functions and ``GROUP BY``) and finished
with numpy on the few grouped rows: no Python loop ever walks the run or check rows themselves.

Definitions used by :func:`summary` (docs/results.md gives them in full, with the reasons):

- a *unit* is a (plan id, serial) pair among the selected runs; every selected run is one of
  its *attempts*. A *complete* run is one that decided something about the unit
  (:mod:`benchgate.store.outcome`): it finished and ran to its end, or it found a valid value
  outside its window before it was cut short. Runs never finished, aborted (Ctrl-C, a signal,
  a prompt answered "no") or stopped by a station error are attempts that did not complete.
- units tested = units with at least one complete run; the others are counted apart
  (``units_untested``).
- final yield = units whose latest complete run passed / units tested; first-pass yield =
  units whose complete runs all passed / units tested (so a unit passes first time only if no
  complete run ever said otherwise; first-pass yield ≤ final yield always).
- retests = complete runs after each unit's first complete run; units retested = units with
  more than one complete run.
- per numeric check (one window of one step of one plan), over one value per unit: the valid
  value of the unit's latest complete run. Mean, sample standard deviation (n − 1), min, max
  and Cpk = min(USL − μ, μ − LSL) / 3σ, one-sided when the window has one limit (ISO 22514-2,
  from memory). Failing units' values stay in: leaving them out would cut the tail off the
  distribution and flatter Cpk.
- the Pareto lists count events: every non-passing check and every run cut short, over all
  attempts.
- expected false passes = the sum of the specific risks of a false pass (JCGM 106:2012) of the
  passed checks of each unit's latest complete run that passed. It bounds the expected number of
  out-of-specification units among the passed ones (a union bound over a unit's checks, exact
  when one check per unit carries the risk). Passed checks without a stated risk (no uncertainty)
  are counted apart (``risk_unstated``): their risk is unknown, not zero.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from typing import Any

from benchgate.store.backend import wrap
from benchgate.store.capability import (  # noqa: F401 - Histogram, cpk, HISTOGRAM_BINS re-exported
    HISTOGRAM_BINS,
    CheckStats,
    Histogram,
    check_stats,
    cpk,
)
from benchgate.store.outcome import COMPLETE_SQL, is_complete

#: Pareto lists keep this many entries; the rest are summed into "other".
PARETO_TOP = 15


# --------------------------------------------------------------------------- history

@dataclass(frozen=True)
class HistoryCheck:
    step: str
    measurement: str
    value: float | None
    uncertainty: float | None
    low: float | None
    high: float | None
    unit: str
    valid: bool
    verdict: str
    reason: str


@dataclass(frozen=True)
class HistoryRun:
    """One run of a unit as stored. ``verdict`` is None while the run is incomplete."""

    run_id: str
    serial: str
    plan_id: str
    plan_version: str
    station_id: str | None
    operator: str | None
    lot: str | None
    started: str
    ended: str | None
    complete: bool
    verdict: str | None
    reason: str | None
    report_path: str | None
    flags: dict[str, bool]
    checks: tuple[HistoryCheck, ...] = ()
    cut_short: str | None = None  # "aborted" / "station error" for a run stopped early
    report_file: str | None = None  # the report relative to the station's report folder
    report_sha256: str | None = None  # the report's SHA-256 when the run finished

    @property
    def counts(self) -> bool:
        """True for a complete run: one that decided something about the unit (docs/results.md)."""
        return is_complete(self.complete, self.cut_short, self.verdict)

    @property
    def status(self) -> str:
        """The verdict, or ``incomplete`` for a run that never finished."""
        return self.verdict if self.complete and self.verdict else "incomplete"

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["status"] = self.status
        d["counts"] = self.counts
        d["checks"] = [asdict(c) for c in self.checks]
        return d


def history(conn: Any, serial: str) -> list[HistoryRun]:
    """Every run of ``serial`` (exact match), newest first."""
    conn = wrap(conn)
    runs = conn.execute(
        "SELECT id, run_id, serial, plan_id, plan_version, station_id, operator, lot, started,"
        " ended, complete, verdict, reason, report_path, accept_hazards,"
        " allow_expired_calibration, unattended, cut_short, report_file, report_sha256"
        " FROM runs WHERE serial = ?"
        " ORDER BY started_epoch DESC, id DESC", (serial,)).fetchall()
    checks: dict[int, list[HistoryCheck]] = {}
    if runs:
        rows = conn.execute(
            "SELECT c.run, d.step, d.measurement, c.value, c.uncertainty, d.low, d.high, d.unit,"
            " c.valid, c.verdict, c.reason FROM checks c JOIN check_defs d ON d.id = c.def"
            " JOIN runs r ON r.id = c.run WHERE r.serial = ? ORDER BY c.run, c.seq", (serial,))
        for run, *rest in rows:
            rest[7] = bool(rest[7])
            checks.setdefault(run, []).append(HistoryCheck(*rest))
    out = []
    for r in runs:
        out.append(HistoryRun(
            run_id=r[1], serial=r[2], plan_id=r[3], plan_version=r[4], station_id=r[5],
            operator=r[6], lot=r[7], started=r[8], ended=r[9], complete=bool(r[10]),
            verdict=r[11], reason=r[12], report_path=r[13],
            flags={"accept_hazards": bool(r[14]), "allow_expired_calibration": bool(r[15]),
                   "unattended": bool(r[16])},
            checks=tuple(checks.get(r[0], ())), cut_short=r[17], report_file=r[18],
            report_sha256=r[19]))
    return out


# --------------------------------------------------------------------------- summary

@dataclass(frozen=True)
class ParetoCheck:
    plan_id: str
    step: str
    measurement: str
    fail: int
    error: int
    inconclusive: int

    @property
    def total(self) -> int:
        return self.fail + self.error + self.inconclusive


@dataclass(frozen=True)
class ParetoReason:
    reason: str
    count: int
    kind: str = "fail"  # the verdict behind it: fail, error, inconclusive, aborted, incomplete, other


@dataclass(frozen=True)
class UnitLine:
    """One unit of a lot summary: its latest attempt's verdict and report, and how many attempts."""

    serial: str
    plan_id: str
    verdict: str  # of the latest attempt; 'incomplete' when it never finished
    attempts: int
    report_path: str | None


#: a lot summary lists at most this many units (the page stays readable; the counts stay whole)
UNIT_LIST_MAX = 5000


@dataclass(frozen=True)
class Summary:
    plan: str | None
    lot: str | None
    since: str | None
    runs: int
    incomplete: int
    units_tested: int
    first_pass: int
    final_pass: int
    retests: int
    units_retested: int
    verdicts: dict[str, int]
    cut_short: int = 0  # finished runs cut short before deciding anything (aborted, station error)
    units_untested: int = 0  # units with attempts but no complete run
    pareto_checks: tuple[ParetoCheck, ...] = ()
    pareto_reasons: tuple[ParetoReason, ...] = ()
    checks: tuple[CheckStats, ...] = field(default=())
    units: tuple[UnitLine, ...] = ()  # listed for a lot summary only (lot given), serial order
    expected_false_passes: float = 0.0  # sum of the passed units' risks of a false pass
    risk_unstated: int = 0  # passed checks of passed units whose risk is not stated

    @property
    def first_pass_yield(self) -> float | None:
        return self.first_pass / self.units_tested if self.units_tested else None

    @property
    def final_yield(self) -> float | None:
        return self.final_pass / self.units_tested if self.units_tested else None

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["first_pass_yield"] = self.first_pass_yield
        d["final_yield"] = self.final_yield
        d["pareto_checks"] = [dict(asdict(p), total=p.total) for p in self.pareto_checks]
        for c in d["checks"]:
            h = c.pop("histogram")
            c["histogram"] = {"edges": list(h["edges"]), "counts": list(h["counts"])}
        return d


def parse_since(since: str) -> float:
    """Seconds since the epoch for ``--since`` (a date, or an ISO time; UTC unless stated)."""
    from benchgate.errors import StoreError

    try:
        t = datetime.fromisoformat(since.strip().replace("Z", "+00:00"))
    except ValueError:
        raise StoreError(f"--since: not a date or ISO 8601 time: {since!r} "
                         "(expected e.g. 2026-12-01 or 2026-12-01T08:00Z)") from None
    if t.tzinfo is None:
        t = t.replace(tzinfo=UTC)
    return t.timestamp()


def _filters(plan: str | None, lot: str | None, since: str | None
             ) -> tuple[str, str, list[Any]]:
    """WHERE fragments over ``runs r`` and over ``checks c`` (same parameters), built from
    fixed text only; the values go in as parameters."""
    runs, checks, params = [], [], []
    if plan is not None:
        runs.append("r.plan_id = ?")
        checks.append("c.def IN (SELECT id FROM check_defs WHERE plan_id = ?)")
        params.append(plan)
    if lot is not None:
        runs.append("r.lot = ?")
        checks.append("c.lot = ?")
        params.append(lot)
    if since is not None:
        runs.append("r.started_epoch >= ?")
        checks.append("c.started_epoch >= ?")
        params.append(parse_since(since))
    return "".join(f" AND {x}" for x in runs), "".join(f" AND {x}" for x in checks), params


def summary(conn: Any, *, plan: str | None = None, lot: str | None = None,
            since: str | None = None) -> Summary:
    """The lot summary over the runs selected by plan id, lot and start time (all when None).

    Definitions: docs/results.md and the module docstring.
    """
    conn = wrap(conn)
    rf, cf, params = _filters(plan, lot, since)
    # one row per unit: attempts, complete runs, complete runs that did not pass, and whether
    # the latest complete run passed (window function: latest first within the complete runs)
    (units_seen, attempts, tested, first, final, retests, retested, finished_cut) = conn.execute(
        f"WITH sel AS (SELECT r.plan_id, r.serial, r.verdict,"
        f" CASE WHEN r.complete = 1 AND NOT {COMPLETE_SQL} THEN 1 ELSE 0 END AS cut,"
        f" CASE WHEN {COMPLETE_SQL} THEN 1 ELSE 0 END AS ok,"
        f" ROW_NUMBER() OVER (PARTITION BY r.plan_id, r.serial, CASE WHEN {COMPLETE_SQL} THEN 1 ELSE 0 END"
        f" ORDER BY r.started_epoch DESC, r.run_id DESC) AS k FROM runs r WHERE 1 = 1{rf}),"
        " u AS (SELECT COUNT(*) AS n, SUM(ok) AS done, SUM(cut) AS cut,"
        " SUM(CASE WHEN ok = 1 AND verdict <> 'pass' THEN 1 ELSE 0 END) AS bad,"
        " MAX(CASE WHEN ok = 1 AND k = 1 AND verdict = 'pass' THEN 1 ELSE 0 END) AS final"
        " FROM sel GROUP BY plan_id, serial)"
        " SELECT COUNT(*), COALESCE(SUM(n), 0), COALESCE(SUM(CASE WHEN done > 0 THEN 1 ELSE 0 END), 0),"
        " COALESCE(SUM(CASE WHEN done > 0 AND bad = 0 THEN 1 ELSE 0 END), 0), COALESCE(SUM(final), 0),"
        " COALESCE(SUM(CASE WHEN done > 1 THEN done - 1 ELSE 0 END), 0),"
        " COALESCE(SUM(CASE WHEN done > 1 THEN 1 ELSE 0 END), 0), COALESCE(SUM(cut), 0) FROM u",
        params).fetchone()
    verdicts = {str(v): int(k) for v, k in conn.execute(
        "SELECT CASE WHEN r.complete = 1 THEN r.verdict ELSE 'incomplete' END AS v, COUNT(*) AS n"
        f" FROM runs r WHERE 1 = 1{rf} GROUP BY 1 ORDER BY 2 DESC, 1", params)}

    defs = {row[0]: row[1:] for row in conn.execute(
        "SELECT id, plan_id, step, measurement, unit, low, high FROM check_defs")}
    false_passes, unstated = conn.execute(
        f"{_latest_complete(rf)} SELECT COALESCE(SUM(c.risk), 0.0),"
        " COALESCE(SUM(CASE WHEN c.risk IS NULL THEN 1 ELSE 0 END), 0)"
        " FROM checks c JOIN runs r ON r.id = c.run"
        " WHERE c.run IN (SELECT id FROM latest) AND r.verdict = 'pass' AND c.verdict = 'pass'",
        params + params).fetchone()  # _latest_complete takes the filter parameters twice
    return Summary(
        expected_false_passes=float(false_passes), risk_unstated=int(unstated),
        plan=plan, lot=lot, since=since, runs=int(attempts),
        incomplete=verdicts.get("incomplete", 0), cut_short=int(finished_cut),
        units_tested=int(tested), units_untested=int(units_seen) - int(tested),
        first_pass=int(first), final_pass=int(final), retests=int(retests),
        units_retested=int(retested), verdicts=verdicts,
        pareto_checks=_pareto_checks(conn, defs, cf, params),
        pareto_reasons=_pareto_reasons(conn, rf, cf, params),
        checks=check_stats(conn, defs, _latest_complete(rf), params + params),
        units=_unit_lines(conn, rf, params) if lot is not None else (),
    )


def _unit_lines(conn, rf, params) -> tuple[UnitLine, ...]:
    """Each unit in scope with its attempts and its latest attempt (window function, both back ends)."""
    rows = conn.execute(
        "WITH sel AS (SELECT r.serial, r.plan_id, r.complete, r.verdict, r.report_path,"
        " COUNT(*) OVER (PARTITION BY r.plan_id, r.serial) AS n,"
        " ROW_NUMBER() OVER (PARTITION BY r.plan_id, r.serial"
        " ORDER BY r.started_epoch DESC, r.run_id DESC) AS k FROM runs r WHERE 1 = 1" + rf + ")"
        " SELECT serial, plan_id, complete, verdict, report_path, n FROM sel WHERE k = 1"
        f" ORDER BY serial, plan_id LIMIT {UNIT_LIST_MAX}", params).fetchall()
    return tuple(UnitLine(serial=str(serial), plan_id=str(plan_id),
                          verdict=str(verdict) if complete and verdict else "incomplete",
                          attempts=int(n), report_path=None if path is None else str(path))
                 for serial, plan_id, complete, verdict, path, n in rows)


def _pareto_checks(conn, defs, cf, params) -> tuple[ParetoCheck, ...]:
    merged: dict[tuple[str, str, str], list[int]] = {}
    for d, fail, err, inc in conn.execute(
            "SELECT c.def, SUM(CASE WHEN c.verdict = 'fail' THEN 1 ELSE 0 END),"
            " SUM(CASE WHEN c.verdict IN ('error', 'aborted') THEN 1 ELSE 0 END),"
            " SUM(CASE WHEN c.verdict = 'inconclusive' THEN 1 ELSE 0 END) FROM checks c"
            f" WHERE c.verdict <> 'pass'{cf} GROUP BY c.def", params):
        acc = merged.setdefault(tuple(defs[d][:3]), [0, 0, 0])
        acc[0] += fail
        acc[1] += err
        acc[2] += inc
    items = [ParetoCheck(*k, *v) for k, v in merged.items()]
    items.sort(key=lambda p: (-p.total, -p.fail, p.plan_id, p.step, p.measurement))
    return tuple(items)


def _pareto_reasons(conn, rf, cf, params) -> tuple[ParetoReason, ...]:
    counts: dict[str, list] = {}

    def add(text: str, n: int, kind: str) -> None:
        acc = counts.setdefault(text, [0, kind])
        acc[0] += n

    for meas, verdict, side, reason, n in conn.execute(
            "SELECT d.measurement, c.verdict,"
            " CASE WHEN c.verdict = 'fail' AND d.high IS NOT NULL AND c.value > d.high THEN 'above'"
            "      WHEN c.verdict = 'fail' THEN 'below' END,"
            " CASE WHEN c.verdict NOT IN ('fail', 'inconclusive') THEN c.reason END,"
            " COUNT(*) FROM checks c JOIN check_defs d ON d.id = c.def"
            f" WHERE c.verdict <> 'pass'{cf} GROUP BY 1, 2, 3, 4", params):
        if verdict == "fail":
            add(f"{meas} {side} the {'high' if side == 'above' else 'low'} limit", n, "fail")
        elif verdict == "inconclusive":
            add(f"{meas} inconclusive (within U of a limit)", n, "inconclusive")
        else:
            add(reason, n, verdict)
    # runs that did not pass without any check saying why (lost instrument, abort, crash)
    for complete, verdict, reason, n in conn.execute(
            "SELECT complete, verdict, reason, COUNT(*) FROM runs r"
            f" WHERE (complete = 0 OR verdict <> 'pass'){rf} AND NOT EXISTS"
            " (SELECT 1 FROM checks c WHERE c.run = r.id AND c.verdict <> 'pass')"
            " GROUP BY 1, 2, 3", params):
        if not complete:
            add("incomplete: run did not finish", n, "incomplete")
        else:
            add(reason or "no reason given", n, verdict or "error")
    items = sorted(counts.items(), key=lambda kv: (-kv[1][0], kv[0]))
    if len(items) > PARETO_TOP:
        rest = sum(v[0] for _, v in items[PARETO_TOP - 1:])
        items = items[:PARETO_TOP - 1] + [("other", [rest, "other"])]
    return tuple(ParetoReason(r, n, kind) for r, (n, kind) in items)


def _latest_complete(rf: str) -> str:
    """A ``WITH`` clause naming ``latest``: the id of each unit's latest complete run in scope
    (takes the filter parameters twice). An anti-join (no later complete run of the same unit
    in scope), which both databases estimate well and run from the runs_latest index."""
    return ("WITH latest AS (SELECT o.id FROM runs o WHERE"
            f" {COMPLETE_SQL.replace('r.', 'o.')}{rf.replace(' r.', ' o.')}"
            " AND NOT EXISTS (SELECT 1 FROM runs r WHERE r.plan_id = o.plan_id"
            f" AND r.serial = o.serial AND {COMPLETE_SQL}{rf}"
            " AND (r.started_epoch > o.started_epoch"
            " OR (r.started_epoch = o.started_epoch AND r.run_id > o.run_id))))")


def fmt_ratio(x: float | None) -> str:
    """A yield as a percentage for printing."""
    return "—" if x is None or not math.isfinite(x) else f"{100.0 * x:.1f} %"
