"""``faultfind log`` subcommands that read the logbook back and look after the file.

show, list, history, export, report; delete, path, verify.
"""

from __future__ import annotations

import os
import sys

from ...errors import InputError, LogbookError
from ...logbook import ENV_VAR, default_logbook_path, format_time, resolve_logbook_path
from ...report import assess_session, report_format, write_report
from ...io.session_tags import check_tag, tags_by_session, tags_of
from ..output import emit_json, table
from .common import (_open, _session, _missing, _assessed_json, _print_readings, _outcome_text,
                     _summary_rows)


def run_show(args) -> int:
    with _open(args) as book:
        s = book.get_session(_session(book, args.session))
        tags = tags_of(book, s.id)
    rows = assess_session(s)
    if args.json:
        doc = s.to_json()
        doc["tags"] = tags
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
    if tags:
        print(f"  tags: {', '.join(tags)}")
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
        if d.circuit_sha256:
            changed = d.circuit_sha256 != s.circuit_sha256
            print(f"  made on circuit version {d.circuit_version or '?'} "
                  f"({d.circuit_sha256[:8]})" + ("; the circuit changed since: run faultfind "
                                                 "log diagnose again" if changed else ""))
    if s.outcome is not None:
        o = s.outcome
        print(f"Outcome: {_outcome_text(o)}" + (f"; confirmed by {o.confirmed_by}"
                                                if o.confirmed_by else "")
              + (f"; action: {o.action}" if o.action else ""))
        if o.notes:
            print(f"  notes: {o.notes}")
    return 0


def run_list(args) -> int:
    want = check_tag(args.tag).lower() if args.tag is not None else None
    sessions, tags = [], {}
    if not _missing(args):
        with _open(args) as book:
            sessions = book.list_sessions(unit=args.unit, technician=args.technician,
                                          since=args.since, until=args.until,
                                          open_only=args.open)
            tags = tags_by_session(book)
    if want is not None:
        sessions = [s for s in sessions if want in (t.lower() for t in tags.get(s.id, ()))]
    if args.json:
        emit_json({"sessions": [dict(s.to_json(), tags=tags.get(s.id, [])) for s in sessions]})
    elif not sessions:
        print("No sessions" + (" match." if any((args.unit, args.technician, args.since,
                                                  args.until, args.open, want)) else " yet."))
    else:
        rows = [r + [", ".join(tags.get(s.id, ())) or "—"]
                for r, s in zip(_summary_rows(sessions), sessions)]
        table(["id", "started", "unit", "technician", "purpose", "readings", "verdict",
               "outcome", "tags"], rows, aligns=[">", "<", "<", "<", "<", ">", "<", "<", "<"])
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
    from ...report import html_report, markdown_report
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
