"""Prior probabilities of faults: which part, and which failure mode.

Two factors make the prior of "part P has failed in mode M":

* a relative failure weight of P's kind (how often a part of that kind is the
  culprit on a failed unit), and
* the share of mode M among that kind's failures.

Mode shares follow the failure-mode distributions published in MIL-HDBK-338B
(Electronic Reliability Design Handbook, 1998), section 7, table of failure
mode distributions drawn from the RAC's FMD-91 data (from memory: the figures
below are rounded recollections, not a copy of the table; check them against
the handbook before relying on a digit).  Kinds whose modes the handbook does
not split the way formats.md does are marked "common practice (no source)".

The kind weights are common practice (no source): mechanical contacts, fuses
and supplies are the usual culprits on site; film resistors seldom are.
Semiconductors (diode, zener, LED, npn, pnp) sit between film resistors and
contacts, in the order of MIL-HDBK-217F's base failure rates (from memory).

``P(healthy)`` is the prior that nothing is wrong with the drawn circuit
(no fault found): technicians meet a fair share of no-fault call-outs
(intermittents, operator error, a fault elsewhere), common practice (no
source).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["MODE_SHARES", "KIND_WEIGHTS", "P_HEALTHY", "MODE_GROUPS", "Priors", "HANDBOOK",
           "log_prior"]

#: Share of each failure mode among a kind's failures.
MODE_SHARES = {
    # MIL-HDBK-338B, fixed film resistor: open 59 %, parameter change 36 %, short 5 % (from memory)
    "resistor": {"open": 0.59, "drift": 0.36, "short": 0.05},
    # MIL-HDBK-338B, fixed ceramic capacitor: short 49 %, change of value 29 %, open 22 % (from memory)
    "capacitor": {"short": 0.49, "drift": 0.29, "open": 0.22},
    # MIL-HDBK-338B, coil / inductor: short 42 %, open 42 %, change of value 16 % (from memory)
    "inductor": {"short": 0.42, "open": 0.42, "drift": 0.16},
    # fuses on site: blown far more often than aged; common practice (no source)
    "fuse": {"open": 0.90, "drift": 0.10},
    # closed contacts fail open or with high resistance; an open contact welds shut;
    # common practice (no source)
    "switch": {"open": 0.70, "drift": 0.30, "short": 1.0},
    # power supplies: no output vs. output out of limits; common practice (no source)
    "voltage-source": {"dead": 0.5, "drift": 0.5},
    "current-source": {"dead": 0.5, "drift": 0.5},
    # Semiconductors.  MIL-HDBK-338B, diode, general: short 49 %, open 36 %, parameter
    # change 15 % (from memory).  The handbook's parameter change holds both a leaky
    # junction and a forward voltage out of tolerance; it is split here 9 % leaky,
    # 6 % drift, common practice (no source: leakage is the commoner of the two).
    "diode": {"short": 0.49, "open": 0.36, "leaky": 0.09, "drift": 0.06},
    # MIL-HDBK-338B, diode, zener (voltage regulator / reference): parameter change 69 %,
    # open 18 %, short 13 % (from memory); the parameter change is the zener voltage's drift.
    "zener": {"drift": 0.69, "open": 0.18, "short": 0.13},
    # MIL-HDBK-338B, optoelectronic LED: open 70 %, short 30 % (from memory), scaled to
    # 90 % to leave 10 % to a forward voltage out of tolerance (an aged or overdriven
    # die), common practice (no source).
    "led": {"open": 0.63, "short": 0.27, "drift": 0.10},
    # MIL-HDBK-338B, transistor, bipolar: short 73 %, open 27 % (from memory).  The
    # handbook does not say which junction; the split between the collector-emitter
    # path and the base-emitter junction (shorts 43 / 30, opens 14 / 13) is common
    # practice (no source): a punched-through C-E path is the usual dead driver.
    "npn": {"short": 0.43, "base-emitter-short": 0.30, "open": 0.14, "base-emitter-open": 0.13},
    "pnp": {"short": 0.43, "base-emitter-short": 0.30, "open": 0.14, "base-emitter-open": 0.13},
}

#: Relative chance that a part of this kind is the failed one; common practice (no source).
KIND_WEIGHTS = {
    "resistor": 1.0,
    "capacitor": 2.0,
    "inductor": 2.0,
    "fuse": 3.0,
    "switch": 4.0,
    "voltage-source": 4.0,
    "current-source": 4.0,
    "opamp": 0.0,
    # Semiconductors: the order of the base failure rates of MIL-HDBK-217F (from
    # memory: small-signal diodes of the order of film resistors to twice that, zeners
    # and LEDs a few times, low-frequency bipolar transistors a few times more), and
    # on site a driver transistor or an LED is a usual culprit; common practice
    # (no source) for the figures themselves.
    "diode": 1.5,
    "zener": 2.0,
    "led": 2.0,
    "npn": 2.5,
    "pnp": 2.5,
}

#: Prior probability that the drawn circuit has no fault; common practice (no source).
P_HEALTHY = 0.2

#: Modes that share one failure budget: a part can only have the modes of one
#: group (a closed switch fails open or high; an open one welds shut).  Kinds
#: not listed have one group of all their modes.
MODE_GROUPS = {"switch": (("open", "drift"), ("short",))}


def mode_groups(kind, shares) -> tuple:
    """The groups of :data:`MODE_GROUPS` for ``kind``, else one group of the modes in ``shares``."""
    return MODE_GROUPS.get(kind, (tuple(shares),))


@dataclass(frozen=True)
class Priors:
    """A table of fault priors: the kind weights, mode shares and ``P(healthy)``.

    :data:`HANDBOOK` is the table of this module; a table learned from
    confirmed outcomes (:func:`faultfind.engine.prior_update.learn`) has the
    same shape.

    Attributes
    ----------
    kind_weights : dict
        Kind -> relative chance that a part of that kind is the failed one.
    mode_shares : dict
        Kind -> mode -> share of that mode among the kind's failures (within
        its group of :data:`MODE_GROUPS`).
    p_healthy : float
        Prior that the drawn circuit has no fault.
    label : str
        Where the table comes from, for reports ("handbook", "logbook
        bp.sqlite, scope tag:north").
    outcomes : int
        Confirmed outcomes (closed sessions) behind the table; 0 for the handbook.
    """

    kind_weights: dict
    mode_shares: dict
    p_healthy: float
    label: str = "handbook"
    outcomes: int = 0

    def __post_init__(self):
        if not (0.0 < self.p_healthy < 1.0):
            raise ValueError(f"p_healthy: must be between 0 and 1, got {self.p_healthy!r}")
        for kind, w in self.kind_weights.items():
            if not (w >= 0.0 and math.isfinite(w)):
                raise ValueError(f"kind_weights: {kind} has weight {w!r}, not a finite number >= 0")
        for kind, shares in self.mode_shares.items():
            for mode, s in shares.items():
                if not (0.0 <= s <= 1.0):
                    raise ValueError(f"mode_shares: {kind} {mode} has share {s!r}, not in 0..1")

    def weight(self, kind) -> float:
        """The kind's weight (0 for a kind the table does not know)."""
        return float(self.kind_weights.get(kind, 0.0))

    def share(self, kind, mode) -> float:
        """The mode's share among the kind's failures (0 when unknown)."""
        return float(self.mode_shares.get(kind, {}).get(mode, 0.0))

    def total(self, parts) -> float:
        """Sum of the kind weights over the parts that can fail."""
        return sum(self.weight(p.kind) for p in parts if p.fault_modes)

    def log_prior(self, parts, faults, total=None) -> float:
        """:func:`log_prior` with this table."""
        return log_prior(parts, faults, total, table=self)

    def mass(self, part, mode, total) -> float:
        """Prior of the single fault ``(part, mode)`` on a circuit whose weights sum to ``total``."""
        w, s = self.weight(part.kind), self.share(part.kind, mode)
        if w <= 0 or s <= 0 or total <= 0:
            return 0.0
        return (1.0 - self.p_healthy) * w / total * s


def log_prior(parts, faults, total=None, *, table=None) -> float:
    """Log prior of a hypothesis (unnormalized across hypotheses).

    Parameters
    ----------
    parts : sequence of Part
        Every part of the circuit (for the normalization of the kind weights).
    faults : sequence of (Part, mode)
        The faulted parts; empty for the healthy circuit.
    total : float, optional
        ``sum`` of the kind weights over ``parts`` (computed when omitted).
    table : Priors, optional
        The table to use; default :data:`HANDBOOK`.

    Returns
    -------
    float
        ``log P(healthy)`` for no fault; for k faults the product of
        ``(1 - P(healthy)) * w_kind / sum(w) * share(mode)`` over them (a
        double fault is the product of two single-fault priors, i.e. roughly
        independent failures).
    """
    table = HANDBOOK if table is None else table
    if not faults:
        return math.log(table.p_healthy)
    if total is None:
        total = table.total(parts)
    lp = 0.0
    for part, mode in faults:
        m = table.mass(part, mode, total)
        if m <= 0:
            return -math.inf
        lp += math.log(m)
    return lp


#: The table of this module: the handbook's mode shares, common-practice kind weights.
HANDBOOK = Priors(KIND_WEIGHTS, MODE_SHARES, P_HEALTHY, "handbook")
