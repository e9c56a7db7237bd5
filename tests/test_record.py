"""The run record survives a JSON round trip unchanged."""

from __future__ import annotations

import json

import pytest

from benchgate.analysis import Measurement
from benchgate.judge import Verdict
from benchgate.plan.limits import Window
from benchgate.record import (
    CaptureRecord,
    CheckRecord,
    InstrumentRecord,
    StepRecord,
    UnitRecord,
)


def make_record() -> UnitRecord:
    check = CheckRecord(
        step_id="capture-tone", measurement="frequency",
        window=Window("Hz", 900.0, 1010.0, 955.0, "rc_ladder highpass", details={"gain_needed": 29.0}),
        result=Measurement("frequency", 951.2, "Hz", 0.3, details={"fit": "4-parameter"}),
        verdict=Verdict.PASS, reason="frequency 951.2 Hz ± 300.0 mHz inside", rule="simple",
    )
    bad = CheckRecord(
        step_id="capture-tone", measurement="thd", window=Window("%", high=5.0),
        result=Measurement.invalid("thd", "%", "flat line: no oscillation"),
        verdict=Verdict.ERROR, reason="thd not valid: flat line", rule="simple",
    )
    step = StepRecord(
        id="capture-tone", kind="capture", title="Capture the tone", status="error",
        started="2026-12-01T10:00:00Z", ended="2026-12-01T10:00:01Z", attempts=2,
        checks=[check, bad],
        capture=CaptureRecord("x.npz", "ab" * 32, "out", 50000.0, 10000, "adc", ["clipping"]),
        notes=["retry 1: re-seated"],
    )
    return UnitRecord(
        run_id="r1", serial="TB3-0001 <x>", plan_id="tb3", plan_version="1", plan_hash="h",
        plan_path="testplans/tb3.yaml", product="TB-3", station_id="understudy-bench",
        operator="Ada", lot="L1", started="2026-12-01T10:00:00Z", software_version="0.1.0",
        decision_rule="simple", ended="2026-12-01T10:00:02Z", verdict=Verdict.ERROR,
        reason="thd not valid", steps=[step],
        instruments=[InstrumentRecord("adc", "/dev/pts/3", "OWL-ADC,1", {"status": "valid"})],
        cautions=["Low voltage only"], hazards=[], flags={"unattended": True},
    )


def test_round_trip_through_json():
    rec = make_record()
    text = json.dumps(rec.to_dict(), allow_nan=False)
    back = UnitRecord.from_dict(json.loads(text))
    assert back.to_dict() == rec.to_dict()
    assert back.checks()[1].result.valid is False
    assert back.checks()[0].window.details["gain_needed"] == 29.0


def test_rejects_other_documents():
    with pytest.raises(ValueError, match="not a benchgate unit report"):
        UnitRecord.from_dict({"schema": "something-else"})
    d = make_record().to_dict()
    d["schema_version"] = 99
    with pytest.raises(ValueError, match="schema version"):
        UnitRecord.from_dict(d)
