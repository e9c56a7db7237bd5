"""``benchgate sync [--db URL] [--reports DIR] [--all]``: send this station's queued runs now."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

DB_HELP = ("central results database: a postgresql:// URL (default: $BENCHGATE_DB). Credentials "
           "come from the URL, the PG* environment variables or ~/.pgpass and are never printed")


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "sync",
        help="send the runs queued at this station to the central results database",
        description="A station whose results database is a postgresql:// URL writes every run "
        "to its local file (REPORTS/results.sqlite) first and forwards it; runs it could not "
        "send while the server was down wait there. sync sends them now, each exactly once. "
        "Without a local file it only creates or migrates the central schema (run it once with "
        "the database owner's URL after installing or upgrading benchgate). "
        "Exit 0 when the queue is empty afterwards, 1 when runs are left, 2 when the server "
        "cannot be reached or the setting is not a URL.",
    )
    p.add_argument("--db", metavar="URL", help=DB_HELP)
    p.add_argument("--reports", metavar="DIR", default="reports",
                   help="the station's report folder holding results.sqlite (default: reports)")
    from benchgate.cli.history import add_station_option

    add_station_option(p)
    p.add_argument("--all", action="store_true",
                   help="send every run again (after pointing the station at a new server)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from benchgate.cli.history import station_results
    from benchgate.errors import StoreError
    from benchgate.store import ResultsDB, resolve
    from benchgate.store.forward import sync

    setting = resolve(args.db, local_default=Path(args.reports) / "results.sqlite",
                      station=station_results(args.station))
    if setting.central is None:
        raise StoreError("sync needs a postgresql:// URL (--db, BENCHGATE_DB or the station "
                         "file's 'results'); this station "
                         "writes only its own file", setting.local)
    if not setting.local.is_file():  # no queue here: create or migrate the central schema only
        with ResultsDB.open(setting.central) as central:
            version = central.version
        print(f"{setting.shown()}: results schema version {version}; no runs queued here "
              f"({setting.local} does not exist)")
        return 0
    with ResultsDB.open(setting.local, create=False) as local:
        result = sync(local, setting.central, resend=args.all)
    print(f"sent {result.sent} run update{'s' if result.sent != 1 else ''} to {setting.shown()}; "
          f"{result.left} left in {setting.local}")
    for run_id, reason in result.failed:
        print(f"benchgate: run {run_id} refused by the server: {reason}", file=sys.stderr)
    return 0 if result.left == 0 else 1
