"""``faultfind check CIRCUIT``: validate a circuit file and summarize it."""

from __future__ import annotations

from collections import Counter

from ..io.circuit_file import circuit_warnings, load_circuit
from ..io.junction_keys import KEYS_OF
from ..model import KINDS
from ..units import format_tolerance, format_value
from .output import emit_json, table

#: Above this many parts the table of parts is left out unless --all is given.
MAX_LISTED = 200


def add_parser(sub):
    p = sub.add_parser("check", help="validate a circuit file and print a summary",
                       description="Validate a circuit file and print a summary "
                                   "(nodes, parts, sources, warnings).")
    p.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML)")
    p.add_argument("--json", action="store_true", help="print one JSON document")
    p.add_argument("--all", action="store_true",
                   help=f"list every part even when there are more than {MAX_LISTED}")
    p.set_defaults(run=run)


def summary(circuit) -> dict:
    kinds = Counter(p.kind for p in circuit.parts)
    sources = [p for p in circuit.parts if p.is_source]
    return {
        "title": circuit.title,
        "file": circuit.source,
        "ground": circuit.ground,
        "frequency": circuit.frequency,
        "nodes": list(circuit.nodes),
        "parts": len(circuit.parts),
        "kinds": dict(kinds),
        "sources": [{"ref": p.ref, "kind": p.kind, "nodes": list(p.nodes), "value": p.value,
                     "waveform": p.waveform, "off_state": p.off_state} for p in sources],
        "semiconductors": [semiconductor(p) for p in circuit.parts if p.is_semiconductor],
        "warnings": circuit_warnings(circuit),
    }


def semiconductor(p) -> dict:
    """A semiconductor's keys with the kind's defaults filled in (``defaults``: those
    the file left out), SI units."""
    keys = {k: p.reverse_leakage if k == "reverse_leakage" else p.junction(k)
            for k in KEYS_OF[p.kind]}          # no leakage given: none is modelled
    return {"ref": p.ref, "kind": p.kind, "nodes": list(p.nodes), "value": p.value, **keys,
            "defaults": [k for k in KEYS_OF[p.kind] if getattr(p, k) is None]}


def value_text(p) -> str:
    """The value column: value and unit; a junction's at its test current, a
    transistor's gain and vbe."""
    if p.kind in ("npn", "pnp"):
        return f"gain {p.junction('gain'):g}, vbe {format_value(p.junction('vbe'), 'V')}"
    unit = KINDS[p.kind].unit or ""
    val = format_value(p.value, unit) if p.value is not None else "—"
    if p.is_semiconductor:
        val += f" at {format_value(p.junction('test_current'), 'A')}"
    if p.is_source and p.waveform == "ac":
        val += " rms"
    return val


def run(args) -> int:
    circuit = load_circuit(args.circuit)
    doc = summary(circuit)
    if args.json:
        emit_json(doc)
        return 0
    print(f"{circuit.title or '(untitled)'}  [{args.circuit}]")
    print(f"ground: {circuit.ground}" + (f"   AC frequency: {format_value(circuit.frequency, 'Hz')}"
                                         if circuit.frequency else ""))
    nodes = doc["nodes"]
    shown = nodes if len(nodes) <= MAX_LISTED or args.all else nodes[:20] + ["..."]
    print(f"nodes ({len(nodes)}): {', '.join(shown)}")
    print(f"parts ({doc['parts']}): " + ", ".join(f"{n} {k}" for k, n in doc["kinds"].items()))
    print()
    rows = []
    listed = circuit.parts if len(circuit.parts) <= MAX_LISTED or args.all else ()
    if not listed:
        print(f"({len(circuit.parts)} parts: the table is left out; --all lists them)")
    for p in listed:
        tol = format_tolerance(p.tol_low, p.tol_high) if p.value is not None else ""
        rows.append([p.ref, p.kind, "-".join(p.nodes), value_text(p), tol, p.label])
    if rows:
        table(["ref", "kind", "nodes", "value", "tolerance", "label"], rows)
    print()
    if doc["warnings"]:
        print(f"{len(doc['warnings'])} warning(s):")
        for w in doc["warnings"]:
            print(f"  warning: {w}")
    else:
        print("no warnings")
    print("circuit file OK")
    return 0
