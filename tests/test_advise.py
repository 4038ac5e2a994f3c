"""Next-reading advice: information gain, candidates, costs, safety, command line."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import integrate
from scipy.stats import norm

from faultfind.advise import DEFAULT_COSTS, candidate_readings, load_costs, suggest
from faultfind.cli.main import main
from faultfind.engine.advise import entropy_bits, expected_information_gain
from faultfind.errors import InputError
from faultfind.io.circuit_file import load_circuit
from faultfind.io.meters_file import meters_with_default
from faultfind.io.readings_file import load_readings
from faultfind.engine.hypotheses import Fault, rank
from faultfind.model import Circuit, Part
from faultfind.simulate import draw_board, simulate_readings

ROOT = Path(__file__).resolve().parents[1]
CASES = ROOT / "field_cases"
METERS = meters_with_default()


# ---------------------------------------------------------------- information gain

def test_separated_hypotheses_give_log2_k_bits():
    """K equiprobable hypotheses that a reading separates perfectly: the reading
    carries log2(K) bits (Shannon's entropy of a uniform distribution)."""
    for k in (2, 3, 5):
        prob = np.full(k, 1.0 / k)
        mu = np.arange(k, dtype=float)[None, :] * 100.0
        sd = np.full((1, k), 0.01)
        assert_allclose(expected_information_gain(prob, mu, sd), [math.log2(k)], rtol=1e-6)


def test_identical_predictions_give_no_information():
    """A reading every hypothesis predicts alike tells nothing (0 bits)."""
    prob = np.array([0.5, 0.3, 0.2])
    mu = np.full((1, 3), 4.2)
    sd = np.full((1, 3), 0.1)
    assert_allclose(expected_information_gain(prob, mu, sd), [0.0], atol=1e-9)


def test_partial_overlap_against_numerical_integration():
    """Two hypotheses, Gaussian readings one standard deviation apart: the mutual
    information I = H(Y) - H(Y|H) computed independently by adaptive quadrature
    of the mixture density (scipy.integrate.quad); definition of mutual
    information (Shannon 1948)."""
    p = np.array([0.6, 0.4])
    m = np.array([0.0, 1.0])
    s = np.array([1.0, 0.7])

    def post_entropy_at(y):
        like = p * norm.pdf(y, m, s)
        q = like / like.sum()
        return -(q * np.log2(q)).sum() * like.sum()

    eh, _ = integrate.quad(post_entropy_at, -15, 15, limit=200)
    want = entropy_bits(p) - eh
    got = expected_information_gain(p, m[None, :], s[None, :])[0]
    assert_allclose(got, want, rtol=2e-3)


def test_gain_over_groups_counts_only_which_group():
    """Three equiprobable hypotheses a reading separates perfectly, two of
    them one group (open and drift of one part): the reading tells the group,
    H(2/3, 1/3) = 0.918 bit (Shannon entropy), not log2(3) = 1.585; two
    hypotheses of one group alone give 0 bits."""
    prob = np.full(3, 1.0 / 3)
    mu = np.array([[0.0, 100.0, 200.0]])
    sd = np.full((1, 3), 0.01)
    want = -(2 / 3 * math.log2(2 / 3) + 1 / 3 * math.log2(1 / 3))
    assert_allclose(expected_information_gain(prob, mu, sd, groups=[0, 0, 1]), [want], rtol=1e-6)
    assert_allclose(expected_information_gain(prob, mu, sd), [math.log2(3)], rtol=1e-6)
    assert_allclose(expected_information_gain([0.5, 0.5], mu[:, :2], sd[:, :2], groups=[4, 4]), [0.0],
                    atol=1e-9)
    # groups that are partly told apart: against the mixture of each group, by quadrature
    p = np.array([0.3, 0.3, 0.4])
    m = np.array([0.0, 0.8, 1.5])
    s = np.array([0.6, 0.6, 0.5])
    g = np.array([0, 0, 1])

    def post_entropy_at(y):
        like = p * norm.pdf(y, m, s)
        q = np.array([like[g == k].sum() for k in (0, 1)]) / like.sum()
        q = q[q > 0]
        return -(q * np.log2(q)).sum() * like.sum()

    eh, _ = integrate.quad(post_entropy_at, -15, 15, limit=200)
    want = entropy_bits([0.6, 0.4]) - eh
    assert_allclose(expected_information_gain(p, m[None, :], s[None, :], groups=g)[0], want, rtol=3e-3)
    with pytest.raises(ValueError, match="groups"):
        expected_information_gain(p, m[None, :], s[None, :], groups=[0, 1])


def test_no_reading_is_advised_to_tell_one_parts_modes_apart():
    """R1 open against R1 drifted to ten times its value: either way R1 is
    replaced, so no reading is worth its effort; against R2 open, R1's two
    modes together make one side of a 1-bit split."""
    c = _divider()
    one = [((Fault("R1", "open"),), 0.5), ((Fault("R1", "drift", 100e3),), 0.5)]
    assert suggest(c, [], METERS, hypotheses=one) == []
    two = [((Fault("R1", "open"),), 0.25), ((Fault("R1", "drift", 100e3),), 0.25),
           ((Fault("R2", "open"),), 0.5)]
    sug = suggest(c, [], METERS, hypotheses=two)
    assert sug and sug[0].gain <= 1.0 + 1e-6
    assert_allclose(sug[0].gain, 1.0, atol=0.02)


def test_gain_rejects_bad_shapes_and_sd():
    with pytest.raises(ValueError, match="mu, sd"):
        expected_information_gain([0.5, 0.5], np.zeros((1, 3)), np.ones((1, 3)))
    with pytest.raises(ValueError, match="sd"):
        expected_information_gain([0.5, 0.5], np.zeros((1, 2)), np.zeros((1, 2)))


# ---------------------------------------------------------------- candidates and advice

def _divider():
    """A 24 V sensor supply feeding two dividers; invented scenario."""
    return Circuit("silo level sensor feed", "0V", (
        Part("PS1", "voltage-source", ("24V", "0V"), 24.0, 0.02, 0.02),
        Part("F1", "fuse", ("24V", "A"), 0.05, 0.3, 0.3),
        Part("R1", "resistor", ("A", "B"), 10e3, 0.01, 0.01),
        Part("R2", "resistor", ("B", "0V"), 10e3, 0.01, 0.01),
        Part("R3", "resistor", ("A", "C"), 4.7e3, 0.01, 0.01),
        Part("R4", "resistor", ("C", "0V"), 2.2e3, 0.01, 0.01),
    ))


def test_candidates_cover_every_kind_of_reading():
    c = _divider()
    cands = candidate_readings(c, suspects=["R2"])
    kinds = {(r.quantity, r.setup) for r in cands}
    assert ("voltage", None) in kinds and ("current", None) in kinds
    assert ("resistance", "in-circuit") in kinds and ("resistance", "lifted") in kinds
    assert sum(r.quantity == "voltage" and r.minus == "0V" for r in cands) == len(c.nodes) - 1


def test_first_advice_on_a_dead_circuit_is_a_cheap_live_voltage():
    """With no readings the first suggestions are voltage readings (cheap probes,
    power on), and each names the hypotheses it separates."""
    sug = suggest(_divider(), [], METERS, top=3)
    assert sug, "there must be advice on a circuit that just failed"
    assert all(s.power == "on" and s.reading.quantity == "voltage" for s in sug)
    assert all(s.why.startswith("if ") and "reads" in s.why for s in sug)
    assert sug[0].score >= sug[-1].score


def test_isolated_circuit_prefers_power_off_readings():
    """Once the circuit is isolated, resistance readings cost no new isolation and
    the advice groups them (common practice: take the power-off readings together)."""
    on = suggest(_divider(), [], METERS, top=5, power="on")
    off = suggest(_divider(), [], METERS, top=5, power="off")
    assert sum(s.power == "off" for s in off) > sum(s.power == "off" for s in on)
    assert any("already isolated" in s.why for s in off if s.power == "off")


def test_costs_change_the_ranking():
    """Making voltage probes expensive pushes them down the list."""
    cheap = suggest(_divider(), [], METERS, top=3, power="off")
    dear = suggest(_divider(), [], METERS, top=3, power="off",
                   costs={"resistance": 50.0, "lifted": 50.0})
    assert [s.power for s in dear].count("on") > [s.power for s in cheap].count("on")


def test_caution_above_extra_low_voltage():
    """A 230 V AC circuit is above the 50 V AC extra-low-voltage limit
    (IEC 61140 / IEC 60364-4-41, from memory): live suggestions say so."""
    c = load_circuit(CASES / "kiln_contactor_snubber" / "circuit.toml")
    sug = suggest(c, [], METERS, top=5, power="on")
    live = [s for s in sug if s.power == "on"]
    assert live and all("above extra-low voltage" in s.caution for s in live)
    low = suggest(_divider(), [], METERS, top=3, power="on")
    assert all("above extra-low voltage" not in s.caution for s in low)


@pytest.mark.parametrize("case", sorted(p.parent.name for p in CASES.glob("*/circuit.toml")))
def test_suggest_works_on_every_field_case(case):
    """suggest with and without readings on every bundled case, as JSON."""
    c = CASES / case / "circuit.toml"
    r = CASES / case / "readings.csv"
    for argv in (["suggest", str(c), "--json"], ["suggest", str(c), str(r), "--json"]):
        import io
        import contextlib
        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            assert main(argv) == 0
        doc = json.loads(buf.getvalue())
        for s in doc["suggestions"]:
            for key in ("quantity", "mode", "plus", "minus", "part", "setup", "frequency", "power", "score"):
                assert key in s
            assert s["power"] in ("on", "off")


def test_followed_advice_confirms_the_blown_fuse():
    """On the booster pump panel with F1 blown, following the advice from no
    reading names F1 open within a few readings; every reading taken is a
    live voltage reading (a blown fuse needs no isolation to be found), and
    the first one already tells F1 open from healthy (behind an open fuse no
    current flows, so no voltage drops across the contacts it feeds:
    Kirchhoff's laws)."""
    c = load_circuit(CASES / "booster_pump_panel" / "circuit.toml")
    rng = np.random.default_rng(5)
    board = draw_board(c, rng)
    fault = ("F1", "open", None)
    readings = []
    for _ in range(4):
        sug = suggest(c, readings, METERS, top=1)
        rd = sug[0].reading
        assert rd.quantity == "voltage" and sug[0].power == "on", rd
        if not readings:
            healthy = simulate_readings(c, [rd], METERS, [], rng=np.random.default_rng(1), board=board)[0]
            blown = simulate_readings(c, [rd], METERS, [fault], rng=np.random.default_rng(1), board=board)[0]
            assert abs(healthy.value) > 0.005 and abs(blown.value) < 0.001, (rd, healthy, blown)
        readings += simulate_readings(c, [rd], METERS, [fault], rng=rng, board=board)
        top = rank(c, readings, METERS).hypotheses[0]
        if top.probability >= 0.95:
            break
    assert [(f.ref, f.mode) for f in top.faults] == [("F1", "open")]
    assert top.probability >= 0.95


def test_diagnose_json_carries_suggestions(capsys):
    c = CASES / "greenhouse_vent_thermistor_amp"
    assert main(["diagnose", str(c / "circuit.toml"), str(c / "readings.csv"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["verdict"] == "no-fault"
    assert doc["suggestions"], "a no-fault verdict with hidden faults must suggest readings that see them"


def test_costs_file_errors(tmp_path, capsys):
    bad = tmp_path / "costs.toml"
    bad.write_text("voltage = -1\n")
    with pytest.raises(InputError, match="positive"):
        load_costs(bad)
    bad.write_text("volts = 2\n")
    with pytest.raises(InputError, match="unknown cost"):
        load_costs(bad)
    c = CASES / "booster_pump_panel" / "circuit.toml"
    assert main(["suggest", str(c), "--costs", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "costs.toml" in err and "volts" in err and "Traceback" not in err
    good = tmp_path / "ok.toml"
    good.write_text("current = 10\n")
    assert load_costs(good)["current"] == 10.0 and load_costs(good)["voltage"] == DEFAULT_COSTS["voltage"]


def test_suggest_with_readings_uses_the_posterior():
    """After the hopper readings (a drifted gauge, SG4 or SG1), the advice targets
    the gauges, not parts already cleared."""
    case = CASES / "hopper_load_cell_amp"
    c = load_circuit(case / "circuit.toml")
    rds = load_readings(case / "readings.csv", c, METERS)
    sug = suggest(c, rds, METERS, top=3)
    assert any("SG4" in s.why or "SG1" in s.why for s in sug)
