"""``faultfind ui [CIRCUIT] [--logbook PATH] [--meters FILE]``: the terminal UI.

Plain ``faultfind`` with no command runs it too (cli.md).  The circuit and
meter files named are checked before the UI opens, so that a bad file gets
the usual message and exit status 2.  The UI opens behind the safety
caution; docs/ui.md is its guide.
"""

from __future__ import annotations

import sys

from ..errors import InputError
from ..io.logbook import ENV_VAR

__all__ = ["add_parser", "run", "needs_terminal"]


def add_parser(sub):
    p = sub.add_parser("ui", help="the terminal UI (the default without a command)",
                       description="Open the terminal UI behind the safety caution. With no "
                                   "circuit it offers the bundled field cases.")
    p.add_argument("circuit", metavar="CIRCUIT", nargs="?", help="circuit file (TOML)")
    p.add_argument("--logbook", metavar="PATH",
                   help=f"logbook file (default: ${ENV_VAR}, else the user's data folder)")
    p.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML)")
    p.set_defaults(run=run)


def needs_terminal(stdin=None, stdout=None) -> bool:
    """True when standard input or output is not a terminal (the UI cannot run)."""
    stdin = sys.stdin if stdin is None else stdin
    stdout = sys.stdout if stdout is None else stdout
    try:
        return not (stdin.isatty() and stdout.isatty())
    except (AttributeError, ValueError):
        return True


def run(args) -> int:
    from ..io.circuit_file import load_circuit
    from ..io.logbook import resolve_logbook_path
    from ..io.meters_file import load_meters

    circuit = getattr(args, "circuit", None)
    meters = getattr(args, "meters", None)
    logbook = getattr(args, "logbook", None)
    if circuit is not None:
        load_circuit(circuit)
    if meters is not None:
        load_meters(meters)
    path = resolve_logbook_path(logbook)
    if path.is_dir():
        raise InputError("is a folder, not a logbook file", file=str(path), key="--logbook")
    if needs_terminal():
        raise InputError("the terminal UI needs a terminal (standard input and output are "
                         "not one); the commands check, expect, diagnose, suggest and log "
                         "work without it", key="ui")
    from ..tui.app import FaultfindApp

    app = FaultfindApp(circuit, logbook=logbook, meters=meters)
    code = app.run()
    return code or 0
