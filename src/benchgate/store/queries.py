"""Questions asked of the results database: a unit's history and a lot summary.

The summary reads rows kept up to date at write time (:mod:`.rollup`: each unit's standing and
the binned values of the latest complete runs) or, with ``since``, has the database aggregate the
selected runs (:mod:`.summary_sql`); Python only finishes the few grouped rows: no Python loop
ever walks the run or check rows themselves.

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

from benchgate.store import summary_sql as sq
from benchgate.store.backend import wrap
from benchgate.store.capability import (  # noqa: F401 - Histogram, cpk, HISTOGRAM_BINS re-exported
    HISTOGRAM_BINS,
    CheckStats,
    Histogram,
    cpk,
    stats_from_bins,
)
from benchgate.store.outcome import is_complete
from benchgate.store.rollup import WHOLE
from benchgate.store.summary_sql import (  # noqa: F401 - re-exported
    PARETO_TOP,
    UNIT_LIST_MAX,
    ParetoCheck,
    ParetoReason,
)

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
class UnitLine:
    """One unit of a lot summary: its latest attempt's verdict and report, and how many attempts.

    ``report_file`` (relative to the station's report folder) and ``report_sha256`` are what a
    central user asks a station for and verifies (store/evidence.py); ``report_path`` is the
    path as the station wrote it."""

    serial: str
    plan_id: str
    verdict: str  # of the latest attempt; 'incomplete' when it never finished
    attempts: int
    report_path: str | None
    report_file: str | None = None
    report_sha256: str | None = None


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


def _filters(plan: str | None, lot: str | None, since: float | None
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
        params.append(since)
    return "".join(f" AND {x}" for x in runs), "".join(f" AND {x}" for x in checks), params


def summary(conn: Any, *, plan: str | None = None, lot: str | None = None,
            since: str | None = None) -> Summary:
    """The lot summary over the runs selected by plan id, lot and start time (all when None).

    Definitions: docs/results.md and the module docstring. The yields, capability and
    expected false passes come from the rows kept up to date at write time (:mod:`.rollup`);
    with ``since`` (after the first run in scope) the yields are counted from the selected runs
    and the values of the part of a day before ``since`` binned from them (:mod:`.summary_sql`).
    """
    conn = wrap(conn)
    t = None if since is None else parse_since(since)
    if t is not None and t <= sq.earliest(conn, lot):
        t = None  # since selects every run: the same summary as without it
    rf, cf, params = _filters(plan, lot, t)
    defs = {row[0]: row[1:] for row in conn.execute(
        "SELECT id, plan_id, step, measurement, unit, low, high, bin_width FROM check_defs")}
    uf = "" if plan is None else " AND u.plan_id = ?"
    up = ([0, lot] if lot is not None else [1, WHOLE]) + ([] if plan is None else [plan])
    if t is None:
        (units_seen, attempts, tested, first, final, retests, retested, finished_cut,
         false_passes, unstated) = sq.maintained_counts(conn, uf, up)
        units = sq.maintained_units(conn, uf, up) if lot is not None else ()
    else:
        (units_seen, attempts, tested, first, final, retests, retested,
         finished_cut) = sq.raw_counts(conn, rf, params)
        false_passes, unstated = sq.since_risk(conn, uf, up, t)
        units = sq.raw_units(conn, rf, params) if lot is not None else ()
    verdicts = {str(v): int(k) for v, k in conn.execute(
        "SELECT CASE WHEN r.complete = 1 THEN r.verdict ELSE 'incomplete' END AS v, COUNT(*) AS n"
        f" FROM runs r WHERE 1 = 1{rf} GROUP BY 1 ORDER BY 2 DESC, 1", params)}
    return Summary(
        expected_false_passes=float(false_passes), risk_unstated=int(unstated),
        plan=plan, lot=lot, since=since, runs=int(attempts),
        incomplete=verdicts.get("incomplete", 0), cut_short=int(finished_cut),
        units_tested=int(tested), units_untested=int(units_seen) - int(tested),
        first_pass=int(first), final_pass=int(final), retests=int(retests),
        units_retested=int(retested), verdicts=verdicts,
        pareto_checks=sq.pareto_checks(conn, defs, cf, params),
        pareto_reasons=sq.pareto_reasons(conn, rf, cf, params),
        checks=stats_from_bins(defs, sq.value_bins(conn, uf, up, plan, t)),
        units=tuple(UnitLine(*u) for u in units),
    )


def fmt_ratio(x: float | None) -> str:
    """A yield as a percentage for printing."""
    return "—" if x is None or not math.isfinite(x) else f"{100.0 * x:.1f} %"
