"""`benchgate inspect` on the heaviest plans the loader accepts, measured in one run.

The loader bounds the work of a plan (YAML values, steps, and circuit evaluations counted in
units of about 1 µs: ``benchgate.plan.derive.MAX_PLAN_WORK``). This prints, for a plan that
spends the whole evaluation budget and for one with the most steps, the load time, the work
counted, the measured µs per work unit (the ratio the budget assumes is 1) and the ratio of
the load time to a 3 s target. Not a test.
Run: .venv/bin/python bench/bench_inspect_budget.py
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from benchgate.plan import checks, derive, loads_plan
from benchgate.plan.model import MAX_STEPS

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # test data, not product
from heavy_plans import ladder_plan  # noqa: E402

TARGET_S = 3.0
HEAD = (Path(__file__).resolve().parents[1] / "testplans" / "tb3.yaml").read_text().split("steps:")[0]

MANY = """  - id: s{i}
    kind: capture
    title: t
    duration: 500 ms
    checks:
      frequency: {{min: 900 Hz, max: 1 kHz}}
      amplitude: {{min: 0.6 V, max: 1.4 V}}
      thd: {{max: 5 %}}
      thd_n: {{max: 5 %}}
      sinad: {{min: 20 dB}}
      vpp: {{max: 3 V}}
      rms: {{max: 2 V}}
      amplitude_dip: {{max: 20 %}}
"""


def _budget_plan(sections: int, draws: int) -> str:
    c = derive.Circuit("rc_ladder", {"form": "highpass", "sections": sections}, {})
    weight = derive.work_weight(c)
    per = (1 + 2 ** (2 * sections) + draws) * weight
    n = derive.MAX_PLAN_WORK // per
    return ladder_plan(HEAD, n, sections, draws)


def _measure(name: str, text: str) -> None:
    checks._CACHE.clear()
    work: list[int] = []
    real = derive.evaluate

    def counting(circuit, values):
        work.append(len(next(iter(values.values()))) * derive.work_weight(circuit))
        return real(circuit, values)

    derive.evaluate = counting
    try:
        t0 = time.perf_counter()
        plan = loads_plan(text, "bench.yaml")
        seconds = time.perf_counter() - t0
    finally:
        derive.evaluate = real
    units = sum(work)
    per_unit = f"{seconds / units * 1e6:.2f} µs/unit" if units else "no circuit work"
    print(f"{name}: {len(plan.steps)} steps, work {units:,} of {derive.MAX_PLAN_WORK:,}; "
          f"{seconds:.2f} s ({per_unit}); ratio to the {TARGET_S:g} s target {seconds / TARGET_S:.2f}")


def main() -> None:
    _measure("3-section ladders, 10^4 draws each", _budget_plan(3, 10_000))
    _measure("8-section ladder, 16 parts", _budget_plan(8, 10_000))
    _measure(f"{MAX_STEPS} steps x 8 given windows", HEAD + "steps:\n" + "".join(
        MANY.format(i=i) for i in range(MAX_STEPS)))


if __name__ == "__main__":
    main()
