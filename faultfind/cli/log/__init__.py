"""``faultfind log SUBCOMMAND ...``: the measurement logbook from the command line.

A thin layer over :class:`faultfind.logbook.Logbook` (docs/logbook.md is
the user's guide).  Every subcommand takes ``--json`` (one JSON document on
stdout) and ``--logbook PATH`` (else ``$FAULTFIND_LOGBOOK``, else the user's
data folder).  A SESSION argument is a session number or ``last`` (the most
recently started session).

The modules, each named for what it holds: ``compact`` (the compact reading
form), ``common`` (what the subcommands share), ``sessions`` (a session's
work), ``queries`` (reading the logbook back, looking after the file) and
``parser``; the priors subcommands (tag, priors, merge-priors) are in
faultfind/cli/log_priors.py.
"""

from __future__ import annotations

from .compact import COMPACT_KINDS, compact_of, parse_compact
from .parser import add_parser

__all__ = ["add_parser", "parse_compact", "compact_of", "COMPACT_KINDS"]
