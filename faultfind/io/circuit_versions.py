"""Versions of a session's circuit in the logbook: edits during a session, and which
version each stored diagnosis used.

A session starts on the circuit file's text (version 1).  When the circuit is
edited while the session is open (the terminal UI's circuit editor),
:func:`revise_circuit` keeps the new text as the next version and makes it the
session's circuit; the readings already taken stay as they were and are
diagnosed again on it.  Every stored diagnosis records the SHA-256 of the
circuit text it ran on and that version's number (migration 0006), so an old
diagnosis is always shown with the circuit it was made on, never silently
re-read against a later one (:func:`diagnosis_circuit`).
"""

from __future__ import annotations

import csv
import hashlib
import io
from dataclasses import dataclass
from datetime import datetime, timezone

from faultfind.errors import CircuitError, LogbookError, ReadingsError
from faultfind.io.circuit_file import parse_circuit
from faultfind.io.readings_file import COLUMNS, parse_readings, reading_to_row

__all__ = ["MIGRATION_0006", "CircuitVersion", "circuit_sha256", "circuit_versions",
           "current_version", "revise_circuit", "used_version", "diagnosis_circuit", "version_label",
           "check_readings_fit"]

#: Statements of migration 0006 (io/migrations.py): the table of versions, version 1
#: of every session filled in from the session's text, a trigger that records
#: version 1 of each new session, and the circuit of each stored diagnosis.
MIGRATION_0006 = (
    """CREATE TABLE circuit_versions (
        session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        version    INTEGER NOT NULL CHECK (version >= 1),
        created_at TEXT NOT NULL,
        sha256     TEXT NOT NULL,
        title      TEXT NOT NULL DEFAULT '',
        text       TEXT NOT NULL,
        reason     TEXT NOT NULL DEFAULT '',
        PRIMARY KEY (session_id, version)
    )""",
    "INSERT INTO circuit_versions (session_id, version, created_at, sha256, title, text, reason) "
    "SELECT id, 1, started_at, circuit_sha256, circuit_title, circuit_text, 'session started' "
    "FROM sessions",
    """CREATE TRIGGER sessions_first_circuit_version AFTER INSERT ON sessions
        BEGIN
            INSERT INTO circuit_versions (session_id, version, created_at, sha256, title, text,
                                          reason)
            VALUES (NEW.id, 1, NEW.started_at, NEW.circuit_sha256, NEW.circuit_title,
                    NEW.circuit_text, 'session started');
        END""",
    # A version is kept as it was made.
    """CREATE TRIGGER circuit_versions_are_kept BEFORE UPDATE ON circuit_versions
        BEGIN
            SELECT RAISE(ABORT, 'a stored circuit version is never changed');
        END""",
    "ALTER TABLE diagnoses ADD COLUMN circuit_sha256 TEXT",
    "ALTER TABLE diagnoses ADD COLUMN circuit_version INTEGER",
    # Before 0006 a session's circuit never changed: its diagnoses used version 1.
    "UPDATE diagnoses SET circuit_version = 1, circuit_sha256 = "
    "(SELECT s.circuit_sha256 FROM sessions s WHERE s.id = diagnoses.session_id)",
)


@dataclass(frozen=True)
class CircuitVersion:
    """One version of a session's circuit.

    Attributes
    ----------
    version : int
        1 for the circuit the session started on, then 2, 3, ...
    created_at : str
        ISO 8601, UTC.
    sha256 : str
        SHA-256 (hex) of ``text`` as UTF-8 (:func:`circuit_sha256`).
    title : str
    text : str
        The circuit file's text.
    reason : str
        Why it was made (``"session started"``, ``"edited in the terminal UI"``).
    """

    version: int
    created_at: str
    sha256: str
    title: str
    text: str
    reason: str = ""

    @property
    def short(self) -> str:
        """``v2 · 3f2a9c1e``: the number and the hash's first 8 digits."""
        return version_label(self.version, self.sha256)

    def to_json(self) -> dict:
        return dict(version=self.version, created_at=self.created_at, sha256=self.sha256,
                    title=self.title, reason=self.reason)


def version_label(version, sha256) -> str:
    """``"v2 · 3f2a9c1e"`` (``"?"`` for what is not known)."""
    v = f"v{version}" if version is not None else "v?"
    return f"{v} · {sha256[:8]}" if sha256 else v


def circuit_sha256(text: str) -> str:
    """The SHA-256 (hex) of a circuit text as UTF-8: the logbook's content hash."""
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def _session_id(session_id) -> int:
    if isinstance(session_id, bool) or not isinstance(session_id, int) or session_id < 1:
        raise LogbookError(f"a session is a number >= 1, got {session_id!r}", key="session")
    return session_id


def used_version(conn, session_id: int, sha256: str) -> int | None:
    """The newest version of a session's circuit with this hash (inside the caller's
    transaction; None when no version has it)."""
    row = conn.execute("SELECT max(version) FROM circuit_versions WHERE session_id = ? AND "
                       "sha256 = ?", (session_id, sha256)).fetchone()
    return None if row is None else row[0]


def circuit_versions(book, session_id) -> list[CircuitVersion]:
    """Every version of a session's circuit, oldest first.

    Parameters
    ----------
    book : faultfind.io.logbook.Logbook
    session_id : int

    Raises
    ------
    LogbookError
        No such session, or the logbook is closed.
    """
    sid = _session_id(session_id)
    with book._lock, book._guard():
        if book._conn is None:
            raise LogbookError("the logbook is closed", file=book.path)
        book._session_row(sid)
        rows = book._conn.execute(
            "SELECT version, created_at, sha256, title, text, reason FROM circuit_versions "
            "WHERE session_id = ? ORDER BY version", (sid,)).fetchall()
    return [CircuitVersion(*r) for r in rows]


def current_version(book, session_id) -> CircuitVersion:
    """The version the session is on now (the newest)."""
    return circuit_versions(book, session_id)[-1]


def check_readings_fit(circuit, readings, meters=None) -> None:
    """Check that readings taken on one version still fit another circuit.

    Parameters
    ----------
    circuit : faultfind.model.Circuit
        The edited circuit.
    readings : sequence of faultfind.io.logbook.LoggedReading
        The readings that count (struck-out ones need not fit).
    meters : dict, optional
        The session's meter profiles.

    Raises
    ------
    CircuitError
        Naming the first reading (its number in the session) that names a
        node or part the circuit no longer has, and what to do.
    """
    if not readings:
        return
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for lr in readings:
        row = dict(reading_to_row(lr.reading), value=lr.reading.raw or "",
                   meter=lr.reading.meter or "", label="")
        w.writerow(["" if row.get(c) is None else row.get(c) for c in COLUMNS])
    try:
        parse_readings(buf.getvalue(), "<readings>", circuit, meters)
    except ReadingsError as exc:
        problems = getattr(exc, "problems", None) or [exc]
        p = problems[0]
        lr = readings[(p.line or 2) - 2]
        raise CircuitError(
            f"reading #{lr.seq} ({lr.reading.where()}) does not fit the edited "
            f"circuit: {p.message}. Keep what it names in the circuit, or strike the reading "
            "out first", part=lr.reading.part, key="readings") from None


def revise_circuit(book, session_id, text, *, reason="edited in the terminal UI",
                   name=None) -> CircuitVersion:
    """Make ``text`` the session's circuit, kept as its next version.

    Parameters
    ----------
    book : faultfind.io.logbook.Logbook
    session_id : int
        An open session.
    text : str
        The new circuit file's text (checked as ``faultfind check`` does).
    reason : str, optional
        Kept with the version.
    name : str, optional
        The file the edited circuit was also saved to: it becomes the
        session's ``circuit_name`` (shown by ``log show`` and the report), and
        the version's reason says so.  None: the name stays.

    Returns
    -------
    CircuitVersion
        The new version; the current one unchanged when ``text`` is the
        circuit the session is on already.

    Raises
    ------
    CircuitError
        ``text`` is not a valid circuit, or a reading that counts names a
        node or part it no longer has (nothing is changed).
    LogbookError
        No such session, it is closed, or the logbook cannot be written.
    """
    sid = _session_id(session_id)
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    if not isinstance(reason, str) or "\n" in reason:
        raise LogbookError("reason must be one line of text", key="reason")
    if name is not None and (not isinstance(name, str) or not name.strip() or "\n" in name):
        raise LogbookError("name must be a file name on one line", key="name")
    session = book.get_session(sid)
    if session.ended_at is not None:
        book._session_row(sid, open_only=True)  # raises the logbook's message
    circuit = parse_circuit(text, source=f"{session.circuit_name} (edited)")
    check_readings_fit(circuit, [lr for lr in session.readings if not lr.struck],
                       session.meters())
    sha = circuit_sha256(text)
    with book._lock, book._guard():
        if book._conn is None:
            raise LogbookError("the logbook is closed", file=book.path)
        with book._write() as c:
            row = book._session_row(sid, open_only=True)
            last = c.execute("SELECT version, created_at, sha256, title, text, reason FROM "
                             "circuit_versions WHERE session_id = ? ORDER BY version DESC "
                             "LIMIT 1", (sid,)).fetchone()
            renamed = name is not None and name != row["circuit_name"]
            if renamed:
                c.execute("UPDATE sessions SET circuit_name = ? WHERE id = ?", (name, sid))
                reason = f"{reason}, saved as {name}"
            if row["circuit_sha256"] == sha and last is not None and last[2] == sha:
                if renamed:
                    c.execute("INSERT INTO events (session_id, at, kind, text) VALUES "
                              "(?,?,?,?)", (sid, _now(), "note",
                                            f"circuit saved as {name} (unchanged)"))
                return CircuitVersion(*last)
            number = (last[0] if last else 1) + 1
            when = _now()
            c.execute("INSERT INTO circuit_versions (session_id, version, created_at, sha256, "
                      "title, text, reason) VALUES (?,?,?,?,?,?,?)",
                      (sid, number, when, sha, circuit.title, text, reason))
            c.execute("UPDATE sessions SET circuit_text = ?, circuit_sha256 = ?, "
                      "circuit_title = ? WHERE id = ?", (text, sha, circuit.title, sid))
            c.execute("INSERT INTO events (session_id, at, kind, text) VALUES (?,?,?,?)",
                      (sid, when, "note", f"circuit changed: version {number} "
                                          f"({sha[:8]}), {reason}"))
    return CircuitVersion(number, when, sha, circuit.title, text, reason)


def diagnosis_circuit(book, session_id, stored) -> tuple[CircuitVersion | None, bool]:
    """The circuit version a stored diagnosis ran on, and whether the circuit changed since.

    Parameters
    ----------
    book : faultfind.io.logbook.Logbook
    session_id : int
    stored : faultfind.io.logbook.StoredDiagnosis

    Returns
    -------
    (CircuitVersion or None, bool)
        The version (None when the logbook does not know it) and True when
        the session's circuit is another version now.
    """
    versions = circuit_versions(book, session_id)
    number = getattr(stored, "circuit_version", None)
    sha = getattr(stored, "circuit_sha256", None)
    used = next((v for v in versions if v.version == number), None)
    if used is None and sha:
        used = next((v for v in reversed(versions) if v.sha256 == sha), None)
    changed = used is None or used.sha256 != versions[-1].sha256
    return used, changed
