"""PostgreSQL results database: lot summary over 10⁶ runs, forwarding throughput, per-unit cost.

Targets (issue "Several stations, one results database"):

- lot summary over 10⁶ stored runs with 10 checks each, on PostgreSQL: ≤ 2 s;
- forwarding throughput: runs per second from a station's queue to the server (no target);
- per-unit overhead of writing through to PostgreSQL on loopback, beyond SQLite alone: ≤ 50 ms.

Uses the server named by ``BENCHGATE_BENCH_PG_URL``, or starts a throw-away cluster
(tests/pg_cluster.py: Unix socket, so "loopback" here is a local socket). The 10⁶ runs are made
on the server with ``generate_series`` (the public write path would take hours), through the
same schema and indexes as any database; the rows the write path keeps for the summary
(store/rollup.py) are then computed for all of them at once, as migrating to schema 7 does.
A summary with ``since`` counts its yields from the selected runs (docs/results.md), so it
is slower the more runs it selects. Prints seconds and ratios to the targets.

    .venv/bin/python bench/bench_pg.py [--runs 1000000] [--units 200] [--queue 2000]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
import uuid
from pathlib import Path

from benchgate.store import ResultsDB, rollup
from benchgate.store.forward import ForwardingDB, send_pending

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # test data, not product
import pg_cluster  # noqa: E402
from synthetic_runs import synthetic_lot  # noqa: E402

SUMMARY_TARGET_S = 2.0
OVERHEAD_TARGET_S = 0.050


def fresh_schema(base_url: str) -> str:
    from urllib.parse import quote

    import psycopg

    name = f"bench_{uuid.uuid4().hex[:8]}"
    with psycopg.connect(base_url, autocommit=True) as conn:
        conn.execute(f'CREATE SCHEMA "{name}"')
    sep = "&" if "?" in base_url else "?"
    return f"{base_url}{sep}options={quote(f'-c search_path={name}')}"


def fill_server_side(url: str, runs: int, checks: int = 10) -> float:
    """``runs`` runs of ``checks`` checks each, made by the server; returns seconds taken."""
    t = time.perf_counter()
    with ResultsDB.open(url) as db:
        c = db.conn
        c.execute("INSERT INTO check_defs (plan_id, step, measurement, unit, low, high)"
                  f" SELECT 'tb3', 'step-' || g, 'm' || g, 'V', 4.0, 6.0 FROM generate_series(1, {checks}) g")
        idx = c.execute("SELECT indexname, indexdef FROM pg_indexes WHERE schemaname = current_schema()"
                        " AND tablename IN ('runs', 'checks') AND indexname NOT LIKE '%pkey'"
                        " AND indexname NOT LIKE '%run_id_key'").fetchall()
        for name, _ in idx:
            c.execute(f'DROP INDEX "{name}"')
        # about 5 % of the units tested twice, 1 % of runs cut short, 3 % failing
        c.execute(
            "INSERT INTO runs (run_id, serial, plan_id, plan_version, plan_hash, started,"
            " started_epoch, complete, verdict, lot, cut_short, sent)"
            " SELECT 'r' || g, 'TB3-' || (g % (? * 95 / 100)), 'tb3', '1', 'h', '2026-11-02T08:00:00Z',"
            " 1793606400 + g * 20, CASE WHEN g % 500 = 0 THEN 0 ELSE 1 END,"
            " CASE WHEN g % 500 = 0 THEN NULL WHEN g % 33 = 0 THEN 'fail' ELSE 'pass' END,"
            " 'L' || (g / 100000), CASE WHEN g % 101 = 0 THEN 'station error' END, 0"
            " FROM generate_series(1, ?) g", (runs, runs))
        c.execute(
            "INSERT INTO checks (run, seq, def, lot, started_epoch, value, uncertainty, valid, verdict,"
            " reason) SELECT r.id, d.id - 1, d.id, r.lot, r.started_epoch, 5.0 + 0.2 * random(), 0.01,"
            " 1, CASE WHEN r.verdict = 'fail' AND d.id = 1 THEN 'fail' ELSE 'pass' END, 'ok'"
            " FROM runs r CROSS JOIN check_defs d WHERE r.complete = 1")
        for _, definition in idx:
            c.execute(definition)
        # the rows a write keeps up to date, computed for the whole fill at once (as migrating
        # a database to schema 7 does)
        r = time.perf_counter()
        rollup.rebuild(c)
        print(f"  (of which the summary's kept rows, rebuilt: {time.perf_counter() - r:.0f} s)")
        c.execute("ANALYZE")
    return time.perf_counter() - t


def bench_summary(url: str, runs: int) -> None:
    fill_s = fill_server_side(url, runs)
    print(f"made {runs} runs (10 checks each) on the server in {fill_s:.0f} s")
    with ResultsDB.open(url) as db:
        for label, kwargs in (("all runs", {}), ("all runs, again", {}), ("lot L3", {"lot": "L3"}),
                              ("plan tb3, lot L3", {"plan": "tb3", "lot": "L3"}),
                              ("since 2027-04-01, yields counted from the runs",
                               {"since": "2027-04-01"}),
                              ("lot L9 since 2027-06-10T12:00, part of a day binned from the runs",
                               {"lot": "L9", "since": "2027-06-10T12:00"})):
            t = time.perf_counter()
            s = db.summary(**kwargs)
            dt = time.perf_counter() - t
            print(f"summary ({label}): {dt:.2f} s over {s.runs} runs, {s.units_tested} units, "
                  f"{len(s.checks)} checks; ratio to the {SUMMARY_TARGET_S:.0f} s target "
                  f"{dt / SUMMARY_TARGET_S:.2f}")


def bench_forwarding(url: str, n: int, tmp: Path) -> None:
    with ResultsDB.open(tmp / "queue.sqlite") as local, ResultsDB.open(url) as central:
        for rec in synthetic_lot(n, seed=3, retest_fraction=0.0):
            local.finish_run(rec, None)
        t = time.perf_counter()
        r = send_pending(local, central)
        dt = time.perf_counter() - t
    print(f"forwarding: {r.sent} runs (5 checks each) in {dt:.2f} s = {r.sent / dt:.0f} runs/s")


def bench_overhead(url: str, units: int, tmp: Path) -> None:
    recs = list(synthetic_lot(2 * units, seed=4, retest_fraction=0.0))

    def per_unit(db, batch) -> list[float]:
        out = []
        for rec in batch:
            t = time.perf_counter()
            db.begin_run(rec)
            db.finish_run(rec, None)
            out.append(time.perf_counter() - t)
        return out

    with ResultsDB.open(tmp / "alone.sqlite") as alone:
        base = per_unit(alone, recs[:units])
    told: list[str] = []
    with ForwardingDB(ResultsDB.open(tmp / "station.sqlite"), url, notify=told.append) as fwd:
        through = per_unit(fwd, recs[units:])
    extra = statistics.median(through) - statistics.median(base)
    print(f"per unit: SQLite alone {1e3 * statistics.median(base):.1f} ms, with write-through to "
          f"PostgreSQL {1e3 * statistics.median(through):.1f} ms (medians of {units}); overhead "
          f"{1e3 * extra:.1f} ms, ratio to the 50 ms target {extra / OVERHEAD_TARGET_S:.2f}"
          + (f"; messages: {told}" if told else ""))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=1_000_000)
    ap.add_argument("--units", type=int, default=200)
    ap.add_argument("--queue", type=int, default=2000)
    args = ap.parse_args()
    base = os.environ.get("BENCHGATE_BENCH_PG_URL")
    cluster = None
    if not base:
        cluster = pg_cluster.start()
        base = cluster.url()
    try:
        with tempfile.TemporaryDirectory() as tmp:
            bench_overhead(fresh_schema(base), args.units, Path(tmp))
            bench_forwarding(fresh_schema(base), args.queue, Path(tmp))
            bench_summary(fresh_schema(base), args.runs)
    finally:
        if cluster is not None:
            cluster.destroy()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
