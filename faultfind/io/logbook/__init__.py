"""The measurement logbook: sessions, readings, diagnosis snapshots and outcomes in SQLite.

A technician's readings are evidence, so the logbook is built never to lose
one: every reading is committed (``synchronous=FULL``, write-ahead log) before
the call that adds it returns, a stored reading is never changed or removed
(a mistake is struck out with a reason), and a logbook this faultfind cannot
read safely -- written by a newer faultfind, not a database, corrupt, locked
-- is refused with a :class:`~faultfind.errors.LogbookError` that says what to
do, and is never written to.

The library is the logbook; ``faultfind log`` (faultfind/cli/log/) and the
terminal UI are thin layers over :class:`faultfind.logbook.Logbook`, this
:class:`Logbook` with ``store_diagnosis`` (it runs the diagnosis, the work of
the layer above this one)::

    from faultfind.logbook import Logbook

    with Logbook("bp2.sqlite") as book:
        s = book.start_session("field_cases/booster_pump_panel/circuit.toml",
                               unit="BP-2", technician="A. Rivera")
        book.acknowledge_caution(s.id)
        book.add_reading(s.id, quantity="voltage", plus="+24V", value="23.91 V")
        book.store_diagnosis(s.id)
        book.close_session(s.id, [("F1", "open")], confirmed_by="fuse read OL out of holder")

Drill results (faultfind/drill/) are kept in the same file, one row per
scored drill: :meth:`Logbook.record_drill`, :meth:`Logbook.list_drills`,
:meth:`Logbook.drill_summary`, :meth:`Logbook.delete_drills` (docs/drill.md).

docs/logbook.md is the user's guide: where the file lives, the schema, how
to delete a session.

The modules of this package, each named for what it holds: ``paths``
(where the file lives), ``times``, ``records`` (what a session is read back
as), ``checks`` (argument checks), ``connection`` (opening, upgrading,
locking, errors), ``sessions`` (sessions and readings), ``outcomes``
(stored diagnoses and outcomes), ``history`` (queries), ``export`` and
``drills``.  Import from here: ``faultfind.io.logbook`` is the one public
place.  This package only reads and writes: running a diagnosis for
:meth:`~faultfind.logbook.Logbook.store_diagnosis` is the library's
(faultfind/logbook.py).
"""

from __future__ import annotations

from faultfind.io.logbook.connection import Connection
from faultfind.io.logbook.drills import DrillPeriod, DrillRecord, DrillSummary, Drills
from faultfind.io.logbook.export import Export
from faultfind.io.logbook.history import History
from faultfind.io.logbook.outcomes import Outcomes
from faultfind.io.logbook.paths import ENV_VAR, default_logbook_path, resolve_logbook_path
from faultfind.io.logbook.records import (LoggedReading, Outcome, Session, SessionSummary,
                                          StoredDiagnosis)
from faultfind.io.logbook.sessions import PURPOSES, SAFETY_CAUTION, Sessions
from faultfind.io.logbook.times import format_time, parse_time

__all__ = ["Logbook", "Session", "SessionSummary", "LoggedReading", "StoredDiagnosis", "Outcome",
           "DrillRecord", "DrillSummary", "DrillPeriod",
           "SAFETY_CAUTION", "PURPOSES", "DEFAULT_TIMEOUT", "ENV_VAR", "default_logbook_path",
           "resolve_logbook_path", "parse_time", "format_time"]

#: Seconds to wait for another program's write lock before giving up.
DEFAULT_TIMEOUT = 10.0


class Logbook(Sessions, Outcomes, History, Export, Drills, Connection):
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
        super().__init__(path, create=create,
                         timeout=DEFAULT_TIMEOUT if timeout is None else timeout)
