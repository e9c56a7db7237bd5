"""The terminal faces: rich on a terminal, plain lines otherwise, nothing when quiet; questions."""

from __future__ import annotations

import io

import pytest

from benchgate.cli.terminal import (
    PlainDisplay,
    QuietDisplay,
    RichDisplay,
    Terminal,
    Unattended,
    make_display,
)
from benchgate.runner.attendant import NobodyAnswers


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


def test_plain_progress_reports_time_left():
    out = io.StringIO()
    d = PlainDisplay(out)
    for i in range(1, 21):
        d.progress(i / 20, "wait 2 s", 2.0 * (1 - i / 20))
    lines = out.getvalue().splitlines()
    assert lines == ["    25% wait 2 s, 1.5 s left", "    50% wait 2 s, 1.0 s left", "    75% wait 2 s, 0.5 s left"]


def test_yes_no_asks_again_until_it_gets_an_answer():
    out = io.StringIO()
    replies = iter(["maybe", " Y "])
    face = Terminal(PlainDisplay(out), read=lambda p: next(replies))
    assert face.ask_yes_no("Is the LED lit?") is True
    assert "please answer y or n" in out.getvalue()


def test_retry_keeps_the_remark_and_n_stops():
    assert Terminal(QuietDisplay(), read=lambda p: "re-seated").ask_retry("again?").yes is True
    assert Terminal(QuietDisplay(), read=lambda p: "re-seated").ask_retry("again?").remark == "re-seated"
    assert Terminal(QuietDisplay(), read=lambda p: "N").ask_retry("again?").yes is False


@pytest.mark.parametrize("typed, ok", [("hot", True), (" YES I UNDERSTAND ", True), ("y", False), ("", False)])
def test_hazard_is_acknowledged_by_typing_its_name_or_the_phrase(typed, ok):
    assert Terminal(QuietDisplay(), read=lambda p: typed).acknowledge("hot", "hot surface") is ok


def test_unattended_face_asks_nobody_but_reads_serials():
    face = Unattended(QuietDisplay(), read=lambda p: "SN-7\r\n")
    with pytest.raises(NobodyAnswers):
        face.ask_yes_no("Is the LED lit?")
    with pytest.raises(EOFError):  # NobodyAnswers is an EOFError: the runner's "no operator input"
        face.wait_until_done("Place the board")
    assert face.acknowledge("hot", "hot surface") is False
    assert face.ask_serial("sn: ") == "SN-7"


def test_alarm_reaches_stderr_even_when_quiet(capsys):
    QuietDisplay().alarm("SWITCH THE SUPPLY OFF BY HAND: test")
    assert capsys.readouterr().err == "benchgate: SWITCH THE SUPPLY OFF BY HAND: test\n"


def test_a_capture_preview_is_a_count_on_a_terminal_and_nothing_in_a_log():
    from types import SimpleNamespace

    from benchgate.instruments.preview import whole_preview

    preview = whole_preview("out", 50_000.0, [0.5] * 25_600, 200_000)
    step = SimpleNamespace(id="steady", title="Tone", kind="capture")
    rich = RichDisplay(Tty())
    face = Terminal(rich, read=lambda p: "")
    face.step_started(6, 7, step)
    face.capture_preview(preview)
    face.progress(0.128, "capture out", 3.5)
    assert rich._progress.tasks[0].fields["left"] == "25 600 of 200 000 samples · 3.5 s left"
    face.close()
    out = io.StringIO()
    for quiet in (Terminal(PlainDisplay(out), read=lambda p: ""), Unattended(PlainDisplay(out), read=lambda p: "")):
        quiet.capture_preview(preview)  # a log gets no picture and no extra line
    assert out.getvalue() == ""
