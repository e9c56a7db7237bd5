"""One unit (or one unit after another) through a plan: the product's main job.

For every unit, whatever happens: a database row inserted at the start and completed at the end,
the supply output switched off, and a JSON + HTML report written. A lost instrument makes the
unit ``error`` with the reason; Ctrl-C, SIGTERM or SIGHUP make it ``aborted`` (exit 130, 143,
129). The station is locked for the runner's life (:mod:`benchgate.runner.lock`). Everything
the run needs from the person at the bench goes through its :class:`~benchgate.runner.attendant.Attendant`.
"""

from __future__ import annotations

import uuid
from collections.abc import Callable, Iterable, Mapping
from contextlib import AbstractContextManager, ExitStack
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Protocol

from benchgate import __version__
from benchgate.errors import BenchgateError, PreflightError
from benchgate.judge.rules import Verdict
from benchgate.record import InstrumentRecord, UnitRecord
from benchgate.runner.attendant import Attendant, Fanout, Notice, Silent
from benchgate.runner.events import EventLog
from benchgate.runner.execute import Executor, error_reason, utc_now
from benchgate.runner.lock import StationLock
from benchgate.runner.options import (
    RunOptions,
    RunOutcome,
    check_serial,
    exit_code_for,
    is_abort_code,
)
from benchgate.runner.preflight import ACCEPTED_IN_ADVANCE, preflight
from benchgate.runner.safety import StopSignals, as_stop, safe_bench
from benchgate.runner.verdict import unit_verdict

if TYPE_CHECKING:
    from benchgate.analysis.capture import Capture
    from benchgate.analysis.core import Analysis
    from benchgate.clock import Clock
    from benchgate.instruments import Bench, InstrumentFacts
    from benchgate.instruments.station import Station
    from benchgate.plan.model import Plan
    from benchgate.report.layout import ReportLayout

__all__ = ["Runner", "Services", "run_unit", "unit_verdict"]


class ResultsStore(Protocol):
    """What the runner needs of the results database."""

    def begin_run(self, record: UnitRecord) -> None: ...
    def finish_run(self, record: UnitRecord, report_path: str | None) -> None: ...
    def close(self) -> None: ...


@dataclass
class Services:
    """The other parts of benchgate the runner calls (swappable for tests)."""

    open_bench: Callable[..., AbstractContextManager[Bench]]
    save_capture: Callable[[Capture, Path], str]
    analyze: Callable[..., Analysis]
    write_reports: Callable[[UnitRecord, ReportLayout, Mapping[str, Capture]], dict[str, Path]]
    layout: Callable[[Path, str, str, str], ReportLayout]
    open_db: Callable[[Path | str], ResultsStore]

    @classmethod
    def default(cls, options: RunOptions, station: Any = None) -> Services:
        from benchgate.analysis import analyze
        from benchgate.capfile import save_capture
        from benchgate.instruments import open_station
        from benchgate.report import write_reports
        from benchgate.report.layout import ReportLayout
        from benchgate.store import open_results

        return cls(open_bench=options.open_bench or open_station, save_capture=save_capture, analyze=analyze,
                   write_reports=write_reports, layout=ReportLayout,
                   # the one setting (option, BENCHGATE_DB, station file, default) decides;
                   # see store/setting.py
                   open_db=lambda _: open_results(options.db_path,
                                                  local_default=options.reports_dir / "results.sqlite",
                                                  station=getattr(station, "results", None),
                                                  reports=options.reports_dir))


class Runner:
    """Runs ``plan`` on ``station`` for one unit after another, sharing one database and attendant.

    The station is locked first; then preflight (station, calibration, cautions, hazards) happens
    once, before anything is touched; it raises :class:`~benchgate.errors.PreflightError`.
    ``attendant`` is the person at the bench (default :class:`~benchgate.runner.attendant.Silent`:
    nobody, nothing shown); ``signals`` the stop-signal handler to share (default: its own).
    """

    def __init__(self, plan: Plan, station: Station, options: RunOptions, *, services: Services | None = None,
                 attendant: Attendant | None = None, signals: StopSignals | None = None):
        self.plan = plan
        self.station = station
        self.options = options
        self.attendant: Attendant = attendant if attendant is not None else Silent()
        # One station, one run: locked before anything is asked, opened or written; the lock
        # and the signal handler are held for the runner's life (released by close()).
        self._held = ExitStack()
        self._held.callback(StationLock(station).acquire().release)
        self.signals = signals if signals is not None else StopSignals()
        self.done: list[RunOutcome] = []  # kept only for JUnit
        self.count = 0
        self.late_interrupts = 0
        self._closed = False
        try:
            self._held.enter_context(self.signals)
            self.pre = preflight(plan, station, options, self.attendant)
            self.services = services or Services.default(options, station)
            self.clock: Clock = options.clock or _system_clock()
            self.events = _open_events(options)
            self.db = self.services.open_db(options.database)
        except BaseException:
            self._held.close()
            raise
        self.hooks = Fanout(self.attendant, self.events)

    def close(self) -> None:
        if self._closed:
            return
        self._closed = True
        try:
            self.events.close()
            self.attendant.close()
            self.db.close()
        finally:
            self._held.close()

    def __enter__(self) -> Runner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ------------------------------------------------------------------ one unit
    def new_record(self, serial: str) -> UnitRecord:
        plan, o = self.plan, self.options
        flags: dict[str, Any] = {"unattended": o.unattended,
                                 "allow_expired_calibration": o.allow_expired_calibration}
        if self.pre.expired:
            flags["expired_calibration"] = list(self.pre.expired)
        if self.pre.hazards_acknowledged == ACCEPTED_IN_ADVANCE:
            flags["accept_hazards"] = True
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
                            attendant=self.attendant, unattended=o.unattended,
                            save_capture=s.save_capture, analyze=s.analyze)
        caught: BaseException | None = None
        notes: list[str] = []
        signals = self.signals
        signals.shielded = False
        signals.stop = None
        seen_before = signals.count

        def open_bench() -> AbstractContextManager[Bench]:
            return s.open_bench(self.station, clock=self.clock, roles=self.pre.roles)

        try:
            try:
                self.db.begin_run(record)
                self.hooks.run_started(record, len(self.plan.steps))
                with safe_bench(open_bench, notes=notes, signals=signals, alarm=self.hooks.alarm) as bench:
                    executor.bench = bench
                    record.instruments = instrument_records(bench.facts())
                    executor.run()
            except BaseException as exc:  # noqa: B036 - every way out is recorded, then handled
                caught = exc
            signals.shielded = True
        except KeyboardInterrupt as exc:  # a stop signal just after the bench was closed
            caught = caught or exc
            signals.shielded = True
        # from here on no signal is raised: the bench is safe, the evidence is written
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

    def _finish(self, record: UnitRecord, layout: ReportLayout, executor: Executor,
                caught: BaseException | None, notes: list[str]) -> RunOutcome:
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
            self.hooks.announce(Notice("warning", f"could not write the report: {exc}"))
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
                self.hooks.announce(Notice("warning", f"{self.options.junit}: cannot write JUnit XML: "
                                                      f"{exc.strerror}"))
        self.hooks.run_finished(record, paths)
        return outcome


def instrument_records(facts: Iterable[InstrumentFacts]) -> list[InstrumentRecord]:
    """The record's instrument entries, from the facts the bench reports."""
    return [InstrumentRecord(role=f.role, address=f.address, identity=f.identity,
                             calibration=None if f.calibration is None else f.calibration.to_dict())
            for f in facts]


def _system_clock() -> Clock:
    from benchgate.clock import SystemClock

    return SystemClock()


def _open_events(options: RunOptions) -> EventLog:
    try:
        options.reports_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise PreflightError(f"cannot create the report folder: {exc.strerror}",
                             where=str(options.reports_dir)) from exc
    try:
        return EventLog(options.events)
    except OSError as exc:
        raise PreflightError(f"cannot write the events file: {exc.strerror}", where=str(options.events)) from exc


def run_unit(plan: Plan, station: Station, serial: str, options: RunOptions, *,
             attendant: Attendant | None = None) -> RunOutcome:
    """Run ``plan`` on the unit ``serial`` at ``station``: record, reports, database row."""
    with Runner(plan, station, options, attendant=attendant) as runner:
        return runner.run(serial)
