"""The generator-driven step kinds in plans: loading, positioned errors, the response mask, and
a mask point exactly at a limit under each decision rule."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from benchgate.analysis.measurement import Measurement
from benchgate.errors import PlanErrors
from benchgate.judge.rules import Verdict, judge
from benchgate.plan import load_plan, loads_plan
from benchgate.plan.stimulus import Mask, MaskPoint, sweep_frequencies

ROOT = Path(__file__).resolve().parents[2]

HEAD = """\
plan: t
version: "1"
product: LP-2
requires: [supply, generator, digitizer]
steps:
"""


def _plan(step: str):
    return loads_plan(HEAD + step, "t.yaml")


def _errors(step: str) -> list[str]:
    with pytest.raises(PlanErrors) as info:
        _plan(step)
    return [e.one_line() for e in info.value.errors]


@pytest.mark.parametrize("name", ["aa1", "lp2"])
def test_demo_plans_load(name):
    plan = load_plan(str(ROOT / "testplans" / f"{name}.yaml"))
    kinds = {s.kind for s in plan.steps}
    assert {"tone", "sweep"} <= kinds


def test_levels_with_their_units():
    plan = _plan("""\
  - {id: a, title: t, kind: tone, frequency: 1 kHz, level: 200 mVpp}
  - {id: b, title: t, kind: level_sweep, frequency: 1 kHz, levels: [50 mVrms, 0.1 Vrms], thd_limit: 1 %,
     checks: {clip_level: {min: 0.1 V}}}
  - {id: c, title: t, kind: tone, frequency: 1 kHz, level: 0.5, level_unit: Vpk}
""")
    a, b, c = plan.steps
    assert (a.level, a.level_unit) == (pytest.approx(0.2), "Vpp")
    assert b.levels == pytest.approx((0.05, 0.1)) and b.level_unit == "Vrms"
    assert (c.level, c.level_unit) == (0.5, "Vpk")


def test_sweep_points_per_decade():
    plan = _plan("  - {id: s, title: t, kind: sweep, level: 1 Vpp, start: 100 Hz, stop: 10 kHz, "
                 "points_per_decade: 5}\n")
    f = sweep_frequencies(plan.steps[0])
    assert len(f) == 11 and f[0] == pytest.approx(100) and f[-1] == pytest.approx(10e3)
    assert f[5] == pytest.approx(1000)  # log-spaced: the middle point is the geometric mean


@pytest.mark.parametrize("step,where,text", [
    ("  - {id: s, title: t, kind: sweep, level: 1 Vpp}\n", "t.yaml:6:5", "give frequencies, or start"),
    ("  - {id: s, title: t, kind: sweep, level: 1 Vpp, frequencies: [1 kHz, 500 Hz]}\n", "t.yaml:6:63",
     "must rise"),
    ("  - {id: s, title: t, kind: tone, frequency: 1 kHz}\n", "t.yaml:6:5", "missing required key 'level'"),
    ("  - {id: s, title: t, kind: tone, frequency: 1 kHz, level: 2 Vpz}\n", "t.yaml:6:60", "unknown unit"),
    ("  - {id: s, title: t, kind: tone, frequency: 1 kHz, level: 1 Vpp, checks: {f_3db_high: {max: 1}}}\n",
     "t.yaml:6:76", "f_3db_high"),
    ("  - {id: s, title: t, kind: sweep, level: 1 Vpp, frequencies: [1 kHz, 2 kHz], "
     "mask: [{frequency: 1 kHz, min: 1 dB, max: 0 dB}, {frequency: 2 kHz, max: 0 dB}]}\n", "t.yaml:6:86",
     "min must be below max"),
    ("  - {id: s, title: t, kind: level_sweep, frequency: 1 kHz, levels: [1 Vpp, 2 Vpp], "
     "checks: {clip_level: {min: 1 V}}}\n", "t.yaml:6:5", "needs thd_limit"),
])
def test_errors_have_positions(step, where, text):
    errors = _errors(step)
    assert any(e.startswith(where) and text in e for e in errors), errors


def test_generator_must_be_required():
    text = HEAD.replace("[supply, generator, digitizer]", "[supply, digitizer]")
    with pytest.raises(PlanErrors) as info:
        loads_plan(text + "  - {id: s, title: t, kind: tone, frequency: 1 kHz, level: 1 Vpp}\n", "t.yaml")
    assert "add generator to requires" in str(info.value)


class TestMask:
    mask = Mask((MaskPoint(100.0, -1.0, 1.0), MaskPoint(1000.0, -3.0, 1.0), MaskPoint(10_000.0, None, -20.0)))

    def test_lines_are_straight_on_a_log_axis(self):
        # half-way in log f between 100 Hz and 1 kHz is √(100·1000) Hz: half-way between −1 and −3 dB
        w = self.mask.window_at(math.sqrt(100 * 1000))
        assert w.low == pytest.approx(-2.0) and w.high == pytest.approx(1.0)
        w = self.mask.window_at(math.sqrt(1000 * 10_000))
        assert w.low is None and w.high == pytest.approx(-9.5)  # lower line ends at 1 kHz
        assert self.mask.window_at(50.0) is None and self.mask.window_at(20e3) is None

    def test_a_point_exactly_at_a_limit(self):
        # ILAC-G8:09/2019 4.2.1 simple acceptance: a value on the limit is not outside it → pass;
        # 4.2.2 guarded (w = U): a value within U of the limit is not accepted → inconclusive here
        w = self.mask.window_at(1000.0)
        at_limit = Measurement("gain_db", -3.0, "dB", 0.05)
        assert judge(at_limit, w, "simple").verdict == Verdict.PASS
        assert judge(at_limit, w, "guarded").verdict == Verdict.INCONCLUSIVE
        just_below = Measurement("gain_db", -3.0 - 1e-9, "dB", 0.05)
        assert judge(just_below, w, "simple").verdict == Verdict.FAIL


@pytest.mark.parametrize("name", ["aa1", "lp2"])
def test_demo_plans_validate_against_the_schema(name):
    # jsonschema as the reference implementation of JSON Schema 2020-12
    import jsonschema
    import yaml

    from benchgate.plan.schema import build_schema

    data = yaml.safe_load((ROOT / "testplans" / f"{name}.yaml").read_text())
    jsonschema.validate(data, build_schema())
