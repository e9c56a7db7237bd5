"""Command line: argument parsing and printing only.

Each sub-command lives in its own module of this package with two functions,
``add_parser(subparsers)`` (argparse only, nothing heavy imported at module level so that
``benchgate --help`` stays fast) and ``run(args) -> int``. Work is done by the library
packages, imported inside ``run``.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from benchgate import __version__

#: sub-command modules, in the order ``--help`` lists them.
COMMANDS = (
    "demo",
    "run",
    "serve",
    "inspect",
    "analyze",
    "capture",
    "station",
    "sim",
    "history",
    "summary",
    "sync",
    "reanalyze",
    "report",
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="benchgate",
        description="Automated bench tests for analog boards: run a test plan on a unit, "
        "measure with stated uncertainty, judge, and keep the evidence.",
        epilog="Bench work can hurt people and boards: read the safety section of the README. "
        "Exit codes: 0 pass, 1 fail, 2 plan/station/usage error, 3 error or inconclusive, 130 aborted.",
    )
    parser.add_argument("--version", action="version", version=f"benchgate {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks for errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"benchgate.cli.{name}")
        except ModuleNotFoundError as exc:  # a command not built yet
            if exc.name != f"benchgate.cli.{name}":
                raise
            continue
        module.add_parser(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    from benchgate.errors import BenchgateError

    try:
        return int(args.func(args) or 0)
    except BenchgateError as exc:
        if args.debug:
            raise
        lines = exc.lines() if hasattr(exc, "lines") else [exc.one_line()]
        for line in lines:
            print(f"benchgate: {line}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        if args.debug:
            raise
        print("benchgate: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
