"""Entry point of the ``faultfind`` command: argument parsing and exit codes.

Exit status (cli.md): 0 done; 2 bad input, with a message on stderr naming
the file, line or part; 1 an internal error.  No Python traceback reaches the
user unless ``FAULTFIND_DEBUG`` is set in the environment.
"""

from __future__ import annotations

import argparse
import os
import sys

from .. import __version__
from ..errors import FaultfindError, InputError, SolveError
from . import check as check_cmd
from . import diagnose as diagnose_cmd
from . import drill as drill_cmd
from . import expect as expect_cmd
from . import import_netlist as import_cmd
from . import log as log_cmd
from . import suggest as suggest_cmd
from . import ui as ui_cmd

__all__ = ["main", "build_parser"]

COMMANDS = (check_cmd, import_cmd, expect_cmd, diagnose_cmd, suggest_cmd, log_cmd, drill_cmd,
            ui_cmd)


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # usage errors are bad input: exit 2
        self.print_usage(sys.stderr)
        self.exit(2, f"faultfind: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="faultfind",
                     description="Expected readings, fault estimates and next-reading advice "
                                 "for a circuit under test.")
    parser.add_argument("--version", action="version", version=f"faultfind {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for mod in COMMANDS:
        mod.add_parser(sub)
    return parser


def main(argv=None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        if ui_cmd.needs_terminal():  # not at a terminal: the UI cannot open (cli.md: `faultfind`)
            parser.print_help()
            return 0
        args = parser.parse_args(["ui"])
    try:
        return args.run(args) or 0
    except InputError as exc:
        print(f"faultfind: error: {exc}", file=sys.stderr)
        return 2
    except SolveError as exc:
        where = getattr(args, "circuit", None)
        print(f"faultfind: error: {where + ': ' if where else ''}{exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into head and closed
        return 0
    except (FaultfindError, Exception) as exc:  # noqa: BLE001 - last resort
        if os.environ.get("FAULTFIND_DEBUG"):
            raise
        print(f"faultfind: internal error: {type(exc).__name__}: {exc}\n"
              "Please report this with the files you used "
              "(set FAULTFIND_DEBUG=1 to see the details).", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
