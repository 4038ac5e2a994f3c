"""In-process speed of one diagnosis on a 200-part board with 30 readings.

The terminal UI re-diagnoses after every reading, so this must stay well under
a tenth of a second (issue target: < 0.1 s).  The board is an invented heater
control ladder: a 24 V supply through a fuse into a chain of series resistors
with loads and snubber capacitors to ground; one resistor is open; 30 node
voltages are read with the default meter's noise.

    python benchmarks/speed_small.py [--repeat N]
"""

from __future__ import annotations

import argparse
import platform
import time

import numpy as np

from faultfind.advise import suggest
from faultfind.diagnose import diagnose
from faultfind.io.meters_file import meters_with_default
from faultfind.model import Circuit, Part, Reading
from faultfind.simulate import simulate_readings


def board(n_sections=85, seed=0):
    rng = np.random.default_rng(seed)
    parts = [Part("PS1", "voltage-source", ("N0", "0V"), 24.0, 0.02, 0.02),
             Part("F1", "fuse", ("N0", "N1"), 0.05, 0.3, 0.3)]
    k = 0
    for i in range(1, n_sections):
        k += 1
        parts.append(Part(f"R{k}", "resistor", (f"N{i}", f"N{i + 1}"),
                          float(rng.choice([100, 220, 470, 1000])), 0.01, 0.01))
        k += 1
        parts.append(Part(f"R{k}", "resistor", (f"N{i + 1}", "0V"),
                          float(rng.choice([1e3, 2.2e3, 4.7e3, 10e3])), 0.01, 0.01))
        if i % 3 == 0:
            k += 1
            parts.append(Part(f"C{k}", "capacitor", (f"N{i + 1}", "0V"), 1e-7, 0.1, 0.1))
    c = Circuit("heater control ladder (benchmark)", "0V", tuple(parts))
    step = max(1, n_sections // 30)
    rds = [Reading("voltage", "dc", f"N{i}", "0V") for i in range(2, n_sections + 1, step)][:30]
    return c, rds


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    a = ap.parse_args(argv)
    m = meters_with_default()
    c, rds = board()
    sim = simulate_readings(c, rds, m, [("R41", "open", None)], rng=1)
    diagnose(c, sim, m, advise=False)  # warm caches and imports
    times = []
    for _ in range(a.repeat):
        t = time.perf_counter()
        d = diagnose(c, sim, m, advise=False)
        times.append(time.perf_counter() - t)
    t = time.perf_counter()
    s = suggest(c, sim, m)
    ts = time.perf_counter() - t
    print(f"machine: {platform.processor() or platform.machine()}, Python {platform.python_version()}")
    print(f"{len(c.parts)} parts, {len(sim)} readings: diagnosis median {np.median(times) * 1e3:.1f} ms "
          f"(min {min(times) * 1e3:.1f}, max {max(times) * 1e3:.1f}); verdict {d.verdict}, "
          f"top {d.hypotheses[0].label}")
    print(f"next-reading advice (suggest, {len(s)} suggestions): {ts * 1e3:.0f} ms")
    print("target: diagnosis < 100 ms:", "met" if np.median(times) < 0.1 else "NOT met")


if __name__ == "__main__":
    main()
