"""``benchgate run PLAN --station STATION``: test one unit (or a batch) and keep the evidence."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from benchgate.errors import PreflightError
    from benchgate.runner.attendant import Attendant
    from benchgate.runner.safety import StopSignals

EPILOG = ("Exit codes: 0 every check passed, 1 a check failed, 2 plan/station/usage error or "
          "station busy (nothing was run), 3 error or inconclusive (could not decide), 130 aborted "
          "(Ctrl-C or a declined prompt), 143 SIGTERM, 129 SIGHUP (aborted; supply off, report "
          "written). With CI=true and no terminal on stdin the run is unattended.")


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "run", help="run a test plan on a unit at a station",
        description="Run a test plan on one unit (or a batch of units) at a station: checks the "
        "station and calibration first, switches the supply off at the end whatever happens, and "
        "writes a JSON and HTML report and a database row for every unit.", epilog=EPILOG)
    p.add_argument("plan", help="test plan file (YAML)")
    p.add_argument("--station", required=True, help="station file (YAML) describing the bench")
    p.add_argument("--serial", help="serial number of the unit (asked for when not given)")
    p.add_argument("--operator", help="who runs the test (recorded)")
    p.add_argument("--lot", help="production lot (recorded; summaries group by it)")
    p.add_argument("--batch", action="store_true",
                   help="test unit after unit, asking each serial number, until an empty line")
    p.add_argument("--unattended", action="store_true",
                   help="no prompts, no animation: prompt steps need an unattended_answer in the plan")
    p.add_argument("--accept-hazards", action="store_true",
                   help="acknowledge the plan's hazards without typing (recorded in the report)")
    p.add_argument("--allow-expired-calibration", action="store_true",
                   help="run even if an instrument's calibration is past due (recorded)")
    p.add_argument("--reports", default="reports", metavar="DIR", help="report folder (default: reports)")
    p.add_argument("--db", metavar="PATH|URL", help="results database: a SQLite file or a postgresql:// "
                   "URL (default: $BENCHGATE_DB, else the station file's 'results', else "
                   "DIR/results.sqlite; with a URL every run is "
                   "kept in DIR/results.sqlite first and forwarded)")
    p.add_argument("--events", metavar="FILE", help="append one JSON object per line as steps start and finish")
    p.add_argument("--junit", metavar="FILE", help="write JUnit XML (one testsuite per unit)")
    p.add_argument("--display", choices=("auto", "rich", "plain", "quiet"), default="auto",
                   help="live display (auto: rich on a terminal, plain otherwise or with NO_COLOR)")
    p.add_argument("--clock-speed", type=float, default=None, metavar="X",
                   help="only for an accelerated understudy bench: waits pass X times faster (recorded)")
    p.set_defaults(func=run)
    return p


def is_unattended(args) -> bool:
    """--unattended, or CI=true with no terminal on stdin."""
    if args.unattended:
        return True
    try:
        tty = sys.stdin.isatty()
    except (AttributeError, ValueError):
        tty = False
    return os.environ.get("CI", "").strip().lower() == "true" and not tty


def run(args: argparse.Namespace) -> int:
    from benchgate.runner.safety import StopRequested, StopSignals

    # The one signal handler of the run (SIGINT, SIGTERM, SIGHUP): the runner uses it too. Once a
    # stop was asked for, the signals stay ignored while the process ends.
    with StopSignals(ignore_after_stop=True) as signals:
        try:
            return _run(args, signals)
        except StopRequested as stop:  # outside a unit (a prompt before the first, a batch serial)
            signals.shielded = True
            print(f"benchgate: {stop.description}; no unit was running", file=sys.stderr)
            return stop.exit_code


#: how this command words what the runner says a face could offer (runner.attendant.Hint)
HINTS = {
    "accept_hazards": "--accept-hazards accepts them for this run, and the report records it",
    "allow_expired_calibration": "--allow-expired-calibration runs anyway, and the report and database "
                                 "record it",
    "serial_needed": "give --serial",
}


def _with_hint(exc: PreflightError) -> PreflightError:
    """The runner's refusal with this command's own hint added."""
    from benchgate.errors import PreflightError

    if exc.hint is None or str(exc.hint) not in HINTS:
        return exc
    return PreflightError(f"{exc.message} ({HINTS[str(exc.hint)]})", where=exc.where(), hint=exc.hint)


def make_attendant(args: argparse.Namespace, unattended: bool) -> Attendant:
    """The terminal face (a person at stdin) or the unattended one (CI), on the chosen display."""
    from benchgate.cli.terminal import Terminal, Unattended, make_display

    display = make_display(args.display, unattended=unattended)
    return Unattended(display) if unattended else Terminal(display)


def _run(args: argparse.Namespace, signals: StopSignals) -> int:
    from benchgate.errors import PreflightError
    from benchgate.instruments.station import load_station
    from benchgate.plan import load_plan
    from benchgate.runner.attendant import Notice
    from benchgate.runner.batch import run_batch
    from benchgate.runner.options import RunOptions, check_serial, worst_exit_code
    from benchgate.runner.session import Runner

    plan = load_plan(args.plan)
    station = load_station(args.station)
    unattended = is_unattended(args)
    clock = None
    flags = {}
    if args.clock_speed is not None:
        if not args.clock_speed > 0:
            raise PreflightError(f"--clock-speed must be > 0, got {args.clock_speed}")
        from benchgate.clock import ScaledClock

        clock = ScaledClock(args.clock_speed)
        flags["clock_speed"] = args.clock_speed
    if args.serial is None and not args.batch and unattended:
        raise PreflightError("an unattended run needs --serial (there is nobody to ask)")
    if args.serial is not None:
        check_serial(args.serial)
    options = RunOptions(
        operator=args.operator, lot=args.lot, reports_dir=Path(args.reports),
        db_path=args.db, unattended=unattended,
        accept_hazards=args.accept_hazards, allow_expired_calibration=args.allow_expired_calibration,
        events=None if args.events is None else Path(args.events),
        junit=None if args.junit is None else Path(args.junit), clock=clock, extra_flags=flags)
    face = make_attendant(args, unattended)
    try:
        runner = Runner(plan, station, options, attendant=face, signals=signals)
    except PreflightError as exc:
        raise _with_hint(exc) from None
    with runner:
        if args.batch:
            outcomes = run_batch(runner)
            if not outcomes:
                face.announce(Notice("info", "no units tested"))
                return 0
            return worst_exit_code([o.exit_code for o in outcomes])
        serial = args.serial
        if serial is None:
            serial = face.ask_serial("serial number (scan or type): ")
            if serial is None:
                raise PreflightError("no serial number given")
        return runner.run(serial).exit_code
