"""The semiconductor keys of a circuit file (formats.md section 4): names, units, limits.

Shared by the circuit reader (:mod:`faultfind.io.circuit_file`), the writer
(:mod:`faultfind.io.circuit_writer`), the SPICE import and the circuit
editor, so that every place says the same thing about a key.  The defaults
themselves live in :mod:`faultfind.model` (``KINDS``, ``JUNCTION_DEFAULTS``,
``TRANSISTOR_DEFAULTS``); docs/circuit-files.md is the user's guide.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["JunctionKey", "JUNCTION_KEYS", "KEYS_OF", "TERMINALS", "IDEALITY_RANGE",
           "terminal_names", "key_problem", "series_drop_problem"]

#: The emission coefficient a file may give: 0.5 to 10.  Real junctions lie
#: between about 1 (an ideal junction, a zener's sharp knee) and 2 to 4
#: (LEDs, rectifiers and diode stacks); SPICE models of stacked or high-voltage
#: diodes reach 5 to 8 (common practice, no source).  Outside 0.5..10 the
#: number is almost surely a typing slip (an Is, or a resistance).
IDEALITY_RANGE = (0.5, 10.0)


@dataclass(frozen=True)
class JunctionKey:
    """One semiconductor key of a ``[[part]]``.

    Attributes
    ----------
    name : str
        The key as written in a circuit file.
    unit : str
        SI unit symbol, ``""`` for a plain number.
    zero_allowed : bool
        True when 0 is a valid value (``series_resistance``,
        ``reverse_leakage``); else the value must be above 0.
    meaning : str
        What the key is, for messages and the editor's hints.
    """

    name: str
    unit: str
    zero_allowed: bool
    meaning: str


#: Every semiconductor key other than ``value``, ``tolerance`` and ``gain``
#: (a transistor's ``gain`` is the op-amp's key, read the same way).
JUNCTION_KEYS: dict[str, JunctionKey] = {k.name: k for k in (
    JunctionKey("test_current", "A", False, "the current at which value holds"),
    JunctionKey("ideality", "", False, "the emission coefficient n"),
    JunctionKey("series_resistance", "Ω", True, "the ohmic resistance in series with the "
                "junction"),
    JunctionKey("reverse_leakage", "A", True, "the reverse current at 1 V reverse bias"),
    JunctionKey("forward_voltage", "V", False, "a zener's forward voltage at test_current"),
    JunctionKey("vbe", "V", False, "the base-emitter voltage at 1 mA collector current"),
)}

_DIODE = ("test_current", "ideality", "series_resistance", "reverse_leakage")
#: The keys (besides ref, kind, nodes, value, tolerance, label) of each kind.
KEYS_OF: dict[str, tuple[str, ...]] = {
    "diode": _DIODE,
    "led": _DIODE,
    "zener": ("test_current", "ideality", "series_resistance", "forward_voltage"),
    "npn": ("gain", "vbe"),
    "pnp": ("gain", "vbe"),
}

#: The terminals of the kinds with named ones, in the order of ``nodes``.
TERMINALS: dict[str, tuple[str, ...]] = {
    "diode": ("anode", "cathode"),
    "led": ("anode", "cathode"),
    "zener": ("anode", "cathode"),
    "npn": ("collector", "base", "emitter"),
    "pnp": ("collector", "base", "emitter"),
    "opamp": ("non-inverting input", "inverting input", "output"),
}


def terminal_names(kind: str) -> tuple[str, ...] | None:
    """The names of a kind's terminals in the order of ``nodes`` (None: not named)."""
    return TERMINALS.get(kind)


def key_problem(key: str, value: float) -> str | None:
    """What is wrong with a semiconductor key's value, or None when it is fine.

    Parameters
    ----------
    key : str
        One of :data:`JUNCTION_KEYS`.
    value : float
        The value in SI units.

    Returns
    -------
    str or None
        A sentence such as ``"test_current must be above 0 A"``; None for a
        finite value inside the key's limits (``ideality``:
        :data:`IDEALITY_RANGE`; ``series_resistance`` and ``reverse_leakage``
        0 or more; the others above 0).
    """
    spec = JUNCTION_KEYS[key]
    unit = f" {spec.unit}" if spec.unit else ""
    if not math.isfinite(value):
        return f"{key} must be a finite number"
    if key == "ideality":
        low, high = IDEALITY_RANGE
        if not low <= value <= high:
            return (f"ideality (the emission coefficient n) must be from {low:g} to {high:g}: "
                    "about 1 for an ideal junction or a zener, 1.5 to 2 for small-signal "
                    "diodes, 2 to 4 for LEDs and rectifiers")
        return None
    if spec.zero_allowed:
        if value < 0:
            return f"{key} ({spec.meaning}) must be 0{unit} or more"
        return None
    if not value > 0:
        return f"{key} ({spec.meaning}) must be above 0{unit}"
    return None


def series_drop_problem(part) -> str | None:
    """What is wrong with a junction's voltages against its series resistance, or None.

    A diode's, LED's or zener's ``value`` (and a zener's ``forward_voltage``)
    is its terminal voltage at ``test_current``, so the junction itself holds
    that voltage less ``test_current * series_resistance``
    (docs/junction-models.md).  When the drop takes all of it there is no
    junction left to model: the keys contradict each other (most often
    ``series_resistance`` or ``test_current`` typed in the wrong unit).

    Parameters
    ----------
    part : Part
        Any part; only diodes, LEDs and zeners with a series resistance are
        looked at (defaults filled in by ``Part.junction``).

    Returns
    -------
    str or None
        A sentence naming the voltage and the drop; None when the junction
        keeps a voltage above 0.
    """
    if part.kind not in ("diode", "led", "zener"):
        return None
    rs = part.junction("series_resistance")
    if not rs > 0:
        return None
    it = part.junction("test_current")
    drop = it * rs
    checks = [("value", part.value)]
    if part.kind == "zener":
        checks.insert(0, ("forward_voltage", part.junction("forward_voltage")))
    for name, volts in checks:
        if not volts > drop:
            return (f"{name} {volts:.4g} V is not above the drop across series_resistance at "
                    f"test_current ({it:.4g} A x {rs:.4g} ohm = {drop:.4g} V): the junction would "
                    "hold no voltage; check series_resistance and test_current (their units)")
    return None
