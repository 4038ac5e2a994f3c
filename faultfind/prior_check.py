"""The held-out check of learned priors: do they pick the right fault more often on new jobs?

A simulated site has its own true failure mix (a :class:`~faultfind.engine.priors.Priors`
table, e.g. the handbook's with fuses ten times as likely).  Its history is
logged as closed sessions (:func:`faultfind.learned_priors.simulate_history`);
priors are learned from the logbook; then *new* jobs from the same site are
simulated -- a fault drawn from the site's mix, a board drawn inside the
tolerances, the first readings a technician takes shown as the meter would --
and each is ranked with each candidate table.  Top-1 accuracy is the share
of jobs whose leading hypothesis is the planted fault (part and mode; the
healthy circuit when nothing was planted).  Used by tests/test_priors_heldout.py
and benchmarks/priors.py (figures in docs/accuracy.md).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .engine.hypotheses import rank
from .io.meters_file import meters_with_default
from .learned_priors import draw_site_fault
from .simulate import draw_board, simulate_readings

__all__ = ["Job", "draw_job", "drift_value", "top1", "Accuracy", "accuracy"]


@dataclass(frozen=True)
class Job:
    """One simulated job: which circuit, what was planted, what the meter showed."""

    case: int
    truth: tuple       # ((ref, mode),) or ()
    readings: tuple


def drift_value(part, rng) -> float:
    """A drifted value clearly outside the part's tolerance (the drills' rule, docs/drill.md):
    passive parts x1.5..x5 or /1.5../5 beyond the band, fuses and contacts x20..x200 the
    cold resistance, supplies 50..80 % of nominal."""
    rng = np.random.default_rng(rng)
    if part.is_source:
        return float(part.value * rng.uniform(0.5, 0.8))
    if part.kind in ("fuse", "switch"):
        return float(part.value * rng.uniform(20.0, 200.0))
    f = rng.uniform(1.5, 5.0)
    if rng.random() < 0.5:
        return float(part.value * (1 + part.tol_high) * f)
    return float(part.value * (1 - min(part.tol_low, 0.9)) / f)


def draw_job(cases, site, meters, rng, case=None) -> Job:
    """A new job from ``site``: ``cases`` is a list of ``(circuit, readings plan)``."""
    rng = np.random.default_rng(rng)
    k = int(rng.integers(len(cases))) if case is None else int(case)
    circuit, plan = cases[k]
    truth = draw_site_fault(circuit, site, rng)
    faults = [(ref, mode, drift_value(circuit.part(ref), rng) if mode == "drift" else None)
              for ref, mode in truth]
    board = draw_board(circuit, rng)
    shown = simulate_readings(circuit, plan, meters, faults, rng=rng, board=board)
    return Job(k, tuple(truth), tuple(shown))


def top1(ranking) -> tuple:
    """The leading hypothesis as ``((ref, mode), ...)`` sorted (empty: healthy)."""
    return tuple(sorted((f.ref, f.mode) for f in ranking.hypotheses[0].faults))


@dataclass(frozen=True)
class Accuracy:
    """Top-1 accuracy of each table on the same jobs.

    Attributes
    ----------
    names : tuple of str
    correct : numpy.ndarray
        Jobs x tables, True where the table's leading hypothesis was the planted fault.
    """

    names: tuple
    correct: np.ndarray

    def share(self, name) -> float:
        return float(self.correct[:, self.names.index(name)].mean())

    def stderr_of_difference(self, a, b) -> float:
        """Standard error of ``share(a) - share(b)`` (paired jobs)."""
        d = self.correct[:, self.names.index(a)].astype(float) - \
            self.correct[:, self.names.index(b)]
        return float(d.std(ddof=1) / np.sqrt(len(d))) if len(d) > 1 else float("nan")


def accuracy(cases, site, tables: dict, n, rng, meters=None) -> Accuracy:
    """Top-1 accuracy of each of ``tables`` (name -> Priors or None for the handbook's)
    on ``n`` new jobs drawn from ``site`` (jobs alternate over ``cases``)."""
    meters = meters_with_default(meters)
    rng = np.random.default_rng(rng)
    names = tuple(tables)
    correct = np.zeros((int(n), len(names)), dtype=bool)
    for i in range(int(n)):
        job = draw_job(cases, site, meters, rng, case=i % len(cases))
        circuit = cases[job.case][0]
        want = tuple(sorted(job.truth))
        with np.errstate(all="ignore"):
            for j, name in enumerate(names):
                correct[i, j] = top1(rank(circuit, list(job.readings), meters,
                                          priors=tables[name])) == want
    return Accuracy(names, correct)
