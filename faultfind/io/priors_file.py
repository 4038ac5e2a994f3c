"""Outcome-counts files: learned fault priors carried between logbooks.

A plain CSV file of counts (docs/priors.md is the format's guide)::

    # faultfind outcome counts; merge files by adding the counts of equal rows
    record,kind,mode,parts,count
    format,,,,1
    sessions,,,,212
    no-fault,,,,31
    fault,fuse,open,,120
    fault,fuse,,,2
    mix,,,capacitor:3 fuse:1 resistor:9 switch:2 voltage-source:1,130

``format`` (count = the format's version, 1), ``sessions`` (closed repair
sessions counted), ``no-fault`` (of them, no fault found), ``fault`` (parts of
a kind found faulty in a mode; mode empty when not known), ``mix`` (faulty
parts found on circuits with that mix of parts that can fail: ``kind:number``
separated by spaces).  Lines starting with ``#`` and blank lines are comments.
Rows with the same record, kind, mode and parts add up, so two files merge by
concatenating their rows (:func:`merge_counts`); the file holds no session,
unit or person, only counts.
"""

from __future__ import annotations

import csv
import io
import os
import re

from faultfind.engine.prior_update import OutcomeCounts, mix_key
from faultfind.errors import PriorsError
from faultfind.io.textfile import read_text
from faultfind.model import KINDS, fault_mode_name

__all__ = ["read_counts", "parse_counts", "write_counts", "counts_text", "merge_counts",
           "COLUMNS", "FORMAT"]

#: Columns of an outcome-counts file, in the order written.
COLUMNS = ("record", "kind", "mode", "parts", "count")
#: The format version written and read.
FORMAT = 1
_RECORDS = ("format", "sessions", "no-fault", "fault", "mix")
_COUNT = re.compile(r"[0-9]+$")
_FAULT_KINDS = tuple(k for k, info in KINDS.items() if info.fault_modes)


def _fail(source, line, message, key=None):
    raise PriorsError(message, file=source, line=line, key=key)


def _parts(text, source, line) -> tuple:
    mix = {}
    for item in text.split():
        kind, sep, n = item.partition(":")
        if not sep or not _COUNT.match(n):
            _fail(source, line, f"parts: {item!r} is not KIND:NUMBER (e.g. fuse:2)", "parts")
        if kind not in KINDS:
            _fail(source, line, f"parts: unknown kind {kind!r}", "parts")
        if kind not in _FAULT_KINDS:
            _fail(source, line, f"parts: a {kind} cannot fail in faultfind's model, leave it out",
                  "parts")
        if kind in mix:
            _fail(source, line, f"parts: {kind} named twice", "parts")
        if int(n) < 1:
            _fail(source, line, f"parts: {item!r}: the number must be at least 1", "parts")
        mix[kind] = int(n)
    if not mix:
        _fail(source, line, "a mix row needs its parts (e.g. 'fuse:1 resistor:4')", "parts")
    return mix_key(mix)


def parse_counts(text: str, source="<counts>") -> OutcomeCounts:
    """An :class:`~faultfind.engine.prior_update.OutcomeCounts` from a file's text.

    Parameters
    ----------
    text : str
    source : str
        The file's name, for messages.

    Raises
    ------
    PriorsError
        Naming the file and line: no header, a column missing or unknown, an
        unknown record, a count that is not a whole number >= 0, a kind or
        mode faultfind does not know, a field a record must leave empty, a
        format other than 1, totals that do not agree (more no-fault sessions
        than sessions, fault rows not matching the mix rows).
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be str, not {type(text).__name__}")
    header, cols = None, None
    sessions = no_fault = 0
    faults, mixes = {}, {}
    formats, first = [], {}
    for no, raw in enumerate(text.splitlines(), 1):
        if not raw.strip() or raw.lstrip().startswith("#"):
            continue
        try:
            fields = next(csv.reader([raw]))
        except csv.Error as exc:
            _fail(source, no, f"not a CSV row ({exc})")
        fields = [f.strip() for f in fields]
        if header is None:
            names = [f.lower() for f in fields]
            unknown = [f for f in names if f not in COLUMNS]
            if unknown:
                _fail(source, no, f"unknown column {unknown[0]!r}: the header is "
                      f"{','.join(COLUMNS)}", unknown[0])
            missing = [c for c in COLUMNS if c not in names]
            if missing:
                _fail(source, no, f"column {missing[0]!r} missing: the header is "
                      f"{','.join(COLUMNS)}", missing[0])
            if len(set(names)) != len(names):
                _fail(source, no, "a column named twice in the header")
            header, cols = no, {c: names.index(c) for c in COLUMNS}
            continue
        if len(fields) != len(cols):
            _fail(source, no, f"{len(fields)} fields where the header has {len(cols)}")
        row = {c: fields[i] for c, i in cols.items()}
        rec = row["record"].lower()
        if rec not in _RECORDS:
            _fail(source, no, f"unknown record {row['record']!r}: one of {', '.join(_RECORDS)}",
                  "record")
        if not _COUNT.match(row["count"]):
            _fail(source, no, f"count {row['count']!r} is not a whole number >= 0", "count")
        n = int(row["count"])
        first.setdefault(rec, no)
        empty = {"format": ("kind", "mode", "parts"), "sessions": ("kind", "mode", "parts"),
                 "no-fault": ("kind", "mode", "parts"), "fault": ("parts",),
                 "mix": ("kind", "mode")}[rec]
        for c in empty:
            if row[c]:
                _fail(source, no, f"a {rec} row leaves {c} empty, not {row[c]!r}", c)
        if rec == "format":
            if n != FORMAT:
                _fail(source, no, f"format {n}: this faultfind reads format {FORMAT}", "count")
            formats.append(no)
        elif rec == "sessions":
            sessions += n
        elif rec == "no-fault":
            no_fault += n
        elif rec == "fault":
            kind, mode = row["kind"], fault_mode_name(row["mode"])
            if kind not in KINDS:
                _fail(source, no, f"unknown kind {kind!r}" if kind else "a fault row names its kind",
                      "kind")
            modes = KINDS[kind].fault_modes
            if not modes:
                _fail(source, no, f"a {kind} has no fault modes in faultfind's model", "kind")
            if mode and mode not in modes:
                _fail(source, no, f"{mode!r} is not a fault mode of a {kind}: {', '.join(modes)}",
                      "mode")
            key = (kind, mode or None)
            faults[key] = faults.get(key, 0) + n
            first.setdefault(("fault", kind), no)
        else:
            key = _parts(row["parts"], source, no)
            mixes[key] = mixes.get(key, 0) + n
    if header is None:
        _fail(source, 1, f"empty: an outcome-counts file starts with the header "
              f"{','.join(COLUMNS)}")
    if not formats:
        _fail(source, header, f"no format row: add 'format,,,,{FORMAT}' under the header", "record")
    if no_fault > sessions:
        _fail(source, first["no-fault"], f"the no-fault rows add up to {no_fault}, more than the "
              f"{sessions} sessions", "count")
    n_faults, n_mix = sum(faults.values()), sum(mixes.values())
    if n_faults != n_mix:
        _fail(source, first.get("mix", first.get("fault", header)),
              f"the fault rows count {n_faults} faulty part(s) but the mix rows {n_mix}: each "
              "faulty part is counted once in each", "count")
    in_mix = {k for key in mixes for k, _ in key}
    for (kind, _), n in faults.items():
        if n and kind not in in_mix:
            _fail(source, first[("fault", kind)], f"faulty {kind} parts counted but no mix row has "
                  f"a {kind}", "kind")
    if n_faults and sessions - no_fault < 1:
        _fail(source, first.get("sessions", header), f"{n_faults} faulty part(s) counted but no "
              "session with a fault", "count")
    return OutcomeCounts(sessions, no_fault, faults, mixes)


def read_counts(path) -> OutcomeCounts:
    """:func:`parse_counts` of a file (PriorsError naming it when missing or not UTF-8)."""
    return parse_counts(read_text(path, PriorsError, "outcome-counts file"), source=os.fspath(path))


def merge_counts(paths) -> OutcomeCounts:
    """The sum of several files' counts (the first bad file is reported)."""
    total = OutcomeCounts()
    for p in paths:
        total = total + read_counts(p)
    return total


def counts_text(counts: OutcomeCounts, comment="") -> str:
    """The file's text for ``counts``; ``comment`` lines go under the title line."""
    if not isinstance(counts, OutcomeCounts):
        raise TypeError(f"counts: expected OutcomeCounts, got {type(counts).__name__}")
    out = io.StringIO()
    out.write("# faultfind outcome counts (docs/priors.md); merge files by adding the counts "
              "of equal rows\n")
    for line in str(comment).splitlines():
        out.write(f"# {line}\n")
    w = csv.writer(out, lineterminator="\n")
    w.writerow(COLUMNS)
    w.writerow(["format", "", "", "", FORMAT])
    w.writerow(["sessions", "", "", "", counts.sessions])
    w.writerow(["no-fault", "", "", "", counts.no_fault])
    for (kind, mode), n in sorted(counts.faults.items(), key=lambda kv: (kv[0][0], kv[0][1] or "")):
        w.writerow(["fault", kind, mode or "", "", n])
    for key, n in sorted(counts.mixes.items()):
        w.writerow(["mix", "", "", " ".join(f"{k}:{c}" for k, c in key), n])
    return out.getvalue()


def write_counts(counts: OutcomeCounts, path, comment="") -> None:
    """Write ``counts`` to ``path`` (PriorsError naming it when it cannot be written)."""
    text = counts_text(counts, comment)
    try:
        with open(path, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)
    except OSError as exc:
        raise PriorsError(f"cannot write the outcome-counts file ({exc.strerror or exc})",
                          file=os.fspath(path)) from None
