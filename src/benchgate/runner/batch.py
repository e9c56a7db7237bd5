"""``--batch``: one unit after another on the same bench, until the operator enters an empty line.

The serial number comes from the attendant (a barcode scanner types it and presses Enter; the face
drops surrounding white space and the scanner's carriage return). After each unit a running tally
is announced.
"""

from __future__ import annotations

from collections import Counter
from typing import TYPE_CHECKING

from benchgate.runner.attendant import Notice
from benchgate.runner.options import RunOutcome, is_abort_code

if TYPE_CHECKING:
    from benchgate.runner.session import Runner

SERIAL_PROMPT = "serial number (scan or type; empty line ends the batch): "


def tally_line(tally: Counter[str], units: int) -> str:
    parts = [f"{tally[v]} {v}" for v in ("pass", "fail", "inconclusive", "error", "aborted") if tally[v]]
    return f"tally: {units} unit{'s' if units != 1 else ''} — " + (", ".join(parts) or "none")


def run_batch(runner: Runner) -> list[RunOutcome]:
    """Run units until the attendant gives no serial number; stops early when a unit was aborted."""
    outcomes: list[RunOutcome] = []
    tally: Counter[str] = Counter()
    say = runner.hooks.announce
    while True:
        serial = runner.attendant.ask_serial(SERIAL_PROMPT)
        if serial is None:
            break
        outcome = runner.run(serial)
        outcomes.append(outcome)
        tally[outcome.record.verdict.value] += 1
        say(Notice("info", tally_line(tally, len(outcomes))))
        if is_abort_code(outcome.exit_code):
            say(Notice("info", "batch stopped: the last unit was aborted"))
            break
    return outcomes
