"""The records a session is read back as: readings, stored diagnoses, outcomes, sessions."""

from __future__ import annotations

import math
from dataclasses import dataclass

from faultfind.io.circuit_file import parse_circuit
from faultfind.io.meters_file import meters_with_default, parse_meters
from faultfind.io.readings_file import reading_to_row
from faultfind.model import Circuit, Reading

__all__ = ["LoggedReading", "StoredDiagnosis", "Outcome", "SessionSummary", "Session"]


@dataclass(frozen=True)
class LoggedReading:
    """A reading as the logbook holds it.

    Attributes
    ----------
    seq : int
        Its number in the session (1, 2, ... in the order entered).
    taken_at : str
        When it was stored (ISO 8601, UTC).
    reading : Reading
        The reading, validated against the session's circuit; ``raw`` is the
        display text as entered, ``line`` is None.
    origin : str
        ``"entered"``, ``"ui"``, or ``"import FILE line N"``.
    struck_at : str or None
        When it was struck out (then it no longer counts), else None.
    struck_reason : str
    """

    seq: int
    taken_at: str
    reading: Reading
    origin: str = ""
    struck_at: str | None = None
    struck_reason: str = ""

    @property
    def struck(self) -> bool:
        return self.struck_at is not None

    def to_json(self) -> dict:
        r = self.reading
        return dict(seq=self.seq, taken_at=self.taken_at, **reading_to_row(r), raw=r.raw,
                    value=_finite(r.value), overrange=r.overrange, meter=r.meter, label=r.label,
                    origin=self.origin, struck_at=self.struck_at, struck_reason=self.struck_reason)


@dataclass(frozen=True)
class StoredDiagnosis:
    """A diagnosis run kept in the logbook.

    Attributes
    ----------
    id : int
    created_at : str
    reading_count : int
        Readings it used (those not struck out at the time).
    last_seq : int
        The highest reading number it saw: readings after it came later.
    verdict : str
    version : str
        faultfind version that ran it.
    document : dict
        The ``faultfind diagnose --json`` document (cli.md).
    circuit_sha256 : str or None
        SHA-256 of the circuit text it ran on (faultfind/io/circuit_versions.py).
    circuit_version : int or None
        That circuit's version in the session (1: the one it started on).
    """

    id: int
    created_at: str
    reading_count: int
    last_seq: int
    verdict: str
    version: str
    document: dict
    circuit_sha256: str | None = None
    circuit_version: int | None = None

    def to_json(self) -> dict:
        return dict(id=self.id, created_at=self.created_at, reading_count=self.reading_count,
                    last_seq=self.last_seq, verdict=self.verdict, version=self.version,
                    circuit_sha256=self.circuit_sha256, circuit_version=self.circuit_version,
                    diagnosis=self.document)


@dataclass(frozen=True)
class Outcome:
    """How a session ended.

    Attributes
    ----------
    recorded_at : str
    faults : tuple of (str, str or None)
        ``(ref, mode)`` of each part found faulty; empty: no fault found.
    confirmed_by, action, notes : str
        How the finding was confirmed, what was done, anything else.
    """

    recorded_at: str
    faults: tuple = ()
    confirmed_by: str = ""
    action: str = ""
    notes: str = ""

    def to_json(self) -> dict:
        return dict(recorded_at=self.recorded_at, fault_found=bool(self.faults),
                    faults=[{"ref": r, "mode": m} for r, m in self.faults],
                    confirmed_by=self.confirmed_by, action=self.action, notes=self.notes)


@dataclass(frozen=True)
class SessionSummary:
    """One session as lists show it.

    Attributes
    ----------
    id : int
    unit, location, technician, purpose : str
    started_at : str
    ended_at : str or None
        None while the session is open.
    circuit_name, circuit_title, circuit_sha256 : str
        The circuit file's name as given, its title and the SHA-256 (hex) of
        its text as stored (UTF-8).
    caution_acknowledged_at : str or None
    reading_count : int
        Readings not struck out.
    latest_verdict : str or None
        Verdict of the latest stored diagnosis.
    outcome : Outcome or None
    """

    id: int
    unit: str
    location: str
    technician: str
    purpose: str
    started_at: str
    ended_at: str | None
    circuit_name: str
    circuit_title: str
    circuit_sha256: str
    caution_acknowledged_at: str | None
    reading_count: int
    latest_verdict: str | None
    outcome: Outcome | None

    @property
    def is_open(self) -> bool:
        return self.ended_at is None

    def to_json(self) -> dict:
        return dict(id=self.id, unit=self.unit, location=self.location,
                    technician=self.technician, purpose=self.purpose,
                    started_at=self.started_at, ended_at=self.ended_at,
                    circuit_name=self.circuit_name, circuit_title=self.circuit_title,
                    circuit_sha256=self.circuit_sha256,
                    caution_acknowledged_at=self.caution_acknowledged_at,
                    reading_count=self.reading_count, latest_verdict=self.latest_verdict,
                    outcome=None if self.outcome is None else self.outcome.to_json())


@dataclass(frozen=True)
class Session(SessionSummary):
    """A whole session: the summary's fields plus the circuit, readings and diagnoses.

    Attributes
    ----------
    circuit_text : str
        The circuit file's full text at the start of the session.
    meters_name, meters_text : str or None
        The meter profile file used, if any.
    readings : tuple of LoggedReading
        Every reading, struck out or not, in the order entered.
    diagnoses : tuple of StoredDiagnosis
        Oldest first.
    logbook : str
        The logbook file, for messages.
    """

    circuit_text: str
    meters_name: str | None
    meters_text: str | None
    readings: tuple
    diagnoses: tuple
    logbook: str
    events: tuple = ()

    def circuit(self) -> Circuit:
        """The session's circuit, parsed from the stored text."""
        return parse_circuit(self.circuit_text, source=self._circuit_source())

    def _circuit_source(self) -> str:
        return f"{self.circuit_name} (stored in session {self.id})"

    def meters(self) -> dict:
        """Meter profiles of the session, always with ``default``."""
        if self.meters_text is None:
            return meters_with_default(None)
        return meters_with_default(parse_meters(
            self.meters_text, source=f"{self.meters_name} (stored in session {self.id})"))

    def live_readings(self) -> list[Reading]:
        """The readings that count (not struck out), in order."""
        return [lr.reading for lr in self.readings if not lr.struck]

    @property
    def latest_diagnosis(self) -> StoredDiagnosis | None:
        return self.diagnoses[-1] if self.diagnoses else None

    def to_json(self) -> dict:
        doc = SessionSummary.to_json(self)
        doc.update(meters_name=self.meters_name, circuit_text=self.circuit_text,
                   readings=[r.to_json() for r in self.readings],
                   diagnoses=[d.to_json() for d in self.diagnoses])
        return doc


def _finite(x):
    return None if x is None or not math.isfinite(x) else float(x)


def _clean_json(obj):
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {str(k): _clean_json(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean_json(v) for v in obj]
    if hasattr(obj, "item") and callable(obj.item):  # numpy scalar
        return _clean_json(obj.item())
    return obj
