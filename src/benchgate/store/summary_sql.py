"""The SQL of a lot summary: Pareto lists, and the counts read from kept rows or from the runs.

:func:`maintained_counts`, :func:`maintained_units` and :func:`value_bins` read the rows kept
up to date at write time (:mod:`.rollup`). ``since`` keeps a suffix of each unit's runs in
time, so the latest complete run in scope is the unit's latest complete run (over all runs, or
in the lot) when that one started at or after ``since``, and there is none otherwise: the
capability values and expected false passes of a summary with ``since`` come from the kept rows
too (bins of the whole days from ``since`` on, and the database bins the values of the rest of
the day ``since`` falls in). Its yields and counts are counted from the selected runs
(:func:`raw_counts`, :func:`raw_units`: window functions over the runs in scope), since a
unit's first complete run after ``since`` is not kept. Pareto lists count events over the
selected runs and checks (a partial index holds the checks that did not pass).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from benchgate.store.capability import bins_sql
from benchgate.store.outcome import COMPLETE_SQL
from benchgate.store.rollup import DAY_S, day_of

#: Pareto lists keep this many entries; the rest are summed into "other".
PARETO_TOP = 15
#: a lot summary lists at most this many units (the page stays readable; the counts stay whole)
UNIT_LIST_MAX = 5000


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


def earliest(conn: Any, lot: str | None) -> float:
    """The start of the earliest run (of ``lot``), +inf for none: a ``since`` at or before it
    selects every run."""
    if lot is None:
        row = conn.execute("SELECT MIN(started_epoch) FROM runs").fetchone()
    else:
        row = conn.execute("SELECT MIN(started_epoch) FROM runs WHERE lot = ?", (lot,)).fetchone()
    return float("inf") if row[0] is None else float(row[0])


def maintained_counts(conn: Any, uf: str, up: list[Any]) -> tuple:
    """Units seen, attempts, tested, first pass, final pass, retests, units retested, finished
    runs cut short, summed risk of false passes, passed checks with no risk: from ``unit_state``
    (``uf`` / ``up``: the scope and plan filter over ``unit_state u``)."""
    row = conn.execute(
        "SELECT COUNT(*), COALESCE(SUM(attempts), 0),"
        " COALESCE(SUM(CASE WHEN done > 0 THEN 1 ELSE 0 END), 0),"
        " COALESCE(SUM(CASE WHEN done > 0 AND bad = 0 THEN 1 ELSE 0 END), 0),"
        " COALESCE(SUM(final), 0), COALESCE(SUM(CASE WHEN done > 1 THEN done - 1 ELSE 0 END), 0),"
        " COALESCE(SUM(CASE WHEN done > 1 THEN 1 ELSE 0 END), 0), COALESCE(SUM(cut), 0),"
        " COALESCE(SUM(risk), 0.0), COALESCE(SUM(unstated), 0)"
        f" FROM unit_state u WHERE u.whole = ? AND u.lot = ?{uf}", up).fetchone()
    return tuple(row)


def raw_counts(conn: Any, rf: str, params: list[Any]) -> tuple:
    """The first eight of :func:`maintained_counts`, from the runs selected by ``rf``: one row
    per unit (window function: latest first within the complete runs), then summed."""
    return tuple(conn.execute(
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
        params).fetchone())


def since_risk(conn: Any, uf: str, up: list[Any], t: float) -> tuple:
    """Summed risk of false passes and passed checks with no risk of the units whose latest
    complete run in scope started at or after ``t`` (the latest complete runs after ``since``)."""
    return tuple(conn.execute(
        "SELECT COALESCE(SUM(risk), 0.0), COALESCE(SUM(unstated), 0) FROM unit_state u"
        f" WHERE u.whole = ? AND u.lot = ?{uf} AND u.latest_epoch >= ?", up + [t]).fetchone())


def value_bins(conn: Any, uf: str, up: list[Any], plan: str | None, t: float | None) -> list:
    """Bin rows (def, bin, n, s1, s2, vmin, vmax) of the values of the latest complete runs in
    scope: the kept bins summed over their days, from the first whole day after ``t`` on; the
    runs of the part of a day from ``t`` are binned by the database here."""
    pf = "" if plan is None else " AND def IN (SELECT id FROM check_defs WHERE plan_id = ?)"
    sql = ("SELECT def, bin, SUM(n), SUM(s1), SUM(s2), MIN(vmin), MAX(vmax) FROM value_bins"
           f" WHERE whole = ? AND lot = ?{pf}")
    if t is None:
        return conn.execute(sql + " GROUP BY def, bin", up).fetchall()
    day = day_of(t)
    if day * DAY_S < t:
        day += 1  # the first day that starts at or after t
    rows = conn.execute(sql + " AND day >= ? GROUP BY def, bin", up + [day]).fetchall()
    if t < day * DAY_S:
        latest = ("WITH latest AS (SELECT u.latest AS id FROM unit_state u WHERE u.whole = ?"
                  f" AND u.lot = ?{uf} AND u.latest_epoch >= ?"
                  f" AND {conn.floor_real('u.latest_epoch / 86400.0')} < ?)")
        rows += conn.execute(bins_sql(conn, latest), up + [t, day]).fetchall()
    return rows


_UNIT_COLUMNS = ("serial, plan_id, CASE WHEN complete = 1 AND verdict IS NOT NULL THEN verdict"
                 " ELSE 'incomplete' END, n, report_path, report_file, report_sha256")


def maintained_units(conn: Any, uf: str, up: list[Any]) -> list[tuple]:
    """Each unit of the lot (serial order) with its latest attempt, from ``unit_state``."""
    return conn.execute(
        f"SELECT {_UNIT_COLUMNS} FROM (SELECT u.serial, u.plan_id, r.complete, r.verdict,"
        " u.attempts AS n, r.report_path, r.report_file, r.report_sha256 FROM unit_state u"
        f" JOIN runs r ON r.id = u.last WHERE u.whole = ? AND u.lot = ?{uf}) s"
        f" ORDER BY serial, plan_id LIMIT {UNIT_LIST_MAX}", up).fetchall()


def raw_units(conn: Any, rf: str, params: list[Any]) -> list[tuple]:
    """Each unit in scope with its attempts and its latest attempt (window function)."""
    return conn.execute(
        "WITH sel AS (SELECT r.serial, r.plan_id, r.complete, r.verdict, r.report_path,"
        " r.report_file, r.report_sha256, COUNT(*) OVER (PARTITION BY r.plan_id, r.serial) AS n,"
        " ROW_NUMBER() OVER (PARTITION BY r.plan_id, r.serial"
        " ORDER BY r.started_epoch DESC, r.run_id DESC) AS k FROM runs r WHERE 1 = 1" + rf + ")"
        f" SELECT {_UNIT_COLUMNS} FROM sel WHERE k = 1 ORDER BY serial, plan_id"
        f" LIMIT {UNIT_LIST_MAX}", params).fetchall()


def pareto_checks(conn, defs, cf, params) -> tuple[ParetoCheck, ...]:
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


def pareto_reasons(conn, rf, cf, params) -> tuple[ParetoReason, ...]:
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
