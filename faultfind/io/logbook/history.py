"""Reading sessions back: one whole session, lists filtered by unit, technician and date."""

from __future__ import annotations

import json

from faultfind.io.logbook.checks import _text
from faultfind.io.logbook.connection import _locked
from faultfind.io.logbook.records import (LoggedReading, Outcome, Session, SessionSummary,
                                          StoredDiagnosis)
from faultfind.io.logbook.times import parse_time
from faultfind.model import Reading

__all__ = ["History"]


class History:
    """Queries for the history (a part of :class:`~faultfind.io.logbook.Logbook`)."""

    def _readings(self, sid) -> list[LoggedReading]:
        rows = self._conn.execute(
            "SELECT seq, taken_at, quantity, mode, plus, minus, part, setup, frequency, meter, "
            "label, raw, value, overrange, origin, struck_at, struck_reason FROM readings "
            "WHERE session_id = ? ORDER BY seq", (sid,)).fetchall()
        out = []
        for (seq, taken, q, mode, plus, minus, part, setup, freq, meter, label, raw, value,
             over, origin, struck, reason) in rows:
            rd = Reading(quantity=q, mode=mode, plus=plus, minus=minus, part=part, setup=setup,
                         frequency=freq, meter=meter, label=label, value=value,
                         overrange=int(over), raw=raw, line=None)
            out.append(LoggedReading(seq, taken, rd, origin, struck, reason))
        return out

    def _outcomes(self, ids) -> dict:
        if not ids:
            return {}
        marks = ",".join("?" * len(ids))
        faults: dict = {}
        for sid, ref, mode in self._conn.execute(
                f"SELECT session_id, ref, mode FROM outcome_faults WHERE session_id IN ({marks}) "
                "ORDER BY rowid", ids):
            faults.setdefault(sid, []).append((ref, mode))
        return {sid: Outcome(at, tuple(faults.get(sid, ())), conf, act, notes)
                for sid, at, conf, act, notes in self._conn.execute(
                    "SELECT session_id, recorded_at, confirmed_by, action, notes FROM outcomes "
                    f"WHERE session_id IN ({marks})", ids)}

    _SUMMARY = ("SELECT s.id, s.unit, s.location, s.technician, s.purpose, s.started_at, "
                "s.ended_at, s.circuit_name, s.circuit_title, s.circuit_sha256, "
                "s.caution_acknowledged_at, "
                "(SELECT count(*) FROM readings r WHERE r.session_id = s.id "
                "AND r.struck_at IS NULL), "
                "(SELECT verdict FROM diagnoses d WHERE d.session_id = s.id "
                "ORDER BY d.id DESC LIMIT 1) FROM sessions s")

    def _summaries(self, where="", params=()) -> list[SessionSummary]:
        rows = self._conn.execute(f"{self._SUMMARY} {where} ORDER BY s.started_at, s.id",
                                  params).fetchall()
        outcomes = self._outcomes([r[0] for r in rows])
        return [SessionSummary(*r, outcomes.get(r[0])) for r in rows]

    @_locked
    def get_session(self, session_id) -> Session:
        """The whole session: fields, circuit text, readings, diagnoses, outcome.

        Raises
        ------
        LogbookError
            No such session.
        """
        sid = self._session_id(session_id)
        row = self._session_row(sid)
        summary = self._summaries("WHERE s.id = ?", (sid,))[0]
        diagnoses = tuple(
            StoredDiagnosis(i, at, n, last, verdict, version, json.loads(doc), sha, number)
            for i, at, n, last, verdict, version, doc, sha, number in self._conn.execute(
                "SELECT id, created_at, reading_count, last_seq, verdict, version, document, "
                "circuit_sha256, circuit_version FROM diagnoses WHERE session_id = ? "
                "ORDER BY id", (sid,)))
        fields = {f: getattr(summary, f) for f in SessionSummary.__dataclass_fields__}
        return Session(**fields, circuit_text=row["circuit_text"],
                       meters_name=row["meters_name"], meters_text=row["meters_text"],
                       readings=tuple(self._readings(sid)), diagnoses=diagnoses,
                       logbook=str(self.path),
                       events=tuple(dict(at=r[0], kind=r[1], text=r[2]) for r in self._conn.execute(
                           "SELECT at, kind, text FROM events WHERE session_id = ? ORDER BY at, id",
                           (sid,))))

    @_locked
    def list_sessions(self, *, unit=None, technician=None, since=None, until=None,
                      open_only=False) -> list[SessionSummary]:
        """Sessions, oldest first, filtered.

        Parameters
        ----------
        unit, technician : str, optional
            Exact match, ignoring ASCII case.
        since, until : str, date or datetime, optional
            Sessions started in this range (inclusive; a bare date is local
            time and ``until`` takes the whole day).
        open_only : bool, optional
            Only sessions not closed yet.

        Returns
        -------
        list of SessionSummary

        Raises
        ------
        InputError
            A filter that is not text or not a date, naming it.
        """
        where, params = [], []
        if unit is not None:
            where.append("s.unit = ? COLLATE NOCASE")
            params.append(_text(unit, "unit"))
        if technician is not None:
            where.append("s.technician = ? COLLATE NOCASE")
            params.append(_text(technician, "technician"))
        if since is not None:
            where.append("s.started_at >= ?")
            params.append(parse_time(since, "since"))
        if until is not None:
            where.append("s.started_at <= ?")
            params.append(parse_time(until, "until", end_of_day=True))
        if open_only:
            where.append("s.ended_at IS NULL")
        return self._summaries(("WHERE " + " AND ".join(where)) if where else "", params)

    def history(self, unit) -> list[SessionSummary]:
        """Every session of one unit, oldest first (see :meth:`list_sessions`).

        Raises
        ------
        InputError
            An empty unit.
        """
        return self.list_sessions(unit=_text(unit, "unit", required=True))

    @_locked
    def latest_session_id(self) -> int | None:
        """The most recently started session's id (None in an empty logbook)."""
        row = self._conn.execute(
            "SELECT id FROM sessions ORDER BY started_at DESC, id DESC LIMIT 1").fetchone()
        return None if row is None else row[0]
