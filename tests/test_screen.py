"""The screen of large circuits (faultfind/engine/screen.py) and the faulted
sensitivities by rank-one updates (faultfind/engine/faulted.py).

References:
* the plain re-solve of the faulted network (faultfind.engine.predict with
  overrides: re-assembled and re-factored) is the reference for the faulted
  sensitivities and predictions;
* the screened ranking must equal the ranking that evaluates every part;
* the rank-one structure of one part's change -- every reading moves along
  one fixed direction -- is the Sherman-Morrison formula (Sherman and
  Morrison, Ann. Math. Stat. 21(1), 1950; from memory), checked here against
  the re-solved network;
* the least-squares bound ``max_s chi2 improvement = (k' r)^2 / (k' k)`` is
  the normal equation of a one-parameter fit (common practice (no source)),
  checked against a brute-force scan.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from faultfind.diagnose import diagnose
from faultfind.engine import hypotheses as hy
from faultfind.engine.faulted import faulted_sensitivity
from faultfind.engine.hypotheses import Evaluator, Fault, rank_with
from faultfind.engine.predict import predict
from faultfind.engine.screen import line_bounds, line_directions
from faultfind.io.meters_file import DEFAULT_METER, meters_with_default
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import simulate_readings

GROUND = "0V"


def grid(side, seed, supply=24.0):
    """An invented heater grid: a supply through a fuse into one corner, links, loads to ground."""
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("SUP", GROUND), supply, 0.02, 0.02),
             Part("F1", "fuse", ("SUP", "G0_0"), 0.05, 0.3, 0.3)]
    k = 0
    for i in range(side):
        for j in range(side):
            a = f"G{i}_{j}"
            for b in ([f"G{i}_{j + 1}"] if j + 1 < side else []) + ([f"G{i + 1}_{j}"] if i + 1 < side else []):
                k += 1
                parts.append(Part(f"R{k}", "resistor", (a, b), float(rng.choice([0.5, 1.0, 2.2, 4.7])),
                                  0.01, 0.01))
            k += 1
            parts.append(Part(f"RL{k}", "resistor", (a, GROUND), float(rng.choice([100.0, 220.0, 470.0])),
                              0.01, 0.01))
    return Circuit(f"grid {side}x{side}", GROUND, tuple(parts))


def link(c, k):
    """The k-th link resistor of a grid."""
    return [p.ref for p in c.parts if p.ref.startswith("R") and not p.ref.startswith("RL")][k]


def load(c, k):
    """The k-th load resistor of a grid."""
    return [p.ref for p in c.parts if p.ref.startswith("RL")][k]


def bench_meter():
    return meters_with_default({"bench": DEFAULT_METER.__class__(
        **{**DEFAULT_METER.__dict__, "name": "bench", "counts": 1_200_000, "input_resistance": 1e10,
           "voltage_resolution": 1e-7})})


def node_readings(c, every=1, meter="bench"):
    return [Reading("voltage", "dc", n, GROUND, meter=meter)
            for k, n in enumerate(c.nodes) if n != GROUND and n != "SUP" and k % every == 0]


def planted(c, rds, meters, fault, seed):
    return simulate_readings(c, rds, meters, [fault], rng=seed)


# ----------------------------------------------------- faulted sensitivities

@pytest.mark.parametrize("seed", [1, 2, 3])
def test_faulted_sensitivities_equal_a_resolved_network(seed):
    c = grid(4, seed)
    m = bench_meter()
    rds = node_readings(c) + [Reading("resistance", None, part=link(c, 2), setup="in-circuit"),
                              Reading("current", "dc", part="PS1")]
    sim = planted(c, rds, m, (link(c, 4), "open", None), seed)
    ev = Evaluator(c, sim, m)
    rng = np.random.default_rng(seed)
    refs = [p.ref for p in c.parts if p.kind == "resistor"]
    checked = 0
    for ref in rng.choice(refs, 8, replace=False):
        p = c.part(ref)
        for mode, value in (("open", None), ("short", None), ("drift", p.value * 3.1)):
            S = faulted_sensitivity(ev, Fault(ref, mode, value))
            if S is None:
                continue
            ref_S = predict(c, sim, m, overrides={ref: value if mode == "drift" else mode}).sensitivity.copy()
            ref_S[:, ev.pindex[ref]] = 0.0
            assert_allclose(S, np.nan_to_num(ref_S), rtol=1e-7, atol=1e-9 * np.abs(ev.S0).max())
            checked += 1
    assert checked >= 20


def test_faulted_sensitivity_declines_what_it_does_not_cover():
    """A current reading through an admittance part: the shunt changes the measured
    part's own term, left to the re-solve."""
    c = grid(3, 0)
    m = bench_meter()
    r1, r2 = link(c, 0), link(c, 1)
    rds = [Reading("current", "dc", part=r1)] + node_readings(c)
    sim = planted(c, rds, m, (r2, "open", None), 0)
    ev = Evaluator(c, sim, m)
    assert faulted_sensitivity(ev, Fault(r2, "open")) is None
    # the Evaluator then re-solves: same as the reference
    S = ev.faulted_sensitivity([Fault(r2, "open")])
    ref = predict(c, sim, m, overrides={r2: "open"}).sensitivity.copy()
    ref[:, ev.pindex[r2]] = 0.0
    assert_allclose(S, ref, rtol=1e-9, atol=1e-12)


# ------------------------------------------------------------ line structure

@pytest.mark.parametrize("seed", [4, 5])
def test_one_part_moves_every_reading_along_one_direction(seed):
    c = grid(4, seed)
    m = bench_meter()
    rds = node_readings(c)
    sim = planted(c, rds, m, (link(c, 6), "open", None), seed)
    ev = Evaluator(c, sim, m)
    parts = [p for p in c.parts if p.kind == "resistor"][:12]
    (dirs, rows), = line_directions(ev, parts)
    for t, p in enumerate(parts):
        for mode in ("open", "short"):
            delta = predict(c, sim, m, overrides={p.ref: mode}).value[rows] - ev.pred0[rows]
            d = dirs[t]
            if np.linalg.norm(delta) < 1e-12:
                continue
            cos = abs(delta @ d) / (np.linalg.norm(delta) * np.linalg.norm(d))
            assert cos > 1 - 1e-9, (p.ref, mode, cos)


def test_bound_is_the_best_one_parameter_fit():
    c = grid(4, 9)
    m = bench_meter()
    rds = node_readings(c)
    sim = planted(c, rds, m, (link(c, 8), "open", None), 9)
    ev = Evaluator(c, sim, m)
    e = ev.ev
    healthy = ev.healthy_prediction()
    lb = line_bounds(ev, e, healthy)
    parts = [c.part(r) for r in lb.refs]
    (dirs, rows), = line_directions(ev, parts)
    idx, L = e._block()[0], e._block()[1]
    Cinv = np.linalg.inv(L @ L.T)
    r0 = e.y[idx] - healthy[idx]
    pos = {int(i): k for k, i in enumerate(idx)}
    for t in range(0, len(parts), 5):
        d = np.zeros(idx.size)
        d[[pos[int(i)] for i in rows]] = dirs[t]
        s = np.linspace(-3, 3, 4001) * (abs(d @ Cinv @ r0) / max(d @ Cinv @ d, 1e-300))
        chi = np.array([(r0 - x * d) @ Cinv @ (r0 - x * d) for x in s])
        best_gain = (r0 @ Cinv @ r0 - chi.min()) / 2
        j = ev.pindex[parts[t].ref]
        w = np.linalg.solve(L, e.S0[idx, j] * e._sc0())
        ld = -0.5 * np.log(1 - e.var_p[j] * w @ w)
        assert best_gain <= lb.gain[t] - ld + 1e-6 * (1 + best_gain)
        assert best_gain >= (lb.gain[t] - ld) * (1 - 1e-4) - 1e-9


# --------------------------------------------------- screened = unscreened

@pytest.fixture(scope="module")
def found():
    """Verdicts of the comparisons below: at least some must be faults found."""
    out = []
    yield out
    assert out.count("fault") >= 3, out

@pytest.mark.parametrize("seed,fault", [(11, ("link", 12, "open")), (12, ("load", 6, "short")),
                                        (13, ("link", 30, "drift")), (14, ("F1", 0, "open")),
                                        (15, None)])
def test_screened_ranking_equals_the_full_one(seed, fault, monkeypatch, found):
    c = grid(5, seed)
    if fault is not None:
        what, k, mode = fault
        ref = {"link": link, "load": load}[what](c, k) if what != "F1" else "F1"
        fault = (ref, mode, c.part(ref).value * 12.0 if mode == "drift" else None)
    m = bench_meter()
    rds = node_readings(c)
    sim = simulate_readings(c, rds, m, [fault] if fault else [], rng=seed)
    monkeypatch.setattr(hy, "SCREEN_CHUNK", 8)
    ev1, ev2 = Evaluator(c, sim, m), Evaluator(c, sim, m)
    a = rank_with(ev1, screen=True)
    b = rank_with(ev2, screen=False)
    assert a.screening is not None and b.screening is None
    assert a.verdict == b.verdict
    top_a = [(h.label, round(h.probability, 6)) for h in a.hypotheses if h.probability > 1e-6]
    top_b = [(h.label, round(h.probability, 6)) for h in b.hypotheses if h.probability > 1e-6]
    assert top_a == top_b
    found.append(b.verdict)


@pytest.mark.parametrize("seed", [41, 42])
def test_screened_ranking_equals_the_full_one_with_capacitors_and_switches(seed):
    """Parts without a DC current (a snubber capacitor, an open bypass switch) have
    no sensitivity column: the screen takes their direction explicitly."""
    c = grid(4, seed)
    extra = (Part("C1", "capacitor", ("G1_1", GROUND), 1e-6, 0.1, 0.1),
             Part("C2", "capacitor", ("G2_3", "G3_3"), 4.7e-7, 0.1, 0.1),
             Part("S1", "switch", ("G0_3", GROUND), 0.05, 0.5, 0.5, state="open"))
    c = Circuit(c.title, GROUND, c.parts + extra)
    m = bench_meter()
    rds = node_readings(c)
    fault = [("C1", "short", None)] if seed == 41 else [("S1", "short", None)]
    sim = simulate_readings(c, rds, m, fault, rng=seed)
    a = rank_with(Evaluator(c, sim, m), screen=True)
    b = rank_with(Evaluator(c, sim, m), screen=False)
    assert [(h.label, round(h.probability, 6)) for h in a.hypotheses if h.probability > 1e-6] == \
        [(h.label, round(h.probability, 6)) for h in b.hypotheses if h.probability > 1e-6]
    assert b.hypotheses[0].faults[0].ref == fault[0][0]


def test_screen_prunes_on_a_clear_fault():
    """A heater element gone low (a tenth of its value) in a 10 x 10 grid read at
    every node: the fault comes first, most parts are never evaluated one by
    one, and their mass is negligible."""
    c = grid(10, 31)
    m = bench_meter()
    rds = node_readings(c)
    ref = load(c, 45)
    sim = simulate_readings(c, rds, m, [(ref, "drift", c.part(ref).value / 10)], rng=31)
    rk = rank_with(Evaluator(c, sim, m), screen=True)
    f = rk.hypotheses[0].faults[0]
    assert f.ref == ref and f.mode == "drift"
    assert_allclose(f.value, c.part(ref).value / 10, rtol=0.05)
    scr = rk.screening
    n = len([p for p in c.parts if p.fault_modes])
    assert scr.pruned > n // 2
    assert scr.pruned_logmass < rk.hypotheses[0].log_post - 10


def test_budget_exhausted_keeps_the_mass_and_says_so(monkeypatch):
    """Healthy readings on a grid: nothing prunes, the budget runs out; the parts
    left over keep their probability (not listed) and the notes say so."""
    c = grid(5, 21)
    m = bench_meter()
    rds = node_readings(c, every=3)
    sim = simulate_readings(c, rds, m, [], rng=21)
    monkeypatch.setattr(hy, "SCREEN_BUDGET", 16)
    monkeypatch.setattr(hy, "SCREEN_CHUNK", 8)
    d = diagnose(c, sim, m, advise=False, screen=True)
    scr = d.evaluator and None
    assert d.verdict == "no-fault"
    assert any("could not be told from a healthy circuit" in n for n in d.notes)
    assert d.tail > 0.05    # the unresolved parts' faults hold probability
    del scr


def test_no_screen_for_ac_readings():
    c = Circuit("rc", GROUND, (Part("VG1", "voltage-source", ("A", GROUND), 1.0, 0.05, 0.05, waveform="ac"),
                               Part("R1", "resistor", ("A", "B"), 1e3, 0.01, 0.01),
                               Part("C1", "capacitor", ("B", GROUND), 1e-7, 0.1, 0.1)), frequency=1000.0)
    m = meters_with_default()
    rds = simulate_readings(c, [Reading("voltage", "ac", "B", GROUND)], m, [], rng=0)
    ev = Evaluator(c, rds, m)
    assert line_bounds(ev, ev.ev, ev.healthy_prediction()) is None


def test_expect_bands_do_not_depend_on_chunking(monkeypatch):
    """`expect` works out its bands in chunks of readings (bounded memory on a large
    network); each reading's band uses its own significant parts, so the chunk
    size changes nothing."""
    import faultfind.expect as ex
    c = grid(4, 51)
    m = bench_meter()
    whole = ex.expect(c, meters=m)
    monkeypatch.setattr(ex, "EXPECT_CHUNK", 7)
    chunked = ex.expect(c, meters=m)
    assert len(whole) == len(chunked) > 40
    for a, b in zip(whole, chunked):
        assert (a.expected, a.low, a.high, a.sigma) == (b.expected, b.low, b.high, b.sigma)


def test_one_reading_on_a_large_grid_stays_within_the_budget(monkeypatch):
    """One reading that any part could fit on the line model: nothing prunes, so the
    budget caps the work; the leader is the one the full evaluation finds, and the
    parts left over keep their mass (a note says so)."""
    c = grid(14, 61)                       # 2 + 14*14*3 - 28 = 562 parts: screened by default
    m = bench_meter()
    rd = Reading("voltage", "dc", "G7_7", GROUND, meter="bench")
    healthy = predict(c, [rd], m).value[0]
    sim = [Reading("voltage", "dc", "G7_7", GROUND, meter="bench", value=float(healthy) * 1.2, raw="x")]
    monkeypatch.setattr(hy, "SCREEN_BUDGET", 48)
    full = rank_with(Evaluator(c, sim, m), screen=False)
    scr = rank_with(Evaluator(c, sim, m))
    assert scr.screening is not None and scr.screening.evaluated <= 48 + 64
    assert scr.screening.unresolved
    assert scr.hypotheses[0].label == full.hypotheses[0].label


# ------------------------------------- the handheld shape: spread readings, sparse loads

def sparse_grid(side, seed, load_every=5):
    """An invented distribution grid: a 24 V feed through a fuse into one corner,
    links between neighbours, a load on every ``load_every``-th node only."""
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("SUP", GROUND), 24.0, 0.02, 0.02),
             Part("F1", "fuse", ("SUP", "G0_0"), 0.02, 0.3, 0.3)]
    k = 0
    for i in range(side):
        for j in range(side):
            a = f"G{i}_{j}"
            for b in ([f"G{i + 1}_{j}"] if i + 1 < side else []) + ([f"G{i}_{j + 1}"] if j + 1 < side else []):
                k += 1
                parts.append(Part(f"R{k}", "resistor", (a, b), float(rng.choice([0.1, 0.22, 0.47, 0.82])),
                                  0.01, 0.01))
            if (i * side + j) % load_every == 0:
                k += 1
                parts.append(Part(f"RL{k}", "resistor", (a, GROUND), float(rng.choice([10.0, 22.0, 47.0])),
                                  0.01, 0.01))
    return Circuit(f"sparse grid {side}x{side}", GROUND, tuple(parts))


def spread_readings(c, side, near, n_near, n_spread, seed):
    """Node voltages with the default (handheld) meter: the ``n_near`` nodes nearest
    to ``near`` and ``n_spread`` drawn over the rest of the grid."""
    ni, nj = near
    nodes = [(f"G{i}_{j}", i, j) for i in range(side) for j in range(side)]
    order = sorted(nodes, key=lambda t: (abs(t[1] - ni) + abs(t[2] - nj), t[0]))
    picked = [n for n, _, _ in order[:n_near]]
    rest = [n for n, _, _ in nodes if n not in picked]
    rng = np.random.default_rng(seed)
    picked += [rest[k] for k in sorted(rng.choice(len(rest), n_spread, replace=False))]
    return [Reading("voltage", "dc", n, GROUND) for n in picked]


def _link_between(c, a, b):
    return next(p.ref for p in c.parts if p.nodes == (a, b))


@pytest.mark.parametrize("seed,fault", [(71, ("G2_1", "G3_1", "open")), (72, ("G1_2", "G1_3", "drift")),
                                        (73, ("load", 3, "short")), (74, ("F1", None, "open")),
                                        (75, None)])
def test_screened_ranking_equals_the_full_one_with_a_handheld_and_spread_readings(
        seed, fault, monkeypatch, found):
    """The handheld's coarser uncertainty lets more parts survive the screen; the
    readings spread over the grid see every part a little: the screened ranking
    must still be the full one (reference: every part evaluated)."""
    side = 8
    c = sparse_grid(side, seed)
    near = (2, 1)
    if fault is not None:
        a, b, mode = fault
        ref = load(c, b) if a == "load" else "F1" if a == "F1" else _link_between(c, a, b)
        node = next(n for n in c.part(ref).nodes if n.startswith("G"))
        near = tuple(int(x) for x in node[1:].split("_"))     # the cluster around the fault
        fault = (ref, mode, c.part(ref).value * 20.0 if mode == "drift" else None)
    m = meters_with_default()
    rds = spread_readings(c, side, near, 8, 12, seed)
    sim = simulate_readings(c, rds, m, [fault] if fault else [], rng=seed)
    monkeypatch.setattr(hy, "SCREEN_CHUNK", 8)
    a_ = rank_with(Evaluator(c, sim, m), screen=True)
    b_ = rank_with(Evaluator(c, sim, m), screen=False)
    assert a_.screening is not None and b_.screening is None
    assert a_.verdict == b_.verdict
    top_a = [(h.label, round(h.probability, 6)) for h in a_.hypotheses if h.probability > 1e-6]
    top_b = [(h.label, round(h.probability, 6)) for h in b_.hypotheses if h.probability > 1e-6]
    assert top_a == top_b
    found.append(b_.verdict)
    if fault is not None and b_.verdict == "fault":
        assert b_.hypotheses[0].faults[0].ref == fault[0]


def test_parts_skipped_in_a_chunk_count_as_pruned_not_evaluated(monkeypatch):
    """The note "N of M parts evaluated in full": N counts only the parts whose
    hypotheses were scored, not those of a screening chunk skipped because their
    bound had already fallen below the leader (those are pruned, their mass counted)."""
    c = grid(10, 31)
    m = bench_meter()
    rds = node_readings(c)
    ref = load(c, 45)
    sim = simulate_readings(c, rds, m, [(ref, "drift", c.part(ref).value / 10)], rng=31)
    seen = []
    real = hy._first_pass

    def record(ev, parts):
        seen.extend(p.ref for p in parts)
        return real(ev, parts)

    monkeypatch.setattr(hy, "_first_pass", record)
    monkeypatch.setattr(hy, "SCREEN_CHUNK", 64)     # chunks of 16, then 32: the leader is in the first
    monkeypatch.setattr(hy, "SCREEN_MARGIN", 40.0)  # the bounds cross the cut inside the second chunk
    rk = rank_with(Evaluator(c, sim, m), screen=True)
    scr = rk.screening
    n = len([p for p in c.parts if p.fault_modes])
    assert len(seen) == len(set(seen))
    assert scr.evaluated == len(seen)
    assert scr.evaluated + scr.pruned + len(scr.unresolved) == n
    # the second chunk was cut short: fewer parts evaluated than the chunks looked at
    ev = Evaluator(c, sim, m)
    must = len(line_bounds(ev, ev.ev, ev.healthy_prediction()).must)
    assert must + 16 < scr.evaluated < must + 16 + 32
