"""Sessions and their readings: start, caution, steps (events), add, import, strike out, delete."""

from __future__ import annotations

import csv
import hashlib
import io
import os
from dataclasses import replace

from faultfind.errors import CircuitError, InputError, LogbookError, MeterError, ReadingsError
from faultfind.io.circuit_file import parse_circuit
from faultfind.io.logbook.checks import _read_text, _text
from faultfind.io.logbook.connection import _locked
from faultfind.io.logbook.records import LoggedReading, Session, SessionSummary, _finite
from faultfind.io.logbook.times import _now, format_time, parse_time
from faultfind.io.meters_file import meters_with_default, parse_meters
from faultfind.io.readings_file import COLUMNS, load_readings, parse_readings, readings_to_frame
from faultfind.model import Reading

__all__ = ["SAFETY_CAUTION", "PURPOSES", "Sessions"]

#: What a session is for.
PURPOSES = ("repair", "commissioning", "training")

#: The safety caution shown before a session; ``start_session`` and
#: :meth:`Logbook.acknowledge_caution` record when it was acknowledged.
SAFETY_CAUTION = """\
Safety caution: read before taking readings.
- Readings with power on are live work. Use a meter and test leads rated for
  the measurement category (CAT II, III or IV) and voltage of every point you
  probe (IEC 61010-1), prove the meter on a known source, and follow your
  site's rules for live work.
- Before a resistance reading or a diode test, or before breaking a circuit
  to put the meter in series: isolate, lock out and tag out, then verify dead
  with a proven tester.
- Discharge stored energy first: capacitors, and anything a battery, UPS,
  spring or second supply keeps alive.
- faultfind is a decision aid. It works from the schematic you give it and
  does not know your site: local codes, the equipment maker's instructions
  and licensed practice come first."""


class Sessions:
    """The logbook's sessions and readings (a part of :class:`~faultfind.io.logbook.Logbook`)."""

    def _session_id(self, session_id) -> int:
        if isinstance(session_id, bool) or not isinstance(session_id, int) or session_id < 1:
            raise LogbookError(f"a session is a number >= 1, got {session_id!r}", key="session")
        return session_id

    def _session_row(self, sid, *, open_only=False):
        cur = self._conn.execute("SELECT * FROM sessions WHERE id = ?", (sid,))
        row = cur.fetchone()
        if row is None:
            raise LogbookError(f"there is no session {sid} in this logbook ('faultfind log "
                               "list' shows them)", file=self.path, key="session")
        row = dict(zip([d[0] for d in cur.description], row))
        if open_only and row["ended_at"] is not None:
            raise LogbookError(f"session {sid} was closed at {format_time(row['ended_at'])}; "
                               "a closed session is kept as it is: start a new session for "
                               "more work on this unit", file=self.path, key="session")
        return row

    def _parsed(self, sid, row):
        key = (sid, row["circuit_sha256"], row["meters_text"])
        if self._cache.get("key") != key:
            source = f"{row['circuit_name']} (stored in session {sid})"
            circuit = parse_circuit(row["circuit_text"], source=source)
            meters = meters_with_default(None if row["meters_text"] is None else parse_meters(
                row["meters_text"], source=f"{row['meters_name']} (stored in session {sid})"))
            self._cache = {"key": key, "value": (circuit, meters)}
        return self._cache["value"]

    @_locked
    def start_session(self, circuit, *, unit, technician="", location="", purpose="repair",
                      meters=None, circuit_text=None, meters_text=None,
                      caution_acknowledged=False, started_at=None) -> Session:
        """Start a session for a circuit; the circuit's text is stored with it.

        Parameters
        ----------
        circuit : str or os.PathLike
            The circuit file.  With ``circuit_text`` it is only the name kept.
        unit : str
            The unit or asset worked on (one line, required), e.g. ``"BP-2"``.
        technician, location : str, optional
            One line each.
        purpose : {"repair", "commissioning", "training"}, optional
        meters : str or os.PathLike, optional
            Meter profile file whose text is stored with the session.
        circuit_text, meters_text : str, optional
            The files' text when the caller has it already (the terminal UI).
        caution_acknowledged : bool, optional
            True records now as the time the safety caution was acknowledged.
        started_at : str or datetime, optional
            Default now.

        Returns
        -------
        Session

        Raises
        ------
        InputError
            A bad field (naming it), an unknown ``purpose``.
        CircuitError, MeterError
            The file is missing or not valid: no session is created.
        """
        unit = _text(unit, "unit", required=True)
        technician, location = _text(technician, "technician"), _text(location, "location")
        if purpose not in PURPOSES:
            raise InputError(f"unknown purpose {purpose!r}: one of {', '.join(PURPOSES)}",
                             key="purpose")
        if circuit_text is None:
            name, circuit_text = _read_text(circuit, "circuit", CircuitError)
        else:
            name = os.fspath(circuit) if isinstance(circuit, (str, os.PathLike)) else "<circuit>"
            if not isinstance(circuit_text, str):
                raise CircuitError("circuit_text must be text", key="circuit_text")
        parsed = parse_circuit(circuit_text, source=name)
        meters_name = None
        if meters is not None or meters_text is not None:
            if meters_text is None:
                meters_name, meters_text = _read_text(meters, "meter profile", MeterError)
            else:
                meters_name = os.fspath(meters) if meters is not None else "<meters>"
            parse_meters(meters_text, source=meters_name)
        start = _now() if started_at is None else parse_time(started_at, "started_at")
        ack = _now() if caution_acknowledged else None
        sha = hashlib.sha256(circuit_text.encode("utf-8")).hexdigest()
        with self._write() as c:
            cur = c.execute(
                "INSERT INTO sessions (unit, location, technician, purpose, started_at, "
                "circuit_name, circuit_title, circuit_text, circuit_sha256, meters_name, "
                "meters_text, caution_acknowledged_at) VALUES (?,?,?,?,?,?,?,?,?,?,?,?)",
                (unit, location, technician, purpose, start, name, parsed.title, circuit_text,
                 sha, meters_name, meters_text, ack))
            sid = cur.lastrowid
        return self.get_session(sid)

    @_locked
    def acknowledge_caution(self, session_id, *, at=None) -> str:
        """Record when the safety caution was acknowledged for a session.

        Parameters
        ----------
        session_id : int
        at : str or datetime, optional
            Default now.

        Returns
        -------
        str
            The recorded time; the first acknowledgement stands when the
            session already has one.

        Raises
        ------
        LogbookError
            No such session, or it is closed.
        """
        sid = self._session_id(session_id)
        when = _now() if at is None else parse_time(at, "at")
        with self._write() as c:
            row = self._session_row(sid, open_only=True)
            if row["caution_acknowledged_at"] is not None:
                return row["caution_acknowledged_at"]
            c.execute("UPDATE sessions SET caution_acknowledged_at = ? WHERE id = ?", (when, sid))
        return when

    # events

    EVENT_KINDS = ("isolated", "energized", "note")

    @_locked
    def add_event(self, session_id, kind, text="", *, at=None) -> str:
        """Record a step of an open session that is not a reading.

        Parameters
        ----------
        session_id : int
        kind : {"isolated", "energized", "note"}
            The circuit declared isolated (locked out, verified dead,
            discharged) or energized again, or a free note.
        text : str
        at : str or datetime, optional
            Default now.

        Returns
        -------
        str
            The recorded time.

        Raises
        ------
        LogbookError
            No such session, it is closed, or ``kind`` is unknown.
        """
        if kind not in self.EVENT_KINDS:
            raise LogbookError(f"event kind must be one of {', '.join(self.EVENT_KINDS)}, got {kind!r}",
                               file=str(self.path), key="kind")
        sid = self._session_id(session_id)
        when = _now() if at is None else parse_time(at, "at")
        with self._write() as c:
            self._session_row(sid, open_only=True)
            c.execute("INSERT INTO events (session_id, at, kind, text) VALUES (?, ?, ?, ?)",
                      (sid, when, kind, str(text)))
        return when

    @_locked
    def events(self, session_id) -> list[dict]:
        """The session's events, oldest first, as dicts (at, kind, text)."""
        sid = self._session_id(session_id)
        rows = self._conn.execute(
            "SELECT at, kind, text FROM events WHERE session_id = ? ORDER BY at, id", (sid,)).fetchall()
        return [{"at": r[0], "kind": r[1], "text": r[2]} for r in rows]

    # readings

    def _cells(self, reading, fields) -> dict:
        if reading is not None and fields:
            raise TypeError("give a reading or fields, not both")
        if isinstance(reading, Reading):
            frame = readings_to_frame([reading])
            return {c: str(v) for c, v in frame.iloc[0].items()}
        source = dict(reading) if reading is not None else dict(fields)
        cells = {}
        for key, value in source.items():
            k = str(key).strip().lower()
            if k not in COLUMNS:
                raise ReadingsError(f"unknown field {key!r}: the fields are "
                                    f"{', '.join(COLUMNS)}", key=str(key))
            if value is None:
                value = ""
            elif isinstance(value, (int, float)) and not isinstance(value, bool):
                value = repr(float(value)) if isinstance(value, float) else str(value)
            elif not isinstance(value, str):
                raise ReadingsError(f"must be text or a number, got {type(value).__name__}",
                                    key=k)
            if "\n" in value or "\r" in value:
                raise ReadingsError("must be one line of text", key=k)
            cells[k] = value
        return cells

    def _validate(self, sid, cells, circuit, meters) -> Reading:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(COLUMNS)
        w.writerow([cells.get(c, "") for c in COLUMNS])
        try:
            found = parse_readings(buf.getvalue(), f"session {sid}", circuit, meters)
        except ReadingsError as exc:
            problems = getattr(exc, "problems", None) or [exc]
            if len(problems) == 1:
                p = problems[0]
                err = ReadingsError(f"{p.message} (session {sid}: nothing was stored)", key=p.key)
            else:
                listing = "; ".join(f"{p.key}: {p.message}" if p.key else p.message
                                    for p in problems)
                err = ReadingsError(f"{len(problems)} problems: {listing} (session {sid}: "
                                    "nothing was stored)", key=problems[0].key)
            err.problems = [ReadingsError(p.message, key=p.key) for p in problems]
            raise err from None
        if not found:
            raise ReadingsError(f"no reading given: quantity and value are needed (session "
                                f"{sid}: nothing was stored)", key="quantity")
        return found[0]

    def _insert_reading(self, c, sid, rd, taken_at, origin):
        seq = c.execute("SELECT COALESCE(MAX(seq), 0) + 1 FROM readings WHERE session_id = ?",
                        (sid,)).fetchone()[0]
        c.execute("INSERT INTO readings (session_id, seq, taken_at, quantity, mode, plus, minus, "
                  "part, setup, frequency, meter, label, raw, value, overrange, origin) "
                  "VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                  (sid, seq, taken_at, rd.quantity, rd.mode, rd.plus, rd.minus, rd.part,
                   rd.setup, rd.frequency, rd.meter, rd.label, rd.raw, _finite(rd.value),
                   rd.overrange, origin))
        return LoggedReading(seq, taken_at, replace(rd, line=None), origin)

    @_locked
    def add_reading(self, session_id, reading=None, /, *, taken_at=None, origin="entered",
                    **fields) -> LoggedReading:
        """Validate one reading against the session's circuit and commit it.

        Parameters
        ----------
        session_id : int
        reading : mapping or Reading, optional
            The reading as readings-file cells (``{"quantity": "voltage",
            "plus": "TP1", "value": "11.91"}``) or a Reading.  Or give the
            cells as keyword ``fields`` instead: ``quantity, mode, plus,
            minus, part, setup, value, frequency, meter, label`` (formats.md
            section 2), text or numbers.
        taken_at : str or datetime, optional
            Default now.
        origin : str, optional
            Where the reading came from (``"entered"``, ``"ui"``, ...).

        Returns
        -------
        LoggedReading
            Returned only once the reading is committed to disk.

        Raises
        ------
        ReadingsError
            The reading is not valid for the session's circuit and meters:
            the message names the field (``key``) and says nothing was
            stored; ``problems`` lists each problem.
        LogbookError
            No such session, or it is closed.
        """
        sid = self._session_id(session_id)
        origin = _text(origin, "origin")
        cells = self._cells(reading, fields)
        row = self._session_row(sid, open_only=True)
        circuit, meters = self._parsed(sid, row)
        rd = self._validate(sid, cells, circuit, meters)
        when = _now() if taken_at is None else parse_time(taken_at, "taken_at")
        with self._write() as c:
            self._session_row(sid, open_only=True)  # still open under the lock
            return self._insert_reading(c, sid, rd, when, origin)

    @_locked
    def import_readings(self, session_id, path) -> list[LoggedReading]:
        """Add every reading of a readings file (CSV), all or none.

        Parameters
        ----------
        session_id : int
        path : str or os.PathLike
            A readings file (formats.md section 2); every row needs a value.

        Returns
        -------
        list of LoggedReading
            In file order, committed together in one transaction.

        Raises
        ------
        ReadingsError
            The file cannot be read or any row is not valid for the session's
            circuit (every bad row listed with its line): nothing is stored.
        LogbookError
            No such session, or it is closed.
        """
        sid = self._session_id(session_id)
        row = self._session_row(sid, open_only=True)
        circuit, meters = self._parsed(sid, row)
        found = load_readings(path, circuit, meters)
        name = os.path.basename(os.fspath(path))
        when = _now()
        with self._write() as c:
            self._session_row(sid, open_only=True)
            return [self._insert_reading(c, sid, rd, when, f"import {name} line {rd.line}")
                    for rd in found]

    @_locked
    def strike_reading(self, session_id, seq, reason) -> LoggedReading:
        """Strike out a reading (kept, but no longer counted), giving a reason.

        Parameters
        ----------
        session_id : int
        seq : int
            The reading's number in the session.
        reason : str
            Why, e.g. ``"probe on the wrong terminal"`` (required).

        Returns
        -------
        LoggedReading

        Raises
        ------
        LogbookError
            No such session or reading, the session is closed, or the reading
            is struck out already.
        InputError
            An empty reason.
        """
        sid = self._session_id(session_id)
        if isinstance(seq, bool) or not isinstance(seq, int) or seq < 1:
            raise LogbookError(f"a reading number is >= 1, got {seq!r}", key="reading")
        reason = _text(reason, "reason", required=True)
        with self._write() as c:
            self._session_row(sid, open_only=True)
            r = c.execute("SELECT struck_at FROM readings WHERE session_id = ? AND seq = ?",
                          (sid, seq)).fetchone()
            if r is None:
                raise LogbookError(f"session {sid} has no reading {seq}", file=self.path,
                                   key="reading")
            if r[0] is not None:
                raise LogbookError(f"reading {seq} of session {sid} was struck out at "
                                   f"{format_time(r[0])} already", file=self.path, key="reading")
            c.execute("UPDATE readings SET struck_at = ?, struck_reason = ? "
                      "WHERE session_id = ? AND seq = ?", (_now(), reason, sid, seq))
        return next(r for r in self._readings(sid) if r.seq == seq)

    # delete

    @_locked
    def delete_session(self, session_id) -> SessionSummary:
        """Delete a session and everything in it, for good (privacy requests).

        The deleted content is overwritten in the file (``secure_delete``) and
        the write-ahead log is emptied; copies made elsewhere (backups) are
        not touched.

        Returns
        -------
        SessionSummary
            What was deleted.

        Raises
        ------
        LogbookError
            No such session.
        """
        sid = self._session_id(session_id)
        self._session_row(sid)
        summary = self._summaries("WHERE s.id = ?", (sid,))[0]
        with self._write() as c:
            c.execute("DELETE FROM sessions WHERE id = ?", (sid,))
        self._cache = {}
        self._conn.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
        return summary
