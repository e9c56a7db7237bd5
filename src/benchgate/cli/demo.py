"""``benchgate demo``: the main job end to end on the understudy bench, in about a minute."""

from __future__ import annotations

import argparse


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "demo", help="run the TB-3 plan over a simulated lot on the understudy bench",
        description="Start the understudy bench (serial ADC on a pseudo-terminal, SCPI instruments on "
        "loopback), run the TB-3 tone-board plan over a lot of simulated units (good ones and one of "
        "each defect), write every unit report and the lot summary, and print the results.")
    p.add_argument("--units", type=int, default=14, metavar="N",
                   help="units in the lot (default 14; with fewer than 7 not every simulated defect "
                   "is in it)")
    p.add_argument("--speed", type=float, default=4.0, metavar="X",
                   help="how much faster than real time the understudy bench runs (default 4)")
    p.add_argument("--reports", default="reports", metavar="DIR", help="report folder (default: reports)")
    p.add_argument("--board", default="tb3", choices=("tb3", "aa1", "lp2"),
                   help="which board's lot: tb3 (tone board, default), aa1 (audio amplifier) or lp2 "
                   "(low-pass filter); aa1 and lp2 are driven by the signal generator")
    p.add_argument("--lot", default=None, metavar="LOT",
                   help="lot name; serials are LOT-001 … (default <BOARD>-2612, e.g. TB3-2612: running the demo again "
                   "retests the same units, which the summary counts as retests)")
    p.add_argument("--json", action="store_true", help="print the lot as JSON instead of a table")
    p.set_defaults(func=run)
    return p


def _table(result) -> None:
    import os
    import sys

    rows = [(u.serial, u.defect or "—", u.verdict, u.reason) for u in result.units]
    if sys.stdout.isatty() and not os.environ.get("NO_COLOR"):
        from rich.console import Console
        from rich.table import Table
        from rich.text import Text

        styles = {"pass": "green", "fail": "red", "inconclusive": "yellow", "error": "magenta"}
        # Text everywhere: a lot name or reason holding "[...]" is shown as typed, never as markup
        table = Table(title=Text(f"lot {result.lot} · {len(rows)} units"), title_justify="left")
        for col in ("serial", "defect injected", "verdict", "reason"):
            table.add_column(col, overflow="fold")
        for serial, defect, verdict, reason in rows:
            table.add_row(Text(serial), Text(defect), Text(verdict, style=styles.get(verdict, "")), Text(reason))
        Console().print(table)
    else:
        width = max(len(r[0]) for r in rows)
        dwidth = max(len("defect injected"), *(len(r[1]) for r in rows))
        print(f"lot {result.lot} · {len(rows)} units")
        print(f"{'serial':<{width}}  {'defect injected':<{dwidth}}  {'verdict':<12}  reason")
        for serial, defect, verdict, reason in rows:
            print(f"{serial:<{width}}  {defect:<{dwidth}}  {verdict:<12}  {reason}")


def run(args) -> int:
    import json
    import sys
    from pathlib import Path

    from benchgate.errors import PreflightError
    from benchgate.runner.demo import run_demo

    if args.units < 1:
        raise PreflightError(f"--units must be at least 1, got {args.units}")
    if not args.speed > 0:
        raise PreflightError(f"--speed must be > 0, got {args.speed}")

    def progress(index, total, unit):
        if not args.json:
            defect = f" ({unit.defect} injected)" if unit.defect else ""
            print(f"[{index:>2}/{total}] {unit.serial}{defect}: {unit.verdict}", file=sys.stderr, flush=True)

    def started(text):
        if not args.json:
            print(text, file=sys.stderr, flush=True)

    result = run_demo(units=args.units, speed=args.speed, reports_dir=Path(args.reports), lot=args.lot,
                      board=args.board, on_unit=progress,
                      on_start=started)
    if args.json:
        print(json.dumps(result.to_dict(), ensure_ascii=False, default=str))
        return result.exit_code
    _table(result)
    passed = sum(u.verdict == "pass" for u in result.units)
    print(f"{passed} of {len(result.units)} passed in {result.seconds:.1f} s")
    if result.exit_code:
        print("the lot was stopped early (aborted); the units above were recorded")
    print(f"lot summary: {result.summary_html}")
    return result.exit_code
