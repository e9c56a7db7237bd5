"""``benchgate history SERIAL``: newest first, incomplete runs shown, clear errors."""

from __future__ import annotations

import json
from datetime import timedelta

import pytest

from benchgate.cli import main
from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from synthetic_runs import EPOCH, CheckSpec, make_record


def _spec(v):
    return [CheckSpec("capture-tone", "frequency", v, "Hz", 860.0, 1050.0, 0.5)]


@pytest.fixture
def dbpath(tmp_path):
    path = tmp_path / "results.sqlite"
    with ResultsDB.open(path) as db:
        db.finish_run(make_record("TB3-7", _spec(1100.0), started=EPOCH), "reports/a-fail.json")
        db.finish_run(make_record("TB3-7", _spec(955.0), started=EPOCH + timedelta(hours=1),
                                  flags={"unattended": True}), "reports/b-pass.json")
        db.begin_run(make_record("TB3-7", _spec(955.0), started=EPOCH + timedelta(hours=2),
                                 finished=False))
        db.finish_run(make_record("TB3-8", _spec(955.0)), None)
    return path


def test_text_newest_first_with_incomplete(dbpath, capsys):
    assert main(["history", "TB3-7", "--db", str(dbpath)]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert "3 runs" in lines[0]
    table = [ln for ln in lines if ln.startswith("2026-")]
    assert [ln.split()[1] for ln in table] == ["INCOMPLETE", "PASS", "FAIL"]
    assert "did not finish" in table[0]
    assert "unattended" in table[1]
    assert "reports/a-fail.json" in out and "TB3-8" not in out


def test_json(dbpath, capsys):
    assert main(["history", "TB3-7", "--db", str(dbpath), "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d["serial"] == "TB3-7"
    assert [r["status"] for r in d["runs"]] == ["incomplete", "pass", "fail"]
    assert d["runs"][0]["verdict"] is None and d["runs"][0]["complete"] is False
    (c,) = d["runs"][2]["checks"]
    assert (c["measurement"], c["value"], c["high"], c["verdict"]) == ("frequency", 1100.0, 1050.0, "fail")


def test_unknown_serial(dbpath, capsys):
    assert main(["history", "NOPE", "--db", str(dbpath)]) == 1
    assert "no runs of 'NOPE'" in capsys.readouterr().err


def test_missing_database_one_line(tmp_path, capsys):
    missing = tmp_path / "none" / "results.sqlite"
    assert main(["history", "TB3-7", "--db", str(missing)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("benchgate: ") and "Traceback" not in err
    assert str(missing) in err
    assert not missing.exists() and not missing.parent.exists()


def test_hostile_serial_printed_safely(tmp_path, capsys):
    serial = "'; DROP TABLE runs; --\x1b[2J\n<x>"
    path = tmp_path / "r.sqlite"
    with ResultsDB.open(path) as db:
        db.finish_run(make_record(serial, _spec(955.0), verdict=Verdict.PASS), None)
    assert main(["history", serial, "--db", str(path)]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\\x1b[2J\\n<x>" in out
    assert main(["history", serial, "--db", str(path), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["runs"][0]["serial"] == serial


def test_cut_short_runs_say_whether_they_count(tmp_path, capsys):
    path = tmp_path / "r.sqlite"
    with ResultsDB.open(path) as db:
        db.finish_run(make_record("TB3-9", _spec(955.0), started=EPOCH, cut="station error"), None)
        db.finish_run(make_record("TB3-9", _spec(1100.0), started=EPOCH + timedelta(hours=1),
                                  cut="aborted"), None)
    assert main(["history", "TB3-9", "--db", str(path)]) == 0
    out = capsys.readouterr().out
    assert "ERROR (station error, not counted)" in out and "FAIL (aborted)" in out
    assert main(["history", "TB3-9", "--db", str(path), "--json"]) == 0
    runs = json.loads(capsys.readouterr().out)["runs"]
    assert [(r["cut_short"], r["counts"]) for r in runs] == [("aborted", True), ("station error", False)]
