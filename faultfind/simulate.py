"""Simulated boards and meter readings: for drills, benchmarks and the field cases.

A simulated board is the drawn circuit with every healthy part's value drawn
inside its tolerance (uniform on the log scale, the model the tolerance bands
and the diagnosis assume), and the faults applied.  Each requested reading is
solved on that board with the meter as a real part (its loading), then shown as
the meter would: an error within its accuracy specification, rounded to the
display's resolution, ``OL`` over range.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .engine.meter import simulate as meter_display
from .engine.modelspread import model_parameters
from .engine.oracle import oracle_readings
from .model import QUANTITY_UNITS, Circuit, Reading
from .units import format_value

__all__ = ["draw_board", "simulate_readings", "fault_overrides"]

UNITS = QUANTITY_UNITS


def draw_board(circuit: Circuit, rng, model_spread: bool = False) -> Circuit:
    """A healthy board: every valued part drawn uniformly in log value within its tolerance.

    With ``model_spread`` the keys no tolerance covers (transistors' ``vbe``
    and ``gain``, zeners' ``forward_voltage``) are also drawn uniformly in log
    within :data:`~faultfind.engine.modelspread.MODEL_SPREAD`, after the
    values (the values drawn from a given ``rng`` are the same either way).
    """
    rng = np.random.default_rng(rng)
    parts = []
    for p in circuit.parts:
        if p.value is None or p.value == 0:
            parts.append(p)
            continue
        lo, hi = np.log1p(-min(p.tol_low, 0.999)), np.log1p(p.tol_high)
        parts.append(replace(p, value=float(p.value * np.exp(rng.uniform(lo, hi)))))
    if model_spread:
        index = {p.ref: k for k, p in enumerate(parts)}
        for ref, key, lo, hi in model_parameters(circuit):
            k = index[ref]
            f = np.exp(rng.uniform(np.log1p(-lo), np.log1p(hi)))
            parts[k] = replace(parts[k], **{key: float(parts[k].junction(key) * f)})
    return replace(circuit, parts=tuple(parts))


#: Leak resistance of a leaky diode planted without one (ohms): a leak a diode
#: test shows plainly; common practice (no source).
LEAK_DEFAULT = 1e3


def fault_overrides(faults) -> dict:
    """``[(ref, mode, value), ...]`` to the overrides the engine takes (a leaky diode:
    ``("leaky", ohms)``, :data:`LEAK_DEFAULT` when ``value`` is None)."""
    out = {}
    for ref, mode, value in faults:
        if mode == "drift":
            out[ref] = float(value)
        elif mode == "leaky":     # a junction's leak resistance, ohms
            out[ref] = ("leaky", float(value) if value else LEAK_DEFAULT)
        else:
            out[ref] = mode
    return out


def simulate_readings(circuit: Circuit, readings, meters: dict, faults=(), rng=None,
                      board: Circuit | None = None) -> list[Reading]:
    """Readings as a meter would show them on a (faulted) board.

    Parameters
    ----------
    circuit : Circuit
        The drawn circuit.
    readings : sequence of Reading
        What to read (values ignored).
    meters : dict
        Meter profiles with "default".
    faults : sequence of (ref, mode, value)
        Faults to plant; ``value`` is the drifted value (SI) for a drift and
        the leak resistance (ohms) for a junction's "leaky".
    rng : numpy Generator or int, optional
    board : Circuit, optional
        A board from :func:`draw_board`; drawn from ``rng`` when omitted.

    Returns
    -------
    list of Reading
        Copies of ``readings`` with ``value``, ``overrange`` and ``raw`` set.
        A reading the faulted board leaves undefined (a floating section)
        shows 0.
    """
    rng = np.random.default_rng(rng)
    if board is None:
        board = draw_board(circuit, rng)
    true = oracle_readings(board, list(readings), meters, fault_overrides(faults))
    out = []
    for rd, t in zip(readings, true):
        meter = meters[rd.meter or "default"]
        if np.isnan(t):
            t = 0.0
        if rd.quantity in ("resistance", "diode-test"):
            x = float(abs(t.real)) if np.isfinite(t) else np.inf
        elif rd.mode == "ac":
            x = float(abs(t))
        else:
            x = float(t.real)
        value, ol = meter_display(meter, rd.quantity, rd.mode, x, rng)
        raw = "OL" if ol else format_value(value, UNITS[rd.quantity], digits=6)
        out.append(replace(rd, value=value, overrange=ol, raw=raw))
    return out
