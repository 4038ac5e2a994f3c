"""The ``faultfind log`` argument parser: one subparser per subcommand."""

from __future__ import annotations

import argparse

from ...logbook import ENV_VAR, PURPOSES
from ..log_priors import add_commands as add_priors_commands
from ..priors_args import add_priors_args
from .common import _session
from .queries import (run_show, run_list, run_history, run_export, run_report, run_delete,
                      run_path, run_verify)
from .sessions import (run_start, run_caution, run_add, run_import, run_strike, run_diagnose,
                       run_close)

__all__ = ["add_parser"]


def _intermixed(base):
    """A parser class that reads options between positionals (``add 3 --json V TP1 1``)."""

    class Intermixed(base):
        _inner = False

        def parse_known_args(self, args=None, namespace=None):
            if self._inner:
                return super().parse_known_args(args, namespace)
            self._inner = True
            try:
                return self.parse_known_intermixed_args(args, namespace)
            finally:
                self._inner = False

    return Intermixed


def add_parser(sub):
    p = sub.add_parser(
        "log", help="the measurement logbook: sessions, readings, findings, outcomes",
        description="The measurement logbook (SQLite): sessions, readings as entered, stored "
                    "diagnoses and outcomes; exports for the work order. See docs/logbook.md.")
    p.set_defaults(run=lambda args: p.print_help() or 0)
    subs = p.add_subparsers(dest="log_command", metavar="SUBCOMMAND")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--logbook", metavar="PATH",
                        help=f"logbook file (default: ${ENV_VAR}, else the user's data folder)")
    common.add_argument("--json", action="store_true", help="print one JSON document")

    def cmd(name, run, help_, description=None, intermixed=False):
        if intermixed:  # options may come between SESSION and the compact READING
            base, subs._parser_class = subs._parser_class, _intermixed(subs._parser_class)
        try:
            q = subs.add_parser(name, parents=[common], help=help_,
                                description=description or help_)
        finally:
            if intermixed:
                subs._parser_class = base
        q.set_defaults(run=run)
        return q

    def session_arg(q):
        q.add_argument("session", metavar="SESSION", help="session number, or 'last'")

    q = cmd("start", run_start, "start a session for a circuit",
            "Start a session: store the circuit file's text and hash, print the safety caution.")
    q.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML)")
    q.add_argument("--unit", required=True, help="unit or asset worked on, e.g. 'BP-2'")
    q.add_argument("--technician", default="", help="who takes the readings")
    q.add_argument("--location", default="", help="site, room or panel")
    q.add_argument("--purpose", choices=PURPOSES, default="repair", help="default: repair")
    q.add_argument("--meters", metavar="FILE", help="meter profiles file (TOML), stored too")
    q.add_argument("--caution-acknowledged", action="store_true",
                   help="record that the safety caution was read and acknowledged now")

    q = cmd("caution", run_caution, "show the safety caution; record its acknowledgement")
    session_arg(q)
    q.add_argument("--caution-acknowledged", action="store_true",
                   help="record that the safety caution was read and acknowledged now")

    q = cmd("add", run_add, "add one reading (committed before this command reports it)",
            "Add one reading, compact (KIND WHERE VALUE: V TP1 11.91 | V +24V,24V-F 23.9 | "
            "Vac OUT 1.02 | I H1 2.45mA | R F1 OL | R A,0V 4k61 | Rlifted K1 180.6 | "
            "D D3 0.612 | D B1,0V 0.652) or with "
            "options. Bad input stores nothing. A display starting with '-' goes after '--': "
            "faultfind log add 3 -- I H1 -OL.", intermixed=True)
    session_arg(q)
    q.add_argument("reading", metavar="READING", nargs="*", help="KIND WHERE VALUE")
    for f, h in (("quantity", "voltage, current, resistance or diode-test"), ("mode", "dc or ac"),
                 ("plus", "node of the red probe"), ("minus", "node of the black probe "
                                                              "(default ground)"),
                 ("part", "part read (current; resistance across it)"),
                 ("setup", "resistance: in-circuit or lifted"),
                 ("value", "the display as shown: '11.91', '4k61', '2.45 mA', 'OL'"),
                 ("frequency", "AC: frequency of this reading"), ("meter", "meter profile"),
                 ("label", "test point name or note")):
        q.add_argument(f"--{f}", metavar=f.upper(), help=h)

    q = cmd("import", run_import, "add every reading of a readings file (all or none)")
    session_arg(q)
    q.add_argument("file", metavar="READINGS", help="readings file (CSV)")

    q = cmd("strike", run_strike, "strike out a mistaken reading (it is kept, with the reason)")
    session_arg(q)
    q.add_argument("reading", metavar="N", type=int, help="the reading's number in the session")
    q.add_argument("--reason", required=True, help="why, e.g. 'probe on the wrong terminal'")

    q = cmd("diagnose", run_diagnose, "diagnose the session's readings and store the result")
    add_priors_args(q, logbook=False)
    session_arg(q)
    q.add_argument("--top", metavar="K", type=int, default=5, help="hypotheses kept (default 5)")

    q = cmd("close", run_close, "close a session with its outcome",
            "Close a session with what was found, how it was confirmed and what was done; a "
            "closed session is read-only.")
    session_arg(q)
    q.add_argument("--fault", metavar="REF[:MODE]", action="append",
                   help="a part found faulty, e.g. F1:open (repeat for more)")
    q.add_argument("--no-fault", action="store_true", help="no fault was found")
    q.add_argument("--confirmed-by", default="", metavar="TEXT",
                   help="how it was confirmed, e.g. 'F1 reads OL out of its holder'")
    q.add_argument("--action", default="", metavar="TEXT", help="what was done")
    q.add_argument("--notes", default="", metavar="TEXT", help="anything else")

    q = cmd("show", run_show, "show a session: readings against their bands, findings, outcome")
    session_arg(q)

    q = cmd("list", run_list, "list sessions, oldest first")
    q.add_argument("--unit", help="only this unit (ignoring case)")
    q.add_argument("--technician", help="only this technician (ignoring case)")
    q.add_argument("--since", metavar="DATE", help="started on or after (YYYY-MM-DD)")
    q.add_argument("--until", metavar="DATE", help="started on or before (YYYY-MM-DD)")
    q.add_argument("--open", action="store_true", help="only sessions not closed")
    q.add_argument("--tag", metavar="TAG", help="only sessions with this tag (ignoring case)")

    q = cmd("history", run_history, "every session of one unit, oldest first")
    q.add_argument("unit", metavar="UNIT")

    q = cmd("export", run_export, "write a session's readings as a readings file (CSV)",
            "Write a session's readings as a readings file (to stdout without -o); it reads "
            "back with faultfind diagnose.")
    session_arg(q)
    q.add_argument("-o", "--output", metavar="FILE", help="CSV file to write")
    q.add_argument("--circuit", metavar="FILE", help="also write the session's circuit file")
    q.add_argument("--include-struck", action="store_true", help="also struck-out readings")

    q = cmd("report", run_report, "work-order report in Markdown or HTML")
    session_arg(q)
    q.add_argument("-o", "--output", metavar="FILE", help="file to write (.md or .html)")
    q.add_argument("--format", choices=("markdown", "html"),
                   help="default: from the file name, else markdown")

    q = cmd("delete", run_delete, "delete a session for good (privacy)")
    session_arg(q)
    q.add_argument("--yes", action="store_true", help="confirm the deletion")

    cmd("path", run_path, "print where the logbook file is")
    cmd("verify", run_verify, "check the logbook file's integrity")
    add_priors_commands(cmd, session_arg, _session)
    return p
