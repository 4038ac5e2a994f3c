"""Held-out check of the failure mode: right part and mode where the readings can tell.

Run from the repository root::

    python benchmarks/heldout_modes.py [--cases N] [--seed S] [--jobs J] [--show K]

Not tuned on the project's own generator (:mod:`benchmarks.circuits`) nor on
its simulation: the boards, readings and faults are drawn here, and the true
readings come from a dense modified-nodal solver written in this file (numpy
``solve``; meter loading as a conductance across the probes or a shunt in
series), displayed by the meter model of :func:`faultfind.engine.meter.simulate`.

Boards (sizes drawn per case):

* ``rail``: a 12/24/48 V supply behind a fuse (20-200 mOhm cold) feeding 1-6
  loads across the rail and 1-3 dividers off it;
* ``ladder``: a supply, a fuse and an R-2R-like ladder of 3-20 sections with
  random values;
* ``ac``: an AC source (50 Hz-10 kHz) with its output resistor and an RC/RL
  chain of 2-8 sections, read in AC.

Faults: open, short or drift of a random part, and on rail boards one case
in two a load shorted across the fused rail.  A short has a real
resistance: 0.5-5 mOhm across a rail, otherwise log-uniform 1 mOhm-0.5 Ohm.
A drift is a factor 0.2-0.6 or 1.8-6.

Readings: voltages at a random subset of nodes (DC, or AC on ac boards),
sometimes the drop across a part, sometimes a lifted or in-circuit
resistance (of the faulted part half the time); read with the built-in
handheld or with a bench meter (60,000 counts, 0.05 % + 2 on DC volts).

A case is *identifiable* when no other mode of the failed part (drift: at
any value of the engine's search range outside the tolerance; short: at any
resistance from 0 to its largest) predicts readings within a distance of 2
standard uncertainties of the true fault's noise-free readings (the
criterion of ``benchmarks/accuracy.py``).  The figure is the share of
identifiable fault cases whose top hypothesis is a single fault of the right
part and mode.
"""

from __future__ import annotations

import argparse
import math
import sys
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from faultfind.diagnose import describe_fault, diagnose  # noqa: E402
from faultfind.engine.hypotheses import DRIFT_RANGE, SOURCE_RANGE  # noqa: E402
from faultfind.engine.meter import simulate  # noqa: E402
from faultfind.io.meters_file import DEFAULT_METER, meters_with_default  # noqa: E402
from faultfind.model import Accuracy, Circuit, Part, Reading  # noqa: E402

BENCH = DEFAULT_METER.__class__(**{**DEFAULT_METER.__dict__, "name": "bench", "counts": 60000,
                                   "dc_voltage": Accuracy(0.05, 2.0), "ac_voltage": Accuracy(0.3, 20.0),
                                   "resistance": Accuracy(0.1, 2.0), "voltage_resolution": 1e-5,
                                   "resistance_resolution": 1e-3})
SAME = 4.0


# ----------------------------------------------------------------- boards
def _r(rng, lo, hi):
    return float(math.exp(rng.uniform(math.log(lo), math.log(hi))))


def board(rng):
    """A random board: (family, Circuit)."""
    fam = ["rail", "ladder", "ac"][int(rng.integers(3))]
    P = []
    if fam == "ac":
        f = float(rng.choice([50.0, 400.0, 1000.0, 10000.0]))
        P.append(Part("VG", "voltage-source", ("IN", "0"), 1.0 + 9 * rng.random(), 0.02, 0.02, waveform="ac"))
        P.append(Part("RS", "resistor", ("IN", "N1"), _r(rng, 50, 600), 0.01, 0.01))
        n = int(rng.integers(2, 9))
        for k in range(1, n + 1):
            a, b = f"N{k}", f"N{k + 1}"
            R = _r(rng, 100, 10000)
            if rng.random() < 0.6:
                P.append(Part(f"R{k}", "resistor", (a, b), R, 0.01, 0.01))
                P.append(Part(f"C{k}", "capacitor", (b, "0"), 1 / (2 * math.pi * f * R * _r(rng, 0.3, 3)), 0.1, 0.1))
            else:
                P.append(Part(f"R{k}", "resistor", (a, b), R, 0.01, 0.01))
                L = R * _r(rng, 0.3, 3) / (2 * math.pi * f)
                P.append(Part(f"L{k}", "inductor", (b, "0"), L, 0.1, 0.1, resistance=_r(rng, 1, 50)))
        P.append(Part("RL", "resistor", (f"N{n + 1}", "0"), _r(rng, 1000, 100000), 0.05, 0.05))
        return fam, Circuit("held-out ac", "0", tuple(P), frequency=f)
    V = float(rng.choice([12.0, 24.0, 48.0]))
    P.append(Part("PS", "voltage-source", ("SUP", "0"), V, 0.02, 0.02))
    P.append(Part("F1", "fuse", ("SUP", "RAIL"), _r(rng, 0.02, 0.2), 0.3, 0.3))
    if fam == "rail":
        for k in range(int(rng.integers(1, 7))):
            P.append(Part(f"RL{k}", "resistor", ("RAIL", "0"), _r(rng, 47, 10000), 0.05, 0.05))
        for k in range(int(rng.integers(1, 4))):
            P.append(Part(f"RA{k}", "resistor", ("RAIL", f"D{k}"), _r(rng, 1000, 47000), 0.01, 0.01))
            P.append(Part(f"RB{k}", "resistor", (f"D{k}", "0"), _r(rng, 1000, 47000), 0.01, 0.01))
    else:
        n = int(rng.integers(3, 21))
        prev = "RAIL"
        for k in range(n):
            node = f"L{k}"
            P.append(Part(f"RS{k}", "resistor", (prev, node), _r(rng, 500, 5000), 0.01, 0.01))
            P.append(Part(f"RP{k}", "resistor", (node, "0"), _r(rng, 1000, 20000), 0.01, 0.01))
            prev = node
    return fam, Circuit(f"held-out {fam}", "0", tuple(P))


def plant(fam, c, rng):
    """(ref, mode, value): value is the drifted value or the short's resistance."""
    if fam == "rail" and rng.random() < 0.5:
        loads = [p for p in c.parts if p.ref.startswith("RL")]
        p = loads[int(rng.integers(len(loads)))]
        return p.ref, "short", _r(rng, 5e-4, 5e-3)
    parts = [p for p in c.parts if p.fault_modes and not p.is_source]
    p = parts[int(rng.integers(len(parts)))]
    mode = p.fault_modes[int(rng.integers(len(p.fault_modes)))]
    if mode == "short":
        return p.ref, mode, _r(rng, 1e-3, 0.5)
    if mode == "drift":
        lo, hi = (0.2, 0.6) if rng.random() < 0.5 else (1.8, 6.0)
        if p.kind == "fuse":
            lo, hi = 10.0, 1000.0
        return p.ref, mode, p.value * _r(rng, lo, hi)
    return p.ref, mode, None


def readings(fam, c, fault, rng):
    nodes = [n for n in c.nodes if n != c.ground]
    k = int(rng.integers(2, min(8, len(nodes)) + 1))
    pick = [nodes[i] for i in rng.choice(len(nodes), size=k, replace=False)]
    mode = "ac" if fam == "ac" else "dc"
    out = [Reading("voltage", mode, n, c.ground) for n in pick]
    passive = [p for p in c.parts if not p.is_source]
    if rng.random() < 0.4:
        p = passive[int(rng.integers(len(passive)))]
        out.append(Reading("voltage", mode, p.nodes[0], p.nodes[1]))
    if rng.random() < 0.5:
        p = c.part(fault[0]) if rng.random() < 0.5 else passive[int(rng.integers(len(passive)))]
        setup = "lifted" if rng.random() < 0.5 else "in-circuit"
        out.append(Reading("resistance", None, None, None, part=p.ref, setup=setup))
    return out


# ------------------------------------------------------- the dense solver
def _value(p, fault):
    ref, mode, v = fault
    return v if (p.ref == ref and mode == "drift") else p.value


def solve(c, fault, rd, meter):
    """True value of one reading on the faulted board (dense MNA)."""
    ref, mode, fv = fault
    if rd.quantity == "resistance" and rd.setup == "lifted":
        p = c.part(rd.part)
        if p.ref == ref and mode == "open":
            return math.inf
        base = _value(p, fault) if p.kind in ("resistor", "fuse") else (
            p.resistance or 0.0 if p.kind == "inductor" else math.inf)
        if p.ref == ref and mode == "short":
            return fv if not math.isfinite(base) else base * fv / (base + fv)
        return base
    off = rd.quantity == "resistance"
    w = 2 * math.pi * c.frequency if (rd.mode == "ac" and not off) else 0.0
    nodes = [n for n in c.nodes if n != c.ground]
    ix = {n: i for i, n in enumerate(nodes)}
    ix[c.ground] = -1
    G, B, E = [], [], []          # admittances (a, b, y); branches (a, b, e); injections (a, b, i)
    for p in c.parts:
        a, b = p.nodes[0], p.nodes[1] if len(p.nodes) > 1 else c.ground
        faulted = p.ref == ref
        if p.is_source:
            active = not off and ((p.waveform == "ac") == (w > 0))
            if p.kind == "voltage-source":
                if off:
                    if p.off_state == "short":
                        B.append((a, b, 0.0))
                else:
                    B.append((a, b, p.value if active else 0.0))
            elif active:
                E.append((a, b, p.value))
            continue
        if faulted and mode == "open":
            continue
        v = _value(p, fault)
        if p.kind in ("resistor", "fuse", "switch"):
            if p.kind != "switch" or p.state == "closed":
                G.append((a, b, 1.0 / v))
        elif p.kind == "capacitor":
            if w > 0:
                G.append((a, b, 1j * w * v))
        elif p.kind == "inductor":
            z = (p.resistance or 0.0) + 1j * w * v
            if abs(z) == 0:
                B.append((a, b, 0.0))
            else:
                G.append((a, b, 1.0 / z))
        if faulted and mode == "short":
            G.append((a, b, 1.0 / fv))
    if rd.quantity == "voltage":
        G.append((rd.plus, rd.minus or c.ground, 1.0 / meter.input_resistance))
    elif rd.quantity == "resistance":
        p = c.part(rd.part) if rd.part else None
        pa, pb = (p.nodes[0], p.nodes[1]) if p else (rd.plus, rd.minus or c.ground)
        E.append((pb, pa, 1.0))       # 1 A test current into pa
    n, m = len(nodes), len(B)
    A = np.zeros((n + m, n + m), dtype=complex)
    rhs = np.zeros(n + m, dtype=complex)

    def stamp(a, b, y):
        i, j = ix[a], ix[b]
        if i >= 0:
            A[i, i] += y
        if j >= 0:
            A[j, j] += y
        if i >= 0 and j >= 0:
            A[i, j] -= y
            A[j, i] -= y
    for a, b, y in G:
        stamp(a, b, y)
    for k, (a, b, e) in enumerate(B):
        i, j = ix[a], ix[b]
        if i >= 0:
            A[i, n + k] += 1
            A[n + k, i] += 1
        if j >= 0:
            A[j, n + k] -= 1
            A[n + k, j] -= 1
        rhs[n + k] = e
    for a, b, cur in E:
        i, j = ix[a], ix[b]
        if i >= 0:
            rhs[i] += cur
        if j >= 0:
            rhs[j] -= cur
    A += np.eye(n + m) * 1e-15        # floating sections behind an open sit at 0
    x = np.linalg.solve(A, rhs)
    volt = lambda q: 0.0 if ix[q] < 0 else x[ix[q]]   # noqa: E731
    if rd.quantity == "resistance":
        p = c.part(rd.part) if rd.part else None
        pa, pb = (p.nodes[0], p.nodes[1]) if p else (rd.plus, rd.minus or c.ground)
        v = abs(volt(pa) - volt(pb))
        return math.inf if v > 1e12 else v
    v = volt(rd.plus) - volt(rd.minus or c.ground)
    return abs(v) if rd.mode == "ac" else v.real


# ------------------------------------------------------------------ a case
def run_case(seed, index):
    rng = np.random.default_rng([seed, index, 13])
    fam, c = board(rng)
    fault = plant(fam, c, rng)
    plan = readings(fam, c, fault, rng)
    meter = BENCH if rng.random() < 0.5 else DEFAULT_METER
    meters = meters_with_default({"default": meter}) if meter is BENCH else meters_with_default(None)
    true, shown = [], []
    for rd in plan:
        t = solve(c, fault, rd, meter)
        true.append(t)
        v, ol = simulate(meter, rd.quantity, rd.mode, t, rng)
        shown.append(Reading(rd.quantity, rd.mode, rd.plus, rd.minus, part=rd.part, setup=rd.setup,
                             value=v, overrange=ol))
    d = diagnose(c, shown, meters, advise=False)
    ev = d.evaluator
    sd = np.sqrt(ev.ev.u ** 2 + np.clip(np.diag(ev.ev.T0), 0, None))
    sd = np.where(sd > 0, sd, 1e-12)
    ref, mode, value = fault
    part = c.part(ref)
    tv = np.array([math.inf if not math.isfinite(t) else t for t in true])
    tv = np.where(np.array([r.overrange != 0 for r in shown]), np.inf, tv)
    ident = True
    for other in part.fault_modes:
        if other == mode:
            continue
        if other == "drift":
            lo, hi = SOURCE_RANGE if part.is_source else DRIFT_RANGE
            lo = 1e-2 if part.kind == "resistor" else (1.0 if part.kind in ("fuse", "switch") else lo)
            f = np.exp(np.linspace(math.log(lo), math.log(hi), 61))
            alts = [(ref, "drift", part.value * x) for x in f if x < 1 - part.tol_low or x > 1 + part.tol_high]
        elif other == "short":
            rmax = 1e-2 * part.value if part.kind == "resistor" else 1.0
            alts = [(ref, "short", r) for r in np.append(1e-9 * rmax, np.geomspace(1e-6 * rmax, rmax, 25))]
        else:
            alts = [(ref, other, None)]
        for alt in alts:
            row = np.array([solve(c, alt, rd, meter) for rd in plan])
            if np.array_equal(np.isinf(row), np.isinf(tv)):
                fin = np.isfinite(row) & np.isfinite(tv)
                if float(np.sum(((row[fin] - tv[fin]) / sd[fin]) ** 2)) <= SAME:
                    ident = False
                    break
        if not ident:
            break
    def near(row):
        row = np.asarray(row, dtype=float)
        if not np.array_equal(np.isinf(row), np.isinf(tv)):
            return False
        fin = np.isfinite(row) & np.isfinite(tv)
        return float(np.sum(((row[fin] - tv[fin]) / sd[fin]) ** 2)) <= SAME

    healthy = np.array([solve(c, ("", "none", None), rd, meter) for rd in plan])
    visible = not near(healthy)
    top = d.hypotheses[0]
    got = [(f.ref, f.mode) for f in top.faults]
    # the part is right within ambiguity: the same part, or a single fault of another part
    # that predicts the true readings (parallel loads across one rail), or grouped with it
    twin = len(got) == 1 and (got[0][0] == ref or near(top.predicted)
                              or any(ref in g and got[0][0] in g for g in d.ambiguity_groups))
    # judged on the mode: the top names the true part, or another part whose same mode
    # predicts the true readings (a parallel load); another part's other mode is a part ambiguity
    judged = twin and (got[0][0] == ref or got[0][1] == mode)
    return dict(index=index, fam=fam, n=len(c.parts), meter=meter.name, fault=fault,
                ident=ident and visible, twin=judged, mode_ok=judged and got[0][1] == mode,
                right=got == [(ref, mode)], part=[g[0] for g in got] == [ref],
                top=" + ".join(describe_fault(c, f) for f in top.faults) or "healthy", verdict=d.verdict)


def _worker(a):
    return run_case(*a)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--cases", type=int, default=120)
    ap.add_argument("--seed", type=int, default=20261203)
    ap.add_argument("--jobs", type=int, default=1)
    ap.add_argument("--show", type=int, default=10, help="wrong identifiable cases to list")
    args = ap.parse_args(argv)
    jobs = [(args.seed, i) for i in range(args.cases)]
    if args.jobs > 1:
        with ProcessPoolExecutor(args.jobs) as ex:
            res = list(ex.map(_worker, jobs))
    else:
        res = [run_case(*j) for j in jobs]
    idn = [r for r in res if r["ident"]]
    tw = [r for r in idn if r["twin"]]
    right = sum(r["mode_ok"] for r in tw)
    print(f"cases {len(res)}; visible and identifiable by mode {len(idn)}; judged (right part, or a twin part with the same mode) "
          f"{len(tw)}/{len(idn)}; of those right mode {right}/{len(tw)} = {right / max(len(tw), 1):.3f}; "
          f"exact part and mode {sum(r['right'] for r in idn)}/{len(idn)}")
    for fam in ("rail", "ladder", "ac"):
        sub = [r for r in tw if r["fam"] == fam]
        print(f"  {fam:7s} right mode {sum(r['mode_ok'] for r in sub)}/{len(sub)}")
    for name in ("default", "bench"):
        sub = [r for r in tw if r["meter"] == name]
        print(f"  meter {name:8s} right mode {sum(r['mode_ok'] for r in sub)}/{len(sub)}")
    sub = [r for r in idn if r["fam"] == "rail" and r["fault"][1] == "short" and r["fault"][0].startswith("RL")]
    print(f"  shorts across the fused rail: right mode {sum(r['mode_ok'] for r in sub)}/{len(sub)}")
    for r in [r for r in idn if not r["twin"]][:args.show]:
        print(f"  not judged #{r['index']} {r['fam']} {r['meter']}: planted {r['fault']}, top {r['top']} "
              f"({r['verdict']})")
    bad = [r for r in tw if not r["mode_ok"]][:args.show]
    for r in bad:
        print(f"  wrong #{r['index']} {r['fam']} {r['n']} parts {r['meter']}: planted {r['fault']}, "
              f"top {r['top']} ({r['verdict']})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
