"""The CSV table of a readings file: its header and rows, as text.

:func:`read_table` splits the text into cells with the :mod:`csv` module
(RFC 4180 quoting; LF, CRLF or CR line ends) and checks the header: the
problems of the file as a whole, each a
:class:`~faultfind.errors.ReadingsError` naming the file and line.  The rows'
meaning is checked by :mod:`faultfind.io.readings_file`, which also holds the
user's guide pointer (docs/readings-files.md).
"""

from __future__ import annotations

import csv
import difflib
import io
import re

from faultfind.errors import ReadingsError
from faultfind.model import QUANTITIES

__all__ = ["COLUMNS", "read_table", "check_header", "show", "cut", "did_you_mean"]

#: Columns a readings file may have, in the order faultfind writes them.
COLUMNS = ("quantity", "mode", "plus", "minus", "part", "setup", "value", "frequency", "meter",
           "label")

#: Messages quote a cell up to this many characters; a longer one is cut.
SHOW_AT_MOST = 60
#: "Did you mean" guesses only for words and lists up to these sizes (difflib's
#: cost grows with the square of the word's length).
CLOSE_WORD_AT_MOST = 40
CLOSE_CHOICES_AT_MOST = 2000

_HEADER_EXAMPLE = "quantity,mode,plus,minus,part,setup,value,label"
# The two halves of an unquoted value with a decimal comma ("11,91 V").
_INTEGER = re.compile(r"^[+\-−]?\d+$")
_FRACTION = re.compile(r"^\d+(?:\s*[^\d\s,]\S*)?$")


def read_table(text: str, source: str):
    """Header names and ``(line, {column: cell}, extra cells)`` per non-blank row."""
    if not text.strip():
        raise ReadingsError(f"the file is empty: a readings file starts with a header line "
                            f"such as '{_HEADER_EXAMPLE}'", file=source, line=1)
    # Universal newlines: CRLF (Windows) and a lone CR (old Mac) end a line as LF does.
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    reader = csv.reader(io.StringIO(text))
    records, lines, line = [], [], 1
    try:
        for record in reader:
            lines.append(line)
            records.append(record)
            line = reader.line_num + 1
    except csv.Error as exc:
        quote = _unclosed_quote_line(text)
        if quote is not None and quote <= reader.line_num:
            raise ReadingsError('a quote (") opened on this line is never closed',
                                file=source, line=quote) from None
        if "field limit" in str(exc):
            what = (f"a cell longer than {csv.field_size_limit():,} characters: this is not "
                    "a readings file, or a quote opened early is never closed")
        elif "NUL" in str(exc):
            what = ("a NUL byte (binary data): this is not a readings file; save the "
                    "readings as 'CSV UTF-8'")
        else:
            what = f"not a readable CSV line ({exc})"
        raise ReadingsError(what, file=source, line=max(line, reader.line_num)) from None
    quote = _unclosed_quote_line(text)
    if quote is not None:  # the csv module reads an unclosed quote to the end of the file
        raise ReadingsError('a quote (") opened on this line is never closed',
                            file=source, line=quote)
    stripped = [[cell.strip() for cell in record] for record in records]
    body = [(ln, r) for ln, r in zip(lines, stripped) if any(r)]
    if not body:
        raise ReadingsError("the file has no header line", file=source, line=1)
    (header_line, header), body = body[0], body[1:]
    names = check_header(header, header_line, source)
    rows = []
    at = names.index("value") if "value" in names else None
    for ln, record in body:
        cells = {n: c for n, c in zip(names, record) if n is not None}
        extra = [c for n, c in zip(names, record) if n is None and c]
        extra += [c for c in record[len(names):] if c]
        split = None
        if at is not None and len(record) > len(header) and at + 1 < len(record):
            # A value written with a decimal comma and not quoted splits in two
            # and pushes every later cell one column on: 11,91 -> '11' | '91'.
            # (Wider than the header line itself: a spreadsheet's trailing
            # empty columns are as wide in the header as in the rows.)
            whole, fraction = record[at], record[at + 1]
            if _INTEGER.match(whole) and _FRACTION.match(fraction):
                split = (whole, fraction)
        rows.append((ln, cells, extra, split))
    return names, rows


def check_header(header, line, source):
    """Column names (lower case; None for an unnamed column), or ReadingsError."""
    while header and not header[-1]:
        header = header[:-1]
    if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
        sep = "semicolons" if ";" in header[0] else "tabs"
        raise ReadingsError(f"the header is one column {show(header[0])}: the fields seem "
                            f"separated by {sep}; faultfind reads comma-separated files with "
                            "a decimal point: save it as CSV with commas (a spreadsheet set to "
                            "a language that writes decimal commas saves semicolons)",
                            file=source, line=line)
    names = [h.lower() or None for h in header]
    if "quantity" not in names and any(n in QUANTITIES for n in names):
        raise ReadingsError(f"no header: the first line must name the columns, e.g. "
                            f"'{_HEADER_EXAMPLE}'; this line looks like a reading",
                            file=source, line=line)
    unknown = [h for h, n in zip(header, names) if n is not None and n not in COLUMNS]
    if unknown:
        what = "; ".join(f"{show(h)}{did_you_mean(h.lower(), COLUMNS)}" for h in unknown)
        raise ReadingsError(f"unknown column{'s' if len(unknown) > 1 else ''} {what}: the "
                            f"columns are {', '.join(COLUMNS)}", file=source, line=line,
                            key=cut(unknown[0]))
    repeated = sorted({n for n in names if n is not None and names.count(n) > 1})
    if repeated:
        raise ReadingsError(f"column {show(repeated[0])} appears more than once in the header",
                            file=source, line=line, key=cut(repeated[0]))
    if "quantity" not in names:
        raise ReadingsError("the header has no 'quantity' column (it is required); the "
                            f"columns are {', '.join(COLUMNS)}", file=source, line=line,
                            key="quantity")
    return names


def _unclosed_quote_line(text: str) -> int | None:
    """Line on which a quoted field opens and never closes (RFC 4180 quoting), else None."""
    if '"' not in text:
        return None
    quoted, opened, line, at_start, i = False, None, 1, True, 0
    while i < len(text):
        ch = text[i]
        if quoted and ch == '"':
            if text[i + 1:i + 2] == '"':  # a doubled quote inside the field
                i += 1
            else:
                quoted = False
        elif not quoted and ch == '"' and at_start:
            quoted, opened = True, line
        if ch == "\n":
            line += 1
        if not quoted:
            at_start = ch in ",\n\r" or (at_start and ch in " \t")
        i += 1
    return opened if quoted else None


def cut(text, limit=SHOW_AT_MOST) -> str:
    """``text`` itself, or its start and ``...`` when longer than ``limit``."""
    return text if len(text) <= limit else text[:limit - 3] + "..."


def show(text, limit=SHOW_AT_MOST) -> str:
    """``repr(text)``, cut to about ``limit`` characters for a message."""
    shown = repr(text)
    if len(shown) <= limit:
        return shown
    return f"{shown[:limit - 4]}...' ({len(text):,} characters)"


def did_you_mean(word, choices) -> str:
    choices = list(choices)
    if len(word) > CLOSE_WORD_AT_MOST or len(choices) > CLOSE_CHOICES_AT_MOST:
        return ""  # difflib is quadratic in the word's length: no guess for junk
    close = difflib.get_close_matches(word, choices, n=1)
    return f" (did you mean {show(close[0])}?)" if close else ""
