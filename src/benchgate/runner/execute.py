"""Executes a plan's steps, in order, on an open bench, filling the unit record as it goes.

Step kinds: ``supply`` (set voltage / current limit / output), ``wait`` (on the injected clock),
``prompt`` (operator instruction or yes/no question), ``capture`` (ADC or digitizer capture, saved
at once, analyzed, judged) and ``reading`` (settle, read one value, judge). ``on_fail`` and
``retries`` are applied here; every attempt is noted in the step's record.

Instrument errors (and Ctrl-C) end the unit: the step is marked and the exception travels on to
the session, which makes the bench safe and writes the reports.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, TypeVar, cast

from benchgate.analysis.capture import Capture
from benchgate.analysis.measurement import Measurement
from benchgate.common.evidence import utc_now
from benchgate.errors import BenchgateError, InstrumentDisconnected, StepError
from benchgate.instruments.base import take_reading
from benchgate.judge.rules import Verdict, combine, judge
from benchgate.record import CaptureRecord, CheckRecord, StepRecord, UnitRecord
from benchgate.runner.acquire import POWER_CYCLE_OFF_S, Acquisition, CaptureProgress
from benchgate.runner.adaptive import acquire_adaptive
from benchgate.runner.attendant import Attendant, RunListener
from benchgate.runner.safety import as_stop

if TYPE_CHECKING:
    from benchgate.analysis.core import Analysis
    from benchgate.clock import Clock
    from benchgate.instruments import Bench
    from benchgate.plan.model import (
        CaptureStep,
        Check,
        Plan,
        PromptStep,
        ReadingStep,
        Step,
        SupplyStep,
        WaitStep,
    )
    from benchgate.report.layout import ReportLayout

__all__ = ["POWER_CYCLE_OFF_S", "Executor", "StepError", "error_reason", "step_status", "utc_now"]

T = TypeVar("T")

#: step kind -> ``run(executor, step, step_record, attempt)``, for kinds added by registration
#: (:func:`register_step`); the built-in kinds are the executor's ``_do_<kind>`` methods.
STEP_RUNNERS: dict[str, Callable[..., None]] = {}


def register_step(kind: str, run: Callable[..., None]) -> None:
    """Add a step kind: ``run(executor, step, step_record, attempt)`` does one attempt."""
    STEP_RUNNERS[kind] = run



class Executor:
    """Runs the steps of ``plan`` on ``bench`` into ``record`` (whose steps it creates).

    ``save_capture(capture, path) -> sha256`` and ``analyze(capture, names, harmonics=) ->
    Analysis`` are passed in, so the executor does not care where they come from.
    """

    def __init__(self, plan: Plan, bench: Bench | None, record: UnitRecord, layout: ReportLayout, *,
                 hooks: RunListener, clock: Clock, attendant: Attendant, unattended: bool,
                 save_capture: Callable[[Capture, Path], str], analyze: Callable[..., Analysis]):
        self.plan = plan
        self.bench = bench
        self.record = record
        self.layout = layout
        self.hooks = hooks
        self.clock = clock
        self.attendant = attendant
        self.unattended = unattended
        self.save_capture = save_capture
        self.analyze = analyze
        self.captures: dict[str, Capture] = {}  # step id -> Capture (the attempt the record names)
        self.capture_paths: dict[str, Path] = {}  # file key -> path, every attempt
        self.current: StepRecord | None = None
        if not record.steps:
            record.steps = [StepRecord(id=s.id, kind=s.kind, title=s.title) for s in plan.steps]

    # ------------------------------------------------------------------ the plan
    def run(self) -> None:
        total = len(self.plan.steps)
        for index, (step, srec) in enumerate(zip(self.plan.steps, self.record.steps, strict=True), 1):
            self.current = srec
            self.hooks.step_started(index, total, step)
            try:
                self._run_step(step, srec)
            except KeyboardInterrupt as exc:
                self._end(srec, "aborted", as_stop(exc).description)
                raise
            except BenchgateError as exc:
                self._end(srec, "error", error_reason(exc))
                raise
            except Exception as exc:  # a bug or an unexpected library error: still keep the evidence
                self._end(srec, "error", f"{type(exc).__name__}: {exc}")
                raise
            if wrong_answer_stops(step, srec):
                srec.status = "aborted"
                srec.notes.append("the answer was not the expected one: the unit was stopped here and "
                                  "the remaining steps were not run (nothing more was switched on)")
                self.hooks.step_finished(srec)
                return
            self.hooks.step_finished(srec)
            if srec.status in ("failed", "error") and step.on_fail == "stop":
                srec.notes.append("on_fail: stop; the remaining steps were not run")
                return
        self.current = None

    def _end(self, srec: StepRecord, status: str, error: str) -> None:
        srec.status = status
        srec.error = error
        srec.ended = utc_now()
        self.hooks.step_finished(srec)

    def require_bench(self) -> Bench:
        """The open bench the steps run on (step runners registered from other modules use it)."""
        if self.bench is None:
            raise RuntimeError("the executor runs steps on an open bench only")
        return self.bench

    def _do(self, step: Step, srec: StepRecord, attempt: int) -> None:
        """One attempt of ``step`` (its kind says which class the loader made of it)."""
        if step.kind == "supply":
            self._do_supply(cast("SupplyStep", step), srec)
        elif step.kind == "wait":
            self._do_wait(cast("WaitStep", step))
        elif step.kind == "prompt":
            self._do_prompt(cast("PromptStep", step), srec)
        elif step.kind == "reading":
            self._do_reading(cast("ReadingStep", step), srec)
        elif step.kind == "capture":
            self._do_capture(cast("CaptureStep", step), srec, attempt)
        else:
            raise StepError(step.id, f"unknown step kind {step.kind!r}")

    def _run_step(self, step: Step, srec: StepRecord) -> None:
        srec.started = utc_now()
        attempt = 0
        while True:
            attempt += 1
            srec.attempts = attempt
            srec.checks = []
            srec.error = None
            registered = STEP_RUNNERS.get(step.kind)
            if registered is not None:  # a kind added by registration (the generator-driven ones)
                registered(self, step, srec, attempt)
            else:
                self._do(step, srec, attempt)
            srec.status = step_status(srec)
            if srec.status == "done" or attempt > step.retries:
                break
            srec.notes.append(f"attempt {attempt}: {srec.status} — {attempt_summary(srec)}")
            if not self._confirm_retry(step, srec, attempt):
                srec.notes.append(f"retry declined after attempt {attempt}")
                break
        srec.ended = utc_now()

    def _confirm_retry(self, step: Step, srec: StepRecord, attempt: int) -> bool:
        text = step.retry_prompt or f"Step {step.id} did not pass; try again?"
        if self.unattended:
            srec.notes.append(f"retry {attempt}: unattended, retried without asking ({text})")
            return True
        reply = self._answer(step, lambda: self.attendant.ask_retry(text))
        if not reply.yes:
            return False
        srec.notes.append(f"retry {attempt}: {text}" + (f" (operator: {reply.remark})" if reply.remark else ""))
        return True

    def _answer(self, step: Step, question: Callable[[], T]) -> T:
        try:
            return question()
        except EOFError:  # NobodyAnswers too
            raise StepError(step.id, "no operator input (end of input) while the step waited for an answer") from None

    # ------------------------------------------------------------------ step kinds
    def _do_supply(self, step: SupplyStep, srec: StepRecord) -> None:
        supply = self.require_bench().require_supply()
        done = []
        if step.voltage is not None:
            supply.set_voltage(step.voltage)
            done.append(f"voltage {step.voltage:g} V")
        if step.current_limit is not None:
            supply.set_current_limit(step.current_limit)
            done.append(f"current limit {step.current_limit:g} A")
        if step.output is not None:
            supply.output(bool(step.output))
            done.append("output on" if step.output else "output off")
        srec.notes.append("supply: " + (", ".join(done) or "unchanged"))

    def _do_wait(self, step: WaitStep) -> None:
        self.sleep(step.seconds, f"wait {step.seconds:g} s")

    def sleep(self, seconds: float, text: str) -> None:
        """Let ``seconds`` pass on the run's clock, reporting progress with the time left."""
        if seconds <= 0:
            return
        chunks = 20 if seconds >= 0.2 else 1
        for i in range(chunks):
            self.clock.sleep(seconds / chunks)
            done = (i + 1) / chunks
            self.hooks.progress(done, text, seconds * (1 - done))

    def _do_prompt(self, step: PromptStep, srec: StepRecord) -> None:
        if self.unattended:
            if step.unattended_answer is None:
                raise StepError(step.id, f"prompt {step.text!r} needs an operator, and the plan gives no "
                                         "unattended_answer for it, so an unattended run cannot go on")
            answer = str(step.unattended_answer)
            srec.notes.append("answered by the plan's unattended_answer")
        elif step.ask:
            answer = "yes" if self._answer(step, lambda: self.attendant.ask_yes_no(step.text)) else "no"
        else:
            answer = self._answer(step, lambda: self.attendant.wait_until_done(step.text)).strip()
        srec.answer = answer
        if step.ask and step.expect is not None and answer.casefold() != str(step.expect).casefold():
            srec.error = f"answer {answer!r} to {step.text!r} (the run goes on only with {step.expect!r})"

    def _do_reading(self, step: ReadingStep, srec: StepRecord) -> None:
        instrument = self.require_bench()[step.instrument]
        if step.settle:
            self.sleep(step.settle, f"settle {step.settle:g} s")
        measurement = take_reading(instrument, step.quantity)
        for check in step.checks:
            m = measurement if measurement.name == check.measurement else _renamed(measurement, check.measurement)
            self._judge(step, srec, check, m)

    def _do_capture(self, step: CaptureStep, srec: StepRecord, attempt: int) -> None:
        recorder = self.require_bench().recorder(step.instrument)
        key = step.id if attempt == 1 else f"{step.id}-{attempt}"
        supply = self.require_bench().require_supply() if step.power_on else None
        try:
            if getattr(step, "adaptive", None) is not None:  # record in blocks, stop once decided
                capture = acquire_adaptive(recorder, step, self.plan.decision, getattr(self.plan, "max_risk", None),
                                           self.analyze, self._capture_progress(step))
            else:
                capture = Acquisition(step, recorder, supply=supply, clock=self.clock, hooks=self.hooks,
                                      notes=srec.notes, sleep=self.sleep).take()
        except InstrumentDisconnected as exc:
            if exc.partial is not None and getattr(exc.partial, "n", 0) > 0:
                self._keep(step, srec, key, exc.partial.with_metadata(partial=True), [])
            raise
        names = [c.measurement for c in step.checks]
        warnings: list[str] = []
        views = None
        try:
            # the views (plot data) come from this one analysis: the report does not analyze again
            analysis = self.analyze(capture, names, harmonics=step.harmonics, views=True)
            measurements = analysis.measurements
            warnings = list(analysis.warnings)
            views = analysis.views
        except (BenchgateError, ValueError) as exc:
            reason = f"analysis failed: {exc}"
            measurements = {c.measurement: Measurement.invalid(c.measurement, c.window.unit, reason)
                            for c in step.checks}
            warnings = [reason]
        self._keep(step, srec, key, capture, warnings)
        if srec.capture is not None:
            srec.capture.views = views
        for check in step.checks:
            self._judge(step, srec, check, measurements.get(check.measurement))

    def _capture_progress(self, step: CaptureStep) -> CaptureProgress:
        return CaptureProgress(self.hooks, f"capture {step.channel}", step.duration)

    # ------------------------------------------------------------------ helpers
    def _keep(self, step: CaptureStep, srec: StepRecord, key: str, capture: Capture, warnings: list[str]) -> None:
        path = Path(self.layout.capture_path(key))
        path.parent.mkdir(parents=True, exist_ok=True)
        sha = self.save_capture(capture, path)
        self.capture_paths[f"capture:{key}"] = path
        self.captures[step.id] = capture
        srec.capture = CaptureRecord(
            file=os.path.relpath(path, self.layout.folder), sha256=sha, channel=capture.channel,
            sample_rate=capture.sample_rate, samples=capture.n, instrument=step.instrument,
            warnings=list(warnings), metadata=dict(capture.metadata))

    def _judge(self, step: Step, srec: StepRecord, check: Check, measurement: Measurement | None) -> None:
        cv = judge(measurement, check.window, self.plan.decision, getattr(self.plan, "max_risk", None))
        rec = CheckRecord(step_id=step.id, measurement=check.measurement, window=check.window,
                          result=measurement, verdict=cv.verdict, reason=cv.reason, rule=cv.rule,
                          risk=None if cv.risk is None else cv.risk.probability)
        srec.checks.append(rec)
        self.hooks.check(rec)


def _renamed(m: Measurement, name: str) -> Measurement:
    return Measurement(name=name, value=m.value, unit=m.unit, uncertainty=m.uncertainty, valid=m.valid,
                       reason=m.reason, details=m.details)


def wrong_answer_stops(step: Step, srec: StepRecord) -> bool:
    """A prompt answered against its ``expect`` stops the unit unless the plan says
    ``on_wrong_answer: continue`` for that step."""
    return (step.kind == "prompt" and srec.status == "failed"
            and getattr(step, "on_wrong_answer", "abort") != "continue")


def step_status(srec: StepRecord) -> str:
    """done / failed / error from a finished attempt's checks (and a prompt's answer)."""
    verdict = combine(c.verdict for c in srec.checks)
    if verdict == Verdict.FAIL or (srec.kind == "prompt" and srec.error):
        return "failed"
    if verdict == Verdict.ERROR:
        return "error"
    return "done"


def attempt_summary(srec: StepRecord) -> str:
    bad = [c for c in srec.checks if c.verdict in (Verdict.FAIL, Verdict.ERROR)]
    if bad:
        return "; ".join(f"{c.measurement}: {c.reason}" for c in bad)
    return srec.error or "did not pass"


def error_reason(exc: BaseException) -> str:
    """One line for an error, with the instrument's own error code when it gave one."""
    if isinstance(exc, BenchgateError):
        text = exc.one_line()
        code = getattr(exc, "code", None)
        code_text = getattr(exc, "code_text", None)
        if code is not None and str(code) not in text:
            text += f" (instrument error {code}" + (f", {code_text}" if code_text else "") + ")"
        return text
    return f"{type(exc).__name__}: {exc}"


# the generator-driven step kinds register themselves (tone, sweep, level_sweep)
from benchgate.runner import stimulus as _stimulus  # noqa: E402, F401
