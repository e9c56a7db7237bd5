"""JUnit XML: structure as CI systems commonly read it, counts, escaping, messages."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pytest

from benchgate.analysis.measurement import Measurement
from benchgate.judge.rules import Verdict, judge
from benchgate.plan.limits import Window
from benchgate.record import CheckRecord, StepRecord, UnitRecord
from benchgate.report.junit import build_junit, write_junit, xml_text

# The commonly used JUnit XML shape (Ant/Jenkins "junit-10" style), written down here from memory:
# element -> (required attributes, optional attributes, allowed children in order).
SHAPE = {
    "testsuites": (set(), {"name", "tests", "failures", "errors", "skipped", "time", "disabled"},
                   ["testsuite"]),
    "testsuite": ({"name", "tests"}, {"failures", "errors", "skipped", "time", "timestamp", "hostname",
                                      "id", "package", "disabled"},
                  ["properties", "testcase", "system-out", "system-err"]),
    "properties": (set(), set(), ["property"]),
    "property": ({"name", "value"}, set(), []),
    # pytest and most CI servers also accept <properties> inside a testcase
    "testcase": ({"name"}, {"classname", "time", "assertions", "status"},
                 ["properties", "skipped", "error", "failure", "system-out", "system-err"]),
    "failure": (set(), {"message", "type"}, []),
    "error": (set(), {"message", "type"}, []),
    "skipped": (set(), {"message"}, []),
    "system-out": (set(), set(), []),
    "system-err": (set(), set(), []),
}
INT_ATTRS = {"tests", "failures", "errors", "skipped", "disabled", "id"}
TIMESTAMP = re.compile(r"^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}$")  # xs:dateTime without zone


def check_shape(el: ET.Element) -> None:
    required, optional, children = SHAPE[el.tag]
    attrs = set(el.attrib)
    assert required <= attrs, f"{el.tag} lacks {required - attrs}"
    assert attrs <= required | optional, f"{el.tag} has unexpected {attrs - required - optional}"
    for a in attrs & INT_ATTRS:
        assert re.fullmatch(r"\d+", el.get(a)), (el.tag, a, el.get(a))
    if "time" in attrs:
        assert re.fullmatch(r"\d+(\.\d+)?", el.get("time"))
    if "timestamp" in attrs:
        assert TIMESTAMP.match(el.get("timestamp"))
    order = [children.index(c.tag) if c.tag in children else -1 for c in el]
    assert -1 not in order, f"{el.tag} holds {[c.tag for c in el]}"
    assert order == sorted(order), f"{el.tag} children out of order: {[c.tag for c in el]}"
    if el.tag == "testcase":
        outcomes = [c.tag for c in el if c.tag in ("skipped", "error", "failure")]
        assert len(outcomes) <= 1 or "skipped" not in outcomes
    for child in el:
        check_shape(child)


def check(step, name, value, u, low, high, rule="simple"):
    w = Window(unit="Hz", low=low, high=high)
    m = None if value is None else Measurement(name, value, "Hz", u)
    cv = judge(m, w, rule)
    return CheckRecord(step, name, w, m, cv.verdict, cv.reason, cv.rule)


def record(serial="SN1", steps=None, verdict=Verdict.FAIL, reason="x"):
    rec = UnitRecord(run_id="r1", serial=serial, plan_id="tb3", plan_version="2", plan_hash="h" * 64,
                     plan_path="tb3.yaml", product="TB-3", station_id="bench-1", operator="Ada",
                     lot="L1", started="2026-12-01T10:00:00.000+00:00", software_version="0.1.0",
                     decision_rule="simple", ended="2026-12-01T10:00:03.500+00:00",
                     verdict=verdict, reason=reason)
    rec.steps = steps or []
    return rec


def sample_units():
    tone = StepRecord("capture-tone", "capture", "tone", status="failed",
                      started="2026-12-01T10:00:01+00:00", ended="2026-12-01T10:00:02.25+00:00")
    tone.checks = [check("capture-tone", "frequency", 1182.0, 0.4, 900.0, 1150.0),
                   check("capture-tone", "amplitude", 1000.0, 0.4, 900.0, 1150.0),
                   check("capture-tone", "thd", 1000.2, 0.4, 900.0, 1000.3, rule="guarded"),
                   check("capture-tone", "startup_time", None, None, 900.0, 1150.0)]
    lost = StepRecord("current", "reading", "current", status="error", error="supply: timeout")
    never = StepRecord("final", "supply", "off", status="skipped")
    unit1 = (record(steps=[tone, lost, never]), {"json": "reports/tb3/SN1/a-fail.json"})
    unit2 = (record(serial="SN2", steps=[StepRecord("power", "supply", "p", status="skipped")],
                    verdict=Verdict.ERROR, reason="adc: no such port"), {})
    return [unit1, unit2]


def test_structure_matches_common_junit_shape(tmp_path):
    path = write_junit(sample_units(), tmp_path / "out" / "junit.xml")
    root = ET.parse(path).getroot()
    assert root.tag == "testsuites"
    check_shape(root)


def test_counts_and_outcomes():
    root = build_junit(sample_units())
    s1, s2 = root.findall("testsuite")
    assert s1.get("name") == "tb3 SN1"
    cases = s1.findall("testcase")
    names = [(c.get("classname"), c.get("name")) for c in cases]
    assert names == [("tb3.capture-tone", "frequency"), ("tb3.capture-tone", "amplitude"),
                     ("tb3.capture-tone", "thd"), ("tb3.capture-tone", "startup_time"),
                     ("tb3.current", "(step)"), ("tb3.final", "(step)")]
    assert cases[0].find("failure") is not None  # fail -> failure
    assert cases[1].find("failure") is None and cases[1].find("error") is None  # pass
    assert cases[2].find("error").get("type") == "inconclusive"  # inconclusive -> error
    assert cases[3].find("error").get("type") == "error"  # not measured -> error
    assert cases[4].find("error").text == "supply: timeout"
    assert cases[5].find("skipped") is not None
    assert (s1.get("tests"), s1.get("failures"), s1.get("errors"), s1.get("skipped")) == ("6", "1", "3", "1")
    assert s1.get("time") == "3.500" and cases[0].get("time") == "1.250"
    # a unit that errored before any check still shows up as an error
    assert [c.get("name") for c in s2.findall("testcase")] == ["(step)", "(unit)"]
    assert s2.find("testcase[@name='(unit)']/error").text == "adc: no such port"
    assert root.get("tests") == "8" and root.get("errors") == "4" and root.get("failures") == "1"


def test_value_u_and_limits_in_properties_and_message():
    root = build_junit(sample_units())
    case = root.find("testsuite/testcase[@name='frequency']")
    props = {p.get("name"): p.get("value") for p in case.find("properties")}
    assert float(props["value"]) == 1182.0 and float(props["uncertainty"]) == 0.4
    assert float(props["low"]) == 900.0 and float(props["high"]) == 1150.0 and props["unit"] == "Hz"
    msg = case.find("failure").get("message")
    assert "1.182 kHz" in msg and "400.0 mHz" in msg and "900.0 Hz" in msg and "1.150 kHz" in msg
    assert "reports/tb3/SN1/a-fail.json" in case.find("system-out").text
    suite = root.find("testsuite")
    assert "reports/tb3/SN1/a-fail.json" in suite.find("system-out").text
    sprops = {p.get("name"): p.get("value") for p in suite.find("properties")}
    assert sprops["serial"] == "SN1" and sprops["verdict"] == "fail"


@pytest.mark.parametrize("serial", ['<script>alert("x")</script>', "a&b 'q' \"dq\"", "ctl\x00\x1b[31m",
                                    "Ünïcødé-號", "x" * 500, "", "../../x"])
def test_hostile_serials_are_escaped_and_parse(tmp_path, serial):
    units = [(record(serial=serial, verdict=Verdict.PASS, reason="ok"), {"json": "r.json"})]
    path = write_junit(units, tmp_path / "j.xml")
    raw = path.read_text(encoding="utf-8")
    assert "<script>" not in raw
    root = ET.parse(path).getroot()
    check_shape(root)
    props = {p.get("name"): p.get("value") for p in root.find("testsuite/properties")}
    assert props["serial"] == xml_text(serial)
    if "\x00" not in serial and "\x1b" not in serial:
        assert props["serial"] == serial  # kept verbatim when XML can carry it


def test_xml_text_replaces_what_xml_cannot_hold():
    # XML 1.0 (Fifth Edition) 2.2, Char production: no C0 controls except tab, LF, CR
    assert xml_text("a\x00b\x1fc\td\ne") == "a\\x00b\\x1fc\td\ne"
    assert xml_text(None) == ""
