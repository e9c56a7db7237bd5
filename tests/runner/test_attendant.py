"""The runner talks to the person at the bench only through the attendant interface."""

from __future__ import annotations

import ast
import io
import re
from pathlib import Path

from runner_fakes import Station, make_bench, services, standard_plan

from benchgate.cli.terminal import QuietDisplay, RichDisplay, Terminal
from benchgate.clock import ManualClock
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner

RUNNER = Path(__file__).resolve().parents[2] / "src" / "benchgate" / "runner"


class Tty(io.StringIO):
    def isatty(self):
        return True


def run_with(attendant, tmp_path):
    svc, _ = services(make_bench())
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock())
    with Runner(standard_plan(cautions=("Board gets warm",)), Station(), options, services=svc,
                attendant=attendant) as runner:
        return runner.run("SN-ui")


def test_rich_terminal_shows_steps_checks_and_verdict(tmp_path):
    out = Tty()
    run_with(Terminal(RichDisplay(out)), tmp_path)
    text = out.getvalue()
    for piece in ("CAUTION: Board gets warm", "tone: capture the tone", "frequency", "supply_current",
                  "PASS", "unit SN-ui: all 2 checks passed"):
        assert piece in text, piece


def test_quiet_prints_nothing(tmp_path, capsys):
    run_with(Terminal(QuietDisplay()), tmp_path)
    assert capsys.readouterr().out == ""


def test_default_attendant_is_silent(tmp_path, capsys):
    svc, _ = services(make_bench())
    with Runner(standard_plan(cautions=("Board gets warm",)), Station(),
                RunOptions(reports_dir=tmp_path, clock=ManualClock()), services=svc) as runner:
        assert runner.run("SN-s").record.verdict.value == "pass"
    assert capsys.readouterr() == ("", "")


def test_the_runner_never_prints_reads_stdin_imports_rich_or_names_an_option():
    """The house rule (GUIDE.md): the runner talks to a person only through its attendant."""
    for path in sorted(RUNNER.glob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        docstrings = {id(n.body[0].value) for n in ast.walk(tree)
                      if isinstance(n, (ast.Module, ast.ClassDef, ast.FunctionDef)) and n.body
                      and isinstance(n.body[0], ast.Expr) and isinstance(n.body[0].value, ast.Constant)}
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
                assert node.func.id not in ("print", "input"), f"{path.name}:{node.lineno}: {node.func.id}()"
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                names = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                assert not any(n == "rich" or n.startswith(("rich.", "benchgate.cli")) for n in names), \
                    f"{path.name}:{node.lineno}: imports {names}"
            if isinstance(node, ast.Attribute) and node.attr in ("stdin", "stdout", "stderr"):
                raise AssertionError(f"{path.name}:{node.lineno}: sys.{node.attr}")
            if (isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docstrings
                    and path.name != "reanalyze.py"):  # reanalyze belongs to the report side
                assert not re.search(r"(^|\s|\()--[a-z]", node.value), \
                    f"{path.name}:{node.lineno}: a command-line option in a runner message: {node.value!r}"
