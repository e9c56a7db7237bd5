"""The runner on the understudy bench (pty ADC, loopback SCPI), accelerated: verdicts and faults."""

from __future__ import annotations

import dataclasses
import sqlite3
from pathlib import Path

import pytest

from benchgate.judge.rules import Verdict
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

REPO = Path(__file__).resolve().parents[2]
TB3 = REPO / "testplans" / "tb3.yaml"
SPEED = 5.0  # faster makes the supply switch-on lag (wall ms x speed) eat into the start-up window


@pytest.fixture(scope="module")
def plan():
    from benchgate.plan import load_plan

    return load_plan(TB3)


@pytest.fixture(scope="module")
def ubench(tmp_path_factory):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path_factory.mktemp("vb")) as vb:
        yield vb


def run_units(vb, plan, tmp_path, units, **opts):
    from benchgate.instruments.station import load_station

    options = RunOptions(reports_dir=tmp_path / "reports", unattended=True, clock=vb.clock, **opts)
    out = []
    with Runner(plan, load_station(vb.station_path), options) as runner:
        for serial, defect in units:
            vb.load_unit(serial, defect)
            out.append(runner.run(serial))
            assert vb.supply_output is False  # safe after every unit
    return out, options


def checks_of(outcome, step):
    return {c.measurement: c for c in outcome.record.checks() if c.step_id == step}


def test_good_unit_passes(ubench, plan, tmp_path):
    (outcome,), options = run_units(ubench, plan, tmp_path, [("OH-GOOD-1", None)])
    rec = outcome.record
    assert rec.verdict == Verdict.PASS, rec.reason
    assert outcome.exit_code == 0
    assert {s.status for s in rec.steps} == {"done"}
    assert rec.instruments and {i.role for i in rec.instruments} >= {"adc", "supply"}
    assert outcome.paths["json"].exists() and outcome.paths["html"].exists()
    assert any("switched on" in n for n in rec.steps[2].notes)
    # the start-up is timed from where in the capture the supply came on, not from its first sample
    startup = checks_of(outcome, "power-on")["startup_time"].result
    assert startup.details["measured_from"] == "power-on instant"
    assert 0.0 < startup.details["power_on_at_s"] < 0.4
    conn = sqlite3.connect(options.database)
    assert conn.execute("SELECT complete, verdict FROM runs WHERE run_id = ?",
                        (rec.run_id,)).fetchone() == (1, "pass")
    conn.close()


def test_high_gain_fails_thd(ubench, plan, tmp_path):
    (outcome,), _ = run_units(ubench, plan, tmp_path, [("OH-HG-1", "high_gain")])
    thd = checks_of(outcome, "steady")["thd"]
    # interfaces.md: high_gain clips -> high THD; the plan allows at most 5 %
    assert thd.verdict == Verdict.FAIL and "above 5.000 %" in thd.reason
    assert outcome.record.verdict == Verdict.FAIL and outcome.exit_code == 1


@pytest.mark.parametrize("defect", ["low_gain", "open_section", "wrong_capacitor"])
def test_defects_that_stop_the_tone_never_pass(ubench, plan, tmp_path, defect):
    (outcome,), _ = run_units(ubench, plan, tmp_path, [(f"OH-{defect}", defect)])
    assert outcome.record.verdict in (Verdict.FAIL, Verdict.ERROR)
    power_on = outcome.record.steps[2]
    assert power_on.attempts == 2  # the plan's retry was used, and noted
    assert any(n.startswith("attempt 1:") for n in power_on.notes)


@pytest.mark.parametrize("defect", ["low_gain", "open_section"])
def test_no_start_fails_amplitude(ubench, plan, tmp_path, defect):
    (outcome,), _ = run_units(ubench, plan, tmp_path, [(f"OH-A-{defect}", defect)])
    amp = checks_of(outcome, "power-on")["amplitude"]
    assert amp.verdict == Verdict.FAIL and "below" in amp.reason


def test_wrong_capacitor_fails_frequency(ubench, plan, tmp_path):
    # parts are drawn from the serial number: this one's wrong capacitor moves the tone (others
    # stop it altogether, which the test above covers)
    (outcome,), _ = run_units(ubench, plan, tmp_path, [("OH-WC-2", "wrong_capacitor")])
    freq = checks_of(outcome, "steady")["frequency"]
    assert freq.verdict == Verdict.FAIL and ("below" in freq.reason or "above" in freq.reason)
    assert outcome.record.verdict == Verdict.FAIL


@pytest.mark.parametrize("defect", ["supply_noise", "intermittent"])
def test_subtle_defects_do_not_pass(ubench, plan, tmp_path, defect):
    (outcome,), _ = run_units(ubench, plan, tmp_path, [(f"OH-S-{defect}", defect)])
    # noise and dropouts leave THD alone but raise THD+N (IEEE Std 1241-2010: THD+N = 1/SINAD);
    # a dropout also shows as a deep dip of the envelope (whichever the capture caught)
    steady = checks_of(outcome, "steady")
    caught = [c for c in (steady["thd_n"], steady["amplitude_dip"]) if c.verdict == Verdict.FAIL]
    assert caught and all("above" in c.reason for c in caught)
    if defect == "supply_noise":
        assert steady["thd_n"].verdict == Verdict.FAIL
    assert outcome.record.verdict == Verdict.FAIL


def _tight(plan, decision, high):
    steps = []
    for step in plan.steps:
        if step.id == "steady":
            checks = tuple(dataclasses.replace(c, window=dataclasses.replace(c.window, high=high))
                           if c.measurement == "frequency" else c for c in step.checks)
            step = dataclasses.replace(step, checks=checks)
        steps.append(step)
    return dataclasses.replace(plan, steps=tuple(steps), decision=decision, version=plan.version + "-tight")


def test_just_inside_a_limit_simple_passes_guarded_is_inconclusive(ubench, plan, tmp_path):
    from benchgate.runner.reanalyze import reanalyze

    (first,), _ = run_units(ubench, plan, tmp_path / "a", [("OH-EDGE-1", None)])
    m = checks_of(first, "steady")["frequency"].result
    assert m.valid and m.uncertainty > 0
    # Place the upper limit half an uncertainty above the measured value and re-judge the very
    # same stored capture (a second live run would measure a slightly different value).
    edge = m.value + m.uncertainty / 2
    report = first.paths["json"]
    simple = reanalyze(report, _tight(plan, "simple", edge), reports_dir=tmp_path / "s")
    guarded = reanalyze(report, _tight(plan, "guarded", edge), reports_dir=tmp_path / "g")
    assert checks_of(simple, "steady")["frequency"].result.value == pytest.approx(m.value, abs=1e-9)
    # ILAC-G8:09/2019 4.2.1: simple acceptance, inside -> pass
    assert checks_of(simple, "steady")["frequency"].verdict == Verdict.PASS
    # ILAC-G8:09/2019 4.2.2: guard band w = U; value + U crosses the limit -> not a pass
    g = checks_of(guarded, "steady")["frequency"]
    assert g.verdict == Verdict.INCONCLUSIVE and "within U of the limit" in g.reason
    assert guarded.record.verdict == Verdict.INCONCLUSIVE and guarded.exit_code == 3


def _fresh_bench(tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    return UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path / "vb")


def test_adc_disconnect_mid_capture(plan, tmp_path):
    with _fresh_bench(tmp_path) as vb:
        vb.faults.adc.disconnect_after = 0.2  # clock seconds into the 0.4 s start-up capture
        (outcome,), options = run_units(vb, plan, tmp_path, [("OH-DISC-1", None)])
        assert vb.supply_output is False  # asked of the SCPI server itself
    rec = outcome.record
    assert rec.verdict == Verdict.ERROR and outcome.exit_code == 3
    assert "disconnected" in rec.reason and rec.reason.startswith("adc")
    power_on = rec.steps[2]
    assert power_on.status == "error" and power_on.capture is not None  # the partial capture is kept
    assert outcome.paths["capture:power-on"].exists() and outcome.paths["json"].exists()
    assert [s.status for s in rec.steps[3:]] == ["skipped"] * 4
    conn = sqlite3.connect(options.database)
    assert conn.execute("SELECT complete, verdict, reason FROM runs").fetchall() == [(1, "error", rec.reason)]
    conn.close()


def test_scpi_error_during_setup_reports_the_code(plan, tmp_path):
    from benchgate.instruments.station import load_station
    from benchgate.runner.session import Services

    with _fresh_bench(tmp_path) as vb:
        real_open = Services.default(RunOptions()).open_bench

        class InjectAfterOpen:
            def __init__(self, station, clock=None, roles=None):
                self.cm = real_open(station, clock=clock, roles=roles)

            def __enter__(self):
                bench = self.cm.__enter__()
                vb.faults.inject_error("supply", -222, "Data out of range")
                return bench

            def __exit__(self, *exc):
                return self.cm.__exit__(*exc)

        options = RunOptions(reports_dir=tmp_path / "r", unattended=True, clock=vb.clock,
                             open_bench=InjectAfterOpen)
        vb.load_unit("OH-SCPI-1")
        with Runner(plan, load_station(vb.station_path), options) as runner:
            outcome = runner.run("OH-SCPI-1")
        assert vb.supply_output is False
    rec = outcome.record
    assert rec.verdict == Verdict.ERROR and outcome.exit_code == 3
    assert "-222" in rec.reason and "Data out of range" in rec.reason
    assert rec.steps[0].status == "error" and rec.reason.startswith("supply")
    assert outcome.paths["json"].exists()


def test_supply_stops_answering_mid_run(plan, tmp_path):
    from benchgate.instruments.station import load_station
    from benchgate.runner.attendant import Silent

    with _fresh_bench(tmp_path) as vb:
        class DropOnReading(Silent):
            def step_started(self, index, total, step):
                if step.id == "supply-current":
                    vb.faults.scpi.drop("supply")  # the next reply never comes

        options = RunOptions(reports_dir=tmp_path / "r", unattended=True, clock=vb.clock)
        vb.load_unit("OH-LOST-1")
        with Runner(plan, load_station(vb.station_path), options, attendant=DropOnReading()) as runner:
            outcome = runner.run("OH-LOST-1")
        assert vb.supply_output is False  # the off command after the timeout got through
    rec = outcome.record
    assert rec.verdict == Verdict.ERROR and rec.reason.startswith("supply")
    step = next(s for s in rec.steps if s.id == "supply-current")
    assert step.status == "error" and outcome.paths["json"].exists()


DIGITIZER_PLAN = """\
plan: tb3-digitizer
version: "1"
product: TB-3 tone board
requires: [digitizer, supply]
steps:
  - id: setup
    kind: supply
    title: 9 V, 50 mA, off
    voltage: 9 V
    current_limit: 50 mA
    output: off
  - id: power-on
    kind: capture
    title: Start-up on the digitizer
    instrument: digitizer
    channel: out
    rate: 50 kS/s
    duration: 400 ms
    power_on: true
    checks:
      startup_time: {max: 100 ms}
      frequency: {min: 800 Hz, max: 1100 Hz}
  - id: supply-off
    kind: supply
    title: Supply off
    output: off
"""


def test_start_up_recorded_by_the_digitizer(ubench, tmp_path):
    from benchgate.plan import load_plan

    path = tmp_path / "digitizer.yaml"
    path.write_text(DIGITIZER_PLAN)
    (outcome,), _ = run_units(ubench, load_plan(path), tmp_path, [("OH-DIG-1", None)])
    assert outcome.record.verdict == Verdict.PASS, outcome.record.reason
    startup = checks_of(outcome, "power-on")["startup_time"].result
    # the same unit's start-up through the streaming ADC is 40-60 ms (see the demo); the
    # digitizer is armed, then the supply switched on, and the start-up timed from there
    assert startup.details["measured_from"] == "power-on instant"
    assert 0.02 < startup.value < 0.09
