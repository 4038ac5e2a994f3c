"""Advice benchmark: readings needed when following faultfind's advice vs random probing.

For each simulated case (a random realistic circuit from benchmarks/circuits.py,
a board drawn inside its tolerances, one fault drawn from the failure-mode
priors), two technicians start from zero readings:

* "advice" takes, each time, the reading ``faultfind.advise.suggest`` ranks
  first;
* "random" probes every node's voltage to ground (DC, or AC at the circuit
  frequency for an AC circuit) in a random order.

Each stops when the top hypothesis reaches 95 % or when it runs out of
readings: random probing when every node has been read, the advice when no
candidate's expected information gain reaches 0.02 bit (the hypotheses left
cannot be told apart) or after 25 readings.  Reported: mean and 90th percentile
of the readings taken, the effort spent (cost model of faultfind.advise) and
how often the final top hypothesis names the planted fault (counting a part in
the same ambiguity group as the top one as right).

Held-out variants (docs/advice.md): ``--boards heldout`` draws the boards of
benchmarks/heldout_boards.py (hand-wired panels: fused rails, interlock
chains, a random resistive mesh) instead of benchmarks/circuits.py;
``--meter bench`` reads everything with a 60,000-count bench meter instead of
the default handheld; ``--first supply`` or ``--first node`` hands both
technicians the same first reading (the supply rail, or a node drawn at
random) before they go their own ways; ``--min-parts``/``--max-parts`` set the
board sizes.

    python benchmarks/advice.py [--cases N] [--seed S] [--boards project|heldout]
        [--meter handheld|bench] [--first none|supply|node] [--json FILE]
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from circuits import random_circuit  # noqa: E402
from heldout_boards import heldout_circuit  # noqa: E402

from faultfind.advise import DEFAULT_COSTS, suggest  # noqa: E402
from faultfind.engine.ambiguity import groups_from_hypotheses  # noqa: E402
from faultfind.engine.hypotheses import Evaluator, rank_with  # noqa: E402
from faultfind.engine.priors import KIND_WEIGHTS, MODE_SHARES  # noqa: E402
from faultfind.io.meters_file import meters_with_default, parse_meters  # noqa: E402
from faultfind.model import Reading  # noqa: E402
from faultfind.simulate import draw_board, simulate_readings  # noqa: E402

STOP = 0.95
MAX_ADVICE = 25
#: Below this expected gain (bits) no candidate is worth taking: the remaining
#: hypotheses cannot be told apart by any reading (an ambiguity group).
MIN_GAIN = 0.02

#: The bench meter of ``--meter bench``: the example profile of formats.md
#: section 3 (a 60,000-count bench multimeter), used as the default profile.
BENCH = """[meter.default]
counts = 60000
input_resistance = "10M"
current_shunt = "0.1"
dc_voltage = "0.05% + 2"
ac_voltage = "0.5% + 5"
dc_current = "0.2% + 5"
ac_current = "0.8% + 5"
resistance = "0.1% + 3"
max_resistance = "60M"
voltage_resolution = "10u"
current_resolution = "0.01u"
resistance_resolution = "0.01"
"""


def draw_fault(circuit, rng):
    """One fault from the priors; a drift clearly outside tolerance."""
    opts, w = [], []
    for p in circuit.parts:
        for m in p.fault_modes:
            opts.append((p, m))
            w.append(KIND_WEIGHTS.get(p.kind, 0) * MODE_SHARES.get(p.kind, {}).get(m, 0))
    w = np.array(w) / np.sum(w)
    p, m = opts[int(rng.choice(len(opts), p=w))]
    value = None
    if m == "drift":
        if p.is_source:
            f = rng.uniform(0.5, 0.8)
        elif p.kind in ("fuse", "switch"):
            f = np.exp(rng.uniform(np.log(20), np.log(200)))
        else:
            f = np.exp(rng.uniform(np.log(1.5), np.log(5))) ** rng.choice([-1, 1])
        value = p.value * f
    return (p.ref, m, value)


def status(circuit, readings, meters):
    ev = Evaluator(circuit, readings, meters)
    rk = rank_with(ev)
    sd = np.sqrt(ev.ev.u ** 2 + np.clip(np.diag(ev.ev.T0), 0, None))
    return rk, groups_from_hypotheses(rk.hypotheses, np.where(sd > 0, sd, 1.0))


def right(rk, groups, fault):
    top = rk.hypotheses[0]
    refs = {f.ref for f in top.faults}
    if fault[0] in refs:
        return True
    return any(fault[0] in g and refs & set(g) for g in groups)


def cost_of(rd, state):
    if rd.quantity == "resistance":
        return DEFAULT_COSTS["resistance"] + (DEFAULT_COSTS["isolate"] if state == "on" else 0)
    base = DEFAULT_COSTS["current"] if rd.quantity == "current" else DEFAULT_COSTS["voltage"]
    return base + (DEFAULT_COSTS["energize"] if state == "off" else 0)


def run_path(circuit, board, fault, meters, rng, order=None, first=(), trace=None):
    """Readings taken, effort and whether the final answer is right, for one technician.

    ``order`` is the random prober's list of readings (None: follow the
    advice); ``first`` readings are taken before either starts; ``trace``, a
    list, collects one line per reading (what was read, the top hypothesis
    and its probability after it).
    """
    readings, effort, state = [], 0.0, "on"
    rk = groups = None
    hyps = None
    queue = list(first)
    limit = len(queue) + (MAX_ADVICE if order is None else len(order))
    for step in range(limit):
        if queue:
            rd = queue.pop(0)
        elif order is None:
            sug = suggest(circuit, readings, meters, hypotheses=hyps, top=1)
            if not sug or sug[0].gain < MIN_GAIN:
                break  # candidates run out: no reading left that tells the hypotheses apart
            rd = sug[0].reading
        else:
            rd = order[step - len(first)]
        effort += cost_of(rd, state)
        state = "off" if rd.quantity == "resistance" else "on"
        readings += simulate_readings(circuit, [rd], meters, [fault], rng=rng, board=board)
        rk, groups = status(circuit, readings, meters)
        hyps = [(h.faults, h.probability) for h in rk.hypotheses]
        if trace is not None:
            top = rk.hypotheses[0]
            trace.append(f"{readings[-1].where()} {readings[-1].mode or ''} = {readings[-1].raw}: "
                         f"top {'+'.join(f'{f.ref} {f.mode}' for f in top.faults) or 'healthy'} "
                         f"{top.probability:.3f}")
        if rk.hypotheses[0].probability >= STOP:
            break
    ok = rk is not None and rk.hypotheses[0].faults != () and right(rk, groups, fault)
    return len(readings), effort, ok


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=40)
    ap.add_argument("--seed", type=int, default=2026)
    ap.add_argument("--min-parts", type=int, default=5)
    ap.add_argument("--max-parts", type=int, default=30)
    ap.add_argument("--boards", choices=("project", "heldout"), default="project",
                    help="benchmarks/circuits.py (default) or benchmarks/heldout_boards.py")
    ap.add_argument("--meter", choices=("handheld", "bench"), default="handheld",
                    help="the default handheld profile, or formats.md's 60,000-count bench meter")
    ap.add_argument("--first", choices=("none", "supply", "node"), default="none",
                    help="a first reading both technicians are handed: none, the supply rail, "
                         "or a node drawn at random")
    ap.add_argument("--trace", action="store_true", help="print every reading of both paths")
    ap.add_argument("--json", metavar="FILE")
    a = ap.parse_args(argv)
    meters = meters_with_default(parse_meters(BENCH, "bench") if a.meter == "bench" else None)
    rng = np.random.default_rng(a.seed)
    res = {"advice": [], "random": []}
    t0 = time.perf_counter()
    for case in range(a.cases):
        size = int(rng.integers(a.min_parts, a.max_parts + 1))
        circuit = (random_circuit(rng, n_parts=size) if a.boards == "project"
                   else heldout_circuit(rng, size))
        board = draw_board(circuit, rng)
        fault = draw_fault(circuit, rng)
        mode = "ac" if circuit.has_ac else "dc"
        nodes = [n for n in circuit.nodes if n != circuit.ground]
        order = [Reading("voltage", mode, nodes[i], circuit.ground) for i in rng.permutation(len(nodes))]
        first = []
        if a.first != "none":
            if a.first == "supply":
                src = next(p for p in circuit.parts if p.kind == "voltage-source")
                pick = src.nodes[0] if src.nodes[0] != circuit.ground else src.nodes[1]
            else:
                pick = nodes[int(rng.integers(len(nodes)))]
            first = [Reading("voltage", mode, pick, circuit.ground)]
            order = [r for r in order if r.plus != pick]
        seed = int(rng.integers(1 << 31))
        traces = ([], []) if a.trace else (None, None)
        res["advice"].append(run_path(circuit, board, fault, meters, np.random.default_rng(seed),
                                      first=first, trace=traces[0]))
        res["random"].append(run_path(circuit, board, fault, meters, np.random.default_rng(seed), order,
                                      first=first, trace=traces[1]))
        print(f"case {case + 1}/{a.cases}: {len(circuit.parts)} parts, fault {fault[0]} {fault[1]}: "
              f"advice {res['advice'][-1][0]} readings ({'right' if res['advice'][-1][2] else 'wrong'}), "
              f"random {res['random'][-1][0]} ({'right' if res['random'][-1][2] else 'wrong'})",
              flush=True)
        if a.trace:
            for name, lines in zip(("advice", "random"), traces):
                for line in lines:
                    print(f"    {name}: {line}")
    out = {}
    for k, rows in res.items():
        n = np.array([r[0] for r in rows])
        e = np.array([r[1] for r in rows])
        ok = np.array([r[2] for r in rows])
        out[k] = {"mean_readings": float(n.mean()), "p90_readings": float(np.percentile(n, 90)),
                  "mean_effort": float(e.mean()), "right": float(ok.mean())}
    out["ratio_mean_readings"] = out["advice"]["mean_readings"] / out["random"]["mean_readings"]
    out["cases"] = a.cases
    out["variant"] = {"boards": a.boards, "meter": a.meter, "first": a.first, "seed": a.seed,
                      "parts": [a.min_parts, a.max_parts]}
    out["seconds"] = time.perf_counter() - t0
    print()
    print(f"{'path':8s} {'mean readings':>14s} {'p90':>6s} {'mean effort':>12s} {'right':>7s}")
    for k in ("advice", "random"):
        r = out[k]
        print(f"{k:8s} {r['mean_readings']:14.2f} {r['p90_readings']:6.1f} {r['mean_effort']:12.2f} "
              f"{r['right'] * 100:6.1f}%")
    print(f"advice / random readings: {out['ratio_mean_readings']:.2f} (target <= 0.5); "
          f"{a.cases} cases in {out['seconds']:.0f} s")
    if a.json:
        Path(a.json).write_text(json.dumps(out, indent=2))
    return out


if __name__ == "__main__":
    main()
