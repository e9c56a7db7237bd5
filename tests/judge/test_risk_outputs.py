"""The specific risk of each decision reaches every output: JSON (schema), HTML, JUnit, database."""

from __future__ import annotations

import json
import sqlite3

import jsonschema
import pytest
from scipy.stats import norm

from benchgate.judge import judge
from benchgate.record import CaptureRecord
from benchgate.report.html import render_html
from benchgate.report.json_report import load_schema, read_json, write_json
from benchgate.report.junit import build_junit
from benchgate.store.db import ResultsDB
from synthetic_runs import CheckSpec, make_record


def _record():
    rec = make_record("SN-1", [CheckSpec("tone", "frequency", 999.0, "Hz", 900.0, 1000.0, 1.0),
                               CheckSpec("tone", "amplitude", 1.5, "V", 0.6, 1.4, 0.05)])
    rec.decision_rule = "guarded"
    for c in rec.checks():  # re-judge under the guarded rule; the risk comes with the verdict
        cv = judge(c.result, c.window, "guarded")
        c.verdict, c.reason, c.rule = cv.verdict, cv.reason, cv.rule
        c.risk = None if cv.risk is None else cv.risk.probability
    rec.steps[0].capture = CaptureRecord(file="tone.npz", sha256="0" * 64, channel="out",
                                         sample_rate=50_000.0, samples=12_500, instrument="adc")
    return rec


def test_json_report_carries_risk_and_validates(tmp_path):
    rec = _record()
    path = write_json(rec, tmp_path / "r.json")
    body = json.loads(path.read_text())
    jsonschema.validate(body, load_schema())
    freq, amp = body["steps"][0]["checks"]
    # guarded: 999 ± 1 Hz just passes (acceptance limit 1 kHz − U); risk of a false pass at the
    # acceptance limit with w = U is Φ(−2) = 2.275 % (ILAC-G8:09/2019 4.2.2, REFERENCES.md)
    assert freq["verdict"] == "pass" and freq["risk"]["kind"] == "false pass"
    assert freq["risk"]["probability"] == pytest.approx(0.02275, abs=5e-6)
    # 1.5 ± 0.05 V fails above 1.4 V: risk of a false fail = P(0.6 <= N(1.5, 0.025²) <= 1.4)
    # (scipy.stats.norm reference) = Φ(−4) − Φ(−36)
    assert amp["risk"]["kind"] == "false fail"
    assert amp["risk"]["probability"] == pytest.approx(norm.cdf(1.4, 1.5, 0.025) - norm.cdf(0.6, 1.5, 0.025), rel=1e-9)
    assert read_json(path).checks()[1].risk == pytest.approx(amp["risk"]["probability"])


def test_schema_refuses_a_wrong_risk_kind(tmp_path):
    body = json.loads(write_json(_record(), tmp_path / "r.json").read_text())
    body["steps"][0]["checks"][1]["risk"]["kind"] = "maybe"
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(body, load_schema())


def test_html_and_junit_show_risk():
    rec = _record()
    html = render_html(rec, {})
    assert "risk of a false pass: 2.27 %" in html or "risk of a false pass: 2.28 %" in html
    assert "risk of a false fail: 0.0032 %" in html  # Φ(−4) = 3.17e-5 (scipy.stats.norm.cdf)
    xml = build_junit([(rec, {})])
    props = {p.get("name"): p.get("value") for case in xml.iter("testcase")
             if case.get("name") == "amplitude" for p in case.iter("property")}
    assert props["risk_kind"] == "false fail"
    assert float(props["risk"]) == pytest.approx(norm.cdf(-4.0), rel=1e-9)  # scipy.stats.norm reference


def test_database_stores_risk_and_record_length(tmp_path):
    rec = _record()
    db = ResultsDB.open(tmp_path / "r.sqlite")
    try:
        db.finish_run(rec, None)
    finally:
        db.close()
    conn = sqlite3.connect(tmp_path / "r.sqlite")
    rows = conn.execute("SELECT verdict, risk, record_seconds FROM checks ORDER BY seq").fetchall()
    conn.close()
    assert rows[0][0] == "pass" and rows[0][1] == pytest.approx(0.02275, abs=5e-6) and rows[0][2] == 0.25
    assert rows[1][0] == "fail" and rows[1][1] == pytest.approx(norm.cdf(-4.0), rel=1e-9) and rows[1][2] == 0.25
