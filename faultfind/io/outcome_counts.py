"""Confirmed outcomes read out of the logbook as counts, for learning fault priors.

Which sessions count (docs/priors.md): closed *repair* sessions (commissioning
and training sessions are left out) in the chosen :class:`Scope` -- every
session, the sessions carrying one tag (:mod:`faultfind.io.session_tags`), or
the sessions on one circuit file as it is now (same SHA-256 of its text).  Each
is reduced to the mix of its circuit's parts that can fail (kind -> how many)
and the faulty parts its outcome names (kind, mode); the engine
(:mod:`faultfind.engine.prior_update`) learns from those counts.
"""

from __future__ import annotations

import hashlib
from collections import Counter
from dataclasses import dataclass

from faultfind.engine.prior_update import OutcomeCounts
from faultfind.errors import CircuitError, InputError, LogbookError
from faultfind.io.circuit_file import parse_circuit
from faultfind.io.session_tags import check_tag
from faultfind.io.textfile import read_text

__all__ = ["Scope", "parse_scope", "count_outcomes", "Counted", "SCOPE_HELP"]

SCOPE_HELP = ("which sessions' outcomes to learn from: 'all' (default), 'tag:NAME' (sessions "
              "carrying that tag) or 'circuit:FILE' (sessions on that circuit file as it is now)")


@dataclass(frozen=True)
class Scope:
    """Which sessions' outcomes count.

    Attributes
    ----------
    kind : {"all", "tag", "circuit"}
    value : str
        The tag, or the circuit file's name.
    sha256 : str
        ``circuit`` scope: SHA-256 (hex) of the file's text.
    """

    kind: str = "all"
    value: str = ""
    sha256: str = ""

    @property
    def text(self) -> str:
        """The scope as given on the command line (``tag:north``)."""
        return "all" if self.kind == "all" else f"{self.kind}:{self.value}"

    def describe(self) -> str:
        return {"all": "all sessions", "tag": f"sessions tagged {self.value!r}",
                "circuit": f"sessions on circuit {self.value}"}[self.kind]


def parse_scope(text) -> Scope:
    """A :class:`Scope` from ``all``, ``tag:NAME`` or ``circuit:FILE``.

    Raises
    ------
    InputError
        Another form, an empty or bad tag (key ``--scope``); CircuitError: the
        circuit file cannot be read.
    """
    if text is None:
        return Scope()
    if not isinstance(text, str):
        raise InputError(f"must be text, got {type(text).__name__}", key="--scope")
    t = text.strip()
    if t.lower() == "all":
        return Scope()
    kind, sep, value = t.partition(":")
    kind = kind.strip().lower()
    if not sep or kind not in ("tag", "circuit"):
        raise InputError(f"{text!r}: {SCOPE_HELP}", key="--scope")
    if kind == "tag":
        try:
            return Scope("tag", check_tag(value))
        except InputError as exc:
            raise InputError(f"{text!r}: {exc.message}", key="--scope") from None
    name = value.strip()
    if not name:
        raise InputError(f"{text!r}: name the circuit file after 'circuit:'", key="--scope")
    body = read_text(name, CircuitError, "circuit file")
    return Scope("circuit", name, hashlib.sha256(body.encode("utf-8")).hexdigest())


@dataclass(frozen=True)
class Counted:
    """What :func:`count_outcomes` found.

    Attributes
    ----------
    counts : OutcomeCounts
    scope : Scope
    logbook : str
    skipped : tuple of str
        Why sessions or faults were left out (a circuit that no longer
        parses, a part the circuit does not have).
    """

    counts: OutcomeCounts
    scope: Scope
    logbook: str
    skipped: tuple = ()

    @property
    def label(self) -> str:
        """For the learned table and reports: ``logbook site.sqlite, sessions tagged 'north'``."""
        return f"logbook {self.logbook}, {self.scope.describe()}"


def count_outcomes(book, scope: Scope | None = None) -> Counted:
    """The confirmed outcomes of a logbook's closed repair sessions in ``scope``.

    Parameters
    ----------
    book : Logbook
    scope : Scope, optional
        Default every session.

    Returns
    -------
    Counted
    """
    scope = Scope() if scope is None else scope
    if not isinstance(scope, Scope):
        raise TypeError(f"scope: expected Scope, got {type(scope).__name__}")
    where, params = ["s.purpose = 'repair'"], []
    if scope.kind == "tag":
        where.append("EXISTS (SELECT 1 FROM session_tags t WHERE t.session_id = s.id AND t.tag = ?)")
        params.append(scope.value)
    elif scope.kind == "circuit":
        where.append("s.circuit_sha256 = ?")
        params.append(scope.sha256)
    with book._lock:
        if book._conn is None:
            raise LogbookError("the logbook is closed", file=book.path)
        with book._guard():
            conn = book._conn
            rows = conn.execute(
                "SELECT s.id, s.circuit_sha256 FROM sessions s JOIN outcomes o ON o.session_id = s.id "
                f"WHERE {' AND '.join(where)} ORDER BY s.id", params).fetchall()
            found: dict = {}
            for sid, ref, mode in conn.execute(
                    "SELECT f.session_id, f.ref, f.mode FROM outcome_faults f JOIN sessions s "
                    f"ON s.id = f.session_id WHERE {' AND '.join(where)} ORDER BY f.rowid", params):
                found.setdefault(sid, []).append((ref, mode))
            texts = {}
            for sid, sha in rows:
                if sha not in texts:
                    texts[sha] = (sid, conn.execute("SELECT circuit_name, circuit_text FROM sessions "
                                                    "WHERE id = ?", (sid,)).fetchone())
    circuits, skipped = {}, []
    for sha, (sid, (name, text)) in texts.items():
        try:
            circuits[sha] = parse_circuit(text, source=f"{name} (stored in session {sid})")
        except InputError as exc:
            circuits[sha] = None
            skipped.append(f"sessions on {name} ({sha[:12]}): the stored circuit no longer "
                           f"reads ({exc.message})")
    counts = OutcomeCounts()
    mixes = {}
    for sid, sha in rows:
        c = circuits[sha]
        if c is None:
            continue
        if sha not in mixes:
            mixes[sha] = dict(Counter(p.kind for p in c.fault_parts))
        faults = []
        for ref, mode in found.get(sid, ()):
            if not c.has_part(ref) or not c.part(ref).fault_modes:
                skipped.append(f"session {sid}: {ref} is not a part that can fail on its circuit")
                continue
            faults.append((c.part(ref).kind, mode or None))
        if found.get(sid) and not faults:
            continue  # every fault named was left out: neither a fault nor a no-fault outcome
        counts.add_session(mixes[sha], faults)
    return Counted(counts, scope, book.path.name, tuple(skipped))
