"""``faultfind log priors | merge-priors | tag``: fault priors learned from the logbook.

* ``log priors [--scope SCOPE] [--priors FILE] [--export FILE] [--json]``: the
  learned failure-mode shares and kind weights beside the handbook's, with the
  outcomes behind each; ``--export`` writes the scope's counts as an
  outcome-counts file for another logbook.
* ``log merge-priors FILE... [-o OUT] [--json]``: add several files' counts.
* ``log tag SESSION [TAG...] [--remove TAG]``: a session's tags (the site or
  unit family, for ``--scope tag:NAME``).

docs/priors.md is the guide.
"""

from __future__ import annotations

import sys

from ..errors import InputError
from ..io.outcome_counts import SCOPE_HELP, count_outcomes, parse_scope
from ..io.priors_file import counts_text, merge_counts, write_counts
from ..io.session_tags import add_tags, remove_tags, tags_of
from ..learned_priors import from_counts, from_counts_file
from .output import emit_json, table

__all__ = ["add_commands", "learned_json", "print_learned"]


def learned_json(learned, *, scope=None, skipped=()) -> dict:
    """The ``log priors --json`` document."""
    c = learned.counts
    return {
        "source": learned.table.label,
        "scope": scope,
        "sessions": c.sessions,
        "no_fault": c.no_fault,
        "faulty_parts": c.fault_count,
        "p_healthy": {"handbook": learned.p_healthy[0], "learned": learned.p_healthy[1],
                      "outcomes": c.no_fault},
        "kinds": [{"kind": r.kind, "handbook_weight": r.handbook_weight, "weight": r.weight,
                   "multiplier": r.multiplier, "found": r.culprits, "expected": r.expected,
                   "modes": [{"mode": m.mode, "handbook": m.handbook, "learned": m.learned,
                              "found": m.outcomes} for m in r.modes]}
                  for r in learned.kinds],
        "ignored_kinds": list(learned.ignored),
        "skipped": list(skipped),
    }


def print_learned(learned, skipped=(), stream=None) -> None:
    """The learned table beside the handbook's, as text."""
    out = stream or sys.stdout
    c = learned.counts
    print(f"Fault priors learned from {learned.table.label}", file=out)
    print(f"{c.sessions} closed repair session(s): {c.no_fault} with no fault found, "
          f"{c.fault_count} faulty part(s) found.", file=out)
    if not c.sessions:
        print("No outcomes in this scope: the handbook's priors stand.", file=out)
    print(file=out)
    kinds = [r for r in learned.kinds if r.expected > 0 or r.culprits > 0]
    if not kinds:
        print("No faulty part found in this scope: the handbook's kind weights and mode shares "
              "stand.", file=out)
    rows = [[r.kind, f"{r.handbook_weight:.2f}", f"{r.weight:.2f}", f"x{r.multiplier:.2f}",
             str(r.culprits), f"{r.expected:.1f}"] for r in kinds]
    if rows:
        table(["kind", "handbook weight", "learned", "ratio", "found", "expected"], rows,
              stream=out, aligns=["<", ">", ">", ">", ">", ">"])
        print("  (expected: faulty parts of the kind the handbook's weights predicted on the "
              "same jobs; kinds on none of the circuits are left out)", file=out)
        print(file=out)
    rows = []
    for r in kinds:
        for i, m in enumerate(r.modes):
            rows.append([r.kind if i == 0 else "", m.mode, f"{m.handbook * 100:5.1f} %",
                         f"{m.learned * 100:5.1f} %", str(m.outcomes)])
    if rows:
        table(["kind", "mode", "handbook share", "learned", "found"], rows, stream=out,
              aligns=["<", "<", ">", ">", ">"])
        print(file=out)
    h0, h1 = learned.p_healthy
    print(f"No fault found (P healthy): handbook {h0 * 100:.1f} %, learned {h1 * 100:.1f} % "
          f"({c.no_fault} of {c.sessions} session(s))", file=out)
    if learned.ignored:
        print("Not used (the handbook gives these kinds no weight): " + ", ".join(learned.ignored),
              file=out)
    for s in skipped:
        print(f"Left out: {s}", file=out)


def _open(args):
    from ..io.logbook import Logbook

    return Logbook(args.logbook, create=False)


def run_priors(args) -> int:
    if args.priors and args.scope is not None:
        raise InputError("give --priors FILE or --scope, not both", key="--priors")
    if args.priors and args.export:
        raise InputError("--export writes the logbook's counts; to add files use "
                         "'faultfind log merge-priors FILE... -o OUT'", key="--export")
    skipped, scope_text = (), None
    if args.priors:
        learned = from_counts_file(args.priors)
    else:
        scope = parse_scope(args.scope)
        with _open(args) as book:
            counted = count_outcomes(book, scope)
        learned = from_counts(counted.counts, counted.label)
        skipped, scope_text = counted.skipped, scope.text
        if args.export:
            write_counts(counted.counts, args.export, comment=f"from {counted.label}")
    if args.json:
        doc = learned_json(learned, scope=scope_text, skipped=skipped)
        if args.export:
            doc["exported"] = args.export
        emit_json(doc)
        return 0
    print_learned(learned, skipped)
    if args.export:
        print(f"\nCounts written to {args.export}: use it with --priors {args.export}, or add "
              "it to another team's with faultfind log merge-priors.")
    return 0


def run_merge(args) -> int:
    counts = merge_counts(args.files)
    names = ", ".join(args.files)
    if args.output:
        write_counts(counts, args.output, comment=f"merged from {names}")
    if args.json:
        doc = learned_json(from_counts(counts, f"files {names}"))
        doc["written"] = args.output
        emit_json(doc)
    elif args.output:
        print(f"{len(args.files)} file(s) merged into {args.output}: {counts.sessions} session(s), "
              f"{counts.fault_count} faulty part(s).")
    else:
        sys.stdout.write(counts_text(counts, comment=f"merged from {names}"))
    return 0


def run_tag(args) -> int:
    with _open(args) as book:
        sid = args.resolve_session(book, args.session)
        tags = tags_of(book, sid)
        if args.tags:
            tags = add_tags(book, sid, args.tags)
        if args.remove:
            tags = remove_tags(book, sid, args.remove)
    if args.json:
        emit_json({"session": sid, "tags": tags})
    else:
        print(f"Session {sid} tags: {', '.join(tags) if tags else '(none)'}")
    return 0


def add_commands(cmd, session_arg, resolve_session) -> None:
    """Add the subcommands to ``faultfind log``.

    ``cmd``, ``session_arg``: cli/log.py's helpers that add a subcommand and its
    SESSION argument; ``resolve_session(book, text)``: a SESSION argument
    (number or ``last``) to a session id.
    """
    q = cmd("priors", run_priors, "fault priors learned from confirmed outcomes",
            "The failure-mode shares and kind weights learned from the confirmed outcomes of "
            "closed repair sessions, beside the handbook's, with the outcomes behind each "
            "(docs/priors.md).")
    q.add_argument("--scope", metavar="SCOPE", help=SCOPE_HELP)
    q.add_argument("--priors", metavar="FILE", action="append",
                   help="show the priors of outcome-counts file(s) instead of the logbook's")
    q.add_argument("--export", metavar="FILE",
                   help="write the scope's counts as an outcome-counts file (CSV)")

    q = cmd("merge-priors", run_merge, "add outcome-counts files together",
            "Add the counts of several outcome-counts files (a team pooling its outcomes); "
            "the result goes to -o FILE, else to standard output.")
    q.add_argument("files", metavar="FILE", nargs="+", help="outcome-counts files (CSV)")
    q.add_argument("-o", "--output", metavar="OUT", help="file to write")

    q = cmd("tag", run_tag, "show, add or remove a session's tags (site or unit family)",
            "Tags say which site or unit family a session belongs to; priors can be learned "
            "from one tag's sessions (--scope tag:NAME). Tags may change after a session is "
            "closed.")
    session_arg(q)
    q.add_argument("tags", metavar="TAG", nargs="*", help="tags to add")
    q.add_argument("--remove", metavar="TAG", action="append", help="a tag to remove (repeat)")
    q.set_defaults(resolve_session=resolve_session)
