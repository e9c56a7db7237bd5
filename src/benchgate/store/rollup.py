"""What the lot summary needs, kept up to date when runs are written (schema version 7).

A summary over 10⁶ runs cannot re-read 10⁷ check rows on every question. So every write that
changes a unit's runs (begin, finish, a run forwarded from a station) also updates, in the same
transaction:

- ``unit_state``: one row per unit and *scope*: the unit over all its runs (``whole = 1``,
  ``lot = ''``) and the unit within each lot it has runs in (``whole = 0``). It holds the counts
  the yields need (attempts, complete runs, complete runs that did not pass, finished runs cut
  short), whether the latest complete run passed, the id of that run (``latest``) and of the
  latest attempt (``last``), and the passed checks' summed risk of a false pass when it passed.
- ``value_bins``: per scope, check definition and UTC day on which the run started, the valid
  values of the units' latest complete runs, binned on a fixed grid of the check
  (:func:`bin_width`): per bin the count,
  the sums of deviations from the bin's centre and of their squares, the least and the largest
  value. Deviations from the bin centre are at most half a bin, so subtracting a retested unit's
  earlier value cancels nothing large, an emptied bin is deleted, and mean and σ are put back
  together from the bins in a numerically safe way (:func:`benchgate.store.capability.stats_from_bins`).
  The day lets a summary ``since`` a day's start read the bins too: ``since`` keeps a suffix of
  each unit's runs in time, so the latest complete run in scope is the unit's latest complete
  run when that one started at or after ``since``.

Each write reads the affected units' rows *before* it changes anything (:func:`before`), makes
its changes, then computes the rows again from the runs and applies the difference
(:func:`after`). On PostgreSQL the units are locked first (a transaction-scoped advisory lock
per unit, in sorted order) and the bins are updated by ``INSERT … ON CONFLICT`` in sorted order,
so concurrent stations neither race nor deadlock. :func:`rebuild` recomputes everything from the
runs and checks (the migration to version 7, and tools that fill tables directly).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

from benchgate.store.outcome import COMPLETE_SQL, is_complete

#: the ``lot`` of the rows that hold a unit over all its runs
WHOLE = ""
#: a check's grid: the bin width is the power of two at or below 1/128 of this reference span
GRID_DIVISIONS = 128
#: seconds of one bin day (UTC days since the epoch)
DAY_S = 86400.0
#: SQL of a value's deviation from its bin's centre, over a row ``v`` of (value, bin, w)
BIN_DEVIATION_SQL = "(v.value - (v.bin + 0.5) * v.w)"

Unit = tuple[str, str]  # (plan id, serial)
Scope = tuple[int, str]  # (whole, lot)
# (attempts, done, bad, cut, final, latest, last, risk, unstated, start of latest)
State = tuple[int, int, int, int, int, Any, Any, float, int, Any]
# the values a unit adds to the bins of a scope: (day of its latest complete run, (def, value)s)
Values = tuple[Any, list[tuple[int, float]]]


def bin_width(low: float | None, high: float | None) -> float:
    """The grid of a check: a power of two near 1/128 to 1/256 of its window (of the one limit's
    size for a one-sided window, of 1 without a usable limit). A power of two makes
    ``floor(x / width)`` exact, so every back end and Python put a value in the same bin."""
    if low is not None and high is not None and high > low:
        ref = high - low
    else:
        ref = abs(low if high is None else high) if (low is not None or high is not None) else 1.0
    if not (math.isfinite(ref) and ref > 0):
        ref = 1.0
    _, e = math.frexp(ref)  # ref = m · 2**e, 0.5 <= m < 1
    return math.ldexp(1.0, e - 1 - int(math.log2(GRID_DIVISIONS)))


def bin_of(x: float, width: float) -> float:
    return float(math.floor(x / width))


def day_of(epoch: float) -> int:
    """The UTC day of a start time (the same as ``floor(epoch / 86400.0)`` in SQL)."""
    return math.floor(epoch / DAY_S)


def lock_units(c: Any, units: Iterable[Unit]) -> list[Unit]:
    """Lock the units (PostgreSQL: advisory locks until commit; SQLite has one writer). Returns
    them sorted, as the database stores them (PostgreSQL has no NUL in text: see backend)."""
    out = sorted({(c.text(p), c.text(s)) for p, s in units})
    for plan_id, serial in out:
        c.lock_key(f"{plan_id}\x1f{serial}")
    return out


def _rows(c: Any, sql: str, keys: list[Any]) -> list[Any]:
    """``sql`` with ``IN ({})`` filled for ``keys``, a few hundred at a time."""
    out: list[Any] = []
    for i in range(0, len(keys), 500):
        part = keys[i:i + 500]
        out += c.execute(sql.format(", ".join("?" * len(part))), part).fetchall()
    return out


def _values(c: Any, runs: Iterable[Any]) -> dict[int, list[tuple[int, float]]]:
    """The valid values of ``runs``: run id -> sorted (def, value)."""
    out: dict[int, list[tuple[int, float]]] = {}
    for run, d, v in _rows(c, "SELECT run, def, value FROM checks WHERE valid = 1 AND value IS NOT"
                              " NULL AND run IN ({})", sorted({r for r in runs if r is not None})):
        out.setdefault(int(run), []).append((int(d), float(v)))
    for v in out.values():
        v.sort()
    return out


def _with_values(states: dict[Unit, dict[Scope, State]], values: dict[int, list]
                 ) -> dict[Unit, dict[Scope, tuple[State, Values]]]:
    return {u: {k: (st, (None, []) if st[5] is None else (day_of(st[9]), values.get(st[5], [])))
                for k, st in scopes.items()} for u, scopes in states.items()}


def _stored(c: Any, units: list[Unit]) -> dict[Unit, dict[Scope, tuple[State, Values]]]:
    states: dict[Unit, dict[Scope, State]] = {u: {} for u in units}
    for plan_id, serial, whole, lot, *state in _rows(
            c, "SELECT plan_id, serial, whole, lot, attempts, done, bad, cut, final, latest, last,"
               " risk, unstated, latest_epoch FROM unit_state WHERE serial IN ({})",
            sorted({s for _, s in units})):
        if (plan_id, serial) in states:
            states[(plan_id, serial)][(int(whole), str(lot))] = _norm(state)
    return _with_values(states, _values(c, (st[5] for x in states.values() for st in x.values())))


def _norm(state: Any) -> State:
    a, d, b, cut, final, latest, last, risk, unstated, epoch = state
    return (int(a), int(d), int(b), int(cut), int(final),
            None if latest is None else int(latest), None if last is None else int(last),
            float(risk), int(unstated), None if epoch is None else float(epoch))


def _computed(c: Any, units: list[Unit]) -> dict[Unit, dict[Scope, tuple[State, Values]]]:
    runs: dict[Unit, list] = {u: [] for u in units}
    for plan_id, serial, *r in _rows(
            c, "SELECT plan_id, serial, id, run_id, lot, started_epoch, complete, cut_short, verdict"
               " FROM runs WHERE serial IN ({})", sorted({s for _, s in units})):
        if (plan_id, serial) in runs:
            runs[(plan_id, serial)].append(r)
    states: dict[Unit, dict[Scope, Any]] = {}
    for unit, rs_all in runs.items():
        rs_all.sort(key=lambda r: (r[3], r[1]))  # time order; ties by run id (as the summary)
        scopes: dict[Scope, list] = {(1, WHOLE): rs_all} if rs_all else {}
        for r in rs_all:
            if r[2] is not None:
                scopes.setdefault((0, str(r[2])), []).append(r)
        states[unit] = {}
        for scope, rs in scopes.items():
            ok = [r for r in rs if is_complete(bool(r[4]), r[5], r[6])]
            latest = ok[-1] if ok else None
            states[unit][scope] = [
                len(rs), len(ok), sum(1 for r in ok if r[6] != "pass"),
                sum(1 for r in rs if r[4] and not is_complete(True, r[5], r[6])),
                int(latest is not None and latest[6] == "pass"),
                None if latest is None else int(latest[0]), int(rs[-1][0]), 0.0, 0,
                None if latest is None else float(latest[3])]
    # the passed checks' risks of the latest complete runs that passed
    passed = sorted({st[5] for x in states.values() for st in x.values() if st[4]})
    risks = {int(run): (float(r), int(n)) for run, r, n in _rows(
        c, "SELECT run, COALESCE(SUM(risk), 0.0), COALESCE(SUM(CASE WHEN risk IS NULL THEN 1"
           " ELSE 0 END), 0) FROM checks WHERE verdict = 'pass' AND run IN ({}) GROUP BY run",
        passed)}
    for x in states.values():
        for st in x.values():
            if st[4]:
                st[7], st[8] = risks.get(st[5], (0.0, 0))
    done = {u: {k: tuple(st) for k, st in x.items()} for u, x in states.items()}
    return _with_values(done, _values(c, (st[5] for x in done.values() for st in x.values())))


def before(c: Any, units: Iterable[Unit]) -> dict[Unit, Any]:
    """Lock ``units`` and read what they contribute now; pass the result to :func:`after`."""
    return _stored(c, lock_units(c, units))


def after(c: Any, was: dict[Unit, Any]) -> None:
    """Recompute the units of ``was`` from their runs and apply the difference."""
    bins: dict[tuple[int, str, int, float, int], list] = {}
    widths: dict[int, float] = {}
    puts: list[tuple] = []
    drops: list[tuple] = []

    def width(d: int) -> float:
        if d not in widths:
            widths.update((int(i), float(w)) for i, w in c.execute(
                "SELECT id, bin_width FROM check_defs").fetchall())
        return widths[d]

    def put(scope: Scope, values: Values, sign: int) -> None:
        day, items = values
        for d, x in items:
            w = width(d)
            b = bin_of(x, w)
            acc = bins.setdefault((scope[0], scope[1], d, b, day), [0, 0.0, 0.0, [], []])
            dev = x - (b + 0.5) * w
            acc[0] += sign
            acc[1] += sign * dev
            acc[2] += sign * dev * dev
            acc[3 if sign > 0 else 4].append(x)

    now = _computed(c, sorted(was))
    for unit, old in sorted(was.items()):
        new = now[unit]
        for scope in sorted(set(old) | set(new)):
            o, n = old.get(scope), new.get(scope)
            if o == n:
                continue
            key = (scope[0], scope[1], unit[1], unit[0])
            if n is None:
                drops.append(key)
            else:
                puts.append(key + n[0])
            if (o and o[1]) != (n and n[1]):
                put(scope, o[1] if o else (None, []), -1)
                put(scope, n[1] if n else (None, []), +1)
    if drops:
        c.executemany("DELETE FROM unit_state WHERE whole = ? AND lot = ? AND serial = ?"
                      " AND plan_id = ?", drops)
    if puts:
        c.executemany(
            "INSERT INTO unit_state (whole, lot, serial, plan_id, attempts, done, bad, cut,"
            " final, latest, last, risk, unstated, latest_epoch)"
            " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)"
            " ON CONFLICT (whole, lot, serial, plan_id) DO UPDATE SET attempts ="
            " excluded.attempts, done = excluded.done, bad = excluded.bad, cut = excluded.cut,"
            " final = excluded.final, latest = excluded.latest, last = excluded.last,"
            " risk = excluded.risk, unstated = excluded.unstated,"
            " latest_epoch = excluded.latest_epoch", puts)
    if bins:
        _apply_bins(c, bins, width)


def _apply_bins(c: Any, bins: dict[tuple, list], width: Any) -> None:
    """Add the deltas to the bins (one upsert each, in key order: no deadlock between writers);
    delete emptied bins; read a bin's least and largest value again when one of them left."""
    keys = sorted(bins)
    rows = []
    for key in keys:
        dn, ds1, ds2, added, removed = bins[key]
        rows.append(key + (dn, ds1, ds2, min(added, default=math.inf), max(added, default=-math.inf)))
    got = c.executemany_returning(
        "INSERT INTO value_bins (whole, lot, def, bin, day, n, s1, s2, vmin, vmax) VALUES"
        " (?, ?, ?, ?, ?, ?, ?, ?, ?, ?) ON CONFLICT (whole, lot, def, bin, day) DO UPDATE SET"
        " n = value_bins.n + excluded.n, s1 = value_bins.s1 + excluded.s1,"
        " s2 = value_bins.s2 + excluded.s2,"
        " vmin = CASE WHEN excluded.vmin < value_bins.vmin THEN excluded.vmin ELSE value_bins.vmin END,"
        " vmax = CASE WHEN excluded.vmax > value_bins.vmax THEN excluded.vmax ELSE value_bins.vmax END"
        " RETURNING n, vmin, vmax", rows)
    for key, row in zip(keys, got, strict=True):
        removed = bins[key][4]
        n, vmin, vmax = int(row[0]), float(row[1]), float(row[2])
        if n <= 0:
            c.execute("DELETE FROM value_bins WHERE whole = ? AND lot = ? AND def = ? AND bin = ?"
                      " AND day = ?", key)
        elif removed and vmin != vmax and (min(removed) <= vmin or max(removed) >= vmax):
            # a bin's least or largest value left it: read the bin's values again (one bin,
            # through the index on (def, value); the unit rows already point at the new runs)
            whole, lot, d, b, day = key
            w = width(d)
            lo, hi = c.execute(
                "SELECT MIN(c.value), MAX(c.value) FROM checks c JOIN unit_state u ON u.latest = c.run"
                " WHERE u.whole = ? AND u.lot = ? AND c.def = ? AND c.valid = 1 AND c.value >= ?"
                f" AND c.value < ? AND {c.floor_real('u.latest_epoch / 86400.0')} = ?",
                (whole, lot, d, b * w, (b + 1) * w, day)).fetchone()
            if lo is not None:
                c.execute("UPDATE value_bins SET vmin = ?, vmax = ? WHERE whole = ? AND lot = ?"
                          " AND def = ? AND bin = ? AND day = ?", (lo, hi) + key)


# --------------------------------------------------------------------------- rebuild

def fill_bin_widths(c: Any) -> None:
    for d, low, high in c.execute(
            "SELECT id, low, high FROM check_defs WHERE bin_width IS NULL").fetchall():
        c.execute("UPDATE check_defs SET bin_width = ? WHERE id = ?", (bin_width(low, high), d))


def rebuild(c: Any) -> None:
    """Recompute ``unit_state`` and ``value_bins`` from the runs and checks (set-based SQL)."""
    fill_bin_widths(c)
    c.execute("DELETE FROM value_bins")
    c.execute("DELETE FROM unit_state")
    ok = f"CASE WHEN {COMPLETE_SQL} THEN 1 ELSE 0 END"
    for whole in (1, 0):
        part = "r.plan_id, r.serial" if whole else "r.plan_id, r.serial, r.lot"
        lot = f"'{WHOLE}'" if whole else "r.lot"
        c.execute(
            "INSERT INTO unit_state (whole, lot, serial, plan_id, attempts, done, bad, cut, final,"
            " latest, last, risk, unstated, latest_epoch)"
            f" WITH sel AS (SELECT r.id, r.plan_id, r.serial, {lot} AS lot,"
            f" r.verdict, r.started_epoch, {ok} AS ok,"
            f" CASE WHEN r.complete = 1 AND NOT {COMPLETE_SQL} THEN 1 ELSE 0 END AS cut,"
            f" ROW_NUMBER() OVER (PARTITION BY {part}, {ok}"
            " ORDER BY r.started_epoch DESC, r.run_id DESC) AS k,"
            f" ROW_NUMBER() OVER (PARTITION BY {part} ORDER BY r.started_epoch DESC, r.run_id DESC)"
            f" AS k_any FROM runs r{'' if whole else ' WHERE r.lot IS NOT NULL'})"
            f" SELECT {whole}, lot, serial, plan_id, COUNT(*), SUM(ok),"
            " SUM(CASE WHEN ok = 1 AND verdict <> 'pass' THEN 1 ELSE 0 END), SUM(cut),"
            " MAX(CASE WHEN ok = 1 AND k = 1 AND verdict = 'pass' THEN 1 ELSE 0 END),"
            " MAX(CASE WHEN ok = 1 AND k = 1 THEN id END), MAX(CASE WHEN k_any = 1 THEN id END),"
            " 0.0, 0, MAX(CASE WHEN ok = 1 AND k = 1 THEN started_epoch END)"
            " FROM sel GROUP BY lot, serial, plan_id")
    c.execute(
        "UPDATE unit_state SET risk = a.risk, unstated = a.unstated FROM (SELECT c.run,"
        " COALESCE(SUM(c.risk), 0.0) AS risk, SUM(CASE WHEN c.risk IS NULL THEN 1 ELSE 0 END)"
        " AS unstated FROM checks c WHERE c.verdict = 'pass' GROUP BY c.run) a"
        " WHERE a.run = unit_state.latest AND unit_state.final = 1")
    b = c.floor_real("c.value / d.bin_width")
    dev = BIN_DEVIATION_SQL
    c.execute(
        "INSERT INTO value_bins (whole, lot, def, bin, day, n, s1, s2, vmin, vmax)"
        f" SELECT v.whole, v.lot, v.def, v.bin, v.day, COUNT(*), SUM({dev}), SUM({dev} * {dev}),"
        " MIN(v.value), MAX(v.value) FROM (SELECT u.whole, u.lot, c.def, c.value,"
        f" d.bin_width AS w, {b} AS bin, {c.floor_real('u.latest_epoch / 86400.0')} AS day"
        " FROM unit_state u JOIN checks c ON c.run = u.latest"
        " JOIN check_defs d ON d.id = c.def WHERE c.valid = 1 AND c.value IS NOT NULL) v"
        " GROUP BY v.whole, v.lot, v.def, v.bin, v.day")
