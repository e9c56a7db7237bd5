"""Time the lot summary over 10⁵ stored runs (target ≤ 2 s, issue "Results database").

Fills a temporary database with synthetic TB-3 runs (five checks each), then times
``ResultsDB.summary()`` unfiltered and filtered by lot. Prints seconds and the ratio to the target.

    .venv/bin/python bench/bench_summary.py [--runs 100000]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from benchgate.store import ResultsDB

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # test data, not product
from synthetic_runs import synthetic_lot  # noqa: E402

TARGET_S = 2.0


def fill(db: ResultsDB, runs: int) -> int:
    """Insert about ``runs`` runs through the public API (begin + finish, as the runner does)."""
    n = 0
    for rec in synthetic_lot(int(runs / 1.05), seed=7):
        db.begin_run(rec)
        db.finish_run(rec, f"reports/tb3/{rec.serial}/{rec.run_id}.json")
        n += 1
    return n


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=100_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "results.sqlite"
        db = ResultsDB.open(path)
        t = time.perf_counter()
        n = fill(db, args.runs)
        fill_s = time.perf_counter() - t
        print(f"filled {n} runs in {fill_s:.1f} s ({path.stat().st_size / 1e6:.1f} MB)")
        db.close()
        db = ResultsDB.open(path)  # fresh connection: no warm statement cache
        for label, kwargs in (("all runs", {}), ("lot L1", {"lot": "L1"}),
                              ("plan tb3 since 2026-11-01", {"plan": "tb3", "since": "2026-11-01"}),
                              ("since 2026-11-14T12:00 (yields counted from the runs)",
                               {"since": "2026-11-14T12:00"})):
            t = time.perf_counter()
            s = db.summary(**kwargs)
            dt = time.perf_counter() - t
            print(f"summary ({label}): {dt:.3f} s over {s.runs} runs, {s.units_tested} units, "
                  f"{len(s.checks)} checks; ratio to the {TARGET_S:.0f} s target {dt / TARGET_S:.2f}")
        db.close()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
