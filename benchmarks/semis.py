"""In-process speed of the semiconductor engine on a 200-part board with 30 semiconductors.

The board is an invented pump-station I/O card: a 24 V supply through a fuse
into a resistor ladder (sensor dividers and snubbers), ten indicator LEDs
with their resistors, and ten relay drivers (base resistor, base pull-down,
npn, coil, flyback diode) driven from a 5 V logic rail.  30 node voltages
are read.  Timed (median of ``--repeat``):

* the DC operating point from cold (Newton's method);
* ``predict`` (values and sensitivities of the 30 readings);
* a warm re-solve of a faulted variant (an LED open, a driver's
  base-emitter shorted, a resistor drifted), from the healthy operating point,
  and the same cold;
* with ``--baseline DIR``: benchmarks/speed_small.py (a linear 200-part
  board) run from that checkout (the code before semiconductors) and from
  this one in the same run, to show that linear boards are unchanged.

    python benchmarks/semis.py [--repeat N] [--baseline /path/to/old/checkout]
"""

from __future__ import annotations

import argparse
import os
import platform
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))     # this checkout's faultfind, not an installed one

from faultfind.engine.nonlinear import System  # noqa: E402
from faultfind.engine.predict import predict  # noqa: E402
from faultfind.io.meters_file import meters_with_default  # noqa: E402
from faultfind.model import Circuit, Part, Reading  # noqa: E402


def board(seed=0):
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("N0", "0V"), 24.0, 0.02, 0.02),
             Part("PS2", "voltage-source", ("L5", "0V"), 5.0, 0.02, 0.02),
             Part("F1", "fuse", ("N0", "N1"), 0.05, 0.3, 0.3)]
    k = 0
    for d in range(10):                       # relay drivers: 5 parts + 2 semiconductors
        b, c = f"B{d}", f"K{d}"
        parts += [Part(f"RB{d}", "resistor", ("L5", b), 2200.0, 0.05, 0.05),
                  Part(f"RP{d}", "resistor", (b, "0V"), 10e3, 0.05, 0.05),
                  Part(f"Q{d}", "npn", (c, b, "0V"), None, gain=float(rng.uniform(100, 300))),
                  Part(f"K{d}C", "inductor", ("N1", c), 1.0, 0.2, 0.2, resistance=480.0),
                  Part(f"DF{d}", "diode", (c, "N1"), 0.62, 0.1, 0.1)]
    for d in range(10):                       # indicator LEDs with their resistors
        parts += [Part(f"RL{d}", "resistor", ("N1", f"A{d}"), 2200.0, 0.05, 0.05),
                  Part(f"LD{d}", "led", (f"A{d}", "0V"), float(rng.uniform(1.9, 3.1)), 0.1, 0.1)]
    i = 1
    while len(parts) < 200:                   # the sensor ladder
        k += 1
        parts.append(Part(f"R{k}", "resistor", (f"N{i}", f"N{i + 1}"),
                          float(rng.choice([100, 220, 470, 1000])), 0.01, 0.01))
        k += 1
        parts.append(Part(f"R{k}", "resistor", (f"N{i + 1}", "0V"),
                          float(rng.choice([1e3, 2.2e3, 4.7e3, 10e3])), 0.01, 0.01))
        if i % 3 == 0 and len(parts) < 200:
            k += 1
            parts.append(Part(f"C{k}", "capacitor", (f"N{i + 1}", "0V"), 1e-7, 0.1, 0.1))
        i += 1
    c = Circuit("pump-station I/O card (benchmark)", "0V", tuple(parts[:200]))
    nodes = [f"K{d}" for d in range(10)] + [f"A{d}" for d in range(10)] + \
            [f"N{j}" for j in range(2, i, max(1, i // 10))][:10]
    return c, [Reading("voltage", "dc", n, "0V") for n in nodes]


def median_time(fn, repeat):
    ts = []
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        ts.append(time.perf_counter() - t)
    return float(np.median(ts)), out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    ap.add_argument("--baseline", help="a checkout of faultfind before this change: "
                    "benchmarks/speed_small.py is run from it and from this one")
    a = ap.parse_args(argv)
    m = meters_with_default()
    c, rds = board()
    n_semis = sum(p.is_semiconductor for p in c.parts)
    predict(c, rds, m)                                      # imports, caches
    t_op, op = median_time(lambda: System(c, "dc").solve(), a.repeat)
    t_pred, pred = median_time(lambda: predict(c, rds, m), a.repeat)
    faults = {"LD3": "open", "Q5": "base-emitter-short", "R7": 180.0}
    s_f = System(c, "dc", overrides={k: v for k, v in faults.items() if isinstance(v, str)})
    t_warm, warm = median_time(lambda: s_f.solve(warm=op), a.repeat)
    t_cold, cold = median_time(lambda: s_f.solve(), a.repeat)
    t_pw, _ = median_time(lambda: predict(c, rds, m, faults, warm=pred.operating_point), a.repeat)
    print(f"machine: {platform.processor() or platform.machine()}, Python {platform.python_version()}")
    print(f"{len(c.parts)} parts ({n_semis} semiconductors), {len(rds)} readings")
    print(f"operating point (cold): {t_op * 1e3:.1f} ms, {op.iterations} Newton iterations ({op.method})")
    print(f"predict (values + sensitivities, {pred.sensitivity.shape[1]} parameters): {t_pred * 1e3:.1f} ms")
    print(f"faulted variant re-solve: warm {t_warm * 1e3:.1f} ms ({warm.iterations} iterations), "
          f"cold {t_cold * 1e3:.1f} ms ({cold.iterations} iterations)")
    print(f"predict of the faulted variant, warm: {t_pw * 1e3:.1f} ms")
    if a.baseline:
        for label, tree in (("before (baseline)", Path(a.baseline).resolve()), ("after (this tree)", ROOT)):
            env = dict(os.environ, PYTHONPATH=str(tree))
            run = subprocess.run([sys.executable, str(ROOT / "benchmarks" / "speed_small.py"),
                                  "--repeat", str(a.repeat)], capture_output=True, text=True,
                                 env=env, cwd=tree, timeout=600)
            line = [ln for ln in run.stdout.splitlines() if "diagnosis median" in ln]
            print(f"linear board, speed_small.py {label}: {line[0] if line else run.stderr[-300:]}")


if __name__ == "__main__":
    main()
