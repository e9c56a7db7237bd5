"""Offline-safe stations: local first, forwarded exactly once, told once, synced later."""

from __future__ import annotations

import json
from datetime import timedelta

import pytest

from benchgate.cli import main
from benchgate.store import ResultsDB, open_results
from benchgate.store.forward import RETRY_S, ForwardingDB, send_pending, sync
from synthetic_runs import EPOCH, CheckSpec, make_record


def _rec(serial, minute=0, value=955.0, **kw):
    spec = [CheckSpec("capture-tone", "frequency", value, "Hz", 860.0, 1050.0, 0.4),
            CheckSpec("capture-tone", "thd", 2.0, "%", None, 5.0, 0.1)]
    return make_record(serial, spec, started=EPOCH + timedelta(minutes=minute), **kw)


def _counts(db):
    runs = db.conn.execute("SELECT COUNT(*), COUNT(DISTINCT run_id), SUM(complete) FROM runs").fetchone()
    checks = db.conn.execute("SELECT COUNT(*) FROM checks").fetchone()[0]
    return int(runs[0]), int(runs[1]), int(runs[2] or 0), int(checks)


class Clock:
    def __init__(self):
        self.t = 0.0

    def __call__(self):
        return self.t


def _dead_url(tmp_path):
    # a socket folder with no server in it: refused at once, like a server that is down
    (tmp_path / "nosock").mkdir()
    return f"postgresql://benchgate:pw@/x?host={tmp_path / 'nosock'}"


def test_runs_reach_the_server(tmp_path, pg_url):
    told = []
    db = open_results(pg_url, local_default=tmp_path / "q.sqlite", notify=told.append)
    assert isinstance(db, ForwardingDB)
    with db:
        for i in range(3):
            rec = _rec(f"F{i}", i)
            db.begin_run(rec)
            db.finish_run(rec, None)
        unfinished = _rec("F9", 9, finished=False)
        db.begin_run(unfinished)  # a run in progress is visible centrally as incomplete
    with ResultsDB.open(pg_url) as central, ResultsDB.open(tmp_path / "q.sqlite") as local:
        assert _counts(central) == _counts(local) == (4, 4, 3, 6)
        assert local.count_pending() == 0
        assert [r.status for r in central.history("F9")] == ["incomplete"]
    assert told == []


def test_sending_twice_or_after_a_crash_changes_nothing(tmp_path, pg_url):
    with ResultsDB.open(tmp_path / "q.sqlite") as local, ResultsDB.open(pg_url) as central:
        for i in range(5):
            local.finish_run(_rec(f"S{i}", i), None)
        # a crash after the server committed but before the station marked the runs sent
        central.import_runs(local.export_runs([r for r, _ in local.pending()]))
        assert local.count_pending() == 5
        r = send_pending(local, central)
        assert (r.sent, r.left, r.failed) == (5, 0, [])
        assert _counts(central) == (5, 5, 5, 10)
        local.mark_all_unsent()
        send_pending(local, central)  # sync --all: everything again
        assert _counts(central) == (5, 5, 5, 10)
        # a begun-only copy never overwrites a finished one
        first = local.conn.execute("SELECT run_id FROM runs ORDER BY id").fetchone()[0]
        ((run, _),) = local.export_runs([first])
        central.import_runs([(dict(run, complete=0, verdict=None), [])])
        assert central.history(run["serial"])[0].status == "pass"
        assert _counts(central) == (5, 5, 5, 10)


def test_server_down_runs_complete_told_once_then_synced(tmp_path, pg_url):
    told, clock = [], Clock()
    local = ResultsDB.open(tmp_path / "q.sqlite")
    db = ForwardingDB(local, _dead_url(tmp_path), notify=told.append, clock=clock)
    for i in range(4):
        rec = _rec(f"D{i}", i)
        db.begin_run(rec)
        db.finish_run(rec, None)
        clock.t += RETRY_S + 1  # each unit tries again: still down
    assert len(told) == 1 and "4 runs" not in told[0] and "queued in" in told[0]
    assert "pw" not in told[0]
    assert local.count_pending() == 4 and _counts(local) == (4, 4, 4, 8)
    db.close()
    with ResultsDB.open(tmp_path / "q.sqlite") as local2:
        r = sync(local2, pg_url)
        assert (r.sent, r.left) == (4, 0)
    with ResultsDB.open(pg_url) as central:
        assert _counts(central) == (4, 4, 4, 8)


def test_next_run_sends_the_backlog(tmp_path, pg_url):
    told, clock = [], Clock()
    local = ResultsDB.open(tmp_path / "q.sqlite")
    db = ForwardingDB(local, _dead_url(tmp_path), notify=told.append, clock=clock)
    db.finish_run(_rec("B0"), None)
    db.url = pg_url  # the server is back (same station, same queue)
    db.finish_run(_rec("B1", 1), None)  # within the retry pause: stays queued
    assert local.count_pending() == 2
    clock.t += RETRY_S + 1
    db.finish_run(_rec("B2", 2), None)
    assert local.count_pending() == 0
    assert told[-1].startswith("queued results sent")
    db.close()
    with ResultsDB.open(pg_url) as central:
        assert _counts(central)[:3] == (3, 3, 3)


def test_cli_sync_history_and_summary_mention_the_queue(tmp_path, pg_url, capsys, monkeypatch):
    monkeypatch.delenv("BENCHGATE_DB", raising=False)
    reports = tmp_path / "reports"
    with ResultsDB.open(reports / "results.sqlite") as local:
        local.finish_run(_rec("Q1"), None)
    ResultsDB.open(pg_url).close()  # the server has the schema, not the run
    monkeypatch.chdir(tmp_path)  # the default queue: reports/results.sqlite
    assert main(["history", "Q1", "--db", pg_url]) == 1
    out, err = capsys.readouterr()
    assert "1 run recorded at this station is not yet in" in err and "benchgate sync" in err
    assert main(["summary", "--db", pg_url, "--json"]) == 0
    out, err = capsys.readouterr()
    d = json.loads(out)
    assert d["unsent_elsewhere"] == 1 and d["units_tested"] == 0
    secret = pg_url.split("benchgate:", 1)[1].split("@", 1)[0]
    assert secret not in out + err and secret not in d["db"]
    monkeypatch.setenv("BENCHGATE_DB", pg_url)  # the environment setting, no option
    assert main(["sync"]) == 0
    out, err = capsys.readouterr()
    assert "sent 1 run update" in out and secret not in out + err
    assert main(["history", "Q1"]) == 0
    out, err = capsys.readouterr()
    assert "Q1: 1 run" in out and err == ""


def test_sync_without_a_url_is_refused(tmp_path, capsys, monkeypatch):
    monkeypatch.delenv("BENCHGATE_DB", raising=False)
    ResultsDB.open(tmp_path / "results.sqlite").close()
    assert main(["sync", "--reports", str(tmp_path)]) == 2
    assert "needs a postgresql:// URL" in capsys.readouterr().err


@pytest.mark.parametrize("cut", ["aborted", "station error"])
def test_cut_short_runs_travel(tmp_path, pg_url, cut):
    with ResultsDB.open(tmp_path / "q.sqlite") as local:
        local.finish_run(_rec("C1", cut=cut), "reports/x.json")
        sync(local, pg_url)
    with ResultsDB.open(pg_url) as central:
        (h,) = central.history("C1")
        assert h.cut_short == cut and not h.counts and h.report_path == "reports/x.json"


def test_sync_without_a_queue_creates_the_central_schema(tmp_path, pg_url, capsys):
    assert main(["sync", "--db", pg_url, "--reports", str(tmp_path / "none")]) == 0
    assert "results schema version" in capsys.readouterr().out
    with ResultsDB.open(pg_url, create=False) as central:
        assert central.summary().runs == 0
    assert not (tmp_path / "none").exists()


def test_a_forwarding_bug_never_breaks_a_run(tmp_path, pg_url, monkeypatch):
    import benchgate.store.forward as fwd

    def broken(*_a, **_k):
        raise RuntimeError("boom")

    monkeypatch.setattr(fwd, "send_pending", broken)
    told = []
    with ForwardingDB(ResultsDB.open(tmp_path / "q.sqlite"), pg_url, notify=told.append) as db:
        db.finish_run(_rec("X1"), None)
        db.finish_run(_rec("X2", 1), None)
        assert db.local.count_pending() == 2 and db.local.history("X2")[0].status == "pass"
    assert len(told) == 1 and "boom" in told[0]


def test_the_runner_opens_the_setting(tmp_path, pg_url, monkeypatch):
    from benchgate.runner.options import RunOptions
    from benchgate.runner.session import Services

    monkeypatch.delenv("BENCHGATE_DB", raising=False)
    opts = RunOptions(reports_dir=tmp_path / "rep", db_path=pg_url)  # run --db, pytest --bench-db
    assert opts.db_path == pg_url  # a URL stays text
    with Services.default(opts).open_db(opts.database) as db:
        assert isinstance(db, ForwardingDB) and db.local.path == str(tmp_path / "rep" / "results.sqlite")
    monkeypatch.setenv("BENCHGATE_DB", pg_url)  # no option: the environment (demo, run, plugin)
    opts = RunOptions(reports_dir=tmp_path / "rep2")
    with Services.default(opts).open_db(opts.database) as db:
        assert isinstance(db, ForwardingDB)
    opts = RunOptions(reports_dir=tmp_path / "rep3", db_path=tmp_path / "own.sqlite")
    with Services.default(opts).open_db(opts.database) as db:  # an explicit file wins
        assert isinstance(db, ResultsDB) and db.path == str(tmp_path / "own.sqlite")
