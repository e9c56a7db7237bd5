"""The operator page as a face of the runner: everything a run needs from the person at the bench.

:class:`PageFace` implements the runner's typed ``Attendant`` (runner/attendant.py): the
questions (``ask_yes_no``, ``wait_until_done``, ``ask_retry``, ``acknowledge``) wait for the
page's answer; ``announce``, ``alarm`` and the progress calls ``run_started`` … ``run_finished``
put what happens on the page's board. :func:`benchgate.web.wiring.make_runner` builds the
runner around it; the desk and the server only see :class:`PageFace`, :class:`Stop` and
``make_runner``.

While a capture records, each preview of it (:meth:`PageFace.capture_preview`) replaces the
page's waveform, marked as recording, until the capture itself is saved and drawn.

The Stop button reaches the runner the way a stop signal does: a ``StopRequested`` naming the
page (a :class:`KeyboardInterrupt`) raised in the runner's thread at its next call into this
face (a progress report, a step start, a check, a question) or into the run's clock (waits),
so the runner records the unit as aborted and makes the bench safe exactly as for Ctrl-C.
"""

from __future__ import annotations

import signal
import threading
import time
from collections.abc import Callable
from typing import Any

from benchgate.runner.attendant import Reply
from benchgate.runner.safety import StopRequested
from benchgate.web.state import Board

#: page updates of a progress bar at most this often (s of wall time), and on every 2 %
PROGRESS_INTERVAL = 0.1


class PageStop(StopRequested):
    """Stop pressed on the page (or a run abandoned): a stop request naming why."""

    def __init__(self, why: str):
        super().__init__(signal.SIGINT)
        self.why = why

    @property
    def description(self) -> str:
        return self.why


class Stop:
    """The Stop request of one run: set from any thread, raised in the runner's thread."""

    def __init__(self) -> None:
        self._event = threading.Event()
        self.why = ""
        self.on_raise: Callable[[str], None] | None = None  # told once per raise, in the run's thread

    def request(self, why: str) -> None:
        self.why = self.why or why
        self._event.set()

    def clear(self) -> None:
        self.why = ""
        self._event.clear()

    @property
    def requested(self) -> bool:
        return self._event.is_set()

    def check(self) -> None:
        if self._event.is_set():
            why = self.why or "Stop pressed on the operator page"
            if self.on_raise is not None:
                self.on_raise(why)
            raise PageStop(why)

    def wait(self, timeout: float) -> bool:
        return self._event.wait(timeout)


class StoppableClock:
    """The run's clock, whose waits end early (raising) when Stop is pressed."""

    def __init__(self, inner: Any, stop: Stop, slice_s: float = 0.05):
        self.inner = inner
        self.stop = stop
        self.slice_wall = slice_s

    @property
    def speed(self) -> float:
        return self.inner.speed

    def monotonic(self) -> float:
        return self.inner.monotonic()

    def sleep(self, seconds: float) -> None:
        if seconds <= 0:
            return
        step = self.slice_wall * (self.inner.speed if self.inner.speed != float("inf") else 1.0)
        left = seconds
        while left > 0:
            self.stop.check()
            chunk = min(step, left)
            self.inner.sleep(chunk)
            left -= chunk
        self.stop.check()


def describe(check: Any) -> tuple[str, str]:
    """Value ± U (or why there is none) and the window of a check record (units/format.py)."""
    from benchgate.units.format import value_text, window_text

    m, w = check.result, check.window
    if m is None:
        value = "no value"
    elif not m.valid:
        value = f"invalid ({m.reason})"
    else:
        value = value_text(m.value, m.uncertainty, m.unit)
    return value, f"[{window_text(w.low, w.high, w.unit)}]"


def _num(x: Any) -> float | None:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if x == x and abs(x) != float("inf") else None


class PageFace:
    """The page's side of the runner for one desk; questions wait for the page's answer (or Stop)."""

    def __init__(self, board: Board, stop: Stop, plan: Any, abandon_after: float | None = None):
        self.board = board
        self.abandon_after = abandon_after
        self.stop = stop
        self.plan = plan
        self.record: Any = None
        self._answer_ready = threading.Condition()
        self._ask_id = 0
        self._answer: str | None = None
        self._hazards_asked = 0
        self._last_progress = (0.0, -1.0)
        self._step_id: str | None = None
        stop.on_raise = self._mark_stopped

    def _mark_stopped(self, why: str) -> None:
        """The record says who stopped the run (its reason is the runner's, for any interrupt)."""
        if self.record is not None and self.record.ended is None:
            self.record.flags.setdefault("stopped", why)

    # ------------------------------------------------------------------ questions
    def _question(self, kind: str, text: str, **extra: Any) -> str:
        """Put one question on the page and wait for its answer (Stop raises)."""
        with self._answer_ready:
            self._ask_id += 1
            ask_id = self._ask_id
            self._answer = None
        self.board.end_recording()  # asked after a capture failed: its picture is not recording
        self.board.update(ask={"id": ask_id, "kind": kind, "text": text, **extra})
        try:
            with self._answer_ready:
                while self._answer is None:
                    self.stop.check()
                    self._answer_ready.wait(timeout=0.25)
                    self._check_abandoned()
                self.stop.check()
                return self._answer
        finally:
            self.board.update(ask=None)

    def _check_abandoned(self) -> None:
        """A question nobody can see must not hold the bench (the supply may be on): stop."""
        if self.abandon_after is not None and self.board.unwatched_for() > self.abandon_after:
            self.stop.request(f"no operator page was open for {self.abandon_after:g} s while the run "
                              "waited for an answer")

    def ask_yes_no(self, question: str) -> bool:
        return self._question("yesno", question) == "y"

    def wait_until_done(self, instruction: str) -> str:
        return self._question("done", instruction)

    def ask_retry(self, question: str) -> Reply:
        answer = self._question("retry", question)
        return Reply(yes=answer.strip().casefold() not in ("n", "no"))

    def ask_serial(self, prompt: str) -> str | None:
        return None  # the page scans serials itself, before the runner runs a unit

    def acknowledge(self, name: str, text: str) -> bool:
        names = [h.name for h in self.plan.hazards]
        index = names.index(name) + 1 if name in names else self._hazards_asked + 1
        self._hazards_asked += 1
        return self._question("hazard", text, hazard=name, index=index, count=max(len(names), index)) == "acknowledge"

    def answer(self, ask_id: int, answer: str) -> bool:
        """The page's answer to question ``ask_id``; False when that question is not open."""
        with self._answer_ready:
            if ask_id != self._ask_id or self._answer is not None or self.board.get("ask") is None:
                return False
            self._answer = answer
            self._answer_ready.notify_all()
            return True

    def wake(self) -> None:
        """Let a waiting question notice Stop at once."""
        with self._answer_ready:
            self._answer_ready.notify_all()

    def new_session(self) -> None:
        self._hazards_asked = 0

    # ------------------------------------------------------------------ display hooks
    def announce(self, notice: Any) -> None:
        """A caution, hazard, warning or line of information for the page."""
        item = {"kind": str(notice.kind), "text": str(notice.text)}
        self.board.change(lambda s: s["messages"].append(item) if item not in s["messages"] else None)

    def alarm(self, text: str) -> None:
        """The supply could not be confirmed off: the page shows it over everything else."""
        self.board.update(alarm=text, supply={"state": "on", "text": text,
                                              "at": time.strftime("%H:%M:%S UTC", time.gmtime())})

    def run_started(self, record: Any, total_steps: int) -> None:
        self.record = record
        steps = [{"id": s.id, "title": s.title, "kind": s.kind, "status": "pending", "error": None}
                 for s in record.steps] or [
                    {"id": s.id, "title": s.title, "kind": s.kind, "status": "pending", "error": None}
                    for s in self.plan.steps]
        self.board.update(phase="running", steps=steps, step=None, progress=None, checks=[])
        self.stop.check()

    def step_started(self, index: int, total: int, step: Any) -> None:
        def mark(s: dict[str, Any]) -> None:
            s["step"] = {"index": index, "total": total, "id": step.id, "title": step.title, "kind": step.kind}
            s["progress"] = None
            if 0 < index <= len(s["steps"]):
                s["steps"][index - 1]["status"] = "running"
        self.board.change(mark)
        self._step_id = step.id
        self._last_progress = (0.0, -1.0)
        self.stop.check()

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        self.stop.check()
        now = time.monotonic()
        last_t, last_f = self._last_progress
        if fraction < 1.0 and now - last_t < PROGRESS_INTERVAL and abs(fraction - last_f) < 0.02:
            return
        self._last_progress = (now, fraction)
        self.board.update(progress={"fraction": max(0.0, min(1.0, float(fraction))), "text": text,
                                    "left": _num(time_left)})

    def capture_preview(self, preview: Any) -> None:
        """The capture being taken, so far: the page draws it (marked recording) in place of the
        last capture. Only the newest is kept: the page's event stream sends the latest it has."""
        self.board.set_wave({**preview.to_dict(), "step": self._step_id, "recording": True})

    def check(self, check: Any) -> None:
        value, window = describe(check)
        m = check.result
        item = {"step": check.step_id, "measurement": check.measurement, "value": value,
                "window": window, "verdict": check.verdict.value, "reason": check.reason,
                "number": None if m is None else _num(m.value),
                "uncertainty": None if m is None else _num(m.uncertainty)}
        self.board.change(lambda s: s["checks"].append(item))
        self.stop.check()

    def step_finished(self, step: Any) -> None:
        def mark(s: dict[str, Any]) -> None:
            for item in s["steps"]:
                if item["id"] == step.id:
                    item["status"], item["error"] = step.status, step.error
            s["progress"] = None
        self.board.change(mark)
        self.board.end_recording()  # a capture cut short: its picture no longer says recording

    def run_finished(self, record: Any, paths: dict) -> None:
        pass  # the desk shows the outcome (it also knows the report's address)

    def pause(self) -> None: ...

    def close(self) -> None: ...
