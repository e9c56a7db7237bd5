"""Loading and validating plans."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from benchgate.errors import PlanErrors
from benchgate.plan import load_plan, loads_plan
from benchgate.plan.model import CaptureStep, PromptStep, ReadingStep, SupplyStep, WaitStep

PLANS = Path(__file__).resolve().parents[2] / "testplans"

HEAD = """plan: t
version: 2
product: Test board
requires: [adc, supply, dmm]
"""


def plan_of(steps: str, head: str = HEAD):
    return loads_plan(head + "steps:\n" + steps, "t.yaml")


def errors_of(steps: str, head: str = HEAD) -> list[str]:
    with pytest.raises(PlanErrors) as exc:
        plan_of(steps, head)
    return exc.value.lines()


SUPPLY = """  - id: s
    kind: supply
    title: Supply
    voltage: 9 V
    current_limit: 50 mA
    output: off
"""


def capture(checks: str, extra: str = "    power_on: true\n    duration: 500 ms\n    rate: 50 kS/s\n") -> str:
    return SUPPLY + "  - id: c\n    kind: capture\n    title: Capture\n    channel: out\n" + extra + "    checks:\n" + checks


class TestExamplePlans:
    @pytest.mark.parametrize("name", ["tb3", "wo1", "pf2"])
    def test_load(self, name):
        p = load_plan(str(PLANS / f"{name}.yaml"))
        assert p.requires == {"adc", "supply"}
        kinds = [s.kind for s in p.steps]
        assert kinds[0] == "supply" and kinds[-1] == "supply" and {"prompt", "wait", "capture", "reading"} <= set(kinds)
        assert p.cautions and p.hash and len(p.hash) == 64
        reading = next(s for s in p.steps if isinstance(s, ReadingStep))
        assert reading.quantity == "supply_current" and reading.on_fail == "stop"
        prompt = next(s for s in p.steps if isinstance(s, PromptStep))
        assert prompt.ask and prompt.unattended_answer == "yes"
        power = next(s for s in p.steps if isinstance(s, CaptureStep) and s.power_on)
        assert {c.measurement for c in power.checks} >= {"startup_time", "frequency"}
        measured = {c.measurement for s in p.steps for c in s.checks}
        assert {"frequency", "amplitude", "thd", "startup_time", "supply_current"} <= measured
        assert p.steps[-1].output is False

    def test_tb3_windows(self):
        from .test_network import _nodal_180

        p = load_plan(str(PLANS / "tb3.yaml"))
        assert p.decision == "simple"
        f = p.step("steady").checks[0]
        # independent nodal analysis (test_network) with the amplifier's 1k output and 47k input
        # resistance as source and load; the ideal ladder, handbook 1/(2πRC√6) (docs/references.md),
        # is ≈ 955 Hz and the loading moves it down a little (interfaces.md)
        f_ref, g_ref, _ = _nodal_180([6800.0] * 3, [10e-9] * 3, "highpass", 1e3, 47e3)
        assert f.window.nominal == pytest.approx(f_ref, rel=1e-9)
        ideal = 1 / (2 * math.pi * 6800 * 10e-9 * math.sqrt(6))
        assert 0.95 * ideal < f.window.nominal < ideal
        assert f.window.details["gain_needed"]["nominal"] == pytest.approx(g_ref, rel=1e-9)
        assert f.window.details["corners"] == 256
        wc_low, wc_high = f.window.details["worst_case"]
        assert f.window.low == pytest.approx(wc_low * 0.97) and f.window.high == pytest.approx(wc_high * 1.03)
        # all parts at their upper limits give the lowest frequency (f falls as any part grows)
        f_lo, _, _ = _nodal_180([6800 * 1.05] * 3, [11e-9] * 3, "highpass", 1.05e3, 47e3 * 1.1)
        assert wc_low == pytest.approx(f_lo, rel=1e-9)
        supply = p.steps[0]
        assert isinstance(supply, SupplyStep) and (supply.voltage, supply.current_limit, supply.output) == (9.0, 0.05, False)
        cur = p.step("supply-current").checks[0].window
        assert (cur.low, cur.high, cur.unit) == (0.002, 0.008, "A")

    def test_wo1_guarded(self):
        p = load_plan(str(PLANS / "wo1.yaml"))
        assert p.decision == "guarded"
        w = p.step("steady").checks[0].window
        assert w.nominal == pytest.approx(1 / (2 * math.pi * 16e3 * 10e-9), rel=1e-12)  # docs/references.md
        assert w.details["gain_needed"]["nominal"] == pytest.approx(3.0)

    def test_pf2_duty(self):
        p = load_plan(str(PLANS / "pf2.yaml"))
        duty = next(c for c in p.step("steady").checks if c.measurement == "duty_cycle")
        assert duty.window.unit == "%"
        # docs/references.md timer formula: (R1+R2)/(R1+2R2) = 7.8/14.6
        assert duty.window.nominal == pytest.approx(100 * 7.8 / 14.6, rel=1e-12)


class TestSteps:
    def test_kinds_and_units(self):
        p = plan_of(SUPPLY + """  - id: w
    kind: wait
    title: Wait
    duration: 1500 ms
  - id: p
    kind: prompt
    title: Look
    text: Is the LED lit?
    ask: true
    expect: no
  - id: r
    kind: reading
    title: Rail
    quantity: dc_voltage
    settle: 0.5 s
    limit: {nominal: 5 V, tolerance: ±2 %}
""")
        s, w, pr, r = p.steps
        assert isinstance(w, WaitStep) and w.seconds == 1.5
        assert isinstance(pr, PromptStep) and pr.expect == "no" and pr.unattended_answer is None
        assert isinstance(r, ReadingStep) and r.instrument == "dmm" and r.on_fail == "continue"
        win = r.checks[0].window
        assert win.low == pytest.approx(4.9) and win.high == pytest.approx(5.1) and win.nominal == 5.0
        assert p.version == "2"

    def test_samples_give_duration(self):
        p = plan_of(capture("      frequency: {min: 900 Hz, max: 1.1 kHz}\n",
                            "    power_on: true\n    rate: 50 kS/s\n    samples: 25000\n"))
        assert p.steps[1].duration == pytest.approx(0.5)

    def test_defaults_apply(self):
        head = HEAD + "defaults:\n  on_fail: stop\n  retries: 2\n  capture: {channel: out, rate: 20 kS/s, harmonics: 5}\n"
        p = plan_of(SUPPLY + "  - id: c\n    kind: capture\n    title: C\n    duration: 1 s\n    power_on: true\n"
                    "    checks:\n      frequency: {min: 900 Hz, max: 1100 Hz}\n      thd: {max: 5 %}\n", head)
        c = p.steps[1]
        assert (c.channel, c.rate, c.harmonics, c.on_fail, c.retries) == ("out", 20e3, 5, "stop", 2)

    def test_supply_current_protects_unless_told(self):
        steps = SUPPLY + """  - id: r
    kind: reading
    title: I
    quantity: supply_current
    on_fail: continue
    limit: {max: 10 mA}
"""
        assert plan_of(steps).steps[1].on_fail == "continue"
        assert plan_of(steps.replace("    on_fail: continue\n", "")).steps[1].on_fail == "stop"


class TestValidation:
    def test_unknown_measurement(self):
        errs = errors_of(capture("      frequncy: {min: 1 kHz}\n"))
        assert "did you mean 'frequency'" in errs[0]

    def test_thd_needs_frequency_window(self):
        errs = errors_of(capture("      thd: {max: 5 %}\n"))
        assert "needs a frequency window" in errs[0]

    def test_thd_rate_boundary(self):
        # rate must exceed 2 · harmonics · f_high: 10 harmonics of 1.1 kHz need > 22 kS/s
        ok = "    power_on: true\n    duration: 500 ms\n    rate: 22.1 kS/s\n"
        plan_of(capture("      frequency: {min: 900 Hz, max: 1100 Hz}\n      thd: {max: 5 %}\n", ok))
        errs = errors_of(capture("      frequency: {min: 900 Hz, max: 1100 Hz}\n      thd: {max: 5 %}\n",
                                 ok.replace("22.1", "22")))
        assert "too low for thd" in errs[0]

    def test_duration_boundary_includes_startup(self):
        # 5 cycles at 1 kHz = 5 ms, after a start-up of up to 100 ms -> 105 ms
        checks = "      frequency: {min: 1 kHz, max: 1.2 kHz}\n      startup_time: {max: 100 ms}\n"
        plan_of(capture(checks, "    power_on: true\n    duration: 105 ms\n    rate: 50 kS/s\n"))
        errs = errors_of(capture(checks, "    power_on: true\n    duration: 104 ms\n    rate: 50 kS/s\n"))
        assert "too short" in errs[0] and "105.0 ms" in errs[0]

    def test_frequency_window_needs_low(self):
        errs = errors_of(capture("      frequency: {max: 1 kHz}\n"))
        assert "lower limit above 0 Hz" in errs[0]

    def test_nyquist_for_frequency(self):
        errs = errors_of(capture("      frequency: {min: 900 Hz, max: 30 kHz}\n"))
        assert "below twice the highest frequency" in errs[0]

    def test_margin_needs_from_circuit(self):
        errs = errors_of(capture("      frequency: {min: 900 Hz, max: 1 kHz, margin: 5 %}\n"))
        assert "margin widens a from_circuit window" in errs[0]

    def test_from_circuit_wrong_output(self):
        errs = errors_of(capture("      frequency: {min: 900 Hz, max: 1.1 kHz}\n      thd:\n        from_circuit: {topology: wien_bridge, R1: 16k, R2: 16k, C1: 10n, C2: 10n}\n"))
        assert "wien_bridge gives frequency, not thd" in errs[0]

    def test_lc_tank_parts(self):
        errs = errors_of(capture("      frequency:\n        from_circuit: {topology: lc_tank, type: colpitts, L: 1m, C1: 1n, C2: 1n, L1: 1m}\n"))
        assert "'L1' is not a part of a colpitts tank" in errs[0]

    def test_explicit_window_with_yield(self):
        p = plan_of(capture("""      frequency:
        min: 900 Hz
        max: 1.1 kHz
        from_circuit: {topology: wien_bridge, R1: 16k 1%, R2: 16k 1%, C1: 10n 5%, C2: 10n 5%}
"""))
        w = p.steps[1].checks[0].window
        assert (w.low, w.high) == (900.0, 1100.0)
        mc = w.details["monte_carlo"]
        assert 0.5 < mc["yield"] <= 1.0 and "design wien_bridge" in w.derived_from

    def test_design_nominal_outside_given_window(self):
        errs = errors_of(capture("""      frequency:
        min: 1.5 kHz
        max: 2 kHz
        nominal: 1.7 kHz
        from_circuit: {topology: wien_bridge, R1: 16k 1%, R2: 16k 1%, C1: 10n 5%, C2: 10n 5%}
"""))
        assert "design nominal" in errs[0]

    def test_eseries_note_not_error(self):
        p = plan_of(capture("      frequency:\n        from_circuit: {topology: wien_bridge, R1: 6k9 5%, R2: 6k8 5%, C1: 10n 5%, C2: 10n 5%}\n"))
        assert len(p.notes) == 1 and "not an E24 value" in p.notes[0] and "nearest preferred 6.800 kΩ" in p.notes[0]
        assert p.notes[0].startswith("t.yaml:")

    def test_prompt_expect_needs_ask(self):
        errs = errors_of("  - id: p\n    kind: prompt\n    title: P\n    text: hi\n    expect: yes\n")
        assert "need ask: true" in errs[0]

    def test_power_on_needs_voltage(self):
        errs = errors_of("  - id: c\n    kind: capture\n    title: C\n    channel: out\n    power_on: true\n    duration: 1 s\n")
        assert "setting the voltage first" in errs[0]

    def test_bad_ids_and_versions(self):
        errs = errors_of(SUPPLY.replace("id: s", "id: ../etc"))
        assert "not a valid id" in errs[0]

    def test_hazards(self):
        head = HEAD + "hazards:\n  - {name: hot_surface, text: The regulator gets hot.}\n"
        errs = errors_of(SUPPLY, head)
        assert "did you mean 'hot_surfaces'" in errs[0]
        p = plan_of(SUPPLY, head.replace("hot_surface,", "hot_surfaces,"))
        assert p.hazards[0].name == "hot_surfaces" and p.hazards[0].text == "The regulator gets hot."


class TestOddValues:
    def test_zero_nominal_relative_tolerance(self):
        errs = errors_of(capture("      frequency: {min: 900 Hz, max: 1.1 kHz}\n      dc_offset: {nominal: 0 V, tolerance: ±5 %}\n"))
        assert "zero nominal" in errs[0]

    def test_absolute_tolerance_on_zero_nominal(self):
        p = plan_of(capture("      frequency: {min: 900 Hz, max: 1.1 kHz}\n      dc_offset: {nominal: 0 V, tolerance: ±50 mV}\n"))
        w = p.steps[1].checks[1].window
        assert (w.low, w.high) == (-0.05, 0.05)

    @pytest.mark.parametrize("value", ["1e300", "1e-300", "0"])
    def test_unreal_part_values(self, value):
        errs = errors_of(capture(f"      frequency:\n        from_circuit: {{topology: timer_astable, R1: 1k, R2: 10k, C: {value}}}\n"))
        assert "outside the range of real parts" in errs[0] or "must be positive" in errs[0]

    def test_container_values_are_not_dumped(self):
        errs = errors_of(SUPPLY.replace("voltage: 9 V", "voltage: {a: [1, 2]}"))
        assert "YNode" not in errs[0] and "steps[0].voltage" in errs[0]
