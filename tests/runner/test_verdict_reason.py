"""The unit's headline reason names the most basic finding first (runner.session.unit_verdict)."""

from __future__ import annotations

from benchgate.analysis.context import NO_TONE
from benchgate.analysis.measurement import Measurement
from benchgate.judge.rules import Verdict
from benchgate.plan.limits import Window
from benchgate.record import CheckRecord, StepRecord, UnitRecord
from benchgate.runner.session import unit_verdict


def check(step, name, unit, verdict, reason, m):
    return CheckRecord(step_id=step, measurement=name, window=Window(unit=unit, low=0.0, high=1.0),
                       result=m, verdict=verdict, reason=reason, rule="simple")


def record(*steps) -> UnitRecord:
    return UnitRecord(run_id="r", serial="S", plan_id="p", plan_version="1", plan_hash="0", plan_path="p",
                      product="P", station_id="s", operator=None, lot=None, started="t",
                      software_version="0", decision_rule="simple", steps=list(steps))


def power_on_with_a_tone(freq_verdict=Verdict.FAIL):
    """The start-up record: a tone (its frequency off while the unit starts), start-up timed wrong."""
    s = StepRecord(id="power-on", kind="capture", title="start-up", status="done")
    s.checks = [
        check("power-on", "startup_time", "s", Verdict.ERROR,
              "startup_time not valid: tone present 12.0 ms before the recorded power-on instant",
              Measurement.invalid("startup_time", "s", "tone present 12.0 ms before the recorded power-on instant")),
        check("power-on", "frequency", "Hz", freq_verdict, "frequency 700.0 Hz ± 1 Hz below 789.0 Hz",
              Measurement("frequency", 700.0, "Hz", 1.0)),
    ]
    return s


def steady_without_a_tone(with_amplitude=True):
    s = StepRecord(id="steady", kind="capture", title="steady", status="done")
    s.checks = [check("steady", "frequency", "Hz", Verdict.ERROR, f"frequency not valid: {NO_TONE}",
                      Measurement.invalid("frequency", "Hz", NO_TONE))]
    if with_amplitude:
        s.checks.append(check("steady", "amplitude", "V", Verdict.FAIL, "amplitude 20.0 µV below 600.0 mV",
                              Measurement("amplitude", 20e-6, "V", 5e-4)))
    return s


def test_no_tone_in_the_steady_record_is_named_before_the_start_up_findings():
    verdict, reason = unit_verdict(record(power_on_with_a_tone(), steady_without_a_tone()), None)
    assert verdict == Verdict.FAIL
    assert reason == "steady: no oscillation in the steady record (amplitude 20.0 µV below 600.0 mV)"


def test_no_tone_comes_first_when_the_verdict_is_error_too():
    rec = record(power_on_with_a_tone(Verdict.PASS), steady_without_a_tone(with_amplitude=False))
    verdict, reason = unit_verdict(rec, None)
    assert verdict == Verdict.ERROR
    assert reason == "steady: no oscillation in the steady record"


def test_ordinary_failures_keep_plan_order():
    s = power_on_with_a_tone()
    s.checks = s.checks[1:]  # only the frequency failure
    verdict, reason = unit_verdict(record(s), None)
    assert verdict == Verdict.FAIL and reason == "power-on: frequency 700.0 Hz ± 1 Hz below 789.0 Hz"


def test_how_the_run_ended_follows_the_finding_that_decided():
    verdict, reason = unit_verdict(record(power_on_with_a_tone(), steady_without_a_tone()),
                                   (Verdict.ERROR, "adc: disconnected"))
    assert verdict == Verdict.FAIL
    assert reason.startswith("steady: no oscillation") and reason.endswith("; then adc: disconnected")
