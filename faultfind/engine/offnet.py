"""Power-off readings with the junctions in place: the diode test and the ohmmeter.

With power off a meter drives its own test current between its probes; on
a network with junctions what it displays depends on that current
(docs/meter-model.md, docs/junction-models.md):

Diode test
    The meter is a current source of ``diode_test_current`` into the red
    probe (``plus``) whose voltage is clamped at its open-circuit voltage
    ``diode_test_voltage`` (at least :data:`KNEE_MARGIN` above the
    display's top).  The display is the voltage developed between the
    probes, ``OL`` when that is above the display's top (``diode_test_max``,
    or the open-circuit voltage if that is lower) or when the clamp takes
    more than half the test current (a reversed or open junction).
Resistance
    An auto-ranging constant-current ohmmeter
    (:func:`~.meter.ohmmeter_ranges`): on each range, lowest first, the
    range's test current is driven (clamped at the ohms open-circuit
    voltage) and the display is ``V / I``; the first range whose full scale
    holds that value is the one the meter settles on.  No range holds it:
    ``OL``.  A silicon diode forward read this way shows a few kilohms (about
    0.5 V at 100 µA on the 6 kΩ range), reversed ``OL``.

Both are exact nonlinear solves (engine/nonlinear.py) of the power-off
network plus the meter's source; the sensitivities are those of the
linearized network at that solution.  A circuit with no semiconductor
never comes here: its resistance readings are ``u^T A^{-1} u``
(engine/linpredict.py), which is what every range would show.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..model import Accuracy, Circuit, MeterProfile
from .junctions import law
from .meter import OHMS_COMPLIANCE, ohmmeter_ranges
from .nonlinear import System, junction_grad, shared_stamps
from .stamps import Stamps

__all__ = ["off_reading", "lifted_junction", "lifted_junction_sens", "diode_test_display_limit",
           "diode_test_adjoint", "CLAMP_SHARE"]

#: A diode-test or ohms reading is OL when the source's clamp takes more than
#: this share of the test current.
CLAMP_SHARE = 0.5
#: The source's clamp knee sits at least this far above the highest voltage
#: a reading can display (the diode test's top, an ohms range's full-scale
#: voltage), so that below it the clamp takes under 2e-9 of the current.
KNEE_MARGIN = 0.5


def diode_test_display_limit(meter) -> float:
    """The highest diode-test voltage the meter displays (its top or its open-circuit voltage)."""
    return min(meter.diode_test_max, meter.diode_test_voltage)


def _sens(circuit, sysm, op, u, pindex, npar):
    """``d (u^T x) / d ln p`` at an operating point of ``sysm`` (linearized network)."""
    if npar == 0:
        return np.zeros(0)
    J, lu = sysm.factors(op)
    net = sysm.linear_network(J)
    lam = lu.solve_adjoint(u)
    st = shared_stamps(Stamps.__new__(Stamps), sysm, circuit, pindex, net)
    G = st.grad_block(lam[:, None], op.x[:, None], npar, [-1])
    G = G + junction_grad(sysm, lam[:, None], op.v, npar)
    return np.asarray(G[:, 0].real, dtype=float)


def _source_solve(sysm, current, voc, warm):
    """Set the meter source (last element, last injection) and solve."""
    sysm.set_source(current, voc)
    return sysm.solve(warm)


def off_reading(circuit: Circuit, plus: str, minus: str, quantity: str, meter, overrides=None,
                pindex=None, npar=0, warm=None, keep=None):
    """A power-off reading between two nodes with the junctions in place.

    Parameters
    ----------
    circuit : Circuit
        Drifted values already in the parts.
    plus, minus : str
        Red and black probe nodes.
    quantity : {"diode-test", "resistance"}
    meter : MeterProfile
    overrides : dict, optional
        Topology overrides ("open", "short", ("leaky", ohms), transistor modes).
    pindex : dict, optional
        Parameter ref to column, for the sensitivities.
    npar : int
    warm : OperatingPoint or dict, optional
        Where Newton starts the first (or only) range's solve: the same
        reading's solution on a nearby board (the healthy one for a faulted
        variant) settles in a few iterations instead of about ten from cold.
    keep : dict, optional
        Filled with the first range's solution under ``"op"`` (a warm start
        for the same reading on a variant of the board).

    Returns
    -------
    value : float
        Volts (diode test) or ohms; ``inf`` for OL.
    sens : ndarray (npar,)
        ``d value / d ln p``; zeros for OL.
    """
    zeros = np.zeros(npar)
    if plus == minus:
        return 0.0, zeros
    if quantity == "diode-test":
        current = meter.diode_test_current
        plan = [(np.inf, current)]
        top = diode_test_display_limit(meter)
        voc = max(meter.diode_test_voltage, top + KNEE_MARGIN)
    elif quantity == "resistance":
        plan = ohmmeter_ranges(meter)
        vfs = meter.counts * meter.voltage_resolution
        voc = max(OHMS_COMPLIANCE, vfs + KNEE_MARGIN)
        top = np.inf
    else:
        raise ValueError(f"quantity: expected 'diode-test' or 'resistance', got {quantity!r}")
    sysm = _system(circuit, overrides, pindex, plus, minus, plan[0][1], voc)
    if not sysm.net0.connected(plus, minus):
        return np.inf, zeros
    ip, im = sysm.net.node_index[plus], sysm.net.node_index[minus]
    u = np.zeros(sysm.size)
    if ip >= 0:
        u[ip] += 1.0
    if im >= 0:
        u[im] -= 1.0
    op = warm
    for k, (full, cur) in enumerate(plan):
        op = _source_solve(sysm, cur, voc, op)
        if k == 0 and keep is not None:
            keep["op"] = op
        vv = float(u @ op.x)
        iclamp = float(law(op.v[-1:], sysm.log_is[-1:], sysm.nvt[-1:])[0][0])
        if iclamp > CLAMP_SHARE * cur:
            continue
        shown = vv if quantity == "diode-test" else vv / cur
        if shown > top or shown >= full:
            continue
        s = _sens(circuit, sysm, op, u, pindex or {}, npar)
        return shown, (s if quantity == "diode-test" else s / cur)
    return np.inf, zeros


def diode_test_adjoint(circuit, plus, minus, meter, op):
    """``(system, lambda)`` of a diode test on ``circuit`` (no overrides) at its solution
    ``op`` (an earlier :func:`off_reading`'s, ``keep["op"]``): the power-off system with
    the meter's source in place and ``lambda = J^-T u``, ``u`` selecting the probes, for
    the change of the display under a small change of the network's equations
    (``d display = -lambda^T dF``).  None when the probes are not connected or ``op`` is
    not a solution of that system."""
    top = diode_test_display_limit(meter)
    voc = max(meter.diode_test_voltage, top + KNEE_MARGIN)
    sysm = _system(circuit, None, None, plus, minus, meter.diode_test_current, voc)
    if not sysm.net0.connected(plus, minus) or tuple(op.keys) != sysm.keys:
        return None
    sysm.set_source(meter.diode_test_current, voc)
    ip, im = sysm.net.node_index[plus], sysm.net.node_index[minus]
    u = np.zeros(sysm.size)
    if ip >= 0:
        u[ip] += 1.0
    if im >= 0:
        u[im] -= 1.0
    _, lu = sysm.factors(op)
    return sysm, lu.solve_adjoint(u)


#: Power-off systems of the last few (circuit, overrides) pairs, the meter
#: source moved between readings instead of assembling the network again.
_CACHE: dict = {}
#: At most this many systems, of at most :data:`_CACHE_UNKNOWNS` unknowns in all.
_CACHE_SIZE = 128
_CACHE_UNKNOWNS = 200_000


def _system(circuit, overrides, pindex, plus, minus, current, voc):
    key = (id(circuit), repr(sorted((overrides or {}).items())), id(pindex))
    hit = _CACHE.get(key)
    if hit is not None and hit[0] is circuit and hit[1] is pindex:
        sysm = hit[2]
        sysm.move_source(plus, minus, current, voc)
        return sysm
    sysm = System(circuit, "off", None, overrides, source=(plus, minus, current, voc),
                  pindex=pindex)
    held = sum(v[2].size for v in _CACHE.values()) + sysm.size
    while _CACHE and (len(_CACHE) >= _CACHE_SIZE or held > _CACHE_UNKNOWNS):
        held -= _CACHE.pop(next(iter(_CACHE)))[2].size
    _CACHE[key] = (circuit, pindex, sysm)
    return sysm


def _mini(part, fault):
    """The part alone as a circuit (one leg lifted), with a drifted value applied."""
    p = part
    overrides = {}
    if fault is not None and not isinstance(fault, str) and not isinstance(fault, tuple):
        p = replace(p, value=float(fault))
        if p.kind == "switch":
            p = replace(p, state="closed")
    elif fault is not None:
        overrides[p.ref] = fault
    if len(p.nodes) != 2:
        raise ValueError(f"part {part.ref}: a lifted reading needs a two-terminal part")
    a, b = p.nodes
    if a == b:
        return None, None, overrides
    return Circuit("lifted", b, (p,)), p, overrides


#: The meter's test-current figures assumed when a caller names no meter (the
#: built-in default's, docs/meter-model.md: 6000 counts, 0.1 ohm and 0.1 mV
#: finest steps, 60 Mohm top, diode test 1 mA from 3 V, display to 2 V).
_FALLBACK = MeterProfile(
    name="default", counts=6000, input_resistance=10e6, current_shunt=1.0,
    dc_voltage=Accuracy(0.5, 2.0), ac_voltage=Accuracy(1.0, 3.0), dc_current=Accuracy(1.0, 3.0),
    ac_current=Accuracy(1.5, 3.0), resistance=Accuracy(0.5, 2.0), max_resistance=60e6,
    voltage_resolution=1e-4, current_resolution=1e-7, resistance_resolution=0.1)


def lifted_junction_sens(part, fault, meter, quantity, pindex, npar):
    """A lifted reading of ``part`` (resistance or diode test) and its sensitivity to its own value.

    ``meter`` None: the built-in default meter's test currents.
    """
    if meter is None:
        meter = _FALLBACK
    if fault == "open":
        return np.inf, np.zeros(npar)
    if fault == "short":
        return 0.0, np.zeros(npar)
    c, p, ov = _mini(part, fault)
    if c is None:
        return 0.0, np.zeros(npar)
    own = {part.ref: pindex[part.ref]} if part.ref in pindex else {}
    v, s = off_reading(c, p.nodes[0], p.nodes[1], quantity, meter, ov, own, npar)
    return v, s


def lifted_junction(part, fault=None, meter=None, quantity="resistance") -> float:
    """What the meter reads across ``part`` alone: see :func:`lifted_junction_sens`."""
    return lifted_junction_sens(part, fault, meter, quantity, {}, 0)[0]
