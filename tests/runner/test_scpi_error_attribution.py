"""A whole run on the understudy bench: a SCPI error is blamed on the command that caused it.

The issue's case: an entry queued by an earlier supply command was found by the closing
``OUTP OFF`` and turned a passing unit into an error blamed on ``OUTP OFF``.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from benchgate.judge.rules import Verdict
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

REPO = Path(__file__).resolve().parents[2]
SPEED = 5.0


@pytest.fixture(scope="module")
def plan():
    from benchgate.plan import load_plan

    return load_plan(REPO / "testplans" / "tb3.yaml")


def run_one(tmp_path, plan, arm):
    from benchgate.instruments.station import load_station
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path / "vb") as vb:
        vb.load_unit("OH-ATTR-1")
        options = RunOptions(reports_dir=tmp_path / "r", unattended=True, clock=vb.clock)
        with Runner(plan, load_station(vb.station_path), options) as runner:
            arm(vb.faults.scpi)
            outcome = runner.run("OH-ATTR-1")
        assert vb.supply_output is False
    return outcome.record


def test_error_of_the_output_query_does_not_fail_the_unit_at_output_off(tmp_path, plan):
    # the start-up capture asks OUTP? first; an entry it leaves belongs to OUTP?, which the
    # runner already treats as "cannot tell, switch off to be sure", so the unit still passes
    rec = run_one(tmp_path, plan, lambda f: f.error_on("supply", "OUTP?", -221, "Settings conflict"))
    assert rec.verdict == Verdict.PASS, rec.reason


def test_error_of_a_reading_is_that_reading_s_error(tmp_path, plan):
    rec = run_one(tmp_path, plan, lambda f: f.error_on("supply", "MEAS:CURR?", -221, "Settings conflict"))
    assert rec.verdict == Verdict.ERROR
    bad = [c for c in rec.checks() if c.verdict == Verdict.ERROR]
    assert [c.measurement for c in bad] == ["supply_current"]
    assert "'MEAS:CURR?' rejected: -221" in bad[0].result.reason
    assert "OUTP" not in (rec.reason or "")
    assert all(s.status != "error" for s in rec.steps if s.kind == "supply")
