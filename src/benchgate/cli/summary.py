"""``benchgate summary [--plan P] [--lot L] [--since DATE] [--db PATH] [--html FILE] [--json]``."""

from __future__ import annotations

import argparse
import json
import sys

DEFAULT_DB = "reports/results.sqlite"


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "summary",
        help="lot summary: yields, retests, failure Pareto, Cpk per check",
        description="Summarise the stored runs (all, or those of one plan, one lot, or since a "
        "date): units tested, first-pass yield, final yield, retests, failures by check and by "
        "reason, and for each numeric check mean, σ, min, max and Cpk against its window "
        "(ISO 22514-2). --html writes a self-contained page with a histogram per check.",
    )
    p.add_argument("--plan", metavar="P", help="only runs of this plan id")
    p.add_argument("--lot", metavar="L", help="only runs of this lot")
    p.add_argument("--since", metavar="DATE", help="only runs started at or after DATE "
                   "(2026-12-01, or an ISO time; UTC unless a zone is given)")
    p.add_argument("--db", metavar="PATH|URL", default=None,
                   help=f"results database: a SQLite file or a postgresql:// URL (default: "
                   f"$BENCHGATE_DB, else {DEFAULT_DB}); credentials are never printed")
    from benchgate.cli.history import add_station_option

    add_station_option(p)
    p.add_argument("--html", metavar="FILE", help="also write the summary as an HTML page")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of tables")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from benchgate.cli.history import shown, station_results
    from benchgate.store import open_results, resolve
    from benchgate.store.queries import fmt_ratio
    from benchgate.store.setting import unsent_note
    from benchgate.units.format import expected_count_text
    from benchgate.units.format import format_quantity as q

    station = station_results(args.station)
    where = resolve(args.db, local_default=DEFAULT_DB, station=station).shown()
    with open_results(args.db, local_default=DEFAULT_DB, role="reader", station=station) as db:
        s = db.summary(plan=args.plan, lot=args.lot, since=args.since)
    unsent, note = unsent_note(args.db, local_default=DEFAULT_DB, station=station)
    if note:
        print(f"benchgate: {note}", file=sys.stderr)
    html_path = None
    if args.html:
        from benchgate.report.summary_html import write_summary_html

        html_path = write_summary_html(s, args.html)
    if args.json:
        d = s.to_dict()
        d["db"] = where
        d["unsent_elsewhere"] = unsent
        d["html"] = None if html_path is None else str(html_path)
        print(json.dumps(d, indent=2, ensure_ascii=False, allow_nan=False))
        return 0
    scope = ", ".join(f"{k} {shown(v)}" for k, v in (("plan", s.plan), ("lot", s.lot),
                                                     ("since", s.since)) if v is not None)
    print(f"summary of {scope or 'all stored runs'} ({where})")
    print(f"  units tested     {s.units_tested}  (with a complete run; docs/results.md)")
    print(f"  attempts         {s.runs}  ({s.incomplete} never finished, {s.cut_short} cut short; "
          f"{s.units_untested} unit{'' if s.units_untested == 1 else 's'} without a complete run)")
    print(f"  first-pass yield {fmt_ratio(s.first_pass_yield)}  ({s.first_pass} units)")
    print(f"  final yield      {fmt_ratio(s.final_yield)}  ({s.final_pass} units)")
    unstated = f"; {s.risk_unstated} passed checks state no risk" if s.risk_unstated else ""
    print(f"  expected false passes {expected_count_text(s.expected_false_passes)}  (sum of the passed units' "
          f"risks of a false pass, JCGM 106{unstated})")
    print(f"  retests          {s.retests}  ({s.units_retested} units with more than one complete run)")
    if s.verdicts:
        print("  verdicts         " + ", ".join(f"{v} {n}" for v, n in s.verdicts.items()))
    if s.pareto_checks:
        print("failures by check (fail / error or inconclusive):")
        for p in s.pareto_checks:
            print(f"  {p.fail:6d} / {p.error + p.inconclusive:<6d} {shown(p.step)}: {shown(p.measurement)}"
                  + ("" if s.plan else f"  [{shown(p.plan_id)}]"))
    if s.pareto_reasons:
        print("failures by reason:")
        for r in s.pareto_reasons:
            print(f"  {r.count:6d}  {shown(r.reason)}")
    if s.checks:
        print("numeric checks:")
        rows = [("check", "n", "mean", "σ", "min", "max", "window", "Cpk")]
        for c in s.checks:
            if c.low is not None and c.high is not None:
                window = f"{q(c.low, c.unit)} … {q(c.high, c.unit)}"
            else:
                window = f"≥ {q(c.low, c.unit)}" if c.low is not None else f"≤ {q(c.high, c.unit)}"
            rows.append((f"{c.step}: {c.measurement}", str(c.n), q(c.mean, c.unit),
                         "—" if c.std is None else q(c.std, c.unit), q(c.min, c.unit),
                         q(c.max, c.unit), window, "—" if c.cpk is None else f"{c.cpk:.2f}"))
        rows = [tuple(shown(x) for x in row) for row in rows]
        widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
        for row in rows:
            print("  " + "  ".join(x.ljust(w) for x, w in zip(row, widths, strict=True)).rstrip())
    if html_path is not None:
        print(f"summary page: {html_path}")
    return 0
