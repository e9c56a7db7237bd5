"""Plans using the ``risk`` decision rule: max_risk per plan or per check (JCGM 106:2012)."""

from __future__ import annotations

import pytest

from benchgate.errors import PlanErrors
from benchgate.plan import loads_plan

HEAD = """plan: t
version: 2
product: Test board
requires: [adc, supply]
"""

STEPS = """steps:
  - id: s
    kind: supply
    title: Supply
    voltage: 9 V
    current_limit: 50 mA
    output: on
  - id: c
    kind: capture
    title: Capture
    channel: out
    duration: 500 ms
    rate: 50 kS/s
    checks:
      frequency: {limit}
"""


def load(head_extra: str = "", limit: str = "{min: 900 Hz, max: 1 kHz}"):
    return loads_plan(HEAD + head_extra + STEPS.format(limit=limit), "t.yaml")


def errors(head_extra: str = "", limit: str = "{min: 900 Hz, max: 1 kHz}") -> list[str]:
    with pytest.raises(PlanErrors) as exc:
        load(head_extra, limit)
    return exc.value.lines()


def test_plan_max_risk_in_percent():
    p = load("decision: risk\nmax_risk: 1 %\n")
    assert p.decision == "risk" and p.max_risk == pytest.approx(0.01)


def test_check_max_risk_overrides():
    p = load("decision: risk\nmax_risk: 1 %\n", "{min: 900 Hz, max: 1 kHz, max_risk: 0.1 %}")
    w = p.step("c").checks[0].window
    assert w.max_risk == pytest.approx(0.001)
    p = load("", "{min: 900 Hz, max: 1 kHz, decision: risk, max_risk: 2 %}")
    assert p.decision == "simple" and p.step("c").checks[0].window.max_risk == pytest.approx(0.02)


def test_risk_rule_without_max_risk_is_refused_at_the_check():
    lines = errors("decision: risk\n")
    assert len(lines) == 1 and lines[0].startswith("t.yaml:20:7:") and "needs max_risk" in lines[0]


@pytest.mark.parametrize("value", ["0 %", "50 %", "-1 %", "much"])
def test_max_risk_out_of_range(value):
    lines = errors(f"decision: risk\nmax_risk: {value}\n")
    assert lines and lines[0].startswith("t.yaml:6:") and "max_risk" in lines[0]


def test_max_risk_without_risk_rule_is_an_error():
    assert "no check is judged by the risk rule" in errors("max_risk: 1 %\n")[0]
    assert "applies to the risk rule only" in errors("", "{min: 900 Hz, max: 1 kHz, max_risk: 1 %}")[0]
