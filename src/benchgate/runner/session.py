"""One unit (or one unit after another) through a plan: the product's main job.

For every unit, whatever happens: a database row inserted at the start and completed at the end,
the supply output switched off, and a JSON + HTML report written. A lost instrument makes the
unit ``error`` with the reason; Ctrl-C, SIGTERM or SIGHUP make it ``aborted`` (exit 130, 143,
129). The station is locked for the runner's life (:mod:`benchgate.runner.lock`).
"""

from __future__ import annotations

import uuid
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from benchgate import __version__
from benchgate.analysis.context import NO_OSCILLATION
from benchgate.errors import BenchgateError, PreflightError
from benchgate.judge.rules import Verdict, combine
from benchgate.record import InstrumentRecord, UnitRecord
from benchgate.runner.events import EventLog, Hooks
from benchgate.runner.execute import Executor, error_reason, utc_now
from benchgate.runner.lock import StationLock
from benchgate.runner.options import (
    RunOptions,
    RunOutcome,
    check_serial,
    exit_code_for,
    is_abort_code,
)
from benchgate.runner.preflight import preflight
from benchgate.runner.safety import StopSignals, as_stop, make_safe
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
        from benchgate.store import open_results

        open_bench = options.open_bench
        if open_bench is None:
            from benchgate.instruments import open_station as open_bench
        return cls(open_bench=open_bench, save_capture=save_capture, analyze=analyze,
                   write_reports=write_reports, layout=ReportLayout,
                   # the one setting (option, BENCHGATE_DB, default) decides; see store/setting.py
                   open_db=lambda _: open_results(options.db_path,
                                                  local_default=options.reports_dir / "results.sqlite"))


def _default_ask(prompt: str) -> str:
    return input(prompt)


class Runner:
    """Runs ``plan`` on ``station`` for one unit after another, sharing one database and display.

    Preflight (station, calibration, cautions, hazards) happens once, when the runner is made,
    before anything is touched; it raises :class:`~benchgate.errors.PreflightError`.
    """

    def __init__(self, plan: Any, station: Any, options: RunOptions, *, services: Services | None = None,
                 display: Any = None, signals: StopSignals | None = None):
        self.plan = plan
        self.station = station
        self.options = options
        self.ask = options.ask or _default_ask
        self.display = display or make_display(options.ui, unattended=options.unattended)
        # One station, one run: locked before anything is asked, opened or written.
        self.lock = StationLock(station).acquire()
        self.signals = signals if signals is not None else StopSignals()
        self.signals.__enter__()
        try:
            self._setup(services)
        except BaseException:
            self.signals.__exit__(None, None, None)
            self.lock.release()
            raise

    def _setup(self, services: Services | None) -> None:
        plan, station, options = self.plan, self.station, self.options
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
        self._closed = False

    def ask_operator(self, prompt: str) -> str:
        self.display.pause()
        return self.ask(prompt)

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        try:
            self.events.close()
            self.display.close()
            self.db.close()
        finally:
            self.signals.__exit__(None, None, None)
            self.lock.release()

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
        serial = check_serial(serial)
        s, o = self.services, self.options
        record = self.new_record(serial)
        layout = s.layout(o.reports_dir, self.plan.id, serial, record.started)
        executor = Executor(self.plan, None, record, layout, hooks=self.hooks, clock=self.clock,
                            ask=self.ask_operator, unattended=o.unattended,
                            save_capture=s.save_capture, analyze=s.analyze)
        bench_cm = bench = None
        caught: BaseException | None = None
        signals = self.signals
        signals.shielded = False
        signals.stop = None
        seen_before = signals.count
        try:
            try:
                self.db.begin_run(record)
                self.hooks.run_started(record, len(self.plan.steps))
                bench_cm = s.open_bench(self.station, clock=self.clock, roles=self.pre.roles)
                bench = bench_cm.__enter__()
                executor.bench = bench
                record.instruments = instrument_records(bench.facts())
                executor.run()
            except BaseException as exc:  # noqa: B036 - every way out is recorded, then handled
                caught = exc
            signals.shielded = True
        except KeyboardInterrupt as exc:  # a stop signal just after the steps ended
            caught = caught or exc
            signals.shielded = True
        # from here on no signal is raised: the bench is made safe and the evidence written
        notes = make_safe(bench_cm, bench, caught, alarm=self.hooks.alarm)
        if bench_cm is not None and not record.instruments:
            record.instruments = _records_or_empty(bench)
        outcome = self._finish(record, layout, executor, caught, notes)
        late = signals.received[seen_before:]
        if signals.stop is not None and late:
            late = late[1:]  # the one that was raised is not late
        self.late_interrupts += len(late)
        if late and not is_abort_code(outcome.exit_code):
            outcome.exit_code = 128 + late[0]  # a stop asked for while the evidence was written
        if len(signals.received) == seen_before:
            signals.shielded = False  # between units (a batch's serial prompt) a signal stops at once
        if isinstance(caught, (SystemExit, GeneratorExit)):
            raise caught
        return outcome

    def _finish(self, record: UnitRecord, layout: Any, executor: Executor, caught: BaseException | None,
                notes: list[str]) -> RunOutcome:
        failure = None
        stop = as_stop(caught) if isinstance(caught, KeyboardInterrupt) else None
        if stop is not None:
            where = f" during step {executor.current.id}" if executor.current else ""
            failure = (Verdict.ABORTED, f"aborted: {stop.description}{where}")
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
        code = stop.exit_code if stop is not None else exit_code_for(record.verdict)
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


def instrument_records(facts: Any) -> list[InstrumentRecord]:
    """The record's instrument entries, from the facts the bench reports."""
    return [InstrumentRecord(role=f.role, address=f.address, identity=f.identity,
                             calibration=None if f.calibration is None else f.calibration.to_dict())
            for f in facts]


def _records_or_empty(bench: Any) -> list:
    try:
        return instrument_records(bench.facts())
    except Exception:
        return []


def unit_verdict(record: UnitRecord, failure: tuple[Verdict, str] | None) -> tuple[Verdict, str]:
    """The unit's verdict and its reason from the checks, the step outcomes and how the run ended.

    The reason names the most basic finding first (see :func:`findings`); how the run ended is
    added after it when that is not what decided the verdict.
    """
    checks = record.checks()
    found = [c.verdict for c in checks]
    found += [_STEP_VERDICT[s.status] for s in record.steps if s.status in _STEP_VERDICT]
    if failure is not None:
        found.append(failure[0])
    verdict = combine(found)
    if failure is not None and failure[0] == verdict:
        reason = failure[1]
    elif verdict == Verdict.PASS:
        reason = f"all {len(checks)} checks passed" if checks else "all steps done (no checks)"
    else:
        reason = next(iter(findings(record, verdict)), verdict.value)
    if failure is not None and failure[0] != verdict:
        reason += f"; then {failure[1]}"
    return verdict, reason


def findings(record: UnitRecord, verdict: Verdict) -> list[str]:
    """What went wrong with a unit, most basic first.

    1. A step that could not run or stopped the unit (an instrument error, a declined prompt):
       nothing after it means much.
    2. A capture in which nothing oscillates: every level, frequency or start-up figure of that
       capture (and a failing check on it) only follows from that, so it is named as such,
       whatever the order of the steps.
    3. The checks whose verdict is the unit's, in plan order; then any other check that did
       not pass.
    """
    out: list[str] = []
    for s in record.steps:
        if s.error and _STEP_VERDICT.get(s.status) == verdict:
            out.append(f"{s.id}: {s.error}")
    for s in record.steps:
        dead = [c for c in s.checks if c.result is not None and not c.result.valid
                and c.result.reason in NO_OSCILLATION]
        if dead:
            bad = next((c for c in s.checks if c.verdict == verdict), None)
            detail = f" ({bad.reason})" if bad is not None and bad not in dead else ""
            out.append(f"{s.id}: no oscillation in the {s.id} record{detail}")
    checks = record.checks()
    out += [f"{c.step_id}: {c.reason}" for c in checks if c.verdict == verdict]
    out += [f"{c.step_id}: {c.reason}" for c in checks if c.verdict not in (verdict, Verdict.PASS)]
    return list(dict.fromkeys(out))


def run_unit(plan: Any, station: Any, serial: str, options: RunOptions) -> RunOutcome:
    """Run ``plan`` on the unit ``serial`` at ``station``: record, reports, database row."""
    with Runner(plan, station, options) as runner:
        return runner.run(serial)
