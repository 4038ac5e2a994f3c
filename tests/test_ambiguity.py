"""Ambiguity groups from the sensitivity matrix (faultfind.engine.ambiguity).

The outside reference for :func:`groups_from_sensitivity` is the plain rule
written out below as a brute force over every pair: two visible parts whose
weighted columns have ``|cos| >= cos_min`` are joined, transitively (a union of
overlapping pairs).  The physical check builds the sensitivities of a divider
from Ohm's law and the voltage-divider rule (any circuit-analysis text, e.g.
Horowitz and Hill, *The Art of Electronics*, 3rd ed., section 1.2 -- from
memory).  The matrices are seeded random ones with planted parallel columns.
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest

from faultfind.engine import ambiguity
from faultfind.engine.ambiguity import groups_from_sensitivity, merge_groups


@pytest.fixture(autouse=True)
def large_network_rule(monkeypatch, request):
    """Most tests here check the rule of a large network (only visible parts
    grouped); the board rule (every seen part) has its own tests below."""
    if "board_rule" not in request.keywords:
        monkeypatch.setattr(ambiguity, "ALL_SEEN", 0)

LN2 = math.log(2.0)


# ------------------------------------------------------------ the reference

def brute_force(params, S, sd, var_p, cos_min=0.999, cap=None):
    """The rule pair by pair on the dense Gram matrix (small inputs only)."""
    J = S / sd[:, None] * np.sqrt(var_p)[None, :]
    norms = np.linalg.norm(J, axis=0)
    big = norms.max() if norms.size else 0.0
    seen = norms > 1e-6 * max(big, 1e-300)
    unseen = [params[j] for j in range(len(params)) if not seen[j]]
    z = np.linalg.norm(S / sd[:, None], axis=0)
    visible = [j for j in range(len(params)) if seen[j] and LN2 * z[j] >= 1.0]
    if cap is not None and len(visible) > cap:
        visible = sorted(sorted(visible, key=lambda j: -z[j])[:cap])
    U = J[:, visible] / norms[visible]
    G = np.abs(U.T @ U)
    # Union of the parallel pairs, by repeated merging of overlapping sets.
    comps = [{params[j]} for j in visible]
    for a in range(len(visible)):
        for b in np.flatnonzero(G[a, a + 1:] >= cos_min) + a + 1:
            pa, pb = params[visible[a]], params[visible[b]]
            ca = next(c for c in comps if pa in c)
            cb = next(c for c in comps if pb in c)
            if ca is not cb:
                comps.remove(cb)
                ca |= cb
    groups = sorted((sorted(c) for c in comps if len(c) > 1), key=lambda g: (-len(g), g))
    return groups, unseen


def unit(v):
    return v / np.linalg.norm(v)


def tilted(u, cos, rng):
    """A unit vector at exactly ``cos`` to the unit vector u."""
    v = rng.standard_normal(u.size)
    v = unit(v - (v @ u) * u)
    return cos * u + math.sqrt(1.0 - cos * cos) * v


def to_sensitivity(J, sd, var_p):
    """S from the weighted matrix J = S / sd * sqrt(var_p)."""
    return J * sd[:, None] / np.sqrt(var_p)[None, :]


def planted(seed, n=12, m=60, cos_min=0.999):
    """A random weighted matrix with planted parallel and near-parallel columns.

    Returns S, sd, var_p, params and the pairs planted to be joined and to stay apart.
    """
    rng = np.random.default_rng(seed)
    sd = rng.uniform(0.01, 2.0, n)
    var_p = rng.uniform(1e-5, 1e-2, m)
    J = rng.standard_normal((n, m))
    J /= np.linalg.norm(J, axis=0)
    joined, apart = [], []
    # Scaled and negated copies, and a chain 10 ~ 11 ~ 12 (10 to 12 stays parallel).
    for a, b, f in ((0, 1, 3.0), (2, 3, -0.5), (4, 5, -7.0), (10, 11, 2.0), (11, 12, -1.0)):
        J[:, b] = f * J[:, a]
        joined.append((a, b))
    # Just above and just below the threshold (a relative margin far above roundoff).
    gap = 1e-6 * (1.0 - cos_min) + 1e-9
    J[:, 21] = 4.0 * tilted(J[:, 20], cos_min + gap, rng)
    joined.append((20, 21))
    J[:, 23] = -0.3 * tilted(J[:, 22], cos_min - gap, rng)
    apart.append((22, 23))
    J[:, 25] = tilted(-J[:, 24], cos_min + gap, rng)      # negated, just above
    joined.append((24, 25))
    # Column sizes: all visible (a factor 2 moves the readings >= 1.5 standard uncertainties).
    z = rng.uniform(1.5, 40.0, m) / LN2
    J *= (z * np.sqrt(var_p) / np.linalg.norm(J, axis=0))[None, :]
    S = to_sensitivity(J, sd, var_p)
    params = [f"P{j:03d}" for j in rng.permutation(m)]
    return S, sd, var_p, params, joined, apart


def together(groups, a, b):
    return any(a in g and b in g for g in groups)


# ----------------------------------------------------- equality with brute force

@pytest.mark.parametrize("block", [None, 7])
@pytest.mark.parametrize("cos_min", [0.999, 0.99, 0.9999])
@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_equals_brute_force_with_planted_columns(seed, cos_min, block, monkeypatch):
    """The blocked search finds exactly the brute force's groups (also with
    tiny blocks, so that pairs and chains cross block boundaries)."""
    if block is not None:
        monkeypatch.setattr(ambiguity, "_GRAM_BLOCK", block)
        monkeypatch.setattr(ambiguity, "_WORK", block)
    S, sd, var_p, params, joined, apart = planted(seed, cos_min=cos_min)
    groups, unseen = groups_from_sensitivity(params, S, sd, var_p, cos_min=cos_min)
    assert (groups, unseen) == brute_force(params, S, sd, var_p, cos_min)
    for a, b in joined:
        assert together(groups, params[a], params[b]), (params[a], params[b], groups)
    for a, b in apart:
        assert not together(groups, params[a], params[b]), (params[a], params[b], groups)
    # The chain is one group of three.
    assert sorted([params[10], params[11], params[12]]) in groups
    assert unseen == []
    assert all(g == sorted(g) for g in groups)


@pytest.mark.parametrize("seed", [5, 6])
def test_low_rank_matrix_many_groups_equals_brute_force(seed, monkeypatch):
    """Few readings (n = 3) and many parts: many columns are parallel by chance
    and groups chain up; still the brute force's answer."""
    monkeypatch.setattr(ambiguity, "_GRAM_BLOCK", 50)
    rng = np.random.default_rng(seed)
    n, m = 3, 400
    sd = rng.uniform(0.1, 1.0, n)
    var_p = rng.uniform(1e-4, 1e-2, m)
    S = rng.standard_normal((n, m)) * rng.uniform(0.01, 100.0, m)
    params = [f"R{j}" for j in range(m)]
    got = groups_from_sensitivity(params, S, sd, var_p, cos_min=0.995)
    ref = brute_force(params, S, sd, var_p, cos_min=0.995)
    assert got == ref
    assert len(ref[0]) >= 3          # the case does exercise chaining


def test_cap_keeps_the_largest_columns(monkeypatch):
    """Over MAX_COMPARED visible parts, the largest standardized columns are compared."""
    monkeypatch.setattr(ambiguity, "MAX_COMPARED", 30)
    S, sd, var_p, params, joined, apart = planted(4)
    z = np.linalg.norm(S / sd[:, None], axis=0)
    # Make the pair (0, 1) the two largest and the pair (2, 3) the two smallest.
    S[:, [0, 1]] *= 100.0 / z[[0, 1]]
    S[:, [2, 3]] *= 1.2 / LN2 / z[[2, 3]]
    groups, unseen = groups_from_sensitivity(params, S, sd, var_p)
    assert (groups, unseen) == brute_force(params, S, sd, var_p, cap=30)
    assert together(groups, params[0], params[1])
    assert not together(groups, params[2], params[3])


# ------------------------------------------------------------ visibility

def test_a_tiny_parallel_pair_is_not_grouped():
    """Two parallel columns that a factor-2 change moves by less than one
    standard uncertainty are not a group; the same pair made larger is."""
    rng = np.random.default_rng(11)
    n = 8
    sd = np.full(n, 0.5)
    base = unit(rng.standard_normal(n))
    other = rng.standard_normal((n, 2))
    var_p = np.full(4, 1e-4)
    params = ["Rbig", "Rfar1", "Rfar2", "Rother"]

    def case(size):
        S = np.column_stack([other[:, 0] * 10, base * size, -2.0 * base * size, other[:, 1] * 10])
        return groups_from_sensitivity(params, S, sd, var_p)

    # ln 2 * |S_j / sd| = ln 2 * size / 0.5 (and twice that for Rfar2).
    below = 0.5 / LN2 * 0.9          # Rfar1 at 0.9 standard uncertainties: not visible
    above = 0.5 / LN2 * 1.1          # 1.1: visible
    assert case(below) == ([], [])
    assert case(above) == ([["Rfar1", "Rfar2"]], [])
    assert case(below) == brute_force(params, np.column_stack(
        [other[:, 0] * 10, base * below, -2.0 * base * below, other[:, 1] * 10]), sd, var_p)


def test_visibility_ignores_the_prior_variance():
    """Visibility is the unweighted standardized column; a part with a tight
    tolerance is still grouped when a fault on it would show."""
    n = 4
    col = np.array([1.0, 2.0, -1.0, 0.5])
    S = np.column_stack([col, 3 * col, [1.0, -1.0, 1.0, 1.0]])
    sd = np.full(n, 0.1)
    var_p = np.array([1e-8, 1e-2, 1e-2])     # the first part: a 0.01 % part
    groups, unseen = groups_from_sensitivity(["A", "B", "C"], S, sd, var_p)
    assert groups == [["A", "B"]] and unseen == []


# ------------------------------------------------------------ unseen

def test_unseen_rule_and_order():
    """Unseen: weighted column norm at most 1e-6 of the largest, in params order,
    filtered by refs; a part at 1e-5 is seen."""
    rng = np.random.default_rng(3)
    n = 5
    sd = np.ones(n)
    var_p = np.full(5, 1e-2)
    S = rng.standard_normal((n, 5)) * 10
    big = np.linalg.norm(S, axis=0).max()
    S[:, 1] = 0.0
    S[:, 3] = unit(rng.standard_normal(n)) * big * 1e-7
    S[:, 4] = unit(rng.standard_normal(n)) * big * 1e-5
    params = ["Z", "Y", "X", "W", "V"]
    groups, unseen = groups_from_sensitivity(params, S, sd, var_p)
    assert unseen == ["Y", "W"]
    assert (groups, unseen) == brute_force(params, S, sd, var_p)
    assert groups_from_sensitivity(params, S, sd, var_p, refs={"W", "Z"})[1] == ["W"]
    # A part with zero prior variance has a zero weighted column: unseen.
    var0 = var_p.copy()
    var0[0] = 0.0
    assert groups_from_sensitivity(params, S, sd, var0)[1] == ["Z", "Y", "W"]


def test_no_readings_or_no_parts():
    assert groups_from_sensitivity(["A", "B"], np.zeros((0, 2)), np.zeros(0), np.ones(2)) == ([], ["A", "B"])
    assert groups_from_sensitivity([], np.zeros((3, 0)), np.ones(3), np.zeros(0)) == ([], [])


@pytest.mark.parametrize("args, word", [
    ((["A"], np.ones(3), np.ones(3), np.ones(1)), "S"),
    ((["A", "B"], np.ones((3, 1)), np.ones(3), np.ones(1)), "params"),
    ((["A"], np.ones((3, 1)), np.ones(2), np.ones(1)), "sd"),
    ((["A"], np.ones((3, 1)), np.array([1.0, 0.0, 1.0]), np.ones(1)), "sd"),
    ((["A"], np.ones((3, 1)), np.ones(3), np.ones(2)), "var_p"),
    ((["A"], np.ones((3, 1)), np.ones(3), -np.ones(1)), "var_p"),
    ((["A"], np.full((3, 1), np.nan), np.ones(3), np.ones(1)), "S"),
])
def test_bad_input_names_the_argument(args, word):
    with pytest.raises(ValueError, match=rf"^{word}:"):
        groups_from_sensitivity(*args)
    with pytest.raises(ValueError, match="^cos_min:"):
        groups_from_sensitivity(["A"], np.ones((3, 1)), np.ones(3), np.ones(1), cos_min=1.5)


def test_merge_groups_unions_overlaps():
    assert merge_groups([{"b", "a"}, {"c", "d"}, {"b", "e"}, {"x"}]) == [["a", "b", "e"], ["c", "d"]]


# ------------------------------------------------------------ scale

def test_100_readings_by_100000_parts_in_bounded_memory():
    """100 x 100,000 (the input alone is 80 MB; the old dense U.T @ U was 80 GB):
    peak traced memory, input included, under 300 MB; a few thousand visible
    parts with planted pairs across the whole range, found as the brute force
    on the visible parts finds them."""
    n, m = 100, 100_000
    tracemalloc.start()
    try:
        rng = np.random.default_rng(2024)
        S = rng.standard_normal((n, m))
        S *= 1e-3                                        # far parts: invisible
        vis = rng.choice(m, 3000, replace=False)
        S[:, vis] *= 1e3                                 # near parts: |S_j| ~ 10
        pairs = [(vis[i], vis[-1 - i]) for i in range(0, 40, 2)]
        for a, b in pairs:
            S[:, b] = -2.5 * S[:, a]
        near = set(vis.tolist())
        far = [j for j in range(m) if j not in near][:2]
        S[:, far[1]] = 3.0 * S[:, far[0]]                # parallel but invisible
        sd = np.ones(n)
        var_p = np.full(m, 1e-4)
        params = [f"R{j}" for j in range(m)]
        groups, unseen = groups_from_sensitivity(params, S, sd, var_p)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 300e6, peak / 1e6
    assert unseen == []
    assert sorted(groups) == sorted(sorted([f"R{a}", f"R{b}"]) for a, b in pairs)
    assert not together(groups, f"R{far[0]}", f"R{far[1]}")
    # The brute force on the visible parts only (a dense 3000 x 3000 Gram matrix).
    cols = np.sort(np.concatenate([vis, far]))
    ref = brute_force([params[j] for j in cols], S[:, cols], sd, var_p[cols])
    assert groups == ref[0]


# ------------------------------------------------------------ physics

def divider(p):
    """Readings V(A) and I(R1) of PS1 -> Rs -> R1 -> A -> R2 -> M -> R3 -> 0V,
    with R4 straight across the (ideal) supply: Ohm's law and the divider rule."""
    v, rs, r1, r2, r3, _r4 = p
    total = rs + r1 + r2 + r3
    return np.array([v * (r2 + r3) / total, v / total])


def test_equal_series_resistors_on_a_divider_are_parallel():
    """Read only at the divider's output and its current, R2 and R3 in series
    enter only as R2 + R3 (Ohm's law): equal parts give equal columns.  The
    supply and R1 enter only through V / (R1 + R2 + R3 + Rs) once R2 + R3 is
    fixed, so they trade off too.  A 1 ohm series resistor beside R1 has a
    column parallel to R1's but a factor 2 of it moves V(A) by about 0.2 mV,
    far under the meter: not visible, not grouped.  R4 straight across an
    ideal supply changes no reading: unseen."""
    names = ["PS1", "Rs", "R1", "R2", "R3", "R4"]
    p = np.array([12.0, 1.0, 10e3, 4.7e3, 4.7e3, 1e3])
    v, rs, r1, r2, r3, _ = p
    total = rs + r1 + r2 + r3
    # d reading / d ln(part), by hand from the two formulas above.
    S = np.array([
        [v * (r2 + r3) / total, -rs * v * (r2 + r3) / total ** 2, -r1 * v * (r2 + r3) / total ** 2,
         r2 * v * (rs + r1) / total ** 2, r3 * v * (rs + r1) / total ** 2, 0.0],
        [v / total, -rs * v / total ** 2, -r1 * v / total ** 2,
         -r2 * v / total ** 2, -r3 * v / total ** 2, 0.0]])
    # The hand derivatives agree with central differences in ln(part).
    h = 1e-6
    fd = np.column_stack([(divider(p * np.exp(h * e)) - divider(p * np.exp(-h * e))) / (2 * h)
                          for e in np.eye(len(p))])
    np.testing.assert_allclose(S, fd, rtol=1e-6, atol=1e-12)
    # A handheld meter: 0.5 % of the reading (common practice (no source)).
    sd = 0.005 * np.abs(divider(p))
    # 1 % parts, rectangular in ln(value): variance tol^2 / 3.
    var_p = np.full(len(p), 0.01 ** 2 / 3)
    groups, unseen = groups_from_sensitivity(names, S, sd, var_p)
    assert groups == [["PS1", "R1"], ["R2", "R3"]]
    assert unseen == ["R4"]
    # Rs is parallel to R1 but invisible: a factor 2 shifts V(A) by ~0.2 mV.
    zs = LN2 * np.linalg.norm(S[:, 1] / sd)
    assert zs < 1.0 and abs(LN2 * S[0, 1]) == pytest.approx(2.1e-4, rel=0.05)
    # Unequal series parts are still parallel (only the sum is seen).
    p2 = p.copy()
    p2[4] = 9.1e3
    fd2 = np.column_stack([(divider(p2 * np.exp(h * e)) - divider(p2 * np.exp(-h * e))) / (2 * h)
                           for e in np.eye(len(p2))])
    g2, _ = groups_from_sensitivity(names, fd2, 0.005 * np.abs(divider(p2)), var_p)
    assert ["R2", "R3"] in g2


@pytest.mark.board_rule
def test_on_a_board_every_seen_part_is_grouped():
    """Below ALL_SEEN seen parts the visibility rule is off: the divider's 1 ohm
    series resistor, parallel to R1 (only R1 + Rs is seen, Ohm's law), joins
    R1's group although a factor 2 of it is invisible -- on a board a contact
    or a wire in series is worth naming beside its partner."""
    names = ["PS1", "Rs", "R1", "R2", "R3", "R4"]
    p = np.array([12.0, 1.0, 10e3, 4.7e3, 4.7e3, 1e3])
    h = 1e-6
    S = np.column_stack([(divider(p * np.exp(h * e)) - divider(p * np.exp(-h * e))) / (2 * h)
                         for e in np.eye(len(p))])
    sd = 0.005 * np.abs(divider(p))
    var_p = np.full(len(p), 0.01 ** 2 / 3)
    groups, unseen = groups_from_sensitivity(names, S, sd, var_p)
    assert ["PS1", "R1", "Rs"] in groups and ["R2", "R3"] in groups
    assert unseen == ["R4"]
