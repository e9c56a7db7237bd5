"""``benchgate summary``: numbers, filters, the HTML page and clear errors."""

from __future__ import annotations

import json
from datetime import timedelta

import pytest

from benchgate.cli import main
from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from synthetic_runs import EPOCH, CheckSpec, make_record


def _rec(serial, minutes, value, lot="L1", plan="tb3", **kw):
    return make_record(serial, [CheckSpec("capture-tone", "frequency", value, "Hz", 860.0, 1050.0)],
                       started=EPOCH + timedelta(minutes=minutes), lot=lot, plan_id=plan, **kw)


@pytest.fixture
def dbpath(tmp_path):
    path = tmp_path / "results.sqlite"
    with ResultsDB.open(path) as db:
        db.finish_run(_rec("A", 0, 950.0), None)
        db.finish_run(_rec("B", 1, 1100.0), None)   # fails, then passes on retest
        db.finish_run(_rec("B", 2, 960.0), None)
        db.finish_run(_rec("C", 3, 800.0), None)    # fails
        db.finish_run(_rec("D", 60 * 24 * 3, 955.0, lot="L2", plan="wo1"), None)
    return path


def test_json_numbers(dbpath, capsys):
    assert main(["summary", "--db", str(dbpath), "--lot", "L1", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert (d["units_tested"], d["runs"], d["retests"]) == (3, 4, 1)
    assert d["first_pass_yield"] == pytest.approx(1 / 3)   # A only
    assert d["final_yield"] == pytest.approx(2 / 3)        # A, B
    (c,) = d["checks"]
    # Cpk inputs: one value per unit, from its latest complete run (docs/results.md)
    assert c["n"] == 3 and c["mean"] == pytest.approx((950 + 960 + 800) / 3)
    assert [p["measurement"] for p in d["pareto_checks"]] == ["frequency"]
    assert d["pareto_checks"][0]["fail"] == 2
    assert d["html"] is None and d["lot"] == "L1"


def test_filters(dbpath, capsys):
    assert main(["summary", "--db", str(dbpath), "--plan", "wo1", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["units_tested"] == 1
    assert main(["summary", "--db", str(dbpath), "--since", "2026-11-04", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["units_tested"] == 1
    assert main(["summary", "--db", str(dbpath), "--lot", "nope", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["units_tested"] == 0 and d["first_pass_yield"] is None


def test_text_and_html(dbpath, tmp_path, capsys):
    page = tmp_path / "out" / "summary.html"
    assert main(["summary", "--db", str(dbpath), "--lot", "L1", "--html", str(page)]) == 0
    out = capsys.readouterr().out
    assert "first-pass yield 33.3 %" in out and "final yield      66.7 %" in out
    assert "frequency above the high limit" in out and "Cpk" in out
    assert f"summary page: {page}" in out
    html = page.read_text(encoding="utf-8")
    assert '<svg class="hist"' in html and "Lot L1" in html


def test_missing_database(tmp_path, capsys):
    missing = tmp_path / "results.sqlite"
    assert main(["summary", "--db", str(missing)]) == 2
    out, err = capsys.readouterr()
    assert out == "" and err.count("\n") == 1 and "no results database" in err
    assert not missing.exists()


def test_bad_since(dbpath, capsys):
    assert main(["summary", "--db", str(dbpath), "--since", "yesterday-ish"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--since" in err and "Traceback" not in err


def test_incomplete_counted(tmp_path, capsys):
    path = tmp_path / "r.sqlite"
    with ResultsDB.open(path) as db:
        db.begin_run(_rec("X", 0, 950.0, finished=False))
        db.finish_run(_rec("Y", 1, 950.0, verdict=Verdict.PASS), None)
    assert main(["summary", "--db", str(path), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["incomplete"] == 1 and d["verdicts"] == {"incomplete": 1, "pass": 1}
