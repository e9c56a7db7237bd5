"""Real station processes (``benchgate demo``, each on its own understudy bench) and a real
PostgreSQL server: concurrent writers, a server that goes away mid-lot, a station killed mid-run.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from benchgate.cli import main
from benchgate.store import ResultsDB
from waiting import wait_until

pytestmark = pytest.mark.slow
DEADLINE_S = 240.0


def _station(reports: Path, url: str, lot: str, speed: float = 50.0) -> subprocess.Popen:
    # each station is its own machine: its own runtime folder for the station lock
    env = dict(os.environ, BENCHGATE_DB=url, NO_COLOR="1",
               BENCHGATE_RUNTIME_DIR=str(reports.parent / f"{reports.name}-run"))
    env.pop("CI", None)
    return subprocess.Popen(
        [sys.executable, "-m", "benchgate", "demo", "--units", "7", "--speed", str(speed),
         "--lot", lot, "--reports", str(reports)],
        env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        stdin=subprocess.DEVNULL)


def _local_runs(reports: Path) -> dict[str, tuple[int, int]]:
    """run id -> (complete, number of checks) in a station's own file."""
    conn = sqlite3.connect(reports / "results.sqlite")
    try:
        return {r: (int(c), int(n)) for r, c, n in conn.execute(
            "SELECT r.run_id, r.complete, (SELECT COUNT(*) FROM checks c WHERE c.run = r.id)"
            " FROM runs r")}
    finally:
        conn.close()


def _central_runs(url: str) -> dict[str, tuple[int, int]]:
    with ResultsDB.open(url) as db:
        rows = db.conn.execute(
            "SELECT r.run_id, r.complete, (SELECT COUNT(*) FROM checks c WHERE c.run = r.id)"
            " FROM runs r").fetchall()
        assert len(rows) == len({r for r, _, _ in rows})  # no run twice
        return {r: (int(c), int(n)) for r, c, n in rows}


def _wait_for(what, predicate, deadline_s=DEADLINE_S, proc=None):
    def ended():
        return None if proc is None or proc.poll() is None else "the station process ended first"

    wait_until(predicate, timeout=deadline_s, what=what, abandon=ended)


def _finished(reports: Path, complete: int, incomplete: int = 0):
    def check():
        try:
            runs = _local_runs(reports).values()
        except sqlite3.Error:
            return False
        return (sum(c for c, _ in runs) >= complete
                and sum(1 for c, _ in runs if not c) >= incomplete)
    return check


def test_eight_stations_write_concurrently(tmp_path, pg_url):
    stations = [tmp_path / f"station{i}" for i in range(8)]
    procs = [_station(d, pg_url, f"ST{i}") for i, d in enumerate(stations)]
    for p in procs:
        _, err = p.communicate(timeout=DEADLINE_S)
        assert p.returncode == 0, err[-2000:]
        assert "queued" not in err, [x[80:400] for x in err.splitlines() if "queued" in x]
    local: dict[str, tuple[int, int]] = {}
    for d in stations:
        runs = _local_runs(d)
        assert runs and all(c == 1 for c, _ in runs.values())
        local.update(runs)
    central = _central_runs(pg_url)
    # rows = runs, checks = checks, no duplicate, no loss
    assert central == local and len(central) == 8 * len(_local_runs(stations[0]))


def test_server_stopped_mid_lot_then_synced_exactly_once(tmp_path, own_server, capsys):
    url = own_server.url()
    ResultsDB.open(url).close()
    reports = tmp_path / "station"
    proc = _station(reports, url, "MID", speed=20.0)
    _wait_for("two runs at the server", lambda: sum(
        c for c, _ in _central_runs(url).values()) >= 2, proc=proc)
    own_server.stop()  # the server goes away in the middle of the lot
    _, err = proc.communicate(timeout=DEADLINE_S)
    assert proc.returncode == 0, err[-2000:]  # the station's exit code is unaffected
    local = _local_runs(reports)
    assert len(local) == 7 and all(c == 1 for c, _ in local.values())
    assert len(list(reports.rglob("*.json"))) >= 7  # every unit's report written
    assert err.count("results server not reachable") == 1  # told once
    own_server.start()
    assert main(["sync", "--db", url, "--reports", str(reports)]) == 0
    assert _central_runs(url) == local  # every run of the lot, exactly once
    assert main(["sync", "--db", url, "--reports", str(reports)]) == 0
    assert "sent 0 run updates" in capsys.readouterr().out
    assert _central_runs(url) == local


def test_station_killed_mid_run_is_incomplete_centrally(tmp_path, pg_url):
    reports = tmp_path / "station"
    proc = _station(reports, pg_url, "KIL", speed=5.0)
    try:
        _wait_for("a run in progress after a finished one", _finished(reports, 1, 1), proc=proc)
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.communicate(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    assert main(["sync", "--db", pg_url, "--reports", str(reports)]) == 0
    local, central = _local_runs(reports), _central_runs(pg_url)
    assert central == local
    assert any(c == 0 for c, _ in central.values())  # the killed run: visible, incomplete
    with ResultsDB.open(pg_url) as db:
        s = db.summary(lot="KIL")
    assert s.incomplete >= 1
