"""Hypothesis fuzzer: mutated example plans load or fail with positioned errors, never a traceback."""

from __future__ import annotations

from pathlib import Path

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


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
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


@settings(max_examples=100, deadline=None)
@given(blob=st.binary(max_size=200))
def test_binary_never_crashes(tmp_path_factory, blob):
    from benchgate.plan import load_plan

    p = tmp_path_factory.mktemp("fz") / "junk.yaml"
    p.write_bytes(blob)
    try:
        load_plan(str(p))
    except PlanErrors as exc:
        assert all(e.line is not None for e in exc.errors)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(text=mutated())
def test_cli_check_never_tracebacks(tmp_path_factory, text):
    import contextlib
    import io

    from benchgate.cli import main

    p = tmp_path_factory.mktemp("cli") / "plan.yaml"
    p.write_text(text, encoding="utf-8", errors="surrogatepass")
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(p), "--json"])
    assert code in (0, 2)
    if code == 2:
        lines = err.getvalue().splitlines()
        assert lines and all(ln.startswith(f"benchgate: {p}:") for ln in lines)
