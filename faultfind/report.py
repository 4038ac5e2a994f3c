"""Work-order reports of a logbook session, in Markdown and self-contained HTML.

A report holds what a supervisor, the customer or the next visit needs: the
circuit (title, file, SHA-256, parts), each reading against the band a
healthy unit reads in (from :func:`faultfind.expect.expect`, with the meter
the reading names), the findings of the latest stored diagnosis with their
probabilities, the outcome, and the safety note.

Every status is written in words and a symbol as well as a colour (colour is
never the only carrier of meaning).  The HTML report needs no network and no
script: inline CSS and an inline SVG chart (:func:`chart_svg`, from
faultfind/io/report.py with the other pieces that need no computing).
Every piece of user text is escaped.
"""

from __future__ import annotations

import html
import re
from datetime import datetime, timezone
from types import SimpleNamespace

from faultfind import __version__
from faultfind.errors import InputError
from faultfind.io.logbook import SAFETY_CAUTION, LoggedReading, Session, format_time
from faultfind.io.report import (FORMATS, STATUS, Assessed, _axis, chart_svg,
                                 describe_reading, report_format, write_report_text)
from faultfind.units import format_tolerance, format_value

__all__ = ["Assessed", "STATUS", "assess", "assess_session", "markdown_report", "html_report",
           "chart_svg", "write_report", "report_format", "describe_reading", "FORMATS"]


def _status(rd, e, meter) -> tuple[str, float]:
    from faultfind.engine.meter import spec_limit

    if e.expected is None or e.overrange:
        return ("in" if rd.overrange > 0 else "low"), 0.0
    if rd.overrange:
        return ("high" if rd.overrange > 0 else "low"), 0.0
    lo, hi = min(e.low, e.high), max(e.low, e.high)
    v = rd.value
    slack = float(spec_limit(meter, rd.quantity, rd.mode, v))
    if lo <= v <= hi:
        return "in", slack
    if lo - slack <= v <= hi + slack:
        return "edge", slack
    return ("high" if v > hi else "low"), slack


def assess(circuit, meters, logged) -> list[Assessed]:
    """Each logged reading against the healthy band.

    Parameters
    ----------
    circuit : Circuit
    meters : dict of str to MeterProfile
        With ``default`` (:func:`faultfind.io.meters_file.meters_with_default`).
    logged : sequence of LoggedReading

    Returns
    -------
    list of Assessed
        In the order of ``logged``.  A reading is ``in`` its band, at its
        ``edge`` (outside the parts' band by no more than the meter's
        accuracy limit), ``high`` or ``low`` (OL counts as high; a number
        where a healthy unit shows OL as low), or ``struck`` out.
    """
    from faultfind.expect import expect

    logged = list(logged)
    if not all(isinstance(x, LoggedReading) for x in logged):
        raise InputError("logged must be a sequence of LoggedReading", key="logged")
    results = expect(circuit, [x.reading for x in logged], meters) if logged else []
    out = []
    for lr, e in zip(logged, results):
        status, slack = _status(lr.reading, e, meters[lr.reading.meter or "default"])
        if lr.struck:
            status = "struck"
        out.append(Assessed(lr, e.expected, e.low, e.high, e.unit, e.power,
                            e.expected is None or e.overrange, slack, status))
    return out


def assess_session(session) -> list[Assessed]:
    """:func:`assess` of every reading of a logbook session (struck ones too)."""
    if not isinstance(session, Session):
        raise InputError("expected a logbook Session", key="session")
    return assess(session.circuit(), session.meters(), session.readings)


def _hypothesis_text(circuit, h) -> str:
    from faultfind.diagnose import describe_fault
    faults = [SimpleNamespace(**f) for f in h["faults"]]
    return " + ".join(describe_fault(circuit, f) for f in faults) or "healthy (no fault)"


def _outcome_lines(session, circuit) -> list[tuple[str, str]]:
    o = session.outcome
    if o is None:
        return [("Status", "open: no outcome recorded yet")]
    found = ", ".join(f"{r} {m}" if m else r for r, m in o.faults) or "no fault found"
    rows = [("Found", found)]
    for ref, _ in o.faults:
        if circuit.has_part(ref) and circuit.part(ref).label:
            rows.append((ref, circuit.part(ref).label))
    rows += [("Confirmed by", o.confirmed_by or "not recorded"),
             ("Action taken", o.action or "not recorded")]
    if o.notes:
        rows.append(("Notes", o.notes))
    rows.append(("Closed", format_time(o.recorded_at)))
    return rows


def _header_rows(session) -> list[tuple[str, str]]:
    return [
        ("Session", f"{session.id} ({session.purpose})"),
        ("Unit", session.unit),
        ("Location", session.location or "—"),
        ("Technician", session.technician or "—"),
        ("Started", format_time(session.started_at)),
        ("Closed", format_time(session.ended_at) if session.ended_at else "open"),
        ("Safety caution acknowledged",
         format_time(session.caution_acknowledged_at) if session.caution_acknowledged_at
         else "NOT RECORDED"),
    ] + [({"isolated": "Circuit isolated", "energized": "Circuit energized"}.get(e["kind"], "Note"),
          format_time(e["at"]) + (f" ({e['text']})" if e["text"] and e["kind"] == "note" else ""))
         for e in getattr(session, "events", ())]


def _diagnosis_parts(session, circuit):
    d = session.latest_diagnosis
    if d is None:
        return None
    doc = d.document
    last = max((r.seq for r in session.readings), default=0)
    later = [r for r in session.readings if r.seq > d.last_seq]
    struck_after = [r for r in session.readings
                    if r.struck and r.seq <= d.last_seq and r.struck_at > d.created_at]
    stale = []
    if later:
        stale.append(f"{len(later)} reading(s) were added after this diagnosis "
                     f"(up to #{last}); it does not include them")
    if struck_after:
        stale.append(f"{len(struck_after)} reading(s) it used were struck out afterwards")
    used = getattr(d, "circuit_sha256", None)
    if used and used != session.circuit_sha256:
        stale.append(f"it was made on circuit version {d.circuit_version or '?'} ({used[:8]}); "
                     f"the session's circuit changed since (now {session.circuit_sha256[:8]})")
    hyps = [(i + 1, _hypothesis_text(circuit, h), h["probability"])
            for i, h in enumerate(doc.get("hypotheses", []))]
    return SimpleNamespace(stored=d, doc=doc, stale=stale, hypotheses=hyps)


def _priors_text(doc) -> str | None:
    """``Fault priors learned from ...`` when the diagnosis used learned priors (docs/priors.md)."""
    pr = doc.get("priors") or {}
    if not pr or pr.get("source") == "handbook":
        return None
    return (f"Fault priors learned from {pr.get('source')} "
            f"({pr.get('outcomes', 0)} closed session(s)), not the handbook's")


def _next_readings(session, doc) -> list[str]:
    """The stored diagnosis' suggestions in words (only while the session is open)."""
    if not session.is_open:
        return []
    out = []
    for g in (doc.get("suggestions") or [])[:3]:
        rd = SimpleNamespace(**{k: g.get(k) for k in ("quantity", "mode", "plus", "minus",
                                                       "part", "setup", "frequency")})
        text = describe_reading(rd) + (f" ({g['label']})" if g.get("label") else "")
        text += f", power {g.get('power') or 'on'}"
        if g.get("why"):
            text += f": {g['why']}"
        out.append(text)
    return out


def _generated(generated_at) -> str:
    t = generated_at or datetime.now(timezone.utc).isoformat(timespec="seconds")
    return format_time(t)


# -- Markdown ------------------------------------------------------------------------------


def _md(text) -> str:
    """User text made inert in Markdown (and in the HTML a renderer makes of it)."""
    text = " ".join(str(text).split())
    text = html.escape(text, quote=False)
    for ch in "\\`*_[]|#":
        text = text.replace(ch, "\\" + ch)
    return text


def _code(text) -> str:
    """``text`` as a Markdown code span (shown literally, nothing to escape)."""
    text = " ".join(str(text).split())
    fence = "`" * (1 + max((len(m) for m in re.findall("`+", text)), default=0))
    pad = " " if text.startswith("`") or text.endswith("`") else ""
    return f"{fence}{pad}{text}{pad}{fence}"


def _gauge(a: Assessed, width=21) -> str:
    """A one-line picture: ``──══┃═●══──``; band ═, expected ┃, reading marker."""
    ax = _axis(a)
    if ax is None:
        return ""
    lo, hi = ax
    cells = ["─"] * width

    def pos(x):
        return min(width - 1, max(0, int(round((x - lo) / (hi - lo) * (width - 1)))))

    if a.low is not None:
        for i in range(pos(min(a.low, a.high)), pos(max(a.low, a.high)) + 1):
            cells[i] = "═"
        cells[pos(a.expected)] = "┃"
    rd = a.logged.reading
    mark = {"in": "●", "edge": "◆", "high": "▶", "low": "◀", "struck": "×"}[a.status]
    tail = ""
    if rd.overrange > 0:
        tail = mark + "OL"
    elif rd.overrange < 0:
        cells[0] = mark
    else:
        cells[pos(rd.value)] = mark
    if a.expected is None:
        tail += " (healthy: OL)"
    return "".join(cells) + tail


def markdown_report(session, *, generated_at=None) -> str:
    """The work-order report of a session as Markdown (GitHub-flavoured tables).

    Parameters
    ----------
    session : Session
        From :meth:`faultfind.io.logbook.Logbook.get_session`.
    generated_at : str, optional
        Time to print as the report's date (ISO 8601; default now).

    Returns
    -------
    str

    Raises
    ------
    InputError
        ``session`` is not a Session; the stored circuit no longer parses.
    """
    if not isinstance(session, Session):
        raise InputError("expected a logbook Session", key="session")
    circuit = session.circuit()
    rows = assess_session(session)
    out = [f"# Work order report: {_md(session.unit)}", ""]
    out += ["| | |", "|---|---|"]
    out += [f"| {k} | {_md(v)} |" for k, v in _header_rows(session)]
    out += ["", "## Circuit", "",
            f"**{_md(circuit.title or session.circuit_name)}**  ",
            f"File {_code(session.circuit_name)} as it was at the start of the session, "
            f"SHA-256 `{session.circuit_sha256}`.", "",
            "| ref | kind | nominal | tolerance | nodes | label |", "|---|---|---|---|---|---|"]
    for p in circuit.parts:
        nominal = "—" if p.value is None else format_value(p.value, p.info.unit or "")
        tol = "—" if p.kind == "opamp" else format_tolerance(p.tol_low, p.tol_high)
        out.append(f"| {_md(p.ref)} | {p.kind} | {nominal} | {tol} | "
                   f"{_md(', '.join(p.nodes))} | {_md(p.label)} |")
    out += ["", "## Readings against a healthy unit", ""]
    live = sum(1 for a in rows if a.status != "struck")
    out.append(f"{live} reading(s) count" + (f", {len(rows) - live} struck out"
                                              if len(rows) > live else "") + ". "
               "Healthy band: where about 95 % of healthy units read on the meter named, from "
               "the parts' tolerances. Status: ✓ in band, ≈ at the band's edge (within the "
               "meter's accuracy), ▲ above, ▼ below, ✗ struck out. Picture: ═ band, ┃ expected, "
               "● ◆ ▶ ◀ the reading.")
    out.append("")
    if rows:
        out += ["| # | time | reading | label | display | expected | healthy band | status "
                "| picture |", "|---:|---|---|---|---:|---:|---|---|---|"]
        for a in rows:
            lr = a.logged
            status = f"{a.symbol} {a.words}"
            if lr.struck:
                status += f": {_md(lr.struck_reason)}"
            out.append(f"| {lr.seq} | {format_time(lr.taken_at)} | {_md(describe_reading(lr.reading))} "
                       f"| {_md(lr.reading.label)} | {_md(a.shown())} | {a.expected_text()} | "
                       f"{a.band_text()} | {status} | {_code(_gauge(a))} |")
    else:
        out.append("No readings were logged.")
    out += ["", "## Findings", ""]
    dp = _diagnosis_parts(session, circuit)
    if dp is None:
        out.append(f"No diagnosis was stored (`faultfind log diagnose {session.id}` stores one).")
    else:
        d = dp.stored
        out.append(f"Verdict **{d.verdict}**, from {d.reading_count} reading(s), diagnosed "
                   f"{format_time(d.created_at)} by faultfind {_md(d.version)}.")
        for s in dp.stale:
            out.append(f"\n> Note: {s}.")
        if _priors_text(dp.doc):
            out.append(f"\n{_md(_priors_text(dp.doc))}.")
        out += ["", "| # | hypothesis | probability |", "|---:|---|---:|"]
        for i, text, p in dp.hypotheses:
            out.append(f"| {i} | {_md(text)} | {p * 100:.1f} % |")
        for ex in dp.doc.get("explanations", [])[:2]:
            i = ex["hypothesis"]
            if i < len(dp.hypotheses) and ex["lines"]:
                out += ["", f"Why {_md(dp.hypotheses[i][1])}:", ""]
                out += [f"- {_md(line)}" for line in ex["lines"]]
        for title, items in (("Parts these readings cannot tell apart",
                              [" / ".join(g) for g in dp.doc.get("ambiguity_groups", [])]),
                             ("Re-check", dp.doc.get("recheck", [])),
                             ("Notes", dp.doc.get("notes", [])),
                             ("Next readings worth taking", _next_readings(session, dp.doc))):
            if items:
                out += ["", f"{title}:", ""] + [f"- {_md(x)}" for x in items]
    out += ["", "## Outcome", "", "| | |", "|---|---|"]
    out += [f"| {k} | {_md(v)} |" for k, v in _outcome_lines(session, circuit)]
    out += ["", "## Safety", ""]
    ack = session.caution_acknowledged_at
    out.append(f"Caution acknowledged {format_time(ack)}." if ack else
               "**The safety caution was not acknowledged in this session.**")
    out += ["", "```text", SAFETY_CAUTION, "```", "",
            f"---\nReport generated {_generated(generated_at)} by faultfind {__version__} from "
            f"the logbook {_code(session.logbook)}. Times are local."]
    return "\n".join(out) + "\n"


# -- HTML ----------------------------------------------------------------------------------

_CSS = """
body { font-family: system-ui, sans-serif; color: #111; max-width: 960px; margin: 2em auto;
       padding: 0 1em; line-height: 1.4; }
h1 { font-size: 1.5em; border-bottom: 2px solid #111; padding-bottom: .2em; }
h2 { font-size: 1.15em; margin-top: 1.8em; border-bottom: 1px solid #bbb; }
table { border-collapse: collapse; margin: .5em 0; font-size: .92em; }
th, td { border: 1px solid #c8c8c8; padding: .25em .5em; text-align: left;
         vertical-align: top; }
th { background: #eef1f4; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.nowrap { white-space: nowrap; }
.meta th { width: 14em; }
.warn { background: #fff4e0; border-left: 4px solid #9a5b00; padding: .4em .7em; }
.struck td.what { text-decoration: line-through; }
.st-in { color: #1b7f3b; } .st-edge { color: #9a5b00; }
.st-high, .st-low { color: #b3261e; font-weight: bold; } .st-struck { color: #777; }
.bar { display: inline-block; height: .8em; background: #4a6985; vertical-align: middle; }
.verdict { font-weight: bold; padding: .1em .5em; border: 2px solid #111; }
pre.caution { white-space: pre-wrap; border: 2px solid #b3261e; padding: .6em; }
.chart { overflow-x: auto; }
footer { margin-top: 2em; font-size: .85em; color: #444; }
@media print { body { margin: 0; max-width: none; } .chart { overflow: visible; } }
"""


def _table(rows, cls="meta") -> str:
    e = html.escape
    body = "".join(f"<tr><th>{e(k)}</th><td>{e(v)}</td></tr>" for k, v in rows)
    return f'<table class="{cls}">{body}</table>'


def html_report(session, *, generated_at=None) -> str:
    """The work-order report of a session as one self-contained HTML page.

    Parameters
    ----------
    session : Session
    generated_at : str, optional
        As for :func:`markdown_report`.

    Returns
    -------
    str
        A complete HTML5 document: inline CSS, the :func:`chart_svg` chart,
        no scripts and no outside resources; every user text escaped.

    Raises
    ------
    InputError
        As for :func:`markdown_report`.
    """
    if not isinstance(session, Session):
        raise InputError("expected a logbook Session", key="session")
    e = html.escape
    circuit = session.circuit()
    rows = assess_session(session)
    title = f"Work order report: {session.unit}"
    out = ['<!DOCTYPE html>', '<html lang="en">', '<head>', '<meta charset="utf-8">',
           f'<title>{e(title)}</title>', f'<style>{_CSS}</style>', '</head>', '<body>',
           f'<h1>{e(title)}</h1>', _table(_header_rows(session))]
    if not session.caution_acknowledged_at:
        out.append('<p class="warn">⚠ The safety caution was not acknowledged in this '
                   'session.</p>')
    out += ['<h2>Circuit</h2>',
            f'<p><strong>{e(circuit.title or session.circuit_name)}</strong><br>'
            f'File <code>{e(session.circuit_name)}</code> as it was at the start of the session, '
            f'SHA-256 <code>{e(session.circuit_sha256)}</code>.</p>',
            '<table><tr><th>ref</th><th>kind</th><th>nominal</th><th>tolerance</th>'
            '<th>nodes</th><th>label</th></tr>']
    for p in circuit.parts:
        nominal = "—" if p.value is None else format_value(p.value, p.info.unit or "")
        tol = "—" if p.kind == "opamp" else format_tolerance(p.tol_low, p.tol_high)
        out.append(f'<tr><td>{e(p.ref)}</td><td>{e(p.kind)}</td><td class="num">{e(nominal)}'
                   f'</td><td class="num">{e(tol)}</td><td>{e(", ".join(p.nodes))}</td>'
                   f'<td>{e(p.label)}</td></tr>')
    out.append('</table>')
    out += ['<h2>Readings against a healthy unit</h2>',
            '<p>Healthy band: where about 95&nbsp;% of healthy units read on the meter named, '
            'from the parts\' tolerances. Each row has its own scale.</p>',
            f'<div class="chart">{chart_svg(rows)}</div>']
    if rows:
        out.append('<table><tr><th>#</th><th>time</th><th>reading</th><th>label</th>'
                   '<th>display</th><th>expected</th><th>healthy band</th><th>status</th></tr>')
        for a in rows:
            lr = a.logged
            status = f"{a.symbol} {a.words}" + (f": {lr.struck_reason}" if lr.struck else "")
            cls = ' class="struck"' if lr.struck else ""
            out.append(f'<tr{cls}><td class="num">{lr.seq}</td>'
                       f'<td class="nowrap">{e(format_time(lr.taken_at))}</td>'
                       f'<td class="what">{e(describe_reading(lr.reading))}</td>'
                       f'<td>{e(lr.reading.label)}</td><td class="num">{e(a.shown())}</td>'
                       f'<td class="num">{e(a.expected_text())}</td>'
                       f'<td class="nowrap">{e(a.band_text())}</td>'
                       f'<td class="st-{a.status}">{e(status)}</td></tr>')
        out.append('</table>')
    out.append('<h2>Findings</h2>')
    dp = _diagnosis_parts(session, circuit)
    if dp is None:
        out.append(f'<p>No diagnosis was stored (<code>faultfind log diagnose {session.id}'
                   '</code> stores one).</p>')
    else:
        d = dp.stored
        out.append(f'<p>Verdict <span class="verdict">{e(d.verdict)}</span>, from '
                   f'{d.reading_count} reading(s), diagnosed {e(format_time(d.created_at))} by '
                   f'faultfind {e(d.version)}.</p>')
        out += [f'<p class="warn">Note: {e(s)}.</p>' for s in dp.stale]
        if _priors_text(dp.doc):
            out.append(f'<p>{e(_priors_text(dp.doc))}.</p>')
        out.append('<table><tr><th>#</th><th>hypothesis</th><th>probability</th></tr>')
        for i, text, p in dp.hypotheses:
            out.append(f'<tr><td class="num">{i}</td><td>{e(text)}</td><td>'
                       f'<span class="bar" style="width:{max(p * 12, 0.05):.2f}em"></span> '
                       f'{p * 100:.1f}&nbsp;%</td></tr>')
        out.append('</table>')
        for ex in dp.doc.get("explanations", [])[:2]:
            i = ex["hypothesis"]
            if i < len(dp.hypotheses) and ex["lines"]:
                out.append(f'<p>Why {e(dp.hypotheses[i][1])}:</p><ul>'
                           + "".join(f"<li>{e(x)}</li>" for x in ex["lines"]) + '</ul>')
        for head, items in (("Parts these readings cannot tell apart",
                             [" / ".join(g) for g in dp.doc.get("ambiguity_groups", [])]),
                            ("Re-check", dp.doc.get("recheck", [])),
                            ("Notes", dp.doc.get("notes", [])),
                            ("Next readings worth taking", _next_readings(session, dp.doc))):
            if items:
                out.append(f'<p>{e(head)}:</p><ul>'
                           + "".join(f"<li>{e(x)}</li>" for x in items) + '</ul>')
    out += ['<h2>Outcome</h2>', _table(_outcome_lines(session, circuit)), '<h2>Safety</h2>']
    ack = session.caution_acknowledged_at
    out.append(f'<p>Caution acknowledged {e(format_time(ack))}.</p>' if ack else
               '<p class="warn">⚠ The safety caution was not acknowledged in this session.</p>')
    out += [f'<pre class="caution">{e(SAFETY_CAUTION)}</pre>',
            f'<footer>Report generated {e(_generated(generated_at))} by faultfind '
            f'{e(__version__)} from the logbook <code>{e(session.logbook)}</code>. Times are '
            'local.</footer>', '</body>', '</html>']
    return "\n".join(out) + "\n"


def write_report(session, path, fmt=None, *, generated_at=None) -> str:
    """Write a session's report to a file.

    Parameters
    ----------
    session : Session
    path : str or os.PathLike
    fmt : {"markdown", "html"}, optional
        Default: from the suffix (``.md``, ``.html``).

    Returns
    -------
    str
        The format written.

    Raises
    ------
    InputError
        Unknown format, or the file cannot be written (naming it).
    """
    fmt = report_format(path, fmt)
    text = (html_report if fmt == "html" else markdown_report)(session, generated_at=generated_at)
    write_report_text(text, path)
    return fmt
