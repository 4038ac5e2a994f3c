"""What the ``faultfind log`` subcommands share: the logbook, a session's number, printing."""

from __future__ import annotations

import sys

from ...errors import LogbookError
from ...logbook import SAFETY_CAUTION, Logbook, format_time, resolve_logbook_path
from ...report import describe_reading
from ..output import table


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
        why = ("a reversed or open junction, or above the display's top"
               if a.logged.reading.quantity == "diode-test"
               else "no path")
        healthy = f"a healthy unit reads OL here ({why})"
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
