"""Scale scenarios: resistor meshes with one injected fault and 100 node readings.

Two families (``--family``):

**bench**
The mesh is :func:`mesh.mesh` (a heater array / power-distribution mesh: a
48 V supply through a fuse into one corner, 0.01-1 ohm links, 100 ohm-9.1 kohm
loads to ground, 1 % parts; invented).  One link near the middle of the mesh
is open (a cracked link); the technician reads 100 node voltages to ground:
80 clustered around the fault (the nodes nearest to it) and 20 spread evenly
over the mesh, with a bench meter (6 1/2 digits; the handheld default's
10 mV steps at 48 V would hide a cracked link's tens of millivolts).  Readings
are what that meter would show on a board whose healthy parts are drawn inside
their tolerance.

**handheld**: :func:`mesh.grid` (a 24 V distribution grid: a k x k grid of
0.1-0.91 ohm links fed through a fuse into one corner, 100-910 ohm loads on
every fifth node, 1 % parts; invented).  One link a few links out from the
feed is open; 100 node voltages read with the default handheld meter (no
meters file): 30 nearest the fault, 70 spread over the whole grid.

    python benchmarks/scale_case.py N OUTDIR [--family bench|handheld]
    # writes circuit.toml, readings.csv (and meters.toml for the bench family)
"""

from __future__ import annotations

import argparse
import csv
import math
import pathlib
import sys

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))

from mesh import grid, mesh, mesh_toml  # noqa: E402

from faultfind.engine.meter import simulate as meter_display  # noqa: E402
from faultfind.engine.predict import predict  # noqa: E402
from faultfind.io.meters_file import meters_with_default, parse_meters  # noqa: E402
from faultfind.model import QUANTITY_UNITS, Reading  # noqa: E402
from faultfind.simulate import draw_board  # noqa: E402
from faultfind.units import format_value  # noqa: E402

N_CLUSTER = 80
N_SPREAD = 20
#: The handheld family's readings: near the fault, and spread over the grid.
GRID_NEAR = 30
GRID_SPREAD = 70
#: The handheld family's open link: from node (i, j) to (i + 1, j), i and j
#: counted from the feed corner.
GRID_FAULT = (3, 1)
FAMILIES = ("bench", "handheld")

#: A bench multimeter of the 6 1/2-digit class (typical published figures, from memory).
METERS_TOML = """[meter.bench]
counts = 1200000
input_resistance = "10G"
current_shunt = "0.1"
dc_voltage = "0.0035% + 6"
ac_voltage = "0.06% + 30"
dc_current = "0.05% + 6"
ac_current = "0.1% + 40"
resistance = "0.003% + 6"
max_resistance = "100M"
voltage_resolution = "0.1u"
current_resolution = "1p"
resistance_resolution = "1u"
"""


def _side(circuit):
    return max(int(n[1:].split("_")[0]) for n in circuit.nodes if n.startswith("G")) + 1


def scenario(n_parts: int, seed: int = 0):
    """The circuit, the planted fault ``(ref, "open")`` and the readings (with values)."""
    c = mesh(n_parts, seed)
    side = _side(c)
    mid = side // 2
    centre = f"G{mid}_{mid}"
    # the link from the centre node to its right-hand neighbour
    fault = next(p.ref for p in c.parts
                 if p.nodes == (centre, f"G{mid}_{mid + 1}") and p.kind == "resistor")
    coords = []
    for n in c.nodes:
        if n.startswith("G"):
            i, j = (int(x) for x in n[1:].split("_"))
            coords.append((n, i, j))
    d = np.array([math.hypot(i - mid, j - mid - 0.5) for _, i, j in coords])
    order = np.argsort(d, kind="stable")
    near = [coords[k][0] for k in order[:N_CLUSTER]]
    step = max(1, side // int(math.ceil(math.sqrt(N_SPREAD))))
    spread = []
    for i in range(step // 2, side, step):
        for j in range(step // 2, side, step):
            n = f"G{i}_{j}"
            if n not in near and len(spread) < N_SPREAD:
                spread.append(n)
    names = near + spread
    rds = [Reading("voltage", "dc", n, c.ground, meter="bench", label=f"TP {n}") for n in names]
    meters = meters_with_default(parse_meters(METERS_TOML))
    rng = np.random.default_rng(seed + 1)
    board = draw_board(c, rng)
    true = predict(board, rds, meters, overrides={fault: "open"}).value
    out = []
    for rd, t in zip(rds, true):
        v, ol = meter_display(meters["bench"], "voltage", "dc", float(t), rng)
        out.append((rd, "OL" if ol else format_value(v, QUANTITY_UNITS["voltage"], digits=6)))
    return c, (fault, "open"), out


def _grid_side(circuit):
    return max(int(n[1:].split(".")[0]) for n in circuit.nodes if n.startswith("N")) + 1


def grid_scenario(n_parts: int, seed: int = 0, near: int = GRID_NEAR, load_every: int = 5,
                  fault_at=GRID_FAULT):
    """The handheld family: circuit, planted fault ``(ref, "open")``, readings (with values).

    ``near``: how many of the 100 readings are the nodes nearest the fault (the
    rest spread over the grid); ``load_every``: a load on every n-th node;
    ``fault_at``: the open link's ``(i, j)``, from ``N<i>.<j>`` to ``N<i+1>.<j>``.
    """
    if not 0 <= near <= GRID_NEAR + GRID_SPREAD:
        raise ValueError(f"near: 0 to {GRID_NEAR + GRID_SPREAD}, got {near}")
    c = grid(n_parts, load_every=load_every, seed=seed)
    side = _grid_side(c)
    fi, fj = fault_at
    if not (0 <= fi < side - 1 and 0 <= fj < side):
        raise ValueError(f"fault_at: inside the {side} x {side} grid, got {fault_at}")
    n_spread = GRID_NEAR + GRID_SPREAD - near
    fault = next(p.ref for p in c.parts if p.nodes == (f"N{fi}.{fj}", f"N{fi + 1}.{fj}"))
    nodes = [(f"N{i}.{j}", i, j) for i in range(side) for j in range(side)]
    d = np.array([math.hypot(i - fi - 0.5, j - fj) for _, i, j in nodes])
    order = np.argsort(d, kind="stable")
    close = [nodes[k][0] for k in order[:near]]
    taken = set(close)
    # the spread: a jittered lattice over the whole grid (topped up at random
    # where the lattice's cells fell on nodes already taken)
    rng = np.random.default_rng(seed + 7)
    m = int(math.ceil(math.sqrt(max(n_spread, 1))))
    spread = []
    for a in range(m):
        for b in range(m):
            i = min(side - 1, int((a + rng.random()) * side / m))
            j = min(side - 1, int((b + rng.random()) * side / m))
            n = f"N{i}.{j}"
            if n not in taken and len(spread) < n_spread:
                taken.add(n)
                spread.append(n)
    while len(spread) < n_spread:
        n = f"N{int(rng.integers(side))}.{int(rng.integers(side))}"
        if n not in taken:
            taken.add(n)
            spread.append(n)
    rds = [Reading("voltage", "dc", n, c.ground, label=f"TP {n}") for n in close + spread]
    meters = meters_with_default(None)
    rng = np.random.default_rng(seed + 1)
    board = draw_board(c, rng)
    true = predict(board, rds, meters, overrides={fault: "open"}).value
    out = []
    for rd, t in zip(rds, true):
        v, ol = meter_display(meters["default"], "voltage", "dc", float(t), rng)
        out.append((rd, "OL" if ol else format_value(v, QUANTITY_UNITS["voltage"], digits=6)))
    return c, (fault, "open"), out


def write(n_parts: int, outdir, seed: int = 0, family: str = "bench", **shape):
    """Write ``circuit.toml``, ``readings.csv`` (and ``meters.toml``) under ``outdir``.

    ``shape``: the handheld family's ``near``, ``load_every`` and ``fault_at``
    (see :func:`grid_scenario`).  Returns (circuit path, readings path, meters
    path or None, fault, number of parts).
    """
    if family not in FAMILIES:
        raise ValueError(f"family: one of {', '.join(FAMILIES)}, got {family!r}")
    if shape and family != "handheld":
        raise ValueError(f"{', '.join(shape)}: only for the handheld family")
    outdir = pathlib.Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    if family == "bench":
        c, fault, rows = scenario(n_parts, seed)
    else:
        c, fault, rows = grid_scenario(n_parts, seed, **shape)
    cpath = outdir / "circuit.toml"
    cpath.write_text(mesh_toml(c) + "\n", encoding="utf-8")
    rpath = outdir / "readings.csv"
    with open(rpath, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["quantity", "mode", "plus", "minus", "part", "setup", "value", "meter", "label"])
        for rd, shown in rows:
            w.writerow(["voltage", "dc", rd.plus, rd.minus, "", "", shown, rd.meter or "", rd.label])
    mpath = None
    if family == "bench":
        mpath = outdir / "meters.toml"
        mpath.write_text(METERS_TOML, encoding="utf-8")
    return cpath, rpath, mpath, fault, len(c.parts)


def shape_args(a) -> dict:
    """The handheld family's shape options given on the command line (``near``, ...)."""
    out = {}
    if a.near is not None:
        out["near"] = a.near
    if a.load_every is not None:
        out["load_every"] = a.load_every
    if a.fault_at is not None:
        out["fault_at"] = tuple(a.fault_at)
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int)
    ap.add_argument("outdir")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--family", choices=FAMILIES, default="bench")
    ap.add_argument("--near", type=int, help="handheld: readings nearest the fault (default 30 of 100)")
    ap.add_argument("--load-every", type=int, help="handheld: a load on every n-th node (default 5)")
    ap.add_argument("--fault-at", type=int, nargs=2, metavar=("I", "J"),
                    help="handheld: the open link from N<I>.<J> to N<I+1>.<J> (default 3 1)")
    a = ap.parse_args(argv)
    cp, rp, mp, fault, n = write(a.n, a.outdir, a.seed, a.family, **shape_args(a))
    print(f"{n} parts; fault {fault[0]} {fault[1]}; {cp} {rp} {mp}")


if __name__ == "__main__":
    main()
