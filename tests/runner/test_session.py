"""The runner against in-test stand-ins: verdicts, on_fail, retries, faults, safety, records."""

from __future__ import annotations

import json
from dataclasses import replace

import pytest
from runner_fakes import (
    Check,
    Station,
    Step,
    freq_window,
    make_bench,
    no_input,
    services,
    standard_plan,
    terminal,
)

from benchgate.clock import ManualClock
from benchgate.errors import InstrumentError
from benchgate.judge.rules import Verdict
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner


def run(plan, bench, tmp_path, serial="SN1", db=None, ask=no_input, ui="quiet", **opts):
    from benchgate.cli.terminal import make_display

    svc, db = services(bench, db)
    opts.setdefault("clock", ManualClock())
    options = RunOptions(reports_dir=tmp_path, **opts)
    with Runner(plan, Station(), options, services=svc, attendant=terminal(ask, make_display(ui))) as runner:
        outcome = runner.run(serial)
    return outcome, db


def test_good_unit_passes_and_supply_ends_off(tmp_path):
    bench = make_bench(frequency=1000.0)
    outcome, db = run(standard_plan(), bench, tmp_path)
    rec = outcome.record
    assert rec.verdict == Verdict.PASS, rec.reason
    assert outcome.exit_code == 0
    assert [s.status for s in rec.steps] == ["done"] * 4
    assert rec.reason == "all 2 checks passed"
    # power_on: acquisition started while the supply was still off, then it was switched on
    assert bench["adc"].supply_on_at_start == [False]
    assert "on" in bench.supply.log
    assert bench.supply.on is False and bench.exited
    row = db.rows[rec.run_id]
    assert row["complete"] and row["verdict"] == "pass"
    assert outcome.paths["json"].exists()
    assert rec.steps[2].capture is not None and len(rec.steps[2].capture.sha256) == 64
    assert (outcome.paths["json"].parent / rec.steps[2].capture.file).exists()


def test_wrong_frequency_fails_with_reason(tmp_path):
    outcome, db = run(standard_plan(), make_bench(frequency=1100.0), tmp_path)
    rec = outcome.record
    assert rec.verdict == Verdict.FAIL and outcome.exit_code == 1
    assert rec.reason.startswith("tone: frequency") and "above" in rec.reason
    # on_fail: stop (the default of the stand-in steps) -> the current reading never ran
    assert rec.steps[2].status == "failed" and rec.steps[3].status == "skipped"
    assert db.rows[rec.run_id]["verdict"] == "fail"


def test_on_fail_continue_runs_the_rest(tmp_path):
    plan = standard_plan()
    steps = list(plan.steps)
    steps[2] = replace(steps[2], on_fail="continue")
    outcome, _ = run(replace(plan, steps=tuple(steps)), make_bench(frequency=1100.0), tmp_path)
    assert [s.status for s in outcome.record.steps] == ["done", "done", "failed", "done"]
    assert outcome.record.verdict == Verdict.FAIL


def test_retry_notes_every_attempt(tmp_path):
    plan = standard_plan()
    steps = list(plan.steps)
    steps[2] = replace(steps[2], retries=2, retry_prompt="Re-seat the board")
    bench = make_bench(frequency=1100.0)
    answers = []

    def ask(prompt):
        answers.append(prompt)
        bench["adc"].frequency = 1000.0  # the operator fixed it
        return ""

    outcome, _ = run(replace(plan, steps=tuple(steps)), bench, tmp_path, ask=ask)
    tone = outcome.record.steps[2]
    assert tone.attempts == 2 and tone.status == "done"
    assert any(n.startswith("attempt 1: failed") for n in tone.notes)
    assert any("Re-seat the board" in n for n in tone.notes)
    assert "Re-seat the board" in answers[0]
    assert outcome.record.verdict == Verdict.PASS
    assert "capture:tone" in outcome.paths and "capture:tone-2" in outcome.paths


def test_unattended_retry_does_not_ask(tmp_path):
    plan = standard_plan()
    steps = list(plan.steps)
    steps[2] = replace(steps[2], retries=1)

    def ask(prompt):
        raise AssertionError("unattended runs never ask")

    outcome, _ = run(replace(plan, steps=tuple(steps)), make_bench(frequency=1100.0), tmp_path,
                     ask=ask, unattended=True)
    tone = outcome.record.steps[2]
    assert tone.attempts == 2 and tone.status == "failed"
    assert any("unattended" in n for n in tone.notes)


def test_unattended_prompt_without_answer_is_error_and_supply_off(tmp_path):
    plan = standard_plan()
    steps = (plan.steps[0], Step("on", "supply", "power", output=True),
             Step("look", "prompt", "look at the LED", text="Is the LED lit?", ask=True, expect="yes"),
             *plan.steps[2:])
    bench = make_bench()
    outcome, db = run(replace(plan, steps=steps), bench, tmp_path, unattended=True)
    rec = outcome.record
    assert rec.verdict == Verdict.ERROR and outcome.exit_code == 3
    assert "unattended_answer" in rec.reason and "Is the LED lit?" in rec.reason
    assert rec.steps[2].status == "error" and rec.steps[3].status == "skipped"
    assert bench.supply.on is False and "on" in bench.supply.log
    assert db.rows[rec.run_id]["complete"]


def test_unattended_prompt_with_scripted_answer(tmp_path):
    plan = standard_plan()
    steps = (Step("look", "prompt", "look", text="Is the LED lit?", ask=True, expect="yes",
                  unattended_answer="yes"), *plan.steps)
    outcome, _ = run(replace(plan, steps=steps), make_bench(), tmp_path, unattended=True)
    assert outcome.record.verdict == Verdict.PASS
    assert outcome.record.steps[0].answer == "yes"


def powered_plan(on_fail="continue", **prompt):
    """A fixture prompt, then the supply switched on and a capture (as in the TB-3 plan)."""
    return standard_plan(steps=(
        Step("place", "prompt", "place the board", text="Place the board in the fixture", ask=True,
             expect="yes", on_fail=on_fail, **prompt),
        Step("power", "supply", "switch on", voltage=9.0, output=True, on_fail=on_fail),
        Step("tone", "capture", "capture the tone", duration=0.2, on_fail=on_fail,
             checks=(Check("frequency", freq_window()),)),
    ))


@pytest.mark.parametrize("on_fail", ["continue", "stop"])
def test_prompt_answered_against_expect_aborts_and_never_powers_the_unit(tmp_path, on_fail):
    replies = iter(["maybe", "n"])
    bench = make_bench()
    outcome, db = run(powered_plan(on_fail), bench, tmp_path, ask=lambda p: next(replies))
    rec = outcome.record
    assert "on" not in bench.supply.log and bench.supply.on is False  # never switched on
    assert bench["adc"].supply_on_at_start == []  # nothing was measured
    assert rec.steps[0].answer == "no" and rec.steps[0].status == "aborted"
    assert [s.status for s in rec.steps[1:]] == ["skipped", "skipped"]
    assert rec.verdict == Verdict.ABORTED and outcome.exit_code == 130
    assert rec.reason.startswith("place: answer 'no' to 'Place the board in the fixture'")
    assert db.rows[rec.run_id]["verdict"] == "aborted"


def test_unattended_answer_against_expect_aborts_too(tmp_path):
    bench = make_bench()
    outcome, _ = run(powered_plan(unattended_answer="no"), bench, tmp_path, unattended=True)
    assert outcome.record.verdict == Verdict.ABORTED and "on" not in bench.supply.log


def test_plan_may_let_a_wrong_answer_continue(tmp_path):
    replies = iter(["n"])
    bench = make_bench()
    outcome, _ = run(powered_plan("continue", on_wrong_answer="continue"), bench, tmp_path,
                     ask=lambda p: next(replies))
    rec = outcome.record
    assert rec.steps[0].status == "failed" and [s.status for s in rec.steps[1:]] == ["done", "done"]
    assert rec.verdict == Verdict.FAIL and "Place the board" in rec.reason


def test_adc_lost_mid_capture_keeps_partial_and_switches_off(tmp_path):
    bench = make_bench()
    bench["adc"].disconnect_after = 0.5
    outcome, db = run(standard_plan(), bench, tmp_path)
    rec = outcome.record
    assert rec.verdict == Verdict.ERROR and outcome.exit_code == 3
    assert rec.reason.startswith("adc: serial port went away")
    tone = rec.steps[2]
    assert tone.status == "error" and tone.capture is not None and tone.capture.samples == 2000
    assert bench.supply.on is False
    assert db.rows[rec.run_id]["complete"] and db.rows[rec.run_id]["verdict"] == "error"
    assert outcome.paths["json"].exists()


def test_scpi_error_during_setup_names_the_code(tmp_path):
    bench = make_bench()
    bench.supply.fail_set_voltage = InstrumentError("supply", "SOUR:VOLT 9 refused", code=-222,
                                                    code_text="Data out of range")
    outcome, db = run(standard_plan(), bench, tmp_path)
    assert outcome.record.verdict == Verdict.ERROR
    assert "-222" in outcome.record.reason and "Data out of range" in outcome.record.reason
    assert outcome.record.reason.startswith("supply:")
    assert db.rows[outcome.record.run_id]["complete"]


def test_ctrl_c_during_wait_is_aborted_with_evidence(tmp_path):
    class InterruptingClock(ManualClock):
        def sleep(self, seconds):
            super().sleep(seconds)
            if self.monotonic() > 0.5:
                raise KeyboardInterrupt

    plan = standard_plan()
    steps = (plan.steps[0], Step("on", "supply", "power", output=True), *plan.steps[1:])
    bench = make_bench()
    outcome, db = run(replace(plan, steps=steps), bench, tmp_path, clock=InterruptingClock())
    rec = outcome.record
    assert rec.verdict == Verdict.ABORTED and outcome.exit_code == 130
    assert "Ctrl-C" in rec.reason and "warm" in rec.reason
    assert rec.steps[2].status == "aborted"
    assert bench.supply.on is False and bench.supply.log[-1] == "off"
    assert db.rows[rec.run_id]["complete"] and db.rows[rec.run_id]["verdict"] == "aborted"
    assert json.loads(outcome.paths["json"].read_text())["verdict"] == "aborted"


def test_lost_off_command_is_retried(tmp_path):
    bench = make_bench()
    bench.supply.fail_off = 1
    outcome, _ = run(standard_plan(), bench, tmp_path)
    assert bench.supply.on is False
    assert any("attempt 1" in n for n in outcome.record.flags["safe_state"])


def test_bench_that_cannot_open_is_error_with_row(tmp_path):
    from benchgate.runner.session import Services

    def refuse(station, clock=None, roles=None):
        raise InstrumentError("adc", "no such port /dev/pts/99")

    svc, db = services(make_bench())
    svc = Services(**{**svc.__dict__, "open_bench": refuse})
    with Runner(standard_plan(), Station(), RunOptions(reports_dir=tmp_path),
                services=svc) as runner:
        outcome = runner.run("SN9")
    assert outcome.record.verdict == Verdict.ERROR and "no such port" in outcome.record.reason
    assert db.rows[outcome.record.run_id]["complete"]


def test_guarded_rule_near_limit_is_inconclusive(tmp_path):
    # 1000 Hz measured with U = 0.5 Hz against a window ending at 1000.3 Hz
    def plan_with(decision):
        plan = standard_plan(decision=decision)
        steps = list(plan.steps)
        steps[2] = replace(steps[2], checks=(Check("frequency", freq_window(990.0, 1000.3)),))
        return replace(plan, steps=tuple(steps[:3]))

    simple, _ = run(plan_with("simple"), make_bench(frequency=1000.0), tmp_path / "s")
    guarded, _ = run(plan_with("guarded"), make_bench(frequency=1000.0), tmp_path / "g")
    # ILAC-G8:09/2019 4.2.1 (simple acceptance) and 4.2.2 (guard band w = U)
    assert simple.record.verdict == Verdict.PASS
    assert guarded.record.verdict == Verdict.INCONCLUSIVE and guarded.exit_code == 3


def test_one_db_for_many_units(tmp_path):
    svc, db = services(make_bench())
    with Runner(standard_plan(), Station(), RunOptions(reports_dir=tmp_path,
                                                      clock=ManualClock()), services=svc) as runner:
        outcomes = [runner.run(f"SN{i}") for i in range(3)]
    assert len(db.rows) == 3 and all(r["complete"] for r in db.rows.values())
    assert {o.record.serial for o in outcomes} == {"SN0", "SN1", "SN2"}
    assert db.closed


def test_events_file_has_one_object_per_line(tmp_path):
    events = tmp_path / "ev" / "events.jsonl"
    outcome, _ = run(standard_plan(), make_bench(), tmp_path, events=events)
    lines = [json.loads(line) for line in events.read_text().splitlines()]
    kinds = [e["event"] for e in lines]
    assert kinds[0] == "run_started" and kinds[-1] == "run_finished"
    assert kinds.count("step_started") == 4 and kinds.count("step_finished") == 4
    checks = [e for e in lines if e["event"] == "check"]
    assert [c["measurement"] for c in checks] == ["frequency", "supply_current"]
    assert all(e["run_id"] == outcome.record.run_id for e in lines)
    assert lines[-1]["verdict"] == "pass"


def test_plain_display_shows_each_check(tmp_path, capsys):
    run(standard_plan(), make_bench(), tmp_path, ui="plain")
    out = capsys.readouterr().out
    assert "[3/4] tone" in out and "frequency" in out and "PASS" in out
    assert "\x1b[" not in out  # no colour codes in plain mode


def test_junit_lists_every_unit_of_the_session(tmp_path):
    import xml.etree.ElementTree as ET

    svc, _ = services(make_bench())
    junit = tmp_path / "junit.xml"
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock(), junit=junit)
    with Runner(standard_plan(), Station(), options, services=svc) as runner:
        first = runner.run("J1")
        assert first.paths["junit"] == junit
        runner.run("J2")
    suites = ET.parse(junit).getroot().findall("testsuite")
    assert [s.get("name") for s in suites] == ["fake J1", "fake J2"]
    assert all(s.get("tests") == "2" and s.get("failures") == "0" for s in suites)


def test_unexpected_exception_still_leaves_evidence(tmp_path):
    bench = make_bench()

    def broken(*a, **k):
        raise ZeroDivisionError("bug in a driver")

    bench.supply.measure_current = broken
    outcome, db = run(standard_plan(), bench, tmp_path)
    assert outcome.record.verdict == Verdict.ERROR
    assert outcome.record.reason.startswith("internal error: ZeroDivisionError")
    assert bench.supply.on is False and db.rows[outcome.record.run_id]["complete"]


def test_unwritable_events_file_is_one_clear_error(tmp_path):
    from benchgate.errors import PreflightError

    blocker = tmp_path / "file"
    blocker.write_text("x")
    svc, db = services(make_bench())
    options = RunOptions(reports_dir=tmp_path / "r", events=blocker / "events.jsonl")
    with pytest.raises(PreflightError) as err:
        Runner(standard_plan(), Station(), options, services=svc)
    assert "events" in err.value.one_line() and db.rows == {}
