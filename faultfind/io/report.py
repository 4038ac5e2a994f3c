"""The pieces of a work-order report that need no computing, and the file writer.

The statuses with their symbols, words and colours, a reading in words, the
SVG chart of readings against their bands (drawn from :class:`Assessed`
rows), the formats and writing a report's text to a file.  Making a report
-- the healthy bands from :func:`faultfind.expect.expect`, the findings in
words -- is the library's: :mod:`faultfind.report`.

Every status is written in words and a symbol as well as a colour (colour is
never the only carrier of meaning).  The chart needs no network and no
script: the healthy band as a bar, the expected value as a tick and the
reading as a marker whose shape tells in band / at the edge / above / below.
Every piece of user text is escaped.
"""

from __future__ import annotations

import html
import os
from dataclasses import dataclass

from faultfind.errors import InputError
from faultfind.io.logbook import LoggedReading
from faultfind.units import format_value

__all__ = ["Assessed", "STATUS", "FORMATS", "chart_svg", "describe_reading", "report_format",
           "write_report_text"]

#: status -> (symbol, words, colour).  Colours are chosen to differ in
#: lightness too, so they survive grey-scale printing.
STATUS = {
    "in": ("✓", "in band", "#1b7f3b"),
    "edge": ("≈", "at band edge (within meter accuracy)", "#9a5b00"),
    "high": ("▲", "above band", "#b3261e"),
    "low": ("▼", "below band", "#b3261e"),
    "struck": ("✗", "struck out", "#777777"),
}

#: Report formats and their file suffixes.
FORMATS = {"markdown": (".md", ".markdown"), "html": (".html", ".htm")}


@dataclass(frozen=True)
class Assessed:
    """One logged reading against what a healthy unit reads.

    Attributes
    ----------
    logged : LoggedReading
    expected, low, high : float or None
        Healthy expected display and ~95 % band (None: a healthy unit reads
        OL here, no path between the probes).
    unit : str
    power : str
        "on" or "off" (isolated).
    healthy_ol : bool
        A healthy unit's meter shows OL here.
    slack : float
        The meter's accuracy limit at the reading (0 for OL), which widens
        the band for the ``edge`` status.
    status : str
        A key of :data:`STATUS`.
    """

    logged: LoggedReading
    expected: float | None
    low: float | None
    high: float | None
    unit: str
    power: str
    healthy_ol: bool
    slack: float
    status: str

    @property
    def symbol(self) -> str:
        return STATUS[self.status][0]

    @property
    def words(self) -> str:
        return STATUS[self.status][1]

    def shown(self) -> str:
        """The display as entered (``OL``, ``23.91 V``)."""
        return self.logged.reading.raw or ("OL" if self.logged.reading.overrange else "—")

    def expected_text(self) -> str:
        return "OL" if self.expected is None else _v(self.expected, self.unit, 4)

    def band_text(self) -> str:
        if self.expected is None:
            return "OL (no path)"
        return f"{_v(self.low, self.unit)} .. {_v(self.high, self.unit)}"


def _v(x, unit, digits=3) -> str:
    if x is None:
        return "—"
    if unit != "Ω" and x != 0 and abs(x) < 1e-10:
        x = 0.0
    return format_value(x, unit, digits=digits)


def describe_reading(rd) -> str:
    """``V dc TP1 to 0V``, ``I ac R3 @ 1 kHz``, ``R F1``, ``R K1 lifted``, ``D D3 (diode test)``."""
    if rd.quantity == "diode-test":
        where = rd.part if rd.part is not None else f"{rd.plus} to {rd.minus}"
        return f"D {where} (diode test)"
    if rd.quantity == "resistance":
        where = rd.part if rd.part is not None else f"{rd.plus} to {rd.minus}"
        return f"R {where}" + (" lifted" if rd.setup == "lifted" else "")
    sym = "V" if rd.quantity == "voltage" else "I"
    where = rd.part if rd.quantity == "current" else f"{rd.plus} to {rd.minus}"
    freq = f" @ {format_value(rd.frequency, 'Hz')}" if rd.frequency is not None else ""
    return f"{sym} {rd.mode} {where}{freq}"


# -- the SVG chart -------------------------------------------------------------------------


def _axis(a: Assessed):
    """(lo, hi) of the row's own scale, or None when there is nothing to place."""
    rd = a.logged.reading
    xs = [x for x in (a.low, a.high, a.expected) if x is not None]
    if rd.value is not None and not rd.overrange:
        xs.append(rd.value)
    if not xs:
        return None
    lo, hi = min(xs), max(xs)
    span = hi - lo
    if span <= 0:
        span = max(abs(lo) * 0.2, a.slack * 4, 1e-12)
    pad = 0.08 * span
    return lo - pad, hi + pad


_W, _LEFT, _X0, _X1, _ROW, _TOP = 900, 8, 330, 620, 36, 58


def _marker(status, x, y, colour) -> str:
    s = 7
    if status == "in":
        return f'<circle cx="{x:.1f}" cy="{y}" r="{s - 1}" fill="{colour}"/>'
    if status == "edge":
        return (f'<polygon points="{x:.1f},{y - s} {x + s:.1f},{y} {x:.1f},{y + s} '
                f'{x - s:.1f},{y}" fill="{colour}"/>')
    if status == "high":
        return (f'<polygon points="{x - s:.1f},{y - s} {x + s:.1f},{y} {x - s:.1f},{y + s}" '
                f'fill="{colour}"/>')
    if status == "low":
        return (f'<polygon points="{x + s:.1f},{y - s} {x - s:.1f},{y} {x + s:.1f},{y + s}" '
                f'fill="{colour}"/>')
    return (f'<path d="M{x - 5:.1f},{y - 5} L{x + 5:.1f},{y + 5} M{x - 5:.1f},{y + 5} '
            f'L{x + 5:.1f},{y - 5}" stroke="{colour}" stroke-width="2"/>')


def _clip(text, n) -> str:
    return text if len(text) <= n else text[:n - 1] + "…"


def chart_svg(rows) -> str:
    """An SVG chart of readings against their healthy bands, one row per reading.

    Parameters
    ----------
    rows : sequence of Assessed

    Returns
    -------
    str
        An ``<svg>`` element (``role="img"``, with a title and a text
        description) to put inline in HTML.  Each row has its own scale, its
        ends written under the bar; the healthy band is a grey bar, the
        expected value a black tick, the reading a marker: ● in band, ◆ at
        the edge, ▶ above, ◀ below, × struck out, in colour too; an OL
        reading sits past the right end, labelled OL.  The status is also
        written in words at the right.
    """
    rows = list(rows)
    h = _TOP + _ROW * max(1, len(rows)) + 12
    e = html.escape
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" role="img" aria-labelledby="chart-title '
           f'chart-desc" width="100%" viewBox="0 0 {_W} {h}" style="max-width:{_W}px" '
           'font-family="system-ui, sans-serif" font-size="12">',
           '<title id="chart-title">Readings against the healthy bands</title>',
           f'<desc id="chart-desc">{e(_chart_desc(rows))}</desc>',
           f'<rect x="{_X0}" y="10" width="36" height="10" fill="#c9d3dc"/>',
           f'<text x="{_X0 + 42}" y="19">healthy band</text>',
           f'<line x1="{_X0 + 140}" y1="8" x2="{_X0 + 140}" y2="22" stroke="#111" '
           'stroke-width="2"/>',
           f'<text x="{_X0 + 146}" y="19">expected</text>']
    x = _LEFT
    for status in ("in", "edge", "high", "low", "struck"):
        sym, words, colour = STATUS[status]
        out.append(_marker(status, x + 8, 40, colour))
        label = words.split(" (")[0]
        out.append(f'<text x="{x + 20}" y="44">{e(label)}</text>')
        x += 30 + 7 * len(label)
    if not rows:
        out.append(f'<text x="{_LEFT}" y="{_TOP + 20}">No readings.</text>')
    for k, a in enumerate(rows):
        y = _TOP + _ROW * k + 14
        lr, rd = a.logged, a.logged.reading
        sym, words, colour = STATUS[a.status]
        name = f"{lr.seq}. {describe_reading(rd)}" + (f" {rd.label}" if rd.label else "")
        tip = (f"{name}: reads {a.shown()}, expected {a.expected_text()}, band "
               f"{a.band_text()}: {words}")
        out.append(f'<g><title>{e(tip)}</title>')
        if k % 2:
            out.append(f'<rect x="0" y="{y - 14}" width="{_W}" height="{_ROW}" fill="#f4f6f8"/>')
        deco = ' text-decoration="line-through"' if lr.struck else ""
        out.append(f'<text x="{_LEFT}" y="{y + 4}"{deco}>{e(_clip(name, 46))}</text>')
        ax = _axis(a)
        out.append(f'<line x1="{_X0}" y1="{y}" x2="{_X1}" y2="{y}" stroke="#9aa5b1"/>')
        if ax is not None:
            lo, hi = ax

            def px(v):
                return _X0 + (v - lo) / (hi - lo) * (_X1 - _X0)

            if a.low is not None:
                b0, b1 = px(min(a.low, a.high)), px(max(a.low, a.high))
                out.append(f'<rect x="{b0:.1f}" y="{y - 5}" width="{max(b1 - b0, 2):.1f}" '
                           'height="10" fill="#c9d3dc"/>')
                xe = px(a.expected)
                out.append(f'<line x1="{xe:.1f}" y1="{y - 8}" x2="{xe:.1f}" y2="{y + 8}" '
                           'stroke="#111" stroke-width="2"/>')
            out.append(f'<text x="{_X0}" y="{y + 19}" font-size="9" fill="#555">'
                       f'{e(_v(lo, a.unit))}</text>')
            out.append(f'<text x="{_X1}" y="{y + 19}" font-size="9" fill="#555" '
                       f'text-anchor="end">{e(_v(hi, a.unit))}</text>')
            if rd.overrange > 0:
                out.append(_marker(a.status, _X1 + 12, y, colour))
                out.append(f'<text x="{_X1 + 22}" y="{y + 4}" font-weight="bold">OL</text>')
            elif rd.overrange < 0:
                out.append(_marker(a.status, _X0 - 12, y, colour))
            else:
                out.append(_marker(a.status, px(rd.value), y, colour))
        if a.expected is None:
            out.append(f'<text x="{(_X0 + _X1) / 2:.0f}" y="{y - 8}" font-size="10" '
                       'text-anchor="middle" fill="#555">healthy unit reads OL (no path)</text>')
        out.append(f'<text x="{_X1 + 48}" y="{y + 4}">{e(_clip(a.shown(), 14))}</text>')
        out.append(f'<text x="{_X1 + 150}" y="{y + 4}" fill="{colour}" font-weight="bold">'
                   f'{e(sym)} {e(words.split(" (")[0])}</text>')
        out.append('</g>')
    out.append('</svg>')
    return "\n".join(out)


def _chart_desc(rows) -> str:
    if not rows:
        return "No readings."
    counts = {}
    for a in rows:
        counts[a.status] = counts.get(a.status, 0) + 1
    return f"{len(rows)} readings: " + ", ".join(
        f"{n} {STATUS[s][1].split(' (')[0]}" for s, n in counts.items())


def report_format(path=None, fmt=None) -> str:
    """The format to write: ``fmt`` when given, else from ``path``'s suffix, else Markdown.

    Raises
    ------
    InputError
        An unknown format, or a suffix that names none while ``fmt`` is None.
    """
    if fmt is not None:
        if fmt not in FORMATS:
            raise InputError(f"unknown report format {fmt!r}: markdown or html", key="format")
        return fmt
    if path is None:
        return "markdown"
    suffix = os.path.splitext(os.fspath(path))[1].lower()
    for name, suffixes in FORMATS.items():
        if suffix in suffixes:
            return name
    raise InputError("cannot tell the report format from the file name: end it in .md or "
                     ".html, or give --format", file=os.fspath(path))


def write_report_text(text, path) -> None:
    """Write a report's text to a file (UTF-8, ``\\n`` line ends).

    Raises
    ------
    InputError
        The file cannot be written (naming it).
    """
    try:
        with open(path, "w", encoding="utf-8", newline="\n") as f:
            f.write(text)
    except OSError as exc:
        raise InputError(f"cannot write the report: {exc.strerror or exc}",
                         file=os.fspath(path)) from None
