"""The results database schema, the same on SQLite and PostgreSQL, and its migrations.

The version is kept in the ``schema_version`` table. Opening a database of an older version
migrates it forward in order (:data:`MIGRATIONS`); a version newer than this program knows is a
:class:`~benchgate.store.backend.StoreError`. ``{pk}`` and ``{real}`` in the texts are the only
words that differ between the back ends (see :mod:`benchgate.store.backend`).
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from benchgate.errors import StoreError
from benchgate.store.backend import LOCK_MIGRATE, wrap

_V1 = """
CREATE TABLE runs (
    id {pk},
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
    started_epoch {real} NOT NULL,
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
    id {pk},
    plan_id TEXT NOT NULL,
    step TEXT NOT NULL,
    measurement TEXT NOT NULL,
    unit TEXT NOT NULL,
    low {real},
    high {real}
);
CREATE TABLE checks (
    id {pk},
    run INTEGER NOT NULL REFERENCES runs(id) ON DELETE CASCADE,
    seq INTEGER NOT NULL,
    def INTEGER NOT NULL REFERENCES check_defs(id),
    lot TEXT,
    started_epoch {real} NOT NULL,
    value {real},
    uncertainty {real},
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

# forwarding to a central database (a station's local file is its queue) and report evidence
_V4 = """
ALTER TABLE runs ADD COLUMN sent INTEGER NOT NULL DEFAULT 0;
ALTER TABLE runs ADD COLUMN report_sha256 TEXT;
CREATE INDEX runs_unsent ON runs(sent, complete)
"""

# the specific risk of each check's decision (JCGM 106: probability of a false pass for a pass,
# of a false fail for a fail; NULL when not stated) and the length of the record it was judged
# on (s of capture; an adaptive capture stops early, so this varies between units)
_V5 = """
ALTER TABLE checks ADD COLUMN risk {real};
ALTER TABLE checks ADD COLUMN record_seconds {real}
"""

# where the evidence is, as a central user can ask for it: the report's path relative to the
# station's report folder (POSIX separators), beside report_sha256. report_path stays the path
# as the station wrote it (its own pages link from it); rows from before version 6 have only that
_V6 = """
ALTER TABLE runs ADD COLUMN report_file TEXT
"""

# what the lot summary needs, kept up to date at write time (store/rollup.py): each unit's
# standing per scope (all its runs; its runs in one lot) and the binned values of the latest
# complete runs, per UTC day of their start; each check definition's bin width. Filled from the
# existing rows (_v7)
_V7 = """
ALTER TABLE check_defs ADD COLUMN bin_width {real};
CREATE TABLE unit_state (
    whole INTEGER NOT NULL,
    lot TEXT NOT NULL,
    serial TEXT NOT NULL,
    plan_id TEXT NOT NULL,
    attempts INTEGER NOT NULL,
    done INTEGER NOT NULL,
    bad INTEGER NOT NULL,
    cut INTEGER NOT NULL,
    final INTEGER NOT NULL,
    latest BIGINT,
    last BIGINT,
    risk {real} NOT NULL,
    unstated INTEGER NOT NULL,
    latest_epoch {real},
    PRIMARY KEY (whole, lot, serial, plan_id)
);
CREATE INDEX unit_state_latest ON unit_state(latest);
CREATE INDEX unit_state_unit ON unit_state(serial, plan_id);
CREATE TABLE value_bins (
    whole INTEGER NOT NULL,
    lot TEXT NOT NULL,
    def BIGINT NOT NULL,
    bin {real} NOT NULL,
    day INTEGER NOT NULL,
    n INTEGER NOT NULL,
    s1 {real} NOT NULL,
    s2 {real} NOT NULL,
    vmin {real} NOT NULL,
    vmax {real} NOT NULL,
    PRIMARY KEY (whole, lot, def, bin, day)
);
CREATE INDEX runs_started ON runs(started_epoch);
CREATE INDEX runs_lot ON runs(lot, started_epoch)
"""


def _v7(conn: Any) -> None:
    from benchgate.store.rollup import rebuild

    conn.script(_V7)
    rebuild(conn)


#: ordered migrations: (version reached, SQL text, or a function of the connection, that gets
#: there from the version before). Released versions: 1 and 2 (SQLite only), 3 (cut_short);
#: 4 adds forwarding; 5 risk and record length per check; 6 the report's path relative to the
#: report folder; 7 the summary's maintained unit states and value bins.
MIGRATIONS: tuple[tuple[int, Any], ...] = (
    (1, _V1),
    (2, _V2),
    (3, _V3),
    (4, _V4),
    (5, _V5),
    (6, _V6),
    (7, _v7),
)
SCHEMA_VERSION = MIGRATIONS[-1][0]


def schema_version(conn: Any) -> int:
    """The schema version recorded in the database (0 for a new, empty one)."""
    conn = wrap(conn)
    if not conn.table_exists("schema_version"):
        return 0
    row = conn.execute("SELECT MAX(version) FROM schema_version").fetchone()
    return int(row[0] or 0)


def migrate(conn: Any, target: int = SCHEMA_VERSION) -> int:
    """Apply the migrations after the database's version up to ``target``, in one transaction
    (DDL is transactional on both back ends: a failed migration leaves the old version).

    Returns the version reached. Raises :class:`StoreError` for a database newer than this
    program. One migrator at a time: SQLite's write lock, PostgreSQL's advisory lock.
    """
    conn = wrap(conn)
    current = schema_version(conn)
    if current == min(target, SCHEMA_VERSION):
        return current  # up to date: no write lock taken (read-only users, many stations)
    conn.begin_write(lock=LOCK_MIGRATE)
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
                    conn.script(step)
                conn.execute("INSERT INTO schema_version (version, applied) VALUES (?, ?)",
                             (version, datetime.now(UTC).isoformat(timespec="seconds")))
                current = version
        conn.commit()
    except BaseException:
        conn.rollback()
        raise
    return current
