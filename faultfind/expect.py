"""What a healthy circuit should read: expected meter displays with tolerance bands.

This is the library call behind ``faultfind expect``; the terminal UI uses it
too.  It sits above the engine: it builds the readings to predict, picks the
meter profiles and turns the engine's arrays into small result objects.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .engine.meter import overrange as meter_overrange
from .engine.spread import tolerance_bands
from .io.meters_file import meters_with_default
from .model import QUANTITY_UNITS, Circuit, Reading, power_for

__all__ = ["Expected", "expect", "survey_readings", "UNITS", "power_state"]

#: Display unit of each quantity.
UNITS = QUANTITY_UNITS

PASSIVE_KINDS = ("resistor", "capacitor", "inductor", "fuse", "switch")
#: Two-terminal junction kinds (a diode-test reading across each in the survey).
JUNCTION_KINDS = ("diode", "led", "zener")


@dataclass(frozen=True)
class Expected:
    """The expected display of one reading on a healthy circuit.

    Attributes
    ----------
    reading : Reading
        The reading (its ``value`` is not used).
    expected : float or None
        What the meter would display at nominal values, with its loading;
        None when the probes have no path between them (the meter shows OL).
    low, high : float or None
        The ~95 % band of a healthy circuit (parts' tolerances; meter
        uncertainty excluded).
    sigma : float or None
        Standard deviation the tolerances cause.
    unit : str
        "V", "A" or "Ω" (a diode-test reading: "V").
    power : str
        "on" when the circuit must be energized for the reading, "off" when it
        must be isolated.
    overrange : bool
        True when the meter would show OL (no path, or above its top range).
    """

    reading: Reading
    expected: float | None
    low: float | None
    high: float | None
    sigma: float | None
    unit: str
    power: str
    overrange: bool


#: Readings whose bands are worked out together (memory: this many x the parts).
EXPECT_CHUNK = 512


def power_state(reading: Reading) -> str:
    """"off" for a resistance or diode-test reading (circuit isolated), else "on"."""
    return power_for(reading.quantity)


def survey_readings(circuit: Circuit) -> list[Reading]:
    """Every reading worth knowing on a healthy circuit.

    Every node's voltage to ground (DC, and AC when AC sources exist), every
    part's current (op-amps excepted; AC too when AC sources exist), and the
    in-circuit resistance across every two-terminal passive part (power off).
    On a board with semiconductors also: the diode test across every diode,
    LED and zener (red probe on the anode), and across each transistor's
    base-emitter and base-collector junctions in their forward direction
    (power off); a transistor's current is not surveyed.
    """
    out = []
    ground = circuit.ground
    modes = ["dc"] + (["ac"] if circuit.has_ac else [])
    for mode in modes:
        f = circuit.frequency if mode == "ac" else None
        for node in circuit.nodes:
            if node != ground:
                out.append(Reading("voltage", mode, node, ground, frequency=f))
        for p in circuit.parts:
            if p.kind not in ("opamp", "npn", "pnp"):
                out.append(Reading("current", mode, part=p.ref, frequency=f))
    for p in circuit.parts:
        if p.kind in PASSIVE_KINDS:
            out.append(Reading("resistance", None, part=p.ref, setup="in-circuit"))
    for p in circuit.parts:
        if p.kind in JUNCTION_KINDS:
            out.append(Reading("diode-test", None, part=p.ref))
        elif p.kind in ("npn", "pnp"):
            c, b, e = p.nodes
            for other in (e, c):
                plus, minus = (b, other) if p.kind == "npn" else (other, b)
                if plus != minus:
                    out.append(Reading("diode-test", None, plus, minus))
    return out


def expect(circuit: Circuit, readings=None, meters=None) -> list[Expected]:
    """Expected displays of ``readings`` (default: :func:`survey_readings`).

    Parameters
    ----------
    circuit : Circuit
        A validated circuit.
    readings : sequence of Reading, optional
        Validated readings; their values are ignored.
    meters : dict, optional
        Meter profiles by name; the built-in default is added when absent.

    Returns
    -------
    list of Expected
        In the order of ``readings``.
    """
    meters = meters_with_default(meters)
    readings = survey_readings(circuit) if readings is None else list(readings)
    if not readings:
        return []
    # readings in chunks: the bands of each reading are its own, and the work
    # arrays are readings x parts (bounded memory on a large network)
    parts = []
    for a in range(0, len(readings), EXPECT_CHUNK):
        parts.append(tolerance_bands(circuit, readings[a:a + EXPECT_CHUNK], meters))
    value, low, high, sigma = (np.concatenate([p_[k] for p_ in parts]) for k in range(4))
    out = []
    for i, rd in enumerate(readings):
        v = value[i]
        finite = bool(np.isfinite(v))
        meter = meters[rd.meter or "default"]
        ol = (not finite) or bool(meter_overrange(meter, rd.quantity, v))
        out.append(Expected(
            reading=rd,
            expected=float(v) if finite else None,
            low=float(low[i]) if finite else None,
            high=float(high[i]) if finite else None,
            sigma=float(sigma[i]) if finite else None,
            unit=UNITS[rd.quantity],
            power=power_state(rd),
            overrange=ol,
        ))
    return out
