"""``--events FILE``: one JSON object per line as the run goes, for rig supervisors.

Every object has ``event`` (run_started, step_started, check, step_finished, run_finished),
``time`` (ISO 8601 UTC), ``run_id`` and ``serial``. The file is appended to and flushed after
each line, so a watcher (``tail -f``) sees progress at once and several units share one file.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

from benchgate.common.evidence import finite, utc_now
from benchgate.runner.attendant import Notice

if TYPE_CHECKING:
    from benchgate.instruments.preview import CapturePreview
    from benchgate.plan.model import Step
    from benchgate.record import CheckRecord, StepRecord, UnitRecord


class EventLog:
    """Writes the run's events as JSON lines; does nothing when ``path`` is None."""

    def __init__(self, path: Path | str | None):
        self._file: TextIO | None = None
        if path is not None:
            path = Path(path)
            path.parent.mkdir(parents=True, exist_ok=True)
            self._file = open(path, "a", encoding="utf-8")  # noqa: SIM115 - closed in close()
        self._run_id: str | None = None
        self._serial: str | None = None

    def emit(self, event: str, **fields: Any) -> None:
        if self._file is None:
            return
        obj = {"event": event, "time": utc_now(), "run_id": self._run_id, "serial": self._serial}
        obj.update(fields)
        self._file.write(json.dumps(obj, ensure_ascii=False, default=str) + "\n")
        self._file.flush()

    # the RunListener calls, as the attendant gets them
    def announce(self, notice: Notice) -> None:
        self.emit("message", kind=notice.kind, text=notice.text)

    def alarm(self, text: str) -> None:
        self.emit("alarm", text=text)

    def run_started(self, record: UnitRecord, total_steps: int) -> None:
        self._run_id, self._serial = record.run_id, record.serial
        self.emit("run_started", plan=record.plan_id, plan_version=record.plan_version,
                  plan_hash=record.plan_hash, station=record.station_id, lot=record.lot,
                  operator=record.operator, steps=total_steps)

    def step_started(self, index: int, total: int, step: Step) -> None:
        self.emit("step_started", step=step.id, kind=step.kind, title=step.title, index=index, of=total)

    def progress(self, fraction: float, text: str, time_left: float | None) -> None:
        pass  # too chatty for a log; the step events carry the progress

    def capture_preview(self, preview: CapturePreview) -> None:
        pass  # pictures are not logged; the capture file is the evidence

    def check(self, check: CheckRecord) -> None:
        m = check.result
        self.emit("check", step=check.step_id, measurement=check.measurement,
                  value=None if m is None else finite(m.value),
                  uncertainty=None if m is None else finite(m.uncertainty),
                  unit=check.window.unit, low=check.window.low, high=check.window.high,
                  verdict=check.verdict.value, reason=check.reason)

    def step_finished(self, step: StepRecord) -> None:
        self.emit("step_finished", step=step.id, status=step.status, attempts=step.attempts,
                  error=step.error)

    def run_finished(self, record: UnitRecord, paths: Mapping[str, Path]) -> None:
        self.emit("run_finished", verdict=record.verdict.value, reason=record.reason,
                  report=str(paths.get("json")) if paths.get("json") else None)

    def close(self) -> None:
        if self._file is not None:
            self._file.close()
            self._file = None
