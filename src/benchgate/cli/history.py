"""``benchgate history SERIAL [--db PATH] [--json]``: every run of one unit, newest first."""

from __future__ import annotations

import argparse
import json
import sys

DEFAULT_DB = "reports/results.sqlite"


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "history",
        help="every run of one unit, newest first",
        description="List every stored run of the unit with serial number SERIAL (exact match), "
        "newest first: start time, verdict (or 'incomplete' for a run that never finished), "
        "plan version, station, lot, operator, reason and report. Exit 0 when runs were found, "
        "1 when the unit has none, 2 when the database cannot be read.",
    )
    p.add_argument("serial", metavar="SERIAL", help="serial number of the unit")
    p.add_argument("--db", metavar="PATH|URL", default=None,
                   help=f"results database: a SQLite file or a postgresql:// URL (default: "
                   f"$BENCHGATE_DB, else {DEFAULT_DB}); credentials are never printed")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.set_defaults(func=run)


def shown(text: object) -> str:
    """Text safe to print on a terminal: control characters shown as escapes."""
    s = "" if text is None else str(text)
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in s)


def run(args: argparse.Namespace) -> int:
    from benchgate.store import open_results, resolve
    from benchgate.store.setting import unsent_note

    where = resolve(args.db, local_default=DEFAULT_DB).shown()
    with open_results(args.db, local_default=DEFAULT_DB, role="reader") as db:
        runs = db.history(args.serial)
    unsent, note = unsent_note(args.db, local_default=DEFAULT_DB)
    if note:
        print(f"benchgate: {note}", file=sys.stderr)
    if args.json:
        print(json.dumps({"serial": args.serial, "db": where, "unsent_elsewhere": unsent,
                          "runs": [r.to_dict() for r in runs]}, indent=2, ensure_ascii=False))
        return 0 if runs else 1
    if not runs:
        print(f"benchgate: no runs of {shown(args.serial)!r} in {where}", file=sys.stderr)
        return 1
    print(f"{shown(args.serial)}: {len(runs)} run{'s' if len(runs) != 1 else ''}, newest first")
    rows = [("started", "verdict", "plan", "station", "lot", "operator", "reason")]
    for r in runs:
        flags = [k for k, v in r.flags.items() if v]
        reason = r.reason if r.complete else "run did not finish (no end recorded)"
        status = r.status.upper()
        if r.cut_short:  # stopped early: say whether it still counts for the yields
            status += f" ({r.cut_short}{'' if r.counts else ', not counted'})"
        rows.append((r.started, status,
                     f"{r.plan_id} {r.plan_version}", r.station_id or "—", r.lot or "—",
                     r.operator or "—", reason or "—"))
        if flags:
            rows[-1] = rows[-1][:-1] + (f"{rows[-1][-1]} [{', '.join(flags)}]",)
    rows = [tuple(shown(c) for c in row) for row in rows]
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]) - 1)]
    for row in rows:
        print("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=False)) + "  " + row[-1])
    for r in runs:
        if r.report_path:
            print(f"  {shown(r.started)}: {shown(r.report_path)}")
    return 0
