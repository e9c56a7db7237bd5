"""The JSON unit report validates against its JSON Schema (issue 5) and reads back unchanged."""

from __future__ import annotations

import copy
import json

import jsonschema
import numpy as np
import pytest
from report_samples import HOSTILE_SERIAL, make_record

from benchgate.analysis.measurement import Measurement
from benchgate.judge.rules import Verdict
from benchgate.plan.limits import Window
from benchgate.record import CheckRecord, StepRecord, UnitRecord
from benchgate.report.json_report import (
    ReportError,
    load_schema,
    read_json,
    report_dict,
    write_json,
)


@pytest.fixture(scope="module")
def validator():
    schema = load_schema()
    # JSON Schema draft 2020-12 (json-schema.org): the schema itself must be well formed
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def test_complete_record_validates(validator, tmp_path):
    path = write_json(make_record(HOSTILE_SERIAL, reanalysis=True), tmp_path / "r.json")
    data = json.loads(path.read_text(encoding="utf-8"))
    validator.validate(data)
    assert data["serial"] == HOSTILE_SERIAL  # verbatim inside the report
    assert data["schema"] == "benchgate.unit-report" and data["schema_version"] == 1


def test_aborted_record_with_invalid_measurement_validates(validator):
    rec = UnitRecord(run_id="r2", serial="", plan_id="tb3", plan_version="3", plan_hash="h",
                     plan_path="p.yaml", product="TB-3", station_id="s", operator=None, lot=None,
                     started="2026-12-01T10:00:00.123456+00:00", software_version="0.1.0",
                     decision_rule="guarded", verdict=Verdict.ABORTED, reason="interrupted")
    bad = Measurement.invalid("thd", "%", "flat line: no oscillation")
    rec.steps = [StepRecord("cap", "capture", "Capture", "aborted", attempts=1, error="Ctrl-C",
                            checks=[CheckRecord("cap", "thd", Window("%", high=5.0), bad, Verdict.ERROR,
                                                "thd not valid", "guarded"),
                                    CheckRecord("cap", "vpp", Window("V", 1.0), None, Verdict.ERROR,
                                                "measurement was not made", "guarded")]),
                 StepRecord("later", "wait", "Wait")]
    validator.validate(report_dict(rec))


def test_numpy_and_nan_in_details_become_plain_json(validator, tmp_path):
    rec = make_record()
    c = rec.steps[1].checks[0]
    c.result = Measurement("frequency", np.float64(951.25), "Hz", 0.4,
                           details={"residual": np.float32(0.5), "spread": float("nan"),
                                    "corners": np.arange(3), "when": (1, 2)})
    path = write_json(rec, tmp_path / "r.json")
    text = path.read_text(encoding="utf-8")
    assert "NaN" not in text and "Infinity" not in text  # RFC 8259 has no NaN
    data = json.loads(text)
    validator.validate(data)
    d = data["steps"][1]["checks"][0]["result"]["details"]
    assert d == {"residual": 0.5, "spread": None, "corners": [0, 1, 2], "when": [1, 2]}


def test_round_trip(tmp_path):
    rec = make_record(HOSTILE_SERIAL)
    back = read_json(write_json(rec, tmp_path / "r.json"))
    assert back.to_dict() == rec.to_dict()


@pytest.mark.parametrize("breakage", [
    lambda d: d.pop("plan"),
    lambda d: d.update(verdict="maybe"),
    lambda d: d.update(extra=1),
    lambda d: d.update(started="yesterday"),
    lambda d: d["steps"][1]["capture"].update(sha256="xyz"),
    lambda d: d["steps"][1]["checks"][0]["window"].update(low=None, high=None),
    lambda d: d["steps"][1]["checks"][0]["result"].update(value=None),  # valid without a value
    lambda d: d["steps"][1].update(status="running"),
    lambda d: d["station"]["instruments"][0]["calibration"].update(status="fine"),
])
def test_schema_rejects_broken_reports(validator, breakage):
    data = copy.deepcopy(report_dict(make_record()))
    validator.validate(data)
    breakage(data)
    with pytest.raises(jsonschema.ValidationError):
        validator.validate(data)


def test_read_json_errors_name_the_place(tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text('{\n  "schema": "benchgate.unit-report",\n  oops\n}\n', encoding="utf-8")
    with pytest.raises(ReportError) as info:
        read_json(bad)
    assert info.value.one_line().startswith(f"{bad}:3:3: not valid JSON")
    other = tmp_path / "other.json"
    other.write_text('{"schema": "something-else"}', encoding="utf-8")
    with pytest.raises(ReportError, match="not a benchgate unit report"):
        read_json(other)
    with pytest.raises(ReportError, match="no such report file"):
        read_json(tmp_path / "missing.json")
    partial = tmp_path / "partial.json"
    partial.write_text('{"schema": "benchgate.unit-report", "schema_version": 1}', encoding="utf-8")
    with pytest.raises(ReportError, match="missing or bad field"):
        read_json(partial)


def test_write_is_atomic_and_leaves_no_temp_files(tmp_path):
    write_json(make_record(), tmp_path / "r.json")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json"]
    assert json.loads((tmp_path / "r.json").read_text())["steps"][1]["checks"][0]["result"]["value"] == 951.2
