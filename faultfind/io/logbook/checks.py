"""Argument checks shared by the logbook's methods: one-line text, files read as UTF-8."""

from __future__ import annotations

import os
from pathlib import Path

from faultfind.errors import InputError

_SINGLE_LINE = ("unit", "location", "technician")


def _text(value, name, *, required=False) -> str:
    if value is None:
        value = ""
    if not isinstance(value, str):
        raise InputError(f"must be text, got {type(value).__name__}", key=name)
    value = value.strip()
    if required and not value:
        raise InputError("must not be empty", key=name)
    if name in _SINGLE_LINE and ("\n" in value or "\r" in value):
        raise InputError("must be one line of text", key=name)
    return value


def _read_text(path, what, error):
    if not isinstance(path, (str, os.PathLike)):
        raise error(f"expected a file name, got {type(path).__name__}", key=what)
    name = os.fspath(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise error(f"no such {what} file", file=name) from None
    except OSError as exc:
        raise error(f"cannot read the {what} file: {exc.strerror or exc}", file=name) from None
    try:
        return name, data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(f"not UTF-8 text (byte 0x{data[exc.start]:02x})", file=name,
                    line=data[:exc.start].count(b"\n") + 1) from None
