"""Issue 9: a plan that loads is a plan whose every number is finite and whose every window
some value can pass; a plan that would make `check` slow is refused, with file:line:col."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from benchgate.errors import PlanErrors
from benchgate.plan import checks as plan_checks
from benchgate.plan import derive, loads_plan
from heavy_plans import ladder_plan

PLANS = Path(__file__).resolve().parents[2] / "testplans"
TB3 = (PLANS / "tb3.yaml").read_text(encoding="utf-8")
POS = re.compile(r"^t\.yaml:\d+:\d+: ")


def errors(text: str) -> list[str]:
    with pytest.raises(PlanErrors) as exc:
        loads_plan(text, "t.yaml")
    lines = exc.value.lines()
    assert all(POS.match(line) for line in lines), lines
    return lines


def tb3_with(old: str, new: str) -> str:
    assert old in TB3
    return TB3.replace(old, new, 1)


MARGIN = "margin: 3 %\n        from_circuit: &ladder"


class TestNonFinite:
    # every one of these loaded on the old code (or crashed): a NaN margin made the window
    # "nan … nan" and a run passed every value against it
    @pytest.mark.parametrize(("old", "new", "where"), [
        (MARGIN, MARGIN.replace("3 %", ".nan"), "t.yaml:59:17"),
        (MARGIN, MARGIN.replace("3 %", "-.inf"), "t.yaml:59:17"),
        ("tolerance: ±40 %", "tolerance: .inf", "t.yaml:91:46"),
        ("amplitude: {min: 0.6 V, max: 1.4 V}", "amplitude: {min: 0.6 V, max: .NaN}", "t.yaml:68:36"),
        ("R: 6k8 ±5%", "R: 6k8 ±1e999%", "t.yaml:64:14"),
        ("R: 6k8 ±5%", "R: 6k8 ±nan %", "t.yaml:64:14"),
        (MARGIN, MARGIN.replace("3 %", "inf %"), "t.yaml:59:17"),
        ("draws: 20000", "draws: 1e999", "t.yaml:30:12"),
        ("duration: 2 s", "duration: 1e400", "t.yaml:81:15"),
    ])
    def test_refused_at_its_place(self, old, new, where):
        lines = errors(tb3_with(old, new))
        assert lines[0].startswith(where + ": "), lines
        assert "finite" in lines[0] or "whole number" in lines[0], lines

    def test_huge_integer_is_not_a_traceback(self):
        lines = errors(tb3_with("voltage: 9 V", "voltage: " + "9" * 400))
        assert "finite" in lines[0] and len(lines[0]) < 200


class TestImpossibleWindows:
    @pytest.mark.parametrize(("old", "new", "what"), [
        ("thd: {max: 5 %}\n\n", "thd: {max: -5 %}\n\n", "no thd can ever pass the window ≤ -5.000 %"),
        ("startup_time: {max: 100 ms}", "startup_time: {max: -1 ms}", "startup_time is at least 0 s"),
        ("amplitude_dip: {max: 20 %}", "amplitude_dip: {min: 150 %}", "amplitude_dip is from 0 to 100 %"),
        ("amplitude: {min: 0.6 V, max: 1.4 V}", "amplitude: {max: -0.1 V}", "amplitude is at least 0 V"),
        ("limit: {min: 2 mA, max: 8 mA}", "limit: {min: 8 mA, max: 8 mA}", "zero width"),
        ("amplitude: {min: 0.6 V, max: 1.4 V}", "amplitude: {min: 1.4 V, max: 0.6 V}", "is above max"),
    ])
    def test_refused(self, old, new, what):
        lines = errors(tb3_with(old, new))
        assert any(what in line for line in lines), lines

    def test_frequency_of_at_most_zero(self):
        # a frequency is above zero: a window ending at 0 Hz can never be passed
        text = tb3_with("margin: 3 %\n        from_circuit: *ladder", "max: 0 Hz")
        assert any("frequency is above 0 Hz" in line for line in errors(text))

    def test_duty_cycle_above_100_percent(self):
        text = (PLANS / "pf2.yaml").read_text(encoding="utf-8")
        old = "duty_cycle:\n        margin: 4 %\n        from_circuit: *timer\n"
        assert old in text
        bad = text.replace(old, "duty_cycle: {min: 101 %}\n", 1)
        assert any("duty_cycle is from 0 to 100 %" in line for line in errors(bad))

    def test_possible_windows_still_load(self):
        # THD is a ratio to the fundamental and can exceed 100 % (square-ish waves, clipping)
        plan = loads_plan(tb3_with("thd: {max: 5 %}\n\n", "thd: {min: 150 %}\n\n"), "t.yaml")
        assert any(c.window.low == 150.0 for s in plan.steps for c in s.checks)
        # a window that reaches past the possible range but overlaps it is fine
        loads_plan(tb3_with("amplitude_dip: {max: 20 %}", "amplitude_dip: {min: -5 %, max: 20 %}"), "t.yaml")


class TestCheckStaysFast:
    def plan(self, n: int, sections: int, draws: int) -> str:
        return ladder_plan(TB3, n, sections, draws)

    def test_one_derivation_past_the_budget(self, monkeypatch):
        # 8 sections, 16 toleranced parts: 65 536 corners, plus a million draws
        calls = []
        monkeypatch.setattr(plan_checks, "_CACHE", {})
        monkeypatch.setattr(derive, "evaluate", lambda *a, **k: calls.append(1))
        lines = errors(self.plan(1, 8, 1_000_000))
        assert "from_circuit: this derivation" in lines[0] and "budget" in lines[0]
        assert calls == []  # refused before any work

    def test_many_derivations_add_up(self, monkeypatch):
        work = []
        real = derive.evaluate

        def counting(circuit, values):
            work.append(len(next(iter(values.values()))) * derive.work_weight(circuit))
            return real(circuit, values)

        monkeypatch.setattr(plan_checks, "_CACHE", {})
        monkeypatch.setattr(derive, "evaluate", counting)
        lines = errors(self.plan(40, 3, 10_000))
        assert any("past its budget" in line for line in lines), lines
        assert sum(work) <= derive.MAX_PLAN_WORK

    def test_shared_anchor_costs_once(self):
        budget = derive.WorkBudget()
        assert budget.charge("k", 10) and budget.charge("k", 10)
        assert budget.spent == 10

    def test_too_many_steps(self):
        head = TB3.split("steps:")[0] + "steps:\n"
        step = "  - {{id: w{i}, kind: wait, title: w, duration: 1 s}}\n"
        lines = errors(head + "".join(step.format(i=i) for i in range(501)))
        assert "more than 500 steps" in lines[0]

    def test_too_many_yaml_values(self):
        lines = errors("plan: x\ncautions: [" + ",".join(["a"] * 60_000) + "]\n")
        assert "more than 50000 YAML values" in lines[0]


class TestCaptureSizes:
    def test_rate_and_range_bounded(self):
        assert "out of range" in errors(tb3_with("rate: 50 kS/s", "rate: 1e300 Hz"))[0]
        assert "out of range" in errors(tb3_with("rate: 50 kS/s", "rate: 50 kS/s\n    range: 1e300 V"))[0]

    def test_samples_at_a_tiny_rate(self):
        # 5e7 samples at 1e-310 Hz made an infinite duration on the old code
        text = tb3_with("    duration: 500 ms\n    checks:", "    samples: 50000000\n    rate: 1e-310 Hz\n    checks:")
        assert any("last longer than the longest capture" in line for line in errors(text))

    def test_too_many_samples(self):
        text = tb3_with("rate: 50 kS/s", "rate: 1 GS/s").replace("duration: 500 ms", "duration: 60 s")
        assert any("samples (rate × duration)" in line for line in errors(text))
