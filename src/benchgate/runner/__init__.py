"""The runner: a plan, a station and a unit's serial number -> a verdict with its evidence.

``run_unit(plan, station, serial, options) -> RunOutcome`` runs one unit; :class:`Runner` runs
one unit after another on one database (``--batch``, the demo). See ``options`` for exit codes.
"""

from benchgate.runner.options import (
    EXIT_ABORTED,
    EXIT_FAIL,
    EXIT_PASS,
    EXIT_UNDECIDED,
    EXIT_USAGE,
    RunOptions,
    RunOutcome,
    exit_code_for,
)

__all__ = [
    "EXIT_ABORTED", "EXIT_FAIL", "EXIT_PASS", "EXIT_UNDECIDED", "EXIT_USAGE",
    "RunOptions", "RunOutcome", "Runner", "exit_code_for", "run_unit",
]


def __getattr__(name: str) -> object:  # lazy: the session pulls in the instruments and reports
    if name in ("Runner", "run_unit"):
        from benchgate.runner import session

        return getattr(session, name)
    raise AttributeError(name)
