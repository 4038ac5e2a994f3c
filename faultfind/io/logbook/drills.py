"""Drill results (faultfind/drill/): one row per scored drill, and an apprentice's progress."""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from datetime import datetime

from faultfind import __version__
from faultfind.errors import InputError
from faultfind.io.logbook.checks import _text
from faultfind.io.logbook.connection import _locked
from faultfind.io.logbook.records import _clean_json, _finite
from faultfind.io.logbook.times import _now, parse_time

__all__ = ["DrillRecord", "DrillPeriod", "DrillSummary", "Drills"]


@dataclass(frozen=True)
class DrillRecord:
    """A finished drill as the logbook keeps it (faultfind/drill/ makes them).

    Attributes
    ----------
    id : int
    apprentice : str
    started_at, finished_at : str
        ISO 8601, UTC.
    circuit_name, circuit_title : str
    seed : int
        Replays the same drill (same board, same hidden fault, same displays).
    fault, verdict : tuple of (str or None, str or None, float or None)
        ``(ref, mode, value)`` of the hidden fault and of the apprentice's
        verdict; ``(None, None, None)`` is "no fault".
    correct : bool
        Part and mode right (and the value within the drill's margin for a drift).
    readings : int
        Readings taken (refused requests not counted).
    effort, advice_effort : float
        Effort spent (docs/advice.md's cost model) and what faultfind's advice
        path spent on the same board.
    advice_readings : int
    safety_errors, hints : int
    score : int
        0 to 100.
    version : str
        faultfind version that scored it.
    document : dict
        The drill's whole JSON result (docs/drill.md).
    """

    id: int
    apprentice: str
    started_at: str
    finished_at: str
    circuit_name: str
    circuit_title: str
    seed: int
    fault: tuple
    verdict: tuple
    correct: bool
    readings: int
    effort: float
    advice_readings: int
    advice_effort: float
    safety_errors: int
    hints: int
    score: int
    version: str
    document: dict

    def to_json(self, *, document=False) -> dict:
        """A dict for JSON output; the stored result document only with ``document=True``."""
        def fault(t):
            return None if t[0] is None else {"ref": t[0], "mode": t[1], "value": _finite(t[2])}
        doc = dict(id=self.id, apprentice=self.apprentice, started_at=self.started_at,
                   finished_at=self.finished_at, circuit_name=self.circuit_name,
                   circuit_title=self.circuit_title, seed=self.seed, fault=fault(self.fault),
                   verdict=fault(self.verdict), correct=self.correct, readings=self.readings,
                   effort=self.effort, advice_readings=self.advice_readings,
                   advice_effort=self.advice_effort, safety_errors=self.safety_errors,
                   hints=self.hints, score=self.score, version=self.version)
        if document:
            doc["document"] = self.document
        return doc


@dataclass(frozen=True)
class DrillPeriod:
    """One ISO week of an apprentice's drills (``week`` as ``"2026-W10"``, local time)."""

    week: str
    drills: int
    correct: int
    mean_score: float
    mean_readings: float
    safety_errors: int

    @property
    def accuracy(self) -> float:
        return self.correct / self.drills if self.drills else 0.0

    def to_json(self) -> dict:
        return dict(week=self.week, drills=self.drills, correct=self.correct,
                    accuracy=self.accuracy, mean_score=self.mean_score,
                    mean_readings=self.mean_readings, safety_errors=self.safety_errors)


@dataclass(frozen=True)
class DrillSummary:
    """An apprentice's progress across drills.

    Attributes
    ----------
    apprentice : str
        As first recorded.
    drills, correct : int
    accuracy : float
        ``correct / drills`` (0 without drills).
    mean_score, mean_readings, mean_advice_readings, mean_effort, mean_advice_effort : float
        Means over the drills (0 without drills).
    safety_errors, hints : int
        Totals.
    weeks : tuple of DrillPeriod
        Oldest first: progress over time.
    records : tuple of DrillRecord
        Every drill, oldest first.
    """

    apprentice: str
    drills: int
    correct: int
    accuracy: float
    mean_score: float
    mean_readings: float
    mean_advice_readings: float
    mean_effort: float
    mean_advice_effort: float
    safety_errors: int
    hints: int
    weeks: tuple
    records: tuple

    def to_json(self) -> dict:
        return dict(apprentice=self.apprentice, drills=self.drills, correct=self.correct,
                    accuracy=self.accuracy, mean_score=self.mean_score,
                    mean_readings=self.mean_readings,
                    mean_advice_readings=self.mean_advice_readings, mean_effort=self.mean_effort,
                    mean_advice_effort=self.mean_advice_effort,
                    safety_errors=self.safety_errors, hints=self.hints,
                    weeks=[w.to_json() for w in self.weeks],
                    records=[r.to_json() for r in self.records])


class Drills:
    """Drill results (a part of :class:`~faultfind.io.logbook.Logbook`)."""

    @staticmethod
    def _drill_fault(value, name) -> tuple:
        if value is None:
            return (None, None, None)
        if not isinstance(value, (tuple, list)) or len(value) != 3:
            raise InputError(f"must be (ref, mode, value) or None, got {value!r}", key=name)
        ref, mode, v = value
        if ref is None:
            return (None, None, None)
        ref, mode = _text(ref, name, required=True), _text(mode, name, required=True)
        if v is not None and (isinstance(v, bool) or not isinstance(v, (int, float))
                              or not math.isfinite(v)):
            raise InputError(f"the value must be a finite number or None, got {v!r}", key=name)
        return (ref, mode, None if v is None else float(v))

    @_locked
    def record_drill(self, *, apprentice, circuit_name, seed, fault, verdict, correct, readings,
                     effort, advice_readings, advice_effort, safety_errors, hints, score,
                     document, circuit_title="", started_at=None,
                     finished_at=None) -> DrillRecord:
        """Keep a finished drill's result.

        Parameters
        ----------
        apprentice : str
            Who did the drill (one line, required).
        circuit_name : str
            The circuit file as given; ``circuit_title`` its title.
        seed : int
            The drill's seed (>= 0).
        fault, verdict : (ref, mode, value) or None
            The hidden fault and the verdict given; None (or a None ref) is
            "no fault".
        correct : bool
        readings, advice_readings, safety_errors, hints : int
            Counts (>= 0).
        effort, advice_effort : float
            Efforts (>= 0).
        score : int
            0 to 100.
        document : dict
            The drill's JSON result; stored as JSON text.
        started_at, finished_at : str or datetime, optional
            Default now.

        Returns
        -------
        DrillRecord
            Returned once committed.

        Raises
        ------
        InputError
            A field of the wrong type or out of range, naming it.
        """
        apprentice = _text(apprentice, "apprentice", required=True)
        if "\n" in apprentice or "\r" in apprentice:
            raise InputError("must be one line of text", key="apprentice")
        circuit_name = _text(circuit_name, "circuit_name", required=True)
        circuit_title = _text(circuit_title, "circuit_title")
        ints = dict(seed=seed, readings=readings, advice_readings=advice_readings,
                    safety_errors=safety_errors, hints=hints, score=score)
        for name, v in ints.items():
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                raise InputError(f"must be an int >= 0, got {v!r}", key=name)
        if score > 100:
            raise InputError(f"must be from 0 to 100, got {score!r}", key="score")
        for name, v in (("effort", effort), ("advice_effort", advice_effort)):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) \
                    or v < 0:
                raise InputError(f"must be a number >= 0, got {v!r}", key=name)
        if not isinstance(correct, bool):
            raise InputError(f"must be True or False, got {correct!r}", key="correct")
        f, v = self._drill_fault(fault, "fault"), self._drill_fault(verdict, "verdict")
        if not isinstance(document, dict):
            raise InputError(f"must be a dict, got {type(document).__name__}", key="document")
        text = json.dumps(_clean_json(document), ensure_ascii=False, allow_nan=False)
        end = _now() if finished_at is None else parse_time(finished_at, "finished_at")
        start = end if started_at is None else parse_time(started_at, "started_at")
        with self._write() as c:
            cur = c.execute(
                "INSERT INTO drills (apprentice, started_at, finished_at, circuit_name, "
                "circuit_title, seed, fault_ref, fault_mode, fault_value, verdict_ref, "
                "verdict_mode, verdict_value, correct, readings, effort, advice_readings, "
                "advice_effort, safety_errors, hints, score, version, document) "
                "VALUES (?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)",
                (apprentice, start, end, circuit_name, circuit_title, seed, *f, *v, int(correct),
                 readings, float(effort), advice_readings, float(advice_effort), safety_errors,
                 hints, score, __version__, text))
            rid = cur.lastrowid
        return self._drills("WHERE id = ?", (rid,))[0]

    _DRILL_COLUMNS = ("id, apprentice, started_at, finished_at, circuit_name, circuit_title, "
                      "seed, fault_ref, fault_mode, fault_value, verdict_ref, verdict_mode, "
                      "verdict_value, correct, readings, effort, advice_readings, advice_effort, "
                      "safety_errors, hints, score, version, document")

    def _drills(self, where, params) -> list[DrillRecord]:
        rows = self._conn.execute(f"SELECT {self._DRILL_COLUMNS} FROM drills {where} "
                                  "ORDER BY finished_at, id", params).fetchall()
        return [DrillRecord(r[0], r[1], r[2], r[3], r[4], r[5], r[6], tuple(r[7:10]),
                            tuple(r[10:13]), bool(r[13]), r[14], r[15], r[16], r[17], r[18],
                            r[19], r[20], r[21], json.loads(r[22])) for r in rows]

    @_locked
    def list_drills(self, apprentice=None) -> list[DrillRecord]:
        """Recorded drills, oldest first; only ``apprentice``'s (ignoring ASCII case) when given.

        Raises
        ------
        InputError
            ``apprentice`` not text.
        """
        if apprentice is None:
            return self._drills("", ())
        return self._drills("WHERE apprentice = ? COLLATE NOCASE",
                            (_text(apprentice, "apprentice", required=True),))

    @_locked
    def delete_drills(self, apprentice) -> int:
        """Delete every drill of one apprentice for good (privacy), as :meth:`delete_session`.

        Parameters
        ----------
        apprentice : str
            Matched ignoring ASCII case.

        Returns
        -------
        int
            How many drills were deleted (0 when there were none).

        Raises
        ------
        InputError
            An empty or non-text ``apprentice``.
        """
        name = _text(apprentice, "apprentice", required=True)
        with self._write() as c:
            n = c.execute("DELETE FROM drills WHERE apprentice = ? COLLATE NOCASE",
                          (name,)).rowcount
        self._conn.execute("PRAGMA wal_checkpoint(TRUNCATE)").fetchone()
        return n

    def drill_summary(self, apprentice) -> DrillSummary:
        """An apprentice's progress: accuracy, readings, safety errors, overall and by week.

        Parameters
        ----------
        apprentice : str
            Matched ignoring ASCII case.

        Returns
        -------
        DrillSummary
            With ``drills == 0`` when the apprentice has none.

        Raises
        ------
        InputError
            An empty or non-text ``apprentice``.
        """
        records = self.list_drills(_text(apprentice, "apprentice", required=True))
        n = len(records)

        def mean(values):
            values = list(values)
            return float(sum(values) / len(values)) if values else 0.0

        weeks: dict = {}
        for r in records:
            y, w, _ = datetime.fromisoformat(r.finished_at).astimezone().isocalendar()
            weeks.setdefault(f"{y}-W{w:02d}", []).append(r)
        periods = tuple(DrillPeriod(k, len(rs), sum(r.correct for r in rs),
                                    mean(r.score for r in rs), mean(r.readings for r in rs),
                                    sum(r.safety_errors for r in rs))
                        for k, rs in sorted(weeks.items()))
        return DrillSummary(
            records[0].apprentice if records else apprentice.strip(), n,
            sum(r.correct for r in records), (sum(r.correct for r in records) / n) if n else 0.0,
            mean(r.score for r in records), mean(r.readings for r in records),
            mean(r.advice_readings for r in records), mean(r.effort for r in records),
            mean(r.advice_effort for r in records), sum(r.safety_errors for r in records),
            sum(r.hints for r in records), periods, tuple(records))
