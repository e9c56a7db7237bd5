"""Soak: 1000 units through the runner in-process (fast in-process bench, real database and
reports), database rows = units, memory growth bounded."""

from __future__ import annotations

import gc
import sqlite3
import tracemalloc

import pytest
from runner_fakes import Station, fake_analyze, make_bench, standard_plan

from benchgate.clock import ManualClock
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner, Services

UNITS = 1000


def _json_only_reports(record, layout, captures):
    from benchgate.report.json_report import write_json

    layout.ensure()
    return {"json": write_json(record, layout.report_path(record.verdict.value, "json"))}


@pytest.mark.soak
def test_thousand_units_rows_and_memory(tmp_path):
    from benchgate.capfile import save_capture
    from benchgate.report.layout import ReportLayout
    from benchgate.store import ResultsDB

    bench = make_bench()
    svc = Services(open_bench=lambda station, clock=None, roles=None: bench, save_capture=save_capture,
                   analyze=fake_analyze, write_reports=_json_only_reports, layout=ReportLayout,
                   open_db=ResultsDB.open)
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock(), unattended=True)
    plan = standard_plan()
    with Runner(plan, Station(), options, services=svc) as runner:
        for i in range(100):  # warm up caches, imports, the database's page cache
            runner.run(f"WARM-{i:04d}")
        gc.collect()
        tracemalloc.start()
        base, _ = tracemalloc.get_traced_memory()
        for i in range(UNITS - 100):
            bench["adc"].frequency = 1100.0 if i % 10 == 0 else 1000.0
            outcome = runner.run(f"SOAK-{i:04d}")
            assert bench.supply.on is False
        gc.collect()
        grown, _ = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        assert outcome.record.verdict.value == "pass"
    conn = sqlite3.connect(options.database)
    (rows,) = conn.execute("SELECT COUNT(*) FROM runs").fetchone()
    conn.close()
    assert rows == UNITS
    # no per-unit state kept by the runner: growth over 900 units stays far below one unit's
    # capture (4000 samples x 8 bytes = 32 kB) per unit
    assert grown - base < 2_000_000, f"memory grew by {grown - base} bytes over {UNITS - 100} units"
