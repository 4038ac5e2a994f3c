"""``faultfind suggest CIRCUIT [READINGS] [--json]``: the next readings worth taking."""

from __future__ import annotations

from ..advise import load_costs, suggest, suggestion_json
from ..io.circuit_file import load_circuit
from ..io.meters_file import load_meters, meters_with_default
from ..io.readings_file import load_readings
from ..diagnose import priors_json
from .output import describe_reading, emit_json
from .priors_args import add_priors_args, priors_from_args, priors_line


def add_parser(sub):
    p = sub.add_parser("suggest", help="the next readings worth taking",
                       description="The next readings worth taking: expected information gain about "
                                   "the fault hypotheses per unit of effort.")
    p.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML)")
    p.add_argument("readings", metavar="READINGS", nargs="?", help="readings taken so far (CSV)")
    p.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML)")
    p.add_argument("--costs", metavar="FILE", help="effort model (TOML; see docs/advice.md)")
    p.add_argument("--power", choices=("on", "off"),
                   help="whether the circuit is energized now (default: as the last reading needed)")
    p.add_argument("--top", metavar="K", type=int, default=5, help="how many suggestions (default 5)")
    p.add_argument("--json", action="store_true", help="print one JSON document")
    add_priors_args(p)
    p.set_defaults(run=run)


def run(args) -> int:
    if args.top < 1:
        from ..errors import InputError
        raise InputError("--top must be at least 1", key="--top")
    circuit = load_circuit(args.circuit)
    meters = meters_with_default(load_meters(args.meters) if args.meters else None)
    readings = load_readings(args.readings, circuit, meters) if args.readings else []
    costs = load_costs(args.costs) if args.costs else None
    priors = priors_from_args(args)
    sug = suggest(circuit, readings, meters, costs=costs, power=args.power, top=args.top,
                  priors=priors)
    if args.json:
        emit_json({"suggestions": [suggestion_json(s) for s in sug], "priors": priors_json(priors)})
        return 0
    print_suggestions(sug, circuit, bool(readings))
    print(priors_line(priors))
    return 0


def print_suggestions(sug, circuit, have_readings) -> None:
    print(f"Next readings for: {circuit.title or circuit.source}"
          + ("" if have_readings else "  (no readings yet: first readings on a failed circuit)"))
    if not sug:
        print("No reading would tell the remaining hypotheses apart (or only the ways one part "
              "could have failed are left: one repair).")
        return
    for i, s in enumerate(sug, 1):
        state = "POWER ON (energized)" if s.power == "on" else "POWER OFF (isolated)"
        print(f"{i}. {describe_reading(s.reading):28s} {state:22s} "
              f"gain {s.gain:.2f} bit, effort {s.cost:g}")
        if s.reading.label:
            print(f"   where: {s.reading.label}")
        print(f"   why: {s.why}")
        if s.caution:
            print(f"   caution: {s.caution}")
    print()
    print("Append a suggestion to the readings file as a row (quantity, mode, plus, minus, part, "
          "setup, frequency) with the meter's display as its value.")
