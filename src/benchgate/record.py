"""What a run of a plan on one unit produced: the record every report and the store are made from.

The runner fills a :class:`UnitRecord` as it goes; ``to_dict`` gives the JSON report body
(schema ``benchgate.unit-report``, version :data:`SCHEMA_VERSION`), ``from_dict`` reads it back
(for ``reanalyze`` and the store). Captures themselves are kept beside the record as ``.npz``
files; the record names them with their SHA-256.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from benchgate.analysis.measurement import Measurement
from benchgate.analysis.views import CaptureViews
from benchgate.judge.rules import Verdict
from benchgate.plan.limits import Window

SCHEMA_NAME = "benchgate.unit-report"
SCHEMA_VERSION = 1


@dataclass
class CheckRecord:
    """One check of one step: the window, what was measured, and the verdict."""

    step_id: str
    measurement: str
    window: Window
    result: Measurement | None
    verdict: Verdict
    reason: str
    rule: str
    #: specific risk of the decision (JCGM 106): probability of a false pass (for a pass) or of
    #: a false fail (for a fail); None when not stated (other verdicts, no uncertainty)
    risk: float | None = None

    @property
    def risk_kind(self) -> str | None:
        """``false pass`` or ``false fail``: which wrong decision :attr:`risk` is the chance of."""
        if self.risk is None:
            return None
        return {Verdict.PASS: "false pass", Verdict.FAIL: "false fail"}.get(self.verdict)

    def to_dict(self) -> dict[str, Any]:
        out = {
            "step": self.step_id,
            "measurement": self.measurement,
            "window": self.window.to_dict(),
            "result": None if self.result is None else self.result.to_dict(),
            "verdict": self.verdict.value,
            "reason": self.reason,
            "rule": self.rule,
        }
        if self.risk_kind is not None:
            out["risk"] = {"probability": self.risk, "kind": self.risk_kind}
        return out

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> CheckRecord:
        return cls(
            step_id=d["step"],
            measurement=d["measurement"],
            window=Window.from_dict(d["window"]),
            result=None if d.get("result") is None else Measurement.from_dict(d["measurement"], d["result"]),
            verdict=Verdict(d["verdict"]),
            reason=d["reason"],
            rule=d["rule"],
            risk=None if d.get("risk") is None else float(d["risk"]["probability"]),
        )


@dataclass
class CaptureRecord:
    """A capture kept as a file beside the report.

    ``sha256`` is the digest the writer returned when it saved the file; ``metadata`` the
    capture's own metadata (instrument, framing, losses…, JSON-safe); ``views`` the plot data
    from the one analysis the checks were judged on (None in records from before they were kept).
    """

    file: str  # file name, relative to the report's folder
    sha256: str
    channel: str
    sample_rate: float
    samples: int
    instrument: str
    warnings: list[str] = field(default_factory=list)
    metadata: dict[str, Any] = field(default_factory=dict)
    views: CaptureViews | None = None

    def to_dict(self) -> dict[str, Any]:
        from benchgate.common.evidence import json_safe

        d = {k: v for k, v in self.__dict__.items() if k not in ("metadata", "views")}
        d["warnings"] = list(self.warnings)
        d["metadata"] = json_safe(dict(self.metadata))
        d["views"] = None if self.views is None else self.views.to_dict()
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> CaptureRecord:
        views = d.get("views")
        return cls(**{k: d[k] for k in ("file", "sha256", "channel", "sample_rate", "samples", "instrument")},
                   warnings=list(d.get("warnings", [])), metadata=dict(d.get("metadata") or {}),
                   views=None if not views else CaptureViews.from_dict(views))


@dataclass
class StepRecord:
    """One step as it ran. ``status``: done, failed, error, skipped, aborted."""

    id: str
    kind: str
    title: str
    status: str = "skipped"
    started: str | None = None  # ISO 8601 UTC
    ended: str | None = None
    attempts: int = 0
    checks: list[CheckRecord] = field(default_factory=list)
    capture: CaptureRecord | None = None
    answer: str | None = None  # operator's answer to a prompt step
    error: str | None = None  # one-line reason when status is error/aborted
    notes: list[str] = field(default_factory=list)  # e.g. "retry 1: operator re-seated the board"

    def to_dict(self) -> dict[str, Any]:
        return {
            "id": self.id,
            "kind": self.kind,
            "title": self.title,
            "status": self.status,
            "started": self.started,
            "ended": self.ended,
            "attempts": self.attempts,
            "checks": [c.to_dict() for c in self.checks],
            "capture": None if self.capture is None else self.capture.to_dict(),
            "answer": self.answer,
            "error": self.error,
            "notes": list(self.notes),
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> StepRecord:
        return cls(
            id=d["id"], kind=d["kind"], title=d["title"], status=d["status"],
            started=d.get("started"), ended=d.get("ended"), attempts=d.get("attempts", 0),
            checks=[CheckRecord.from_dict(c) for c in d.get("checks", [])],
            capture=None if d.get("capture") is None else CaptureRecord.from_dict(d["capture"]),
            answer=d.get("answer"), error=d.get("error"), notes=list(d.get("notes", [])),
        )


@dataclass
class InstrumentRecord:
    """An instrument as it was during the run."""

    role: str
    address: str
    identity: str | None
    calibration: dict[str, Any] | None  # {"date":..,"due":..,"status": "valid"|"expired"|"none"}

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> InstrumentRecord:
        return cls(role=d["role"], address=d["address"], identity=d.get("identity"),
                   calibration=d.get("calibration"))


@dataclass
class UnitRecord:
    """Everything about one run of one plan on one unit."""

    run_id: str
    serial: str
    plan_id: str
    plan_version: str
    plan_hash: str
    plan_path: str
    product: str
    station_id: str
    operator: str | None
    lot: str | None
    started: str
    software_version: str
    decision_rule: str
    ended: str | None = None
    verdict: Verdict = Verdict.ERROR
    reason: str = "run did not finish"
    instruments: list[InstrumentRecord] = field(default_factory=list)
    steps: list[StepRecord] = field(default_factory=list)
    cautions: list[str] = field(default_factory=list)
    hazards: list[str] = field(default_factory=list)
    hazards_acknowledged: str | None = None  # "typed by operator" / "--accept-hazards" / None
    flags: dict[str, Any] = field(default_factory=dict)  # allow_expired_calibration, unattended, ...
    reanalysis_of: dict[str, Any] | None = None  # {"report": path, "run_id": .., "plan_hash": ..}

    def checks(self) -> list[CheckRecord]:
        return [c for s in self.steps for c in s.checks]

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema": SCHEMA_NAME,
            "schema_version": SCHEMA_VERSION,
            "run_id": self.run_id,
            "serial": self.serial,
            "plan": {"id": self.plan_id, "version": self.plan_version, "hash": self.plan_hash,
                     "path": self.plan_path, "product": self.product},
            "station": {"id": self.station_id, "instruments": [i.to_dict() for i in self.instruments]},
            "operator": self.operator,
            "lot": self.lot,
            "started": self.started,
            "ended": self.ended,
            "software": {"name": "benchgate", "version": self.software_version},
            "decision_rule": self.decision_rule,
            "verdict": self.verdict.value,
            "reason": self.reason,
            "cautions": list(self.cautions),
            "hazards": list(self.hazards),
            "hazards_acknowledged": self.hazards_acknowledged,
            "flags": dict(self.flags),
            "reanalysis_of": self.reanalysis_of,
            "steps": [s.to_dict() for s in self.steps],
        }

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> UnitRecord:
        if d.get("schema") != SCHEMA_NAME:
            raise ValueError(f"not a benchgate unit report (schema {d.get('schema')!r})")
        if d.get("schema_version") != SCHEMA_VERSION:
            raise ValueError(f"unsupported unit report schema version {d.get('schema_version')!r}")
        return cls(
            run_id=d["run_id"], serial=d["serial"],
            plan_id=d["plan"]["id"], plan_version=d["plan"]["version"], plan_hash=d["plan"]["hash"],
            plan_path=d["plan"]["path"], product=d["plan"]["product"],
            station_id=d["station"]["id"], operator=d.get("operator"), lot=d.get("lot"),
            started=d["started"], ended=d.get("ended"), software_version=d["software"]["version"],
            decision_rule=d["decision_rule"], verdict=Verdict(d["verdict"]), reason=d["reason"],
            instruments=[InstrumentRecord.from_dict(i) for i in d["station"]["instruments"]],
            steps=[StepRecord.from_dict(s) for s in d["steps"]],
            cautions=list(d.get("cautions", [])), hazards=list(d.get("hazards", [])),
            hazards_acknowledged=d.get("hazards_acknowledged"), flags=dict(d.get("flags", {})),
            reanalysis_of=d.get("reanalysis_of"),
        )
