"""JUnit XML for CI systems: one ``testsuite`` per unit, one ``testcase`` per check.

Shape (the one CI servers commonly read)::

    <testsuites name tests failures errors skipped time>
      <testsuite name="<plan> <serial>" tests failures errors skipped time timestamp hostname id>
        <properties><property name value/>…</properties>      unit, plan, verdict, report …
        <testcase classname="<plan>.<step>" name="<check>" time>
          <properties>…</properties>                          value, U, limits, rule, verdict
          <failure message type>…</failure>                    verdict fail
          <error message type>…</error>                        verdict error or inconclusive
          <system-out>report: …</system-out>
        </testcase>
        <system-out>report: …</system-out>
      </testsuite>
    </testsuites>

A step that ended in error without any check (a lost instrument, a prompt with no answer) is a
``testcase`` named ``(step)`` with an ``error``; steps never run are ``(step)`` cases marked
``skipped``; a unit that failed before any step is a ``(unit)`` case. Text is escaped by
``xml.etree``; characters XML 1.0 cannot hold at all (control characters) are written as ``\\xNN``.
"""

from __future__ import annotations

import datetime as _dt
import re
import socket
import xml.etree.ElementTree as ET
from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

from benchgate.common.evidence import write_atomic
from benchgate.units.format import format_quantity, value_text

_NOT_XML = re.compile("[^\x09\x0a\x0d\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def xml_text(value: Any) -> str:
    """``value`` as text XML 1.0 can carry (control characters and lone surrogates as ``\\xNN``)."""
    return _NOT_XML.sub(lambda m: f"\\x{ord(m.group()):02x}", "" if value is None else str(value))


def _seconds(start: str | None, end: str | None) -> float:
    try:
        a = _dt.datetime.fromisoformat(start)  # type: ignore[arg-type]
        b = _dt.datetime.fromisoformat(end)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return 0.0
    return max(0.0, (b - a).total_seconds())


def _timestamp(iso: str) -> str:
    """ISO 8601 without offset (UTC), as the usual JUnit schema's xs:dateTime pattern wants."""
    try:
        t = _dt.datetime.fromisoformat(iso)
    except (TypeError, ValueError):
        return xml_text(iso)
    if t.tzinfo is not None:
        t = t.astimezone(_dt.UTC).replace(tzinfo=None)
    return t.isoformat(timespec="seconds")


def _el(parent: ET.Element, tag: str, text: str | None = None, **attrs: Any) -> ET.Element:
    e = ET.SubElement(parent, tag, {k: xml_text(v) for k, v in attrs.items()})
    if text is not None:
        e.text = xml_text(text)
    return e


def _properties(parent: ET.Element, items: Mapping[str, Any]) -> None:
    props = _el(parent, "properties")
    for name, value in items.items():
        _el(props, "property", name=name, value="" if value is None else value)


def _num(x: float | None) -> str:
    return "" if x is None else repr(float(x))


def _check_message(check: Any) -> str:
    m = check.result
    w = check.window
    unit = w.unit
    if m is None or m.value != m.value:
        value = "no value"
    else:
        value = value_text(m.value, m.uncertainty, m.unit) + ("" if m.uncertainty is None else " (U, k=2)")
    lo = "-inf" if w.low is None else format_quantity(w.low, unit)
    hi = "+inf" if w.high is None else format_quantity(w.high, unit)
    return f"{check.verdict.value}: {check.reason} [value {value}; limits {lo} … {hi}; rule {check.rule}]"


def _report_text(paths: Mapping[str, Any]) -> str:
    lines = [f"{k}: {v}" for k, v in paths.items() if k in ("json", "html")]
    return "\n".join(lines) or "no report was written"


def build_junit(units: Iterable[tuple[Any, Mapping[str, Any]]], *, name: str = "benchgate") -> ET.Element:
    """The ``testsuites`` element for ``(UnitRecord, paths)`` pairs (paths: json, html …)."""
    root = ET.Element("testsuites", {"name": xml_text(name)})
    totals = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}
    total_time = 0.0
    host = socket.gethostname()
    for index, (record, paths) in enumerate(units):
        counts = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}
        suite_time = _seconds(record.started, record.ended)
        suite = _el(root, "testsuite", name=f"{record.plan_id} {record.serial}", id=index,
                    timestamp=_timestamp(record.started), hostname=host, time=f"{suite_time:.3f}")
        _properties(suite, {
            "serial": record.serial, "plan": record.plan_id, "plan_version": record.plan_version,
            "plan_hash": record.plan_hash, "station": record.station_id, "operator": record.operator,
            "lot": record.lot, "run_id": record.run_id, "decision_rule": record.decision_rule,
            "verdict": record.verdict.value, "reason": record.reason,
            "report": paths.get("json"),
        })
        report = _report_text(paths)
        flagged = False
        for step in record.steps:
            classname = f"{record.plan_id}.{step.id}"
            step_time = _seconds(step.started, step.ended)
            for check in step.checks:
                counts["tests"] += 1
                case = _el(suite, "testcase", classname=classname, name=check.measurement,
                           time=f"{step_time:.3f}")
                m, w = check.result, check.window
                _properties(case, {
                    "value": "" if m is None or m.value != m.value else _num(m.value),
                    "uncertainty": "" if m is None else _num(m.uncertainty),
                    "unit": w.unit, "low": _num(w.low), "high": _num(w.high),
                    "rule": check.rule, "verdict": check.verdict.value,
                    # JCGM 106:2012 specific risk of the decision (a fraction)
                    **({} if check.risk_kind is None else {"risk": _num(check.risk),
                                                            "risk_kind": check.risk_kind}),
                })
                verdict = check.verdict.value
                if verdict == "fail":
                    counts["failures"] += 1
                    flagged = True
                    _el(case, "failure", _check_message(check), message=_check_message(check), type="fail")
                elif verdict in ("error", "inconclusive", "aborted"):
                    counts["errors"] += 1
                    flagged = True
                    _el(case, "error", _check_message(check), message=_check_message(check), type=verdict)
                _el(case, "system-out", report)
            if not step.checks and step.status in ("error", "aborted", "failed", "skipped"):
                counts["tests"] += 1
                case = _el(suite, "testcase", classname=classname, name="(step)", time=f"{step_time:.3f}")
                text = step.error or f"step {step.status}"
                if step.status == "skipped":
                    counts["skipped"] += 1
                    _el(case, "skipped", message="not run (an earlier step stopped the unit)")
                elif step.status == "failed":
                    counts["failures"] += 1
                    flagged = True
                    _el(case, "failure", text, message=text, type="fail")
                else:
                    counts["errors"] += 1
                    flagged = True
                    _el(case, "error", text, message=text, type=step.status)
                _el(case, "system-out", report)
        if record.verdict.value != "pass" and not flagged:
            counts["tests"] += 1
            counts["errors"] += 1
            case = _el(suite, "testcase", classname=record.plan_id, name="(unit)", time=f"{suite_time:.3f}")
            _el(case, "error", record.reason, message=record.reason, type=record.verdict.value)
            _el(case, "system-out", report)
        _el(suite, "system-out", report)
        for k, v in counts.items():
            suite.set(k, str(v))
            totals[k] += v
        total_time += suite_time
        # attribute order: name first, then counts (cosmetic only)
    for k, v in totals.items():
        root.set(k, str(v))
    root.set("time", f"{total_time:.3f}")
    return root


def write_junit(units: Iterable[tuple[Any, Mapping[str, Any]]], path: str | Path, *,
                name: str = "benchgate") -> Path:
    """Write JUnit XML for the units to ``path`` (atomically: a reader never sees half a file)."""
    root = build_junit(units, name=name)
    ET.indent(root)
    return write_atomic(path, lambda f: ET.ElementTree(root).write(f, encoding="utf-8", xml_declaration=True))
