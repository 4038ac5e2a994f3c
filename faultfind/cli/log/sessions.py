"""``faultfind log`` subcommands that do a session's work.

start, caution, add, import, strike, diagnose, close.
"""

from __future__ import annotations

import sys

from ...errors import FaultfindError, InputError
from ...logbook import SAFETY_CAUTION, format_time
from ...report import assess, describe_reading
from ..output import emit_json, table
from ..priors_args import priors_from_args, priors_line
from .common import (_open, _session, _assessed_json, _status_line, _print_readings, _outcome_text,
                     _print_caution)
from .compact import _FIELD_OPTIONS, _ACK_HINT, parse_compact, compact_of


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
    from ...diagnose import describe_fault
    from types import SimpleNamespace

    priors = priors_from_args(args)
    with _open(args) as book:
        sid = _session(book, args.session)
        d = book.store_diagnosis(sid, top=args.top, priors=priors)
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
    print(priors_line(priors))
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
