"""A drift whose best value sits at an end of the search range pays its Occam factor.

References:
* the Occam factor of a fitted parameter -- the evidence is the likelihood
  integrated over the parameter's prior, i.e. the best fit times (posterior
  width / prior width) -- is Bayesian model comparison as in MacKay,
  *Information Theory, Inference, and Learning Algorithms*, ch. 28 (from
  memory); here it is checked against the integrals of two likelihoods whose
  integrals are known in closed form (a flat one and a step);
* that a cracked low-ohm link in a mesh reads like an open one whatever its
  resistance above a thousand times its value, so that the one-parameter
  drift must not beat the open on its free parameter alone, is common
  practice (no source).
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from faultfind.diagnose import diagnose
from faultfind.engine.drifts import _edge_occam
from faultfind.engine.priors import MODE_SHARES
from faultfind.io.meters_file import meters_with_default, parse_meters
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import simulate_readings

GROUND = "0V"


def test_flat_likelihood_costs_nothing():
    # every value of the range fits equally: the integral is the prior width
    g = np.linspace(-2.0, 5.0, 41)
    assert_allclose(_edge_occam(g, np.full(41, 12.0), (-2.0, 5.0, -0.01, 0.01)), 0.0, atol=1e-12)


@pytest.mark.parametrize("fraction", [0.1, 0.25, 0.5])
def test_step_likelihood_is_its_share_of_the_range(fraction):
    # the readings allow only the top `fraction` of the range (above the band):
    # the evidence is that share of the prior width, log(fraction)
    lo, hi, blo, bhi = np.log(1e-2), np.log(1e3), np.log(0.99), np.log(1.01)
    span = (hi - lo) - (bhi - blo)
    g = np.linspace(lo, hi, 20001)
    edge = hi - fraction * span
    c2 = np.where(g >= edge, 3.0, 3.0 + 400.0)
    assert_allclose(_edge_occam(g, c2, (lo, hi, blo, bhi)), np.log(fraction), atol=2e-3)


def test_band_is_not_counted_as_drift():
    # a likelihood flat only inside the tolerance band gives the points at the
    # band's edges nothing to integrate across the band
    lo, hi, blo, bhi = -1.0, 1.0, -0.2, 0.2
    g = np.array([-1.0, -0.6, -0.2, 0.2, 0.6, 1.0])
    c2 = np.array([500.0, 500.0, 0.0, 0.0, 500.0, 500.0])
    # only the half-steps next to the band count: 2 * 0.5 * 0.4 of a 1.6 span
    assert_allclose(_edge_occam(g, c2, (lo, hi, blo, bhi)), np.log(0.4 / 1.6), rtol=1e-9)


def busbar_mesh(side, seed):
    """An invented low-ohm busbar mesh: 24 V through a fuse into one corner,
    10-47 milliohm links, 100-470 ohm heater loads at every node, 1 % parts."""
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("SUP", GROUND), 24.0, 0.02, 0.02),
             Part("F1", "fuse", ("SUP", "G0_0"), 0.01, 0.3, 0.3)]
    k = 0
    for i in range(side):
        for j in range(side):
            a = f"G{i}_{j}"
            for b in ([f"G{i}_{j + 1}"] if j + 1 < side else []) + ([f"G{i + 1}_{j}"] if i + 1 < side else []):
                k += 1
                parts.append(Part(f"W{k}", "resistor", (a, b), float(rng.choice([0.01, 0.022, 0.047])),
                                  0.01, 0.01))
            parts.append(Part(f"H{i}_{j}", "resistor", (a, GROUND), float(rng.choice([100.0, 220.0, 470.0])),
                              0.01, 0.01))
    return Circuit(f"busbar mesh {side}x{side}", GROUND, tuple(parts))


#: A bench multimeter of the 6 1/2-digit class (typical published figures, from memory).
BENCH_TOML = """[meter.bench]
counts = 1200000
input_resistance = "10G"
dc_voltage = "0.0035% + 6"
voltage_resolution = "0.1u"
"""


@pytest.mark.parametrize("seed", [1, 2, 4])
def test_cracked_link_is_named_open_not_a_capped_drift(seed):
    c = busbar_mesh(5, seed)
    links = [p for p in c.parts if p.ref.startswith("W")]
    fault = links[len(links) // 2].ref
    m = meters_with_default(parse_meters(BENCH_TOML))
    rds = [Reading("voltage", "dc", n, GROUND, meter="bench") for n in c.nodes if n.startswith("G")]
    sim = simulate_readings(c, rds, m, [(fault, "open", None)], rng=seed)
    d = diagnose(c, sim, m, advise=False)
    top = d.hypotheses[0]
    assert [(f.ref, f.mode) for f in top.faults] == [(fault, "open")]
    drift = next(h for h in d.hypotheses if [(f.ref, f.mode) for f in h.faults] == [(fault, "drift")])
    # the premise: the drift's best fit is pinned at the top of its range (no curvature)
    assert drift.drift_sd is None
    # both fit the readings alike; without an Occam factor their odds would be
    # the priors' (drift 36 : open 59, MIL-HDBK-338B film resistor, from memory).
    # The drift fits only over the top decade or so of its five: it must pay.
    prior_odds = MODE_SHARES["resistor"]["drift"] / MODE_SHARES["resistor"]["open"]
    assert drift.probability / top.probability < 0.5 * prior_odds
