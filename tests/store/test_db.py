"""The results database file: WAL, migrations, incomplete runs, concurrent writers, hostile text."""

from __future__ import annotations

import sqlite3
import subprocess
import sys
import textwrap
import threading
from pathlib import Path

import pytest

from benchgate.errors import StoreError
from benchgate.judge.rules import Verdict
from benchgate.store import ResultsDB
from benchgate.store.db import MIGRATIONS, SCHEMA_VERSION, migrate, schema_version
from synthetic_runs import CheckSpec, make_record

TESTS_DIR = str(Path(__file__).resolve().parents[1])  # where synthetic_runs lives


def _rec(serial="TB3-0001", **kw):
    specs = [CheckSpec("capture-tone", "frequency", 955.0, "Hz", 860.0, 1050.0, 0.4),
             CheckSpec("capture-tone", "thd", 7.5, "%", None, 5.0, 0.1)]
    return make_record(serial, specs, **kw)


@pytest.fixture
def db(tmp_path):
    with ResultsDB.open(tmp_path / "r.sqlite") as d:
        yield d


def test_wal_and_busy_timeout(db):
    conn = db.connection
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA busy_timeout").fetchone()[0] >= 5000


def test_migrations_from_version_0(tmp_path):
    path = tmp_path / "r.sqlite"
    sqlite3.connect(path).close()  # an empty file: version 0
    with ResultsDB.open(path) as d:
        assert d.version == SCHEMA_VERSION
        applied = [v for (v,) in d.connection.execute("SELECT version FROM schema_version ORDER BY rowid")]
    assert applied == [v for v, _ in MIGRATIONS]
    versions = [v for v, _ in MIGRATIONS]
    assert versions == sorted(versions) and len(set(versions)) == len(versions)


def test_migration_keeps_rows_of_an_older_file(tmp_path):
    path = tmp_path / "r.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    assert migrate(conn, target=1) == 1
    conn.execute("INSERT INTO runs (run_id, serial, plan_id, plan_version, plan_hash, started, started_epoch)"
                 " VALUES ('r1', 'OLD-1', 'tb3', '1', 'h', '2026-11-01T00:00:00Z', 1.0)")
    conn.close()
    with ResultsDB.open(path) as d:
        assert d.version == SCHEMA_VERSION
        names = {n for (n,) in d.connection.execute("SELECT name FROM sqlite_master WHERE type = 'index'")}
        assert "checks_values" in names
        (h,) = d.history("OLD-1")
    assert h.status == "incomplete"


def test_reopen_does_not_migrate_again(tmp_path):
    path = tmp_path / "r.sqlite"
    ResultsDB.open(path).close()
    with ResultsDB.open(path) as d:
        assert d.connection.execute("SELECT COUNT(*) FROM schema_version").fetchone()[0] == len(MIGRATIONS)


def test_newer_file_is_refused(tmp_path):
    path = tmp_path / "r.sqlite"
    ResultsDB.open(path).close()
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO schema_version VALUES (?, 'later')", (SCHEMA_VERSION + 1,))
    conn.commit()
    conn.close()
    with pytest.raises(StoreError, match="newer"):
        ResultsDB.open(path)


def test_not_a_database(tmp_path):
    path = tmp_path / "r.sqlite"
    path.write_bytes(b"this is a text file, not SQLite\n" * 100)
    with pytest.raises(StoreError) as e:
        ResultsDB.open(path)
    assert str(path) in e.value.one_line()


def test_missing_file_without_create(tmp_path):
    with pytest.raises(StoreError, match="no results database"):
        ResultsDB.open(tmp_path / "none.sqlite", create=False)
    assert not (tmp_path / "none.sqlite").exists()


def test_begin_without_finish_leaves_an_incomplete_row(db):
    rec = _rec(finished=False)
    db.begin_run(rec)
    (h,) = db.history(rec.serial)
    assert h.complete is False and h.verdict is None and h.status == "incomplete"
    assert h.ended is None and h.checks == ()
    db.begin_run(rec)  # idempotent
    assert len(db.history(rec.serial)) == 1


def test_finish_completes_the_row(db):
    rec = _rec(flags={"unattended": True, "allow_expired_calibration": True})
    rec.hazards_acknowledged = "--accept-hazards"
    db.begin_run(rec)
    db.finish_run(rec, "reports/tb3/TB3-0001/x-fail.json")
    (h,) = db.history(rec.serial)
    assert h.complete and h.verdict == "fail" and h.status == "fail"
    assert h.reason == rec.reason and h.ended == rec.ended
    assert h.report_path == "reports/tb3/TB3-0001/x-fail.json"
    assert h.flags == {"accept_hazards": True, "allow_expired_calibration": True, "unattended": True}
    f, t = h.checks
    assert (f.step, f.measurement, f.value, f.uncertainty, f.low, f.high, f.unit, f.verdict) == (
        "capture-tone", "frequency", 955.0, 0.4, 860.0, 1050.0, "Hz", "pass")
    assert (t.measurement, t.low, t.high, t.verdict) == ("thd", None, 5.0, "fail")
    assert "above" in t.reason
    # the flat view: one row per check with everything needed to read it alone
    view = db.connection.execute("SELECT serial, step, measurement, value, uncertainty, low, high, unit,"
                                 " verdict FROM check_results ORDER BY seq").fetchall()
    assert view == [("TB3-0001", "capture-tone", "frequency", 955.0, 0.4, 860.0, 1050.0, "Hz", "pass"),
                    ("TB3-0001", "capture-tone", "thd", 7.5, 0.1, None, 5.0, "%", "fail")]


def test_finish_twice_replaces_checks_and_finish_without_begin(db):
    rec = _rec()
    db.finish_run(rec, None)  # never begun: inserted here
    db.finish_run(rec, None)
    (h,) = db.history(rec.serial)
    assert len(h.checks) == 2
    rows = db.connection.execute("SELECT COUNT(*) FROM checks").fetchone()[0]
    assert rows == 2


def test_invalid_measurement_is_stored_without_value(db):
    rec = make_record("E-1", [CheckSpec("capture-tone", "frequency", None, "Hz", 860.0, 1050.0,
                                        reason="no steady tone found")])
    db.finish_run(rec, None)
    (h,) = db.history("E-1")
    (c,) = h.checks
    assert h.verdict == "error" and c.value is None and c.valid is False and c.verdict == "error"


HOSTILE = ["'; DROP TABLE runs; --", 'Robert"); DELETE FROM checks; --', "Eule-序列-🦉-ÄÖÜ",
           "x" * 500, "%", "_", "line\nbreak\x00nul"]


@pytest.mark.parametrize("serial", HOSTILE)
def test_hostile_serials_are_data(db, serial):
    rec = _rec(serial, lot=serial, operator=serial)
    db.begin_run(rec)
    db.finish_run(rec, serial)
    db.finish_run(_rec("TB3-other"), None)
    (h,) = db.history(serial)
    assert h.serial == serial and h.lot == serial and h.operator == serial and h.report_path == serial
    tables = {n for (n,) in db.connection.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    assert {"runs", "checks", "check_defs", "schema_version"} <= tables
    assert db.connection.execute("SELECT COUNT(*) FROM runs").fetchone()[0] == 2
    assert db.summary(lot=serial).units_tested == 1


def test_writer_waits_for_another_writers_lock(tmp_path):
    path = tmp_path / "r.sqlite"
    ResultsDB.open(path).close()
    other = sqlite3.connect(path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # another station holds the write lock
    errors: list[BaseException] = []

    def write():
        try:
            with ResultsDB.open(path) as d:
                d.finish_run(_rec("WAITER"), None)
        except BaseException as exc:  # noqa: BLE001 - reported below
            errors.append(exc)

    t = threading.Thread(target=write)
    t.start()
    t.join(0.3)
    assert t.is_alive()  # still waiting on the lock, not failed
    other.execute("COMMIT")
    other.close()
    t.join(30)
    assert not errors and not t.is_alive()
    with ResultsDB.open(path) as d:
        assert d.history("WAITER")[0].status == "fail"


WRITER = textwrap.dedent("""
    import sys
    from benchgate.store import ResultsDB
    sys.path.insert(0, sys.argv[4])
    from synthetic_runs import CheckSpec, make_record
    path, tag, n = sys.argv[1], sys.argv[2], int(sys.argv[3])
    with ResultsDB.open(path) as db:
        for i in range(n):
            rec = make_record(f"{tag}-{i}", [CheckSpec("s", "frequency", 950.0 + i, "Hz", 900.0, 1000.0)])
            db.begin_run(rec)
            db.finish_run(rec, None)
""")


def test_two_processes_write_at_once(tmp_path):
    path = tmp_path / "r.sqlite"
    ResultsDB.open(path).close()
    n = 60
    procs = [subprocess.Popen([sys.executable, "-c", WRITER, str(path), tag, str(n), TESTS_DIR],
                              stderr=subprocess.PIPE, text=True) for tag in ("A", "B")]
    for p in procs:
        _, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
    with ResultsDB.open(path) as d:
        s = d.summary()
        assert s.runs == 2 * n and s.units_tested == 2 * n and s.incomplete == 0
        assert d.connection.execute("SELECT COUNT(*) FROM checks").fetchone()[0] == 2 * n
        assert d.connection.execute("PRAGMA integrity_check").fetchone()[0] == "ok"


def test_version_helper_on_empty_connection():
    conn = sqlite3.connect(":memory:")
    assert schema_version(conn) == 0


def test_verdict_enum_values_round_trip(db):
    for v in (Verdict.PASS, Verdict.INCONCLUSIVE, Verdict.ABORTED):
        rec = _rec(f"V-{v.value}", verdict=v, reason=f"forced {v.value}")
        db.finish_run(rec, None)
        assert db.history(rec.serial)[0].verdict == v.value


def test_migration_from_version_2_reads_how_old_runs_ended(tmp_path):
    path = tmp_path / "r.sqlite"
    conn = sqlite3.connect(path, isolation_level=None)
    assert migrate(conn, target=2) == 2
    conn.execute("INSERT INTO check_defs (id, plan_id, step, measurement, unit) VALUES (1, 'tb3', 's', 'f', 'Hz')")
    for pk, serial, verdict in ((1, "AB", "aborted"), (2, "ST", "error"), (3, "CE", "error"),
                                (4, "OK", "pass")):
        conn.execute("INSERT INTO runs (id, run_id, serial, plan_id, plan_version, plan_hash, started,"
                     " started_epoch, complete, verdict) VALUES (?, ?, ?, 'tb3', '1', 'h',"
                     " '2026-11-01T00:00:00Z', ?, 1, ?)", (pk, f"r{pk}", serial, float(pk), verdict))
    # CE's error comes from an untrusted measurement of the unit: it ran to its end
    conn.execute("INSERT INTO checks (run, seq, def, started_epoch, valid, verdict, reason)"
                 " VALUES (3, 0, 1, 3.0, 0, 'error', 'no steady tone found')")
    conn.close()
    with ResultsDB.open(path) as d:
        assert d.version == SCHEMA_VERSION
        cut = dict(d.connection.execute("SELECT serial, cut_short FROM runs").fetchall())
        s = d.summary()
    assert cut == {"AB": "aborted", "ST": "station error", "CE": None, "OK": None}
    assert (s.units_tested, s.units_untested, s.final_pass) == (2, 2, 1)
