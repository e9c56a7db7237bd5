"""``benchgate reanalyze REPORT.json --plan PLAN``: re-judge stored captures without hardware."""

from __future__ import annotations

import argparse


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "reanalyze", help="re-judge a stored run against another plan version (no hardware)",
        description="Read a unit's JSON report and its stored captures, analyze the captures again "
        "and judge every check against PLAN. Writes a new JSON and HTML report that says it is a "
        "reanalysis and of which run.",
        epilog="Exit codes as for 'benchgate run': 0 pass, 1 fail, 2 bad input, 3 error or inconclusive.")
    p.add_argument("report", help="the unit's JSON report")
    p.add_argument("--plan", required=True, help="plan file (YAML) to judge against")
    p.add_argument("--reports", metavar="DIR", default=None,
                   help="report folder for the new report (default: the original's reports folder)")
    p.add_argument("--json", action="store_true", help="print the new verdict and paths as JSON")
    p.set_defaults(func=run)
    return p


def run(args) -> int:
    import json

    from benchgate.plan import load_plan
    from benchgate.runner.reanalyze import reanalyze

    plan = load_plan(args.plan)
    outcome = reanalyze(args.report, plan, reports_dir=args.reports)
    rec = outcome.record
    if args.json:
        print(json.dumps({"serial": rec.serial, "verdict": rec.verdict.value, "reason": rec.reason,
                          "reanalysis_of": rec.reanalysis_of,
                          "report": {k: str(v) for k, v in outcome.paths.items()}}, ensure_ascii=False))
    else:
        print(f"{rec.verdict.value.upper()} unit {rec.serial!r} under {rec.plan_id} v{rec.plan_version}: "
              f"{rec.reason}")
        print(f"was {rec.reanalysis_of['verdict']} under {rec.reanalysis_of['plan_id']} "
              f"v{rec.reanalysis_of['plan_version']}")
        for key in ("html", "json"):
            if key in outcome.paths:
                print(f"report: {outcome.paths[key]}")
    return outcome.exit_code
