"""The results database: one row per run, one row per check, in SQLite.

A run is inserted, marked incomplete, when it starts (:meth:`ResultsDB.begin_run`) and
completed when it ends (:meth:`ResultsDB.finish_run`), so a crashed run stays visible as
incomplete instead of going missing. The file is opened in WAL mode with a busy timeout so
that two stations on one machine can write to it at the same time; every statement is
parameterised. The schema carries its version in the ``schema_version`` table and is brought
up to date by the ordered :data:`MIGRATIONS` when the file is opened.
"""

from __future__ import annotations

import math
import os
import sqlite3
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from benchgate.errors import StoreError
from benchgate.store.outcome import cut_short

if TYPE_CHECKING:
    from benchgate.record import UnitRecord
    from benchgate.store.queries import HistoryRun, Summary

#: seconds a writer waits for another writer's lock before giving up.
BUSY_TIMEOUT_S = 30.0



# --------------------------------------------------------------------------- schema

_V1 = """
CREATE TABLE runs (
    id INTEGER PRIMARY KEY,
    run_id TEXT NOT NULL UNIQUE,
    serial TEXT NOT NULL,
    plan_id TEXT NOT NULL,
    plan_version TEXT NOT NULL,
    plan_hash TEXT NOT NULL,
    product TEXT,
    station_id TEXT,
    operator TEXT,
    lot TEXT,
    started TEXT NOT NULL,
    started_epoch REAL NOT NULL,
    ended TEXT,
    complete INTEGER NOT NULL DEFAULT 0,
    verdict TEXT,
    reason TEXT,
    decision_rule TEXT,
    software_version TEXT,
    accept_hazards INTEGER NOT NULL DEFAULT 0,
    allow_expired_calibration INTEGER NOT NULL DEFAULT 0,
    unattended INTEGER NOT NULL DEFAULT 0,
    report_path TEXT
);
CREATE TABLE check_defs (
    id INTEGER PRIMARY KEY,
    plan_id TEXT NOT NULL,
    step TEXT NOT NULL,
    measurement TEXT NOT NULL,
    unit TEXT NOT NULL,
    low REAL,
    high REAL
);
CREATE TABLE checks (
    id INTEGER PRIMARY KEY,
    run INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    seq INTEGER NOT NULL,
    def INTEGER NOT NULL REFERENCES check_defs(id),
    lot TEXT,
    started_epoch REAL NOT NULL,
    value REAL,
    uncertainty REAL,
    valid INTEGER NOT NULL,
    verdict TEXT NOT NULL,
    reason TEXT NOT NULL
);
"""

_V2 = """
CREATE INDEX runs_serial ON runs(serial, started_epoch);
CREATE INDEX runs_units ON runs(plan_id, serial, started_epoch, verdict, complete, lot);
CREATE INDEX checks_run ON checks(run);
CREATE INDEX checks_values ON checks(def, value, lot, started_epoch) WHERE valid = 1;
CREATE INDEX checks_not_pass ON checks(def, verdict, lot, started_epoch, value) WHERE verdict <> 'pass';
CREATE INDEX check_defs_key ON check_defs(plan_id, step, measurement, unit);
CREATE VIEW check_results AS
    SELECT r.run_id, r.serial, c.seq, d.step, d.measurement, c.value, c.uncertainty,
           d.low, d.high, d.unit, c.valid, c.verdict, c.reason
    FROM checks c JOIN check_defs d ON d.id = c.def JOIN runs r ON r.id = c.run;
"""

# how a finished run ended (see store/outcome.py); rows written before version 3 are read from
# their verdict and checks: aborted, or an error verdict that no check explains
_V3 = """
ALTER TABLE runs ADD COLUMN cut_short TEXT;
UPDATE runs SET cut_short = 'aborted' WHERE complete = 1 AND verdict = 'aborted';
UPDATE runs SET cut_short = 'station error' WHERE complete = 1 AND verdict = 'error'
    AND NOT EXISTS (SELECT 1 FROM checks c WHERE c.run = runs.id AND c.verdict = 'error');
CREATE INDEX runs_latest ON runs(plan_id, serial, started_epoch, run_id, complete, cut_short, verdict, lot)
"""

#: ordered migrations: (version reached, how to get there from the version before).
MIGRATIONS: tuple[tuple[int, str | Callable[[sqlite3.Connection], None]], ...] = (
    (1, _V1),
    (2, _V2),
    (3, _V3),
)
SCHEMA_VERSION = MIGRATIONS[-1][0]


def _script(conn: sqlite3.Connection, sql: str) -> None:
    for statement in sql.split(";"):
        if statement.strip():
            conn.execute(statement)


def schema_version(conn: sqlite3.Connection) -> int:
    """The schema version recorded in the file (0 for a new, empty file)."""
    has = conn.execute(
        "SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'schema_version'"
    ).fetchone()
    if not has:
        return 0
    row = conn.execute("SELECT MAX(version) FROM schema_version").fetchone()
    return int(row[0] or 0)


def migrate(conn: sqlite3.Connection, target: int = SCHEMA_VERSION) -> int:
    """Apply the migrations after the file's version up to ``target``, each in its own transaction.

    Returns the version reached. Raises :class:`StoreError` for a file newer than this program.
    """
    current = schema_version(conn)
    if current == min(target, SCHEMA_VERSION):
        return current  # up to date: no write lock taken (read-only users, many stations)
    conn.execute("BEGIN IMMEDIATE")  # one migrator at a time; others wait on the busy timeout
    try:
        current = schema_version(conn)  # again, under the lock: another process may have migrated
        if current > SCHEMA_VERSION:
            raise StoreError(f"database schema version {current} is newer than this benchgate "
                             f"understands ({SCHEMA_VERSION}); upgrade benchgate")
        if current == 0:
            conn.execute("CREATE TABLE schema_version (version INTEGER NOT NULL, applied TEXT NOT NULL)")
        for version, step in MIGRATIONS:
            if current < version <= target:
                if callable(step):
                    step(conn)
                else:
                    _script(conn, step)
                conn.execute("INSERT INTO schema_version (version, applied) VALUES (?, ?)",
                             (version, datetime.now(UTC).isoformat(timespec="seconds")))
                current = version
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    return current


# --------------------------------------------------------------------------- helpers

def parse_time(text: str) -> float:
    """Seconds since the epoch for an ISO 8601 time; a time without zone is taken as UTC."""
    try:
        t = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except (TypeError, ValueError):
        raise StoreError(f"run start time is not an ISO 8601 time: {text!r}") from None
    if t.tzinfo is None:
        t = t.replace(tzinfo=UTC)
    return t.timestamp()


def _finite(x: float | None) -> float | None:
    return x if x is not None and math.isfinite(x) else None


def _flags(record: UnitRecord) -> tuple[int, int, int]:
    flags = record.flags or {}
    hazards = bool(flags.get("accept_hazards")) or record.hazards_acknowledged == "--accept-hazards"
    return (int(hazards), int(bool(flags.get("allow_expired_calibration"))),
            int(bool(flags.get("unattended"))))


# --------------------------------------------------------------------------- database

class ResultsDB:
    """A results database file. Use :meth:`open`; close with :meth:`close` or ``with``."""

    def __init__(self, conn: sqlite3.Connection, path: str):
        self._conn = conn
        self.path = path
        self._defs: dict[tuple[Any, ...], int] = {}

    @classmethod
    def open(cls, path: str | os.PathLike[str], *, create: bool = True) -> ResultsDB:
        """Open (creating and migrating when needed) the database at ``path``.

        With ``create=False`` a missing file is a :class:`StoreError` instead of a new database.
        """
        p = Path(path)
        if not create and not p.is_file():
            raise StoreError("no results database here (run a plan first, or give --db)", p)
        try:
            if create:
                p.parent.mkdir(parents=True, exist_ok=True)
            conn = sqlite3.connect(p, timeout=BUSY_TIMEOUT_S, isolation_level=None)
        except (OSError, sqlite3.Error) as exc:
            raise StoreError(f"cannot open results database: {exc}", p) from exc
        try:
            conn.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
            mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            if str(mode).lower() != "wal":
                raise StoreError(f"cannot switch the results database to WAL mode (got {mode})", p)
            conn.execute("PRAGMA synchronous = NORMAL")
            conn.execute("PRAGMA foreign_keys = ON")
            migrate(conn)
        except sqlite3.DatabaseError as exc:
            conn.close()
            raise StoreError(f"not a usable results database: {exc}", p) from exc
        except BaseException:
            conn.close()
            raise
        return cls(conn, str(p))

    # context manager
    def __enter__(self) -> ResultsDB:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        self._conn.close()

    @property
    def connection(self) -> sqlite3.Connection:
        """The underlying connection (read-only use by queries and tests)."""
        return self._conn

    @property
    def version(self) -> int:
        return schema_version(self._conn)

    def _write(self, fn: Callable[[sqlite3.Connection], Any]) -> Any:
        conn = self._conn
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as exc:
            raise StoreError(f"cannot write the results database: {exc}", self.path) from exc
        try:
            out = fn(conn)
            conn.execute("COMMIT")
            return out
        except BaseException as exc:
            conn.execute("ROLLBACK")
            self._defs.clear()
            if isinstance(exc, sqlite3.Error):
                raise StoreError(f"cannot write the results database: {exc}", self.path) from exc
            raise

    # ------------------------------------------------------------------ writes

    def begin_run(self, record: UnitRecord) -> None:
        """Insert the run as incomplete (nothing happens if the run is already there)."""
        hazards, expired, unattended = _flags(record)
        row = (record.run_id, record.serial, record.plan_id, record.plan_version, record.plan_hash,
               record.product, record.station_id, record.operator, record.lot, record.started,
               parse_time(record.started), record.decision_rule, record.software_version,
               hazards, expired, unattended)
        self._write(lambda c: c.execute(
            "INSERT OR IGNORE INTO runs (run_id, serial, plan_id, plan_version, plan_hash, product,"
            " station_id, operator, lot, started, started_epoch, decision_rule, software_version,"
            " accept_hazards, allow_expired_calibration, unattended)"
            " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", row))

    def finish_run(self, record: UnitRecord, report_path: str | os.PathLike[str] | None) -> None:
        """Complete the run: verdict, reason, end time, flags, and one row per check.

        A run that was never begun is inserted here; finishing twice replaces the checks.
        """
        self.begin_run(record)
        hazards, expired, unattended = _flags(record)
        report = None if report_path is None else str(report_path)
        epoch = parse_time(record.started)

        def work(c: sqlite3.Connection) -> None:
            pk = c.execute("SELECT id FROM runs WHERE run_id = ?", (record.run_id,)).fetchone()[0]
            c.execute(
                "UPDATE runs SET complete = 1, verdict = ?, reason = ?, ended = ?, accept_hazards = ?,"
                " allow_expired_calibration = ?, unattended = ?, report_path = ?, operator = ?,"
                " lot = ?, cut_short = ? WHERE id = ?",
                (record.verdict.value, record.reason, record.ended, hazards, expired, unattended,
                 report, record.operator, record.lot, cut_short(record), pk))
            c.execute("DELETE FROM checks WHERE run = ?", (pk,))
            rows = []
            for seq, check in enumerate(record.checks()):
                w = check.window
                d = self._def_id(c, record.plan_id, check.step_id, check.measurement, w.unit,
                                 _finite(w.low), _finite(w.high))
                m = check.result
                valid = m is not None and m.valid
                value = None if m is None else _finite(m.value)
                u = None if m is None else _finite(m.uncertainty)
                rows.append((pk, seq, d, record.lot, epoch, value, u, int(valid),
                             check.verdict.value, check.reason))
            # lot and start time are copied from the run so summaries filter without a join
            c.executemany(
                "INSERT INTO checks (run, seq, def, lot, started_epoch, value, uncertainty, valid,"
                " verdict, reason) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)

        self._write(work)

    def _def_id(self, c: sqlite3.Connection, plan_id: str, step: str, measurement: str, unit: str,
                low: float | None, high: float | None) -> int:
        key = (plan_id, step, measurement, unit, low, high)
        if key in self._defs:
            return self._defs[key]
        row = c.execute(
            "SELECT id FROM check_defs WHERE plan_id = ? AND step = ? AND measurement = ?"
            " AND unit = ? AND low IS ? AND high IS ?", key).fetchone()
        if row is None:
            cur = c.execute("INSERT INTO check_defs (plan_id, step, measurement, unit, low, high)"
                            " VALUES (?, ?, ?, ?, ?, ?)", key)
            def_id = int(cur.lastrowid)
        else:
            def_id = int(row[0])
        self._defs[key] = def_id  # forgotten again if the transaction rolls back (see _write)
        return def_id

    # ------------------------------------------------------------------ reads

    def history(self, serial: str) -> list[HistoryRun]:
        """Every run of ``serial``, newest first (incomplete runs included, marked as such)."""
        from benchgate.store.queries import history

        return history(self._conn, serial)

    def summary(self, plan: str | None = None, lot: str | None = None,
                since: str | None = None) -> Summary:
        """Lot statistics over the runs selected by plan id, lot and start time."""
        from benchgate.store.queries import summary

        return summary(self._conn, plan=plan, lot=lot, since=since)
