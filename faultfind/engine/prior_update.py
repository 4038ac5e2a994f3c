"""Fault priors learned from confirmed outcomes: a Bayesian update of a prior table.

The prior is a :class:`~.priors.Priors` table (the handbook's, :data:`~.priors.HANDBOOK`);
the data are :class:`OutcomeCounts`, the confirmed outcomes of closed logbook
sessions reduced to counts that add (so that two teams' counts merge by
adding them).  Three parts are updated, each with the handbook as its prior
mean or mode, so that a few outcomes move the table a little and many move it
a lot:

1. **Mode shares**, per kind (per group of :data:`~.priors.MODE_GROUPS`): a
   Dirichlet prior ``Dir(A q)`` with ``q`` the handbook's shares in the group
   and ``A`` = :data:`MODE_STRENGTH` pseudo-outcomes; with ``n_m`` confirmed
   failures in mode ``m`` the learned share is the posterior mean
   ``(A q_m + n_m) / (A + n)``, which is also the posterior predictive
   probability that the kind's next failure is in mode ``m``
   (Dirichlet-multinomial; Gelman et al., *Bayesian Data Analysis*, 3rd ed.,
   section 3.4, from memory).  Failures logged without a mode do not count here.
2. **Kind weights** relative to the handbook's: kind ``k``'s weight is
   ``w_k theta_k`` with a Gamma prior of shape ``b + 1`` and rate ``b`` on
   ``theta_k`` (mode 1: the handbook's weight; ``b`` =
   :data:`RATE_PSEUDO`).  On a job with a fault, on a circuit whose parts that
   can fail are the *mix* ``c`` (``c_j`` parts of kind ``j``), the failed
   part is of kind ``k`` with probability ``c_k w_k theta_k / sum_j c_j w_j
   theta_j`` -- the rule the ranking itself uses.  The learned ``theta`` is
   the posterior mode under that likelihood, found by the MM iteration
   ``theta_k <- (n_k + b) / (b + D_k(theta))``, ``D_k = sum_c M_c c_k w_k /
   S_c(theta)`` (``M_c`` failed parts seen on mix ``c``, ``S_c = sum_j c_j
   w_j theta_j``), which raises the posterior at every step (Hunter, "MM
   algorithms for generalized Bradley-Terry models", Annals of Statistics 32,
   2004, from memory).  With a single mix and ``theta`` fixed elsewhere it is
   the familiar Poisson-gamma ratio of observed to expected failures.
   ``D_k(1)`` is the number of kind-``k`` failures the handbook expected.
3. **P(healthy)**: a Beta prior with mean ``P_HEALTHY`` worth
   :data:`HEALTHY_STRENGTH` sessions; the learned value is the posterior mean
   ``(H p0 + no_fault) / (H + sessions)``.

The strengths are design choices (no source): the handbook's shares count as
ten outcomes of each kind, its kind weights as two failures of each kind at the
handbook's rate, its ``P(healthy)`` as ten sessions.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .priors import HANDBOOK, Priors, mode_groups

__all__ = ["OutcomeCounts", "KindRow", "ModeRow", "Learned", "learn", "mix_key",
           "MODE_STRENGTH", "RATE_PSEUDO", "HEALTHY_STRENGTH"]

#: Dirichlet concentration of the handbook's mode shares (pseudo-outcomes per kind).
MODE_STRENGTH = 10.0
#: Gamma prior of a kind's weight multiplier: shape RATE_PSEUDO + 1, rate RATE_PSEUDO (mode 1).
RATE_PSEUDO = 2.0
#: Beta prior of P(healthy): worth this many sessions.
HEALTHY_STRENGTH = 10.0

_MM_TOL = 1e-12
_MM_MAX = 5000


def mix_key(kind_counts) -> tuple:
    """A mix (kind -> number of parts that can fail) as a sorted tuple of ``(kind, count)``.

    Kinds with a zero count are dropped.

    Raises
    ------
    ValueError
        A count that is not a whole number >= 0.
    """
    items = dict(kind_counts).items()
    out = []
    for kind, n in items:
        if isinstance(n, bool) or int(n) != n or n < 0:
            raise ValueError(f"kind_counts: {kind} has count {n!r}, not a whole number >= 0")
        if n:
            out.append((str(kind), int(n)))
    return tuple(sorted(out))


@dataclass
class OutcomeCounts:
    """Confirmed outcomes reduced to counts that add.

    Attributes
    ----------
    sessions : int
        Closed sessions counted (with or without a fault found).
    no_fault : int
        Of them, closed with no fault found.
    faults : dict
        ``(kind, mode)`` -> number of parts found faulty in that mode;
        ``mode`` None when the outcome did not say.
    mixes : dict
        Mix (:func:`mix_key`) -> number of faulty parts found on circuits
        with that mix of parts that can fail.
    """

    sessions: int = 0
    no_fault: int = 0
    faults: dict = field(default_factory=dict)
    mixes: dict = field(default_factory=dict)

    def __post_init__(self):
        for name in ("sessions", "no_fault"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 0:
                raise ValueError(f"{name}: must be a whole number >= 0, got {v!r}")
        if self.no_fault > self.sessions:
            raise ValueError(f"no_fault: {self.no_fault} is more than the {self.sessions} sessions")
        for what, table in (("faults", self.faults), ("mixes", self.mixes)):
            for key, v in table.items():
                if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 0:
                    raise ValueError(f"{what}: {key!r} has count {v!r}, not a whole number >= 0")

    def __add__(self, other: "OutcomeCounts") -> "OutcomeCounts":
        if not isinstance(other, OutcomeCounts):
            return NotImplemented
        faults, mixes = dict(self.faults), dict(self.mixes)
        for k, v in other.faults.items():
            faults[k] = faults.get(k, 0) + v
        for k, v in other.mixes.items():
            mixes[k] = mixes.get(k, 0) + v
        return OutcomeCounts(self.sessions + other.sessions, self.no_fault + other.no_fault,
                             faults, mixes)

    def add_session(self, mix, found) -> None:
        """Count one closed session.

        Parameters
        ----------
        mix : mapping
            Kind -> number of parts that can fail on the session's circuit.
        found : sequence of (kind, mode or None)
            The faulty parts found; empty: no fault found.
        """
        self.sessions += 1
        if not found:
            self.no_fault += 1
            return
        key = mix_key(mix)
        self.mixes[key] = self.mixes.get(key, 0) + len(found)
        for kind, mode in found:
            self.faults[(kind, mode or None)] = self.faults.get((kind, mode or None), 0) + 1

    def culprits(self, kind) -> int:
        """Faulty parts of ``kind`` found (any mode, or none given)."""
        return sum(v for (k, _), v in self.faults.items() if k == kind)

    @property
    def fault_count(self) -> int:
        """Faulty parts found, in all."""
        return sum(self.faults.values())


@dataclass(frozen=True)
class ModeRow:
    """One mode of a kind: the handbook's share, the learned one, the outcomes behind it."""

    mode: str
    handbook: float
    learned: float
    outcomes: int


@dataclass(frozen=True)
class KindRow:
    """One kind: weights, the failures found against those the handbook expected, modes.

    Attributes
    ----------
    kind : str
    handbook_weight, weight : float
        The prior's kind weight and the learned one (``handbook_weight *
        multiplier``).
    multiplier : float
        Learned weight over the prior's.
    culprits : int
        Faulty parts of this kind found.
    expected : float
        Faulty parts of this kind the prior table expected on the same jobs.
    modes : tuple of ModeRow
    """

    kind: str
    handbook_weight: float
    weight: float
    multiplier: float
    culprits: int
    expected: float
    modes: tuple


@dataclass(frozen=True)
class Learned:
    """The result of :func:`learn`.

    Attributes
    ----------
    table : Priors
        The learned table (what the ranking takes).
    prior : Priors
        The table it started from.
    kinds : tuple of KindRow
    p_healthy : tuple of (float, float)
        ``(prior, learned)`` P(healthy).
    counts : OutcomeCounts
    ignored : tuple of str
        Kinds in the counts the prior table gives no weight or no modes (their
        failures could not be used).
    iterations : int
        MM iterations the kind weights took.
    """

    table: Priors
    prior: Priors
    kinds: tuple
    p_healthy: tuple
    counts: OutcomeCounts
    ignored: tuple
    iterations: int


def _kind_multipliers(counts: OutcomeCounts, kinds, w, b):
    """MM iteration of the kind multipliers; returns (theta, expected under the prior, iterations)."""
    K = len(kinds)
    col = {k: j for j, k in enumerate(kinds)}
    mixes = [(key, m) for key, m in counts.mixes.items() if m > 0]
    C = np.zeros((len(mixes), K))
    M = np.array([m for _, m in mixes], dtype=float)
    for i, (key, _) in enumerate(mixes):
        for kind, c in key:
            if kind in col:
                C[i, col[kind]] = c
    n = np.array([counts.culprits(k) for k in kinds], dtype=float)
    theta = np.ones(K)

    def D(th):
        S = C @ (w * th)
        live = S > 0
        return w * (C[live].T @ (M[live] / S[live])) if live.any() else np.zeros(K)

    expected = D(theta)
    it = 0
    for it in range(1, _MM_MAX + 1):
        new = (n + b) / (b + D(theta))
        step = float(np.max(np.abs(np.log(new) - np.log(theta)))) if K else 0.0
        theta = new
        if step < _MM_TOL:
            break
    return theta, expected, it


def learn(counts: OutcomeCounts, prior: Priors = HANDBOOK, *, label="learned",
          mode_strength=MODE_STRENGTH, rate_pseudo=RATE_PSEUDO,
          healthy_strength=HEALTHY_STRENGTH) -> Learned:
    """The prior table updated with confirmed outcomes.

    Parameters
    ----------
    counts : OutcomeCounts
    prior : Priors, optional
        Default the handbook's table.
    label : str, optional
        The learned table's :attr:`~.priors.Priors.label`.
    mode_strength, rate_pseudo, healthy_strength : float, optional
        The prior's weight (module docstring); each > 0.

    Returns
    -------
    Learned
    """
    if not isinstance(counts, OutcomeCounts):
        raise TypeError(f"counts: expected OutcomeCounts, got {type(counts).__name__}")
    if not isinstance(prior, Priors):
        raise TypeError(f"prior: expected Priors, got {type(prior).__name__}")
    for name, v in (("mode_strength", mode_strength), ("rate_pseudo", rate_pseudo),
                    ("healthy_strength", healthy_strength)):
        if not (isinstance(v, (int, float)) and np.isfinite(v) and v > 0):
            raise ValueError(f"{name}: must be a number > 0, got {v!r}")
    seen_kinds = {k for k, _ in counts.faults} | {k for key in counts.mixes for k, _ in key}
    kinds = sorted(k for k in set(prior.kind_weights) | seen_kinds
                   if prior.weight(k) > 0 and prior.mode_shares.get(k))
    ignored = tuple(sorted(k for k in seen_kinds if k not in kinds))
    w = np.array([prior.weight(k) for k in kinds])
    theta, expected, iterations = _kind_multipliers(counts, kinds, w, float(rate_pseudo))
    weights = dict(prior.kind_weights)
    shares = {k: dict(v) for k, v in prior.mode_shares.items()}
    rows = []
    A = float(mode_strength)
    for j, kind in enumerate(kinds):
        weights[kind] = float(w[j] * theta[j])
        base = prior.mode_shares[kind]
        observed = {m: v for (k, m), v in counts.faults.items() if k == kind and m is not None}
        groups = [list(g) for g in mode_groups(kind, base)]
        for m in observed:
            if not any(m in g for g in groups):
                groups[0].append(m)
        mode_rows = []
        for g in groups:
            g_total = sum(base.get(m, 0.0) for m in g)
            if g_total <= 0:
                g_total = 1.0
            n_g = sum(observed.get(m, 0) for m in g)
            for m in g:
                q = base.get(m, 0.0) / g_total
                s = g_total * (A * q + observed.get(m, 0)) / (A + n_g)
                shares[kind][m] = float(s)
                mode_rows.append(ModeRow(m, float(base.get(m, 0.0)), float(s), int(observed.get(m, 0))))
        rows.append(KindRow(kind, float(w[j]), float(w[j] * theta[j]), float(theta[j]),
                            counts.culprits(kind), float(expected[j]), tuple(mode_rows)))
    H = float(healthy_strength)
    p_h = (H * prior.p_healthy + counts.no_fault) / (H + counts.sessions)
    table = Priors(weights, shares, float(p_h), label, counts.sessions)
    return Learned(table, prior, tuple(rows), (prior.p_healthy, float(p_h)), counts, ignored,
                   iterations)
