"""In-process speed of one diagnosis on a 200-part board with 30 semiconductors and 30 readings.

Issue 12's target: a 200-part board with 30 semiconductors and 30 readings
re-diagnoses in under 0.3 s in process.  The board is an invented machine
I/O board: a 24 V supply through a fuse; output channels, each a logic
output driving an npn through a base resistor and pull-down into a relay
coil with its flyback diode, and a channel LED (three semiconductors per
channel); the rest a ladder of resistive sensor dividers and filter
capacitors up to the part count.  One junction fault is planted (by default
the third transistor's base-emitter junction open); the readings are node
voltages and three diode tests on the faulted channel, with the meter's
noise.

    python benchmarks/speed_semi.py [--repeat N] [--seed S] [--parts P] [--semis K]
        [--readings R] [--layout spread|near] [--meter handheld|bench] [--fresh]

``--seed``: the ladder's values, the planted fault (seed 0: Q3 base-emitter
open; otherwise a junction or driver fault on a channel drawn by the seed)
and the meter's noise.  ``--semis``: three per channel (``K // 3``
channels).  ``--layout spread`` (default): the rail, every channel's base
and collector, ladder nodes, the diode tests; ``near``: the faulted
channel's nodes and diode tests first, then its neighbours' channels
outwards.  ``--meter bench``: everything read with the 60,000-count bench
meter of benchmarks/advice.py.  ``--fresh``: each repeat diagnoses a new
copy of the board (no cache keyed by the circuit's objects carries over).
"""

from __future__ import annotations

import argparse
import dataclasses
import platform
import sys
import time
from pathlib import Path

import numpy as np

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from faultfind.diagnose import diagnose  # noqa: E402
from faultfind.io.meters_file import meters_with_default, parse_meters  # noqa: E402
from faultfind.model import Circuit, Part, Reading  # noqa: E402
from faultfind.simulate import simulate_readings  # noqa: E402

#: Faults a seed other than 0 draws from (part prefix, mode), on a drawn channel.
FAULTS = (("Q", "base-emitter-open"), ("Q", "open"), ("Q", "base-emitter-short"),
          ("LED", "open"), ("D", "short"), ("RB", "open"))


def board(n_parts=200, channels=10, seed=0, n_readings=30, layout="spread", faulted=3):
    """The board and its readings (``faulted``: the channel whose diode tests are read)."""
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("+24V", "0V"), 24.0, 0.02, 0.02, off_state="open"),
             Part("F1", "fuse", ("+24V", "RAIL"), 0.1, 0.3, 0.3)]
    chan = {}
    for k in range(1, channels + 1):
        drv, b, c, a = f"DRV{k}", f"B{k}", f"C{k}", f"LA{k}"
        parts += [Part(f"OUT{k}", "voltage-source", (drv, "0V"), 5.0, 0.03, 0.03, off_state="open"),
                  Part(f"RB{k}", "resistor", (drv, b), 4700.0, 0.05, 0.05),
                  Part(f"RP{k}", "resistor", (b, "0V"), 47e3, 0.05, 0.05),
                  Part(f"Q{k}", "npn", (c, b, "0V"), None, gain=150.0, vbe=0.65),
                  Part(f"K{k}", "inductor", ("RAIL", c), 1.0, 0.2, 0.2, resistance=560.0),
                  Part(f"D{k}", "diode", (c, "RAIL"), 0.6, 0.1, 0.1),
                  Part(f"RL{k}", "resistor", ("RAIL", a), 2200.0, 0.05, 0.05),
                  Part(f"LED{k}", "led", (a, c), 2.0, 0.1, 0.1)]
        chan[k] = (b, c, a)
    if len(parts) + 2 > n_parts:
        raise SystemExit(f"--parts {n_parts}: {channels} channels need at least {len(parts) + 2}")
    i = 0
    prev = "RAIL"
    while len(parts) < n_parts:
        i += 1
        node = f"S{i}"
        parts.append(Part(f"R{i}a", "resistor", (prev, node), float(rng.choice([1e3, 2.2e3, 4.7e3])), 0.01, 0.01))
        parts.append(Part(f"R{i}b", "resistor", (node, "0V"), float(rng.choice([10e3, 22e3, 47e3])), 0.01, 0.01))
        if len(parts) < n_parts:
            parts.append(Part(f"C{i}", "capacitor", (node, "0V"), 1e-7, 0.1, 0.1))
        prev = node
    parts = parts[:n_parts]
    c = Circuit("machine I/O board (benchmark)", "0V", tuple(parts))
    ladder = [Reading("voltage", "dc", n, "0V") for n in
              [f"S{j}" for j in range(3, i + 1, max(1, i // 6))][:6]]
    f = min(max(faulted, 1), channels)
    dts = [Reading("diode-test", None, f"B{f}", "0V"), Reading("diode-test", None, part=f"D{f}"),
           Reading("diode-test", None, part=f"LED{f}")]
    V = lambda n: Reading("voltage", "dc", n, "0V")  # noqa: E731
    if layout == "near":
        reads = [V(n) for n in chan[f]] + dts
        for k in sorted(chan, key=lambda k: (abs(k - f), k)):
            if k != f:
                reads += [V(n) for n in chan[k]]
        reads += [V("RAIL")] + ladder
    else:
        reads = [V("RAIL")]
        for k in chan:
            reads += [V(chan[k][0]), V(chan[k][1])]
        reads += ladder + dts + [V(chan[k][2]) for k in chan]
    if len(reads) < n_readings:
        raise SystemExit(f"--readings {n_readings}: this board offers {len(reads)}")
    return c, reads[:n_readings]


def planted(seed, channels):
    """The planted fault and its channel: Q3 base-emitter open for seed 0, else drawn."""
    if seed == 0:
        return ("Q3", "base-emitter-open", None), 3
    rng = np.random.default_rng(seed + 1000)
    k = int(rng.integers(1, channels + 1))
    prefix, mode = FAULTS[int(rng.integers(len(FAULTS)))]
    return (f"{prefix}{k}", mode, None), k


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--parts", type=int, default=200)
    ap.add_argument("--semis", type=int, default=30)
    ap.add_argument("--readings", type=int, default=30)
    ap.add_argument("--layout", choices=("spread", "near"), default="spread")
    ap.add_argument("--meter", choices=("handheld", "bench"), default="handheld")
    ap.add_argument("--fresh", action="store_true")
    a = ap.parse_args(argv)
    if a.semis < 3:
        raise SystemExit("--semis: at least 3 (one channel)")
    if a.meter == "bench":
        from benchmarks.advice import BENCH
        m = meters_with_default(parse_meters(BENCH, "bench"))
    else:
        m = meters_with_default()
    channels = a.semis // 3
    fault, k = planted(a.seed, channels)
    c, rds = board(a.parts, channels, a.seed, a.readings, a.layout, k)
    n_semi = sum(p.is_semiconductor for p in c.parts)
    sim = simulate_readings(c, rds, m, [fault], rng=a.seed + 1)
    diagnose(c, sim, m, advise=False)  # warm caches and imports
    times, cpu = [], []
    for _ in range(a.repeat):
        cc = dataclasses.replace(c, parts=tuple(dataclasses.replace(p) for p in c.parts)) \
            if a.fresh else c
        t, p = time.perf_counter(), time.process_time()
        d = diagnose(cc, sim, m, advise=False)
        times.append(time.perf_counter() - t)
        cpu.append(time.process_time() - p)
    print(f"machine: {platform.processor() or platform.machine()}, Python {platform.python_version()}")
    print(f"{len(c.parts)} parts ({n_semi} semiconductors), {len(sim)} readings ({a.layout}, "
          f"{a.meter} meter), fault {fault[0]} {fault[1]}: diagnosis median "
          f"{np.median(times) * 1e3:.0f} ms (min {min(times) * 1e3:.0f}, max {max(times) * 1e3:.0f}; "
          f"CPU median {np.median(cpu) * 1e3:.0f} ms); verdict {d.verdict}, top {d.hypotheses[0].label}")
    print("target: diagnosis < 300 ms:", "met" if np.median(times) < 0.3 else "NOT met")


if __name__ == "__main__":
    main()
