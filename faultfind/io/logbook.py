"""The measurement logbook: sessions, readings, diagnosis snapshots and outcomes in SQLite.

A technician's readings are evidence, so the logbook is built never to lose
one: every reading is committed (``synchronous=FULL``, write-ahead log) before
the call that adds it returns, a stored reading is never changed or removed
(a mistake is struck out with a reason), and a logbook this faultfind cannot
read safely -- written by a newer faultfind, not a database, corrupt, locked
-- is refused with a :class:`~faultfind.errors.LogbookError` that says what to
do, and is never written to.

The library is the logbook; ``faultfind log`` (faultfind/cli/log.py) and the
terminal UI are thin layers over :class:`Logbook`::

    with Logbook("bp2.sqlite") as book:
        s = book.start_session("field_cases/booster_pump_panel/circuit.toml",
                               unit="BP-2", technician="A. Rivera")
        book.acknowledge_caution(s.id)
        book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.91 V")
        book.store_diagnosis(s.id)
        book.close_session(s.id, [("F1", "open")], confirmed_by="fuse read OL out of holder")

Drill results (faultfind/drill.py) are kept in the same file, one row per
scored drill: :meth:`Logbook.record_drill`, :meth:`Logbook.list_drills`,
:meth:`Logbook.drill_summary`, :meth:`Logbook.delete_drills` (docs/drill.md).

docs/logbook.md is the user's guide: where the file lives, the schema, how
to delete a session.
"""

from __future__ import annotations

import csv
import functools
import hashlib
import io
import json
import math
import os
import sqlite3
import sys
import threading
from contextlib import contextmanager
from dataclasses import dataclass, replace
from datetime import date, datetime, time, timezone
from pathlib import Path

from faultfind import __version__
from faultfind.errors import CircuitError, InputError, LogbookError, MeterError, ReadingsError
from faultfind.io import migrations as mig
from faultfind.io.circuit_file import parse_circuit
from faultfind.io.meters_file import meters_with_default, parse_meters
from faultfind.io.readings_file import (COLUMNS, load_readings, parse_readings, reading_to_row,
                                        readings_to_frame, write_readings)
from faultfind.model import Circuit, Reading

__all__ = ["Logbook", "Session", "SessionSummary", "LoggedReading", "StoredDiagnosis", "Outcome",
           "DrillRecord", "DrillSummary", "DrillPeriod",
           "SAFETY_CAUTION", "PURPOSES", "DEFAULT_TIMEOUT", "ENV_VAR", "default_logbook_path",
           "resolve_logbook_path", "parse_time", "format_time"]

#: Environment variable naming the logbook file (cli.md).
ENV_VAR = "FAULTFIND_LOGBOOK"
#: Seconds to wait for another program's write lock before giving up.
DEFAULT_TIMEOUT = 10.0
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
- Before a resistance reading, or before breaking a circuit to put the meter
  in series: isolate, lock out and tag out, then verify dead with a proven
  tester.
- Discharge stored energy first: capacitors, and anything a battery, UPS,
  spring or second supply keeps alive.
- faultfind is a decision aid. It works from the schematic you give it and
  does not know your site: local codes, the equipment maker's instructions
  and licensed practice come first."""

_SQLITE_MAGIC = b"SQLite format 3\x00"
_FILE_NAME = "logbook.sqlite"
_SINGLE_LINE = ("unit", "location", "technician")


# -- where the logbook lives -------------------------------------------------------------


def default_logbook_path(environ=None, platform=None, home=None) -> Path:
    """The logbook file faultfind uses when none is named.

    Parameters
    ----------
    environ : mapping, optional
        Environment variables (default ``os.environ``).
    platform : str, optional
        ``sys.platform`` value (default: this machine's).
    home : str or os.PathLike, optional
        The user's home folder (default ``Path.home()``).

    Returns
    -------
    pathlib.Path
        ``$FAULTFIND_LOGBOOK`` when set and not empty; else
        ``<data folder>/faultfind/logbook.sqlite`` where the data folder is
        ``%LOCALAPPDATA%`` (else ``~/AppData/Local``) on Windows,
        ``~/Library/Application Support`` on macOS, and ``$XDG_DATA_HOME``
        when it is an absolute path, else ``~/.local/share``, elsewhere (XDG
        Base Directory Specification).
    """
    env = os.environ if environ is None else environ
    platform = sys.platform if platform is None else str(platform)
    named = env.get(ENV_VAR, "")
    if named.strip():
        return Path(os.path.expanduser(named))
    home = Path.home() if home is None else Path(home)
    if platform.startswith("win"):
        local = env.get("LOCALAPPDATA", "")
        base = Path(local) if local else home / "AppData" / "Local"
    elif platform == "darwin":
        base = home / "Library" / "Application Support"
    else:
        xdg = env.get("XDG_DATA_HOME", "")
        base = Path(xdg) if xdg and os.path.isabs(xdg) else home / ".local" / "share"
    return base / "faultfind" / _FILE_NAME


def resolve_logbook_path(path=None, environ=None) -> Path:
    """``path`` when given (``--logbook``), else :func:`default_logbook_path`.

    Raises
    ------
    LogbookError
        ``path`` is neither None, a str nor a path-like object, or is empty.
    """
    if path is None:
        return default_logbook_path(environ)
    if not isinstance(path, (str, os.PathLike)) or not os.fspath(path):
        raise LogbookError(f"the logbook path must be a file name, got {path!r}", key="logbook")
    return Path(os.path.expanduser(os.fspath(path)))


# -- times -------------------------------------------------------------------------------


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


def parse_time(value, what="time", *, end_of_day=False) -> str:
    """A moment as the logbook stores it: ISO 8601 in UTC, milliseconds.

    Parameters
    ----------
    value : str, datetime.datetime or datetime.date
        ``YYYY-MM-DD`` or an ISO 8601 date and time; a time without a UTC
        offset, and a date, are local time.
    what : str, optional
        The argument's name, for messages.
    end_of_day : bool, optional
        For a bare date: the last moment of that day instead of its start
        (an inclusive ``--until``).

    Returns
    -------
    str
        e.g. ``"2026-03-04T09:15:00.000+00:00"``; such strings sort in time
        order.

    Raises
    ------
    InputError
        Not a date or time, naming ``what``.
    """
    if isinstance(value, str):
        text = value.strip()
        try:
            value = (date.fromisoformat(text) if len(text) == 10
                     else datetime.fromisoformat(text.replace("Z", "+00:00")))
        except ValueError:
            raise InputError(f"{text!r} is not a date or time: write YYYY-MM-DD or "
                             "YYYY-MM-DDTHH:MM", key=what) from None
    if isinstance(value, date) and not isinstance(value, datetime):
        value = datetime.combine(value, time.max if end_of_day else time.min)
    if not isinstance(value, datetime):
        raise InputError(f"expected a date or time, got {type(value).__name__}", key=what)
    if value.tzinfo is None:
        value = value.astimezone()  # naive: local time
    return value.astimezone(timezone.utc).isoformat(timespec="milliseconds")


def format_time(stored, *, seconds=False) -> str:
    """A stored time for people: local time ``YYYY-MM-DD HH:MM`` (``""`` for None)."""
    if not stored:
        return ""
    t = datetime.fromisoformat(stored).astimezone()
    return t.strftime("%Y-%m-%d %H:%M:%S" if seconds else "%Y-%m-%d %H:%M")


# -- records -----------------------------------------------------------------------------


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
    """

    id: int
    created_at: str
    reading_count: int
    last_seq: int
    verdict: str
    version: str
    document: dict

    def to_json(self) -> dict:
        return dict(id=self.id, created_at=self.created_at, reading_count=self.reading_count,
                    last_seq=self.last_seq, verdict=self.verdict, version=self.version,
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


@dataclass(frozen=True)
class DrillRecord:
    """A finished drill as the logbook keeps it (faultfind/drill.py makes them).

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


# -- argument checks ---------------------------------------------------------------------


def _text(value, name, *, required=False) -> str:
    if value is None:
        value = ""
    if not isinstance(value, str):
        raise InputError(f"must be text, got {type(value).__name__}", key=name)
    value = value.strip()
    if required and not value:
        raise InputError("must not be empty", key=name)
    if name in _SINGLE_LINE and ("\n" in value or "\r" in value):
        raise InputError("must be one line of text", key=name)
    return value


def _read_text(path, what, error):
    if not isinstance(path, (str, os.PathLike)):
        raise error(f"expected a file name, got {type(path).__name__}", key=what)
    name = os.fspath(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise error(f"no such {what} file", file=name) from None
    except OSError as exc:
        raise error(f"cannot read the {what} file: {exc.strerror or exc}", file=name) from None
    try:
        return name, data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(f"not UTF-8 text (byte 0x{data[exc.start]:02x})", file=name,
                    line=data[:exc.start].count(b"\n") + 1) from None


def _locked(method):
    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with self._lock:
            if self._conn is None:
                raise LogbookError("the logbook is closed", file=self.path)
            with self._guard():
                return method(self, *args, **kwargs)
    return wrapper


# -- the logbook -------------------------------------------------------------------------


class Logbook:
    """A measurement logbook file, opened (and created or upgraded) safely.

    Parameters
    ----------
    path : str or os.PathLike, optional
        The file (``--logbook``); default :func:`default_logbook_path`
        (``$FAULTFIND_LOGBOOK`` or the user's data folder).
    create : bool, optional
        Create the file (and its folder, private to the user) when missing;
        False: a missing file is a LogbookError.
    timeout : float, optional
        Seconds to wait for another writer's lock (default
        :data:`DEFAULT_TIMEOUT`, 10 s).

    Attributes
    ----------
    path : pathlib.Path
    schema_version : int
    upgraded : list of str
        Migrations this open applied (empty when none was due).
    backup : pathlib.Path or None
        Copy of the file taken before upgrading an older logbook.

    Raises
    ------
    LogbookError
        Naming the file and what to do: it is a folder; it is missing and
        ``create`` is False; it is not an SQLite database or is corrupt; it is
        an SQLite database of another program; it was written by a newer
        faultfind (schema version above :data:`migrations.LATEST_VERSION`);
        it stays locked longer than ``timeout``; it cannot be created or
        written.  In every case the file is left as it was.

    Notes
    -----
    The connection uses the write-ahead log (``journal_mode=WAL``),
    ``synchronous=FULL`` (each commit is on disk before it returns, also
    across a power cut), foreign keys, and ``secure_delete`` (deleted
    sessions are overwritten, not just unlinked).  Every writing method runs
    in one ``BEGIN IMMEDIATE`` transaction and returns after ``COMMIT``.  A
    Logbook may be used from several threads (calls are serialized) and by
    several processes at once.
    """

    def __init__(self, path=None, *, create=True, timeout=None):
        self.path = resolve_logbook_path(path)
        timeout = DEFAULT_TIMEOUT if timeout is None else timeout
        if isinstance(timeout, bool) or not isinstance(timeout, (int, float)) \
                or not math.isfinite(timeout) or timeout < 0:
            raise LogbookError(f"timeout must be a number of seconds >= 0, got {timeout!r}",
                               key="timeout")
        self.timeout = float(timeout)
        self.upgraded: list[str] = []
        self.backup: Path | None = None
        self._lock = threading.RLock()
        self._conn = None
        self._cache: dict = {}
        self._prepare_file(bool(create))
        try:
            self._conn = sqlite3.connect(str(self.path), timeout=self.timeout,
                                         isolation_level=None, check_same_thread=False)
        except sqlite3.Error as exc:
            raise self._error(exc) from None
        try:
            with self._guard():
                self._open()
        except BaseException:
            self._conn.close()
            self._conn = None
            raise

    # opening

    def _prepare_file(self, create):
        p = self.path
        if p.is_dir():
            raise LogbookError("is a folder, not a logbook file: name a file, e.g. "
                               f"{p / _FILE_NAME}", file=p)
        if p.exists():
            try:
                with open(p, "rb") as f:
                    head = f.read(100)
            except OSError as exc:
                raise LogbookError(f"cannot read the logbook: {exc.strerror or exc}",
                                   file=p) from None
            if head and (len(head) < 100 or not head.startswith(_SQLITE_MAGIC)):
                raise self._corrupt("it is not an SQLite database")
            return
        if not create:
            raise LogbookError("no logbook here yet: 'faultfind log start' creates one (or "
                               f"name another with --logbook or {ENV_VAR})", file=p)
        try:
            if not p.parent.exists():
                p.parent.mkdir(parents=True, mode=0o700)
            fd = os.open(p, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
            os.close(fd)
        except FileExistsError:
            pass  # another process created it this instant: open it as it is
        except OSError as exc:
            raise LogbookError(f"cannot create the logbook: {exc.strerror or exc}; name a "
                               f"file you may write with --logbook or {ENV_VAR}",
                               file=p) from None

    def _open(self):
        conn = self._conn
        app = mig.application_id(conn)
        version = mig.schema_version(conn)
        tables = [r[0] for r in conn.execute(
            "SELECT name FROM sqlite_master WHERE name NOT LIKE 'sqlite_%'")]
        if app != mig.APPLICATION_ID and (app != 0 or tables or version != 0):
            raise LogbookError("this SQLite database is not a faultfind logbook; it was left "
                               f"untouched: name another file with --logbook or {ENV_VAR}",
                               file=self.path)
        if version > mig.LATEST_VERSION:
            raise LogbookError(
                f"this logbook was written by a newer faultfind (schema version {version}; this "
                f"faultfind {__version__} knows up to {mig.LATEST_VERSION}); it was left "
                "untouched: upgrade faultfind to read it", file=self.path)
        conn.execute("PRAGMA journal_mode=WAL").fetchone()
        conn.execute("PRAGMA synchronous=FULL")
        conn.execute("PRAGMA foreign_keys=ON")
        conn.execute("PRAGMA secure_delete=ON")
        if version < mig.LATEST_VERSION:
            if version > 0:
                self.backup = self._backup(version)
            self.upgraded = mig.migrate(conn)
        self.schema_version = mig.schema_version(conn)

    def _backup(self, version) -> Path:
        stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
        dest = self.path.with_name(f"{self.path.name}.schema{version}-{stamp}.bak")
        n = 1
        while dest.exists():
            n += 1
            dest = self.path.with_name(f"{self.path.name}.schema{version}-{stamp}-{n}.bak")
        fd = os.open(dest, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o600)
        os.close(fd)
        target = sqlite3.connect(str(dest))
        try:
            self._conn.backup(target)
        finally:
            target.close()
        return dest

    def _corrupt(self, why) -> LogbookError:
        return LogbookError(f"the logbook cannot be read: {why}. It was left untouched: "
                            "restore it from a backup, or move it aside (rename it) so that "
                            "faultfind starts a new one", file=self.path)

    def _error(self, exc) -> LogbookError:
        text = str(exc)
        low = text.lower()
        if "locked" in low or "busy" in low:
            return LogbookError(
                f"the logbook stayed locked by another program for {self.timeout:g} s: close "
                "other faultfind windows and any database tool that has it open, then try "
                "again (nothing was written)", file=self.path)
        if "not a database" in low or "malformed" in low or "corrupt" in low:
            return self._corrupt(f"SQLite says '{text}'")
        if "readonly" in low or "read-only" in low:
            return LogbookError("the logbook is read-only: check the file's and its folder's "
                                "permissions (nothing was written)", file=self.path)
        if "unable to open" in low or "disk i/o" in low or "disk is full" in low:
            return LogbookError(f"the logbook cannot be written ({text}): check the disk has "
                                "space and the folder may be written (nothing was written)",
                                file=self.path)
        if "closed" in low:
            return LogbookError("the logbook is closed", file=self.path)
        return LogbookError(f"the logbook refused the change: {text}", file=self.path)

    @contextmanager
    def _guard(self):
        try:
            yield
        except sqlite3.Error as exc:
            raise self._error(exc) from None

    @contextmanager
    def _write(self):
        conn = self._conn
        conn.execute("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")

    def close(self) -> None:
        """Close the file (idempotent)."""
        with self._lock:
            if self._conn is not None:
                self._conn.close()
                self._conn = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def __repr__(self):
        return f"Logbook({str(self.path)!r})"

    # sessions

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

    # diagnosis and outcome

    @_locked
    def store_diagnosis(self, session_id, *, top=5, progress=None, priors=None) -> StoredDiagnosis:
        """Diagnose the session's readings (those not struck out) and keep the result.

        Parameters
        ----------
        session_id : int
        top : int, optional
            Hypotheses to keep (>= 1).
        progress : callable, optional
            Passed to :func:`faultfind.diagnose.diagnose`: called as
            ``progress(stage, done, total)`` as the diagnosis runs.
        priors : Priors, optional
            Fault priors for the ranking (docs/priors.md); default the handbook's.

        Returns
        -------
        StoredDiagnosis
            Its ``document`` is :func:`faultfind.diagnose.diagnosis_json`.

        Raises
        ------
        LogbookError
            No such session, or it is closed.
        InputError
            ``top`` below 1.
        SolveError
            The circuit's equations have no unique solution.
        """
        from faultfind.diagnose import diagnose, diagnosis_json  # heavy: load on use

        sid = self._session_id(session_id)
        if isinstance(top, bool) or not isinstance(top, int) or top < 1:
            raise InputError(f"must be an int >= 1, got {top!r}", key="top")
        row = self._session_row(sid, open_only=True)
        circuit, meters = self._parsed(sid, row)
        logged = [r for r in self._readings(sid) if not r.struck]
        readings = [r.reading for r in logged]
        doc = _clean_json(diagnosis_json(diagnose(circuit, readings, meters, top=top,
                                                         progress=progress, priors=priors)))
        text = json.dumps(doc, ensure_ascii=False, allow_nan=False)
        last = max((r.seq for r in self._readings(sid)), default=0)
        when = _now()
        with self._write() as c:
            self._session_row(sid, open_only=True)
            cur = c.execute("INSERT INTO diagnoses (session_id, created_at, reading_count, "
                            "last_seq, verdict, version, document) VALUES (?,?,?,?,?,?,?)",
                            (sid, when, len(readings), last, doc["verdict"], __version__, text))
        return StoredDiagnosis(cur.lastrowid, when, len(readings), last, doc["verdict"],
                               __version__, doc)

    def _faults(self, faults, circuit) -> list:
        if isinstance(faults, (str, bytes)) or not hasattr(faults, "__iter__"):
            raise InputError("must be a list of (ref, mode) pairs or 'REF:MODE' texts",
                             key="faults")
        out, seen = [], set()
        for item in faults:
            if isinstance(item, str):
                ref, _, mode = item.partition(":")
            elif isinstance(item, (tuple, list)) and len(item) == 2:
                ref, mode = item
            else:
                raise InputError(f"{item!r}: give (ref, mode) or 'REF:MODE'", key="faults")
            ref = _text(ref, "faults", required=True)
            mode = _text(mode, "faults") or None
            if not circuit.has_part(ref):
                raise InputError(f"{ref!r} is not a part of the session's circuit; a fault in "
                                 "something the circuit file does not draw goes in the notes",
                                 part=ref, key="faults")
            modes = circuit.part(ref).fault_modes
            if mode is not None and mode not in modes:
                raise InputError(f"{mode!r} is not a fault mode of {ref}: "
                                 f"{', '.join(modes) or 'it has none'}", part=ref, key="faults")
            if ref in seen:
                raise InputError("named twice", part=ref, key="faults")
            seen.add(ref)
            out.append((ref, mode))
        return out

    @_locked
    def close_session(self, session_id, faults=(), *, confirmed_by="", action="", notes="",
                      ended_at=None) -> Session:
        """Close a session with its outcome; it is read-only afterwards.

        Parameters
        ----------
        session_id : int
        faults : sequence, optional
            Parts found faulty, as ``(ref, mode)`` pairs or ``"REF:MODE"``
            texts (mode None or empty when not known); each ref a part of the
            session's circuit and the mode one of its fault modes.  Empty: no
            fault found.
        confirmed_by, action, notes : str, optional
            How the finding was confirmed, what was done, anything else.
        ended_at : str or datetime, optional
            Default now.

        Returns
        -------
        Session

        Raises
        ------
        LogbookError
            No such session, or it is closed already.
        InputError
            A ref not in the circuit, a mode the part cannot have, a ref
            twice.
        """
        sid = self._session_id(session_id)
        row = self._session_row(sid, open_only=True)
        circuit, _ = self._parsed(sid, row)
        found = self._faults(faults, circuit)
        confirmed_by, action = _text(confirmed_by, "confirmed_by"), _text(action, "action")
        notes = _text(notes, "notes")
        when = _now() if ended_at is None else parse_time(ended_at, "ended_at")
        with self._write() as c:
            self._session_row(sid, open_only=True)
            c.execute("UPDATE sessions SET ended_at = ? WHERE id = ?", (when, sid))
            c.execute("INSERT INTO outcomes (session_id, recorded_at, confirmed_by, action, notes)"
                      " VALUES (?,?,?,?,?)", (sid, when, confirmed_by, action, notes))
            c.executemany("INSERT INTO outcome_faults (session_id, ref, mode) VALUES (?,?,?)",
                          [(sid, r, m) for r, m in found])
        return self.get_session(sid)

    # reading back

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
            StoredDiagnosis(i, at, n, last, verdict, version, json.loads(doc))
            for i, at, n, last, verdict, version, doc in self._conn.execute(
                "SELECT id, created_at, reading_count, last_seq, verdict, version, document "
                "FROM diagnoses WHERE session_id = ? ORDER BY id", (sid,)))
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

    # export, delete, check

    def export_readings(self, session_id, path_or_buffer, *, include_struck=False) -> int:
        """Write a session's readings as a readings file (CSV, via pandas).

        Parameters
        ----------
        session_id : int
        path_or_buffer : str, os.PathLike or text stream
        include_struck : bool, optional
            Also the readings struck out (default: only those that count).

        Returns
        -------
        int
            Rows written.  :func:`faultfind.io.readings_file.load_readings`
            reads the file back to the same readings.

        Raises
        ------
        LogbookError
            No such session.
        ReadingsError
            The file cannot be written.
        """
        s = self.get_session(session_id)
        rows = [lr.reading for lr in s.readings if include_struck or not lr.struck]
        write_readings(rows, path_or_buffer)
        return len(rows)

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

    # drills (faultfind/drill.py)

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

    @_locked
    def check(self) -> list[str]:
        """Problems SQLite's ``PRAGMA integrity_check`` finds (empty list: none)."""
        found = [r[0] for r in self._conn.execute("PRAGMA integrity_check")]
        found = [] if found == ["ok"] else found
        found += [f"foreign key: {r}" for r in self._conn.execute("PRAGMA foreign_key_check")]
        return found
