"""What a run is told (:class:`RunOptions`) and what it hands back (:class:`RunOutcome`).

Exit codes (the same for ``benchgate run``, ``reanalyze`` and the pytest plugin):

===  ==========================================================
0    every check passed
1    at least one check failed
2    plan, station or usage error, or the station is busy (nothing was run)
3    error or inconclusive: the run could not decide
130  aborted: Ctrl-C (SIGINT), or the operator stopped the unit at a prompt
143  aborted: SIGTERM (a cancelled CI job, ``timeout``, ``kill``)
129  aborted: SIGHUP (the terminal was closed)
===  ==========================================================

Every abort still switches the supply off and writes the report and the database row.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable
from contextlib import AbstractContextManager
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from benchgate.errors import PreflightError
from benchgate.judge.rules import Verdict

if TYPE_CHECKING:
    from benchgate.clock import Clock
    from benchgate.instruments import Bench
    from benchgate.record import UnitRecord

EXIT_PASS = 0
EXIT_FAIL = 1
EXIT_USAGE = 2
EXIT_UNDECIDED = 3
EXIT_ABORTED = 130

_EXIT_FOR_VERDICT = {
    Verdict.PASS: EXIT_PASS,
    Verdict.FAIL: EXIT_FAIL,
    Verdict.ERROR: EXIT_UNDECIDED,
    Verdict.INCONCLUSIVE: EXIT_UNDECIDED,
    Verdict.ABORTED: EXIT_ABORTED,
}


def exit_code_for(verdict: Verdict) -> int:
    """The process exit code a unit verdict maps to."""
    return _EXIT_FOR_VERDICT[Verdict(verdict)]


def is_abort_code(code: int) -> bool:
    """An exit code that says the run was aborted (130, or 128 + another stop signal)."""
    return code > 128


def worst_exit_code(codes: list[int]) -> int:
    """The exit code of several units: aborted, then fail, then undecided, then pass."""
    aborted = [c for c in codes if is_abort_code(c)]
    if aborted:
        return aborted[-1]
    for code in (EXIT_FAIL, EXIT_UNDECIDED, EXIT_USAGE):
        if code in codes:
            return code
    return EXIT_PASS


def check_serial(serial: str | None) -> str:
    """The serial number as given, or :class:`PreflightError` when it is missing or blank.

    It is kept verbatim (reports and the database store it as typed); only a serial with nothing
    but white space is refused, since no report or row could name the unit.
    """
    if serial is None or not str(serial).strip():
        raise PreflightError("the serial number is empty; give the unit's serial number")
    return str(serial)


@dataclass
class RunOptions:
    """How to run a plan on a unit.

    ``open_bench`` opens the station's instruments (default
    :func:`benchgate.instruments.open_station`); tests and the soak pass a fake.
    ``today`` is the date calibration is judged against (default: today, UTC).
    """

    operator: str | None = None
    lot: str | None = None
    reports_dir: Path = Path("reports")
    db_path: Path | str | None = None  # a SQLite file, or a postgresql:// URL (kept as text)
    unattended: bool = False
    accept_hazards: bool = False
    allow_expired_calibration: bool = False
    events: Path | None = None
    junit: Path | None = None
    clock: Clock | None = None
    open_bench: Callable[..., AbstractContextManager[Bench]] | None = None
    today: _dt.date | None = None
    extra_flags: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.reports_dir = Path(self.reports_dir)
        if self.db_path is not None and not str(self.db_path).lower().startswith(("postgresql://", "postgres://")):
            self.db_path = Path(self.db_path)

    @property
    def database(self) -> Path | str:
        """The results database: a SQLite file, or a postgresql:// URL."""
        return self.db_path if self.db_path is not None else self.reports_dir / "results.sqlite"

    def today_utc(self) -> _dt.date:
        return self.today or _dt.datetime.now(_dt.UTC).date()


@dataclass
class RunOutcome:
    """One unit's run: the record, the files written (json, html, junit, captures…), the exit code."""

    record: UnitRecord
    paths: dict[str, Path]
    exit_code: int

    @property
    def verdict(self) -> Verdict:
        return self.record.verdict
