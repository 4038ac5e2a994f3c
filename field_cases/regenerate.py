"""Fill each field case's readings.csv with simulated meter displays.

For every case folder: load circuit.toml, the rows of readings.csv and the
true fault of fault.toml; draw a healthy board inside the tolerances (seeded),
plant the fault, and write what the default meter would display into the
`value` column (noise within its accuracy specification, rounded to its
resolution, OL over range).  Run from the repository root:

    python field_cases/regenerate.py
"""

from __future__ import annotations

import sys
import tomllib
from pathlib import Path

from faultfind.io.circuit_file import load_circuit
from faultfind.io.meters_file import meters_with_default
from faultfind.io.readings_file import load_readings, write_readings
from faultfind.simulate import simulate_readings
from faultfind.units import parse_value

HERE = Path(__file__).resolve().parent


def case_fault(folder: Path):
    doc = tomllib.loads((folder / "fault.toml").read_text(encoding="utf-8"))
    circuit = load_circuit(folder / "circuit.toml")
    faults = []
    for f in doc.get("fault", []):
        part = circuit.part(f["ref"])
        value = None
        if f["mode"] == "drift":
            value = parse_value(f["value"], part.info.unit)
        elif f["mode"] == "leaky" and "value" in f:   # a leaky diode: its leak resistance
            value = parse_value(f["value"], "Ω")
        faults.append((f["ref"], f["mode"], value))
    return circuit, faults, int(doc.get("seed", 0))


def regenerate(folder: Path) -> None:
    circuit, faults, seed = case_fault(folder)
    meters = meters_with_default()
    rows = load_readings(folder / "readings.csv", circuit, meters, require_values=False)
    rows = [r.__class__(**{**r.__dict__, "raw": "", "value": None, "overrange": 0}) for r in rows]
    done = simulate_readings(circuit, rows, meters, faults, rng=seed)
    write_readings(done, folder / "readings.csv")
    print(f"{folder.name}: {len(done)} readings, fault {faults or 'none'}")


if __name__ == "__main__":
    folders = [Path(a) for a in sys.argv[1:]] or sorted(p.parent for p in HERE.glob("*/fault.toml"))
    for f in folders:
        regenerate(f)
