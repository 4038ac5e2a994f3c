"""The logbook as the library uses it: the stored sessions plus the work that runs on them.

:class:`faultfind.io.logbook.Logbook` only reads and writes the file.  The
:class:`Logbook` here adds what needs the layer above the files:
:meth:`Logbook.store_diagnosis` runs :func:`faultfind.diagnose.diagnose` on a
session's readings and keeps the result (the diagnosis is imported on
first use: listing sessions does not load it).  The command line and the terminal
UI open this one; every other public name of :mod:`faultfind.io.logbook` is
here too, so callers above the files have one place to import from.
"""

from __future__ import annotations

from faultfind.errors import InputError
from faultfind.io import logbook as _io
from faultfind.io.logbook import *  # noqa: F401,F403 - one place for the callers above io/
from faultfind.io.logbook.connection import _locked
from faultfind.io.logbook.records import StoredDiagnosis, _clean_json

__all__ = list(_io.__all__)


class Logbook(_io.Logbook):
    """:class:`faultfind.io.logbook.Logbook` (its parameters, attributes and rules) that can
    also diagnose a session: :meth:`store_diagnosis`."""

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
        # the circuit text it ran on, even if the circuit is revised meanwhile
        return self._add_diagnosis(sid, doc, len(readings), row["circuit_sha256"])
