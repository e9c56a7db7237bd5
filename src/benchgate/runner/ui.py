"""What the operator sees while a unit runs.

Three displays share one set of hooks (the runner calls them; each decides what to show):

``RichDisplay``
    colour and a progress bar with the time left for waits and captures (a terminal).
``PlainDisplay``
    one line per event, no colour, no animation (not a terminal, ``NO_COLOR``, unattended, logs).
``QuietDisplay``
    nothing at all.
"""

from __future__ import annotations

import os
import sys
from typing import Any, TextIO

from benchgate.units.format import format_quantity

_MARK = {"pass": "PASS", "fail": "FAIL", "inconclusive": "UNDECIDED", "error": "ERROR", "aborted": "ABORTED"}
_STYLE = {"pass": "bold green", "fail": "bold red", "inconclusive": "bold yellow", "error": "bold magenta",
          "aborted": "bold magenta"}


def describe_value(check: Any) -> str:
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


def describe_window(window: Any) -> str:
    lo = None if window.low is None else format_quantity(window.low, window.unit)
    hi = None if window.high is None else format_quantity(window.high, window.unit)
    if lo and hi:
        return f"[{lo} … {hi}]"
    return f"[≥ {lo}]" if lo else f"[≤ {hi}]"


class QuietDisplay:
    """Shows nothing (``ui="quiet"``)."""

    def info(self, text: str) -> None: ...
    def run_started(self, record: Any, total_steps: int) -> None: ...
    def step_started(self, index: int, total: int, step: Any) -> None: ...
    def progress(self, fraction: float, text: str, time_left: float | None) -> None: ...
    def check(self, check: Any) -> None: ...
    def step_finished(self, step: Any) -> None: ...
    def run_finished(self, record: Any, paths: dict) -> None: ...
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

    def info(self, text: str) -> None:
        self._line(text)

    def run_started(self, record: Any, total_steps: int) -> None:
        self._line(f"unit {record.serial!r} · plan {record.plan_id} v{record.plan_version} · "
                   f"station {record.station_id} · rule {record.decision_rule} · {total_steps} steps")

    def step_started(self, index: int, total: int, step: Any) -> None:
        self._last_quarter = -1
        self._line(f"[{index}/{total}] {step.id}: {step.title}")

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        quarter = int(max(0.0, min(1.0, fraction)) * 4)
        if quarter == self._last_quarter or quarter in (0, 4):
            return
        self._last_quarter = quarter
        left = "" if time_left is None else f", {time_left:.1f} s left"
        self._line(f"    {quarter * 25}% {text}{left}")

    def check(self, check: Any) -> None:
        self._line(f"    {_MARK[check.verdict.value]:<9} {check.measurement} {describe_value(check)} "
                   f"{describe_window(check.window)} — {check.reason}")

    def step_finished(self, step: Any) -> None:
        extra = f": {step.error}" if step.error else ""
        if step.answer is not None:
            extra += f" (answer {step.answer!r})"
        self._line(f"    step {step.id} {step.status}{extra}")

    def run_finished(self, record: Any, paths: dict) -> None:
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
        self._progress = None
        self._task = None

    def _stop_bar(self) -> None:
        if self._progress is not None:
            self._progress.stop()
            self._progress = None

    def _print(self, *args: Any, **kw: Any) -> None:
        (self._progress.console if self._progress else self.console).print(*args, **kw)

    def info(self, text: str) -> None:
        style = "bold yellow" if text.startswith(("CAUTION", "HAZARD", "WARNING")) else None
        self._print(text, style=style, markup=False)

    def run_started(self, record: Any, total_steps: int) -> None:
        from rich.rule import Rule

        self.console.print(Rule(f"benchgate · {record.plan_id} v{record.plan_version} · unit {record.serial}",
                                style="cyan"), markup=False)

    def step_started(self, index: int, total: int, step: Any) -> None:
        self._stop_bar()
        self._print(f"[bold cyan]▶ {index}/{total}[/] ", end="")
        self._print(f"{step.id}: {step.title}", markup=False)
        if step.kind in ("wait", "capture"):
            from rich.progress import BarColumn, Progress, TextColumn, TimeRemainingColumn

            self._progress = Progress(TextColumn("   {task.description}"), BarColumn(),
                                      TextColumn("{task.percentage:>3.0f}%"), TimeRemainingColumn(),
                                      console=self.console, transient=True)
            self._task = self._progress.add_task(step.kind, total=1.0)
            self._progress.start()

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        if self._progress is not None:
            self._progress.update(self._task, completed=max(0.0, min(1.0, fraction)), description=text)

    def check(self, check: Any) -> None:
        v = check.verdict.value
        self._print(f"   [{_STYLE[v]}]{_MARK[v]:<9}[/] ", end="")
        self._print(f"{check.measurement} {describe_value(check)} {describe_window(check.window)}",
                    markup=False)
        self._print(f"             {check.reason}", style="dim", markup=False)

    def step_finished(self, step: Any) -> None:
        self._stop_bar()
        if step.status not in ("done",):
            extra = f": {step.error}" if step.error else ""
            self._print(f"   step {step.status}{extra}", style="yellow", markup=False)

    def run_finished(self, record: Any, paths: dict) -> None:
        self._stop_bar()
        v = record.verdict.value
        self._print(f"[{_STYLE[v]} reverse] {_MARK[v]} [/] ", end="")
        self._print(f"unit {record.serial}: {record.reason}", markup=False)
        report = paths.get("html") or paths.get("json")
        if report:
            self._print(f"report: {report}", style="dim", markup=False)

    def pause(self) -> None:
        self._stop_bar()

    def close(self) -> None:
        self._stop_bar()


def make_display(mode: str, *, unattended: bool = False, stream: TextIO | None = None):
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
    tty = bool(getattr(stream, "isatty", lambda: False)())
    if not tty or unattended or os.environ.get("NO_COLOR"):
        return PlainDisplay(stream)
    return RichDisplay(stream)
