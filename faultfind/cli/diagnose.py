"""``faultfind diagnose CIRCUIT READINGS [--meters FILE] [--top K] [--json]``."""

from __future__ import annotations

import numpy as np

from ..diagnose import describe_fault, diagnose, diagnosis_json
from ..io.circuit_file import load_circuit
from ..io.meters_file import load_meters, meters_with_default
from ..io.readings_file import load_readings
from ..units import format_value
from .output import emit_json, table
from .priors_args import add_priors_args, priors_from_args, priors_line
from .progress import progress_for

BAR = 30


def add_parser(sub):
    p = sub.add_parser("diagnose", help="rank fault hypotheses from readings",
                       description="Compare readings with the circuit, estimate the parts' actual "
                                   "values and rank fault hypotheses.")
    p.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML)")
    p.add_argument("readings", metavar="READINGS", help="readings file (CSV)")
    p.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML)")
    p.add_argument("--top", metavar="K", type=int, default=5, help="hypotheses to list (default 5)")
    p.add_argument("--json", action="store_true", help="print one JSON document")
    add_priors_args(p)
    p.set_defaults(run=run)


def load_inputs(args):
    circuit = load_circuit(args.circuit)
    meters = meters_with_default(load_meters(args.meters) if args.meters else None)
    readings = load_readings(args.readings, circuit, meters)
    return circuit, meters, readings


def bar(p: float) -> str:
    n = int(round(p * BAR))
    return "#" * n + "." * (BAR - n)


def run(args) -> int:
    if args.top < 1:
        from ..errors import InputError
        raise InputError("--top must be at least 1", key="--top")
    progress = progress_for(path=args.circuit)
    if progress is not None:
        progress("reading files")
    circuit, meters, readings = load_inputs(args)
    priors = priors_from_args(args)
    progress = progress or progress_for(circuit)
    d = diagnose(circuit, readings, meters, top=args.top, progress=progress, priors=priors)
    if args.json:
        emit_json(diagnosis_json(d))
        return 0
    print_report(d)
    return 0


def print_report(d) -> None:
    c = d.circuit
    print(f"Diagnosis: {c.title or c.source}")
    head = {"fault": "FAULT", "no-fault": "NO FAULT FOUND", "inconsistent": "INCONSISTENT READINGS"}[d.verdict]
    best = d.hypotheses[0]
    what = " + ".join(describe_fault(c, f) for f in best.faults) or "healthy circuit"
    print(f"{len(d.readings)} readings.  Verdict: {head}"
          + (f": {what} ({best.probability * 100:.0f} %)" if d.verdict == "fault" else ""))
    print()
    if d.verdict == "inconsistent":
        print("Closest explanations; none fits every reading (probabilities over this list):")
    else:
        print("Findings, most probable first (probabilities over this list):")
    rows = []
    for i, h in enumerate(d.hypotheses, 1):
        label = " + ".join(describe_fault(c, f) for f in h.faults) or "healthy (no fault)"
        rows.append([str(i), label, bar(h.probability), f"{h.probability * 100:5.1f} %",
                     f"chi2 {h.chi2:.1f}" if np.isfinite(h.chi2) else "chi2 -"])
    table(["#", "hypothesis", "probability", "", "fit"], rows, aligns=[">", "<", "<", ">", "<"])
    if d.tail > 1e-4:
        print(f"  (hypotheses not listed hold {d.tail * 100:.2f} % before renormalizing)")
    for i, lines in enumerate(d.explanations[:min(3, len(d.hypotheses))]):
        h = d.hypotheses[i]
        if h.probability < 0.01 and i > 0:
            continue
        label = " + ".join(describe_fault(c, f) for f in h.faults) or "healthy"
        print()
        print(f"Why {label}:")
        for line in lines:
            print(f"  {line}")
    if d.recheck:
        print()
        print("No hypothesis explains these readings. Re-check:")
        for line in d.recheck:
            print(f"  - {line}")
    if d.ambiguity_groups:
        print()
        print("Parts these readings cannot tell apart:")
        for g in d.ambiguity_groups:
            print("  " + " / ".join(g))
    rows = []
    inside = 0
    for ref, e in d.estimates.items():
        p = c.part(ref)
        unit = p.info.unit or ""
        dev = None if not np.isfinite(e.value) or e.nominal == 0 else e.value / e.nominal - 1
        out_tol = dev is None or dev < -p.tol_low or dev > p.tol_high
        if e.fault or out_tol:
            rows.append([ref, format_value(e.nominal, unit), format_value(e.value, unit, digits=4),
                         f"{format_value(e.low, unit, digits=4)} .. {format_value(e.high, unit, digits=4)}",
                         e.fault or "outside tolerance"])
        else:
            inside += 1
    print()
    print("Estimated actual values:")
    if rows:
        table(["ref", "nominal", "estimate", "~95 % interval", "note"], rows)
    print(f"  {inside} other part(s) estimated within tolerance.")
    for note in d.notes:
        print(f"Note: {note}")
    print(priors_line(d.priors))
    if d.suggestions:
        print()
        print("Next readings worth taking:")
        for s in d.suggestions[:3]:
            state = "power ON" if s["power"] == "on" else "power OFF (isolated)"
            where = s["part"] if s["quantity"] == "current" or (s["part"] and not s["plus"]) \
                else f"{s['plus']}-{s['minus']}"
            extra = " lifted" if s["setup"] == "lifted" else ""
            freq = f" @ {format_value(s['frequency'], 'Hz')}" if s["frequency"] else ""
            what = " ".join(x for x in (s["quantity"], s["mode"], where + extra + freq) if x)
            print(f"  - {what} [{state}]: {s['why']}")
            if s.get("caution"):
                print(f"    caution: {s['caution']}")
    print()
    print("faultfind is a decision aid: confirm a finding with the circuit isolated, locked out and "
          "proven dead before replacing parts; follow local codes and licensed practice.")
