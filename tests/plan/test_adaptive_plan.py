"""Adaptive capture steps in plans: shortest/longest/block, and which checks may stop early."""

from __future__ import annotations

import pytest

from benchgate.errors import PlanErrors
from benchgate.plan import loads_plan

HEAD = """plan: t
version: 2
product: Test board
requires: [adc, supply]
decision: guarded
"""

SUPPLY = """steps:
  - id: s
    kind: supply
    title: Supply
    voltage: 9 V
    current_limit: 50 mA
    output: on
"""


def capture(extra: str, checks: str = "      frequency: {min: 900 Hz, max: 1 kHz}\n") -> str:
    return SUPPLY + ("  - id: c\n    kind: capture\n    title: Capture\n    channel: out\n"
                     "    rate: 50 kS/s\n" + extra + "    checks:\n" + checks)


def load(extra: str, checks: str | None = None, head: str = HEAD):
    return loads_plan(head + (capture(extra) if checks is None else capture(extra, checks)), "t.yaml")


def errors(extra: str, checks: str | None = None, head: str = HEAD) -> list[str]:
    with pytest.raises(PlanErrors) as exc:
        load(extra, checks, head)
    return exc.value.lines()


def test_adaptive_step_loads_and_longest_is_the_duration():
    p = load("    adaptive: {shortest: 100 ms, longest: 2 s, block: 200 ms}\n")
    step = p.step("c")
    assert step.adaptive.shortest == pytest.approx(0.1) and step.adaptive.longest == 2.0
    assert step.adaptive.block == pytest.approx(0.2) and step.duration == 2.0


def test_shortest_longer_than_longest():
    lines = errors("    adaptive: {shortest: 3 s, longest: 2 s}\n")
    assert lines[0].startswith("t.yaml:18:26:") and "shortest" in lines[0]


def test_duration_and_adaptive_together():
    assert "give no duration" in errors("    duration: 1 s\n    adaptive: {shortest: 0.1 s, longest: 2 s}\n")[0]


def test_needs_shortest_and_longest_and_known_keys():
    assert any("longest" in x for x in errors("    adaptive: {shortest: 0.1 s}\n"))
    assert any("blok" in x for x in errors("    adaptive: {shortest: 0.1 s, longest: 1 s, blok: 1 s}\n"))


def test_too_many_looks():
    assert "looks" in errors("    adaptive: {shortest: 1 ms, longest: 2 s}\n")[0]


def test_whole_record_checks_are_refused_at_the_check():
    lines = errors("    adaptive: {shortest: 100 ms, longest: 2 s}\n",
                   "      frequency: {min: 900 Hz, max: 1 kHz}\n      amplitude_dip: {max: 10 %}\n")
    assert len(lines) == 1 and lines[0].startswith("t.yaml:21:7:") and "whole capture" in lines[0]


def test_simple_rule_cannot_stop_early():
    lines = errors("    adaptive: {shortest: 100 ms, longest: 2 s}\n", head=HEAD.replace("guarded", "simple"))
    assert "states no risk" in lines[0]


def test_power_on_capture_cannot_be_adaptive():
    lines = errors("    power_on: true\n    adaptive: {shortest: 100 ms, longest: 2 s}\n")
    assert any("power_on capture" in x for x in lines)


def test_risk_rule_may_be_adaptive():
    p = load("    adaptive: {shortest: 100 ms, longest: 2 s}\n", head=HEAD.replace("guarded", "risk\nmax_risk: 1 %"))
    assert p.step("c").adaptive is not None


def test_json_schema_knows_adaptive():
    import json

    import jsonschema
    import yaml

    from benchgate.plan.schema import schema_text

    schema = json.loads(schema_text())
    good = yaml.safe_load(HEAD + capture("    adaptive: {shortest: 100 ms, longest: 2 s, block: 0.2}\n"))
    jsonschema.validate(good, schema)
    bad = yaml.safe_load(HEAD + capture("    adaptive: {shortest: 100 ms}\n"))
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)
