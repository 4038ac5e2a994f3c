"""The ``--priors FILE`` / ``--scope SCOPE`` options shared by diagnose, suggest, ui and drill.

``--priors FILE`` (repeatable: the files' counts are added) learns the fault
priors from outcome-counts files; ``--scope`` learns them from the logbook's
closed repair sessions (``--logbook PATH``, else ``$FAULTFIND_LOGBOOK``, else
the user's data folder).  Neither: the handbook's priors.  docs/priors.md.
"""

from __future__ import annotations

from ..io.logbook import ENV_VAR
from ..io.outcome_counts import SCOPE_HELP
from ..learned_priors import choose

__all__ = ["add_priors_args", "priors_from_args", "priors_line"]


def add_priors_args(p, *, logbook=True) -> None:
    """Add ``--priors`` and ``--scope`` (and ``--logbook`` when ``logbook``) to parser ``p``."""
    p.add_argument("--priors", metavar="FILE", action="append",
                   help="fault priors learned from an outcome-counts file (repeat to add "
                        "several; docs/priors.md)")
    p.add_argument("--scope", metavar="SCOPE",
                   help="fault priors learned from the logbook's outcomes: " + SCOPE_HELP)
    if logbook:
        p.add_argument("--logbook", metavar="PATH",
                       help=f"with --scope: logbook file (default: ${ENV_VAR}, else the "
                            "user's data folder)")


def priors_from_args(args):
    """The learned table the options ask for (:class:`~faultfind.engine.priors.Priors`), or None."""
    learned = choose(getattr(args, "priors", None), getattr(args, "logbook", None),
                     getattr(args, "scope", None))
    return None if learned is None else learned.table


def priors_line(table) -> str:
    """``Priors: handbook`` or ``Priors: learned from ... (N outcomes)`` for reports."""
    if table is None or table.label == "handbook":
        return "Priors: the handbook's failure-mode shares (no outcomes learned)"
    return f"Priors: learned from {table.label} ({table.outcomes} closed session(s))"
