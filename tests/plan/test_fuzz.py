"""Hypothesis fuzzer: mutated example plans load or fail with positioned errors, never a traceback."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from benchgate.errors import PlanErrors
from benchgate.plan import loads_plan

PLANS = Path(__file__).resolve().parents[2] / "testplans"
TEXTS = [(PLANS / f"{n}.yaml").read_text(encoding="utf-8") for n in ("tb3", "wo1", "pf2")]

# values a careless edit might leave after a key
VALUES = ["", "~", "-1", "0", "1e9", "1 V", "2n2", "4k7", "10 mA", "±5 %", "+10/-5 %", "abc",
          "[1, 2]", "{a: 1}", "yes", "'x'", "!!python/object:os.system", "*nope", "&a 3", "\t1",
          "nan", ".inf", "10 kHz", "5 ms", "{min: 2 kHz, max: 1 kHz}", "rc_ladder", "[]", "{}",
          "µ", "\u2126", "- a", ": :", "100000000000000000000000 s"]


@st.composite
def mutated(draw):
    text = draw(st.sampled_from(TEXTS))
    lines = text.split("\n")
    for _ in range(draw(st.integers(1, 3))):
        i = draw(st.integers(0, len(lines) - 1))
        op = draw(st.sampled_from(["value", "delete", "duplicate", "insert", "swap", "indent", "chars"]))
        line = lines[i]
        if op == "value" and ":" in line:
            key = line.split(":", 1)[0]
            lines[i] = f"{key}: {draw(st.sampled_from(VALUES))}"
        elif op == "delete":
            del lines[i]
        elif op == "duplicate":
            lines.insert(i, line)
        elif op == "insert":
            lines.insert(i, draw(st.text(max_size=20)))
        elif op == "swap":
            j = draw(st.integers(0, len(lines) - 1))
            lines[i], lines[j] = lines[j], lines[i]
        elif op == "indent":
            lines[i] = " " * draw(st.integers(0, 9)) + line.lstrip()
        elif op == "chars" and line:
            k = draw(st.integers(0, len(line)))
            lines[i] = line[:k] + draw(st.text(min_size=1, max_size=4)) + line[k:]
        if not lines:
            lines = [""]
    return "\n".join(lines)


@settings(max_examples=150, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(mutated())
def test_mutations_never_crash(text):
    try:
        plan = loads_plan(text, "fuzz.yaml")
    except PlanErrors as exc:
        for e in exc.errors:
            assert e.file == "fuzz.yaml"
            assert e.line is not None and e.line >= 1
            assert e.column is not None and e.column >= 1
            assert e.message.strip()
    else:
        assert plan.steps and len(plan.hash) == 64
        for s in plan.steps:
            for ch in s.checks:
                assert ch.window.low is not None or ch.window.high is not None


@settings(max_examples=100, deadline=None, derandomize=True)
@given(blob=st.binary(max_size=200))
def test_binary_never_crashes(tmp_path_factory, blob):
    from benchgate.plan import load_plan

    p = tmp_path_factory.mktemp("fz") / "junk.yaml"
    p.write_bytes(blob)
    try:
        load_plan(str(p))
    except PlanErrors as exc:
        assert all(e.line is not None for e in exc.errors)


@settings(max_examples=40, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(text=mutated())
def test_cli_inspect_never_tracebacks(tmp_path_factory, text):
    import contextlib
    import io

    from benchgate.cli import main

    p = tmp_path_factory.mktemp("cli") / "plan.yaml"
    p.write_text(text, encoding="utf-8", errors="surrogatepass")
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["inspect", str(p), "--json"])
    assert code in (0, 2)
    if code == 2:
        lines = err.getvalue().splitlines()
        assert lines and all(ln.startswith(f"benchgate: {p}:") for ln in lines)


# ----------------------------------------------------------------------------- hostile values
# Issue 9: mutated plans either fail with positioned errors or give windows a value can pass,
# and loading never does more than the plan's work budget (counted, not timed).

HOSTILE = [
    # non-finite in every spelling
    ".nan", ".inf", "-.inf", ".NaN", "nan", "inf Hz", "nan %", "±nan %", "1e999", "-1e999 V",
    "9" * 330, "±1e999 %", "{min: .nan}", "{max: .inf}", "{min: -.inf, max: 1 V}",
    "{nominal: .nan, tolerance: 5 %}", "{nominal: 1 V, tolerance: .inf}",
    # swapped, empty, impossible and degenerate windows
    "{min: 2 kHz, max: 1 kHz}", "{min: 1.4 V, max: 0.6 V}", "{max: -5 %}", "{max: -1 ms}",
    "{min: 150 %}", "{min: 101 %, max: 200 %}", "{max: 0 Hz}", "{max: -3 V}", "{min: 1 V, max: 1 V}",
    "{min: 0 %, max: 0 %}", "{nominal: 0 V, tolerance: 5 %}", "{nominal: 1 kHz, tolerance: 0 %}",
    "{max: 1e-320 Hz}", "{min: 1e308 V, max: 1.7e308 V}", "{max: 5}", "{min: -1e308, max: 1e308}",
    # wrong units and ambiguous tolerances
    "{max: 5 V}", "{min: 1 Hz, max: 2 V}", "{nominal: 1 V, tolerance: ±5}", "{nominal: 1 V, tolerance: +10/-5}",
    "47 K", "1 M", "47 J", "4u7", "4R7", "2n2 K", "±5", "+10/-5",
    # counts: huge, negative, fractional
    "1000000000", "-1", "0", "2.5", "1e6", "65", "{draws: 1000000000}", "{draws: 1000000, seed: 1}",
    "{draws: 9999}", "{seed: -1}",
    # anchors and aliases in places they do not belong
    "*ladder", "*timer", "*wien", "&x {max: 1 V}", "[*ladder, *ladder]", "{<<: *ladder}", "*missing",
    "{from_circuit: *ladder, margin: .nan}", "{from_circuit: *ladder, margin: -3 %}",
    "{from_circuit: *ladder, margin: 1e308 %}", "{from_circuit: *ladder, min: 2 kHz}",
    # wrong types
    "[]", "{}", "~", "yes", "'text'", "[1, 2]", "{a: 1}", "!!float 1", "!!binary aGk=",
]


# keys whose values carry numbers, windows or counts (measurement names, limit keys, parts …)
TARGETS = {"frequency", "amplitude", "vpp", "rms", "dc_offset", "thd", "thd_n", "sinad", "snr",
           "sfdr", "enob", "startup_time", "duty_cycle", "frequency_drift", "amplitude_dip", "limit",
           "min", "max", "nominal", "tolerance", "margin", "from_circuit", "monte_carlo", "draws",
           "seed", "sections", "R", "C", "R1", "R2", "C1", "C2", "L", "source", "load", "duration",
           "rate", "settle", "samples", "retries", "harmonics", "voltage", "current_limit", "range"}


def _key(line: str) -> str:
    return line.split(":", 1)[0].strip().lstrip("- ").strip()


@st.composite
def hostile(draw):
    text = draw(st.sampled_from(TEXTS))
    lines = text.split("\n")
    candidates = [i for i, ln in enumerate(lines) if ":" in ln and _key(ln) in TARGETS]
    for _ in range(draw(st.integers(1, 2))):
        i = draw(st.sampled_from(candidates))
        key = lines[i].split(":", 1)[0]
        lines[i] = f"{key}: {draw(st.sampled_from(HOSTILE))}"
    return "\n".join(lines)


NUMBERS = [-1e308, -150.0, -5.0, -1e-9, -0.0, 0.0, 1e-320, 1e-9, 0.5, 1.0, 5.0, 99.999, 100.0,
           100.001, 150.0, 955.0, 1e4, 1e308]


@st.composite
def windows(draw):
    """A plan with one given window replaced by random limits in the measurement's unit."""
    from benchgate.common.names import MEASUREMENT_UNITS, READING_UNITS

    text = draw(st.sampled_from(TEXTS))
    lines = text.split("\n")
    units = MEASUREMENT_UNITS | READING_UNITS
    found = [i for i, ln in enumerate(lines) if _key(ln) in {*units, "limit"} and ": {" in ln]
    i = draw(st.sampled_from(found))
    key = _key(lines[i])
    if key == "limit":  # a reading's limit: its unit is on the step's quantity line
        q = next(_key(ln.split(":", 1)[1]) for ln in reversed(lines[:i]) if _key(ln) == "quantity")
        unit = READING_UNITS[q]
    else:
        unit = units[key]
    number = st.one_of(st.sampled_from(NUMBERS), st.floats(-1e6, 1e6, allow_nan=False))
    parts = []
    for side in draw(st.sampled_from([("min",), ("max",), ("min", "max")])):
        parts.append(f"{side}: {draw(number)!r} {unit}")
    lines[i] = lines[i].split(":", 1)[0] + ": {" + ", ".join(parts) + "}"
    return "\n".join(lines)


def _assert_trustworthy(plan) -> None:
    import math

    from benchgate.common.bounds import bounds_of
    from benchgate.plan.limits import window_problem

    for s in plan.steps:
        for ch in s.checks:
            w = ch.window
            assert window_problem(w) is None, (s.id, ch.measurement, w)
            assert w.low is None or w.high is None or w.low < w.high, (s.id, ch.measurement, w)
            assert bounds_of(ch.measurement).admits(w.low, w.high), (s.id, ch.measurement, w)
            for v in (w.low, w.high, w.nominal):
                assert v is None or math.isfinite(v)
        for name in ("seconds", "duration", "rate", "range", "settle", "voltage", "current_limit"):
            v = getattr(s, name, None)
            assert v is None or (isinstance(v, (int, float)) and math.isfinite(v)), (s.id, name, v)


@settings(max_examples=200, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(st.one_of(hostile(), windows()))
def test_hostile_values_give_positioned_errors_or_passable_windows(text):
    from benchgate.plan import checks as plan_checks
    from benchgate.plan import derive

    work: list[int] = []
    real = derive.evaluate

    def counting(circuit, values):
        work.append(len(next(iter(values.values()))) * derive.work_weight(circuit))
        return real(circuit, values)

    # a small budget keeps the fuzzer fast; the property is the same at any budget
    budget = 200_000
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(derive, "evaluate", counting)
        mp.setattr(derive, "MAX_PLAN_WORK", budget)
        mp.setattr(plan_checks, "_CACHE", {})
        try:
            plan = loads_plan(text, "fuzz.yaml")
        except PlanErrors as exc:
            for e in exc.errors:
                assert e.file == "fuzz.yaml" and e.line and e.line >= 1 and e.column and e.column >= 1
                assert e.message.strip() and "\n" not in e.one_line()
        else:
            _assert_trustworthy(plan)
    assert sum(work) <= budget
