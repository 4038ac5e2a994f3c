"""``faultfind drill SUBCOMMAND ...``: diagnosis practice for apprentices.

A thin layer over :class:`faultfind.drill.Drill` (docs/drill.md is the guide):

* ``faultfind drill run CIRCUIT --apprentice NAME [--seed N] [--fault F]`` runs one
  drill in this process.  The safety caution comes first; then each line of
  standard input (or of ``--commands FILE``) is a command (``ack``, ``read V TP1``,
  ``isolate``, ``verdict F1 open`` ...).  At a terminal it prompts; piped, it
  echoes each command so the output reads as a transcript.  With ``--json``
  one JSON document at the end holds the transcript, the score and the
  explanation.  A scored drill is saved to the logbook (``--logbook PATH``,
  else ``$FAULTFIND_LOGBOOK``) unless ``--no-log``.
* ``faultfind drill summary [--apprentice NAME]`` shows progress across drills.
* ``faultfind drill delete --apprentice NAME --yes`` deletes an apprentice's drills.

A command the drill does not understand is answered with a message and the
drill goes on (``--strict``: it stops with exit status 2 instead).
"""

from __future__ import annotations

import argparse
import sys

from ..advise import load_costs
from ..drill import COMMANDS, Drill, parse_fault
from ..errors import InputError
from ..io.circuit_file import load_circuit
from ..io.logbook import ENV_VAR, Logbook, format_time, resolve_logbook_path
from ..io.meters_file import load_meters, meters_with_default
from .output import emit_json, table
from .priors_args import add_priors_args, priors_from_args, priors_line

__all__ = ["add_parser", "run_drill", "run_summary", "run_delete"]


def _read_commands(path) -> list:
    try:
        with open(path, encoding="utf-8-sig") as f:
            return f.read().splitlines()
    except FileNotFoundError:
        raise InputError("no such commands file", file=path) from None
    except OSError as exc:
        raise InputError(f"cannot read the commands file: {exc.strerror or exc}",
                         file=path) from None
    except UnicodeDecodeError:
        raise InputError("not UTF-8 text", file=path) from None


def _lines(args, given):
    """(line number, text) of each command: the --commands file's, or standard input's."""
    if given is not None:
        yield from enumerate(given, 1)
        return
    n = 0
    while True:
        if _interactive(args):
            print("drill> ", end="", flush=True)
        line = sys.stdin.readline()
        if not line:
            return
        n += 1
        yield n, line.rstrip("\r\n")


def _interactive(args) -> bool:
    if args.json or args.commands:
        return False
    try:
        return sys.stdin.isatty()
    except (AttributeError, ValueError):
        return False


def _indent(text, pad="  ") -> str:
    return "\n".join(pad + line for line in text.splitlines())


def _print_result(drill, out) -> None:
    r = drill.result
    print(file=out)
    print(f"The hidden fault: {r.fault.describe(drill.circuit)}", file=out)
    print(f"Your verdict:     {r.verdict.describe(drill.circuit)}", file=out)
    print(f"Score {r.score.total}/100", file=out)
    for line in r.score.lines:
        print(f"  {line}", file=out)
    print("What it tells:", file=out)
    for line in r.explanation.verdict:
        print(f"  {line}", file=out)
    if r.explanation.readings:
        print("Your readings:", file=out)
        for note in r.explanation.readings:
            print(f"  [{note.category}] {note.text}", file=out)
    print(f"  {r.explanation.settle}", file=out)
    print(f"  {r.explanation.advice}", file=out)


def run_drill(args) -> int:
    circuit = load_circuit(args.circuit)
    meters = meters_with_default(load_meters(args.meters) if args.meters else None)
    costs = load_costs(args.costs) if args.costs else None
    if args.seed is not None and args.seed < 0:
        raise InputError(f"must be a whole number >= 0, got {args.seed}", key="--seed")
    fault = parse_fault(args.fault, circuit) if args.fault is not None else None
    if not args.apprentice.strip():
        raise InputError("name the apprentice", key="--apprentice")
    given = _read_commands(args.commands) if args.commands else None
    priors = priors_from_args(args)
    if not args.no_log:  # a logbook that cannot be opened is found before the drill starts
        Logbook(args.logbook, create=True).close()
    drill = Drill(circuit, args.apprentice, seed=args.seed, fault=fault, meters=meters,
                  costs=costs, caution_acknowledged=args.caution_acknowledged, priors=priors)
    out = sys.stderr if args.json else sys.stdout
    print(drill.caution, file=out)
    print(file=out)
    print(f"Drill for {drill.apprentice} on: {circuit.title or args.circuit}", file=out)
    print(f"  seed {drill.seed} (the same seed gives the same drill); hidden fault "
          f"{'set by the trainer' if drill.fault_source == 'trainer' else 'drawn at random'}; "
          "the board is energized, as the unit was found", file=out)
    for note in drill.notes:
        print(f"  note for the trainer: {note}", file=out)
    if priors is not None:
        print(f"  {priors_line(priors)}", file=out)
    if drill.acknowledged:
        print("  safety caution acknowledged (--caution-acknowledged)", file=out)
    else:
        print("  acknowledge the caution with 'ack'; 'help' lists the commands", file=out)
    if not args.json:
        out.flush()
    echo = not args.json and not _interactive(args)
    try:
        leftover = _play(drill, args, given, echo)
    except KeyboardInterrupt:  # Ctrl-C at the prompt: the drill stops, as with quit
        print(file=out)
        if not drill.finished:
            drill.quit(command="(interrupted)")
        leftover = 0
    return _finish(drill, args, leftover)


def _play(drill, args, given, echo) -> int:
    """Run the commands until the drill ends; the number of commands left over."""
    leftover = 0
    for n, line in _lines(args, given):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        if drill.finished:
            leftover += 1
            continue
        step = drill.command(text)
        if not args.json:
            if echo:
                print(f"> {text}")
            print(_indent(step.message), flush=True)
        if step.kind == "error" and args.strict:
            where = dict(file=args.commands, line=n) if args.commands else dict(line=n)
            raise InputError(f"{step.message} (command {text!r}; --strict stops the drill)",
                             key="command", **where)
        if step.kind == "verdict" and not args.json:
            _print_result(drill, sys.stdout)
    return leftover


def _finish(drill, args, leftover) -> int:
    if leftover:
        print(f"faultfind: {leftover} command(s) after the end of the drill were ignored",
              file=sys.stderr)
    record = None
    if drill.result is not None and not args.no_log:
        with Logbook(args.logbook, create=True) as book:
            record = book.record_drill(**drill.record_fields(args.circuit))
            path = book.path
    if args.json:
        doc = drill.to_json()
        doc["logbook"] = None if record is None else {"path": str(path), "drill": record.id}
        emit_json(doc)
        return 0
    if drill.result is None:
        print("The drill ended without a verdict: not scored, not recorded.")
    elif record is not None:
        print(f"Recorded as drill {record.id} for {record.apprentice} in {path} "
              f"(faultfind drill summary --apprentice \"{record.apprentice}\").")
    return 0


def _summary_lines(s) -> list:
    return [f"Drills of {s.apprentice}: {s.drills}, {s.correct} right "
            f"({s.accuracy * 100:.0f} %), mean score {s.mean_score:.0f}/100",
            f"  readings {s.mean_readings:.1f} a drill (faultfind's advice path "
            f"{s.mean_advice_readings:.1f}); effort {s.mean_effort:.1f} (advice "
            f"{s.mean_advice_effort:.1f}); safety errors {s.safety_errors}; hints {s.hints}"]


def run_summary(args) -> int:
    names = []
    exists = resolve_logbook_path(args.logbook).exists()
    summaries = []
    if exists:
        with Logbook(args.logbook, create=False) as book:
            if args.apprentice is not None:
                names = [args.apprentice]
            else:
                seen = {}
                for r in book.list_drills():
                    seen.setdefault(r.apprentice.lower(), r.apprentice)
                names = list(seen.values())
            summaries = [book.drill_summary(n) for n in names]
    elif args.apprentice is not None and not args.apprentice.strip():
        raise InputError("must not be empty", key="--apprentice")
    summaries = [s for s in summaries if s.drills]
    if args.json:
        emit_json({"apprentices": [s.to_json() for s in summaries]})
        return 0
    if not summaries:
        print("No drills recorded" + (f" for {args.apprentice}." if args.apprentice else " yet."))
        return 0
    for i, s in enumerate(summaries):
        if i:
            print()
        for line in _summary_lines(s):
            print(line)
        if args.apprentice is None:
            continue
        print()
        table(["week", "drills", "right", "mean score", "readings", "safety errors"],
              [[w.week, str(w.drills), f"{w.accuracy * 100:.0f} %", f"{w.mean_score:.0f}",
                f"{w.mean_readings:.1f}", str(w.safety_errors)] for w in s.weeks],
              aligns=["<", ">", ">", ">", ">", ">"])
        print()
        table(["#", "finished", "circuit", "hidden fault", "verdict", "score", "readings",
               "safety"],
              [[str(r.id), format_time(r.finished_at), r.circuit_title or r.circuit_name,
                _fault_text(r.fault), _fault_text(r.verdict)
                + ("" if r.correct else " (wrong)"), str(r.score), str(r.readings),
                str(r.safety_errors)] for r in s.records],
              aligns=[">", "<", "<", "<", "<", ">", ">", ">"])
    return 0


def run_delete(args) -> int:
    if not args.apprentice.strip():
        raise InputError("must not be empty", key="--apprentice")
    n = 0
    if resolve_logbook_path(args.logbook).exists():
        with Logbook(args.logbook, create=False) as book:
            found = len(book.list_drills(args.apprentice))
            if found and not args.yes:
                raise InputError(f"this deletes {found} drill(s) of {args.apprentice} for "
                                 "good: run again with --yes to delete them", key="--yes")
            n = book.delete_drills(args.apprentice) if found else 0
    if args.json:
        emit_json({"apprentice": args.apprentice, "deleted": n})
    else:
        print(f"Deleted {n} drill(s) of {args.apprentice}." if n else
              f"No drills recorded for {args.apprentice}.")
    return 0


def _fault_text(t) -> str:
    ref, mode, _ = t
    return "none" if ref is None else f"{ref} {mode}"


def add_parser(sub):
    p = sub.add_parser(
        "drill", help="diagnosis practice: a hidden fault, simulated readings, a score",
        description="Diagnosis practice for apprentices: faultfind hides a fault in a "
                    "simulated board, plays the meter, scores the verdict and explains. "
                    "See docs/drill.md.")
    p.set_defaults(run=lambda args: p.print_help() or 0)
    subs = p.add_subparsers(dest="drill_command", metavar="SUBCOMMAND")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--logbook", metavar="PATH",
                        help=f"logbook file (default: ${ENV_VAR}, else the user's data folder)")
    common.add_argument("--json", action="store_true", help="print one JSON document")

    q = subs.add_parser(
        "run", parents=[common], help="run one drill; commands on standard input",
        description="Run one drill. The safety caution comes first; then each line of "
                    "standard input (or --commands FILE) is a command: "
                    + "; ".join(f"{k}: {v}" for k, v in COMMANDS.items()) + ".")
    q.add_argument("circuit", metavar="CIRCUIT", help="circuit file (TOML), e.g. a field case")
    q.add_argument("--apprentice", required=True, metavar="NAME", help="who does the drill")
    q.add_argument("--seed", type=int, metavar="N",
                   help="repeatable drill: the same seed gives the same board, fault and "
                        "displays (default: a new one, printed)")
    q.add_argument("--fault", metavar="REF:MODE[:VALUE]",
                   help="the trainer's fault, e.g. F1:open, R9:drift:6k8, or none "
                        "(default: drawn from the failure-mode priors)")
    q.add_argument("--meters", metavar="FILE",
                   help="meter profiles file (TOML); the apprentice's meter is its default")
    q.add_argument("--costs", metavar="FILE", help="effort model (TOML; see docs/advice.md)")
    q.add_argument("--caution-acknowledged", action="store_true",
                   help="the safety caution was read and acknowledged (instead of 'ack')")
    q.add_argument("--commands", metavar="FILE", help="read the commands from FILE, not stdin")
    q.add_argument("--no-log", action="store_true", help="do not save the result to the logbook")
    q.add_argument("--strict", action="store_true",
                   help="stop with exit status 2 at the first command not understood")
    add_priors_args(q, logbook=False)
    q.set_defaults(run=run_drill)

    q = subs.add_parser("summary", parents=[common],
                        help="progress across drills: accuracy, readings, safety errors",
                        description="Progress across drills from the logbook: accuracy, "
                                    "readings used, safety errors, overall and by week.")
    q.add_argument("--apprentice", metavar="NAME",
                   help="one apprentice, with every drill (default: one line per apprentice)")
    q.set_defaults(run=run_summary)

    q = subs.add_parser("delete", parents=[common],
                        help="delete an apprentice's drills for good (privacy)",
                        description="Delete every drill result of one apprentice from the "
                                    "logbook, for good; copies made elsewhere are not touched.")
    q.add_argument("--apprentice", required=True, metavar="NAME", help="whose drills")
    q.add_argument("--yes", action="store_true", help="confirm the deletion")
    q.set_defaults(run=run_delete)
    return p
