"""``benchgate report REPORT.json [--html FILE] [--pdf FILE]``: re-render a stored unit report.

The HTML is rebuilt from the JSON report: its plots from the views the run's analysis kept (older
reports: from the captures stored beside it), each capture file checked against its SHA-256;
``--pdf`` prints it with the system's headless Chromium, driven by Playwright (the ``browser``
extra), and says in one line what is missing when either is not installed.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path


def add_parser(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "report",
        help="re-render a unit report's HTML (or print it to PDF) from its JSON",
        description="Rebuild the self-contained HTML report from a stored JSON unit report and the "
        "captures beside it; optionally print it to PDF with headless Chromium. With neither "
        "--html nor --pdf the HTML is written beside the JSON (same name, .html).",
    )
    p.add_argument("report", metavar="REPORT.json", help="a JSON unit report written by benchgate")
    p.add_argument("--html", metavar="FILE", help="write the HTML report here")
    p.add_argument("--pdf", metavar="FILE",
                   help="print the report to this PDF (needs Chromium and benchgate[browser])")
    p.add_argument("--paper", choices=("a4", "letter"), default="a4", help="PDF paper size (default a4)")
    p.set_defaults(func=run)
    return p


def _load_captures(record, folder: Path) -> tuple[dict, list[str]]:
    from benchgate.capfile import load_capture
    from benchgate.errors import CaptureError

    captures, problems = {}, []
    for step in record.steps:
        if step.capture is None or step.capture.views is not None:
            continue  # the record's own views are drawn; only older records need the capture
        path = folder / step.capture.file
        if not path.is_file():
            problems.append(f"{path}: capture file missing; its plots are left out")
            continue
        try:
            captures[step.id] = load_capture(path)
        except CaptureError as exc:
            problems.append(f"{exc.one_line()}; its plots are left out")
    return captures, problems


def run(args: argparse.Namespace) -> int:
    import tempfile

    from benchgate.report import browser
    from benchgate.report.html import write_html
    from benchgate.report.json_report import read_json

    src = Path(args.report)
    # say so before doing any work when the PDF cannot be made
    why = browser.unavailable() if args.pdf else None
    if why:
        print(f"benchgate: {why}", file=sys.stderr)
        return 2
    record = read_json(src)
    captures, problems = _load_captures(record, src.parent)
    for line in problems:
        print(f"benchgate: {line}", file=sys.stderr)
    html_path = Path(args.html) if args.html else (None if args.pdf else src.with_suffix(".html"))
    with tempfile.TemporaryDirectory(prefix="benchgate-report-") as tmp:
        if html_path is not None:
            write_html(record, html_path, captures, verify=src.parent)
            print(f"html: {html_path}")
            source = html_path
        else:
            source = write_html(record, Path(tmp) / "report.html", captures, verify=src.parent)
        if args.pdf:
            browser.print_pdf(source, args.pdf, paper=args.paper)
            print(f"pdf: {args.pdf}")
    return 0
