"""``faultfind import NETLIST [-o CIRCUIT]``: a SPICE-style netlist into a circuit file.

(The module is not called ``import``: that is a Python keyword.)
"""

from __future__ import annotations

import os
import sys

from ..errors import InputError
from ..io.circuit_writer import circuit_text, write_circuit
from ..io.netlist import load_netlist
from ..units import UnitError, parse_frequency
from .output import emit_json

__all__ = ["add_parser", "run"]


def add_parser(sub):
    p = sub.add_parser("import", help="read a SPICE-style netlist into a circuit file",
                       description="Read a SPICE-style netlist (R, C, L, V, I, linear E lines, "
                                   "subcircuits flattened) into a circuit file in the canonical "
                                   "layout. Every line that cannot be mapped is listed on "
                                   "stderr with its line number; every part takes its kind's "
                                   "default tolerance (a netlist has none).")
    p.add_argument("netlist", metavar="NETLIST", help="the netlist (text, SPICE syntax)")
    p.add_argument("-o", "--output", metavar="CIRCUIT",
                   help="circuit file to write (TOML); without it the file is printed on stdout")
    p.add_argument("--force", action="store_true",
                   help="replace the output file if it exists")
    p.add_argument("--frequency", metavar="F",
                   help="frequency of the AC sources (e.g. '50 Hz'), when the netlist has no "
                        ".ac line with one frequency and no SIN source")
    p.add_argument("--json", action="store_true",
                   help="print one JSON document (what was mapped and what was not)")
    p.set_defaults(run=run)


def _frequency(text):
    if text is None:
        return None
    try:
        return parse_frequency(text, what="--frequency")
    except UnitError as err:
        raise InputError(err.message, key="--frequency") from None


def run(args) -> int:
    frequency = _frequency(args.frequency)
    out = args.output
    if out is not None:
        if os.path.isdir(out):
            raise InputError("is a folder: give the circuit file's name", file=out)
        if os.path.exists(out) and os.path.abspath(out) == os.path.abspath(args.netlist):
            raise InputError("is the netlist itself: give another name for the circuit file",
                             file=out)
        if os.path.exists(out) and not args.force:
            raise InputError("exists already: choose another name, or give --force to "
                             "replace it", file=out)
    result = load_netlist(args.netlist, frequency=frequency)
    if out is not None:
        write_circuit(result.circuit, out)
    name = args.netlist
    err = sys.stderr
    for u in result.unmapped:
        print(f"not mapped: {name}:{u.line}: {u.text}  -- {u.reason}", file=err)
    for w in result.warnings:
        print(f"warning: {name}: {w}" if w.startswith("line ") else f"warning: {w}", file=err)
    kinds = ", ".join(f"{kind} {_tol(tol)}" for kind, tol in result.defaults.items())
    print(f"tolerances: a netlist has none, so every part takes its kind's default ({kinds}); "
          "edit them to the parts' real tolerances", file=err)
    parts = len(result.circuit.parts)
    summary = (f"{parts} part(s) mapped from {result.elements} element line(s) of {name}; "
               f"{len(result.unmapped)} line(s) not mapped")
    if args.json:
        emit_json({
            "netlist": name, "output": out, "parts": parts, "elements": result.elements,
            "refs": [p.ref for p in result.circuit.parts],
            "unmapped": [{"line": u.line, "element": u.element, "text": u.text,
                          "reason": u.reason} for u in result.unmapped],
            "warnings": list(result.warnings),
            "default_tolerances": {k: list(v) for k, v in result.defaults.items()},
            "check_error": result.check_error,
            "circuit_file": None if out is not None else circuit_text(result.circuit),
        })
    elif out is not None:
        print(f"wrote {out}: {summary}")
    else:
        sys.stdout.write(circuit_text(result.circuit))
        print(summary, file=err)
    if result.check_error is not None:
        print(f"the circuit file does not pass 'faultfind check' yet: {result.check_error}; "
              "fix it (in the editor or by hand) before using it", file=err)
    return 0


def _tol(tol) -> str:
    low, high = tol
    return f"±{low * 100:g} %" if low == high else f"-{low * 100:g} %/+{high * 100:g} %"
