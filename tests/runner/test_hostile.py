"""Hostile serial numbers through the runner: safe file names, escaped HTML, correct rows."""

from __future__ import annotations

import io
import json
import sqlite3

import pytest
from runner_fakes import Station, fake_analyze, fake_save_capture, make_bench, standard_plan

from benchgate.clock import ManualClock
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner, Services

HOSTILE = ["../../x", "<script>alert('x')</script>", "quote\"s and 'single'", "S" * 500, "[/bold]",
           "Ünïcødé-板-🔧", "nul\x00and\x1bescape", "/etc/passwd", "CON", "a/b\\c", "[red]x[/red] [link=y]"]


@pytest.fixture(scope="module")
def lot(tmp_path_factory):
    from benchgate.report import write_reports
    from benchgate.report.layout import ReportLayout
    from benchgate.store import ResultsDB

    root = tmp_path_factory.mktemp("hostile")
    bench = make_bench()
    svc = Services(open_bench=lambda station, clock=None, roles=None: bench, save_capture=fake_save_capture,
                   analyze=fake_analyze, write_reports=write_reports, layout=ReportLayout,
                   open_db=ResultsDB.open)
    options = RunOptions(reports_dir=root / "reports", clock=ManualClock(), operator="<b>op</b>")
    with Runner(standard_plan(), Station(), options, services=svc) as runner:
        outcomes = [runner.run(s) for s in HOSTILE]
    return root, options, outcomes


def test_files_stay_inside_the_plan_folder(lot):
    root, options, outcomes = lot
    plan_dir = (options.reports_dir / "fake").resolve()
    folders = set()
    for o in outcomes:
        for key, path in o.paths.items():
            resolved = path.resolve()
            assert resolved.is_relative_to(plan_dir), (key, path)
            assert resolved.exists()
            name = resolved.relative_to(plan_dir).parts[0]
            assert all(ch.isprintable() and ch not in "/\\" for ch in name)
        folders.add(o.paths["json"].parent)
    assert len(folders) == len(HOSTILE)  # still unique per serial
    assert not (root / "x").exists()


def test_reports_keep_the_serial_verbatim_and_html_escapes_it(lot):
    _, _, outcomes = lot
    for serial, o in zip(HOSTILE, outcomes, strict=True):
        assert json.loads(o.paths["json"].read_text(encoding="utf-8"))["serial"] == serial
        html = o.paths["html"].read_text(encoding="utf-8")
        assert "<script>alert" not in html and "<b>op</b>" not in html
    script = outcomes[1].paths["html"].read_text(encoding="utf-8")
    assert "&lt;script&gt;" in script


def test_database_rows_are_correct(lot):
    _, options, outcomes = lot
    conn = sqlite3.connect(options.database)
    rows = dict(conn.execute("SELECT run_id, serial FROM runs WHERE complete = 1").fetchall())
    conn.close()
    assert rows == {o.record.run_id: s for s, o in zip(HOSTILE, outcomes, strict=True)}


@pytest.mark.parametrize("serial", ["", "   ", "\t\r\n"])
def test_blank_serial_is_refused_before_anything(tmp_path, serial):
    from runner_fakes import services

    from benchgate.errors import PreflightError

    bench = make_bench()
    svc, db = services(bench)
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock())
    with Runner(standard_plan(), Station(), options, services=svc) as runner:
        with pytest.raises(PreflightError, match="serial number is empty"):
            runner.run(serial)
    assert db.rows == {} and bench.supply.log == [] and not bench.exited


class _Tty(io.StringIO):
    def isatty(self):
        return True


@pytest.mark.parametrize("serial", ["[/bold]", "[red]x", "a[/]b", "[bold red on blue]N-1[/]"])
def test_markup_in_serial_operator_lot_and_reasons_is_shown_as_text(tmp_path, serial):
    from runner_fakes import services

    from benchgate.cli.terminal import RichDisplay, Terminal

    out = _Tty()
    svc, _ = services(make_bench(frequency=1100.0))  # fails: the reason reaches the display too
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock(), operator="[/i]", lot="[blink]L")
    with Runner(standard_plan(cautions=("[/] keep [bold]clear",)), Station(), options, services=svc,
                attendant=Terminal(RichDisplay(out))) as runner:
        outcome = runner.run(serial)
    assert outcome.record.verdict.value == "fail" and outcome.exit_code == 1
    text = out.getvalue()
    assert f"unit {serial}" in text and "[/] keep [bold]clear" in text


def test_display_fuzz_markup_and_control_text_never_raise():
    """Seeded random text with markup and control characters through every display hook."""
    import random
    from types import SimpleNamespace

    from benchgate.analysis.measurement import Measurement
    from benchgate.cli.terminal import RichDisplay
    from benchgate.judge.rules import Verdict
    from benchgate.plan.limits import Window
    from benchgate.runner.attendant import Notice

    rng = random.Random(9)
    alphabet = "[]/\\ab =#@:;,.!~|{}()<>'\"\x1b\t\n\r" + "bold red link on /"
    for _ in range(60):
        def text() -> str:
            return "".join(rng.choice(alphabet) for _ in range(rng.randint(1, 12)))

        out = _Tty()
        d = RichDisplay(out)
        serial, reason, note = text(), text(), text()
        rec = SimpleNamespace(serial=serial, plan_id=text(), plan_version=text(), verdict=Verdict.FAIL,
                              reason=reason)
        step = SimpleNamespace(id=text(), title=text(), kind=rng.choice(["wait", "capture", "prompt"]),
                               status="failed", error=text(), notes=["retry " + note], answer=None)
        check = SimpleNamespace(verdict=Verdict.FAIL, measurement=text(), reason=reason,
                                result=Measurement.invalid("x", "V", "r" + text()), window=Window(unit="V", high=1.0))
        d.announce(Notice("caution", text()))
        d.alarm(text())
        d.run_started(rec, 3)
        d.step_started(1, 3, step)
        d.progress(0.5, text(), 1.0)
        d.check(check)
        d.step_finished(step)
        d.run_finished(rec, {"html": text()})
        d.close()
        shown = out.getvalue()
        for piece in (serial, reason):
            if piece.isprintable():  # shown as typed: markup is never interpreted
                assert piece in shown, (piece, shown)
