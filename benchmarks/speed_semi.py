"""In-process speed of one diagnosis on a 200-part board with 30 semiconductors and 30 readings.

Issue 12's target: a 200-part board with 30 semiconductors and 30 readings
re-diagnoses in under 0.3 s in process.  The board is an invented machine
I/O board: a 24 V supply through a fuse; ten
output channels, each a logic output driving an npn through a base resistor
and pull-down into a relay coil with its flyback diode (30 semiconductors
with ten channel LEDs); the rest a ladder of resistive sensor dividers and
filter capacitors up to 200 parts.  One transistor's base-emitter junction is
open; 30 readings: node voltages and a few diode tests, with the default
meter's noise.

    python benchmarks/speed_semi.py [--repeat N]
"""

from __future__ import annotations

import argparse
import platform
import sys
import time
from pathlib import Path

import numpy as np

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from faultfind.diagnose import diagnose  # noqa: E402
from faultfind.io.meters_file import meters_with_default  # noqa: E402
from faultfind.model import Circuit, Part, Reading  # noqa: E402
from faultfind.simulate import simulate_readings  # noqa: E402


def board(n_parts=200, channels=10, seed=0):
    """The board and its 30 readings."""
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("+24V", "0V"), 24.0, 0.02, 0.02, off_state="open"),
             Part("F1", "fuse", ("+24V", "RAIL"), 0.1, 0.3, 0.3)]
    reads = [Reading("voltage", "dc", "RAIL", "0V")]
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
        reads += [Reading("voltage", "dc", b, "0V"), Reading("voltage", "dc", c, "0V")]
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
    for n in [f"S{j}" for j in range(3, i + 1, max(1, i // 6))][:6]:
        reads.append(Reading("voltage", "dc", n, "0V"))
    reads += [Reading("diode-test", None, "B3", "0V"), Reading("diode-test", None, part="D3"),
              Reading("diode-test", None, part="LED3")]
    return c, reads[:30]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args(argv)
    m = meters_with_default()
    c, rds = board()
    n_semi = sum(p.is_semiconductor for p in c.parts)
    sim = simulate_readings(c, rds, m, [("Q3", "base-emitter-open", None)], rng=1)
    diagnose(c, sim, m, advise=False)  # warm caches and imports
    times = []
    for _ in range(a.repeat):
        t = time.perf_counter()
        d = diagnose(c, sim, m, advise=False)
        times.append(time.perf_counter() - t)
    print(f"machine: {platform.processor() or platform.machine()}, Python {platform.python_version()}")
    print(f"{len(c.parts)} parts ({n_semi} semiconductors), {len(sim)} readings: diagnosis median "
          f"{np.median(times) * 1e3:.0f} ms (min {min(times) * 1e3:.0f}, max {max(times) * 1e3:.0f}); "
          f"verdict {d.verdict}, top {d.hypotheses[0].label}")
    print("target: diagnosis < 300 ms:", "met" if np.median(times) < 0.3 else "NOT met")


if __name__ == "__main__":
    main()
