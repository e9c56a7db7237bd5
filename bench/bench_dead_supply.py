"""How long a supply that stops answering keeps a unit waiting before it is given up.

Runs one TB-3 unit on the understudy bench, makes the emulated supply drop every reply once the
unit is warming up (the supply-off step then times out), and measures the wall time from that
timeout to the end of the unit, safe-state sequence, alarm and reports included. Prints the time
and its ratio to the supply's own VISA timeout (the least any detection can cost), measured in
this one run. Target: a few timeouts at most (before the fix it was 44 s, 22 timeouts).

    .venv/bin/python bench/bench_dead_supply.py [--speed 20]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

SUPPLY_TIMEOUT_S = 2.0  # the understudy bench's station file


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--speed", type=float, default=20.0)
    args = ap.parse_args()

    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.runner.attendant import Silent
    from benchgate.runner.demo import find_plan
    from benchgate.runner.options import RunOptions
    from benchgate.runner.session import Runner
    from benchgate.sim.bench import UnderstudyBench

    plan = load_plan(find_plan())
    marks: dict[str, float] = {}
    with tempfile.TemporaryDirectory() as tmp, UnderstudyBench("tb3", speed=args.speed, workdir=tmp) as vb:

        class PullTheCable(Silent):
            def step_started(self, index, total, step):
                if step.id == "warm-up":
                    vb.faults.scpi.drop("supply", 10**6)
                if step.id == "supply-off":
                    marks["off_step"] = time.perf_counter()

            def alarm(self, text):
                marks["alarm"] = time.perf_counter()

        options = RunOptions(reports_dir=Path(tmp) / "r", unattended=True, clock=vb.clock)
        vb.load_unit("BENCH-DEAD-1")
        with Runner(plan, load_station(vb.station_path), options, attendant=PullTheCable()) as runner:
            outcome = runner.run("BENCH-DEAD-1")
        end = time.perf_counter()
    waited = end - marks["off_step"]
    print(f"verdict {outcome.record.verdict.value}: {outcome.record.reason}")
    print(f"alarm raised: {'yes' if 'alarm' in marks else 'NO'}")
    print(f"from the supply-off step to the end of the unit: {waited:.2f} s "
          f"= {waited / SUPPLY_TIMEOUT_S:.1f} x the supply's {SUPPLY_TIMEOUT_S:g} s timeout")


if __name__ == "__main__":
    main()
