"""``faultfind ui [CIRCUIT] [--logbook PATH] [--meters FILE]``: the terminal UI.

``faultfind ui CIRCUIT --drill --apprentice NAME [--seed N] [--fault F]`` opens
a drill (docs/drill.md) on the drill screen instead, after the caution.

Plain ``faultfind`` with no command runs it too (cli.md).  The circuit and
meter files named are checked before the UI opens, so that a bad file gets
the usual message and exit status 2.  The UI opens behind the safety
caution; docs/ui.md is its guide.
"""

from __future__ import annotations

import sys

from ..errors import InputError
from ..io.logbook import ENV_VAR
from .priors_args import add_priors_args, priors_from_args

__all__ = ["add_parser", "run", "needs_terminal"]


def add_parser(sub):
    p = sub.add_parser("ui", help="the terminal UI (the default without a command)",
                       description="Open the terminal UI behind the safety caution. With no "
                                   "circuit it offers the bundled field cases.")
    p.add_argument("circuit", metavar="CIRCUIT", nargs="?", help="circuit file (TOML)")
    p.add_argument("--logbook", metavar="PATH",
                   help=f"logbook file (default: ${ENV_VAR}, else the user's data folder)")
    p.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML)")
    p.add_argument("--drill", action="store_true",
                   help="run a drill on CIRCUIT instead of a session (docs/drill.md)")
    p.add_argument("--apprentice", metavar="NAME", help="with --drill: who does the drill")
    p.add_argument("--seed", type=int, metavar="N",
                   help="with --drill: repeatable drill (default: a new one, shown)")
    p.add_argument("--fault", metavar="REF:MODE[:VALUE]",
                   help="with --drill: the trainer's fault (default: drawn at random)")
    add_priors_args(p, logbook=False)
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
    drill = _drill_options(args)
    if circuit is not None:
        loaded = load_circuit(circuit)
        if drill is not None and drill.get("fault") is not None:
            from ..drill import parse_fault

            parse_fault(drill["fault"], loaded)
    if meters is not None:
        load_meters(meters)
    priors = priors_from_args(args)   # a bad file or scope: exit 2 before the UI opens
    path = resolve_logbook_path(logbook)
    if path.is_dir():
        raise InputError("is a folder, not a logbook file", file=str(path), key="--logbook")
    if needs_terminal():
        raise InputError("the terminal UI needs a terminal (standard input and output are "
                         "not one); the commands check, expect, diagnose, suggest and log "
                         "work without it", key="ui")
    from ..tui.app import FaultfindApp

    app = FaultfindApp(circuit, logbook=logbook, meters=meters, drill=drill, priors=priors)
    code = app.run()
    return code or 0


def _drill_options(args):
    """The app's ``drill`` options from --drill, --apprentice, --seed, --fault (or None)."""
    extra = [k for k in ("apprentice", "seed", "fault") if getattr(args, k, None) is not None]
    if not getattr(args, "drill", False):
        if extra:
            raise InputError("only with --drill", key="--" + extra[0])
        return None
    if getattr(args, "circuit", None) is None:
        raise InputError("a drill needs a circuit file: faultfind ui CIRCUIT --drill "
                         "--apprentice NAME", key="--drill")
    name = args.apprentice
    if name is None or not name.strip() or "\n" in name or "\r" in name:
        raise InputError("name the apprentice (one line)", key="--apprentice")
    if args.seed is not None and args.seed < 0:
        raise InputError(f"must be a whole number >= 0, got {args.seed}", key="--seed")
    return {"apprentice": name.strip(), "seed": args.seed, "fault": args.fault}
