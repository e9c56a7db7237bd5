"""Per-unit overhead of the runner on the understudy bench (target: 0.5 s per unit).

Overhead = wall time per unit minus the wall time the plan itself asks for (capture durations,
waits and settle times, divided by the bench's speed-up), reports and database included. Runs a
few good TB-3 units and prints seconds and the ratio to the target, measured in this one run.

    .venv/bin/python bench/bench_overhead.py [--units 6] [--speed 4]
"""

from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

TARGET_S = 0.5


def requested_seconds(plan) -> float:
    total = 0.0
    for step in plan.steps:
        if step.kind == "wait":
            total += step.seconds
        elif step.kind == "capture":
            total += step.duration
        elif step.kind == "reading":
            total += step.settle
    return total


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--units", type=int, default=6)
    ap.add_argument("--speed", type=float, default=4.0)
    args = ap.parse_args()

    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.runner.demo import find_plan
    from benchgate.runner.options import RunOptions
    from benchgate.runner.session import Runner
    from benchgate.sim.bench import UnderstudyBench

    plan = load_plan(find_plan())
    asked = requested_seconds(plan) / args.speed
    with tempfile.TemporaryDirectory() as tmp, UnderstudyBench("tb3", speed=args.speed, workdir=tmp) as vb:
        station = load_station(vb.station_path)
        options = RunOptions(reports_dir=Path(tmp) / "reports", unattended=True, accept_hazards=True,
                             clock=vb.clock)
        walls = []
        with Runner(plan, station, options) as runner:
            for i in range(args.units + 1):
                vb.load_unit(f"BENCH-{i:03d}", None)
                t0 = time.perf_counter()
                outcome = runner.run(f"BENCH-{i:03d}")
                wall = time.perf_counter() - t0
                if i:  # the first unit pays for imports and warm-up
                    walls.append(wall)
    wall = statistics.median(walls)
    overhead = wall - asked
    print(f"plan {plan.id} v{plan.version}: requests {requested_seconds(plan):.3f} s of bench time "
          f"= {asked:.3f} s wall at speed {args.speed:g}")
    print(f"median wall time per unit over {len(walls)} units: {wall:.3f} s "
          f"(last verdict {outcome.record.verdict.value})")
    print(f"per-unit overhead: {overhead:.3f} s; ratio to the {TARGET_S} s target: {overhead / TARGET_S:.2f}")


if __name__ == "__main__":
    main()
