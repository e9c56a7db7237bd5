"""pytest plugin: run a benchgate plan's checks as pytest items on a bench station.

Registered through the ``pytest11`` entry point. Without ``--bench-station`` nothing is
collected, so ordinary test suites are unaffected. With it::

    pytest --bench-station station.yaml --bench-serial SN testplans/tb3.yaml --junitxml out.xml

each check of the plan becomes an item ``tb3.yaml::<step id>::<measurement>``. The plan runs
once per session and plan file, unattended, at the first item that needs it; the normal unit
report and database row are written as for ``benchgate run``. Each item then reports its
check: ``pass`` passes; ``fail`` fails with the verdict's reason; ``error`` and
``inconclusive`` (the run could not decide) and a check that was never made are reported as
pytest *errors* (raised while setting the item up), so ``--junitxml`` shows them as
``<error>``, apart from real failures. Any of them makes pytest exit 1.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest

_RUNS = pytest.StashKey[dict]()
_PLAN_TOP = re.compile(r"^steps\s*:", re.M)


def pytest_addoption(parser):
    group = parser.getgroup("benchgate", "benchgate bench tests")
    group.addoption("--bench-station", default=None, metavar="STATION",
                    help="station file: collect benchgate plan files given on the command line")
    group.addoption("--bench-serial", default=None, metavar="SN", help="serial number of the unit under test")
    group.addoption("--bench-reports", default="reports", metavar="DIR",
                    help="folder for unit reports (default: reports)")
    group.addoption("--bench-db", default=None, metavar="PATH|URL",
                    help="results database: SQLite file or postgresql:// URL "
                    "(default: $BENCHGATE_DB, else the station file's 'results', else DIR/results.sqlite)")
    group.addoption("--bench-accept-hazards", action="store_true", default=False,
                    help="accept the plan's hazards for this unattended run (recorded in the report)")
    group.addoption("--bench-lot", default=None, metavar="LOT", help="lot of the unit (recorded)")
    group.addoption("--bench-operator", default=None, metavar="NAME", help="operator or CI job name (recorded)")
    group.addoption("--bench-clock-speed", default=None, type=float, metavar="X",
                    help="virtual seconds per wall-clock second, for an accelerated understudy bench")


def pytest_configure(config):
    config.stash[_RUNS] = {}
    if config.getoption("bench_station") is not None:
        if not (config.getoption("bench_serial") or "").strip():
            raise pytest.UsageError("--bench-serial SN is required with --bench-station (not blank)")
        speed = config.getoption("bench_clock_speed")
        if speed is not None and not speed > 0:
            raise pytest.UsageError(f"--bench-clock-speed must be > 0, got {speed}")


def pytest_report_header(config):
    if config.getoption("bench_station") is None:
        return None
    return (f"benchgate: station {config.getoption('bench_station')}, "
            f"serial {config.getoption('bench_serial')!r}")


def _named_on_command_line(config, path: Path) -> bool:
    base = Path(config.invocation_params.dir)
    for arg in config.args:
        p = Path(arg.split("::", 1)[0])
        if not p.is_absolute():
            p = base / p
        try:
            if p.resolve() == path.resolve():
                return True
        except OSError:
            continue
    return False


def pytest_collect_file(file_path: Path, parent):
    config = parent.config
    station = config.getoption("bench_station")
    if station is None or file_path.suffix.lower() not in (".yaml", ".yml"):
        return None
    try:
        if file_path.resolve() == Path(station).resolve():
            return None
    except OSError:
        pass
    if not _named_on_command_line(config, file_path):
        # inside a folder given on the command line: only files that look like plans
        try:
            if not _PLAN_TOP.search(file_path.read_text(encoding="utf-8", errors="replace")):
                return None
        except OSError:
            return None
    return PlanFile.from_parent(parent, path=file_path)


class PlanFile(pytest.File):
    """A benchgate plan: one collector per step with checks."""

    plan: Any = None

    def collect(self):
        from benchgate.errors import PlanErrors
        from benchgate.plan import load_plan

        try:
            self.plan = load_plan(self.path)
        except PlanErrors as exc:
            raise self.CollectError("\n".join(f"benchgate: {line}" for line in exc.lines())) from None
        for step in self.plan.steps:
            if getattr(step, "checks", ()):
                yield StepNode.from_parent(self, name=step.id, step=step)


class StepNode(pytest.Collector):
    """One step of a plan; its checks are the items."""

    def __init__(self, *, step, **kw):
        super().__init__(**kw)
        self.step = step

    def collect(self):
        seen: dict[str, int] = {}
        for check in self.step.checks:
            k = seen.get(check.measurement, 0)
            seen[check.measurement] = k + 1
            name = check.measurement if k == 0 else f"{check.measurement}[{k + 1}]"
            yield CheckItem.from_parent(self, name=name, check=check, nth=k)


@dataclass
class PlanRun:
    """One run of one plan file in this session: the outcome, or why there is none."""

    outcome: Any = None
    error: str | None = None
    notices: list[str] = field(default_factory=list)


#: how this plugin words what the runner says a face could offer (runner.attendant.Hint)
_HINTS = {
    "accept_hazards": "--bench-accept-hazards accepts them for this run, and the report records it",
    "allow_expired_calibration": "the station's calibration is past due; renew it to run under pytest",
}


class PytestAttendant:
    """The pytest face of the person at the bench: nobody is asked (an unattended run); what
    would be shown is kept for the terminal summary, and an alarm goes to stderr at once."""

    def __init__(self) -> None:
        self.lines: list[str] = []

    def announce(self, notice: Any) -> None:
        if notice.kind != "info":
            self.lines.append(notice.line())

    def alarm(self, text: str) -> None:
        import sys

        self.lines.append(text)
        print(f"benchgate: {text}", file=sys.stderr, flush=True)

    def run_started(self, record: Any, total_steps: int) -> None: ...
    def step_started(self, index: int, total: int, step: Any) -> None: ...
    def progress(self, fraction: float, text: str, time_left: float | None) -> None: ...
    def capture_preview(self, preview: Any) -> None: ...
    def check(self, check: Any) -> None: ...
    def step_finished(self, step: Any) -> None: ...
    def run_finished(self, record: Any, paths: Any) -> None: ...

    def ask_yes_no(self, question: str) -> bool:
        from benchgate.runner.attendant import NobodyAnswers

        raise NobodyAnswers(question)

    def wait_until_done(self, instruction: str) -> str:
        from benchgate.runner.attendant import NobodyAnswers

        raise NobodyAnswers(instruction)

    def ask_retry(self, question: str) -> Any:
        from benchgate.runner.attendant import NobodyAnswers

        raise NobodyAnswers(question)

    def ask_serial(self, prompt: str) -> str | None:
        return None

    def acknowledge(self, name: str, text: str) -> bool:
        return False

    def close(self) -> None: ...


def _run_plan(config, plan) -> PlanRun:
    import benchgate.runner as runner
    from benchgate.errors import BenchgateError
    from benchgate.instruments.station import load_station

    speed = config.getoption("bench_clock_speed")
    attendant = PytestAttendant()
    try:
        station = load_station(config.getoption("bench_station"))
        clock = None
        if speed is not None:
            from benchgate.clock import ScaledClock

            clock = ScaledClock(speed)
        options = runner.RunOptions(
            operator=config.getoption("bench_operator"), lot=config.getoption("bench_lot"),
            reports_dir=Path(config.getoption("bench_reports")),
            db_path=config.getoption("bench_db"),
            unattended=True, accept_hazards=bool(config.getoption("bench_accept_hazards")),
            clock=clock, extra_flags={"pytest": True})
        outcome = runner.run_unit(plan, station, config.getoption("bench_serial"), options,
                                  attendant=attendant)
    except BenchgateError as exc:
        lines = exc.lines() if hasattr(exc, "lines") else [exc.one_line()]
        hint = _HINTS.get(str(getattr(exc, "hint", None)))
        return PlanRun(error="; ".join(lines) + (f" ({hint})" if hint else ""), notices=attendant.lines)
    except Exception as exc:  # noqa: BLE001 - every item must say why it has no result
        return PlanRun(error=f"internal error: {type(exc).__name__}: {exc}", notices=attendant.lines)
    return PlanRun(outcome=outcome, notices=attendant.lines)


def _session_run(item: CheckItem) -> PlanRun:
    runs = item.config.stash[_RUNS]
    plan_file = item.plan_file
    key = str(plan_file.path)
    if key not in runs:
        runs[key] = _run_plan(item.config, plan_file.plan)
    return runs[key]


def _find_check(record, step_id: str, measurement: str, nth: int):
    for step in record.steps:
        if step.id == step_id:
            found = [c for c in step.checks if c.measurement == measurement]
            return step, (found[nth] if nth < len(found) else None)
    return None, None


class CheckItem(pytest.Item):
    """One check of one step, judged by the plan's session run."""

    def __init__(self, *, check, nth: int = 0, **kw):
        super().__init__(**kw)
        self.check = check
        self.nth = nth
        self.step_node: StepNode = self.parent
        self.plan_file: PlanFile = self.parent.parent
        self._verdict: str | None = None
        self._reason = ""

    def setup(self) -> None:
        run = _session_run(self)
        if run.error is not None:
            pytest.fail(f"ERROR: benchgate could not run the plan: {run.error}", pytrace=False)
        record = run.outcome.record
        paths = getattr(run.outcome, "paths", {}) or {}
        report = paths.get("html") or paths.get("json")
        if report is not None:
            self.user_properties.append(("benchgate_report", str(report)))
        step, check = _find_check(record, self.step_node.step.id, self.check.measurement, self.nth)
        if check is None:
            status = "not run" if step is None else step.status
            why = (step.error if step is not None and step.error else record.reason) or "no reason recorded"
            self.user_properties.append(("verdict", "error"))
            pytest.fail(f"ERROR: check not made (step {status}): {why}", pytrace=False)
        self._verdict = check.verdict.value
        self._reason = check.reason
        m, w = check.result, check.window
        props = [("verdict", self._verdict),
                 ("value", None if m is None or not m.valid else m.value),
                 ("uncertainty", None if m is None else m.uncertainty),
                 ("low", w.low), ("high", w.high), ("unit", w.unit), ("rule", check.rule)]
        self.user_properties.extend((k, v) for k, v in props if v is not None)
        if self._verdict not in ("pass", "fail"):
            pytest.fail(f"{self._verdict.upper()} (could not decide): {self._reason}", pytrace=False)

    def runtest(self) -> None:
        if self._verdict == "fail":
            pytest.fail(f"FAIL: {self._reason}", pytrace=False)

    def reportinfo(self):
        line = getattr(self.check, "line", None)
        return self.path, None if line is None else line - 1, f"{self.step_node.name}::{self.name}"


def pytest_terminal_summary(terminalreporter, exitstatus, config):
    runs = config.stash.get(_RUNS, {})
    if not runs:
        return
    terminalreporter.section("benchgate")
    for plan_path, run in runs.items():
        name = Path(plan_path).name
        for line in run.notices:
            terminalreporter.write_line(f"{name}: {line}")
        if run.error is not None:
            terminalreporter.write_line(f"{name}: not run: {run.error}")
            continue
        rec = run.outcome.record
        terminalreporter.write_line(f"{name} on {rec.serial!r}: {rec.verdict.value.upper()} - {rec.reason}")
        for kind in ("html", "json"):
            p = (getattr(run.outcome, "paths", {}) or {}).get(kind)
            if p is not None:
                terminalreporter.write_line(f"  {kind} report: {p}")
