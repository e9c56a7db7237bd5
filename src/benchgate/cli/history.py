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
        "plan version, station, lot, operator, reason and report. --verify DIR checks each "
        "run's report under DIR (the station's report folder, or a copy of it) against the "
        "SHA-256 stored with the run. Exit 0 when runs were found (and, with --verify, every "
        "stored report verified), 1 when the unit has none, 2 when the database cannot be read, "
        "3 when a report is missing or differs from what was stored.",
    )
    p.add_argument("serial", metavar="SERIAL", help="serial number of the unit")
    p.add_argument("--db", metavar="PATH|URL", default=None,
                   help=f"results database: a SQLite file or a postgresql:// URL (default: "
                   f"$BENCHGATE_DB, else {DEFAULT_DB}); credentials are never printed")
    add_station_option(p)
    p.add_argument("--verify", metavar="DIR", default=None,
                   help="check each run's report under DIR against its stored SHA-256")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    p.set_defaults(func=run)


def add_station_option(p) -> None:
    p.add_argument("--station", metavar="FILE", default=None,
                   help="station file whose 'results' names the database (used when neither "
                   "--db nor $BENCHGATE_DB is given)")


def station_results(path: str | None) -> str | None:
    """The ``results`` setting of the station file at ``path`` (checked like every station key;
    a bad file raises its StationErrors with file:line:column), or None."""
    if path is None:
        return None
    from benchgate.instruments.station import load_station

    return load_station(path).results


def shown(text: object) -> str:
    """Text safe to print on a terminal: control characters shown as escapes."""
    s = "" if text is None else str(text)
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in s)


def run(args: argparse.Namespace) -> int:
    from benchgate.store import open_results, resolve
    from benchgate.store.setting import unsent_note

    station = station_results(args.station)
    where = resolve(args.db, local_default=DEFAULT_DB, station=station).shown()
    with open_results(args.db, local_default=DEFAULT_DB, role="reader", station=station) as db:
        runs = db.history(args.serial)
    unsent, note = unsent_note(args.db, local_default=DEFAULT_DB, station=station)
    if note:
        print(f"benchgate: {note}", file=sys.stderr)
    checked = _verify(runs, args.verify)
    bad = any(e.status in ("missing", "mismatch") for e in checked.values())
    if args.json:
        out = [r.to_dict() for r in runs]
        if args.verify is not None:
            for d in out:
                e = checked[d["run_id"]]
                d["evidence"] = {"status": e.status, "path": None if e.path is None else str(e.path),
                                 "detail": e.detail}
        print(json.dumps({"serial": args.serial, "db": where, "unsent_elsewhere": unsent,
                          "runs": out}, indent=2, ensure_ascii=False))
        return 3 if bad else (0 if runs else 1)
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
        if r.run_id in checked:
            e = checked[r.run_id]
            print(f"    evidence {e.status.upper()}: {shown(e.path or '—')} ({shown(e.detail)})")
    return 3 if bad else 0


def _verify(runs, folder: str | None) -> dict:
    """run id -> Evidence for each run with a report, when ``--verify DIR`` was given."""
    if folder is None:
        return {}
    from benchgate.store.evidence import verify_report

    return {r.run_id: verify_report(r, folder) for r in runs}
