"""The plain path: re-assemble and re-solve the circuit for every reading.

Slow and simple on purpose.  The meter is added to the circuit as a real part
(its input resistance across the probes; its shunt in series with the part,
on a node of its own), the faults are applied to the parts, the network is
assembled and solved from scratch.  The diagnosis engine's fast rank-one path
is checked against this in the tests, and uses it where a fault changes the
topology in a way the rank-one path does not cover.

On a circuit with semiconductors every reading is an exact nonlinear
re-solve (engine/nonlinear.py) with the meter in place: the faulted
circuit's operating point is found once and each reading's solve starts
from it (``warm``).  Power-off readings are engine/offnet.py's.  This is the
test oracle of the linearized predictions and the diagnosis's re-scorer of
its leading hypotheses.  A faulted variant with no operating point reads
``nan`` (undefined), as a singular linear one.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import SolveError
from ..model import Circuit, Part
from .factor import Factorization
from .junctions import law
from .mna import assemble
from .nonlinear import System
from .offnet import off_reading
from .predict import analysis_key, lifted_value
from .semis import split_overrides

__all__ = ["oracle_readings", "apply_faults"]

_METER = "__meter__"
_NODE = "__meter_node__"


def apply_faults(circuit: Circuit, overrides: dict) -> tuple[Circuit, dict]:
    """Split ``overrides`` into value changes applied to the parts and topology changes.

    Returns the circuit with drifted values written into its parts, and the
    overrides left for :func:`~faultfind.engine.mna.assemble` ("open", "short",
    "dead") and for the semiconductors (their strings, ``("leaky", ohms)``).
    """
    # one rule for linear and nonlinear boards (a drifted open switch conducts)
    return split_overrides(circuit, overrides)


def _solve_nonlinear(circuit, key, overrides, warm):
    """The exact operating point (and AC small-signal solution) of a circuit with semiconductors."""
    dc = System(circuit, "dc", None, overrides, floating=True)
    op = dc.solve(warm)
    if key[0] == "dc":
        return dc.linear_network(dc.jacobian(op)), op.x, op
    ac = System(circuit, "ac", key[1], overrides, floating=True)
    pos = {k: i for i, k in enumerate(dc.keys)}
    v = op.v[[pos[k] for k in ac.keys]] if ac.keys else np.zeros(0)
    _, g = law(v, ac.log_is, ac.nvt)
    A = ac.matrix(g)
    x = Factorization(A).solve(ac.b)
    return ac.linear_network(A), x, op


def _solve_live(circuit, key, overrides, warm=None):
    """Assemble and solve; a section the faults left floating gets its own reference.

    Convention: a floating section sits at the reference potential (0 V), as
    input leakage would pull a high-impedance node; an op-amp input left
    floating therefore reads 0 V and its stage responds to that.

    A floating section into which a current source drives a net current has
    no steady state (its voltage runs away): the result is ``nan``.
    """
    if circuit.is_nonlinear:
        net, x, _ = _solve_nonlinear(circuit, key, overrides, warm)
    else:
        net = assemble(circuit, key[0], key[1], overrides, floating=True)
        x = Factorization(net.A).solve(net.b)
    comp = net.reference
    ground_comp = comp[0]
    if np.any(comp != ground_comp) and len(net.inj_i):
        pos = {name: i for i, name in enumerate(net.node_names)}
        bal = {}
        for k, pi in enumerate(net.inj_ref):
            p = circuit.parts[pi]
            ca, cb = comp[pos[p.nodes[0]]], comp[pos[p.nodes[1]]]
            if ca != cb:
                bal[ca] = bal.get(ca, 0) + net.inj_i[k]
                bal[cb] = bal.get(cb, 0) - net.inj_i[k]
        if any(abs(v) > 0 for c, v in bal.items() if c != ground_comp):
            x = np.full_like(x, np.nan)
    return net, x


def _one(circuit, rd, meters, overrides, warm=None):
    key = analysis_key(circuit, rd)
    meter = meters[rd.meter or "default"]
    if key[0] == "lifted":  # the part alone: no network involved
        return lifted_value(circuit.part(rd.part), overrides.get(rd.part), meter, rd.quantity)
    if key[0] == "off":
        plus, minus = circuit.part(rd.part).nodes[:2] if rd.part else (rd.plus, rd.minus)
        if plus == minus:
            return 0.0
        if circuit.is_nonlinear or rd.quantity == "diode-test":
            return off_reading(circuit, plus, minus, rd.quantity, meter, overrides)[0]
        net = assemble(circuit, "off", None, overrides)
        if not net.connected(plus, minus):
            return np.inf
        u = net.node_vector(plus, minus)
        return Factorization(net.A).solve(u) @ u
    parts = list(circuit.parts)
    if rd.quantity == "voltage":
        parts.append(Part(_METER, "resistor", (rd.plus, rd.minus), meter.input_resistance))
        c = replace(circuit, parts=tuple(parts))
        net, x = _solve_live(c, key, overrides, warm)
        return net.node_vector(rd.plus, rd.minus) @ x[:net.size]
    # current: the meter's shunt in series with the part, on a node of its own
    p = circuit.part(rd.part)
    i = parts.index(p)
    if len(p.nodes) == 3:    # a transistor: the meter in its collector lead
        parts[i] = replace(p, nodes=(_NODE,) + tuple(p.nodes[1:]))
        ends = (p.nodes[0], _NODE)
    else:
        parts[i] = replace(p, nodes=(p.nodes[0], _NODE))
        ends = (_NODE, p.nodes[1])
    if meter.current_shunt > 0:
        parts.append(Part(_METER, "resistor", ends, meter.current_shunt))
    else:
        parts.append(Part(_METER, "voltage-source", ends, 0.0))
    c = replace(circuit, parts=tuple(parts))
    net, x = _solve_live(c, key, overrides, warm)
    if rd.part in net.indeterminate or _METER in net.indeterminate:
        return np.nan  # in a loop of ideal wires: the current is not determined
    if meter.current_shunt > 0:
        # current through the shunt from the meter node to nodes[1]: flows through the part
        i_meter = (net.node_vector(*ends) @ x) / meter.current_shunt
    else:
        kind, k = net.element[_METER]
        i_meter = x[net.n + k]  # current into the 0 V source's + terminal = through the part
    return -i_meter if p.is_source else i_meter


def oracle_readings(circuit: Circuit, readings, meters: dict, overrides: dict | None = None,
                    warm=None):
    """Readings of ``circuit`` with ``overrides`` applied, by a full re-solve per reading.

    Parameters
    ----------
    circuit : Circuit
    readings : sequence of Reading
    meters : dict
        Meter profiles including "default".
    overrides : dict, optional
        Part ref to a value, "open", "short" or "dead"; semiconductors'
        forms as engine/semis.py.
    warm : dict or OperatingPoint, optional
        Circuits with semiconductors: a nearby operating point to start from
        (e.g. the healthy board's ``Prediction.operating_point``).

    Returns
    -------
    ndarray of complex
        The complex reading (signed DC, phasor for AC, ohms); ``inf`` where an
        ohmmeter shows OL, ``nan`` where the faulted network leaves the
        reading undefined (a floating section).
    """
    c, rest = apply_faults(circuit, overrides or {})
    out = np.empty(len(readings), dtype=complex)
    if c.is_nonlinear and any(analysis_key(c, rd)[0] in ("dc", "ac") for rd in readings):
        try:   # the faulted board's own operating point: each reading starts from it
            warm = System(c, "dc", None, rest, floating=True).solve(warm)
        except SolveError:
            warm = None
    for i, rd in enumerate(readings):
        try:
            out[i] = _one(c, rd, meters, rest, warm)
        except SolveError:
            out[i] = np.nan
    return out
