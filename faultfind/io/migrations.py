"""Schema of the measurement logbook (SQLite) and the migrations that build it.

The schema is built by a fixed list of named migrations, oldest first.  Each
is applied inside its own ``BEGIN IMMEDIATE ... COMMIT`` transaction together
with a row in the ``migrations`` table (its name and the time it was applied)
and ``PRAGMA user_version`` set to its number, so a logbook is always at one
whole schema version: a migration that fails, or a process killed while it
runs, leaves the file as it was before that migration.

Rules for whoever adds a migration (docs/logbook.md, "Schema history"):

* never edit or reorder a migration that has shipped; add a new one at the
  end of :data:`MIGRATIONS`;
* statements only (no ``executescript``: it would commit behind the runner's
  back) and nothing that needs to run outside a transaction (``VACUUM``);
* extend tests/test_logbook_durability.py's per-version fixture so that the
  migration from every earlier version is tested with data in it.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone

from faultfind.io.circuit_versions import MIGRATION_0006

__all__ = ["Migration", "MIGRATIONS", "LATEST_VERSION", "APPLICATION_ID", "schema_version",
           "application_id", "pending", "migrate"]

#: ``PRAGMA application_id`` of a faultfind logbook: the ASCII bytes "FfLb".  SQLite
#: reserves this header field for an application to mark its files (sqlite.org,
#: "Database File Format", section 1.3.15, from memory).
APPLICATION_ID = 0x46664C62


@dataclass(frozen=True)
class Migration:
    """One step of the schema.

    Attributes
    ----------
    version : int
        The schema version the logbook is at after this step (1, 2, ...).
    name : str
        Stable name recorded in the ``migrations`` table, ``NNNN_words``.
    statements : tuple of str
        SQL statements run in order inside the step's transaction.
    summary : str
        One line on what the step adds, for docs and messages.
    """

    version: int
    name: str
    statements: tuple[str, ...]
    summary: str


_INITIAL = (
    """CREATE TABLE migrations (
        version    INTEGER PRIMARY KEY,
        name       TEXT NOT NULL UNIQUE,
        applied_at TEXT NOT NULL
    )""",
    """CREATE TABLE sessions (
        id                      INTEGER PRIMARY KEY AUTOINCREMENT,
        unit                    TEXT NOT NULL CHECK (length(trim(unit)) > 0),
        location                TEXT NOT NULL DEFAULT '',
        technician              TEXT NOT NULL DEFAULT '',
        purpose                 TEXT NOT NULL
                                CHECK (purpose IN ('repair', 'commissioning', 'training')),
        started_at              TEXT NOT NULL,
        ended_at                TEXT,
        circuit_name            TEXT NOT NULL,
        circuit_title           TEXT NOT NULL DEFAULT '',
        circuit_text            TEXT NOT NULL,
        circuit_sha256          TEXT NOT NULL,
        meters_name             TEXT,
        meters_text             TEXT,
        caution_acknowledged_at TEXT
    )""",
    "CREATE INDEX sessions_by_unit ON sessions (unit COLLATE NOCASE, started_at)",
    "CREATE INDEX sessions_by_technician ON sessions (technician COLLATE NOCASE, started_at)",
    "CREATE INDEX sessions_by_start ON sessions (started_at)",
    """CREATE TABLE readings (
        id         INTEGER PRIMARY KEY AUTOINCREMENT,
        session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        seq        INTEGER NOT NULL CHECK (seq >= 1),
        taken_at   TEXT NOT NULL,
        quantity   TEXT NOT NULL CHECK (quantity IN ('voltage', 'current', 'resistance')),
        mode       TEXT,
        plus       TEXT,
        minus      TEXT,
        part       TEXT,
        setup      TEXT,
        frequency  REAL,
        meter      TEXT,
        label      TEXT NOT NULL DEFAULT '',
        raw        TEXT NOT NULL,
        value      REAL,
        overrange  INTEGER NOT NULL DEFAULT 0 CHECK (overrange IN (-1, 0, 1)),
        origin     TEXT NOT NULL DEFAULT '',
        UNIQUE (session_id, seq)
    )""",
    """CREATE TABLE diagnoses (
        id            INTEGER PRIMARY KEY AUTOINCREMENT,
        session_id    INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        created_at    TEXT NOT NULL,
        reading_count INTEGER NOT NULL,
        last_seq      INTEGER NOT NULL,
        verdict       TEXT NOT NULL,
        version       TEXT NOT NULL,
        document      TEXT NOT NULL
    )""",
    "CREATE INDEX diagnoses_by_session ON diagnoses (session_id, id)",
    """CREATE TABLE outcomes (
        session_id   INTEGER PRIMARY KEY REFERENCES sessions (id) ON DELETE CASCADE,
        recorded_at  TEXT NOT NULL,
        confirmed_by TEXT NOT NULL DEFAULT '',
        action       TEXT NOT NULL DEFAULT '',
        notes        TEXT NOT NULL DEFAULT ''
    )""",
    """CREATE TABLE outcome_faults (
        session_id INTEGER NOT NULL REFERENCES outcomes (session_id) ON DELETE CASCADE,
        ref        TEXT NOT NULL,
        mode       TEXT,
        PRIMARY KEY (session_id, ref)
    )""",
    f"PRAGMA application_id = {APPLICATION_ID}",
)

_STRIKE_OUT = (
    "ALTER TABLE readings ADD COLUMN struck_at TEXT",
    "ALTER TABLE readings ADD COLUMN struck_reason TEXT NOT NULL DEFAULT ''",
    # A reading is evidence: once stored only its strike-out may change.
    """CREATE TRIGGER readings_are_kept
        BEFORE UPDATE OF session_id, seq, taken_at, quantity, mode, plus, minus, part, setup,
                         frequency, meter, label, raw, value, overrange, origin ON readings
        BEGIN
            SELECT RAISE(ABORT, 'a stored reading is never changed: strike it out instead');
        END""",
)

_DRILLS = (
    # One row per finished drill (faultfind/drill.py): who, on which board, the hidden fault,
    # the verdict and its score.  ``document`` is the drill's whole JSON result (transcript,
    # score breakdown, explanation).
    """CREATE TABLE drills (
        id              INTEGER PRIMARY KEY AUTOINCREMENT,
        apprentice      TEXT NOT NULL CHECK (length(trim(apprentice)) > 0),
        started_at      TEXT NOT NULL,
        finished_at     TEXT NOT NULL,
        circuit_name    TEXT NOT NULL,
        circuit_title   TEXT NOT NULL DEFAULT '',
        seed            INTEGER NOT NULL,
        fault_ref       TEXT,
        fault_mode      TEXT,
        fault_value     REAL,
        verdict_ref     TEXT,
        verdict_mode    TEXT,
        verdict_value   REAL,
        correct         INTEGER NOT NULL CHECK (correct IN (0, 1)),
        readings        INTEGER NOT NULL CHECK (readings >= 0),
        effort          REAL NOT NULL CHECK (effort >= 0),
        advice_readings INTEGER NOT NULL CHECK (advice_readings >= 0),
        advice_effort   REAL NOT NULL CHECK (advice_effort >= 0),
        safety_errors   INTEGER NOT NULL CHECK (safety_errors >= 0),
        hints           INTEGER NOT NULL CHECK (hints >= 0),
        score           INTEGER NOT NULL CHECK (score BETWEEN 0 AND 100),
        version         TEXT NOT NULL,
        document        TEXT NOT NULL
    )""",
    "CREATE INDEX drills_by_apprentice ON drills (apprentice COLLATE NOCASE, finished_at)",
)

_EVENTS = (
    # Steps of a session that are not readings: the circuit declared isolated or live
    # again (the UI's power state), and free notes.
    """CREATE TABLE events (
        id          INTEGER PRIMARY KEY AUTOINCREMENT,
        session_id  INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        at          TEXT NOT NULL,
        kind        TEXT NOT NULL CHECK (kind IN ('isolated', 'energized', 'note')),
        text        TEXT NOT NULL DEFAULT ''
    )""",
    "CREATE INDEX events_by_session ON events (session_id, at)",
)

_SESSION_TAGS = (
    # Free tags on a session: the site or unit family it belongs to, for learning fault
    # priors from one site's outcomes (faultfind/io/session_tags.py, docs/priors.md).
    # Compared ignoring ASCII case.
    """CREATE TABLE session_tags (
        session_id  INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        tag         TEXT NOT NULL COLLATE NOCASE CHECK (length(trim(tag)) > 0),
        PRIMARY KEY (session_id, tag)
    )""",
    "CREATE INDEX session_tags_by_tag ON session_tags (tag, session_id)",
)

# The readings table's columns after 0002, in their order on disk.
_READING_COLUMNS = ("id, session_id, seq, taken_at, quantity, mode, plus, minus, part, setup, "
                    "frequency, meter, label, raw, value, overrange, origin, struck_at, "
                    "struck_reason")

_DIODE_TEST = (
    # The meter's diode test (formats.md section 4) is a fourth quantity.  SQLite cannot
    # change a CHECK constraint in place, so the readings table is built anew with the
    # wider one, every row copied as it is (ids, sequence numbers, strike-outs), the
    # AUTOINCREMENT high-water mark kept (an id is never handed out twice), and the
    # trigger that keeps stored readings unchanged made again.  Nothing refers to
    # readings, so dropping the old table touches no other row.
    """CREATE TABLE readings_0007 (
        id            INTEGER PRIMARY KEY AUTOINCREMENT,
        session_id    INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        seq           INTEGER NOT NULL CHECK (seq >= 1),
        taken_at      TEXT NOT NULL,
        quantity      TEXT NOT NULL
                      CHECK (quantity IN ('voltage', 'current', 'resistance', 'diode-test')),
        mode          TEXT,
        plus          TEXT,
        minus         TEXT,
        part          TEXT,
        setup         TEXT,
        frequency     REAL,
        meter         TEXT,
        label         TEXT NOT NULL DEFAULT '',
        raw           TEXT NOT NULL,
        value         REAL,
        overrange     INTEGER NOT NULL DEFAULT 0 CHECK (overrange IN (-1, 0, 1)),
        origin        TEXT NOT NULL DEFAULT '',
        struck_at     TEXT,
        struck_reason TEXT NOT NULL DEFAULT '',
        UNIQUE (session_id, seq)
    )""",
    f"INSERT INTO readings_0007 ({_READING_COLUMNS}) SELECT {_READING_COLUMNS} FROM readings",
    "INSERT INTO sqlite_sequence (name, seq) SELECT 'readings_0007', 0 WHERE NOT EXISTS "
    "(SELECT 1 FROM sqlite_sequence WHERE name = 'readings_0007')",
    "UPDATE sqlite_sequence SET seq = max(seq, coalesce((SELECT s.seq FROM sqlite_sequence s "
    "WHERE s.name = 'readings'), 0)) WHERE name = 'readings_0007'",
    "DROP TABLE readings",
    "ALTER TABLE readings_0007 RENAME TO readings",
    _STRIKE_OUT[2],
)

#: Every migration, oldest first; ``MIGRATIONS[i].version == i + 1``.
MIGRATIONS: tuple[Migration, ...] = (
    Migration(1, "0001_initial", _INITIAL,
              "sessions, readings, diagnosis snapshots and outcomes"),
    Migration(2, "0002_strike_out_readings", _STRIKE_OUT,
              "readings can be struck out with a reason, never changed or removed"),
    Migration(3, "0003_drills", _DRILLS,
              "drill results per apprentice: hidden fault, verdict, score and transcript"),
    Migration(4, "0004_session_events", _EVENTS,
              "session events: circuit isolated or energized, notes"),
    Migration(5, "0005_session_tags", _SESSION_TAGS,
              "session tags: the site or unit family a session belongs to"),
    Migration(6, "0006_circuit_versions", MIGRATION_0006,
              "versions of a session's circuit; the circuit version of each diagnosis"),
    Migration(7, "0007_diode_test_readings", _DIODE_TEST,
              "diode-test readings (the readings table rebuilt with the wider quantity check)"),
)

#: The schema version this faultfind writes.
LATEST_VERSION = MIGRATIONS[-1].version


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def _check_conn(conn) -> sqlite3.Connection:
    if not isinstance(conn, sqlite3.Connection):
        raise TypeError(f"conn must be a sqlite3.Connection, not {type(conn).__name__}")
    return conn


def schema_version(conn) -> int:
    """The logbook's schema version (``PRAGMA user_version``; 0 for a new file).

    Parameters
    ----------
    conn : sqlite3.Connection

    Returns
    -------
    int
    """
    return int(_check_conn(conn).execute("PRAGMA user_version").fetchone()[0])


def application_id(conn) -> int:
    """The file's ``PRAGMA application_id`` (:data:`APPLICATION_ID` for a logbook)."""
    return int(_check_conn(conn).execute("PRAGMA application_id").fetchone()[0])


def pending(conn) -> list[Migration]:
    """Migrations not yet applied to ``conn``'s database, oldest first.

    Parameters
    ----------
    conn : sqlite3.Connection

    Returns
    -------
    list of Migration
        Empty when the file is up to date, and also when it is *newer* than
        this faultfind (the caller must check for that: see :func:`migrate`).
    """
    version = schema_version(conn)
    return [m for m in MIGRATIONS if m.version > version]


def migrate(conn, *, target=None) -> list[str]:
    """Bring a logbook's schema up to ``target``, one transaction per migration.

    Parameters
    ----------
    conn : sqlite3.Connection
        A connection in autocommit mode (``isolation_level=None``) with no
        transaction open.
    target : int, optional
        Version to stop at (default: :data:`LATEST_VERSION`).  Tests use it to
        build a logbook as an earlier faultfind left it.

    Returns
    -------
    list of str
        Names of the migrations applied, in order (empty when none was due).

    Raises
    ------
    ValueError
        ``target`` is not between 0 and :data:`LATEST_VERSION`, the connection
        is not in autocommit mode or has a transaction open, or the file's
        schema is newer than :data:`LATEST_VERSION` (the caller should have
        refused it; nothing is written).
    sqlite3.Error
        From SQLite (locked, read-only, corrupt); the migration that failed is
        rolled back and the ones before it stay applied.

    Notes
    -----
    Each step re-reads ``user_version`` after taking the write lock, so two
    processes opening a new logbook at once apply each migration once.
    """
    conn = _check_conn(conn)
    if target is None:
        target = LATEST_VERSION
    if isinstance(target, bool) or not isinstance(target, int) or not 0 <= target <= LATEST_VERSION:
        raise ValueError(f"target must be an int from 0 to {LATEST_VERSION}, got {target!r}")
    if conn.isolation_level is not None:
        raise ValueError("conn must be in autocommit mode (isolation_level=None)")
    if conn.in_transaction:
        raise ValueError("conn has a transaction open")
    applied = []
    for m in MIGRATIONS[:target]:
        conn.execute("BEGIN IMMEDIATE")
        try:
            version = schema_version(conn)
            if version > LATEST_VERSION:
                raise ValueError(f"the logbook's schema version {version} is newer than "
                                 f"{LATEST_VERSION}, the newest this faultfind knows")
            if version >= m.version:
                conn.execute("ROLLBACK")
                continue
            for statement in m.statements:
                conn.execute(statement)
            conn.execute("INSERT INTO migrations (version, name, applied_at) VALUES (?, ?, ?)",
                         (m.version, m.name, _now()))
            conn.execute(f"PRAGMA user_version = {int(m.version)}")
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")
        applied.append(m.name)
    return applied
