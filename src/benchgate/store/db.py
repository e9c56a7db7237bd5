"""The results database: one row per run, one row per check, in SQLite or PostgreSQL.

A run is inserted, marked incomplete, when it starts (:meth:`ResultsDB.begin_run`) and
completed when it ends (:meth:`ResultsDB.finish_run`), so a crashed run stays visible as
incomplete instead of going missing. A SQLite file is opened in WAL mode with a busy timeout so
that two stations on one machine can write to it at the same time; a PostgreSQL database takes
any number of stations. Every statement is parameterised. The schema and its migrations are in
:mod:`.schema`; the differences between the back ends in :mod:`.backend`.
"""

from __future__ import annotations

import hashlib
import math
import os
from collections.abc import Callable, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from benchgate.errors import StoreError
from benchgate.store import rollup
from benchgate.store.backend import (
    LOCK_DEFS,
    Conn,
    PostgresConn,
    SQLiteConn,
    is_url,
)
from benchgate.store.outcome import cut_short
from benchgate.store.schema import MIGRATIONS, SCHEMA_VERSION, migrate, schema_version

if TYPE_CHECKING:
    from benchgate.record import UnitRecord
    from benchgate.store.queries import HistoryRun, Summary

__all__ = ["MIGRATIONS", "SCHEMA_VERSION", "ResultsDB", "migrate", "schema_version",
           "parse_time", "RUN_COLUMNS"]

#: the columns of a run that travel with it from a station to a central database
RUN_COLUMNS = ("run_id", "serial", "plan_id", "plan_version", "plan_hash", "product", "station_id",
               "operator", "lot", "started", "started_epoch", "ended", "complete", "verdict",
               "reason", "decision_rule", "software_version", "accept_hazards",
               "allow_expired_calibration", "unattended", "report_path", "cut_short",
               "report_sha256", "report_file")
#: the columns of a check that travel with it (its definition as values, not as an id)
CHECK_COLUMNS = ("seq", "plan_id", "step", "measurement", "unit", "low", "high", "value",
                 "uncertainty", "valid", "verdict", "reason", "risk", "record_seconds")


# --------------------------------------------------------------------------- helpers

def parse_time(text: str) -> float:
    """Seconds since the epoch for an ISO 8601 time; a time without zone is taken as UTC."""
    try:
        t = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except (TypeError, ValueError, AttributeError):
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


def file_sha256(path: str | os.PathLike[str] | None) -> str | None:
    """SHA-256 of a report file, or None when there is no such file."""
    if path is None:
        return None
    try:
        h = hashlib.sha256()
        with open(path, "rb") as f:
            for block in iter(lambda: f.read(1 << 20), b""):
                h.update(block)
        return h.hexdigest()
    except (OSError, ValueError):  # no such file, or not a usable path
        return None


# --------------------------------------------------------------------------- database

class ResultsDB:
    """A results database. Use :meth:`open`; close with :meth:`close` or ``with``."""

    def __init__(self, conn: Conn):
        self.conn = conn
        self.path = conn.where  # what messages show: a file path, or a URL without password
        # the station's report folder: a report inside it is also stored by its path relative
        # to it (report_file), which is what a central user asks for (set by open_results)
        self.reports_dir: Path | None = None
        self._defs: dict[tuple[Any, ...], int] = {}

    @classmethod
    def open(cls, target: str | os.PathLike[str], *, create: bool = True,
             connect_timeout: float | None = None) -> ResultsDB:
        """Open (creating and migrating when needed) the database at ``target``: a file path
        (SQLite) or a ``postgresql://`` URL.

        With ``create=False`` a missing file, or a PostgreSQL database without the schema, is a
        :class:`StoreError` instead of a new database.
        """
        if is_url(target):
            kw = {} if connect_timeout is None else {"connect_timeout": connect_timeout}
            conn: Conn = PostgresConn.open(str(target), **kw)
        else:
            conn = SQLiteConn.open(target, create=create)
        try:
            if not create and conn.dialect == "postgresql" and not conn.table_exists("schema_version"):
                raise StoreError("no benchgate results in this database yet (run a plan with it, "
                                 "or send a station's runs with 'benchgate sync')", conn.where)
            migrate(conn)
        except conn.errors as exc:
            conn.close()
            raise conn.fail("not a usable results database", exc) from None
        except BaseException:
            conn.close()
            raise
        return cls(conn)

    # context manager
    def __enter__(self) -> ResultsDB:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        self.conn.close()

    @property
    def connection(self) -> Any:
        """The driver's own connection (``sqlite3`` or ``psycopg``), for tests and tools."""
        return self.conn.raw

    @property
    def dialect(self) -> str:
        return self.conn.dialect

    @property
    def version(self) -> int:
        return schema_version(self.conn)

    def _write(self, fn: Callable[[Conn], Any]) -> Any:
        conn = self.conn
        try:
            conn.begin_write()
        except conn.errors as exc:
            raise conn.fail("cannot write the results database", exc) from None
        try:
            out = fn(conn)
            conn.commit()
            return out
        except BaseException as exc:
            conn.rollback()
            self._defs.clear()
            if isinstance(exc, conn.errors):
                raise conn.fail("cannot write the results database", exc) from None
            raise

    def read(self, fn: Callable[[Conn], Any]) -> Any:
        """Run the queries of ``fn`` on one snapshot of the database."""
        conn = self.conn
        try:
            conn.begin_read()
            try:
                return fn(conn)
            finally:
                conn.rollback()
        except conn.errors as exc:
            raise conn.fail("cannot read the results database", exc) from None

    # ------------------------------------------------------------------ writes

    def begin_run(self, record: UnitRecord) -> None:
        """Insert the run as incomplete (nothing happens if the run is already there)."""
        hazards, expired, unattended = _flags(record)
        row = (record.run_id, record.serial, record.plan_id, record.plan_version, record.plan_hash,
               record.product, record.station_id, record.operator, record.lot, record.started,
               parse_time(record.started), record.decision_rule, record.software_version,
               hazards, expired, unattended)

        def work(c: Conn) -> None:
            was = rollup.before(c, [(record.plan_id, record.serial)])
            if c.execute(
                    "INSERT INTO runs (run_id, serial, plan_id, plan_version, plan_hash, product,"
                    " station_id, operator, lot, started, started_epoch, decision_rule,"
                    " software_version, accept_hazards, allow_expired_calibration, unattended)"
                    " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)"
                    " ON CONFLICT (run_id) DO NOTHING RETURNING id", row).fetchone() is not None:
                rollup.after(c, was)  # a new attempt of the unit

        self._write(work)

    def finish_run(self, record: UnitRecord, report_path: str | os.PathLike[str] | None) -> None:
        """Complete the run: verdict, reason, end time, flags, and one row per check.

        A run that was never begun is inserted here; finishing twice replaces the checks. The
        report's SHA-256 is stored beside its path, so the evidence can be verified later.
        """
        self.begin_run(record)
        hazards, expired, unattended = _flags(record)
        report = None if report_path is None else str(report_path)
        sha = file_sha256(report_path)
        from benchgate.store.evidence import relative_report

        rel = relative_report(report_path, self.reports_dir)
        epoch = parse_time(record.started)

        def work(c: Conn) -> None:
            pk, plan_id, serial = c.execute("SELECT id, plan_id, serial FROM runs WHERE run_id = ?",
                                            (record.run_id,)).fetchone()
            was = rollup.before(c, [(plan_id, serial)])
            c.execute(
                "UPDATE runs SET complete = 1, verdict = ?, reason = ?, ended = ?, accept_hazards = ?,"
                " allow_expired_calibration = ?, unattended = ?, report_path = ?, operator = ?,"
                " lot = ?, cut_short = ?, report_sha256 = ?, report_file = ?, sent = 0 WHERE id = ?",
                (record.verdict.value, record.reason, record.ended, hazards, expired, unattended,
                 report, record.operator, record.lot, cut_short(record), sha, rel, pk))
            rows = []
            lengths = {s.id: s.capture.samples / s.capture.sample_rate for s in record.steps
                       if s.capture is not None and s.capture.sample_rate > 0}
            for seq, check in enumerate(record.checks()):
                w = check.window
                m = check.result
                rows.append((seq, record.plan_id, check.step_id, check.measurement, w.unit,
                             _finite(w.low), _finite(w.high),
                             None if m is None else _finite(m.value),
                             None if m is None else _finite(m.uncertainty),
                             int(m is not None and m.valid), check.verdict.value, check.reason,
                             _finite(check.risk), lengths.get(check.step_id)))
            self._put_checks(c, pk, record.lot, epoch, rows)
            rollup.after(c, was)

        self._write(work)

    def _put_checks(self, c: Conn, pk: int, lot: str | None, epoch: float,
                    rows: Sequence[Sequence[Any]]) -> None:
        """Replace the run's checks by ``rows`` (:data:`CHECK_COLUMNS` order)."""
        c.execute("DELETE FROM checks WHERE run = ?", (pk,))
        out = []
        for row in rows:
            # rows from a station of schema 4 have no risk and record length: NULL
            seq, plan_id, step, meas, unit, low, high, value, u, valid, verdict, reason, risk, secs = (
                tuple(row) + (None, None))[:14]
            d = self._def_id(c, plan_id, step, meas, unit, low, high)
            # lot and start time are copied from the run so summaries filter without a join
            out.append((pk, seq, d, lot, epoch, value, u, int(valid), verdict, reason, risk, secs))
        if out:
            c.executemany(
                "INSERT INTO checks (run, seq, def, lot, started_epoch, value, uncertainty, valid,"
                " verdict, reason, risk, record_seconds) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                out)

    def _def_id(self, c: Conn, plan_id: str, step: str, measurement: str, unit: str,
                low: float | None, high: float | None) -> int:
        key = (plan_id, step, measurement, unit, low, high)
        if key in self._defs:
            return self._defs[key]
        find = ("SELECT id FROM check_defs WHERE plan_id = ? AND step = ? AND measurement = ?"
                f" AND unit = ? AND {c.same('low', '?')} AND {c.same('high', '?')}")
        row = c.execute(find, key).fetchone()
        if row is None and c.dialect == "postgresql":
            # stations insert definitions concurrently: one at a time, then look again
            c.execute("SELECT pg_advisory_xact_lock(?)", (LOCK_DEFS,))
            row = c.execute(find, key).fetchone()
        if row is None:
            row = c.execute("INSERT INTO check_defs (plan_id, step, measurement, unit, low, high,"
                            " bin_width) VALUES (?, ?, ?, ?, ?, ?, ?) RETURNING id",
                            key + (rollup.bin_width(low, high),)).fetchone()
        def_id = int(row[0])
        self._defs[key] = def_id  # forgotten again if the transaction rolls back (see _write)
        return def_id

    # ------------------------------------------------------------------ forwarding

    def pending(self, limit: int | None = None) -> list[tuple[str, int]]:
        """Runs whose latest state has not been sent to the central database, oldest first:
        (run id, state to send: 1 begun, 2 finished)."""
        sql = ("SELECT run_id, CASE WHEN complete = 1 THEN 2 ELSE 1 END FROM runs"
               " WHERE sent < CASE WHEN complete = 1 THEN 2 ELSE 1 END ORDER BY id")
        if limit is not None:
            sql += f" LIMIT {int(limit)}"
        return [(str(r), int(s)) for r, s in self.conn.execute(sql).fetchall()]

    def count_pending(self) -> int:
        return int(self.conn.execute(
            "SELECT COUNT(*) FROM runs WHERE sent < CASE WHEN complete = 1 THEN 2 ELSE 1 END"
        ).fetchone()[0])

    def export_runs(self, run_ids: Sequence[str]) -> list[tuple[dict[str, Any], list[tuple]]]:
        """The runs (as column dicts) with their checks (:data:`CHECK_COLUMNS` tuples)."""
        out = []
        cols = ", ".join(RUN_COLUMNS)
        for run_id in run_ids:
            row = self.conn.execute(f"SELECT id, {cols} FROM runs WHERE run_id = ?",
                                    (run_id,)).fetchone()
            if row is None:
                continue
            checks = self.conn.execute(
                "SELECT c.seq, d.plan_id, d.step, d.measurement, d.unit, d.low, d.high, c.value,"
                " c.uncertainty, c.valid, c.verdict, c.reason, c.risk, c.record_seconds FROM checks c"
                " JOIN check_defs d ON d.id = c.def WHERE c.run = ? ORDER BY c.seq",
                (row[0],)).fetchall()
            out.append((dict(zip(RUN_COLUMNS, row[1:], strict=True)), [tuple(x) for x in checks]))
        return out

    def import_runs(self, runs: Sequence[tuple[dict[str, Any], list[tuple]]]) -> int:
        """Store runs sent by a station, in one transaction; idempotent by run id.

        A finished run replaces what is stored (checks included); a begun-only run never
        overwrites a finished one. Returns the number of runs written.
        """
        cols = [c for c in RUN_COLUMNS if c != "run_id"]

        def work(c: Conn) -> int:
            n = 0
            was = rollup.before(c, [(run["plan_id"], run["serial"]) for run, _ in runs])
            for run, checks in runs:
                row = c.execute("INSERT INTO runs (run_id, serial, plan_id, plan_version, plan_hash,"
                                " started, started_epoch) VALUES (?, ?, ?, ?, ?, ?, ?)"
                                " ON CONFLICT (run_id) DO NOTHING RETURNING id, complete",
                                [run[k] for k in ("run_id", "serial", "plan_id", "plan_version",
                                                  "plan_hash", "started", "started_epoch")]
                                ).fetchone()
                if row is None:
                    row = c.execute("SELECT id, complete FROM runs WHERE run_id = ?",
                                    (run["run_id"],)).fetchone()
                pk, stored_complete = int(row[0]), int(row[1])
                if stored_complete and not run["complete"]:
                    continue  # the central copy is already finished: never go back
                c.execute(f"UPDATE runs SET {', '.join(f'{k} = ?' for k in cols)} WHERE id = ?",
                          [run[k] for k in cols] + [pk])
                if run["complete"]:
                    self._put_checks(c, pk, run["lot"], float(run["started_epoch"]), checks)
                n += 1
            rollup.after(c, was)
            return n

        return self._write(work)

    def mark_sent(self, sent: Sequence[tuple[str, int]]) -> None:
        """Record that these (run id, state) were stored centrally. A run finished meanwhile
        (state 1 sent, but complete now) stays pending."""
        self._write(lambda c: c.executemany(
            "UPDATE runs SET sent = ? WHERE run_id = ? AND complete = ? AND sent < ?",
            [(state, run_id, int(state == 2), state) for run_id, state in sent]))

    def mark_all_unsent(self) -> None:
        """Send everything again at the next sync (after pointing a station at a new server)."""
        self._write(lambda c: c.execute("UPDATE runs SET sent = 0"))

    # ------------------------------------------------------------------ reads

    def history(self, serial: str) -> list[HistoryRun]:
        """Every run of ``serial``, newest first (incomplete runs included, marked as such)."""
        from benchgate.store.queries import history

        return self.read(lambda c: history(c, serial))

    def summary(self, plan: str | None = None, lot: str | None = None,
                since: str | None = None) -> Summary:
        """Lot statistics over the runs selected by plan id, lot and start time."""
        from benchgate.store.queries import summary

        return self.read(lambda c: summary(c, plan=plan, lot=lot, since=since))

