"""SPICE ``.model`` cards and the ``D`` and ``Q`` elements mapped to semiconductor parts.

Used by :mod:`faultfind.io.netlist` (``faultfind import``); the user's guide is
docs/importing-netlists.md.  SPICE's junction laws are those of the ngspice
manual (chapter 7, "Diodes" and "BJTs"): a diode passes
``IS (exp(Vj / (N Vt)) - 1)`` through its ohmic resistance ``RS``; past
its breakdown voltage ``BV`` the reverse current is ``IBV`` at ``BV`` and
grows by ``exp(dV / (N Vt))`` (ngspice's breakdown emission coefficient
``NBV`` defaults to ``N``); a bipolar transistor in the Ebers-Moll limit of
the Gummel-Poon model has ``Ic = IS (exp(Vbe / (NF Vt)) - 1)`` with
``Vbc = 0``.  faultfind's parts are given by a forward voltage at a test
current (formats.md section 4), so each card is turned into the value its
law gives there, at 25 °C (thermal voltage :data:`THERMAL_VOLTAGE`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from faultfind.io.junction_keys import IDEALITY_RANGE
from faultfind.io.netlist_syntax import split_params, spice_number
from faultfind.model import JUNCTION_DEFAULTS

__all__ = ["THERMAL_VOLTAGE", "ZENER_BV_AT_MOST", "LED_VOLTS_AT_LEAST", "Model", "parse_model",
           "diode_part", "transistor_fields"]

#: Thermal voltage kT/q at 25 °C (formats.md section 4: 25.69 mV).
THERMAL_VOLTAGE = 25.69e-3
#: A ``D`` model with ``BV`` at most this many volts becomes a zener; above it
#: (a signal or rectifier diode's rating: 75 V, 100 V, 1000 V) a diode whose
#: breakdown is not modelled, with a warning.  Small zeners run from 2.4 V to
#: 47 V (the E24 voltages of the BZX79 series, from memory).
ZENER_BV_AT_MOST = 50.0
#: A ``D`` model whose forward voltage at 10 mA is at least this becomes an
#: LED: silicon signal diodes and rectifiers stay under about 1.1 V there,
#: red LEDs start at about 1.6 V (common practice, no source).
LED_VOLTS_AT_LEAST = 1.4

# Parameters read, per model type; the rest are reported as ignored.
_DIODE_READ = {"is", "n", "rs", "bv", "ibv", "nbv", "level", "type"}
_BJT_READ = {"is", "bf", "nf", "br", "type"}
# Parameters that change the DC values (the rest: capacitances, transit times,
# noise, temperature coefficients -- no effect on a steady DC reading at 25 °C,
# though capacitances matter for AC readings).
_DIODE_DC = {"isr", "nr", "ikf", "ik", "ikr", "jsw", "ns", "rsw", "tnom", "temp"}
_BJT_DC = {"vaf", "va", "var", "vb", "ikf", "ik", "ikr", "ise", "ne", "isc", "nc", "nr",
           "rb", "irb", "rbm", "re", "rc", "tnom", "temp", "qco", "rco", "vo", "gamma"}


@dataclass
class Model:
    """One ``.model`` card.

    Attributes
    ----------
    name : str
        The model's name as written.
    type : str
        Lower-case model type (``d``, ``npn``, ``pnp``, ``nmos``, ...).
    line : int
        Its line in the netlist.
    params : dict of str to float or str
        Parameter names (lower case) to numbers; a value that is not a
        number is kept as text (``type=zener``).
    used : bool
        Set when an element uses it.
    """

    name: str
    type: str
    line: int
    params: dict = field(default_factory=dict)
    used: bool = False


def parse_model(tokens, line: int) -> tuple[Model | None, list[str]]:
    """A ``.model`` line's tokens as a :class:`Model`, and any problems in words.

    ``tokens`` start with ``.model``; parentheses and commas around the
    parameters are optional, as in SPICE.  Returns ``(None, [why])`` when
    the card has no name or type.
    """
    words = [t for t in tokens[1:] if t not in ("(", ")", ",")]
    positional, params = split_params(words)
    if len(positional) < 2:
        return None, ["a .model card needs a name and a type (.model NAME D(IS=...))"]
    problems = []
    values: dict = {}
    for key, raw in params.items():
        got = spice_number(raw)
        values[key] = got[0] if got is not None else raw.lower()
    for extra in positional[2:]:
        problems.append(f"{extra!r} in the card is not NAME=value: ignored")
    return Model(positional[0], positional[1].lower(), line, values), problems


def _number(model: Model, key: str, default: float) -> float:
    value = model.params.get(key, default)
    return value if isinstance(value, float) else default


def _ignored(model: Model, read: set, dc: set) -> list[str]:
    """Warnings naming the parameters of a card that faultfind does not use."""
    left = [k for k in model.params if k not in read]
    if not left:
        return []
    changes_dc = [k.upper() for k in left if k in dc]
    rest = [k.upper() for k in left if k not in dc]
    out = []
    if changes_dc:
        out.append(f"model {model.name}: {', '.join(changes_dc)} not used (faultfind's "
                   "junction has none of these): DC values will differ from SPICE's where "
                   "they matter")
    if rest:
        out.append(f"model {model.name}: {', '.join(rest)} not used (capacitances, "
                   "transit times, noise and temperature terms: no effect on DC readings at "
                   "25 °C)")
    return out


def diode_part(model: Model, area: float) -> tuple[str, dict, list[str]] | tuple[None, str, list]:
    """The kind and fields of a ``D`` element with this model and area factor.

    Returns
    -------
    (kind, fields, warnings) or (None, reason, [])
        ``kind`` is ``"zener"`` when ``BV`` <= :data:`ZENER_BV_AT_MOST` or
        the card says ``type=zener``; ``"led"`` when the card says
        ``type=led`` or its forward voltage at 10 mA is at least
        :data:`LED_VOLTS_AT_LEAST`; else ``"diode"``.  ``fields`` holds
        ``value`` (the forward voltage at the kind's default test current,
        ``N Vt ln(It / IS + 1) + It RS``, or a zener's ``BV + NBV Vt
        ln(It / IBV) + It RS``), ``ideality`` (``N``), ``series_resistance``
        (``RS``) and a zener's ``forward_voltage``.  ``IS`` and ``IBV`` are
        multiplied by ``area``, ``RS`` divided by it (SPICE's area factor).
        None with a reason when the card cannot be mapped (``N`` outside
        :data:`faultfind.io.junction_keys.IDEALITY_RANGE`, a ``level`` other
        than 1, a non-positive ``IS``).
    """
    vt = THERMAL_VOLTAGE
    warnings = _ignored(model, _DIODE_READ, _DIODE_DC)
    level = _number(model, "level", 1.0)
    if level != 1.0:
        return None, f"a level {level:g} diode model (only SPICE's level 1 is mapped)", []
    i_s = _number(model, "is", 1e-14) * area
    n = _number(model, "n", 1.0)
    rs = _number(model, "rs", 0.0) / area
    if not i_s > 0:
        return None, f"model {model.name} has IS = {i_s:g}: a junction needs IS above 0", []
    low, high = IDEALITY_RANGE
    if not low <= n <= high:
        return None, (f"model {model.name} has N = {n:g}, outside the {low:g} to {high:g} "
                      "faultfind takes for an emission coefficient"), []
    if rs < 0:
        return None, f"model {model.name} has RS = {rs:g}: a resistance cannot be negative", []
    kind_word = model.params.get("type")
    bv = model.params.get("bv")
    bv = bv if isinstance(bv, float) and bv > 0 else None

    def forward(current):
        return n * vt * math.log(current / i_s + 1.0) + current * rs

    if kind_word == "zener" or (bv is not None and bv <= ZENER_BV_AT_MOST
                                and kind_word != "led"):
        if bv is None:
            return None, f"model {model.name} says type=zener but gives no BV", []
        it = JUNCTION_DEFAULTS["zener"]["test_current"]
        ibv = _number(model, "ibv", 1e-3) * area
        nbv = _number(model, "nbv", n)
        if not ibv > 0:
            return None, f"model {model.name} has IBV = {ibv:g}: it must be above 0", []
        if abs(nbv - n) > 1e-12 * n:
            warnings.append(f"model {model.name}: NBV = {nbv:g} differs from N = {n:g}; "
                            "faultfind's zener has one emission coefficient, N, so the "
                            "breakdown's slope away from the test current differs")
        value = bv + nbv * vt * math.log(it / ibv) + it * rs
        if not value > 0:
            return None, (f"model {model.name}: its zener voltage at {it * 1e3:g} mA comes "
                          f"out at {value:g} V"), []
        return "zener", {"value": value, "ideality": n, "series_resistance": rs,
                         "forward_voltage": forward(it)}, warnings
    if bv is not None:
        warnings.append(f"model {model.name}: BV = {bv:g} V (reverse breakdown) not used: a "
                        f"diode has no breakdown in faultfind (a BV up to {ZENER_BV_AT_MOST:g} V "
                        "is taken as a zener); change the kind to zener if the circuit runs it "
                        "in breakdown")
    led_current = JUNCTION_DEFAULTS["led"]["test_current"]
    if kind_word == "led" or (kind_word != "diode" and forward(led_current)
                              >= LED_VOLTS_AT_LEAST):
        return "led", {"value": forward(led_current), "ideality": n,
                       "series_resistance": rs}, warnings
    it = JUNCTION_DEFAULTS["diode"]["test_current"]
    return "diode", {"value": forward(it), "ideality": n, "series_resistance": rs}, warnings


def transistor_fields(model: Model, area: float) -> tuple[dict, list[str]] | tuple[None, str]:
    """``gain`` and ``vbe`` of a ``Q`` element with this (npn or pnp) model.

    ``gain`` is ``BF`` (SPICE's default 100); ``vbe`` the base-emitter
    voltage at 1 mA collector current with the collector at the base's
    voltage, ``NF Vt ln(1 mA / (IS area) + 1)`` (``IS`` default 1e-16 A,
    ``NF`` default 1).  A card with ``NF`` other than 1 or ``BR`` other than 1
    gets a warning (faultfind's transistor has ideality 1 and reverse gain
    1, formats.md section 4); the value at 1 mA is kept.
    """
    i_s = _number(model, "is", 1e-16) * area
    bf = _number(model, "bf", 100.0)
    nf = _number(model, "nf", 1.0)
    br = _number(model, "br", 1.0)
    if not i_s > 0:
        return None, f"model {model.name} has IS = {i_s:g}: a transistor needs IS above 0"
    if not bf > 0:
        return None, f"model {model.name} has BF = {bf:g}: the current gain must be above 0"
    if not nf > 0:
        return None, f"model {model.name} has NF = {nf:g}: it must be above 0"
    warnings = _ignored(model, _BJT_READ, _BJT_DC)
    if nf != 1.0:
        warnings.append(f"model {model.name}: NF = {nf:g}; faultfind's transistor has "
                        "ideality 1, so vbe holds at 1 mA and the slope away from it differs")
    if br != 1.0:
        warnings.append(f"model {model.name}: BR = {br:g} not used (faultfind's reverse gain "
                        "is 1); only a transistor run upside down notices")
    vbe = nf * THERMAL_VOLTAGE * math.log(1e-3 / i_s + 1.0)
    return {"gain": bf, "vbe": vbe}, warnings
