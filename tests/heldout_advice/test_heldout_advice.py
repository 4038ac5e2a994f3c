"""Held-out advice cases (issue 13, items 4 and 6), each a minimal file here.

* the booster pump panel after one reading (23.89 V across F1): no current
  reading whose value under a kept hypothesis is above the meter's 10 A
  range; a hypothesis the 2.5 A supply could not feed is said so and not
  counted;
* a reading with the meter in series ranks below a plain voltage reading of
  equal worth;
* a reading already taken, written another way (probes swapped, a
  resistance by its nodes instead of its part, the current of a part in
  series with the one read), is not suggested again;
* the conditional prediction of a candidate given the readings taken,
  against a dense Gaussian conditional written here;
* a string of contacts in series is read across in one go before contact
  by contact (its gain against Shannon's entropy of the split it makes);
  unseen drifts are weighed across their range;
* a DC voltage that follows from the taken ones by Kirchhoff's voltage law
  is not suggested (a pilot lamp open across a coil: the fuse's drop after
  the drops around it), and the reading offered instead settles it.

The boards are invented scenarios.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from faultfind.advise import (CURRENT_RANGE, _spread_unseen, candidate_readings, contact_strings,
                               follows_by_kvl, suggest)
from faultfind.engine.drifts import RESISTOR_FLOOR
from faultfind.engine.advise import condition_on_taken, expected_information_gain
from faultfind.engine.hypotheses import Fault, rank
from faultfind.io.circuit_file import load_circuit, parse_circuit
from faultfind.io.meters_file import DEFAULT_METER, load_meters, meters_with_default
from faultfind.io.readings_file import load_readings
from faultfind.model import Reading
from faultfind.simulate import draw_board, simulate_readings

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
BOOSTER = ROOT / "field_cases" / "booster_pump_panel" / "circuit.toml"
METERS = meters_with_default()


def _booster(limited=True):
    text = BOOSTER.read_text(encoding="utf-8")
    if not limited:   # the same panel with an ideal supply (the key left out)
        text = "\n".join(line for line in text.splitlines() if not line.startswith("current_limit"))
    return parse_circuit(text, str(BOOSTER))


def _h(*faults):
    return tuple(Fault(*f) for f in faults)


# ---------------------------------------------------------------- item 6

def test_booster_after_one_reading_no_current_beyond_the_meter_range():
    """With H1 shorted behind F1 the current through F1, PS1 and H1 is
    24 V / (0.15 ohm + the handheld's 1 ohm shunt) = 20.9 A (Ohm's law), above
    the 10 A range; none of those readings may be offered, whatever the supply."""
    assert_allclose(24.0 / (0.15 + DEFAULT_METER.current_shunt), 20.87, atol=0.01)
    assert 24.0 / (0.15 + DEFAULT_METER.current_shunt) > CURRENT_RANGE
    hyps = [(_h(("F1", "open")), 0.6), (_h(("H1", "short")), 0.4)]
    for limited in (False, True):
        c = _booster(limited)
        rds = load_readings(HERE / "booster_after_fuse_reading.csv", c, METERS)
        for given in (hyps, None):   # the two leading hypotheses, and the real posterior
            sug = suggest(c, rds, METERS, hypotheses=given, top=10)
            assert not [s for s in sug if s.reading.quantity == "current"
                        and s.reading.part in ("F1", "PS1", "H1")], [s.reading for s in sug]
    # the ideal supply still has readings that tell the two apart, with power off
    sug = suggest(_booster(False), rds, METERS, hypotheses=hyps, top=10)
    assert sug and all(s.power == "off" for s in sug)
    assert any(s.reading.part == "F1" and "OL" in s.why for s in sug)


def test_booster_hypothesis_the_supply_cannot_feed_is_not_counted():
    """PS1 is rated 2.5 A; H1 short would draw 24 V / 0.15 ohm = 160 A (Ohm's
    law, F1's cold resistance R15 in series).  Against F1 open alone no reading
    is worth offering; among others, a suggestion says so in its prediction."""
    c = _booster(True)
    assert_allclose(24.0 / c.part("F1").value, 160.0, rtol=1e-12)
    rds = load_readings(HERE / "booster_after_fuse_reading.csv", c, METERS)
    assert suggest(c, rds, METERS, hypotheses=[(_h(("F1", "open")), 0.5),
                                              (_h(("H1", "short")), 0.5)]) == []
    hyps = [((), 0.5), (_h(("F1", "open")), 0.3), (_h(("H1", "short")), 0.2)]
    sug = suggest(c, [], METERS, hypotheses=hyps, top=5)
    assert sug
    for s in sug:
        assert "H1 short, PS1 would have to deliver 160 A" in s.why, s.why
        assert "2.5 A" in s.why and "not counted" in s.why
        assert s.reading.quantity != "current"
        # the worth counts healthy against F1 open only: at most their 0.95 bit
        # (entropy of 0.5/0.3 renormalized, times the 0.8 they hold)
        p = np.array([0.5, 0.3]) / 0.8
        assert s.gain <= 0.8 * -(p * np.log2(p)).sum() + 1e-9


# ---------------------------------------------------------------- series current ranks below

def test_series_current_ranks_below_an_equally_informative_voltage():
    """Healthy against R1 open: V(A) and I(R1) each separate them perfectly
    (1 bit, log2 of two equiprobable hypotheses).  Even at the same effort the
    reading that needs the circuit opened comes after the voltage reading."""
    c = load_circuit(HERE / "interlock_feed.toml")
    hyps = [((), 0.5), (_h(("R1", "open")), 0.5)]
    for costs in (None, {"current": 1.0}):
        sug = suggest(c, [], METERS, hypotheses=hyps, top=20, costs=costs)
        kinds = [s.reading.quantity for s in sug]
        assert "voltage" in kinds and "current" in kinds, kinds
        gains = {s.reading.quantity: s.gain for s in reversed(sug)}
        assert_allclose(gains["voltage"], 1.0, atol=0.01)
        assert_allclose(gains["current"], 1.0, atol=0.01)
        first_current = kinds.index("current")
        assert "voltage" in kinds[:first_current]
        assert all(s.reading.quantity != "voltage" or s.gain < gains["current"] - 1e-6
                   for s in sug[first_current:])


# ---------------------------------------------------------------- duplicates

def test_reading_taken_another_way_is_not_suggested_again():
    """Node A was read with the probes swapped and the current of R1 was
    read; V(A, 0V) is the same reading, and the current of F1 and PS1 is the
    current of R1 (one series path: Kirchhoff's current law)."""
    c = load_circuit(HERE / "interlock_feed.toml")
    rds = load_readings(HERE / "interlock_taken_other_ways.csv", c, METERS)
    hyps = [((), 0.4), (_h(("R3", "open")), 0.3), (_h(("S1", "open")), 0.3)]
    for given in (hyps, None):
        sug = suggest(c, rds, METERS, hypotheses=given, top=20, costs={"current": 1.0})
        for s in sug:
            rd = s.reading
            assert not (rd.quantity == "voltage" and {rd.plus, rd.minus} == {"A", "0V"}), rd
            assert not (rd.quantity == "current" and rd.part in ("R1", "F1", "PS1")), rd


def test_resistance_taken_by_nodes_is_not_suggested_by_part():
    c = load_circuit(HERE / "interlock_feed.toml")
    rds = load_readings(HERE / "interlock_isolated_taken.csv", c, METERS)
    hyps = [((), 0.4), (_h(("R2", "open")), 0.3), (_h(("R3", "open")), 0.3)]
    sug = suggest(c, rds, METERS, hypotheses=hyps, top=20)
    assert sug
    assert not [s for s in sug if s.reading.quantity == "resistance"
                and s.reading.setup == "in-circuit" and s.reading.part == "R2"]


def test_suggestions_are_not_listed_twice():
    """I(F1), I(PS1) and I(R1) are one reading on a series path: listed once."""
    c = load_circuit(HERE / "interlock_feed.toml")
    hyps = [((), 0.5), (_h(("R1", "open")), 0.5)]
    sug = suggest(c, [], METERS, hypotheses=hyps, top=30, costs={"current": 1.0})
    series = [s for s in sug if s.reading.quantity == "current"
              and s.reading.part in ("PS1", "F1", "R1")]
    assert len(series) == 1


# ---------------------------------------------------------------- the conditional model

def test_conditioning_matches_a_dense_gaussian_conditional():
    """E[c | t] = mu_c + S_ct S_tt^-1 (t - mu_t), Var = S_cc - S_ct S_tt^-1 S_tc:
    the conditional of a joint Gaussian (Schur complement; any multivariate
    statistics text, from memory), built here from the full covariance."""
    rng = np.random.default_rng(3)
    R, K, P = 6, 3, 4
    mu = rng.normal(size=(R, K))
    noise = rng.uniform(0.05, 0.2, size=(R, K))
    factor = rng.uniform(0.5, 2.0, size=(R, K))
    sens = rng.normal(size=(R, P))
    var = rng.uniform(0.01, 0.1, size=P)
    taken = np.array([4, 5])
    obs = rng.normal(size=2)
    mean, sd = condition_on_taken(mu, noise, factor, sens, var, taken, obs)
    for k in range(K):
        L = factor[:, k][:, None] * sens
        cov = L @ np.diag(var) @ L.T + np.diag(noise[:, k] ** 2)
        c, t = np.arange(4), taken
        gain = cov[np.ix_(c, t)] @ np.linalg.inv(cov[np.ix_(t, t)])
        assert_allclose(mean[:, k], mu[c, k] + gain @ (obs - mu[t, k]), rtol=1e-10, atol=1e-12)
        want = np.diag(cov[np.ix_(c, c)] - gain @ cov[np.ix_(t, c)])
        assert_allclose(sd[:, k], np.sqrt(want), rtol=1e-10)


def test_a_repeat_of_a_taken_reading_tells_nothing():
    """Two hypotheses predicting 10.0 V and 10.4 V with a tolerance spread of
    0.5 V and a 10 mV meter: a first reading of 10.2 V leaves them close; a
    second reading of the same node is predicted at 10.2 V under both and
    carries almost no information, while without conditioning it would seem
    worth about 0.1 bit."""
    mu = np.array([[10.0, 10.4], [10.0, 10.4]])
    noise = np.full((2, 2), 0.01)
    factor = np.ones((2, 2))
    sens = np.array([[5.0], [5.0]])
    var = np.array([0.01])          # 0.5 V standard deviation through the sensitivity
    mean, sd = condition_on_taken(mu, noise, factor, sens, var, np.array([1]), np.array([10.2]))
    assert_allclose(mean[0], [10.2, 10.2], atol=2e-3)
    p = np.array([0.5, 0.5])
    naive = expected_information_gain(p, mu[:1], np.full((1, 2), 0.5))[0]
    given = expected_information_gain(p, mean, sd)[0]
    assert naive > 0.02
    assert given < 1e-3


def test_condition_rejects_inconsistent_shapes():
    with pytest.raises(ValueError, match="shapes"):
        condition_on_taken(np.zeros((2, 2)), np.ones((2, 3)), np.ones((2, 2)), np.zeros((2, 1)),
                           np.ones(1), np.array([1]), np.array([0.0]))


# ---------------------------------------------------------------- strings of contacts

def _entropy(*p):
    p = np.array(p, dtype=float)
    return float(-(p * np.log2(p)).sum())


def test_contact_strings_follow_series_contacts_only():
    """S1-S2-S3 feed KM1 in series (R1 on G1 does not break the string: the
    contacts still carry the coil's current between them); S4-S5 feed KA1.
    The rail joins three contacts and F1: a branch point, so no run goes
    through it (S3 to S4 are not in series).  The plus end is the supply's."""
    c = load_circuit(HERE / "interlock_string.toml")
    runs = {(a, b): refs for a, b, refs in contact_strings(c)}
    assert runs == {("+24V", "COIL"): ("S1", "S2", "S3"), ("+24V", "G2"): ("S1", "S2"),
                    ("G1", "COIL"): ("S2", "S3"), ("+24V", "ALARM"): ("S4", "S5")}
    labels = [r.label for r in candidate_readings(c)]
    assert "across S1 + S2 + S3" in labels and "across S4 + S5" in labels


def test_reading_across_the_string_first_when_any_contact_may_be_high():
    """Healthy 0.7 against one of three series contacts drifted to 2 ohm, 0.1
    each.  Across the whole string a healthy board reads I x 3 x 50 mOhm,
    about 33 mV (Ohm's law, I = 24 V / (120 || 1200 ohm)), and any high
    contact some 0.4 V more: that one reading settles healthy against "a
    contact is high", H(0.7, 0.3) = 0.881 bit (Shannon entropy), where a
    reading across one contact gains only H(0.9, 0.1) = 0.469 bit and across
    two H(0.8, 0.2) = 0.722 bit.  Half-splitting (common practice, no source)."""
    c = load_circuit(HERE / "interlock_string.toml")
    hyps = [((), 0.7)] + [(_h((ref, "drift", 2.0)), 0.1) for ref in ("S1", "S2", "S3")]
    sug = suggest(c, [], METERS, hypotheses=hyps, top=10)
    first = sug[0].reading
    assert (first.quantity, first.plus, first.minus) == ("voltage", "+24V", "COIL"), first
    assert_allclose(sug[0].gain, _entropy(0.7, 0.3), atol=0.01)
    i_coil = 24.0 / (120.0 * 1200.0 / 1320.0)
    assert f"it reads {3 * 0.05 * i_coil * 1e3:.0f} mV" in sug[0].why
    gains = {s.reading.label: s.gain for s in sug}
    assert_allclose(gains["across S1 + S2"], _entropy(0.8, 0.2), atol=0.01)
    assert_allclose(gains["across S2"], _entropy(0.9, 0.1), atol=0.01)


def test_unseen_drift_is_weighed_across_its_range():
    """A drift no reading sees stands for any value in its range: four values
    (quarter points of each side of the band) with the mass conserved, all
    outside the tolerance band and inside the diagnosis's drift range."""
    c = load_circuit(HERE / "interlock_string.toml")
    hyps = [((), 0.5), ((Fault("S2", "drift", 50.0, seen=False),), 0.3),
            ((Fault("R1", "drift", 1e7, seen=False),), 0.2)]
    out = _spread_unseen(c, hyps)
    assert_allclose(sum(p for _, p in out), 1.0, rtol=1e-12)
    s2 = [f[0].value for f, _ in out if f and f[0].ref == "S2"]
    r1 = [f[0].value for f, _ in out if f and f[0].ref == "R1"]
    assert len(s2) == 2 and all(0.05 * 1.5 < v <= 0.05 * 1000 for v in s2)   # a contact only goes high
    assert len(r1) == 4 and sum(v < 10e3 * 0.95 for v in r1) == 2
    assert all(10e3 * RESISTOR_FLOOR <= v <= 10e3 * 1e3 for v in r1)
    assert all(f[0].seen for f, _ in out if f)


def test_diode_test_taken_by_nodes_is_not_suggested_by_part():
    """D1 (anode C, cathode +24V) was diode-tested with the red probe on C: the
    diode test of D1 by part is the same reading (formats.md section 4: by part,
    the red probe goes on the anode); the reversed one is another reading."""
    case = ROOT / "field_cases" / "irrigation_valve_relay_driver"
    c = load_circuit(case / "circuit.toml")
    rds = load_readings(HERE / "relay_diode_taken_by_nodes.csv", c, METERS)
    hyps = [((), 0.4), (_h(("D1", "short")), 0.3), (_h(("D1", "open")), 0.3)]
    sug = suggest(c, rds, METERS, hypotheses=hyps, top=30)
    assert sug
    for s in sug:
        rd = s.reading
        if rd.quantity == "diode-test":
            assert rd.part != "D1", rd
            assert (rd.plus, rd.minus) != ("C", "+24V"), rd


# ---------------------------------------------------------------- Kirchhoff's voltage law

def test_voltages_that_follow_by_kvl_from_taken_ones():
    """V(a,c) = V(a,b) + V(b,c) along any path of taken DC voltages (Kirchhoff's
    voltage law, any circuit-theory text; a node reading is a path to ground).
    AC magnitudes do not add (phasors), so AC readings join nothing."""
    taken = [Reading("voltage", "dc", "A", "B"), Reading("voltage", "dc", "C", "0V"),
             Reading("voltage", "dc", "B", "0V"), Reading("voltage", "ac", "D", "0V")]
    cands = [Reading("voltage", "dc", "A", "C"), Reading("voltage", "dc", "C", "B"),
             Reading("voltage", "dc", "A", "0V"), Reading("voltage", "dc", "D", "0V"),
             Reading("voltage", "ac", "A", "C"), Reading("voltage", "dc", "A", "D"),
             Reading("current", "dc", part="R1"), Reading("resistance", None, "A", "C")]
    assert follows_by_kvl(cands, taken).tolist() == [True, True, True, False, False, False,
                                                      False, False]
    assert not follows_by_kvl(cands, []).any()


BENCH = load_meters(HERE / "bench_meter.toml")


def test_fuse_drop_after_the_drops_around_it_is_not_read_again():
    """Lamp H1 open across coil K1, read with the bench meter of formats.md
    section 3: 35.98 mV across S1 + S2 and 298.55 mV across F1 + S1 + S2.
    The drop across F1 alone is then 298.55 - 35.98 = 262.57 mV under every
    hypothesis (Kirchhoff's voltage law); the advice used to rank it first
    (0.52 bit expected: the per-hypothesis rescaling of the tolerance spread
    does not add up around the loop).  The supply current settles it: healthy
    24 V / (0.5 + 390 || (0.1 + 66 || 220)) = 527 mA against
    24 V / (0.5 + 390 || 66.1) = 421 mA with H1 open (Ohm's law, series and
    parallel resistances), far apart for F1's 30 % and the lamps' 10 %."""
    c = load_circuit(HERE / "lamp_across_coil.toml")
    rds = load_readings(HERE / "lamp_across_coil_two_drops.csv", c, BENCH)
    # the board these readings came from (seeded), to take the next reading on
    rng = np.random.default_rng(1)
    board = draw_board(c, rng)
    again = simulate_readings(c, rds, BENCH, [("H1", "open", None)], rng=rng, board=board)
    assert [r.raw for r in again] == [r.raw for r in rds]

    def par(*r):
        return 1.0 / sum(1.0 / x for x in r)

    healthy = 24.0 / (0.5 + par(390.0, 0.1 + par(66.0, 220.0)))
    lamp_open = 24.0 / (0.5 + par(390.0, 0.1 + 66.0))
    assert_allclose([healthy, lamp_open], [0.527, 0.421], atol=0.001)
    sug = suggest(c, rds, BENCH, top=10)
    assert not [s for s in sug if s.reading.quantity == "voltage"
                and {s.reading.plus, s.reading.minus} == {"+24V_IN", "+24V"}], [s.reading for s in sug]
    first = sug[0]
    assert (first.reading.quantity, first.reading.part, first.power) == ("current", "PS1", "on")
    assert "series" in first.caution
    taken = simulate_readings(c, [first.reading], BENCH, [("H1", "open", None)], rng=rng, board=board)
    assert_allclose(taken[0].value, lamp_open, rtol=0.05)
    rk = rank(c, rds + taken, BENCH)
    on_h1 = sum(h.probability for h in rk.hypotheses if {f.ref for f in h.faults} == {"H1"})
    assert rk.hypotheses[0].faults[0].ref == "H1" and on_h1 >= 0.95, rk.hypotheses[:3]
