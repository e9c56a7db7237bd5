"""Reanalysis: stored captures re-judged against another plan version, without hardware."""

from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
from runner_fakes import (
    Check,
    FakeLayout,
    Station,
    fake_analyze,
    fake_write_reports,
    freq_window,
    make_bench,
    services,
    standard_plan,
)

from benchgate.analysis.capture import Capture
from benchgate.clock import ManualClock
from benchgate.judge.rules import Verdict
from benchgate.record import UnitRecord
from benchgate.runner.options import RunOptions
from benchgate.runner.reanalyze import reanalyze
from benchgate.runner.session import Runner


def read_report(path):
    return UnitRecord.from_dict(json.loads(path.read_text()))


def load_capture(path):
    z = np.load(path)
    return Capture(z["samples"], float(z["sample_rate"]))


def stored_run(tmp_path):
    svc, _ = services(make_bench(frequency=1000.0))
    with Runner(standard_plan(), Station(), RunOptions(reports_dir=tmp_path, clock=ManualClock()),
                services=svc) as runner:
        return runner.run("SN7")


def new_plan(window):
    plan = standard_plan(version="2", hash="1" * 64)
    steps = list(plan.steps)
    steps[2] = replace(steps[2], checks=(Check("frequency", window),))
    return replace(plan, steps=tuple(steps))


def again(outcome, plan):
    return reanalyze(outcome.paths["json"], plan, read_report=read_report, load_capture=load_capture,
                     analyze=fake_analyze, write_reports=fake_write_reports, layout_factory=FakeLayout)


def test_tighter_window_turns_pass_into_fail(tmp_path):
    first = stored_run(tmp_path)
    assert first.record.verdict == Verdict.PASS
    second = again(first, new_plan(freq_window(1001.0, 1010.0)))
    rec = second.record
    assert rec.verdict == Verdict.FAIL and second.exit_code == 1
    assert rec.reason.startswith("reanalysis: tone: frequency") and "below" in rec.reason
    assert rec.reanalysis_of["run_id"] == first.record.run_id
    assert rec.reanalysis_of["plan_version"] == "1" and rec.plan_version == "2"
    assert rec.reanalysis_of["report"] == str(first.paths["json"])
    assert rec.flags["reanalysis"] is True
    # the stored reading is re-judged as measured; supply/wait steps keep their outcome
    assert [s.status for s in rec.steps] == ["done", "done", "failed", "done"]
    written = json.loads(second.paths["json"].read_text())
    assert written["reanalysis_of"]["run_id"] == first.record.run_id


def test_same_plan_gives_same_verdict(tmp_path):
    first = stored_run(tmp_path)
    second = again(first, standard_plan())
    assert second.record.verdict == Verdict.PASS
    assert [c.result.value for c in second.record.checks()] == [c.result.value for c in first.record.checks()]


def test_tampered_capture_is_error_never_pass(tmp_path):
    first = stored_run(tmp_path)
    cap = first.paths["json"].parent / first.record.steps[2].capture.file
    cap.write_bytes(cap.read_bytes() + b"x")
    second = again(first, standard_plan())
    assert second.record.verdict == Verdict.ERROR
    assert "SHA-256" in second.record.reason
