"""Every benchmark script still starts: its imports resolve and its options parse.

The benchmarks are not run by the suite (they are measurements, not tests), so a
name moved inside faultfind could break one unnoticed until someone needs its
figures.  ``--help`` imports the whole script and exits 0 without measuring.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPTS = sorted(p for p in (ROOT / "benchmarks").glob("*.py")
                 if "argparse" in p.read_text(encoding="utf-8"))


def test_the_benchmark_scripts_are_found():
    assert len(SCRIPTS) >= 7, SCRIPTS


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: p.name)
def test_benchmark_script_starts(script):
    p = subprocess.run([sys.executable, str(script), "--help"], cwd=ROOT,
                       capture_output=True, text=True, timeout=120)
    assert p.returncode == 0, p.stderr
    assert "usage:" in p.stdout


def test_scale_case_shape_options_shape_the_board():
    # the handheld family's shape options: 100 readings, the `near` first of
    # them the nodes closest to the open link, the link where asked, loads on
    # every n-th node; a wrong option is refused by name
    sys.path.insert(0, str(ROOT / "benchmarks"))
    try:
        from scale_case import grid_scenario
    finally:
        sys.path.remove(str(ROOT / "benchmarks"))
    c, fault, rows = grid_scenario(1000, seed=5, near=60, load_every=8, fault_at=(2, 9))
    nodes = [rd.plus for rd, _ in rows]
    assert len(nodes) == 100 and len(set(nodes)) == 100
    assert c.part(fault[0]).nodes == ("N2.9", "N3.9")

    def dist(n):
        i, j = (int(x) for x in n[1:].split("."))
        return math.hypot(i - 2.5, j - 9)
    assert max(dist(n) for n in nodes[:60]) <= min(dist(n) for n in nodes[60:])

    def n_loads(circuit):
        return sum(1 for p in circuit.parts if p.kind == "resistor" and circuit.ground in p.nodes)
    c4, _, _ = grid_scenario(1000, seed=5, load_every=4)
    assert n_loads(c4) > n_loads(c)
    with pytest.raises(ValueError, match="fault_at"):
        grid_scenario(1000, fault_at=(99, 0))
    with pytest.raises(ValueError, match="near"):
        grid_scenario(1000, near=101)
