"""Supplies in current limit: a fault that would draw more than a supply can give.

Sources are ideal in the model, so a short across a fused rail predicts
hundreds of amperes.  A supply with a ``current_limit`` (circuit-file key,
docs/circuit-files.md) cannot deliver that: a regulated supply folds back
into constant-current mode (or trips).  For the leading hypotheses,
:func:`apply_limits` works out each limited DC supply's current under the
fault (from the healthy factors, an ammeter of negligible shunt); where it
exceeds the limit, the hypothesis is predicted again with that supply as a
current source of its limit (constant-current mode, the usual behaviour of
a bench or DIN-rail supply; common practice (no source)) and re-scored.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import SolveError
from ..model import Reading
from .predict import predict

__all__ = ["supply_currents", "apply_limits", "NEGLIGIBLE_SHUNT"]

#: Shunt of the ideal ammeter used to work out fault currents (ohms).
NEGLIGIBLE_SHUNT = 1e-9


def _limited(circuit):
    return [p for p in circuit.parts
            if p.kind == "voltage-source" and p.waveform != "ac" and getattr(p, "current_limit", None)]


def supply_currents(ev, faults):
    """``[(part, current)]`` of the current-limited DC supplies under ``faults`` (A, delivered)."""
    sup = _limited(ev.circuit)
    if not sup:
        return []
    b = ev.__dict__.get("_supply_board")
    if b is None:
        meter = replace(ev.meters["default"], current_shunt=NEGLIGIBLE_SHUNT)
        b = ev._supply_board = ev.board_for([Reading("current", "dc", part=p.ref) for p in sup],
                                            {"default": meter})
    cur = b.predict_faults(list(faults)).real
    return list(zip(sup, cur))


def _override(circuit, f):
    p = circuit.part(f.ref)
    if f.mode == "drift":
        return f.value
    if f.mode == "short" and f.value and p.kind in ("resistor", "fuse"):
        return p.value * f.value / (p.value + f.value)
    return f.mode


def apply_limits(ev, hyps, top):
    """Re-predict the first ``top`` of ``hyps`` whose supplies would exceed their limit.

    Returns the list with those hypotheses replaced (``limited`` names the supplies).
    """
    if not _limited(ev.circuit):
        return hyps
    out = list(hyps)
    for i in range(min(top, len(out))):
        h = out[i]
        if not h.faults:
            continue
        over = [(p, c) for p, c in supply_currents(ev, h.faults) if np.isfinite(c) and c > p.current_limit]
        if not over:
            continue
        parts = []
        for p in ev.circuit.parts:
            hit = next((q for q, _ in over if q.ref == p.ref), None)
            parts.append(replace(p, kind="current-source", value=hit.current_limit) if hit else p)
        circuit = replace(ev.circuit, parts=tuple(parts))
        overrides = {f.ref: _override(ev.circuit, f) for f in h.faults}
        try:
            pred = np.asarray(predict(circuit, ev.readings, ev.meters, overrides=overrides).value, dtype=float)
        except (SolveError, ValueError, ArithmeticError, np.linalg.LinAlgError):
            continue
        if np.isnan(pred).any():
            continue
        new = ev.make(list(h.faults), pred, drift_sd=h.drift_sd, occam=h.occam)
        new.limited = tuple(q.ref for q, _ in over)
        out[i] = new
    return out
