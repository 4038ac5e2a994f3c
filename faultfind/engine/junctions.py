"""The device laws of the semiconductors, as exponential elements.

Every semiconductor is described by a few *exponential elements* and a few
linear conductances (docs/junction-models.md; the laws are formats.md
section 4, at 25 °C).  An exponential element ``k`` has a controlling pair of
terminals ``(p, q)`` with ``v = V(p) - V(q)``, a law

    i(v) = Is (exp(v / (n Vt)) - 1)

and distributes that current over up to three terminals: the current leaving
the circuit node of terminal ``t`` into the device is ``w_t i``.  ``Is`` is
kept as its logarithm so that laws with a large offset (a zener's breakdown,
the meter's clamp) stay representable.

The kinds (``value`` is fixed at ``test_current``; ``Rs`` the part's
``series_resistance``, in series at the anode, an internal node ``j`` when
``Rs > 0``; the junction voltage at ``test_current`` is then
``value - test_current * Rs`` so that the *terminal* voltage is ``value``):

``diode``, ``led``
    One element ``(j, c)``: ``Is = It / (exp(Vj0 / (n Vt)) - 1)`` with
    ``Vj0 = value - It Rs``; ``reverse_leakage`` (amperes at 1 V) a leak
    conductance across the junction.
``zener``
    A forward element as a diode with ``forward_voltage`` at ``It``, and a
    breakdown element ``(c, j)``: ``i = It exp((w - Vz0) / (n Vt))`` (minus
    its value at zero, ``It exp(-Vz0 / (n Vt))``, which is below 1e-30 A for
    any real zener) with ``w = V(c) - V(j)``, ``Vz0 = value - It Rs``.
``npn``
    Ebers-Moll transport, ideality 1, reverse gain ``BR = 1``, forward gain
    ``BF = gain``: a forward element ``(B, E)`` with weights ``C: 1,
    B: 1/BF, E: -(1 + 1/BF)`` and a reverse element ``(B, C)`` with weights
    ``C: -(1 + 1/BR), B: 1/BR, E: 1``; ``Is = 1 mA / (exp(vbe / Vt) - 1)``
    (the forward transport current is 1 mA at ``vbe``).
``pnp``
    The same with every voltage and current reversed: control pairs
    ``(E, B)`` and ``(C, B)``, weights negated.

Every junction also carries :data:`GMIN` across it, as SPICE does.

This module imports numpy only and does no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["VT", "GMIN", "ARG_MAX", "Element", "Conductance", "Device", "device", "saturation_log",
           "law", "limit", "critical_voltage", "forward_voltage_at"]

#: Thermal voltage k T / q at 25 °C (298.15 K), CODATA 2018 exact constants:
#: 25.693 mV (formats.md section 4: 25.69 mV).
VT = 1.380649e-23 * 298.15 / 1.602176634e-19

#: Conductance across every junction (siemens), as SPICE's default gmin; it
#: keeps a node reached only through reverse-biased junctions solvable and
#: changes no reading by more than picoamperes per volt.
GMIN = 1e-12

#: ``ln`` of the current (amperes) above which a law continues as its tangent:
#: 1 kA.  Newton's iterates may pass it (the limiting brings them back); a
#: solution past it is refused (a junction straight across a supply).
ARG_MAX = math.log(1e3)

#: Collector current at which a transistor's ``vbe`` holds (formats.md section 4).
VBE_CURRENT = 1e-3
#: Reverse current gain of the transport model (formats.md section 4).
REVERSE_GAIN = 1.0


@dataclass(frozen=True)
class Element:
    """One exponential element of a device.

    Attributes
    ----------
    name : str
        Its name within the device ("forward", "breakdown", "reverse").
    p, q : str
        Terminal roles of the controlling pair (``v = V(p) - V(q)``).
    log_is : float
        ``ln Is`` (amperes).
    nvt : float
        ``n Vt`` (volts).
    out : tuple of (str, float)
        Terminal roles and weights: the current leaving that terminal's node
        into the device is ``weight * i``.
    dlog_is : float
        ``d ln Is / d ln value`` (0 for a device without a value).
    voff : float
        The knee of a law with an offset (a zener's breakdown voltage, the
        meter clamp's knee): voltage limiting works on ``v - voff`` (as
        SPICE limits a breakdown), 0 for an ordinary junction.
    """

    name: str
    p: str
    q: str
    log_is: float
    nvt: float
    out: tuple
    dlog_is: float = 0.0
    voff: float = 0.0


@dataclass(frozen=True)
class Conductance:
    """A linear conductance between two terminal roles of a device (siemens)."""

    a: str
    b: str
    g: float


@dataclass(frozen=True)
class Device:
    """A semiconductor part as elements.

    Attributes
    ----------
    ref : str
    terminals : dict
        Role to the circuit node it sits on, or None for an internal node of
        the device (the junction side of the series resistance, a lead the
        fault left floating).
    elements : tuple of Element
    conductances : tuple of Conductance
    probe : str
        The role whose lead a current reading goes through ("a" for a
        two-terminal part, "C" for a transistor).
    """

    ref: str
    terminals: dict
    elements: tuple
    conductances: tuple
    probe: str


def saturation_log(vj0: float, current: float, nvt: float) -> tuple[float, float]:
    """``ln Is`` of a junction passing ``current`` at ``vj0`` and ``d ln Is / d vj0``.

    ``Is = current / (exp(vj0 / nvt) - 1)``.
    """
    t = vj0 / nvt
    em1 = math.expm1(t) if t < 700 else math.inf
    if em1 == math.inf:
        log_em1 = t + math.log1p(-math.exp(-t))
    else:
        log_em1 = math.log(em1)
    # 1 - exp(-t) as -expm1(-t): exact for a junction voltage far below n Vt
    # (a forward voltage of 1e-30 V made it 0 and this a ZeroDivisionError)
    dlog = -(1.0 / nvt) / -math.expm1(-t) if t > 1e-300 else -math.inf
    return math.log(current) - log_em1, dlog


def _check(part, name, v, positive=True):
    if v is None or not math.isfinite(v) or (positive and v <= 0) or (not positive and v < 0):
        raise InputError(f"{name} must be {'positive' if positive else 'zero or more'}, got {v!r}",
                         part=part.ref, key=name)
    return float(v)


def device(part, override=None) -> Device:
    """The elements of a semiconductor part, with a fault override applied.

    Parameters
    ----------
    part : Part
        A diode, LED, zener, npn or pnp (``value`` already drifted if the
        override is a value).
    override : None, str or tuple
        Two-terminal parts: None, ``("leaky", ohms)`` (a leak resistance
        across the junction); "open"/"short" are handled by the assembly and
        never reach here.  Transistors: None, "short" (collector-emitter; the
        assembly adds the wire), "base-emitter-short" (likewise), "open"
        (the collector lead floats), "base-emitter-open" (the emitter lead
        floats).

    Raises
    ------
    InputError
        A key out of range, or a series resistance that leaves no junction
        voltage (``value <= test_current * series_resistance``).
    """
    kind = part.kind
    if kind in ("diode", "led", "zener"):
        it = _check(part, "test_current", part.junction("test_current"))
        n = _check(part, "ideality", part.junction("ideality"))
        rs = _check(part, "series_resistance", part.junction("series_resistance"), positive=False)
        nvt = n * VT
        value = _check(part, "value", part.value)
        a, c = part.nodes
        terms = {"a": a, "c": c, "j": None if rs > 0 else a}
        conds = [Conductance("j", "c", GMIN)]
        if rs > 0:
            conds.append(Conductance("a", "j", 1.0 / rs))
        leak = getattr(part, "reverse_leakage", None)
        if leak:
            conds.append(Conductance("j", "c", _check(part, "reverse_leakage", leak)))
        if isinstance(override, tuple) and override and override[0] == "leaky":
            conds.append(Conductance("j", "c", 1.0 / float(override[1])))
        elif override is not None:
            raise ValueError(f"overrides: {part.ref} ({kind}) cannot take {override!r} here")
        drop = it * rs
        els = []
        if kind == "zener":
            vf = _check(part, "forward_voltage", part.junction("forward_voltage"))
            if vf - drop <= 0:
                raise InputError(f"forward_voltage {vf!r} V is not above the series resistance's "
                                 f"drop at test_current ({drop:.4g} V)", part=part.ref,
                                 key="series_resistance")
            lf, _ = saturation_log(vf - drop, it, nvt)
            els.append(Element("forward", "j", "c", lf, nvt, (("j", 1.0), ("c", -1.0)), 0.0))
            vz0 = value - drop
            if vz0 <= 0:
                raise InputError(f"value {value!r} V is not above the series resistance's drop "
                                 f"at test_current ({drop:.4g} V)", part=part.ref,
                                 key="series_resistance")
            els.append(Element("breakdown", "c", "j", math.log(it) - vz0 / nvt, nvt,
                               (("c", 1.0), ("j", -1.0)), -value / nvt, vz0))
        else:
            vj0 = value - drop
            if vj0 <= 0:
                raise InputError(f"value {value!r} V is not above the series resistance's drop "
                                 f"at test_current ({drop:.4g} V)", part=part.ref,
                                 key="series_resistance")
            ls, dl = saturation_log(vj0, it, nvt)
            els.append(Element("forward", "j", "c", ls, nvt, (("j", 1.0), ("c", -1.0)),
                               dl * value))
        return Device(part.ref, terms, tuple(els), tuple(conds), "a")
    if kind in ("npn", "pnp"):
        bf = _check(part, "gain", part.junction("gain"))
        vbe = _check(part, "vbe", part.junction("vbe"))
        c, b, e = part.nodes
        terms = {"C": c, "B": b, "E": e}
        if override == "open":
            terms["C"] = None
        elif override == "base-emitter-open":
            terms["E"] = None
        elif override not in (None, "short", "base-emitter-short"):
            raise ValueError(f"overrides: {part.ref} ({kind}) cannot take {override!r}")
        ls, _ = saturation_log(vbe, VBE_CURRENT, VT)
        br = REVERSE_GAIN
        s = 1.0 if kind == "npn" else -1.0
        fwd = (("C", s), ("B", s / bf), ("E", -s * (1.0 + 1.0 / bf)))
        rev = (("C", -s * (1.0 + 1.0 / br)), ("B", s / br), ("E", s))
        if kind == "npn":
            els = (Element("forward", "B", "E", ls, VT, fwd), Element("reverse", "B", "C", ls, VT, rev))
        else:
            els = (Element("forward", "E", "B", ls, VT, fwd), Element("reverse", "C", "B", ls, VT, rev))
        conds = (Conductance("B", "E", GMIN), Conductance("B", "C", GMIN))
        return Device(part.ref, terms, els, conds, "C")
    raise ValueError(f"part {part.ref}: {kind!r} is not a semiconductor")


def law(v, log_is, nvt):
    """Current and conductance of exponential elements at control voltages ``v``.

    ``i = exp(v / nvt + ln Is) - Is`` and ``g = di/dv``; past a current of
    :data:`ARG_MAX` (1 kA) the law continues along its tangent (an overflow
    guard).
    """
    t = np.asarray(v, dtype=float) / nvt + log_is
    tc = np.minimum(t, ARG_MAX)
    e = np.exp(tc)
    g = e / nvt
    i = e * (1.0 + (t - tc)) - np.exp(log_is)
    return i, g


def critical_voltage(log_is, nvt):
    """SPICE's critical voltage ``n Vt ln(n Vt / (sqrt(2) Is))`` (where the law's curvature peaks)."""
    return nvt * (np.log(nvt / math.sqrt(2.0)) - log_is)


def limit(v_new, v_old, nvt, vcrit):
    """pn-junction voltage limiting (SPICE's ``pnjlim``), vectorized.

    Above the critical voltage a step of more than ``2 n Vt`` is replaced by
    a logarithmic one, ``v_old + n Vt ln(1 + (v_new - v_old) / n Vt)``
    (from a negative ``v_old``: ``n Vt ln(v_new / n Vt)``), so that the
    current follows the linearized current instead of the exponential.

    Returns
    -------
    v : ndarray
        The limited voltages.
    limited : ndarray of bool
    """
    v_new = np.asarray(v_new, dtype=float)
    v_old = np.asarray(v_old, dtype=float)
    big = (v_new > vcrit) & (np.abs(v_new - v_old) > 2.0 * nvt)
    out = v_new.copy()
    if big.any():
        pos = big & (v_old > 0)
        with np.errstate(invalid="ignore", divide="ignore"):
            arg = 1.0 + (v_new - v_old) / nvt
            from_pos = np.where(arg > 0, v_old + nvt * np.log(np.where(arg > 0, arg, 1.0)), vcrit)
            from_neg = nvt * np.log(np.where(v_new > 0, v_new, 1.0) / nvt)
        out = np.where(pos, from_pos, np.where(big, from_neg, out))
    return out, big


def forward_voltage_at(part, current: float) -> float:
    """Terminal voltage of a lifted diode, LED or zener (forward) passing ``current`` (closed form).

    ``V = n Vt ln(1 + I / Is) + I Rs``, the diode law inverted, with the leak
    conductances left out (they are below a nanoampere per volt).
    """
    dev = device(part)
    el = dev.elements[0]
    rs = part.junction("series_resistance")
    return el.nvt * math.log1p(current / math.exp(el.log_is)) + current * rs
