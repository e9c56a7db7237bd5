"""Adaptive capture against fixed-length capture on a simulated lot of TB-3 units.

Each unit is drawn from the circuit simulator (``sim.boards.draw_unit``: part values within
tolerance, seeded by the serial; about 8 % of the lot carries one of the simulator's defects).
Its steady tone (after a 0.5 s warm-up) is turned into what the bench ADC would deliver: the
fixture's test point plus mid-rail bias, 0.4 mV rms input noise, an 18 ppm sample-clock error
and 12-bit quantisation over 3.3 V (the understudy bench's ADC settings). The analysis is driven
directly on these captures, not through full runs (no pty, no runner): it is the capture length
and the decisions being compared, not the plumbing.

Checks: the TB-3 plan's steady-tone windows for frequency (derived from the circuit), amplitude
and THD (``testplans/tb3.yaml``), judged by the guarded rule (ILAC-G8 w = U). True values: the
simulator's steady frequency, and amplitude and THD measured on the same unit's noiseless,
unquantised capture at the longest length. A decision is wrong when it passes a unit whose true
value lies outside a window, or fails one whose true value lies inside.

Fixed: one 500 ms capture, judged. Adaptive: looks at 50, 100, … 500 ms; at each look before
the last the sequential rule of ``benchgate.judge.sequential`` decides a check or leaves it open;
the capture stops once every check is decided, else at 500 ms (judged as the fixed capture).

Run: python bench/bench_adaptive.py [units]   (default 1000; prints ratios and rates)
"""

from __future__ import annotations

import math
import sys
import time
from pathlib import Path

import numpy as np

from benchgate.analysis import AdcInfo, Capture, analyze
from benchgate.judge import Verdict, judge
from benchgate.judge.sequential import SequentialState, look_schedule, rule_alpha
from benchgate.plan import load_plan
from benchgate.sim.boards import DEFECTS, draw_unit

FS = 50_000.0
WARM = 0.5
LONGEST, SHORTEST = 0.5, 0.05
NAMES = ("frequency", "amplitude", "thd")
ADC = AdcInfo(12, 3.3)
NOISE = 0.4e-3
CLOCK_PPM = 18.0
RULE = "guarded"


def windows():
    plan = load_plan(str(Path(__file__).resolve().parents[1] / "testplans" / "tb3.yaml"))
    return {c.measurement: c.window for c in plan.step("steady").checks if c.measurement in NAMES}


def unit_records(i: int, rng: np.random.Generator):
    defect = DEFECTS[i % len(DEFECTS)] if rng.random() < 0.08 else None
    unit = draw_unit("tb3", f"AH{i:05d}", defect)
    n = int(round(LONGEST * FS))
    tau = WARM + np.arange(n) / (FS * (1.0 + CLOCK_PPM * 1e-6))
    clean = unit.test_point(tau) + ADC.vref / 2.0
    noisy = clean + rng.normal(0.0, NOISE, n)
    codes = np.clip(np.rint(noisy / ADC.vref * 2**ADC.bits), 0, 2**ADC.bits - 1)
    return unit, defect, clean, codes * ADC.vref / 2**ADC.bits


def truth(unit, clean):
    a = analyze(Capture(clean, FS), ["amplitude", "thd"]).measurements
    f = unit.steady_frequency()
    return {"frequency": f if f else math.nan, "amplitude": a["amplitude"].value, "thd": a["thd"].value}


def measure(x):
    cap = Capture(x, FS, adc=ADC, clock_ppm=50)
    return analyze(cap, NAMES).measurements


def wrong(verdict, true_value, w):
    if not math.isfinite(true_value):
        return False
    inside = w.contains(true_value)
    return (verdict is Verdict.PASS and not inside) or (verdict is Verdict.FAIL and inside)


def main() -> None:
    units = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    ws = windows()
    schedule = look_schedule(SHORTEST, LONGEST)
    alpha = rule_alpha(RULE, None)
    rng = np.random.default_rng(2026)
    stats = {"fixed_wrong": 0, "adaptive_wrong": 0, "fixed_s": 0.0, "adaptive_s": 0.0, "early": 0,
             "defects": 0, "checks": 0, "agree": 0, "analysis_s": 0.0}
    t_start = time.perf_counter()
    for i in range(units):
        unit, defect, clean, x = unit_records(i, rng)
        stats["defects"] += defect is not None
        true = truth(unit, clean)
        t0 = time.perf_counter()
        fixed_m = measure(x)
        fixed = {k: judge(fixed_m[k], ws[k], RULE).verdict for k in NAMES}
        state = SequentialState(schedule, alpha)
        adaptive = fixed
        for j, seconds in enumerate(schedule):
            n = int(round(seconds * FS))
            m = fixed_m if n >= x.size else measure(x[:n])
            done = state.look(j, {k: (m[k].value if m[k].valid else None, m[k].uncertainty,
                                      ws[k].low, ws[k].high) for k in NAMES})
            if done:
                adaptive = {k: judge(m[k], ws[k], RULE).verdict for k in NAMES}
                stats["adaptive_s"] += seconds
                stats["early"] += j < len(schedule) - 1
                break
        stats["analysis_s"] += time.perf_counter() - t0
        stats["fixed_s"] += LONGEST
        for k in NAMES:
            stats["checks"] += 1
            stats["fixed_wrong"] += wrong(fixed[k], true[k], ws[k])
            stats["adaptive_wrong"] += wrong(adaptive[k], true[k], ws[k])
            stats["agree"] += fixed[k] is adaptive[k]
    elapsed = time.perf_counter() - t_start
    ratio = stats["fixed_s"] / stats["adaptive_s"]
    print(f"TB-3 lot: {units} simulated units ({stats['defects']} with a defect), checks "
          f"{', '.join(NAMES)}, rule {RULE}, captures {SHORTEST * 1e3:.0f} ms … {LONGEST * 1e3:.0f} ms "
          f"in {len(schedule)} looks")
    print(f"mean capture time: fixed {stats['fixed_s'] / units * 1e3:.0f} ms, adaptive "
          f"{stats['adaptive_s'] / units * 1e3:.0f} ms -> {ratio:.2f}x shorter "
          f"({stats['early']} of {units} units stopped early; goal >= 3x)")
    print(f"wrong decisions: fixed {stats['fixed_wrong']} / {stats['checks']} checks "
          f"({stats['fixed_wrong'] / stats['checks']:.2%}), adaptive {stats['adaptive_wrong']} "
          f"({stats['adaptive_wrong'] / stats['checks']:.2%}); same verdict on "
          f"{stats['agree']} of {stats['checks']} checks; early-look bound {state.bound:.2g} per check")
    print(f"(analysis {stats['analysis_s']:.0f} s of {elapsed:.0f} s wall)")


if __name__ == "__main__":
    main()
