"""Diagnoses and outcomes: keeping a diagnosis document, closing a session with its finding.

Running the diagnosis is the library's work (faultfind/logbook.py,
``Logbook.store_diagnosis``); this module only stores its document.
"""

from __future__ import annotations

import json

from faultfind import __version__
from faultfind.errors import InputError
from faultfind.io.circuit_versions import used_version
from faultfind.model import fault_mode_name
from faultfind.io.logbook.checks import _text
from faultfind.io.logbook.connection import _locked
from faultfind.io.logbook.records import Session, StoredDiagnosis
from faultfind.io.logbook.times import _now, parse_time

__all__ = ["Outcomes"]


class Outcomes:
    """Stored diagnoses and outcomes (a part of :class:`~faultfind.io.logbook.Logbook`)."""

    def _add_diagnosis(self, sid, doc, reading_count, circuit_sha256=None) -> StoredDiagnosis:
        """Keep a diagnosis document (``faultfind diagnose --json``) of open session ``sid``
        made from ``reading_count`` readings on the circuit text whose SHA-256 is
        ``circuit_sha256`` (default: the session's now); returned once committed."""
        text = json.dumps(doc, ensure_ascii=False, allow_nan=False)
        last = max((r.seq for r in self._readings(sid)), default=0)
        when = _now()
        with self._write() as c:
            row = self._session_row(sid, open_only=True)
            sha = row["circuit_sha256"] if circuit_sha256 is None else circuit_sha256
            number = used_version(c, sid, sha)
            cur = c.execute("INSERT INTO diagnoses (session_id, created_at, reading_count, "
                            "last_seq, verdict, version, document, circuit_sha256, "
                            "circuit_version) VALUES (?,?,?,?,?,?,?,?,?)",
                            (sid, when, reading_count, last, doc["verdict"], __version__, text,
                             sha, number))
        return StoredDiagnosis(cur.lastrowid, when, reading_count, last, doc["verdict"],
                               __version__, doc, sha, number)

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
            mode = fault_mode_name(_text(mode, "faults")) or None
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
