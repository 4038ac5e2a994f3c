"""faultfind's sparse engine against a dense nodal-analysis solver written here.

Outside reference: the classic modified nodal analysis of Ho, Ruehli and
Brennan ("The modified nodal approach to network analysis", IEEE Trans.
Circuits and Systems CAS-22(6), 1975), as taught in every circuit-analysis
text: a dense admittance matrix ``G`` stamped part by part, current sources on
the right-hand side, and one extra row and column per voltage source (and per
zero-volt branch, and per voltage-controlled voltage source) -- written out
plainly below with numpy, without any of faultfind's assembler.  Part values
and conventions are those of formats.md section 1 (source direction, current
sign, DC and AC analyses).

Seeded random circuits (numpy ``default_rng``, 60 circuits): DC and AC node
voltages and part currents with an ideal meter; then the default meter's
loading (10 Mohm across the probes, 1 ohm in series) against the dense solver
with the meter drawn into the circuit as a resistor; then sensitivities
against the dense solver's direct differentiation, itself checked by central
differences on well-conditioned circuits.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from faultfind.engine.predict import predict
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.model import Circuit, Part, Reading

IDEAL = dataclasses.replace(DEFAULT_METER, name="ideal", input_resistance=1e30, current_shunt=0.0)
GROUND = "0"
RTOL = 1e-7          # explicit relative tolerance of the comparisons
ATOL_REL = 1e-9      # absolute tolerance, relative to the largest value compared


# ------------------------------------------------------ the reference solver

def _elements(parts, analysis, w):
    """Each part's stamp and its derivative with respect to ln(value).

    Returns admittances [(ref, a, b, y, dy)], branches [(ref, a, b, e, de,
    control)] and injections [(ref, a, b, i, di)] (current out of a into the
    circuit).  "dc": capacitors open, inductors as their winding resistance
    (an ideal winding is a 0 V branch), AC sources at zero.  "ac": complex
    admittances at ``w``, DC sources at zero.
    """
    adm, br, inj = [], [], []
    for p in parts:
        if p.kind == "opamp":  # output: a VCVS referred to ground
            control = (p.nodes[0], p.nodes[1], p.gain or 1e5)
            br.append((p.ref, p.nodes[2], GROUND, 0.0, 0.0, control))
            continue
        a, b = p.nodes
        if p.kind in ("resistor", "fuse") or (p.kind == "switch" and p.state == "closed"):
            y = 1.0 / p.value
            adm.append((p.ref, a, b, y, -y))                 # d(1/R)/d ln R = -1/R
        elif p.kind == "capacitor" and analysis == "ac":
            y = 1j * w * p.value
            adm.append((p.ref, a, b, y, y))                  # d(jwC)/d ln C = jwC
        elif p.kind == "inductor":
            rw = p.resistance or 0.0
            if analysis == "ac":
                zl = 1j * w * p.value
                adm.append((p.ref, a, b, 1.0 / (rw + zl), -zl / (rw + zl) ** 2))
            elif rw > 0:
                adm.append((p.ref, a, b, 1.0 / rw, 0.0))     # winding resistance: not a parameter
            else:
                br.append((p.ref, a, b, 0.0, 0.0, None))
        elif p.is_source:
            on = (p.waveform == "ac") == (analysis == "ac")
            e = 0.0
            if on:
                e = p.value * (np.exp(1j * np.deg2rad(p.phase)) if analysis == "ac" else 1.0)
            if p.kind == "voltage-source":
                br.append((p.ref, a, b, e, e, None))
            else:
                inj.append((p.ref, a, b, e, e))
    return adm, br, inj


def _stamp(n, idx, adm, br, inj, k_y, k_e, k_i, with_incidence):
    """Dense MNA matrix and right-hand side of the given stamp values."""
    m = len(br)
    A = np.zeros((n + m, n + m), dtype=complex)
    z = np.zeros(n + m, dtype=complex)
    for el in adm:
        a, b, y = idx[el[1]], idx[el[2]], el[k_y]
        for r, sr in ((a, 1), (b, -1)):
            for c, sc in ((a, 1), (b, -1)):
                if r is not None and c is not None:
                    A[r, c] += sr * sc * y
    for el in inj:
        a, b, i = idx[el[1]], idx[el[2]], el[k_i]
        if a is not None:
            z[a] += i
        if b is not None:
            z[b] -= i
    for k, el in enumerate(br):
        row, a, b = n + k, idx[el[1]], idx[el[2]]
        z[row] = el[k_e]
        if not with_incidence:
            continue
        # branch current: leaves node a into the branch, comes out at node b
        if a is not None:
            A[a, row] += 1
            A[row, a] += 1
        if b is not None:
            A[b, row] -= 1
            A[row, b] -= 1
        if el[5] is not None:  # v(out) - gain (v(p) - v(n)) = 0
            cp, cn, gain = el[5]
            if idx[cp] is not None:
                A[row, idx[cp]] -= gain
            if idx[cn] is not None:
                A[row, idx[cn]] += gain
    return A, z


def dense_solve(parts, analysis, frequency=None, wrt=None):
    """Classic dense MNA.

    Returns ``(volts, amps, cond)``: node voltages and part currents as dicts
    and the condition number of the matrix.  Currents follow formats.md:
    through a passive part from nodes[0] to nodes[1]; through a source, what
    it delivers out of nodes[0]; zero through a part that is open.  With
    ``wrt`` (a part ref), the dicts hold instead the derivatives with respect
    to ln(value of that part), by direct differentiation of ``A x = z``:
    ``A dx = dz - dA x``.
    """
    w = 2 * np.pi * frequency if analysis == "ac" else 0.0
    nodes = []
    for p in parts:
        for nd in p.nodes:
            if nd != GROUND and nd not in nodes:
                nodes.append(nd)
    idx = {nd: i for i, nd in enumerate(nodes)}
    idx[GROUND] = None
    n = len(nodes)
    adm, br, inj = _elements(parts, analysis, w)
    A, z = _stamp(n, idx, adm, br, inj, 3, 3, 3, True)
    x = np.linalg.solve(A, z)
    kinds = {p.ref: p.kind for p in parts}
    if wrt is not None:
        # only the part's own stamp changes; the incidence of branches and
        # the op-amp gains are constants
        d_adm = [e for e in adm if e[0] == wrt]
        d_br = [e if e[0] == wrt else e[:4] + (0.0, None) for e in br]
        d_inj = [e for e in inj if e[0] == wrt]
        dA, dz = _stamp(n, idx, d_adm, d_br, d_inj, 4, 4, 4, False)
        dx = np.linalg.solve(A, dz - dA @ x)
    volt = lambda vec, nd: 0.0 if idx[nd] is None else vec[idx[nd]]  # noqa: E731
    if wrt is None:
        volts = {nd: volt(x, nd) for nd in idx}
        amps = {e[0]: e[3] * (volt(x, e[1]) - volt(x, e[2])) for e in adm}
        for k, e in enumerate(br):
            amps[e[0]] = -x[n + k] if kinds[e[0]] == "voltage-source" else x[n + k]
        for e in inj:
            amps[e[0]] = e[3]
    else:
        volts = {nd: volt(dx, nd) for nd in idx}
        amps = {e[0]: e[4] * (volt(x, e[1]) - volt(x, e[2])) * (e[0] == wrt)
                + e[3] * (volt(dx, e[1]) - volt(dx, e[2])) for e in adm}
        for k, e in enumerate(br):
            amps[e[0]] = -dx[n + k] if kinds[e[0]] == "voltage-source" else dx[n + k]
        for e in inj:
            amps[e[0]] = e[4] if e[0] == wrt else 0.0
    for p in parts:
        amps.setdefault(p.ref, 0.0)  # open in this analysis: capacitor at DC, open switch
    return volts, amps, np.linalg.cond(A)


# --------------------------------------------------- random circuit drawing

def _log_uniform(rng, lo, hi):
    return float(10.0 ** rng.uniform(np.log10(lo), np.log10(hi)))


def random_circuit(rng, max_cond=1e10):
    """A random circuit every node of which has a DC path to ground through
    resistors, with no loop of zero-impedance branches (a spanning forest is
    kept with union-find), and a system whose condition number at DC and AC
    is below ``max_cond`` (draws that miss are drawn again)."""
    while True:
        circuit = _draw(rng)
        conds = [dense_solve(circuit.parts, "dc")[2],
                 dense_solve(circuit.parts, "ac", circuit.frequency)[2]]
        if max(conds) < max_cond:
            return circuit


def _draw(rng):
    n = int(rng.integers(3, 13))
    nodes = [GROUND] + [f"N{i}" for i in range(1, n + 1)]
    parent = {x: x for x in nodes}

    def find(x):
        while parent[x] != x:
            x = parent[x]
        return x

    def zero_ok(a, b):  # may a zero-impedance branch join a and b?
        ra, rb = find(a), find(b)
        if ra == rb:
            return False
        parent[ra] = rb
        return True

    parts = []

    def add(kind, a, b, value, **kw):
        ref = f"{kind[0].upper()}{len(parts) + 1}"
        parts.append(Part(ref, kind, (a, b), value, 0.05, 0.05, **kw))

    for i in range(1, len(nodes)):  # spanning tree of resistors
        add("resistor", nodes[i], nodes[int(rng.integers(0, i))], _log_uniform(rng, 10, 1e6))
    def pick():  # two different nodes
        return tuple(nodes[int(k)] for k in rng.choice(len(nodes), size=2, replace=False))

    # one DC and one AC supply at least
    for waveform in ("dc", "ac"):
        a, b = pick()
        if zero_ok(a, b):
            add("voltage-source", a, b, float(rng.uniform(1, 48)), waveform=waveform,
                phase=float(rng.uniform(-180, 180)) if waveform == "ac" else 0.0)
        else:
            add("current-source", a, b, _log_uniform(rng, 1e-5, 1e-2), waveform=waveform,
                phase=float(rng.uniform(-180, 180)) if waveform == "ac" else 0.0)
    kinds = ["resistor", "capacitor", "inductor", "choke", "vdc", "vac", "idc", "iac",
             "fuse", "switch", "open-switch", "opamp"]
    for _ in range(int(rng.integers(2, n + 5))):
        kind = kinds[int(rng.integers(len(kinds)))]
        a, b = pick()
        if kind == "resistor":
            add("resistor", a, b, _log_uniform(rng, 10, 1e6))
        elif kind == "capacitor":
            add("capacitor", a, b, _log_uniform(rng, 1e-9, 1e-5))
        elif kind == "inductor":
            add("inductor", a, b, _log_uniform(rng, 1e-5, 1e-1),
                resistance=_log_uniform(rng, 0.1, 100))
        elif kind == "choke" and zero_ok(a, b):
            add("inductor", a, b, _log_uniform(rng, 1e-5, 1e-1))
        elif kind in ("vdc", "vac") and zero_ok(a, b):
            add("voltage-source", a, b, float(rng.uniform(1, 48)), waveform=kind[1:],
                phase=float(rng.uniform(-180, 180)))
        elif kind in ("idc", "iac"):
            add("current-source", a, b, _log_uniform(rng, 1e-5, 1e-2), waveform=kind[1:],
                phase=float(rng.uniform(-180, 180)))
        elif kind == "fuse":
            add("fuse", a, b, _log_uniform(rng, 0.01, 1))
        elif kind == "switch":
            add("switch", a, b, _log_uniform(rng, 0.01, 1))
        elif kind == "open-switch":
            add("switch", a, b, 0.05, state="open")
        elif kind == "opamp":
            out = nodes[int(rng.integers(1, len(nodes)))]
            if zero_ok(out, GROUND):
                p_in, n_in = pick()
                parts.append(Part(f"U{len(parts) + 1}", "opamp", (p_in, n_in, out),
                                  gain=_log_uniform(rng, 1e3, 1e6)))
        else:
            add("resistor", a, b, _log_uniform(rng, 10, 1e6))
    return Circuit("random bench circuit", GROUND, tuple(parts),
                   frequency=_log_uniform(rng, 10, 1e5))


def all_readings(circuit, mode):
    f = circuit.frequency if mode == "ac" else None
    rs = [Reading("voltage", mode, nd, GROUND, frequency=f) for nd in circuit.nodes if nd != GROUND]
    rs += [Reading("current", mode, part=p.ref, frequency=f)
           for p in circuit.parts if p.kind != "opamp"]
    return rs


def reference_values(parts, readings, analysis, frequency, wrt=None):
    """Phasors (complex) of the readings from the dense solver, or their
    derivatives with respect to ln(value of ``wrt``)."""
    volts, amps, _ = dense_solve(parts, analysis, frequency, wrt)
    out = []
    for r in readings:
        if r.quantity == "voltage":
            out.append(volts[r.plus] - volts[r.minus])
        else:
            out.append(amps[r.part])
    return np.array(out, dtype=complex)


def displayed(phasor, mode):
    """What the meter shows of a phasor: the RMS magnitude (AC) or the signed value (DC)."""
    return np.abs(phasor) if mode == "ac" else phasor.real


# Values below these are zero for any meter (the default meter resolves
# 100 uV and 0.1 uA, formats.md section 3 / faultfind.io.meters_file): they
# only keep round-off of exactly-zero readings from failing a relative test.
FLOOR = {"voltage": 1e-12, "current": 1e-15}


def atol_for(readings, values):
    """Absolute tolerance per reading: ATOL_REL times the largest value of the
    same quantity, never below FLOOR."""
    values = np.abs(np.asarray(values))
    out = np.zeros(len(readings))
    for q in ("voltage", "current"):
        sel = np.array([r.quantity == q for r in readings])
        if sel.any():
            out[sel] = max(ATOL_REL * values[sel].max(), FLOOR[q])
    return out


def assert_close(got, want, atol, what=""):
    got, want = np.asarray(got), np.asarray(want)
    bad = np.abs(got - want) > atol + RTOL * np.abs(want)
    assert not bad.any(), (f"{what}: {int(bad.sum())} of {bad.size} differ; first at "
                           f"{int(np.flatnonzero(bad)[0])}: got {got[bad][0]}, want {want[bad][0]}")


# -------------------------------------------------------------------- tests

@pytest.mark.parametrize("seed", range(60))
def test_ideal_meter_matches_dense_mna(seed):
    """Every node voltage and every part current, DC and AC, with an ideal meter."""
    c = random_circuit(np.random.default_rng(seed))
    for mode in ("dc", "ac"):
        readings = all_readings(c, mode)
        pred = predict(c, readings, {"default": IDEAL})
        ref = reference_values(c.parts, readings, mode, c.frequency)
        atol = atol_for(readings, ref)
        assert_close(pred.phasor, ref, atol, f"{mode} phasors")
        assert_close(pred.value, displayed(ref, mode), atol, f"{mode} displays")


def _with_meter(parts, reading, meter):
    """The circuit with the meter drawn in: its input resistance across the
    probes, or its shunt in series with the part (a new node between them)."""
    parts = list(parts)
    if reading.quantity == "voltage":
        probes = (reading.plus, reading.minus)
        parts.append(Part("METER", "resistor", probes, meter.input_resistance))
        return parts
    k = next(i for i, p in enumerate(parts) if p.ref == reading.part)
    p = parts[k]
    parts[k] = dataclasses.replace(p, nodes=("METER_NODE",) + p.nodes[1:])
    parts.append(Part("METER", "resistor", (p.nodes[0], "METER_NODE"), meter.current_shunt))
    return parts


def _loaded_case(seed, mode):
    """A random circuit read by the default meter at a few node pairs and
    parts: (readings, faultfind's phasors, the reference with the meter drawn
    in, faultfind's phasors with an ideal meter, absolute tolerances)."""
    rng = np.random.default_rng(500 + seed)
    c = random_circuit(rng)
    f = c.frequency if mode == "ac" else None
    readings = []
    for _ in range(4):
        a, b = (c.nodes[int(i)] for i in rng.choice(len(c.nodes), size=2, replace=False))
        readings.append(Reading("voltage", mode, a, b, frequency=f))
    passive = [p for p in c.parts if p.kind != "opamp"]
    for k in rng.choice(len(passive), size=min(5, len(passive)), replace=False):
        readings.append(Reading("current", mode, part=passive[int(k)].ref, frequency=f))
    pred = predict(c, readings, {"default": DEFAULT_METER})
    ref = np.array([reference_values(_with_meter(c.parts, r, DEFAULT_METER), [r], mode, f)[0]
                    for r in readings])
    unloaded = all_readings(c, mode)  # the scale of the circuit's own values
    scale = atol_for(unloaded, reference_values(c.parts, unloaded, mode, f))
    atol = np.array([scale[[u.quantity for u in unloaded].index(r.quantity)] for r in readings])
    ideal = predict(c, readings, {"default": IDEAL}).phasor
    return readings, pred, ref, ideal, atol


LOADED_SEEDS = range(25)


@pytest.mark.parametrize("mode", ["dc", "ac"])
@pytest.mark.parametrize("seed", LOADED_SEEDS)
def test_default_meter_loading_matches_meter_drawn_in(seed, mode):
    """The default meter (10 Mohm input, 1 ohm shunt) changes what it reads
    exactly as a resistor drawn into the circuit would (common practice: a
    meter is a load; the reference solves the modified circuit outright)."""
    assert DEFAULT_METER.input_resistance == 10e6 and DEFAULT_METER.current_shunt == 1.0
    readings, pred, ref, _, atol = _loaded_case(seed, mode)
    assert_close(pred.phasor, ref, atol, f"{mode} loaded phasors")
    assert_close(pred.value, displayed(ref, mode), atol, f"{mode} loaded displays")


def test_meter_loading_is_visible_in_those_circuits():
    """The test above can tell: in most of its circuits the loaded readings
    differ from the ideal meter's by far more than its tolerance."""
    visible = 0
    for seed in LOADED_SEEDS:
        for mode in ("dc", "ac"):
            _, _, ref, ideal, atol = _loaded_case(seed, mode)
            visible += bool(np.any(np.abs(ideal - ref) > 10 * (atol + RTOL * np.abs(ref))))
    assert visible >= 0.8 * 2 * len(LOADED_SEEDS)


def _dense_sensitivity(c, readings, mode, params):
    """d display / d ln p_j from the dense solver's direct differentiation."""
    x = reference_values(c.parts, readings, mode, c.frequency)
    out = np.zeros((len(readings), len(params)))
    for j, ref in enumerate(params):
        dx = reference_values(c.parts, readings, mode, c.frequency, wrt=ref)
        if mode == "ac":  # d|x| = Re(conj(x) dx) / |x|
            mag = np.abs(x)
            out[:, j] = np.where(mag > 0, (np.conj(x) * dx).real / np.where(mag > 0, mag, 1), 0.0)
        else:
            out[:, j] = dx.real
    return out


@pytest.mark.parametrize("seed", range(30))
def test_sensitivities_match_dense_direct_differentiation(seed):
    """``d value / d ln p_j`` (faultfind: adjoint solves and a rank-one
    update) against the direct method, ``A dx = dz - dA x`` with the dense
    matrices (Vlach and Singhal, Computer Methods for Circuit Analysis and
    Design, sensitivity chapter; from memory)."""
    c = random_circuit(np.random.default_rng(900 + seed))
    for mode in ("dc", "ac"):
        readings = all_readings(c, mode)
        pred = predict(c, readings, {"default": IDEAL})
        ref = _dense_sensitivity(c, readings, mode, pred.params)
        atol = atol_for(readings, pred.value)
        for j in range(len(pred.params)):
            assert_close(pred.sensitivity[:, j], ref[:, j], atol, f"{mode} d/d ln {pred.params[j]}")


@pytest.mark.parametrize("seed", range(10))
def test_direct_differentiation_matches_central_differences(seed):
    """The reference above checked in turn by central differences of the
    dense solution (step 1e-4 in ln p), on well-conditioned circuits where
    the differences are not lost in round-off."""
    rng = np.random.default_rng(1900 + seed)
    c = random_circuit(rng, max_cond=1e6)
    h = 1e-4
    for mode in ("dc", "ac"):
        readings = all_readings(c, mode)
        params = [p.ref for p in c.parts if p.kind != "opamp"]
        ref = _dense_sensitivity(c, readings, mode, params)
        base = displayed(reference_values(c.parts, readings, mode, c.frequency), mode)
        for j, name in enumerate(params):
            vals = []
            for sgn in (1, -1):
                parts = [dataclasses.replace(p, value=p.value * np.exp(sgn * h))
                         if p.ref == name else p for p in c.parts]
                vals.append(displayed(reference_values(parts, readings, mode, c.frequency), mode))
            fd = (vals[0] - vals[1]) / (2 * h)
            np.testing.assert_allclose(ref[:, j], fd, rtol=1e-5, atol=1e-6 * np.max(np.abs(base)))
