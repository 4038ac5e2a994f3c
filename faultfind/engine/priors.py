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

``P(healthy)`` is the prior that nothing is wrong with the drawn circuit
(no fault found): technicians meet a fair share of no-fault call-outs
(intermittents, operator error, a fault elsewhere), common practice (no
source).
"""

from __future__ import annotations

import math

__all__ = ["MODE_SHARES", "KIND_WEIGHTS", "P_HEALTHY", "log_prior"]

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
}

#: Prior probability that the drawn circuit has no fault; common practice (no source).
P_HEALTHY = 0.2


def log_prior(parts, faults, total=None) -> float:
    """Log prior of a hypothesis (unnormalized across hypotheses).

    Parameters
    ----------
    parts : sequence of Part
        Every part of the circuit (for the normalization of the kind weights).
    faults : sequence of (Part, mode)
        The faulted parts; empty for the healthy circuit.
    total : float, optional
        ``sum`` of the kind weights over ``parts`` (computed when omitted).

    Returns
    -------
    float
        ``log P(healthy)`` for no fault; for k faults the product of
        ``(1 - P(healthy)) * w_kind / sum(w) * share(mode)`` over them (a
        double fault is the product of two single-fault priors, i.e. roughly
        independent failures).
    """
    if not faults:
        return math.log(P_HEALTHY)
    if total is None:
        total = sum(KIND_WEIGHTS.get(p.kind, 0.0) for p in parts if p.fault_modes)
    lp = 0.0
    for part, mode in faults:
        w = KIND_WEIGHTS.get(part.kind, 0.0)
        share = MODE_SHARES.get(part.kind, {}).get(mode, 0.0)
        if w <= 0 or share <= 0 or total <= 0:
            return -math.inf
        lp += math.log((1.0 - P_HEALTHY) * w / total * share)
    return lp
