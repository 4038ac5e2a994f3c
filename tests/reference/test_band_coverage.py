"""Monte Carlo coverage of the tolerance bands, and sensitivities by differences.

Outside reference: the Monte Carlo method of JCGM 101:2008 (GUM Supplement 1,
"Propagation of distributions using a Monte Carlo method"): draw the inputs
from their distributions, evaluate the full (non-linear) model for each draw,
and count how often the result falls inside the interval under test.  The
input distribution is the one faultfind documents (faultfind/engine/bands.py,
after GUM 4.3.7): every part's value uniform on a logarithmic scale inside its
tolerance.  A ~95 % band (coverage factor 1.96, GUM G.2) capped at the worst
case should then hold between 93 % and 100 % of the healthy readings, and at
least 94 % on average over readings that several parts drive.

Sensitivities ``d value / d ln p`` are checked against central differences
of the predictions (step 1e-6 in ln p; truncation error ~1e-12 relative).

The circuits are invented: a cold-room sensor bridge, a supply-monitor
divider chain, an RC filter read at AC, and a solenoid-valve driver with an
electrolytic capacitor of -20 %/+80 % tolerance.  The default meter (10 Mohm,
1 ohm shunt) reads them all, as in the field.
"""

from __future__ import annotations

import dataclasses
import functools

import numpy as np
import pytest

from faultfind.engine.predict import predict
from faultfind.expect import expect
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

METERS = {"default": DEFAULT_METER}
N_DRAWS = 2500      # binomial standard error at 95 % coverage: 0.44 %
SEED = 20240611


def V(plus, minus="0V", mode="dc"):
    return Reading("voltage", mode, plus, minus)


def I(part, mode="dc"):
    return Reading("current", mode, part=part)


def R(part):
    return Reading("resistance", None, part=part, setup="in-circuit")


SENSOR_BRIDGE = (
    Circuit("cold room 2: evaporator sensor bridge", "0V", (
        Part("REF1", "voltage-source", ("EXC", "0V"), 5.0, 0.01, 0.01),
        Part("R1", "resistor", ("EXC", "L"), 10e3, 0.01, 0.01),
        Part("R2", "resistor", ("L", "0V"), 10e3, 0.01, 0.01),
        Part("R3", "resistor", ("EXC", "S"), 10e3, 0.01, 0.01),
        Part("RT1", "resistor", ("S", "0V"), 12e3, 0.05, 0.05, label="NTC at -18 C"),
        Part("R4", "resistor", ("L", "AMP"), 100e3, 0.05, 0.05),
        Part("R5", "resistor", ("AMP", "0V"), 220e3, 0.05, 0.05),
    )),
    [V("L"), V("S"), V("L", "S"), V("AMP"), I("REF1"), I("RT1"), R("RT1"), R("R1"), R("R5")],
)

DIVIDER_CHAIN = (
    Circuit("irrigation controller: supply monitor chain", "0V", (
        Part("PS1", "voltage-source", ("24V", "0V"), 24.0, 0.05, 0.05),
        Part("R1", "resistor", ("24V", "T1"), 22e3, 0.05, 0.05),
        Part("R2", "resistor", ("T1", "T2"), 10e3, 0.01, 0.01),
        Part("R3", "resistor", ("T2", "T3"), 4.7e3, 0.05, 0.05),
        Part("R4", "resistor", ("T3", "0V"), 2.2e3, 0.02, 0.02),
        Part("RL", "resistor", ("T2", "0V"), 100e3, 0.10, 0.10, label="ADC input"),
        Part("F1", "fuse", ("24V", "LOAD"), 0.1),
        Part("RV", "resistor", ("LOAD", "0V"), 33.0, 0.10, 0.10, label="valve coil"),
    )),
    [V("T1"), V("T2"), V("T3"), V("T1", "T3"), I("R4"), I("PS1"), I("RL"), R("R2"), R("R3"),
     V("LOAD")],
)

RC_FILTER = (
    Circuit("valve driver: two-pole RC filter", "0V", (
        Part("SG1", "voltage-source", ("IN", "0V"), 1.0, 0.02, 0.02, waveform="ac"),
        Part("R1", "resistor", ("IN", "A"), 1.5e3, 0.05, 0.05),
        Part("C1", "capacitor", ("A", "0V"), 100e-9, 0.10, 0.10),
        Part("R2", "resistor", ("A", "OUT"), 15e3, 0.05, 0.05),
        Part("C2", "capacitor", ("OUT", "0V"), 10e-9, 0.10, 0.10),
        Part("RL", "resistor", ("OUT", "0V"), 1e6, 0.05, 0.05),
    ), frequency=800.0),
    [V("A", mode="ac"), V("OUT", mode="ac"), V("A", "OUT", mode="ac"), I("C1", "ac"),
     I("SG1", "ac"), I("C2", "ac"), R("R1"), R("R2")],
)

ELECTROLYTIC = (
    Circuit("irrigation valve driver: AC-coupled sense", "0V", (
        Part("T1", "voltage-source", ("SEC", "0V"), 2.0, 0.03, 0.03, waveform="ac"),
        Part("C1", "capacitor", ("SEC", "X"), 47e-6, 0.20, 0.80, label="electrolytic"),
        Part("R1", "resistor", ("X", "0V"), 68.0, 0.05, 0.05),
        Part("PS2", "voltage-source", ("12V", "0V"), 12.0, 0.05, 0.05),
        Part("R2", "resistor", ("12V", "X"), 1e3, 0.05, 0.05),
        Part("C2", "capacitor", ("X", "0V"), 10e-6, 0.20, 0.80, label="electrolytic"),
    ), frequency=50.0),
    [V("X", mode="ac"), V("SEC", "X", mode="ac"), I("C1", "ac"), I("R1", "ac"), I("C2", "ac"),
     V("X"), I("R2"), R("R1")],
)

CASES = {"sensor bridge": SENSOR_BRIDGE, "divider chain": DIVIDER_CHAIN,
         "RC filter": RC_FILTER, "asymmetric electrolytic": ELECTROLYTIC}


def draw_circuits(circuit, rng, n):
    """``n`` copies of ``circuit`` with every part's value drawn uniformly in
    log space inside its tolerance (the model of faultfind/engine/bands.py)."""
    params = [p for p in circuit.parts if p.value is not None and p.kind != "opamp"]
    lo = np.log1p(-np.array([p.tol_low for p in params]))
    hi = np.log1p(np.array([p.tol_high for p in params]))
    u = rng.uniform(lo, hi, size=(n, len(params)))
    index = {p.ref: j for j, p in enumerate(params)}
    for row in u:
        parts = tuple(dataclasses.replace(p, value=p.value * float(np.exp(row[index[p.ref]])))
                      if p.ref in index else p for p in circuit.parts)
        yield dataclasses.replace(circuit, parts=parts)


@functools.lru_cache(maxsize=None)
def monte_carlo(name):
    """The readings of case ``name`` on N_DRAWS healthy circuits (fixed seed)."""
    circuit, readings = CASES[name]
    rng = np.random.default_rng(SEED)
    return np.array([predict(c, readings, METERS).value
                     for c in draw_circuits(circuit, rng, N_DRAWS)])


def drivers(circuit, readings):
    """How many parts drive each reading: those whose worst-case share is at
    least a tenth of the largest share."""
    pred = predict(circuit, readings, METERS)
    half = np.array([(np.log1p(circuit.part(r).tol_high) - np.log1p(-circuit.part(r).tol_low)) / 2
                     for r in pred.params])
    share = np.abs(pred.sensitivity) * half
    return (share >= 0.1 * share.max(axis=1, keepdims=True)).sum(axis=1) * (share.max(axis=1) > 0)


@pytest.mark.parametrize("name", list(CASES))
def test_band_coverage_monte_carlo(name):
    """Fraction of healthy readings inside [low, high]: 0.93..1 for each
    reading; >= 0.94 on average over the readings several parts drive."""
    circuit, readings = CASES[name]
    bands = expect(circuit, readings, METERS)
    low = np.array([b.low for b in bands])
    high = np.array([b.high for b in bands])
    assert np.all(high > low)
    values = monte_carlo(name)
    inside = (values >= low) & (values <= high)
    coverage = inside.mean(axis=0)
    report = {r.where(): round(float(c), 4) for r, c in zip(readings, coverage)}
    assert np.all(coverage >= 0.93), report
    multi = drivers(circuit, readings) >= 2
    assert multi.sum() >= 3, "the case must have readings that several parts drive"
    assert coverage[multi].mean() >= 0.94, report


@pytest.mark.parametrize("name", list(CASES))
def test_bands_are_not_needlessly_wide(name):
    """The other side of coverage: the Monte Carlo spread reaches at least
    70 % of each band's half-width on the side it extends to (so a band that
    simply covered everything would fail), and every band contains the
    nominal reading."""
    circuit, readings = CASES[name]
    bands = expect(circuit, readings, METERS)
    values = monte_carlo(name)
    for k, b in enumerate(bands):
        assert b.low <= b.expected <= b.high, readings[k].where()
        centre, half = (b.low + b.high) / 2, (b.high - b.low) / 2
        reach = np.max(np.abs(values[:, k] - centre))
        assert reach >= 0.7 * half, (readings[k].where(), reach, half)


@pytest.mark.parametrize("name", list(CASES))
def test_sensitivities_match_central_differences(name):
    """``Prediction.sensitivity`` against central differences of
    ``Prediction.value``, step 1e-6 in ln p."""
    circuit, readings = CASES[name]
    pred = predict(circuit, readings, METERS)
    h = 1e-6
    for j, ref in enumerate(pred.params):
        vals = []
        for sgn in (1, -1):
            parts = tuple(dataclasses.replace(p, value=p.value * np.exp(sgn * h))
                          if p.ref == ref else p for p in circuit.parts)
            vals.append(predict(dataclasses.replace(circuit, parts=parts), readings, METERS).value)
        fd = (vals[0] - vals[1]) / (2 * h)
        np.testing.assert_allclose(pred.sensitivity[:, j], fd, rtol=1e-6,
                                   atol=1e-9 * np.abs(pred.value).max(), err_msg=f"d/d ln {ref}")


def test_band_of_a_one_part_reading_is_that_parts_tolerance():
    """A reading that one part alone drives, in proportion to its value,
    spans exactly that part's tolerance: a lifted 100 ohm +/-5 % resistor
    reads 95..105 ohm (what a tolerance means, IEC 60062), and the AC current
    a -20 %/+80 % capacitor draws from a stiff source, I = V 2 pi f C, is
    0.8..1.8 times nominal (textbook fact).  faultfind/engine/bands.py
    documents that such a reading's band covers it fully."""
    circuit = Circuit("valve driver: spare parts on the bench", "0V", (
        Part("R7", "resistor", ("A", "0V"), 100.0, 0.05, 0.05),
        Part("SG1", "voltage-source", ("B", "0V"), 10.0, 0.0, 0.0, waveform="ac"),
        Part("C7", "capacitor", ("B", "0V"), 47e-6, 0.20, 0.80),
    ), frequency=50.0)
    readings = [Reading("resistance", None, part="R7", setup="lifted"), I("C7", "ac")]
    ideal = {"default": dataclasses.replace(DEFAULT_METER, name="ideal", current_shunt=0.0)}
    bands = expect(circuit, readings, ideal)
    i0 = 10.0 * 2 * np.pi * 50.0 * 47e-6
    assert bands[1].expected == pytest.approx(i0, rel=1e-12)
    got = [(b.low, b.high) for b in bands]
    want = [(95.0, 105.0), (0.8 * i0, 1.8 * i0)]
    np.testing.assert_allclose(got, want, rtol=1e-9)
