"""Fault priors learned from confirmed outcomes: the library calls behind ``--priors`` / ``--scope``.

The ranking's priors are the handbook's table (:mod:`faultfind.engine.priors`)
unless a caller passes a learned one.  This module makes the learned table
from a logbook (its closed repair sessions in a scope) or from an
outcome-counts file (:mod:`faultfind.io.priors_file`), and simulates an
outcome history for demonstrations and the held-out check (docs/priors.md)::

    learned = from_logbook("site.sqlite", "tag:north-pumps")
    d = diagnose(circuit, readings, priors=learned.table)
"""

from __future__ import annotations

import os

import numpy as np

from .engine.prior_update import Learned, OutcomeCounts, learn
from .engine.priors import HANDBOOK, Priors
from .errors import CircuitError, InputError
from .io.circuit_file import load_circuit
from .io.logbook import Logbook
from .io.outcome_counts import Scope, count_outcomes, parse_scope
from .io.priors_file import merge_counts, read_counts
from .io.session_tags import add_tags
from .io.textfile import read_text

__all__ = ["from_logbook", "from_counts_file", "from_counts", "choose", "site_table",
           "draw_site_fault", "simulate_history"]


def from_counts(counts: OutcomeCounts, label: str, prior: Priors = HANDBOOK) -> Learned:
    """:func:`~faultfind.engine.prior_update.learn` with the handbook as the prior."""
    return learn(counts, prior, label=label)


def from_logbook(book, scope="all") -> Learned:
    """Priors learned from a logbook's closed repair sessions in ``scope``.

    Parameters
    ----------
    book : Logbook, str, os.PathLike or None
        An open logbook, or its file (opened without creating it; None: the
        default logbook, ``$FAULTFIND_LOGBOOK`` or the user's data folder).
    scope : str or Scope
        ``all``, ``tag:NAME`` or ``circuit:FILE`` (:func:`~faultfind.io.outcome_counts.parse_scope`).

    Returns
    -------
    Learned
        Its ``table.label`` names the logbook and the scope.
    """
    scope = scope if isinstance(scope, Scope) else parse_scope(scope)
    if isinstance(book, Logbook):
        counted = count_outcomes(book, scope)
    else:
        with Logbook(book, create=False) as b:
            counted = count_outcomes(b, scope)
    return from_counts(counted.counts, counted.label)


def from_counts_file(paths) -> Learned:
    """Priors learned from one or more outcome-counts files (their counts added)."""
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    paths = list(paths)
    if not paths:
        raise InputError("name at least one outcome-counts file", key="--priors")
    counts = merge_counts(paths)
    names = ", ".join(os.path.basename(os.fspath(p)) for p in paths)
    return from_counts(counts, f"file {names}")


def choose(priors_file=None, logbook=None, scope=None) -> Learned | None:
    """The learned priors a command's ``--priors FILE`` or ``--scope`` (with ``--logbook``) ask for.

    ``--priors`` and ``--scope`` exclude each other; with neither the
    handbook's table is meant and None is returned.

    Raises
    ------
    InputError
        Both given; the file or logbook cannot be read.
    """
    if priors_file is not None and scope is not None:
        raise InputError("give --priors FILE or --scope (with --logbook), not both", key="--priors")
    if priors_file is not None:
        return from_counts_file(priors_file)
    if scope is not None:
        return from_logbook(logbook, scope)
    return None


# -- a simulated site ----------------------------------------------------------------------


def site_table(kind_factors=None, mode_shares=None, p_healthy=None, label="simulated site") -> Priors:
    """A site's true failure mix: the handbook's table with some kinds' weights scaled.

    Parameters
    ----------
    kind_factors : dict, optional
        Kind -> factor on the handbook's weight (``{"fuse": 10}``: fuses fail
        ten times as often).
    mode_shares : dict, optional
        Kind -> mode -> share replacing the handbook's for that kind.
    p_healthy : float, optional
    """
    weights = dict(HANDBOOK.kind_weights)
    for k, f in (kind_factors or {}).items():
        if k not in weights:
            raise ValueError(f"kind_factors: unknown kind {k!r}")
        weights[k] = weights[k] * float(f)
    shares = {k: dict(v) for k, v in HANDBOOK.mode_shares.items()}
    for k, v in (mode_shares or {}).items():
        shares[k] = dict(v)
    return Priors(weights, shares, HANDBOOK.p_healthy if p_healthy is None else p_healthy, label)


def draw_site_fault(circuit, table: Priors, rng):
    """One job's truth on a site: ``()`` (no fault) or ``((ref, mode),)`` drawn from ``table``."""
    rng = np.random.default_rng(rng)
    if rng.random() < table.p_healthy:
        return ()
    total = table.total(circuit.parts)
    opts = [(p, m) for p in circuit.fault_parts for m in p.fault_modes]
    w = np.array([table.mass(p, m, total) for p, m in opts])
    i = int(rng.choice(len(opts), p=w / w.sum()))
    return ((opts[i][0].ref, opts[i][1]),)


def simulate_history(book, circuit_file, table: Priors, n, rng, *, tag=None, unit="SIM-1"):
    """Log ``n`` closed repair sessions whose confirmed outcomes follow ``table``.

    Each session is started on ``circuit_file``, tagged ``tag`` (if given) and
    closed with a fault drawn by :func:`draw_site_fault` (no readings: only the
    outcomes matter for learning).  For demonstrations and tests; the sessions
    say "simulated" in their notes.

    Returns
    -------
    list of tuple
        The outcomes logged, in order.
    """
    rng = np.random.default_rng(rng)
    circuit = load_circuit(circuit_file)
    text = read_text(circuit_file, CircuitError, "circuit file")
    out = []
    for _ in range(int(n)):
        truth = draw_site_fault(circuit, table, rng)
        s = book.start_session(circuit_file, unit=unit, circuit_text=text,
                               technician="simulated", caution_acknowledged=True)
        if tag is not None:
            add_tags(book, s.id, [tag])
        book.close_session(s.id, list(truth), confirmed_by="simulated outcome",
                           notes="simulated outcome history (faultfind.learned_priors)")
        out.append(truth)
    return out
