"""Plans made to weigh on the loader: many circuit derivations (the work budget's test and
``bench/bench_inspect_budget.py`` build theirs from here)."""

from __future__ import annotations

#: one capture step whose frequency window is derived from an RC ladder by Monte Carlo
LADDER_STEP = """  - id: s{i}
    kind: capture
    title: t
    duration: 500 ms
    checks:
      frequency:
        from_circuit:
          topology: rc_ladder
          form: highpass
          sections: {sections}
          R: 6k8 ±5%
          C: 10n ±10%
          monte_carlo: {{draws: {draws}, seed: {i}}}
"""


def ladder_plan(plan_text: str, n: int, sections: int, draws: int) -> str:
    """``plan_text``'s head (all before ``steps:``) with ``n`` ladder-derivation steps."""
    head = plan_text.split("steps:")[0] + "steps:\n"
    return head + "".join(LADDER_STEP.format(i=i, sections=sections, draws=draws) for i in range(n))
