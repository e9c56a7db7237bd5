"""``--batch``: one unit after another on the same bench, until the operator enters an empty line.

The serial number is read as one line (a barcode scanner types it and presses Enter); surrounding
white space and the scanner's carriage return are dropped. After each unit a running tally is shown.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from typing import Any

from benchgate.runner.options import RunOutcome, is_abort_code

SERIAL_PROMPT = "serial number (scan or type; empty line ends the batch): "


def read_serial(ask: Callable[[str], str], prompt: str = SERIAL_PROMPT) -> str | None:
    """One serial number from the operator, or None at an empty line or end of input."""
    try:
        line = ask(prompt)
    except EOFError:
        return None
    serial = line.strip()
    return serial or None


def tally_line(tally: Counter, units: int) -> str:
    parts = [f"{tally[v]} {v}" for v in ("pass", "fail", "inconclusive", "error", "aborted") if tally[v]]
    return f"tally: {units} unit{'s' if units != 1 else ''} — " + (", ".join(parts) or "none")


def run_batch(runner: Any, ask: Callable[[str], str], show: Callable[[str], None]) -> list[RunOutcome]:
    """Run units until an empty line; stops early when a unit was aborted (Ctrl-C)."""
    outcomes: list[RunOutcome] = []
    tally: Counter = Counter()
    while True:
        serial = read_serial(ask)
        if serial is None:
            break
        outcome = runner.run(serial)
        outcomes.append(outcome)
        tally[outcome.record.verdict.value] += 1
        show(tally_line(tally, len(outcomes)))
        if is_abort_code(outcome.exit_code):
            show("batch stopped: the last unit was aborted")
            break
    return outcomes
