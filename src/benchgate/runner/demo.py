"""The demo lot: the TB-3 plan run over simulated units on the understudy bench, accelerated.

Owl Hollow Kits' tone board TB-3 (invented). A lot of good units, with one unit for each kind of
defect the simulator has, in a fixed shuffled order, runs through the real runner against the
understudy bench (serial ADC on a pseudo-terminal, SCPI instruments on loopback sockets). Every
unit gets its reports and database row; the lot gets a summary page.
"""

from __future__ import annotations

import random
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, cast

from benchgate.runner.options import RunOptions, is_abort_code
from benchgate.runner.safety import StopRequested

if TYPE_CHECKING:
    from benchgate.store import ResultsDB

#: every defect the TB-3 simulator knows (interfaces: UnderstudyBench.load_unit)
KNOWN_DEFECTS = ("wrong_capacitor", "low_gain", "high_gain", "open_section", "supply_noise", "intermittent")
PLAN_NAME = "tb3.yaml"


def find_plan(name: str = PLAN_NAME) -> Path:
    """The demo plan: ``testplans/<name>`` of a source checkout, else the copy shipped in the package."""
    import benchgate

    here = Path(benchgate.__file__).resolve().parent
    for candidate in (here.parent.parent / "testplans" / name, here / "demo" / name):
        if candidate.is_file():
            return candidate
    from benchgate.errors import PreflightError

    raise PreflightError(f"demo plan {name} not found (looked in testplans/ and the package)")


def defects(board: str = "tb3") -> tuple[str, ...]:
    """The defects the simulator has for ``board`` (its own list, when it publishes one)."""
    try:
        from benchgate.sim.boards import get_board
    except ImportError:
        return KNOWN_DEFECTS
    return tuple(get_board(board).defects) or KNOWN_DEFECTS


@dataclass
class DemoUnit:
    serial: str
    defect: str | None
    verdict: str = ""
    reason: str = ""
    report: str | None = None
    html: str | None = None


def make_lot(units: int, lot: str, defect_names: tuple[str, ...], seed: int = 2612) -> list[DemoUnit]:
    """Exactly ``units`` serials, starting with a good board, then the defects spread through the lot
    in a fixed order; a lot too small for every defect (``len(defect_names) + 1`` units) gets as
    many of them as fit, drawn with the same seed (:func:`lot_note` says so)."""
    if units < 1:
        raise ValueError(f"a lot needs at least one unit, got {units}")
    rng = random.Random(seed)
    chosen = list(defect_names)
    if len(chosen) > units - 1:
        chosen = rng.sample(chosen, units - 1)
    kinds: list[str | None] = list(chosen) + [None] * (units - len(chosen))
    rng.shuffle(kinds)
    if kinds[0] is not None:  # start with a good board, as a line usually does
        first_good = kinds.index(None)
        kinds[0], kinds[first_good] = kinds[first_good], kinds[0]
    return [DemoUnit(serial=f"{lot}-{i:03d}", defect=k) for i, k in enumerate(kinds, 1)]


def lot_note(units: int, defect_names: tuple[str, ...]) -> str | None:
    """One line when a lot of ``units`` is too small to show every defect, else None."""
    shown = max(0, min(len(defect_names), units - 1))
    if shown == len(defect_names):
        return None
    return (f"a lot of {units} shows {shown} of the {len(defect_names)} simulated defects "
            f"(a lot of {len(defect_names) + 1} or more shows every one)")


@dataclass
class DemoResult:
    lot: str
    units: list[DemoUnit]
    summary: dict[str, Any]
    summary_html: Path
    reports_dir: Path
    seconds: float
    exit_code: int = 0  # 0, or the abort code when a stop signal ended the lot early

    def to_dict(self) -> dict[str, Any]:
        return {
            "lot": self.lot,
            "units": [{"serial": u.serial, "defect": u.defect, "verdict": u.verdict, "reason": u.reason,
                       "report": u.report, "html": u.html} for u in self.units],
            "summary": {"html": str(self.summary_html), **self.summary},
            "reports": str(self.reports_dir),
            "seconds": round(self.seconds, 3),
        }


def write_lot_summary(db: ResultsDB, lot: str, path: Path) -> dict[str, Any]:
    """Write the lot summary HTML from the database; returns the summary as a dict."""
    from benchgate.report.summary_html import write_summary_html

    summary = db.summary(lot=lot)
    write_summary_html(summary, path)
    out: dict[str, Any] = summary.to_dict()
    return out


#: boards the demo can run, each with its plan in testplans/ (the TB-3 is the default lot)
DEMO_BOARDS = ("tb3", "aa1", "lp2")


def run_demo(*, units: int = 14, speed: float = 4.0, reports_dir: Path | None = None,
             lot: str | None = None, on_unit: Callable[[int, int, DemoUnit], None] | None = None,
             on_start: Callable[[str], None] | None = None, board: str = "tb3") -> DemoResult:
    """Run the demo lot; ``on_start(text)`` is called once the bench is up, ``on_unit(index,
    total, unit)`` as each unit finishes."""
    import time

    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.runner.session import Runner
    from benchgate.sim import bench as bench_module

    t0 = time.monotonic()
    if board not in DEMO_BOARDS:
        from benchgate.errors import PreflightError

        raise PreflightError(f"no demo for board {board!r} (boards: {', '.join(DEMO_BOARDS)})")
    lot = lot or f"{board.upper()}-2612"
    plan = load_plan(find_plan(f"{board}.yaml"))
    reports_dir = Path(reports_dir) if reports_dir is not None else Path("reports")
    reports_dir.mkdir(parents=True, exist_ok=True)
    lot_units = make_lot(units, lot, defects(board))
    workdir = tempfile.mkdtemp(prefix="benchgate-demo-")
    # the serial ADC: the reference firmware on simavr when its harness is built (sim.firmware)
    with bench_module.UnderstudyBench(board, speed=speed, workdir=workdir, adc_device="auto") as vb:
        station = load_station(vb.station_path)
        note = lot_note(len(lot_units), defects(board))
        if on_start is not None and note is not None:
            on_start(note)
        if on_start is not None:
            on_start(f"understudy bench up: ADC on {vb.serial_port}, supply at {vb.resources['supply']}; "
                     f"plan {plan.id} v{plan.version}; lot {lot}, {len(lot_units)} units; "
                     f"time runs x{speed:g}; {vb.adc_note}")
        options = RunOptions(operator="demo", lot=lot, reports_dir=reports_dir, unattended=True,
                             accept_hazards=True, clock=vb.clock,
                             extra_flags={"demo": True, "clock_speed": speed})
        with Runner(plan, station, options) as runner:
            stopped = 0
            try:
                for index, unit in enumerate(list(lot_units), 1):
                    vb.load_unit(unit.serial, unit.defect)
                    outcome = runner.run(unit.serial)
                    unit.verdict = outcome.record.verdict.value
                    unit.reason = outcome.record.reason
                    unit.report = None if "json" not in outcome.paths else str(outcome.paths["json"])
                    unit.html = None if "html" not in outcome.paths else str(outcome.paths["html"])
                    if on_unit is not None:
                        on_unit(index, len(lot_units), unit)
                    if is_abort_code(outcome.exit_code):  # a stop signal during the unit ends the lot
                        stopped = outcome.exit_code
                        break
            except StopRequested as stop:  # between two units: nothing was running
                runner.signals.shielded = True
                stopped = stop.exit_code
            lot_units = [u for u in lot_units if u.verdict]
            from benchgate.report.layout import safe_name

            summary_path = reports_dir / f"summary-{safe_name(lot)}.html"
            summary = write_lot_summary(cast("ResultsDB", runner.db), lot, summary_path)  # the default store
    return DemoResult(lot=lot, units=lot_units, summary=summary, summary_html=summary_path,
                      reports_dir=reports_dir, seconds=time.monotonic() - t0, exit_code=stopped)
