"""Report evidence: the row keeps the report's path relative to the report folder with its
SHA-256; a copy of the folder anywhere verifies; a changed, missing or escaping file does not.
The same on both back ends."""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

from benchgate.cli import main
from benchgate.store import ResultsDB, open_results
from benchgate.store.backend import PostgresConn, SQLiteConn
from benchgate.store.evidence import relative_report, verify_report
from benchgate.store.schema import migrate
from synthetic_runs import CheckSpec, make_record

SPEC = [CheckSpec("capture-tone", "frequency", 955.0, "Hz", 860.0, 1050.0, 0.4)]


def _report(folder: Path, name: str = "tb3/SN-1/run-pass.json", text: str = '{"verdict": "pass"}') -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path


def test_a_new_row_holds_the_relative_path_and_a_copy_verifies(target, tmp_path):
    reports = tmp_path / "station" / "reports"
    report = _report(reports)
    with ResultsDB.open(target) as db:
        db.reports_dir = reports
        db.finish_run(make_record("SN-1", SPEC, run_id="r1"), str(report))
        (run,) = db.history("SN-1")
    assert run.report_file == "tb3/SN-1/run-pass.json"  # relative, POSIX, no station folder in it
    # common practice, no source: the stored digest is the file's SHA-256 (hashlib as reference)
    assert run.report_sha256 == hashlib.sha256(report.read_bytes()).hexdigest()
    copy = tmp_path / "shared" / "station-1"  # what a central user fetched from the station
    shutil.copytree(reports, copy)
    e = verify_report(run, copy)
    assert e.ok and e.path == copy / "tb3" / "SN-1" / "run-pass.json"
    (copy / run.report_file).write_text('{"verdict": "fail"}')  # the evidence was changed
    assert verify_report(run, copy).status == "mismatch"
    (copy / run.report_file).unlink()
    assert verify_report(run, copy).status == "missing"


def test_a_report_outside_the_folder_or_no_folder_stores_no_relative_path(target, tmp_path):
    elsewhere = _report(tmp_path / "elsewhere")
    with ResultsDB.open(target) as db:
        db.reports_dir = tmp_path / "reports"
        db.finish_run(make_record("SN-2", SPEC, run_id="r2"), str(elsewhere))
        db.reports_dir = None
        db.finish_run(make_record("SN-3", SPEC, run_id="r3"), str(_report(tmp_path / "reports")))
        assert db.history("SN-2")[0].report_file is None
        assert db.history("SN-3")[0].report_file is None
    assert relative_report(None, tmp_path) is None


def test_rows_of_schema_5_with_absolute_paths_are_still_read_and_checked(target, tmp_path):
    report = _report(tmp_path / "old-reports")
    digest = hashlib.sha256(report.read_bytes()).hexdigest()
    conn = PostgresConn.open(target) if target.startswith("postgresql://") else SQLiteConn.open(target, create=True)
    try:
        assert migrate(conn, target=5) == 5
        conn.execute("INSERT INTO runs (run_id, serial, plan_id, plan_version, plan_hash, started,"
                     " started_epoch, complete, verdict, report_path, report_sha256) VALUES"
                     " ('old', 'SN-OLD', 'tb3', '1', 'h', '2026-11-01T00:00:00Z', 1.0, 1, 'pass', ?, ?)",
                     (str(report), digest))
    finally:
        conn.close()
    with ResultsDB.open(target) as db:  # migrated to 6 on opening
        (run,) = db.history("SN-OLD")
    assert run.report_path == str(report) and run.report_file is None
    assert verify_report(run, tmp_path / "anywhere").ok  # the absolute path, where it points
    report.write_text("changed")
    assert verify_report(run, tmp_path / "anywhere").status == "mismatch"


def test_a_stored_path_that_climbs_out_is_never_followed(tmp_path):
    secret = _report(tmp_path, "secret.json")
    digest = hashlib.sha256(secret.read_bytes()).hexdigest()
    folder = tmp_path / "shared"
    folder.mkdir()

    class Row:  # a row as a hostile or damaged central database could hold it
        report_path = None
        report_sha256 = digest

    for bad in ("../secret.json", str(secret), "a/../../secret.json", "a\\..\\..\\secret.json"):
        Row.report_file = bad
        e = verify_report(Row, folder)
        assert e.status == "unknown" and e.path is None, bad


def test_the_relative_path_is_forwarded_to_the_central_database(tmp_path, pg_url):
    reports = tmp_path / "reports"
    report = _report(reports)
    told: list[str] = []
    with open_results(pg_url, local_default=reports / "results.sqlite", notify=told.append,
                      reports=reports) as db:
        db.finish_run(make_record("SN-4", SPEC, run_id="r4"), str(report))
    with ResultsDB.open(pg_url) as central:
        (run,) = central.history("SN-4")
    assert told == [] and run.report_file == "tb3/SN-1/run-pass.json"
    assert verify_report(run, reports).ok


def test_history_verify_says_and_exits(tmp_path, monkeypatch, capsys):
    monkeypatch.delenv("BENCHGATE_DB", raising=False)
    reports = tmp_path / "reports"
    report = _report(reports)
    with open_results(None, local_default=reports / "results.sqlite", reports=reports) as db:
        db.finish_run(make_record("SN-5", SPEC, run_id="r5"), str(report))
    db_path = str(reports / "results.sqlite")
    assert main(["history", "SN-5", "--db", db_path, "--verify", str(reports)]) == 0
    assert "evidence VERIFIED" in capsys.readouterr().out
    report.write_text("tampered")
    assert main(["history", "SN-5", "--db", db_path, "--verify", str(reports), "--json"]) == 3
    (run,) = json.loads(capsys.readouterr().out)["runs"]
    assert run["evidence"]["status"] == "mismatch" and run["report_file"] == "tb3/SN-1/run-pass.json"
    assert main(["history", "SN-5", "--db", db_path]) == 0  # without --verify: no check, no change
