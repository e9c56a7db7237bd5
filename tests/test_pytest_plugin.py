"""The pytest plugin: plan checks as items, one run per session, verdicts as pytest outcomes."""

from __future__ import annotations

import shutil
import sqlite3
import xml.etree.ElementTree as ET
from pathlib import Path
from types import SimpleNamespace

import pytest

from benchgate.analysis.measurement import Measurement
from benchgate.judge.rules import Verdict
from benchgate.record import CheckRecord, StepRecord, UnitRecord

pytest_plugins = ["pytester"]

REPO = Path(__file__).resolve().parents[1]
TB3 = REPO / "testplans" / "tb3.yaml"
SPEED = 5.0  # as the runner's own understudy-bench tests


@pytest.fixture(scope="module")
def plan():
    from benchgate.plan import load_plan

    return load_plan(TB3)


@pytest.fixture
def plan_dir(pytester):
    shutil.copy(TB3, pytester.path / "tb3.yaml")
    (pytester.path / "station.yaml").write_text("station: not-opened-in-these-tests\n", encoding="utf-8")
    return pytester.path


def _expected_ids(plan):
    ids = []
    for step in plan.steps:
        for c in getattr(step, "checks", ()):
            ids.append(f"tb3.yaml::{step.id}::{c.measurement}")
    return ids


def _junit(path):
    root = ET.parse(path).getroot()
    suite = root if root.tag == "testsuite" else root.find("testsuite")
    # classname = <path from rootdir, dotted>.<step>; keyed here by (step, check)
    return suite, {(c.get("classname").rsplit(".", 1)[-1], c.get("name")): c
                   for c in suite.findall("testcase")}


# ------------------------------------------------------------------ collection


def test_plan_files_not_collected_without_options(plan_dir, pytester):
    pytester.makepyfile(test_plain="def test_a():\n    pass\n")
    result = pytester.runpytest("-p", "no:cacheprovider")
    result.assert_outcomes(passed=1)
    result = pytester.runpytest("--collect-only", "-q", ".")
    assert "tb3.yaml" not in result.stdout.str()


def test_collects_checks_with_readable_node_ids(plan_dir, pytester, plan):
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-1",
                                "--collect-only", "-q", "tb3.yaml")
    ids = [ln for ln in result.stdout.lines if "::" in ln]
    assert ids == _expected_ids(plan)
    assert "tb3.yaml::power-on::frequency" in ids and "tb3.yaml::steady::thd" in ids
    assert result.ret == 0


def test_station_file_and_other_yaml_in_a_folder_are_not_plans(plan_dir, pytester, plan):
    (plan_dir / "notes.yaml").write_text("just: data\n", encoding="utf-8")
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-1",
                                "--collect-only", "-q", ".")
    ids = [ln for ln in result.stdout.lines if "::" in ln]
    assert ids == _expected_ids(plan)


def test_serial_is_required(plan_dir, pytester):
    result = pytester.runpytest("--bench-station", "station.yaml", "tb3.yaml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert "--bench-serial SN is required" in result.stderr.str()


def test_clock_speed_must_be_positive(plan_dir, pytester):
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-1",
                                "--bench-clock-speed", "0", "tb3.yaml")
    assert result.ret == pytest.ExitCode.USAGE_ERROR
    assert "--bench-clock-speed must be > 0" in result.stderr.str()


def test_bad_plan_is_a_collection_error_with_position(plan_dir, pytester):
    (plan_dir / "bad.yaml").write_text("plan: x\nversion: '1'\nsteps:\n  - id: a\n    kind: teleport\n",
                                       encoding="utf-8")
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-1", "bad.yaml")
    assert result.ret == pytest.ExitCode.INTERRUPTED  # pytest: errors during collection
    out = result.stdout.str()
    assert "bad.yaml:" in out and "Traceback" not in out


# ------------------------------------------------------------------ outcomes, with a stand-in runner


def _fake_record(plan, serial, verdicts):
    """A record for ``plan`` whose checks get the verdicts in ``verdicts`` ((step, meas) -> Verdict,
    default pass); a step mapped to None has no checks (it errored before measuring)."""
    rec = UnitRecord(run_id="r1", serial=serial, plan_id=plan.id, plan_version=plan.version,
                     plan_hash=plan.hash, plan_path=plan.path, product=plan.product, station_id="fake",
                     operator=None, lot=None, started="2026-12-01T10:00:00Z", software_version="0",
                     decision_rule="simple", ended="2026-12-01T10:00:05Z")
    for step in plan.steps:
        srec = StepRecord(id=step.id, kind=step.kind, title=step.title, status="done", attempts=1)
        if verdicts.get((step.id, None), "x") is None:
            srec.status, srec.error = "error", "supply: no answer within 2 s"
            rec.steps.append(srec)
            continue
        for c in getattr(step, "checks", ()):
            v = verdicts.get((step.id, c.measurement), Verdict.PASS)
            w = c.window
            x = w.low if w.low is not None else w.high
            m = (Measurement.invalid(c.measurement, w.unit, "no steady tone found") if v is Verdict.ERROR
                 else Measurement(c.measurement, x, w.unit, 0.0))
            srec.checks.append(CheckRecord(step_id=step.id, measurement=c.measurement, window=w,
                                           result=m, verdict=v, reason=f"{c.measurement} said {v.value}",
                                           rule="simple"))
        rec.steps.append(srec)
    rec.verdict = Verdict.FAIL
    rec.reason = "frequency said fail"
    return rec


@pytest.fixture
def fake_runner(monkeypatch, plan):
    import benchgate.instruments.station as station_module
    import benchgate.runner as runner

    calls = []
    verdicts = {("steady", "frequency"): Verdict.FAIL, ("steady", "thd"): Verdict.INCONCLUSIVE,
                ("power-on", "amplitude"): Verdict.ERROR, ("supply-current", None): None}

    def run_unit(plan_, station, serial, options, attendant=None):
        calls.append(SimpleNamespace(plan=plan_, station=station, serial=serial, options=options,
                                     attendant=attendant))
        return SimpleNamespace(record=_fake_record(plan_, serial, verdicts),
                               paths={"html": Path("reports/x.html"), "json": Path("reports/x.json")},
                               exit_code=1)

    monkeypatch.setattr(station_module, "load_station", lambda path: SimpleNamespace(id="fake", path=path))
    monkeypatch.setattr(runner, "run_unit", run_unit)
    return calls


def test_outcomes_map_to_pytest(plan_dir, pytester, fake_runner, plan):
    junit = plan_dir / "out.xml"
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-7",
                                "--bench-reports", "rep", "--bench-accept-hazards",
                                "--bench-db", "db/r.sqlite", "--bench-lot", "L9",
                                f"--junitxml={junit}", "tb3.yaml")
    n = len(_expected_ids(plan))
    # fail -> failure; inconclusive, error, and the check of a step that errored -> pytest errors
    result.assert_outcomes(passed=n - 4, failed=1, errors=3)
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    out = result.stdout.str()
    assert "FAIL: frequency said fail" in out
    assert "INCONCLUSIVE (could not decide): thd said inconclusive" in out
    assert "ERROR (could not decide): amplitude said error" in out
    assert "ERROR: check not made (step error): supply: no answer within 2 s" in out
    assert "Traceback" not in out
    # one run for the whole session, unattended, quiet, with the options given
    (call,) = fake_runner
    assert call.serial == "SN-7" and call.plan.id == plan.id
    o = call.options
    assert (o.unattended, o.accept_hazards, o.reports_dir) == (True, True, Path("rep"))
    from benchgate.pytest_plugin import PytestAttendant

    assert isinstance(call.attendant, PytestAttendant)  # asks nobody, shows nothing while running
    assert (o.db_path, o.lot, o.clock) == (Path("db/r.sqlite"), "L9", None)
    suite, cases = _junit(junit)
    assert suite.get("failures") == "1" and suite.get("errors") == "3"
    freq = cases[("steady", "frequency")]
    assert freq.get("classname").endswith("tb3.yaml.steady")  # classname = plan file and step
    assert freq.find("failure") is not None and "frequency said fail" in freq.find("failure").get("message")
    assert cases[("steady", "thd")].find("error") is not None
    props = {p.get("name"): p.get("value") for p in freq.find("properties")}
    assert props["verdict"] == "fail" and props["unit"] == "Hz" and props["benchgate_report"].endswith("x.html")
    assert "benchgate" in out and "x.html" in out  # terminal summary names the report


def test_a_run_that_cannot_start_errors_every_item(plan_dir, pytester, monkeypatch, plan):
    import benchgate.runner as runner
    from benchgate.errors import PreflightError
    from benchgate.runner.attendant import Hint

    def refuse(*a, **k):
        raise PreflightError("hazards not acknowledged: plan has hazards", hint=Hint.ACCEPT_HAZARDS)

    monkeypatch.setattr(runner, "run_unit", refuse)
    (plan_dir / "station.yaml").unlink()
    shutil.copy(REPO / "testplans" / "tb3.yaml", plan_dir / "tb3.yaml")
    import benchgate.instruments.station as station_module

    monkeypatch.setattr(station_module, "load_station", lambda path: SimpleNamespace(id="fake"))
    result = pytester.runpytest("--bench-station", "station.yaml", "--bench-serial", "SN-8", "tb3.yaml")
    result.assert_outcomes(errors=len(_expected_ids(plan)))
    out = result.stdout.str()
    assert "ERROR: benchgate could not run the plan: hazards not acknowledged: plan has hazards" in out
    # the plugin words the runner's hint with its own option, never the command line's
    assert "--bench-accept-hazards accepts them" in out and " --accept-hazards" not in out


# ------------------------------------------------------------------ a CI-style session on the understudy bench


@pytest.fixture
def ubench(tmp_path):
    from benchgate.sim.bench import UnderstudyBench

    with UnderstudyBench("tb3", speed=SPEED, workdir=tmp_path / "vb") as vb:
        yield vb


def _ci_session(pytester, vb, serial, tmp_path):
    shutil.copy(TB3, pytester.path / "tb3.yaml")
    junit = tmp_path / "junit.xml"
    reports = tmp_path / "reports"
    result = pytester.runpytest("--bench-station", str(vb.station_path), "--bench-serial", serial,
                                "--bench-reports", str(reports), "--bench-clock-speed", str(SPEED),
                                f"--junitxml={junit}", "tb3.yaml")
    assert vb.supply_output is False  # left safe
    return result, junit, reports


def _db_rows(reports):
    conn = sqlite3.connect(reports / "results.sqlite")
    try:
        return conn.execute("SELECT serial, complete, verdict, report_path FROM runs").fetchall()
    finally:
        conn.close()


def test_ci_session_good_unit(pytester, ubench, tmp_path, plan):
    ubench.load_unit("OH-PT-1")
    result, junit, reports = _ci_session(pytester, ubench, "OH-PT-1", tmp_path)
    assert result.ret == 0, result.stdout.str()
    suite, cases = _junit(junit)
    assert suite.get("failures") == "0" and suite.get("errors") == "0"
    assert len(cases) == len(_expected_ids(plan))
    ((serial, complete, verdict, report),) = _db_rows(reports)
    assert (serial, complete, verdict) == ("OH-PT-1", 1, "pass")
    assert Path(report).exists()


def test_ci_session_defective_unit(pytester, ubench, tmp_path):
    ubench.load_unit("OH-PT-2", "high_gain")  # interfaces.md: clipping, high THD
    result, junit, reports = _ci_session(pytester, ubench, "OH-PT-2", tmp_path)
    assert result.ret == pytest.ExitCode.TESTS_FAILED
    suite, cases = _junit(junit)
    thd = cases[("steady", "thd")]
    failure = thd.find("failure")
    assert failure is not None and "above 5.000 %" in failure.get("message")
    ((serial, complete, verdict, report),) = _db_rows(reports)
    assert (serial, complete, verdict) == ("OH-PT-2", 1, "fail")
    import json

    assert json.loads(Path(report).read_text(encoding="utf-8"))["verdict"] == "fail"
