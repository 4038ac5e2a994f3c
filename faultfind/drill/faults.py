"""The hidden fault: checking a trainer's ``--fault``, drawing one the readings can find."""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass

import numpy as np

from ..advise import candidate_readings
from ..engine.meter import spec_limit
from ..engine.oracle import oracle_readings
from ..engine.priors import HANDBOOK
from ..errors import InputError
from ..expect import expect
from ..io.meters_file import meters_with_default
from ..model import Circuit, fault_mode_name
from ..simulate import fault_overrides
from ..units import format_value, parse_value

__all__ = ["DrillFault", "check_fault", "parse_fault", "draw_fault"]


# -- faults ------------------------------------------------------------------------------


@dataclass(frozen=True)
class DrillFault:
    """A fault as a drill names it: the hidden fault, or an apprentice's verdict.

    Attributes
    ----------
    ref : str or None
        The faulty part; None for "no fault" (a healthy unit).
    mode : str or None
        One of the part's fault modes.
    value : float or None
        For a drift: the actual (hidden fault) or named (verdict) value, SI;
        for a leaky diode: its leak resistance in ohms (a verdict need not
        name it).
    """

    ref: str | None = None
    mode: str | None = None
    value: float | None = None

    def as_tuple(self) -> tuple:
        return (self.ref, self.mode, self.value)

    def to_json(self) -> dict | None:
        return None if self.ref is None else {"ref": self.ref, "mode": self.mode,
                                               "value": self.value}

    def describe(self, circuit: Circuit) -> str:
        """``F1 open``, ``R9 drift 6.8 kΩ (+45 % of 4.7 kΩ)``, ``no fault (healthy unit)``."""
        if self.ref is None:
            return "no fault (a healthy unit)"
        if self.mode == "leaky" and self.value is not None:
            return f"{self.ref} leaky (about {format_value(self.value, 'Ω')} across it)"
        if self.mode != "drift" or self.value is None:
            return f"{self.ref} {self.mode}"
        p = circuit.part(self.ref)
        ratio = self.value / p.value
        rel = f"{(ratio - 1) * 100:+.0f} %" if 1 / 3 <= ratio <= 3 else f"x{ratio:.3g}"
        return (f"{self.ref} drift {format_value(self.value, p.info.unit)} ({rel} of "
                f"{format_value(p.value, p.info.unit)})")


def _hint(name, choices, what="parts") -> str:
    """``; did you mean 'F1'?`` and the full list when it is short."""
    choices = list(choices)
    close = difflib.get_close_matches(name, choices, n=1, cutoff=0.5)
    out = f"; did you mean {close[0]!r}?" if close else ""
    if len(choices) <= 12:
        out += f"; the circuit's {what} are {', '.join(choices)}"
    return out


def check_fault(circuit: Circuit, ref, mode, value=None, *, what="fault") -> DrillFault:
    """A checked :class:`DrillFault` on ``circuit``.

    Parameters
    ----------
    circuit : Circuit
    ref : str or None
        A part of the circuit; None (or ``"none"``) for no fault.
    mode : str
        One of the part's fault modes (case-insensitive).
    value : str, float or None
        A drift's value, required for a drift and refused otherwise: a number
        in SI units or text with a prefix (``"6k8"``, ``"17.2 V"``).
    what : str, optional
        The argument's name for messages (``"--fault"``, ``"verdict"``).

    Returns
    -------
    DrillFault

    Raises
    ------
    InputError
        An unknown part (with a suggestion), a mode the part cannot have, a
        drift without a value or with one that does not parse or is not
        positive, a value given for another mode.
    """
    if ref is None or str(ref).strip().lower() in ("none", "no-fault", "healthy"):
        if mode not in (None, "") or value not in (None, ""):
            raise InputError("'none' (no fault) takes no mode or value", key=what)
        return DrillFault()
    ref = str(ref).strip()
    if not circuit.has_part(ref):
        refs = [p.ref for p in circuit.parts]
        raise InputError(f"{ref!r} is not a part of the circuit{_hint(ref, refs)}", key=what)
    part = circuit.part(ref)
    mode = fault_mode_name(mode)
    modes = part.fault_modes
    if mode not in modes:
        raise InputError(f"{mode or 'no mode'!r} is not a fault mode of {ref} ({part.kind}): "
                         f"{', '.join(modes) or 'it has none'}", part=ref, key=what)
    if mode == "leaky" and value not in (None, ""):   # the leak's resistance, optional
        try:
            v = parse_value(value, "Ω", what=f"{ref}'s leak") if isinstance(value, str) else float(value)
        except (InputError, TypeError, ValueError) as exc:
            raise InputError(getattr(exc, "message", str(exc)), part=ref, key=what) from None
        if not (math.isfinite(v) and v > 0):
            raise InputError(f"a leak resistance must be above zero, got {value!r}", part=ref, key=what)
        return DrillFault(ref, "leaky", v)
    if mode != "drift":
        if value not in (None, ""):
            raise InputError(f"only a drift or a leak takes a value; '{ref} {mode}' takes none",
                             part=ref, key=what)
        return DrillFault(ref, mode)
    unit = part.info.unit
    if value in (None, ""):
        raise InputError(f"a drift needs the value: e.g. '{ref} drift "
                         f"{format_value(part.value * 1.5, unit)}'", part=ref, key=what)
    if isinstance(value, str):
        try:
            v = parse_value(value, unit, what=f"{ref}'s value")
        except InputError as exc:
            raise InputError(exc.message, part=ref, key=what) from None
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"the value must be a number or text, got {value!r}", part=ref, key=what)
    else:
        v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"a drifted value must be above zero, got {value!r}", part=ref, key=what)
    return DrillFault(ref, "drift", v)


def parse_fault(text, circuit: Circuit, *, what="--fault") -> DrillFault:
    """A fault written ``REF:MODE``, ``REF:drift:VALUE`` or ``none`` (a trainer's choice).

    Raises
    ------
    InputError
        Not in that form, or not valid for the circuit (:func:`check_fault`).
    """
    if not isinstance(text, str) or not text.strip():
        raise InputError("write REF:MODE, REF:drift:VALUE or none (e.g. F1:open, R9:drift:6k8)",
                         key=what)
    bits = text.strip().split(":")
    if len(bits) == 1 and bits[0].lower() in ("none", "no-fault", "healthy"):
        return DrillFault()
    if len(bits) not in (2, 3):
        raise InputError(f"{text!r}: write REF:MODE, REF:drift:VALUE or none (e.g. F1:open, "
                         "R9:drift:6k8)", key=what)
    return check_fault(circuit, bits[0], bits[1], bits[2] if len(bits) == 3 else None, what=what)


def _displays(readings, values) -> np.ndarray:
    """Complex network values to displays (signed DC, RMS for AC, ohms; inf for OL)."""
    out = np.empty(len(readings))
    for i, (rd, t) in enumerate(zip(readings, values)):
        t = 0.0 if np.isnan(t) else t
        if rd.quantity == "resistance":
            out[i] = abs(t.real) if np.isfinite(t) else np.inf
        else:
            out[i] = abs(t) if rd.mode == "ac" else t.real
    return out


def _faulted(circuit, readings, meters, fault: DrillFault) -> np.ndarray:
    """Displays of ``readings`` on the nominal circuit with ``fault`` (no meter error)."""
    faults = [] if fault.ref is None else [fault.as_tuple()]
    return _displays(readings, oracle_readings(circuit, list(readings), meters,
                                               fault_overrides(faults)))


def _outside(e, value, meters, rd, k=2.0) -> int:
    """-1/+1 when ``value`` is below/above the healthy band ``e`` widened by ``k`` meter
    accuracy limits, else 0 (OL counts as above)."""
    meter = meters[rd.meter or "default"]
    ol = (not np.isfinite(value) or (rd.quantity == "resistance" and value > meter.max_resistance)
          or (rd.quantity == "diode-test" and value > meter.diode_test_max))
    if e.overrange or e.expected is None:
        return 0 if ol else -1
    if ol:
        return 1
    a = float(spec_limit(meter, rd.quantity, rd.mode, abs(value)))
    return 1 if value > e.high + k * a else (-1 if value < e.low - k * a else 0)


def _drift_value(part, rng) -> float:
    if part.is_semiconductor:   # a forward or zener voltage clearly out of its tolerance
        if rng.random() < 0.5:
            f = rng.uniform((1 + part.tol_high) * 1.15, 1.6)
        else:
            f = rng.uniform(0.65, (1 - part.tol_low) / 1.15)
        return float(f"{part.value * f:.3g}")
    if part.is_source:  # a sagging supply
        f = rng.uniform(0.5, 0.8)
    elif part.kind in ("fuse", "switch"):  # a high-resistance contact or fuse
        f = math.exp(rng.uniform(math.log(20), math.log(200)))
    elif rng.random() < 0.5:  # clearly above the tolerance
        lo = max(1.5, (1 + part.tol_high) * 1.3)
        f = math.exp(rng.uniform(math.log(lo), math.log(lo * 10 / 3)))
    else:  # clearly below it
        hi = min(1 / 1.5, (1 - part.tol_low) / 1.3)
        f = math.exp(rng.uniform(math.log(hi * 0.3), math.log(hi)))
    return float(f"{part.value * f:.3g}")


def _probes(circuit, meters):
    cands = candidate_readings(circuit, [p.ref for p in circuit.parts if p.kind != "opamp"])
    return cands, expect(circuit, cands, meters)


def _detectable(circuit, fault, meters, probes) -> bool:
    cands, bands = probes
    values = _faulted(circuit, cands, meters, fault)
    return any(_outside(e, v, meters, rd) for rd, e, v in zip(cands, bands, values))


def draw_fault(circuit: Circuit, rng, meters=None, priors=None) -> DrillFault:
    """One fault from the failure-mode priors that some reading would show.

    Parameters
    ----------
    circuit : Circuit
    rng : numpy Generator or int
    meters : dict, optional
    priors : Priors, optional
        The failure priors to draw from (e.g. learned from a site's outcomes,
        docs/priors.md); default the handbook's.

    Returns
    -------
    DrillFault
        Part and mode drawn with the weights of the priors (kind weight times
        mode share, :mod:`faultfind.engine.priors`); a drift's value clearly outside the
        tolerance (passive parts x1.5..x5 or /1.5../5 beyond it, fuses and
        contacts x20..x200, supplies 50..80 % of nominal), three significant
        digits.  A fault no candidate reading (node voltages, currents,
        in-circuit and lifted resistances, AC at other frequencies) would show
        outside its healthy band is redrawn.

    Raises
    ------
    InputError
        No fault of the circuit would show on any reading.
    """
    rng = np.random.default_rng(rng)
    meters = meters_with_default(meters)
    opts = [(p, m) for p in circuit.parts for m in p.fault_modes]
    table = HANDBOOK if priors is None else priors
    w = np.array([table.weight(p.kind) * table.share(p.kind, m) for p, m in opts])
    probes = _probes(circuit, meters)
    while w.sum() > 0:
        i = int(rng.choice(len(opts), p=w / w.sum()))
        part, mode = opts[i]
        value = None
        if mode == "drift":
            value = _drift_value(part, rng)
        elif mode == "leaky":   # a leak a diode test shows: 100 ohm .. 5 kohm
            value = float(f"{math.exp(rng.uniform(math.log(100), math.log(5000))):.2g}")
        fault = DrillFault(part.ref, mode, value)
        if _detectable(circuit, fault, meters, probes):
            return fault
        w[i] = 0.0
    raise InputError("no fault faultfind can plant in this circuit would show on a reading: "
                     "set one with --fault", file=circuit.source)
