"""A fast reader for the plain subset of TOML that circuit files use.

A 100,000-part circuit file is about 11 MB; :mod:`tomllib` (pure Python) takes
several seconds on it.  Almost every circuit file is written in a small subset
of TOML: top-level ``key = value`` lines, ``[[part]]`` headers, comments, and
values that are plain strings, numbers or one-line arrays of plain strings.
This module reads exactly that subset line by line with a few regular
expressions and gives up (returns None) on anything else -- an escape in a
string, a table header, a multi-line value, a repeated key, a boolean -- so that
:mod:`tomllib` reads the file and reports any error.  Where it answers, it
answers what tomllib would (checked in tests/test_fast_toml.py).
"""

from __future__ import annotations

import re

__all__ = ["loads_subset"]

_KEY = r"([A-Za-z0-9_-]+)"
_BASIC = r'"([^"\\\x00-\x08\x0a-\x1f\x7f]*)"'
_LITERAL = r"'([^'\x00-\x08\x0a-\x1f\x7f]*)'"
_NUM = r"([+-]?(?:0|[1-9](?:_?[0-9])*)(?:\.[0-9](?:_?[0-9])*)?(?:[eE][+-]?[0-9](?:_?[0-9])*)?)"
_TAIL = r"[ \t]*(?:#[^\x00-\x08\x0a-\x1f\x7f]*)?$"
_KV = re.compile(r"[ \t]*" + _KEY + r"[ \t]*=[ \t]*(?:" + _BASIC + "|" + _LITERAL + "|" + _NUM
                 + "|" + r"\[([^\]\[\n]*)\]" + ")" + _TAIL)
_ITEM = re.compile(r"[ \t]*(?:" + _BASIC + "|" + _LITERAL + r")[ \t]*(?:,|$)")
_PART = re.compile(r"[ \t]*\[\[[ \t]*part[ \t]*\]\]" + _TAIL)
_SKIP = re.compile(r"[ \t]*(?:#[^\x00-\x08\x0a-\x1f\x7f]*)?$")
_INT = re.compile(r"[+-]?(?:0|[1-9](?:_?[0-9])*)$")


def _number(text):
    t = text.replace("_", "")
    if _INT.match(text):
        return int(t)
    return float(t)


def _array(inner):
    inner = inner.strip()
    if not inner:
        return []
    out, pos = [], 0
    while pos < len(inner):
        m = _ITEM.match(inner, pos)
        if m is None:
            return None
        out.append(m.group(1) if m.group(1) is not None else m.group(2))
        pos = m.end()
        rest = inner[pos:].lstrip(" \t")
        if not rest:
            break
        pos = len(inner) - len(rest)
    return out


def loads_subset(text: str):
    """Parse ``text`` if it is in the plain subset, else return None.

    Returns
    -------
    dict or None
        The same document :func:`tomllib.loads` gives, or None when the text
        uses anything outside the subset (then use tomllib).
    """
    if "\r" in text and "\r\n" not in text:
        return None
    top: dict = {}
    parts: list = []
    current = top
    for line in text.split("\n"):
        if line.endswith("\r"):
            line = line[:-1]
        if _SKIP.match(line):
            continue
        if _PART.match(line):
            current = {}
            parts.append(current)
            continue
        m = _KV.match(line)
        if m is None:
            return None
        key, basic, literal, num, arr = m.groups()
        if key in current:
            return None
        if basic is not None:
            current[key] = basic
        elif literal is not None:
            current[key] = literal
        elif num is not None:
            current[key] = _number(num)
        else:
            items = _array(arr)
            if items is None:
                return None
            current[key] = items
    if parts:
        if "part" in top:
            return None
        top["part"] = parts
    return top
