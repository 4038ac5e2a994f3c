"""Meter profiles: the built-in default and TOML files of the user's own meters.

A meter profile file (formats.md section 3) holds ``[meter.NAME]`` tables::

    [meter.bench]
    counts = 60000
    input_resistance = "10M"
    dc_voltage = "0.05% + 2"

A key left out of a profile takes the built-in :data:`DEFAULT_METER`'s value;
a profile named ``default`` replaces the built-in default.  See
docs/meter-model.md.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
import os
import re
import sys
import tomllib

from faultfind.errors import InputError, MeterError
from faultfind.model import Accuracy, MeterProfile
from faultfind.units import parse_accuracy, parse_value

__all__ = ["DEFAULT_METER", "METER_KEYS", "parse_meters", "load_meters", "meters_with_default"]

#: The built-in default: a typical 6000-count handheld meter.  The figures are
#: typical of published specifications of 6000-count handheld DMMs (from
#: memory), not of any one model; docs/meter-model.md lists them.
DEFAULT_METER = MeterProfile(
    name="default",
    counts=6000,
    input_resistance=10.0e6,
    current_shunt=1.0,
    dc_voltage=Accuracy(0.5, 2.0),
    ac_voltage=Accuracy(1.0, 3.0),
    dc_current=Accuracy(1.0, 3.0),
    ac_current=Accuracy(1.5, 3.0),
    resistance=Accuracy(0.5, 2.0),
    max_resistance=60.0e6,
    voltage_resolution=1.0e-4,
    current_resolution=1.0e-7,
    resistance_resolution=0.1,
    # The diode test (formats.md section 4): 1 mA into the junction from about
    # 3 V open-circuit, a display to 2 V in 1 mV steps, 1 % + 3 counts --
    # typical of 6000-count handhelds (from memory, no one model).
    diode_test_current=1.0e-3,
    diode_test_voltage=3.0,
    diode_test_max=2.0,
    diode_test=Accuracy(1.0, 3.0),
    diode_test_resolution=1.0e-3,
)

# key -> (kind, unit); kind is "counts", "accuracy" or "positive".
_KEYS = {
    "counts": ("counts", None),
    "input_resistance": ("positive", "Ω"),
    "current_shunt": ("positive", "Ω"),
    "dc_voltage": ("accuracy", None),
    "ac_voltage": ("accuracy", None),
    "dc_current": ("accuracy", None),
    "ac_current": ("accuracy", None),
    "resistance": ("accuracy", None),
    "max_resistance": ("positive", "Ω"),
    "voltage_resolution": ("positive", "V"),
    "current_resolution": ("positive", "A"),
    "resistance_resolution": ("positive", "Ω"),
    # The diode test (formats.md section 4); diode_test_resolution is this project's key.
    "diode_test_current": ("positive", "A"),
    "diode_test_voltage": ("positive", "V"),
    "diode_test_max": ("positive", "V"),
    "diode_test": ("accuracy", None),
    "diode_test_resolution": ("positive", "V"),
}

#: The keys a ``[meter.NAME]`` table may hold, in formats.md's order.
METER_KEYS = tuple(_KEYS)

_TOML_LINE = re.compile(r"at line (\d+)")


_PIECE = r"""(?:"(?:[^"\\]|\\.)*"|'[^']*'|[A-Za-z0-9_-]+)"""
_DOTTED = re.compile(rf"\s*({_PIECE}(?:\s*\.\s*{_PIECE})*)\s*")
_HEADER = re.compile(rf"^\s*\[\[?{_DOTTED.pattern}\]")
_ASSIGN = re.compile(rf"^{_DOTTED.pattern}=")


def _split_dotted(text: str) -> tuple[str, ...]:
    pieces = re.findall(_PIECE, text)
    return tuple(p[1:-1] if p[:1] in "\"'" else p for p in pieces)


def _line_finder(text: str):
    """A function ``(name, key=None) -> line`` locating meters and their keys.

    Best effort, for messages only: it follows table headers and ``key =``
    lines (bare, quoted or dotted keys) and returns the first line whose
    full key path is ``meter.NAME.KEY...`` (or ``meter.NAME``, or a
    top-level ``NAME`` when called as ``find(None, key)``); None when not
    found.  Values spanning several lines are not followed.
    """
    first: dict[tuple[str, ...], int] = {}
    table: tuple[str, ...] = ()
    for number, line in enumerate(text.splitlines(), start=1):
        m = _HEADER.match(line)
        if m:
            table = _split_dotted(m.group(1))
            path = table
        else:
            m = _ASSIGN.match(line)
            if not m:
                continue
            path = table + _split_dotted(m.group(1))
        for n in range(1, len(path) + 1):
            first.setdefault(path[:n], number)

    def find(name, key=None):
        if name is None:
            return first.get((key,))
        if key is not None and ("meter", name, key) in first:
            return first[("meter", name, key)]
        return first.get(("meter", name))

    return find


def _deepest_line(text: str) -> int:
    """Line holding the most opening brackets and braces (the deep nesting)."""
    counts = [ln.count("[") + ln.count("{") for ln in text.split("\n")]
    return 1 + max(range(len(counts)), key=counts.__getitem__)


def _as_float(raw) -> float:
    """``float(raw)``; inf for an integer beyond the float range (1e308)."""
    try:
        return float(raw)
    except OverflowError:
        return math.inf


def _show(raw) -> str:
    """``repr(raw)`` for a message, cut to about 60 characters."""
    shown = repr(raw)
    return shown if len(shown) <= 60 else f"{shown[:56]}... ({len(shown):,} characters)"


def _parse_counts(raw, what: str) -> int:
    if isinstance(raw, bool):
        raise MeterError(f"{what} must be a positive integer, got {_show(raw)}")
    if isinstance(raw, numbers.Real):
        number = _as_float(raw)
    elif isinstance(raw, str):
        number = parse_value(raw, what=what)
    else:
        raise MeterError(f"{what} must be a positive integer, got {_show(raw)}")
    if not math.isfinite(number) or number != int(number) or number < 1:
        raise MeterError(f"{what} must be a positive integer, got {_show(raw)}")
    return int(number)


def _parse_positive(raw, unit: str, what: str) -> float:
    if isinstance(raw, bool) or not isinstance(raw, (numbers.Real, str)):
        raise MeterError(f"{what} must be a number or a string such as \"10M\", got "
                         f"{_show(raw)}")
    number = _as_float(parse_value(raw, unit, what=what))
    if not math.isfinite(number) or number <= 0:
        raise MeterError(f"{what} must be positive and finite, got {_show(raw)}")
    return number


def _parse_accuracy(raw, what: str) -> Accuracy:
    if not isinstance(raw, str):
        raise MeterError(f"{what} must be a string such as \"0.5% + 2\", got {_show(raw)}")
    percent, counts = parse_accuracy(raw)
    percent, counts = float(percent), float(counts)
    if not (math.isfinite(percent) and math.isfinite(counts)) or percent < 0 or counts < 0:
        raise MeterError(f"{what} must have a non-negative percent and counts, got {_show(raw)}")
    return Accuracy(percent, counts)


def _parse_profile(name: str, table: dict, source: str, find_line) -> MeterProfile:
    values = {}
    for key, raw in table.items():
        where = dict(file=source, line=find_line(name, key), part=name, key=key)
        if key not in _KEYS:
            raise MeterError(f"unknown meter key; expected one of {', '.join(METER_KEYS)}",
                             **where)
        kind, unit = _KEYS[key]
        what = key
        try:
            if kind == "counts":
                values[key] = _parse_counts(raw, what)
            elif kind == "accuracy":
                values[key] = _parse_accuracy(raw, what)
            else:
                values[key] = _parse_positive(raw, unit, what)
        except InputError as exc:
            message = exc.message
            if len(repr(raw)) > 60:  # do not quote a long value whole, twice
                message = f"cannot read {key} {_show(raw)}: not a value"
            raise MeterError(message, **where) from None
    profile = dataclasses.replace(DEFAULT_METER, name=name, **values)
    if profile.diode_test_max > profile.diode_test_voltage:
        key = "diode_test_max" if "diode_test_max" in values else "diode_test_voltage"
        given = lambda k: "" if k in values else " (the default)"  # noqa: E731
        raise MeterError(f"diode_test_max {profile.diode_test_max:g} V{given('diode_test_max')} "
                         f"is above diode_test_voltage {profile.diode_test_voltage:g} V"
                         f"{given('diode_test_voltage')}: the test current cannot develop "
                         "more than the open-circuit voltage, so the display's top is at or "
                         "below it; give both from the meter's specification",
                         file=source, line=find_line(name, key), part=name, key=key)
    if profile.diode_test_resolution >= profile.diode_test_max:
        key = ("diode_test_resolution" if "diode_test_resolution" in values
               else "diode_test_max")
        raise MeterError(f"diode_test_resolution {profile.diode_test_resolution:g} V is not "
                         f"below diode_test_max {profile.diode_test_max:g} V: the display "
                         "step must be a small part of the display's top (1 mV on most "
                         "meters)", file=source, line=find_line(name, key), part=name, key=key)
    return profile


def parse_meters(text, source="<string>") -> dict[str, MeterProfile]:
    """Meter profiles from the text of a meter profile file.

    Parameters
    ----------
    text : str
        TOML text with ``[meter.NAME]`` tables whose keys are those of
        formats.md section 3 (:data:`METER_KEYS`).
    source : str, optional
        Name of the file, for error messages.

    Returns
    -------
    dict of str to MeterProfile
        One profile per table, in file order, keyed by its name.  Keys a
        table leaves out take :data:`DEFAULT_METER`'s values (the built-in
        default's, even when the file defines its own ``default``).

    Raises
    ------
    MeterError
        Naming the file, and where known the line, the meter (as ``part``)
        and the key: TOML syntax error, a top-level key other than
        ``meter``, a meter that is not a table or has an empty name, an
        unknown meter key, a value that does not parse or has the wrong
        unit, ``counts`` not a positive integer, an accuracy with a negative
        term, a resistance, current, voltage or resolution that is not
        positive and finite, a ``diode_test_max`` above
        ``diode_test_voltage`` (after defaults), a ``diode_test_resolution``
        not below ``diode_test_max``.
    """
    source = str(source)
    if not isinstance(text, str):
        raise MeterError(f"expected the file's text as str, got {type(text).__name__}",
                         file=source)
    text = text.removeprefix("\ufeff")
    if "\r" in text:  # CRLF is TOML already; a lone CR (old Mac) ends a line too
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = _TOML_LINE.search(str(exc))
        last = max(1, text.count("\n") + (not text.endswith("\n")))  # "at end of document"
        raise MeterError(f"TOML syntax error: {exc}", file=source,
                         line=int(m.group(1)) if m else last) from None
    except RecursionError:  # tomllib recurses once per level of nesting
        raise MeterError("TOML nested too deeply (arrays or tables inside one another "
                         "hundreds of levels deep): this is not a meter profile file",
                         file=source, line=_deepest_line(text)) from None
    except ValueError as exc:  # an integer too long for int() (sys.int_info)
        if "digits" not in str(exc):
            raise
        long_number = re.compile(r"[0-9_]{%d,}" % (sys.get_int_max_str_digits() + 1))
        line = next((i for i, ln in enumerate(text.split("\n"), 1) if long_number.search(ln)),
                    1)
        raise MeterError(f"a number with more than {sys.get_int_max_str_digits():,} digits: "
                         "not a value a meter profile can hold", file=source,
                         line=line) from None
    find_line = _line_finder(text)
    for key in data:
        if key != "meter":
            raise MeterError("unknown top-level key; a meter profile file holds only "
                             "[meter.NAME] tables", file=source, line=find_line(None, key),
                             key=key)
    meters = data.get("meter", {})
    if not isinstance(meters, dict):
        raise MeterError("'meter' must be a set of [meter.NAME] tables", file=source,
                         line=find_line(None, "meter"), key="meter")
    profiles: dict[str, MeterProfile] = {}
    for name, table in meters.items():
        if not name.strip():
            raise MeterError("a meter name must not be empty", file=source,
                             line=find_line(name), key="meter")
        if not isinstance(table, dict):
            raise MeterError(f"meter {name!r} must be a table [meter.{name}], got {_show(table)}",
                             file=source, line=find_line(name), part=name)
        profiles[name] = _parse_profile(name, table, source, find_line)
    return profiles


def load_meters(path) -> dict[str, MeterProfile]:
    """Meter profiles from a file.

    Parameters
    ----------
    path : str or os.PathLike
        A meter profile file (TOML, UTF-8).

    Returns
    -------
    dict of str to MeterProfile
        As :func:`parse_meters`.

    Raises
    ------
    MeterError
        The file cannot be read or is not UTF-8, or anything
        :func:`parse_meters` refuses; the message names the file.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise MeterError(f"expected a file path, got {path!r}", key="path")
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise MeterError(f"cannot read the meter profile file: {exc.strerror or exc}",
                         file=os.fspath(path)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise MeterError(f"not UTF-8 text ({exc.reason} at byte {exc.start}): save it as UTF-8",
                         file=os.fspath(path), line=raw.count(b"\n", 0, exc.start) + 1) from None
    return parse_meters(text, source=os.fspath(path))


def meters_with_default(profiles=None) -> dict[str, MeterProfile]:
    """The profiles readings are resolved against, always with a ``default``.

    Parameters
    ----------
    profiles : dict of str to MeterProfile or None
        Profiles from :func:`load_meters`, or None for none.

    Returns
    -------
    dict of str to MeterProfile
        A new dict: ``profiles`` plus ``"default": DEFAULT_METER`` unless
        ``profiles`` has its own ``default``, which wins.

    Raises
    ------
    InputError
        ``profiles`` is not a dict of names to MeterProfile.
    """
    if profiles is None:
        profiles = {}
    if not isinstance(profiles, dict):
        raise InputError(f"expected a dict of meter profiles, got {type(profiles).__name__}",
                         key="profiles")
    for name, profile in profiles.items():
        if not isinstance(name, str) or not isinstance(profile, MeterProfile):
            raise InputError(f"entry {name!r} is not a name mapped to a MeterProfile",
                             key="profiles")
    out = {"default": DEFAULT_METER}
    out.update(profiles)
    return out
