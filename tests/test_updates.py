"""The fast path of faulted readings against plain re-assembly and re-solve.

:mod:`faultfind.engine.updates` gives the readings of a faulted circuit from
the healthy circuit's one factorization by Woodbury (rank-k) updates
(``Group.evaluate`` for any set of terms, ``single`` vectorized over candidate
values of one term).  The reference here is the re-solve oracle,
:func:`faultfind.engine.oracle.oracle_readings`: plain re-assembly and
re-solve of the faulted circuit for every reading, with the meter drawn into
the circuit as a real part (its input resistance across the probes, its shunt
in series with the part).  The Woodbury identity itself is the outside
reference for why the two must agree (Woodbury 1950, "Inverting modified
matrices", Memorandum Report 42, Princeton; Hager 1989, "Updating the inverse
of a matrix", SIAM Review 31(2)); the oracle is independent of it.

Circuits are seeded random networks (numpy ``default_rng``): a spanning tree
of resistors, fuses, closed switches and inductors with winding resistance
(so every node has a DC path to ground, as formats.md requires), extra
resistors, capacitors, inductors and switches (open and closed), a DC voltage
and a DC current source, AC sources in the AC circuits, and a finite-gain
op-amp stage in some.  Every fault mode of every part (open, short, drift at
two values, dead) is checked on voltage readings (with meter loading: the
default 10 Mohm meter and a 1 Mohm one), current readings (1 ohm and 0.1 ohm
shunts) and in-circuit resistance readings (power off).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from faultfind.engine.hypotheses import Board
from faultfind.engine.oracle import oracle_readings
from faultfind.engine.predict import analysis_key
from faultfind.engine.updates import Group, single
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

GROUND = "0V"
RTOL = 1e-7          # the brief's tolerance for fast path against oracle
#: Absolute tolerance relative to the largest reading of that quantity.  A
#: reading that should be exactly 0 (a node held only by the meter) comes out
#: of the update as roundoff: the meter's 1e7 ohm against ohm-level parts is a
#: condition of ~1e7, times double-precision epsilon 2.2e-16 (IEEE 754) ~ 2e-9.
ATOL_REL = 1e-8
#: A 1 Mohm meter with a 0.1 ohm shunt: loads the circuit ten times more than the
#: default on voltage, less on current (invented profile, as a second meter).
BENCH = dataclasses.replace(DEFAULT_METER, name="bench", input_resistance=1.0e6,
                            current_shunt=0.1)
METERS = {"default": DEFAULT_METER, "bench": BENCH}
DRIFT_FACTORS = (3.3, 0.2)


# ------------------------------------------------------------ random circuits

def _r(rng, lo=100.0, hi=1e4):
    return float(np.exp(rng.uniform(np.log(lo), np.log(hi))))


def random_circuit(seed: int, ac: bool, opamp: bool) -> Circuit:
    """A seeded random circuit (an invented 'controller board')."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(4, 8))
    nodes = [GROUND] + [f"N{i}" for i in range(1, n)]
    parts = [Part("PS1", "voltage-source", ("N1", GROUND), 12.0, 0.03, 0.03),
             Part("IS1", "current-source", (GROUND, nodes[-1]), 1.0e-3, 0.05, 0.05)]
    if ac:
        # a signal generator: low output impedance, so an ohmmeter sees a short
        parts.append(Part("VG1", "voltage-source", ("N2", GROUND), 2.0, 0.05, 0.05,
                          waveform="ac", phase=float(rng.uniform(-90, 90)), off_state="short"))
        parts.append(Part("IG1", "current-source", (GROUND, nodes[-2]), 2.0e-4, 0.05, 0.05,
                          waveform="ac", phase=float(rng.uniform(-90, 90))))
    k = 0
    # spanning tree: every node reaches N1 (held by PS1) through parts that conduct at DC
    for i in range(2, n):
        j = int(rng.integers(1, i))
        k += 1
        kind = rng.choice(["resistor", "resistor", "fuse", "switch", "inductor"])
        a, b = nodes[i], nodes[j]
        if ac and i == 2:
            kind = "resistor"   # VG1 sits on N2: keep a real resistance between the sources
        if kind == "resistor":
            parts.append(Part(f"R{k}", "resistor", (a, b), _r(rng), 0.01, 0.01))
        elif kind == "fuse":
            parts.append(Part(f"F{k}", "fuse", (a, b), _r(rng, 0.5, 20), 0.5, 0.5))
        elif kind == "switch":
            parts.append(Part(f"S{k}", "switch", (a, b), _r(rng, 0.5, 20), 0.5, 0.5))
        else:
            parts.append(Part(f"L{k}", "inductor", (a, b), _r(rng, 1e-3, 1e-1), 0.1, 0.1,
                              resistance=_r(rng, 1, 50)))
    for _ in range(int(rng.integers(2, 6))):
        a, b = (nodes[int(x)] for x in rng.choice(n, 2, replace=False))
        k += 1
        kind = rng.choice(["resistor", "capacitor", "inductor", "switch-open", "resistor"])
        if kind == "resistor":
            parts.append(Part(f"R{k}", "resistor", (a, b), _r(rng), 0.01, 0.01))
        elif kind == "capacitor":
            parts.append(Part(f"C{k}", "capacitor", (a, b), _r(rng, 1e-8, 1e-6), 0.1, 0.1))
        elif kind == "inductor":
            parts.append(Part(f"L{k}", "inductor", (a, b), _r(rng, 1e-3, 1e-1), 0.1, 0.1,
                              resistance=_r(rng, 1, 50)))
        else:
            parts.append(Part(f"S{k}", "switch", (a, b), 0.05, 0.5, 0.5, state="open"))
    k += 1
    parts.append(Part(f"R{k}", "resistor", ("N1", "N2"), 1000.0, 0.01, 0.01))
    if opamp:
        # non-inverting stage: input on N3, gain 1 + Rf/Rg, a load back into the network
        parts += [Part("U1", "opamp", ("N3", "INV", "OUT")),
                  Part("RF1", "resistor", ("OUT", "INV"), _r(rng, 1e3, 1e5), 0.01, 0.01),
                  Part("RG1", "resistor", ("INV", GROUND), _r(rng, 1e3, 1e4), 0.01, 0.01),
                  Part("RL1", "resistor", ("OUT", nodes[-1]), _r(rng, 1e3, 1e4), 0.01, 0.01)]
    return Circuit(f"random board {seed}", GROUND, tuple(parts),
                   frequency=1000.0 if ac else None)


def survey(c: Circuit, ac: bool) -> list[Reading]:
    """Voltage, current and in-circuit resistance readings, alternating meters."""
    rds = []
    modes = ["dc"] + (["ac"] if ac else [])
    i = 0
    for mode in modes:
        for node in c.nodes[1:]:
            rds.append(Reading("voltage", mode, node, GROUND, meter=("bench" if i % 2 else None)))
            i += 1
        rds.append(Reading("voltage", mode, c.nodes[-1], "N1", meter="bench"))
        for p in c.parts:
            if p.kind != "opamp":
                meter = "bench" if i % 2 else None
                rds.append(Reading("current", mode, part=p.ref, meter=meter))
                i += 1
    if ac:  # a second frequency: a generator swept by hand (formats.md, readings frequency)
        rds.append(Reading("voltage", "ac", c.nodes[-1], GROUND, frequency=180.0))
        rds.append(Reading("current", "ac", part=c.parts[-1].ref, frequency=180.0))
    for p in c.parts:
        if not p.is_source and p.kind != "opamp":
            rds.append(Reading("resistance", None, part=p.ref, setup="in-circuit"))
    rds.append(Reading("resistance", None, plus=c.nodes[-1], minus=GROUND, setup="in-circuit"))
    return rds


def groups_of(c: Circuit, readings) -> dict:
    out = {}
    for rd in readings:
        key = analysis_key(c, rd)
        if key[0] != "lifted":
            out.setdefault(key, []).append(rd)
    return out


def hypotheses_of(part):
    """(mode, [(oracle override, value), ...]) for every fault mode; drift at two values."""
    for mode in part.fault_modes:
        if mode == "drift":
            yield mode, [(part.value * f, part.value * f) for f in DRIFT_FACTORS]
        else:
            yield mode, [(mode, None)]


def new_for(g: Group, t, part, mode, value):
    """The new admittance ("y" term) or source value ("b" term) of a fault."""
    if t.kind == "b":
        return 0.0 if mode == "dead" else t.e0 * (value / part.value)
    if t.kind == "y":
        return g.new_admittance(part, mode, value)
    return 0.0


# ------------------------------------------------------------- comparison

def scales(readings, values):
    """Per reading: an absolute tolerance from the largest finite value of its quantity."""
    v = np.asarray(values)
    q = np.array([r.quantity for r in readings])
    out = np.zeros(len(readings))
    for name in set(q):
        sel = (q == name) & np.isfinite(v)
        big = float(np.max(np.abs(v[sel]))) if sel.any() else 1.0
        out[q == name] = ATOL_REL * max(big, 1e-12)
    return out


def check_against_oracle(fast, ref, atol, what):
    """Fast path equals the oracle where the oracle is defined; nan somewhere where it is not."""
    fast, ref = np.asarray(fast), np.asarray(ref)
    nan_ref = np.isnan(ref)
    if nan_ref.any():
        # An ideal source shorted, or a floating section driven by a current
        # source: the ideal model has no answer, and the fast path must say so
        # in at least one reading of the hypothesis (which the ranking then
        # drops).  Readings both paths answer must still agree.
        assert np.isnan(fast).any(), (f"{what}: the oracle has no answer but the fast path "
                                      f"gives {fast}")
        ok = ~nan_ref & ~np.isnan(fast)
    else:
        ok = np.ones(ref.shape, dtype=bool)
    f, r = fast[ok], ref[ok]
    both_inf = np.isinf(f) & np.isinf(r) & (np.sign(f.real) == np.sign(r.real))
    with np.errstate(invalid="ignore"):
        close = np.abs(f - r) <= atol[ok] + RTOL * np.abs(r)
    good = both_inf | close
    assert good.all(), (f"{what}: fast path differs from plain re-solve at readings "
                        f"{np.flatnonzero(ok)[~good].tolist()}:\n"
                        f"fast   {f[~good]}\noracle {r[~good]}")


CASES = [(seed, seed % 2 == 1, seed % 3 == 0) for seed in range(16)]


@pytest.mark.parametrize("seed,ac,opamp", CASES)
def test_fast_path_matches_plain_resolve(seed, ac, opamp):
    """Every fault of every part: ``Group.evaluate`` and ``single`` against plain
    re-assembly and re-solve (the oracle), rtol 1e-7 (Woodbury identity)."""
    c = random_circuit(seed, ac, opamp)
    rds = survey(c, ac)
    checked = 0
    failures = []
    for key, rs in groups_of(c, rds).items():
        g = Group(c, key, rs, METERS)
        nominal = oracle_readings(c, rs, METERS)
        atol = scales(rs, nominal)
        check_against_oracle(g.nominal(), nominal, atol, f"seed {seed} {key} healthy")
        for p in c.parts:
            for mode, cases in hypotheses_of(p):
                t = g.term(p, mode, cases[0][1])
                if t.kind == "fallback":
                    continue    # left to the oracle by design; see test_fallback_terms_...
                news = [new_for(g, t, p, mode, value) for _, value in cases]
                vec = single(g, t, news)            # all candidate values at once
                assert vec.shape == (len(cases), len(rs))
                for row, ((override, value), new) in enumerate(zip(cases, news)):
                    ref = oracle_readings(c, rs, METERS, {p.ref: override})
                    fast = g.nominal() if t.kind == "none" else g.evaluate([t], [new])
                    what = f"seed {seed} {key} {p.ref} {p.kind} {p.nodes} {mode} {value}"
                    for how, got in (("evaluate", fast), ("single", vec[row])):
                        try:
                            check_against_oracle(got, ref, atol, f"{what} ({how})")
                        except AssertionError as exc:
                            failures.append(str(exc).splitlines()[0][:300])
                    checked += 1
    assert checked > 40
    assert not failures, f"{len(failures)} disagreements:\n" + "\n".join(failures)


def test_nan_cases_are_exercised():
    """The nan branch of the comparison on a case made for it: a resistor
    straight across PS1 fails short (an ideal source shorted, no answer)."""
    c = random_circuit(1, True, False)
    rds = [Reading("voltage", "dc", "N1", GROUND), Reading("voltage", "dc", "N2", GROUND)]
    # A short of a resistor placed straight across the supply.
    c = dataclasses.replace(c, parts=c.parts + (Part("RX", "resistor", ("N1", GROUND), 470.0),))
    g = Group(c, ("dc", None), rds, METERS)
    ref = oracle_readings(c, rds, METERS, {"RX": "short"})
    assert np.isnan(ref).all()
    t = g.term(c.part("RX"), "short")
    assert np.isnan(g.evaluate([t], [np.inf])).any()
    assert np.isnan(single(g, t, [np.inf])[0]).any()


def test_floating_section_with_current_source_gives_nan():
    """A current source driving into a node whose only other path opens: no
    steady state (plain re-solve gives nan), except across the meter that
    closes the path; the fast path agrees where the oracle has an answer and
    gives nan where it has none."""
    parts = (Part("PS1", "voltage-source", ("V", GROUND), 5.0),
             Part("R1", "resistor", ("V", GROUND), 1000.0),
             Part("IS1", "current-source", (GROUND, "X"), 1e-3),
             Part("R2", "resistor", ("X", GROUND), 2200.0))
    c = Circuit("pump relay sense", GROUND, parts)
    rds = [Reading("voltage", "dc", "V", "X"), Reading("current", "dc", part="R1"),
           Reading("current", "dc", part="PS1")]
    g = Group(c, ("dc", None), rds, METERS)
    ref = oracle_readings(c, rds, METERS, {"R2": "open"})
    # The meter across V-X carries IS1's 1 mA: 1 mA x 10 Mohm = 10 kV (Ohm's law).
    assert ref[0].real == pytest.approx(1e-3 * 10e6, rel=1e-9)
    assert np.isnan(ref[1]) and np.isnan(ref[2])
    t = g.term(c.part("R2"), "open")
    for got in (g.evaluate([t], [0.0]), single(g, t, [0.0])[0]):
        check_against_oracle(got, ref, scales(rds, ref), "R2 open beside IS1")


def test_short_across_a_source_that_is_zero_in_this_analysis():
    """A welded switch S1 across an AC generator's output, read at DC (where the
    generator is a 0 V source, formats.md).  The loop generator + short has no
    determined current in the ideal model (the oracle gives nan for readings
    that need it), but a current reading puts the meter's shunt in series with
    one side of the loop, and then Ohm's law decides: the shunt is bypassed by
    the other side, 0 V across it, 0 A read.  The fast path must give that 0
    (or nan), never the healthy circuit's current."""
    parts = (Part("PS1", "voltage-source", ("N1", GROUND), 12.0),
             Part("R1", "resistor", ("N1", "N2"), 1000.0),
             Part("VG1", "voltage-source", ("N2", GROUND), 2.0, waveform="ac"),
             Part("S1", "switch", ("N2", GROUND), 0.05, state="open"))
    c = Circuit("paging amp test jig", GROUND, parts, frequency=1000.0)
    rds = [Reading("voltage", "dc", "N1", GROUND), Reading("current", "dc", part="VG1"),
           Reading("current", "dc", part="S1")]
    g = Group(c, ("dc", None), rds, METERS)
    ref = oracle_readings(c, rds, METERS, {"S1": "short"})
    assert ref[1] == 0 and ref[2] == 0              # the oracle agrees with Ohm's law
    healthy = g.nominal()
    assert abs(healthy[1]) > 1e-3                   # healthy: VG1 sinks ~12 mA at DC
    t = g.term(c.part("S1"), "short")
    for got in (g.evaluate([t], [np.inf]), single(g, t, [np.inf])[0]):
        for i in (1, 2):
            assert np.isnan(got[i]) or abs(got[i]) < 1e-12, (
                f"{rds[i].where()} with S1 welded: expected 0 A (shunt bypassed) or nan, "
                f"got {got[i]} (healthy {healthy[i]})")


def test_short_beside_a_source_that_is_a_short_with_power_off():
    """Power off, a generator with ``off_state = "short"`` already joins N1 to
    0V for the ohmmeter; a part across the same nodes failing short changes
    nothing an ohmmeter can see: across R2 it still reads R1 || R2 (Ohm's law,
    parallel resistors).  Both paths must say so."""
    parts = (Part("VG1", "voltage-source", ("N1", GROUND), 1.0, waveform="ac", off_state="short"),
             Part("R1", "resistor", ("N1", "N2"), 1000.0),
             Part("R2", "resistor", ("N2", GROUND), 2200.0),
             Part("C1", "capacitor", ("N1", GROUND), 1e-6))
    c = Circuit("paging amp input filter", GROUND, parts, frequency=1000.0)
    rds = [Reading("resistance", None, part="R2", setup="in-circuit"),
           Reading("resistance", None, plus="N2", minus="N1", setup="in-circuit")]
    expected = 1.0 / (1 / 1000.0 + 1 / 2200.0)
    g = Group(c, ("off", None), rds, METERS)
    t = g.term(c.part("C1"), "short")
    fast = g.evaluate([t], [np.inf]).real
    np.testing.assert_allclose(fast, [expected, expected], rtol=1e-12)
    ref = oracle_readings(c, rds, METERS, {"C1": "short"}).real
    np.testing.assert_allclose(ref, [expected, expected], rtol=1e-12,
                               err_msg="plain re-solve: two parallel shorts read as undefined")


def test_open_leaving_an_opamp_input_floating():
    """A series resistor RS into an op-amp's + input opens: the input is held by
    nothing (op-amp inputs carry no current, formats.md).  With the meter on
    the input, the meter alone holds it: 0 V (Ohm's law).  The output's reading
    depends on the floating input; both paths must agree on it (or both have
    no answer)."""
    parts = (Part("PS1", "voltage-source", ("+5V", GROUND), 5.0),
             Part("RT1", "resistor", ("+5V", "TH"), 10e3),
             Part("R1", "resistor", ("TH", GROUND), 10e3),
             Part("RS1", "resistor", ("TH", "IN"), 1e3),
             Part("U1", "opamp", ("IN", "INV", "OUT")),
             Part("RF1", "resistor", ("OUT", "INV"), 10e3),
             Part("RG1", "resistor", ("INV", GROUND), 10e3),
             Part("RL1", "resistor", ("OUT", GROUND), 10e3))
    c = Circuit("greenhouse vent sensor amp", GROUND, parts)
    rds = [Reading("voltage", "dc", "IN", GROUND), Reading("voltage", "dc", "OUT", GROUND),
           Reading("voltage", "dc", "TH", GROUND)]
    g = Group(c, ("dc", None), rds, METERS)
    ref = oracle_readings(c, rds, METERS, {"RS1": "open"})
    # the rank-one update cannot hold a floating input at 0 V: the engine hands
    # this part to the re-solve path, and the public entry point gives its answer
    assert g.term(c.part("RS1"), "open").kind == "fallback"
    fast = Board(c, rds, METERS).predict_fault(c.part("RS1"), "open")[0]
    assert abs(ref[0]) < 1e-9 and abs(fast[0]) < 1e-9
    # TH is the 10k/10k divider with the 10 Mohm meter across R1.
    r1m = 1.0 / (1 / 10e3 + 1 / 10e6)
    assert ref[2].real == pytest.approx(5.0 * r1m / (10e3 + r1m), rel=1e-9)
    check_against_oracle(fast, ref, scales(rds, ref), "RS1 open, op-amp input floating")


# -------------------------------------------------------- dangling test point

def dangling_circuit():
    """A 24 V divider with a test point TP hung on a 10 kohm resistor RT."""
    parts = (Part("PS1", "voltage-source", ("+24V", GROUND), 24.0),
             Part("R1", "resistor", ("+24V", "A"), 4700.0),
             Part("R2", "resistor", ("A", GROUND), 4700.0),
             Part("RT", "resistor", ("A", "TP"), 10e3))
    return Circuit("irrigation valve driver: test point", GROUND, parts)


def test_dangling_resistor_open_on_and_off_the_test_point():
    """RT open leaves TP floating: readings on TP and off it, against the oracle
    and against Ohm's law."""
    c = dangling_circuit()
    live = [Reading("voltage", "dc", "TP", GROUND), Reading("voltage", "dc", "A", "TP"),
            Reading("voltage", "dc", "A", GROUND), Reading("current", "dc", part="RT"),
            Reading("current", "dc", part="R1")]
    off = [Reading("resistance", None, plus="TP", minus=GROUND, setup="in-circuit"),
           Reading("resistance", None, part="RT", setup="in-circuit"),
           Reading("resistance", None, part="R2", setup="in-circuit")]
    for rs in (live, off):
        key = analysis_key(c, rs[0])
        g = Group(c, key, rs, METERS)
        t = g.term(c.part("RT"), "open")
        ref = oracle_readings(c, rs, METERS, {"RT": "open"})
        assert not np.isnan(ref).any()
        atol = scales(rs, ref)
        check_against_oracle(g.evaluate([t], [0.0]), ref, atol, f"RT open {key}")
        check_against_oracle(single(g, t, [0.0])[0], ref, atol, f"RT open {key} (single)")
    # Ohm's law on the faulted board:
    ref = oracle_readings(c, live, METERS, {"RT": "open"}).real
    # TP is held only by the meter's 10 Mohm to ground: it reads 0 V.
    assert abs(ref[0]) < 1e-12
    # Meter from A to TP: TP hangs on the meter alone, so the meter reads 0 V too.
    assert abs(ref[1]) < 1e-12
    # A is unloaded by RT: 24 * R2 || 10M / (R1 + R2 || 10M) with the meter to ground.
    r2m = 1.0 / (1 / 4700.0 + 1 / 10e6)
    assert ref[2] == pytest.approx(24.0 * r2m / (4700.0 + r2m), rel=1e-12)
    assert ref[3] == 0.0
    # Ohmmeter (power off, PS1 open so R1 is a dead end): TP is cut off, OL;
    # across RT, OL; across R2, R2 alone.
    roff = oracle_readings(c, off, METERS, {"RT": "open"}).real
    assert np.isinf(roff[0]) and np.isinf(roff[1])
    assert roff[2] == pytest.approx(4700.0, rel=1e-12)


# ---------------------------------------------------------- exact short limit

def busbar_circuit():
    """A low-impedance 12 V feed (10 mohm cable, 2 mohm shunt, 1 ohm load)."""
    parts = (Part("PS1", "voltage-source", ("+12V", GROUND), 12.0),
             Part("RC1", "resistor", ("+12V", "B"), 0.010),
             Part("RS1", "resistor", ("B", GROUND), 0.002),
             Part("RL1", "resistor", ("B", GROUND), 1.0))
    return Circuit("conveyor feed", GROUND, parts)


def test_short_is_an_exact_limit_not_a_large_conductance():
    """A short is the exact zero-ohm limit.  The engine matches the oracle's
    exact short within 1e-9 relative; a 1e9 S conductance in its place gives
    readings that differ from the exact short by far more than that."""
    c = busbar_circuit()
    rds = [Reading("voltage", "dc", "B", GROUND), Reading("voltage", "dc", "+12V", "B"),
           Reading("current", "dc", part="RC1"), Reading("current", "dc", part="RL1")]
    g = Group(c, ("dc", None), rds, METERS)
    p = c.part("RL1")
    assert g.new_admittance(p, "short") == np.inf   # the engine's short: 1/d = 0, no big number
    t = g.term(p, "short")
    exact = oracle_readings(c, rds, METERS, {"RL1": "short"})
    big = oracle_readings(c, rds, METERS, {"RL1": 1e-9})            # 1e9 S
    fast = g.evaluate([t], [np.inf])
    vec = single(g, t, [np.inf])[0]
    atol = 1e-15
    for got in (fast, vec):
        np.testing.assert_allclose(got.real, exact.real, rtol=1e-9, atol=atol)
    # Ohm's law with B shorted to 0 V: the whole 12 V across the cable; the cable
    # current read through the 1 ohm shunt is 12 / (0.010 + 1) A.
    assert abs(exact[0]) == 0.0
    assert exact[1].real == pytest.approx(12.0, rel=1e-12)
    assert exact[2].real == pytest.approx(12.0 / 1.010, rel=1e-12)
    # The large conductance is measurably different: B sits at 12 V x 1e-9 / 10 mohm
    # ~ 1.2 uV, so the cable voltage is low by ~1e-7 relative -- beyond 1e-9.
    assert abs(big[0]) > 1e-7
    assert abs(big[1] - exact[1]) / abs(exact[1]) > 1e-8
    # ... and the engine given that same finite conductance follows it, so the
    # engine's exact result above did not come from a large number.
    finite = g.evaluate([t], [1e9])
    np.testing.assert_allclose(finite.real, big.real, rtol=1e-7, atol=1e-15)
    assert np.max(np.abs(finite - fast) / np.maximum(np.abs(fast), 1e-12)) > 1e-8


# ------------------------------------------------------------ fallback terms

def test_fallback_terms_match_oracle_through_board():
    """Terms the rank-one path leaves to re-assembly (an ideal winding opened at
    DC; a capacitor short joining two pieces of the power-off network) give the
    oracle's readings through ``Board.predict_fault``."""
    parts = (Part("PS1", "voltage-source", ("A", GROUND), 9.0),
             Part("R1", "resistor", ("A", "B"), 1000.0),
             Part("C1", "capacitor", ("B", GROUND), 1e-6),
             Part("L1", "inductor", ("B", "C"), 0.01),          # ideal winding
             Part("R2", "resistor", ("C", GROUND), 2200.0))
    c = Circuit("kiln door interlock", GROUND, parts)
    rds = [Reading("voltage", "dc", "C", GROUND), Reading("current", "dc", part="R1"),
           Reading("resistance", None, part="C1", setup="in-circuit"),
           Reading("resistance", None, plus="A", minus=GROUND, setup="in-circuit")]
    board = Board(c, rds, METERS)
    kinds = set()
    for ref, mode in (("L1", "open"), ("C1", "short")):
        part = c.part(ref)
        for key, (g, idx) in board.groups.items():
            kinds.add(g.term(part, mode).kind)
        got = board.predict_fault(part, mode)[0]
        ref_ = oracle_readings(c, rds, METERS, {ref: mode}).real
        np.testing.assert_allclose(got, ref_, rtol=RTOL, atol=1e-12)
    assert "fallback" in kinds
