"""One unit (or one unit after another) through a plan: the product's main job.

For every unit, whatever happens: a database row inserted at the start and completed at the end,
the supply output switched off, and a JSON + HTML report written. A lost instrument makes the
unit ``error`` with the reason; Ctrl-C makes it ``aborted`` (exit 130).
"""

from __future__ import annotations

import uuid
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from benchgate import __version__
from benchgate.errors import BenchgateError
from benchgate.judge.rules import Verdict, combine
from benchgate.record import UnitRecord
from benchgate.runner.events import EventLog, Hooks
from benchgate.runner.execute import Executor, error_reason, utc_now
from benchgate.runner.options import (
    EXIT_ABORTED,
    PreflightError,
    RunOptions,
    RunOutcome,
    exit_code_for,
)
from benchgate.runner.preflight import preflight
from benchgate.runner.safety import InterruptGuard, make_safe
from benchgate.runner.ui import make_display

_STEP_VERDICT = {"failed": Verdict.FAIL, "error": Verdict.ERROR, "aborted": Verdict.ABORTED}


@dataclass
class Services:
    """The other parts of benchgate the runner calls (swappable for tests)."""

    open_bench: Callable[..., Any]
    save_capture: Callable[..., str]
    analyze: Callable[..., Any]
    write_reports: Callable[..., dict]
    layout: Callable[..., Any]
    open_db: Callable[[Path], Any]

    @classmethod
    def default(cls, options: RunOptions) -> Services:
        from benchgate.analysis import analyze
        from benchgate.capfile import save_capture
        from benchgate.report import write_reports
        from benchgate.report.layout import ReportLayout
        from benchgate.store import ResultsDB

        open_bench = options.open_bench
        if open_bench is None:
            from benchgate.instruments import open_station as open_bench
        return cls(open_bench=open_bench, save_capture=save_capture, analyze=analyze,
                   write_reports=write_reports, layout=ReportLayout, open_db=ResultsDB.open)


def _default_ask(prompt: str) -> str:
    return input(prompt)


class Runner:
    """Runs ``plan`` on ``station`` for one unit after another, sharing one database and display.

    Preflight (station, calibration, cautions, hazards) happens once, when the runner is made,
    before anything is touched; it raises :class:`~benchgate.runner.options.PreflightError`.
    """

    def __init__(self, plan: Any, station: Any, options: RunOptions, *, services: Services | None = None,
                 display: Any = None):
        self.plan = plan
        self.station = station
        self.options = options
        self.ask = options.ask or _default_ask
        self.display = display or make_display(options.ui, unattended=options.unattended)
        self.pre = preflight(plan, station, options, self.ask_operator, self.display.info)
        self.services = services or Services.default(options)
        self.clock = options.clock
        if self.clock is None:
            from benchgate.clock import SystemClock

            self.clock = SystemClock()
        try:
            options.reports_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise PreflightError(f"cannot create the report folder: {exc.strerror}",
                                 where=str(options.reports_dir)) from exc
        try:
            self.events = EventLog(options.events)
        except OSError as exc:
            raise PreflightError(f"cannot write the events file: {exc.strerror}", where=str(options.events)) from exc
        self.db = self.services.open_db(options.database)
        self.hooks = Hooks(self.display, self.events)
        self.done: list[RunOutcome] = []  # kept only for --junit
        self.count = 0
        self.late_interrupts = 0

    def ask_operator(self, prompt: str) -> str:
        self.display.pause()
        return self.ask(prompt)

    def close(self) -> None:
        self.events.close()
        self.display.close()
        self.db.close()

    def __enter__(self) -> Runner:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    # ------------------------------------------------------------------ one unit
    def new_record(self, serial: str) -> UnitRecord:
        plan, o = self.plan, self.options
        flags: dict[str, Any] = {"unattended": o.unattended,
                                 "allow_expired_calibration": o.allow_expired_calibration}
        if self.pre.expired:
            flags["expired_calibration"] = list(self.pre.expired)
        flags.update(o.extra_flags)
        return UnitRecord(
            run_id=uuid.uuid4().hex, serial=serial, plan_id=plan.id, plan_version=str(plan.version),
            plan_hash=plan.hash, plan_path=str(plan.path), product=plan.product,
            station_id=self.station.id, operator=o.operator, lot=o.lot, started=utc_now(),
            software_version=__version__, decision_rule=plan.decision,
            cautions=list(plan.cautions), hazards=[f"{h.name}: {h.text}" for h in plan.hazards],
            hazards_acknowledged=self.pre.hazards_acknowledged, flags=flags)

    def run(self, serial: str) -> RunOutcome:
        s, o = self.services, self.options
        record = self.new_record(serial)
        layout = s.layout(o.reports_dir, self.plan.id, serial, record.started)
        executor = Executor(self.plan, None, record, layout, hooks=self.hooks, clock=self.clock,
                            ask=self.ask_operator, unattended=o.unattended,
                            save_capture=s.save_capture, analyze=s.analyze)
        bench_cm = bench = None
        caught: BaseException | None = None
        with InterruptGuard() as guard:
            try:
                try:
                    self.db.begin_run(record)
                    self.hooks.run_started(record, len(self.plan.steps))
                    bench_cm = s.open_bench(self.station, clock=self.clock, roles=self.pre.roles)
                    bench = bench_cm.__enter__()
                    executor.bench = bench
                    record.instruments = list(bench.records())
                    executor.run()
                except BaseException as exc:  # noqa: B036 - every way out is recorded, then handled
                    caught = exc
                guard.shielded = True
            except KeyboardInterrupt as exc:  # the first Ctrl-C, just after the steps ended
                caught = caught or exc
                guard.shielded = True
            # from here on no Ctrl-C is raised: the bench is made safe and the evidence written
            notes = make_safe(bench_cm, bench, caught)
            if bench_cm is not None and not record.instruments:
                record.instruments = _records_or_empty(bench)
            outcome = self._finish(record, layout, executor, caught, notes)
        self.late_interrupts += guard.deferred
        if guard.deferred:
            outcome.exit_code = EXIT_ABORTED
        if isinstance(caught, (SystemExit, GeneratorExit)):
            raise caught
        return outcome

    def _finish(self, record: UnitRecord, layout: Any, executor: Executor, caught: BaseException | None,
                notes: list[str]) -> RunOutcome:
        failure = None
        if isinstance(caught, KeyboardInterrupt):
            where = f" during step {executor.current.id}" if executor.current else ""
            failure = (Verdict.ABORTED, f"aborted: interrupted by the operator (Ctrl-C){where}")
        elif isinstance(caught, BenchgateError):
            failure = (Verdict.ERROR, error_reason(caught))
        elif caught is not None:
            failure = (Verdict.ERROR, f"internal error: {type(caught).__name__}: {caught}")
        if notes:
            record.flags["safe_state"] = notes
        record.verdict, record.reason = unit_verdict(record, failure)
        record.ended = utc_now()
        paths: dict[str, Path] = dict(executor.capture_paths)
        try:
            paths.update(self.services.write_reports(record, layout, executor.captures))
        except Exception as exc:  # the row below must still be completed
            record.flags["report_error"] = f"{type(exc).__name__}: {exc}"
            self.display.info(f"benchgate: could not write the report: {exc}")
        report = paths.get("json")
        self.db.finish_run(record, None if report is None else str(report))
        code = EXIT_ABORTED if isinstance(caught, KeyboardInterrupt) else exit_code_for(record.verdict)
        outcome = RunOutcome(record=record, paths=paths, exit_code=code)
        self.count += 1
        if self.options.junit is not None:  # JUnit lists every unit of the session
            self.done.append(outcome)
            from benchgate.report.junit import write_junit

            try:
                write_junit([(o.record, o.paths) for o in self.done], self.options.junit)
                paths["junit"] = Path(self.options.junit)
            except OSError as exc:
                self.display.info(f"benchgate: {self.options.junit}: cannot write JUnit XML: {exc.strerror}")
        self.hooks.run_finished(record, paths)
        return outcome


def _records_or_empty(bench: Any) -> list:
    try:
        return list(bench.records())
    except Exception:
        return []


def unit_verdict(record: UnitRecord, failure: tuple[Verdict, str] | None) -> tuple[Verdict, str]:
    """The unit's verdict and its reason from the checks, the step outcomes and how the run ended."""
    checks = record.checks()
    found = [c.verdict for c in checks]
    found += [_STEP_VERDICT[s.status] for s in record.steps if s.status in _STEP_VERDICT]
    if failure is not None:
        found.append(failure[0])
    verdict = combine(found)
    first_check = next((c for c in checks if c.verdict == verdict), None)
    first_step = next((s for s in record.steps if _STEP_VERDICT.get(s.status) == verdict and s.error), None)
    if failure is not None and failure[0] == verdict:
        reason = failure[1]
    elif verdict == Verdict.PASS:
        reason = f"all {len(checks)} checks passed" if checks else "all steps done (no checks)"
    elif first_check is not None:
        reason = f"{first_check.step_id}: {first_check.reason}"
    elif first_step is not None:
        reason = f"{first_step.id}: {first_step.error}"
    else:
        reason = verdict.value
    if failure is not None and failure[0] != verdict:
        reason += f"; then {failure[1]}"
    return verdict, reason


def run_unit(plan: Any, station: Any, serial: str, options: RunOptions) -> RunOutcome:
    """Run ``plan`` on the unit ``serial`` at ``station``: record, reports, database row."""
    with Runner(plan, station, options) as runner:
        return runner.run(serial)
