"""``faultfind log SUBCOMMAND ...``: the measurement logbook from the command line.

A thin layer over :class:`faultfind.io.logbook.Logbook` (docs/logbook.md is
the user's guide).  Every subcommand takes ``--json`` (one JSON document on
stdout) and ``--logbook PATH`` (else ``$FAULTFIND_LOGBOOK``, else the user's
data folder).  A SESSION argument is a session number or ``last`` (the most
recently started session).
"""

from __future__ import annotations

import argparse
import os
import sys

from ..errors import FaultfindError, InputError, LogbookError
from ..io.logbook import (ENV_VAR, PURPOSES, SAFETY_CAUTION, Logbook, default_logbook_path,
                          format_time, resolve_logbook_path)
from ..io.report import assess, assess_session, describe_reading, report_format, write_report
from .log_priors import add_commands as add_priors_commands
from .output import emit_json, table

__all__ = ["add_parser", "parse_compact", "compact_of", "COMPACT_KINDS"]

#: Compact reading kinds: word -> (quantity, mode or setup).
COMPACT_KINDS = {
    "v": ("voltage", "dc"), "vdc": ("voltage", "dc"), "vac": ("voltage", "ac"),
    "i": ("current", "dc"), "idc": ("current", "dc"), "iac": ("current", "ac"),
    "r": ("resistance", "in-circuit"), "rl": ("resistance", "lifted"),
    "rlifted": ("resistance", "lifted"),
}
_FIELD_OPTIONS = ("quantity", "mode", "plus", "minus", "part", "setup", "value")
_ACK_HINT = "faultfind log caution {id} --caution-acknowledged"


def parse_compact(tokens, circuit) -> dict:
    """Reading fields from the compact form ``KIND WHERE VALUE``.

    Parameters
    ----------
    tokens : sequence of str
        ``KIND`` one of :data:`COMPACT_KINDS` (any case: ``V``, ``Vac``,
        ``I``, ``Iac``, ``R``, ``Rlifted``); ``WHERE`` a node (voltage to
        ground), ``PLUS,MINUS`` (two nodes), or a part (current; resistance
        across it); ``VALUE`` the display, the rest of the tokens joined by
        spaces (``23.91 V``, ``4k61``, ``OL``).
    circuit : Circuit
        Tells a part from a node for a resistance reading.

    Returns
    -------
    dict
        Readings-file fields for :meth:`Logbook.add_reading`.

    Raises
    ------
    InputError
        Fewer than three tokens or an unknown KIND (key ``READING``).
    """
    tokens = [str(t) for t in tokens]
    if len(tokens) < 3:
        raise InputError("a compact reading is KIND WHERE VALUE, e.g. 'V TP1 11.91', "
                         "'V +24V,24V-F 23.9', 'I H1 2.45mA', 'R F1 OL', 'Rlifted K1 180.6'",
                         key="READING")
    kind, where, value = tokens[0].lower(), tokens[1], " ".join(tokens[2:])
    if kind not in COMPACT_KINDS:
        raise InputError(f"unknown kind {tokens[0]!r}: one of V, Vac, I, Iac, R, Rlifted",
                         key="READING")
    quantity, extra = COMPACT_KINDS[kind]
    fields = {"quantity": quantity, "value": value}
    plus, sep, minus = where.partition(",")
    if quantity == "current":
        fields.update(mode=extra, part=where)
    elif quantity == "voltage":
        fields.update(mode=extra, plus=plus, minus=minus if sep else "")
    elif not sep and circuit.has_part(where):
        fields.update(setup=extra, part=where)
    elif not sep and where not in circuit.nodes:
        raise InputError(f"{where!r} is neither a part nor a node of the circuit: a resistance "
                         "reading is across a part (R F1) or between nodes (R A,0V)",
                         key="READING")
    else:
        fields.update(setup=extra, plus=plus, minus=minus if sep else "")
    return fields


def compact_of(row) -> str:
    """``KIND WHERE`` of the compact form for a reading given as readings-file fields.

    Parameters
    ----------
    row : mapping
        ``quantity, mode, plus, minus, part, setup`` (e.g. a suggestion of
        ``faultfind diagnose --json``).

    Returns
    -------
    str
        e.g. ``"V 24V-F,GUARD"``, ``"Iac H1"``, ``"Rlifted K1"``.
    """
    q = row.get("quantity")
    if q == "resistance":
        kind = "Rlifted" if row.get("setup") == "lifted" else "R"
    else:
        kind = ("V" if q == "voltage" else "I") + ("ac" if row.get("mode") == "ac" else "")
    if row.get("part"):
        where = row["part"]
    else:
        where = row.get("plus") or ""
        if row.get("minus"):
            where += "," + row["minus"]
    return f"{kind} {where}"


# -- plumbing ------------------------------------------------------------------------------


def _open(args, create=False) -> Logbook:
    book = Logbook(args.logbook, create=create)
    if book.backup is not None:
        print(f"faultfind: logbook {book.path} upgraded to schema version "
              f"{book.schema_version}; the old file is kept as {book.backup}", file=sys.stderr)
    return book


def _session(book, text) -> int:
    if str(text).lower() == "last":
        sid = book.latest_session_id()
        if sid is None:
            raise LogbookError("'last': there are no sessions in this logbook yet",
                               file=book.path, key="SESSION")
        return sid
    try:
        sid = int(text)
    except ValueError:
        raise LogbookError(f"{text!r} is not a session number (or 'last')",
                           key="SESSION") from None
    if sid < 1:
        raise LogbookError(f"{text!r} is not a session number (or 'last')", key="SESSION")
    return sid


def _missing(args) -> bool:
    return not resolve_logbook_path(args.logbook).exists()


def _assessed_json(a) -> dict:
    doc = a.logged.to_json()
    doc.update(expected=a.expected, low=a.low, high=a.high, status=a.status,
               healthy_reads_ol=a.healthy_ol, power=a.power)
    return doc


def _status_line(a) -> str:
    if a.expected is None:
        healthy = "a healthy unit reads OL here (no path)"
    else:
        healthy = f"healthy {a.expected_text()}, band {a.band_text()}"
    return f"{healthy}: {a.symbol} {a.words}"


def _print_readings(rows) -> None:
    out = []
    for a in rows:
        lr = a.logged
        status = f"{a.symbol} {a.words.split(' (')[0]}"
        if lr.struck:
            status += f" ({lr.struck_reason})"
        out.append([str(lr.seq), format_time(lr.taken_at)[11:], describe_reading(lr.reading),
                    a.shown(), a.expected_text(), a.band_text(), status, lr.reading.label])
    table(["#", "time", "reading", "display", "expected", "healthy band", "status", "label"],
          out, aligns=[">", "<", "<", ">", ">", "<", "<", "<"])


def _outcome_text(o) -> str:
    if o is None:
        return "open"
    return ", ".join(f"{r} {m}" if m else r for r, m in o.faults) or "no fault found"


def _summary_rows(sessions):
    return [[str(s.id), format_time(s.started_at), s.unit, s.technician or "—", s.purpose,
             str(s.reading_count), s.latest_verdict or "—", _outcome_text(s.outcome)]
            for s in sessions]


def _print_caution(stream) -> None:
    print(SAFETY_CAUTION, file=stream)
    print(file=stream)


# -- subcommands ---------------------------------------------------------------------------


def run_start(args) -> int:
    with _open(args, create=True) as book:
        _print_caution(sys.stderr if args.json else sys.stdout)
        s = book.start_session(args.circuit, unit=args.unit, technician=args.technician,
                               location=args.location, purpose=args.purpose, meters=args.meters,
                               caution_acknowledged=args.caution_acknowledged)
    hint = _ACK_HINT.format(id=s.id)
    if args.json:
        doc = {"session": s.to_json(), "logbook": str(book.path), "caution": SAFETY_CAUTION}
        if not s.caution_acknowledged_at:
            print(f"faultfind: the safety caution was not acknowledged; record it with: {hint}",
                  file=sys.stderr)
        emit_json(doc)
        return 0
    print(f"Session {s.id} started for unit {s.unit}: {s.circuit_title or s.circuit_name}")
    print(f"  circuit {s.circuit_name}, SHA-256 {s.circuit_sha256[:16]}...")
    print(f"  logbook {book.path}")
    if s.caution_acknowledged_at:
        print(f"Safety caution acknowledged at {format_time(s.caution_acknowledged_at, seconds=True)}.")
    else:
        print("Safety caution NOT acknowledged: the session's acknowledgement stays empty. "
              f"Read the caution above, then record it with:\n  {hint}")
    print(f"Add readings with: faultfind log add {s.id} V TP1 11.91   (see faultfind log add -h)")
    return 0


def run_caution(args) -> int:
    with _open(args) as book:
        sid = _session(book, args.session)
        at = book.acknowledge_caution(sid) if args.caution_acknowledged else \
            book.get_session(sid).caution_acknowledged_at
    _print_caution(sys.stderr if args.json else sys.stdout)
    if args.json:
        emit_json({"session": sid, "caution": SAFETY_CAUTION, "caution_acknowledged_at": at})
    elif at:
        print(f"Session {sid}: safety caution acknowledged at {format_time(at, seconds=True)}.")
    else:
        print(f"Session {sid}: not acknowledged. Record it with: "
              f"{_ACK_HINT.format(id=sid)}")
    return 0


def run_add(args) -> int:
    given = {f: getattr(args, f) for f in _FIELD_OPTIONS if getattr(args, f) is not None}
    with _open(args) as book:
        sid = _session(book, args.session)
        if args.reading:
            if given:
                raise InputError(f"give the reading either compact (KIND WHERE VALUE) or with "
                                 f"options, not both (--{next(iter(given))})", key="READING")
            fields = parse_compact(args.reading, book.get_session(sid).circuit())
        elif not given:
            raise InputError("no reading given: write KIND WHERE VALUE (e.g. 'V TP1 11.91') or "
                             "use --quantity ... --value", key="READING")
        else:
            fields = given
        for f in ("frequency", "meter", "label"):
            if getattr(args, f) is not None:
                fields[f] = getattr(args, f)
        logged = book.add_reading(sid, **fields)
        if not args.json:  # acknowledged: committed before this line is printed
            print(f"Stored reading {logged.seq} of session {sid}: {describe_reading(logged.reading)} = "
                  f"{logged.reading.raw}", flush=True)
        s = book.get_session(sid)
    try:  # the reading is stored: a failure to compute its band must not hide that
        row = assess(s.circuit(), s.meters(), [logged])[0]
    except FaultfindError as exc:
        row, note = None, f"no healthy band for this reading: {exc}"
    if args.json:
        doc = _assessed_json(row) if row is not None else logged.to_json() | {"note": note}
        emit_json({"session": sid, "reading": doc})
    else:
        print(f"  {_status_line(row) if row is not None else note}")
    return 0


def run_import(args) -> int:
    with _open(args) as book:
        sid = _session(book, args.session)
        logged = book.import_readings(sid, args.file)
        s = book.get_session(sid)
    rows = assess(s.circuit(), s.meters(), logged)
    if args.json:
        emit_json({"session": sid, "readings": [_assessed_json(a) for a in rows]})
        return 0
    span = f" (#{logged[0].seq}..#{logged[-1].seq})" if logged else ""
    print(f"Stored {len(logged)} reading(s){span} from {args.file} in session {sid}.")
    if rows:
        _print_readings(rows)
    return 0


def run_strike(args) -> int:
    with _open(args) as book:
        sid = _session(book, args.session)
        lr = book.strike_reading(sid, args.reading, args.reason)
    if args.json:
        emit_json({"session": sid, "reading": lr.to_json()})
    else:
        print(f"Reading {lr.seq} of session {sid} struck out ({lr.struck_reason}); it is kept "
              "in the logbook and no longer counts.")
    return 0


def run_diagnose(args) -> int:
    from ..diagnose import describe_fault
    from types import SimpleNamespace

    with _open(args) as book:
        sid = _session(book, args.session)
        d = book.store_diagnosis(sid, top=args.top)
        s = book.get_session(sid)
    if args.json:
        emit_json({"session": sid, "diagnosis": d.to_json()})
        return 0
    c = s.circuit()
    print(f"Session {sid} ({s.unit}): {d.reading_count} reading(s). Verdict: {d.verdict}. "
          f"Stored as diagnosis {d.id}.")
    rows = []
    for i, h in enumerate(d.document["hypotheses"], 1):
        what = " + ".join(describe_fault(c, SimpleNamespace(**f)) for f in h["faults"])
        rows.append([str(i), what or "healthy (no fault)", f"{h['probability'] * 100:5.1f} %"])
    table(["#", "hypothesis", "probability"], rows, aligns=[">", "<", ">"])
    for note in d.document.get("notes", []) + d.document.get("recheck", []):
        print(f"Note: {note}")
    suggestions = d.document.get("suggestions") or []
    if suggestions:
        print("Next readings worth taking (log each with the command shown, VALUE as displayed):")
        for g in suggestions[:3]:
            what = g.get("label") or g.get("why") or ""
            print(f"  - {what} (power {g.get('power', 'on')}): faultfind log add {sid} "
                  f"{compact_of(g)} VALUE")
            if g.get("why"):
                print(f"      {g['why']}")
    print(f"Details: faultfind log show {sid}; report: faultfind log report {sid} -o report.html")
    return 0


def run_close(args) -> int:
    if not args.fault and not args.no_fault:
        raise InputError("say what was found: --fault REF[:MODE] (repeat for more) or "
                         "--no-fault", key="--fault")
    if args.fault and args.no_fault:
        raise InputError("--fault and --no-fault together: give one", key="--no-fault")
    with _open(args) as book:
        sid = _session(book, args.session)
        s = book.close_session(sid, args.fault or [], confirmed_by=args.confirmed_by,
                               action=args.action, notes=args.notes)
    if args.json:
        emit_json({"session": s.to_json()})
    else:
        print(f"Session {sid} ({s.unit}) closed: {_outcome_text(s.outcome)}. It is kept as it "
              f"is now; export a work-order report with: faultfind log report {sid} -o "
              f"report-{sid}.html")
    return 0


def run_show(args) -> int:
    with _open(args) as book:
        s = book.get_session(_session(book, args.session))
    rows = assess_session(s)
    if args.json:
        doc = s.to_json()
        doc["readings"] = [_assessed_json(a) for a in rows]
        emit_json({"session": doc})
        return 0
    ack = format_time(s.caution_acknowledged_at) if s.caution_acknowledged_at else \
        "NOT RECORDED"
    print(f"Session {s.id}: {s.unit} ({s.purpose})" + (f" at {s.location}" if s.location else ""))
    print(f"  technician {s.technician or '—'}; started {format_time(s.started_at)}; "
          + (f"closed {format_time(s.ended_at)}" if s.ended_at else "open"))
    print(f"  circuit {s.circuit_title or s.circuit_name} ({s.circuit_name}, "
          f"SHA-256 {s.circuit_sha256[:16]}...)")
    print(f"  safety caution acknowledged: {ack}")
    print()
    if rows:
        _print_readings(rows)
    else:
        print("No readings yet.")
    d = s.latest_diagnosis
    print()
    if d is None:
        print(f"No diagnosis stored (faultfind log diagnose {s.id}).")
    else:
        best = d.document["hypotheses"][0]
        what = ", ".join(f"{f['ref']} {f['mode']}" for f in best["faults"]) or "healthy"
        print(f"Latest diagnosis ({format_time(d.created_at)}, {d.reading_count} readings): "
              f"{d.verdict}; most probable {what} ({best['probability'] * 100:.0f} %)")
        if d.last_seq < max((r.seq for r in s.readings), default=0):
            print("  readings were added since: run faultfind log diagnose again")
    if s.outcome is not None:
        o = s.outcome
        print(f"Outcome: {_outcome_text(o)}" + (f"; confirmed by {o.confirmed_by}"
                                                if o.confirmed_by else "")
              + (f"; action: {o.action}" if o.action else ""))
        if o.notes:
            print(f"  notes: {o.notes}")
    return 0


def run_list(args) -> int:
    if _missing(args):
        sessions = []
    else:
        with _open(args) as book:
            sessions = book.list_sessions(unit=args.unit, technician=args.technician,
                                          since=args.since, until=args.until,
                                          open_only=args.open)
    if args.json:
        emit_json({"sessions": [s.to_json() for s in sessions]})
    elif not sessions:
        print("No sessions" + (" match." if any((args.unit, args.technician, args.since,
                                                  args.until, args.open)) else " yet."))
    else:
        table(["id", "started", "unit", "technician", "purpose", "readings", "verdict",
               "outcome"], _summary_rows(sessions), aligns=[">", "<", "<", "<", "<", ">", "<",
                                                             "<"])
    return 0


def run_history(args) -> int:
    sessions = []
    if not _missing(args):
        with _open(args) as book:
            sessions = book.history(args.unit)
    if args.json:
        emit_json({"unit": args.unit, "sessions": [s.to_json() for s in sessions]})
        return 0
    if not sessions:
        print(f"No sessions for unit {args.unit}.")
        return 0
    print(f"Unit {sessions[0].unit}: {len(sessions)} session(s)")
    previous = None
    for s in sessions:
        o = s.outcome
        print(f"- session {s.id}, {format_time(s.started_at)}, {s.purpose}, "
              f"{s.technician or 'technician not recorded'}: {s.reading_count} reading(s), "
              f"verdict {s.latest_verdict or '—'}, outcome: {_outcome_text(o)}")
        if o is not None and o.action:
            print(f"    action: {o.action}")
        if previous is not None and previous.circuit_sha256 != s.circuit_sha256:
            print("    the circuit file differs from the previous session's")
        previous = s
    return 0


def run_export(args) -> int:
    with _open(args) as book:
        sid = _session(book, args.session)
        s = book.get_session(sid)
        if args.output:
            n = book.export_readings(sid, args.output, include_struck=args.include_struck)
        elif not args.json:
            n = book.export_readings(sid, sys.stdout, include_struck=args.include_struck)
    if args.circuit:
        try:
            with open(args.circuit, "w", encoding="utf-8", newline="") as f:
                f.write(s.circuit_text)
        except OSError as exc:
            raise InputError(f"cannot write the circuit file: {exc.strerror or exc}",
                             file=args.circuit) from None
    if args.json:
        doc = {"session": sid, "circuit_file": args.circuit}
        if args.output:
            doc.update(readings_file=args.output, rows=n)
        else:
            doc["readings"] = [r.to_json() for r in s.readings
                               if args.include_struck or not r.struck]
        emit_json(doc)
    elif args.output:
        print(f"Wrote {n} reading(s) of session {sid} to {args.output}"
              + (f" and its circuit to {args.circuit}" if args.circuit else "") + ".",
              file=sys.stderr)
    return 0


def run_report(args) -> int:
    fmt = report_format(args.output, args.format)
    with _open(args) as book:
        s = book.get_session(_session(book, args.session))
    if args.output:
        write_report(s, args.output, fmt)
        if args.json:
            emit_json({"session": s.id, "format": fmt, "path": args.output})
        else:
            print(f"Wrote the {fmt} report of session {s.id} to {args.output}.")
        return 0
    from ..io.report import html_report, markdown_report
    text = (html_report if fmt == "html" else markdown_report)(s)
    if args.json:
        emit_json({"session": s.id, "format": fmt, "text": text})
    else:
        sys.stdout.write(text)
    return 0


def run_delete(args) -> int:
    with _open(args) as book:
        sid = _session(book, args.session)
        if not args.yes:
            s = book.get_session(sid)
            raise InputError(f"this deletes session {sid} (unit {s.unit}, "
                             f"{len(s.readings)} reading(s), technician "
                             f"{s.technician or 'not recorded'}) for good: run again with "
                             "--yes to delete it", key="--yes")
        s = book.delete_session(sid)
    if args.json:
        emit_json({"deleted": s.to_json()})
    else:
        print(f"Session {sid} (unit {s.unit}) deleted from {book.path}. Copies made earlier "
              "(backups, exported files and reports) are not touched.")
    return 0


def run_path(args) -> int:
    path = resolve_logbook_path(args.logbook)
    origin = ("--logbook" if args.logbook is not None else
              ENV_VAR if os.environ.get(ENV_VAR, "").strip() else "default")
    if args.json:
        emit_json({"logbook": str(path), "exists": path.exists(), "chosen_by": origin,
                   "default": str(default_logbook_path({}))})
    else:
        print(path)
        print(f"  ({'exists' if path.exists() else 'not created yet'}; chosen by {origin})",
              file=sys.stderr)
    return 0


def run_verify(args) -> int:
    with _open(args) as book:
        problems = book.check()
        version = book.schema_version
    if problems:
        raise LogbookError("SQLite's integrity check found problems: "
                           + "; ".join(problems[:10]) + ". Restore the logbook from a backup, "
                           "or move it aside and start a new one", file=book.path)
    if args.json:
        emit_json({"logbook": str(book.path), "ok": True, "schema_version": version})
    else:
        print(f"{book.path}: no problems found (schema version {version}).")
    return 0


# -- the parser ----------------------------------------------------------------------------


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
            "Vac OUT 1.02 | I H1 2.45mA | R F1 OL | R A,0V 4k61 | Rlifted K1 180.6) or with "
            "options. Bad input stores nothing. A display starting with '-' goes after '--': "
            "faultfind log add 3 -- I H1 -OL.", intermixed=True)
    session_arg(q)
    q.add_argument("reading", metavar="READING", nargs="*", help="KIND WHERE VALUE")
    for f, h in (("quantity", "voltage, current or resistance"), ("mode", "dc or ac"),
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
