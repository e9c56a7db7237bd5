"""``benchgate serve``: the operator page for one station, in a browser."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

TOKEN_ENV = "BENCHGATE_STATION_TOKEN"


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "serve", help="serve the operator page (a browser face of `run`) for one station",
        description="Serve the operator page for a station: scan a unit, acknowledge hazards, answer "
        "prompts, watch each check land, see the verdict, and STOP at any time (the supply is switched "
        "off and the page shows when the supply confirms it). Same runner, reports and database as "
        "`benchgate run`. Listens on 127.0.0.1 unless --host is given; any other address needs a "
        "station token, which each browser is asked for once.",
        epilog="Stopping the server (Ctrl-C) stops a run in progress and switches the supply off "
        "before the process ends. Exit codes: 0 stopped with the supply confirmed off, 2 plan/station/"
        "usage error, 3 the supply could not be confirmed off at the end.")
    p.add_argument("plan", nargs="*", help="test plan file(s) the page may run (or --plans DIR)")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument("--station", help="station file (YAML) describing the bench")
    where.add_argument("--understudy", metavar="BOARD", choices=("tb3", "wo1", "pf2"),
                       help="start a simulated bench with this board (tb3, wo1, pf2) in this process; "
                       "a serial number containing a defect's name (e.g. TB3-HIGH-GAIN-1) loads that defect")
    p.add_argument("--plans", metavar="DIR", help="offer every *.yaml plan in this folder")
    p.add_argument("--speed", type=float, default=1.0, metavar="X",
                   help="with --understudy: simulated time runs X times faster (recorded)")
    p.add_argument("--clock-speed", type=float, default=None, metavar="X",
                   help="only for an accelerated understudy bench in another process (recorded)")
    p.add_argument("--host", default="127.0.0.1", help="address to listen on (default 127.0.0.1)")
    p.add_argument("--port", type=int, default=8765, help="port (default 8765; 0 picks a free one)")
    p.add_argument("--token", help=f"station token for a non-loopback --host (or ${TOKEN_ENV}; "
                   "made up and printed when neither is given)")
    p.add_argument("--operator", help="who runs the tests (recorded)")
    p.add_argument("--lot", help="production lot (recorded; the page's tally is per session)")
    p.add_argument("--allow-expired-calibration", action="store_true",
                   help="run even if an instrument's calibration is past due (recorded)")
    p.add_argument("--reports", default="reports", metavar="DIR", help="report folder (default: reports)")
    p.add_argument("--db", metavar="PATH|URL", help="results database: a SQLite file or a postgresql:// URL "
                   "(default: $BENCHGATE_DB, else the station file's 'results', else DIR/results.sqlite)")
    p.add_argument("--open", action="store_true", help="open the page in the default browser")
    p.set_defaults(func=run)
    return p


def defect_in(serial: str, defects) -> str | None:
    """The simulated defect a serial number names (``TB3-HIGH-GAIN-1`` → ``high_gain``), if any."""
    text = serial.casefold().replace("-", "_").replace(" ", "_")
    for name in sorted(defects, key=len, reverse=True):
        if name.casefold() in text:
            return name
    return None


def _plans(args) -> list[Path]:
    from benchgate.errors import PreflightError

    plans = [Path(p) for p in args.plan]
    if args.plans:
        folder = Path(args.plans)
        if not folder.is_dir():
            raise PreflightError("not a folder", where=str(folder))
        plans += sorted(folder.glob("*.yaml"))
    if not plans:
        raise PreflightError("give a plan file or --plans DIR")
    for path in plans:
        if not path.is_file():
            raise PreflightError("no such plan file", where=str(path))
    return plans


def run(args) -> int:
    import secrets
    import webbrowser
    from contextlib import ExitStack

    from benchgate.errors import PreflightError
    from benchgate.web.desk import Desk, DeskConfig
    from benchgate.web.guard import Guard, needs_token
    from benchgate.web.server import bind, serve, url_of

    plans = _plans(args)
    token = args.token or os.environ.get(TOKEN_ENV) or None
    made_up = False
    if needs_token(args.host) and not token:
        token, made_up = secrets.token_urlsafe(12), True
    for name, value in (("--speed", args.speed), ("--clock-speed", args.clock_speed)):
        if value is not None and not value > 0:
            raise PreflightError(f"{name} must be > 0, got {value}")
    with ExitStack() as stack:
        flags: dict = {}
        clock = None
        before_unit = None
        station = args.station
        if args.understudy:
            from benchgate.sim.bench import UnderstudyBench

            ubench = stack.enter_context(UnderstudyBench(args.understudy, speed=args.speed))
            station, clock = ubench.station_path, ubench.clock
            defects = tuple(ubench.board.defects)
            flags["clock_speed"] = args.speed

            def before_unit(serial: str) -> None:
                ubench.load_unit(serial, defect_in(serial, defects))
        elif args.clock_speed is not None:
            from benchgate.clock import ScaledClock

            clock = ScaledClock(args.clock_speed)
            flags["clock_speed"] = args.clock_speed
        config = DeskConfig(station=Path(station), plans=plans, reports_dir=Path(args.reports),
                            db_path=args.db, operator=args.operator,
                            lot=args.lot, allow_expired_calibration=args.allow_expired_calibration,
                            clock=clock, before_unit=before_unit, extra_flags=flags)
        desk = Desk(config)
        try:
            sock = bind(args.host, args.port)
        except OSError as exc:
            desk.shutdown()
            raise PreflightError(f"cannot listen on {args.host}:{args.port}: {exc.strerror or exc}") from exc
        guard = Guard(args.host, sock.getsockname()[1], token=token if needs_token(args.host) else args.token)
        url = url_of(sock)
        print(f"operator page for station {desk.station.id}: {url}", flush=True)
        if made_up:
            print(f"station token (each browser asks for it once): {token}", flush=True)
        print("Ctrl-C stops the page; a run in progress is stopped and the supply switched off.", flush=True)
        desk.start()
        if args.open:
            webbrowser.open(url)
        safe = serve(desk, guard, sock, Path(args.reports))
    if not safe:
        print("benchgate: WARNING: the supply output could not be confirmed off; switch it off by hand",
              file=sys.stderr)
        return 3
    return 0
