"""The terminal faces of the person at the bench (:class:`benchgate.runner.attendant.Attendant`).

Displays (what is shown):

``RichDisplay``
    colour and a progress bar with the time left for waits and captures (a terminal).
``PlainDisplay``
    one line per event, no colour, no animation (not a terminal, ``NO_COLOR``, unattended, logs).
``QuietDisplay``
    nothing but the alarm (on stderr).

Faces (a display plus how questions are answered): :class:`Terminal` asks on stdin;
:class:`Unattended` asks nobody (a CI job) and reads only serial numbers, one per line.
Every text from outside (serials, operators, lots, reasons, instrument replies) is shown as
typed, never read as rich markup.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

from benchgate.runner.attendant import NobodyThere, Notice, Reply
from benchgate.units.format import format_quantity

if TYPE_CHECKING:
    from benchgate.instruments.preview import CapturePreview
    from benchgate.plan.limits import Window
    from benchgate.plan.model import Step
    from benchgate.record import CheckRecord, StepRecord, UnitRecord

_MARK = {"pass": "PASS", "fail": "FAIL", "inconclusive": "UNDECIDED", "error": "ERROR", "aborted": "ABORTED"}
_STYLE = {"pass": "bold green", "fail": "bold red", "inconclusive": "bold yellow", "error": "bold magenta",
          "aborted": "bold magenta"}
#: what the operator types to acknowledge a hazard (besides the hazard's name)
ACK_PHRASE = "yes I understand"
_YES = ("y", "yes")
_NO = ("n", "no")


def describe_value(check: CheckRecord) -> str:
    """``1.002 kHz ± 0.3 Hz`` for a check record, or why there is no value."""
    m = check.result
    if m is None:
        return "no value"
    if not m.valid:
        return f"invalid ({m.reason})"
    text = format_quantity(m.value, m.unit)
    if m.uncertainty is not None:
        text += f" ± {format_quantity(m.uncertainty, m.unit)}"
    return text


def describe_window(window: Window) -> str:
    lo = None if window.low is None else format_quantity(window.low, window.unit)
    hi = None if window.high is None else format_quantity(window.high, window.unit)
    if lo and hi:
        return f"[{lo} … {hi}]"
    return f"[≥ {lo}]" if lo else f"[≤ {hi}]"


def _is_terminal(stream: Any) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


def _to_stderr(text: str) -> None:
    try:
        print(f"benchgate: {text}", file=sys.stderr, flush=True)
    except (BrokenPipeError, ValueError):
        pass


class QuietDisplay:
    """Shows nothing but an alarm (on stderr: it must reach the operator whatever the display)."""

    def announce(self, notice: Notice) -> None: ...

    def alarm(self, text: str) -> None:
        _to_stderr(text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None: ...
    def step_started(self, index: int, total: int, step: Step) -> None: ...
    def progress(self, fraction: float, text: str, time_left: float | None) -> None: ...
    def capture_preview(self, preview: CapturePreview) -> None: ...  # a picture needs a page
    def check(self, check: CheckRecord) -> None: ...
    def step_finished(self, step: StepRecord) -> None: ...
    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None: ...
    def pause(self) -> None: ...
    def close(self) -> None: ...


class PlainDisplay(QuietDisplay):
    """One plain line per event; progress only at quarter marks, so logs stay short."""

    def __init__(self, stream: TextIO | None = None):
        self.stream = stream or sys.stdout
        self._last_quarter = -1

    def _line(self, text: str) -> None:
        try:
            print(text, file=self.stream, flush=True)
        except (BrokenPipeError, ValueError):  # closed pipe / closed file: keep running
            pass

    def announce(self, notice: Notice) -> None:
        self._line(notice.line())

    def alarm(self, text: str) -> None:
        self._line(text)
        if not _is_terminal(self.stream):  # a log file or a pipe: the console gets it on stderr
            _to_stderr(text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        self._line(f"unit {record.serial!r} · plan {record.plan_id} v{record.plan_version} · "
                   f"station {record.station_id} · rule {record.decision_rule} · {total_steps} steps")

    def step_started(self, index: int, total: int, step: Step) -> None:
        self._last_quarter = -1
        self._line(f"[{index}/{total}] {step.id}: {step.title}")

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        quarter = int(max(0.0, min(1.0, fraction)) * 4)
        if quarter == self._last_quarter or quarter in (0, 4):
            return
        self._last_quarter = quarter
        left = "" if time_left is None else f", {time_left:.1f} s left"
        self._line(f"    {quarter * 25}% {text}{left}")

    def check(self, check: CheckRecord) -> None:
        reason = "" if check.verdict.value == "pass" else f" — {check.reason}"
        self._line(f"    {_MARK[check.verdict.value]:<9} {check.measurement} {describe_value(check)} "
                   f"{describe_window(check.window)}{reason}")

    def step_finished(self, step: StepRecord) -> None:
        extra = f": {step.error}" if step.error else ""
        if step.answer is not None:
            extra += f" (answer {step.answer!r})"
        self._line(f"    step {step.id} {step.status}{extra}")

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        self._line(f"{_MARK[record.verdict.value]} unit {record.serial!r}: {record.reason}")
        report = paths.get("html") or paths.get("json")
        if report:
            self._line(f"report: {report}")


class RichDisplay(PlainDisplay):
    """Colour, a live progress bar with the time left, and each check's value as it lands."""

    def __init__(self, stream: TextIO | None = None):
        super().__init__(stream)
        from rich.console import Console

        self.console = Console(file=self.stream, highlight=False)
        self._progress: Any = None
        self._task: Any = None
        self._samples = ""  # "12 500 of 25 000 samples" of the capture being taken

    def _stop_bar(self) -> None:
        self._samples = ""
        if self._progress is not None:
            self._progress.stop()
            self._progress = None

    def _print(self, *parts: tuple[str, str]) -> None:
        """One line made of (text, style) parts, printed in one go (as text, never markup)."""
        from rich.text import Text

        self._stop_bar()
        self.console.print(Text.assemble(*parts))

    def announce(self, notice: Notice) -> None:
        style = "" if notice.kind == "info" else "bold yellow"
        self._print((notice.line(), style))

    def alarm(self, text: str) -> None:
        self._print((f" {text} ", "bold white on red"))
        if not _is_terminal(self.stream):
            _to_stderr(text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        from rich.rule import Rule
        from rich.text import Text

        self._stop_bar()
        # Text, never a markup string: a serial such as "[/bold]" is shown as typed
        title = Text(f"benchgate · {record.plan_id} v{record.plan_version} · unit {record.serial}")
        self.console.print(Rule(title, style="cyan"))

    def step_started(self, index: int, total: int, step: Step) -> None:
        self._print((f"▶ {index}/{total} ", "bold cyan"), (f"{step.id}: {step.title}", ""))
        if step.kind in ("wait", "capture"):
            from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn

            self._progress = Progress(TextColumn("   {task.description}", markup=False), BarColumn(),
                                      TaskProgressColumn(), TextColumn("{task.fields[left]}", markup=False),
                                      console=self.console, transient=True)
            self._task = self._progress.add_task(step.kind, total=1.0, left="")
            self._progress.start()

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        if self._progress is not None:
            left = "" if time_left is None else f"{time_left:.1f} s left"
            self._progress.update(self._task, completed=max(0.0, min(1.0, fraction)), description=text,
                                  left=" · ".join(x for x in (self._samples, left) if x))

    def capture_preview(self, preview: CapturePreview) -> None:
        """Only the count of samples so far, beside the bar (the picture is the page's)."""
        self._samples = f"{preview.received:,} of {preview.expected:,} samples".replace(",", " ")

    def check(self, check: CheckRecord) -> None:
        v = check.verdict.value
        self._print((f"   {_MARK[v]:<9} ", _STYLE[v]),
                    (f"{check.measurement} {describe_value(check)} {describe_window(check.window)}", ""))
        if v != "pass":  # a pass's reason only repeats the value and the window
            self._print((f"             {check.reason}", "dim"))

    def step_finished(self, step: StepRecord) -> None:
        self._stop_bar()
        if step.status != "done":
            extra = f": {step.error}" if step.error else ""
            self._print((f"   step {step.status}{extra}", "yellow"))
        for note in step.notes:
            if note.startswith(("attempt", "retry", "on_fail")):
                self._print((f"   {note}", "dim"))

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        v = record.verdict.value
        self._print((f" {_MARK[v]} ", f"{_STYLE[v]} reverse"), (f" unit {record.serial}: {record.reason}", ""))
        report = paths.get("html") or paths.get("json")
        if report:
            self._print((f"report: {report}", "dim"))

    def pause(self) -> None:
        self._stop_bar()

    def close(self) -> None:
        self._stop_bar()


def make_display(mode: str, *, unattended: bool = False, stream: TextIO | None = None) -> QuietDisplay:
    """The display for ``mode`` (auto | rich | plain | quiet).

    ``auto`` is rich on a terminal, plain when the stream is not a terminal, ``NO_COLOR`` is set
    (https://no-color.org convention) or the run is unattended.
    """
    stream = stream or sys.stdout
    if mode == "quiet":
        return QuietDisplay()
    if mode == "plain":
        return PlainDisplay(stream)
    if mode == "rich":
        return RichDisplay(stream)
    if mode != "auto":
        raise ValueError(f"display must be auto, rich, plain or quiet, got {mode!r}")
    if not _is_terminal(stream) or unattended or os.environ.get("NO_COLOR"):
        return PlainDisplay(stream)
    return RichDisplay(stream)


class _Face:
    """A display, shown through (the listener half of the interface)."""

    def __init__(self, display: QuietDisplay, read: Callable[[str], str] = input):
        self.display = display
        self.read = read

    def announce(self, notice: Notice) -> None:
        self.display.announce(notice)

    def alarm(self, text: str) -> None:
        self.display.alarm(text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        self.display.run_started(record, total_steps)

    def step_started(self, index: int, total: int, step: Step) -> None:
        self.display.step_started(index, total, step)

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        self.display.progress(fraction, text, time_left)

    def capture_preview(self, preview: CapturePreview) -> None:
        self.display.capture_preview(preview)

    def check(self, check: CheckRecord) -> None:
        self.display.check(check)

    def step_finished(self, step: StepRecord) -> None:
        self.display.step_finished(step)

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        self.display.run_finished(record, paths)

    def ask_serial(self, prompt: str) -> str | None:
        """One line (a barcode scanner types it and presses Enter); None at an empty line or EOF."""
        self.display.pause()
        try:
            line = self.read(prompt)
        except EOFError:
            return None
        return line.strip() or None

    def close(self) -> None:
        self.display.close()


class Terminal(_Face):
    """A person at a terminal: questions on stdin (``read``), answers typed."""

    def ask_yes_no(self, question: str) -> bool:
        while True:
            self.display.pause()
            answer = self.read(f"{question} [y/n] ").strip().casefold()
            if answer in _YES or answer in _NO:
                return answer in _YES
            self.display.announce(Notice("info", "please answer y or n"))

    def wait_until_done(self, instruction: str) -> str:
        self.display.pause()
        return self.read(f"{instruction} [Enter when done] ").strip()

    def ask_retry(self, question: str) -> Reply:
        self.display.pause()
        answer = self.read(f"{question} [Enter = retry, n = stop] ").strip()
        return Reply(yes=answer.casefold() not in _NO, remark=answer)

    def acknowledge(self, name: str, text: str) -> bool:
        self.display.pause()
        try:
            typed = self.read(f"Type {name!r} or {ACK_PHRASE!r} to acknowledge: ")
        except EOFError:
            return False
        return typed.strip().casefold() in (name.casefold(), ACK_PHRASE.casefold())


class Unattended(NobodyThere, _Face):
    """Nobody at the bench (a CI job): shows lines, asks nothing; serial numbers come one per line."""
