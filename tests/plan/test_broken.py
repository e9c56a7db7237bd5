"""The corpus of broken plans: each gives file:line:column, exit 2 and never a traceback."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from benchgate.cli import main
from benchgate.errors import PlanErrors
from benchgate.plan import load_plan

BROKEN = Path(__file__).parent / "broken"

#: file -> (line, column, text expected in the first error). Positions checked by hand
#: against the corpus files (common practice, no source).
EXPECTED = {
    "typo_key.yaml": (9, 5, "did you mean 'voltage'"),
    "typo_top.yaml": (3, 1, "did you mean 'product'"),
    "typo_measurement.yaml": (21, 7, "did you mean 'thd'"),
    "typo_kind.yaml": (13, 11, "did you mean 'capture'"),
    "wrong_type_output.yaml": (11, 13, "expected true or false"),
    "wrong_type_steps.yaml": (5, 8, "non-empty list of steps"),
    "wrong_type_checks.yaml": (21, 12, "expected a mapping"),
    "bad_unit.yaml": (20, 37, "expected a frequency in Hz, got a voltage"),
    "bad_unit_voltage.yaml": (9, 14, "expected a voltage in V, got a frequency"),
    "unknown_unit.yaml": (17, 15, "unknown unit 'fortnights'"),
    "min_above_max.yaml": (20, 24, "is above max"),
    "nominal_outside.yaml": (20, 28, "outside its own window"),
    "too_short.yaml": (17, 5, "too short: 5 cycles at 900.0 Hz"),
    "rate_too_low.yaml": (16, 5, "too low for thd with 10 harmonics"),
    "not_required.yaml": (7, 5, "does not require it"),
    "power_on_with_supply_on.yaml": (18, 5, "needs the supply output off"),
    "unknown_topology.yaml": (21, 34, "did you mean 'rc_ladder'"),
    "ladder_wrong_count.yaml": (21, 64, "2 values for 3 sections"),
    "ladder_cap_as_resistor.yaml": (21, 64, "expected a resistance in Ω, got a capacitance"),
    "duplicate_key.yaml": (17, 5, "duplicate key 'rate' (first given at line 16, column 5)"),
    "duplicate_step_id.yaml": (12, 5, "used twice"),
    "tabs.yaml": (14, 1, "tab character in indentation"),
    "yaml_syntax.yaml": (22, 1, "YAML syntax error"),
    "yaml_syntax_indent.yaml": (14, 12, "YAML syntax error"),
    "python_tag.yaml": (14, 12, "unsupported YAML tag"),
    "empty.yaml": (1, 1, "empty"),
    "only_comments.yaml": (1, 1, "empty"),
    "top_list.yaml": (1, 1, "expected a mapping"),
    "binary_junk.yaml": (1, 1, "not UTF-8"),
    "latin1.yaml": (3, 18, "not UTF-8"),
    "alias_bomb.yaml": (1, 8, "too many YAML nodes"),
    "startup_without_power_on.yaml": (21, 7, "startup_time needs a capture with power_on"),
    "reading_wrong_instrument.yaml": (26, 17, "a dmm cannot read supply_current"),
    "tolerance_and_max.yaml": (20, 46, "not both"),
    "tolerance_wrong_dimension.yaml": (20, 46, "an absolute tolerance on a frequency"),
    "many_errors.yaml": (9, 5, "did you mean 'voltage'"),
}


def test_corpus_is_complete():
    assert {p.name for p in BROKEN.glob("*.yaml")} == set(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_broken_plan_error(name):
    line, col, text = EXPECTED[name]
    path = BROKEN / name
    with pytest.raises(PlanErrors) as exc:
        load_plan(str(path))
    first = exc.value.errors[0]
    assert (first.file, first.line, first.column) == (str(path), line, col), exc.value.lines()
    assert text in first.message
    for e in exc.value.errors:
        assert e.line is not None and e.column is not None


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_broken_plan_cli(name, capsys):
    path = BROKEN / name
    code = main(["inspect", str(path)])
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert lines
    for ln in lines:
        assert re.match(rf"^benchgate: {re.escape(str(path))}:\d+:\d+: \S", ln), ln
    assert "Traceback" not in err


def test_all_errors_at_once():
    with pytest.raises(PlanErrors) as exc:
        load_plan(str(BROKEN / "many_errors.yaml"))
    msgs = exc.value.lines()
    assert len(msgs) == 3
    assert ":9:5:" in msgs[0] and ":16:11:" in msgs[1] and ":20:37:" in msgs[2]
