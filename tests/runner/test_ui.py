"""Displays: rich on a terminal, plain lines otherwise, nothing when quiet."""

from __future__ import annotations

import io

from runner_fakes import Station, make_bench, services, standard_plan

from benchgate.clock import ManualClock
from benchgate.runner.options import RunOptions
from benchgate.runner.session import Runner
from benchgate.runner.ui import PlainDisplay, QuietDisplay, RichDisplay, make_display


class Tty(io.StringIO):
    def isatty(self):
        return True


def test_auto_choice(monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    assert isinstance(make_display("auto", stream=Tty()), RichDisplay)
    assert isinstance(make_display("auto", stream=io.StringIO()), PlainDisplay)
    assert isinstance(make_display("auto", stream=Tty(), unattended=True), PlainDisplay)
    assert isinstance(make_display("quiet", stream=Tty()), QuietDisplay)
    monkeypatch.setenv("NO_COLOR", "1")  # https://no-color.org
    assert not isinstance(make_display("auto", stream=Tty()), RichDisplay)


def run_with(display, tmp_path):
    svc, _ = services(make_bench())
    options = RunOptions(reports_dir=tmp_path, clock=ManualClock())
    with Runner(standard_plan(cautions=("Board gets warm",)), Station(), options, services=svc,
                display=display) as runner:
        return runner.run("SN-ui")


def test_rich_display_shows_steps_checks_and_verdict(tmp_path):
    out = Tty()
    display = RichDisplay(out)
    run_with(display, tmp_path)
    text = out.getvalue()
    for piece in ("CAUTION: Board gets warm", "tone: capture the tone", "frequency", "supply_current",
                  "PASS", "unit SN-ui: all 2 checks passed"):
        assert piece in text, piece


def test_plain_progress_reports_time_left():
    out = io.StringIO()
    d = PlainDisplay(out)
    for i in range(1, 21):
        d.progress(i / 20, "wait 2 s", 2.0 * (1 - i / 20))
    lines = out.getvalue().splitlines()
    assert lines == ["    25% wait 2 s, 1.5 s left", "    50% wait 2 s, 1.0 s left", "    75% wait 2 s, 0.5 s left"]


def test_quiet_prints_nothing(tmp_path, capsys):
    run_with(QuietDisplay(), tmp_path)
    assert capsys.readouterr().out == ""
