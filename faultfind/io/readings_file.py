"""Readings files (CSV, formats.md section 2) read into :class:`~faultfind.model.Reading` lists.

One row a reading, as a technician writes them down::

    quantity,mode,plus,minus,part,setup,value,label
    voltage,dc,A,,,,11.91,TP1
    current,dc,,,R1,,2.45 mA,
    resistance,,,,F1,,OL,fuse check

The file is split into cells by :mod:`faultfind.io.readings_table` (the csv
module, text only: nothing is turned into NaN or a number behind the
reader's back; a CSV error names its line), then every row is checked here.
All problems of all rows are gathered into one
:class:`~faultfind.errors.ReadingsError`, so a file is fixed in one go.
docs/readings-files.md is the user's guide to the format as this module
reads it.
"""

from __future__ import annotations

import difflib
import math
import os
import re
from collections.abc import Mapping

import numpy as np
import pandas as pd

from faultfind.engine import meter as meter_model
from faultfind.engine.offnet import diode_test_display_limit
from faultfind.errors import ReadingsError, UnitError
from faultfind.io.meters_file import DEFAULT_METER
from faultfind.io.readings_table import (CLOSE_CHOICES_AT_MOST as _CLOSE_CHOICES_AT_MOST,
                                         CLOSE_WORD_AT_MOST as _CLOSE_WORD_AT_MOST, COLUMNS,
                                         SHOW_AT_MOST as _SHOW_AT_MOST)
from faultfind.io.readings_table import did_you_mean as _did_you_mean
from faultfind.io.readings_table import read_table as _read_table
from faultfind.io.readings_table import show as _show
from faultfind.io.textfile import read_text
from faultfind.model import (KINDS, MODES, QUANTITIES, QUANTITY_UNITS, SETUPS, Circuit,
                             MeterProfile, Reading)
from faultfind.units import format_value, parse_frequency, parse_value

__all__ = ["COLUMNS", "QUANTITY_UNITS", "load_readings", "parse_readings", "readings_to_frame",
           "write_readings", "reading_to_row", "zero_allowance", "diode_test_allowance"]


#: Unit of each quantity's value.

# Columns always written; frequency and meter only when a reading uses them.
_ALWAYS = ("quantity", "mode", "plus", "minus", "part", "setup", "value", "label")
# An over-range display: OL, O.L, O.L. with an optional sign, any case.
_OVERRANGE = re.compile(r"^([+-]?)\s*O\.?L\.?$", re.IGNORECASE)
# Why a diode-test row has no mode or setup (after "has no mode"/"has no setup").
_DIODE_TEST_NO = {"mode": " (the meter's own test current is the source, the circuit is off)",
                  "setup": " (setup is for resistance readings)"}
# Nodes or parts listed in full in a message when there are at most this many.
_LIST_AT_MOST = 12
# Problems listed one a line in a message (all are kept in ``problems``).
_PROBLEMS_LISTED = 50


def load_readings(path, circuit=None, meters=None, *, require_values=True) -> list[Reading]:
    """Read a readings file.

    Parameters
    ----------
    path : str or os.PathLike
        The readings file: CSV, UTF-8 (a leading byte-order mark is allowed),
        comma-separated, with a header row.
    circuit, meters, require_values
        As for :func:`parse_readings`.

    Returns
    -------
    list of Reading
        One reading per non-blank row, in file order, ``line`` set.

    Raises
    ------
    ReadingsError
        The file is missing, unreadable or not UTF-8, or its content is not
        valid (see :func:`parse_readings`).
    TypeError
        ``path`` is not a str or path-like object.
    """
    text = read_text(path, ReadingsError, "readings file", hint="save the file as 'CSV UTF-8'")
    name = os.fspath(path)
    return parse_readings(text, name, circuit, meters, require_values=require_values)


def parse_readings(text, source="<string>", circuit=None, meters=None, *,
                   require_values=True) -> list[Reading]:
    """Read the text of a readings file.

    Parameters
    ----------
    text : str
        CSV text: a header row naming the columns (any of :data:`COLUMNS`,
        case-insensitive, surrounding spaces ignored; ``quantity`` required),
        then one reading a row.  Blank rows (also rows of empty cells) are
        skipped; every cell is stripped of surrounding whitespace.
    source : str, optional
        Where the text came from, for messages.
    circuit : Circuit, optional
        When given, every node and part a row names must be in it, a current
        reading's part and a resistance or diode-test reading's part must
        have two terminals (a diode test names a transistor's junction by
        plus and minus), an AC reading needs an AC source in it, and an
        empty ``minus`` of a voltage or node-pair resistance or diode-test
        reading becomes ``circuit.ground``.  Without it ``minus`` stays None when empty.
    meters : dict of str to MeterProfile, optional
        When given, a row's ``meter`` must be empty, ``default`` or one of
        its keys.  Without it any name is accepted.
    require_values : bool, optional
        True (default): every row needs a ``value``.  False: an empty value
        gives ``value=None`` (a planned reading, e.g. for ``expect --at``).

    Returns
    -------
    list of Reading
        One reading per non-blank row, in order; ``line`` is the row's line
        in the text (the header is line 1).  A file holding only its header
        gives an empty list.

    Raises
    ------
    ReadingsError
        Empty text, no header, a header without ``quantity``, an unknown or
        repeated column (file-level problems, raised at once); or any bad row.
        All bad rows are reported in one error: its ``line`` is the first bad
        line, its message lists every problem as ``line N (column): what``,
        and its ``problems`` attribute holds one ReadingsError per problem.
        A single problem is raised as it stands, with ``key`` the column.
        A diode-test row (formats.md section 4) is refused with a mode or a
        setup (it is a power-off reading), with ``part`` naming a
        transistor (which junction?), and with a display below zero beyond
        :func:`diode_test_allowance` or ``-OL``.
    TypeError
        ``text``, ``circuit`` or ``meters`` of the wrong type.
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    if circuit is not None and not isinstance(circuit, Circuit):
        raise TypeError(f"circuit must be a faultfind.model.Circuit or None, "
                        f"not {type(circuit).__name__}")
    if meters is not None and not (isinstance(meters, Mapping) and all(
            isinstance(k, str) and isinstance(v, MeterProfile) for k, v in meters.items())):
        raise TypeError("meters must be a dict of names to MeterProfile, or None")
    source = str(source)
    names, rows = _read_table(text.removeprefix("\ufeff"), source)
    checker = _RowChecker(source, circuit, meters, bool(require_values))
    readings = []
    for line, cells, extra, split in rows:
        reading = checker.row(line, cells, extra, split)
        if reading is not None:
            readings.append(reading)
    checker.raise_problems()
    return readings


# -- the rows ----------------------------------------------------------------------------


class _RowChecker:
    """Checks rows one by one, gathering every problem with its line and column."""

    def __init__(self, source, circuit, meters, require_values):
        self.source = source
        self.circuit = circuit
        self.meters = meters
        self.require_values = require_values
        self.problems: list[ReadingsError] = []

    def problem(self, line, key, message):
        self.problems.append(ReadingsError(message, file=self.source, line=line, key=key))

    def raise_problems(self):
        if not self.problems:
            return
        order = {c: i for i, c in enumerate(COLUMNS)}
        found = sorted(self.problems, key=lambda e: (e.line, order.get(e.key, -1)))
        if len(found) == 1:
            err = found[0]
        else:
            lines = sorted({e.line for e in found})
            listing = "\n".join(f"  line {e.line}" + (f" ({e.key})" if e.key else "")
                                + f": {e.message}" for e in found[:_PROBLEMS_LISTED])
            if len(found) > _PROBLEMS_LISTED:
                listing += (f"\n  ... and {len(found) - _PROBLEMS_LISTED:,} more problems (the "
                            "first ones listed; the error's problems attribute has them all)")
            err = ReadingsError(f"{len(found)} problems on {len(lines)} line"
                                f"{'s' if len(lines) > 1 else ''}; fix them all, then load "
                                f"the file again:\n{listing}", file=self.source,
                                line=found[0].line)
        err.problems = found
        raise err

    def row(self, line, cells, extra, split=None) -> Reading | None:
        """The reading of one row, or None after recording its problems."""
        before = len(self.problems)
        get = lambda column: cells.get(column, "")  # noqa: E731
        if split:
            whole, fraction = split
            self.problem(line, "value", f"the value {_show(whole)} is followed by "
                         f"{_show(fraction)} and the row has more cells than the header: a "
                         f"decimal comma? write {whole}.{fraction} with a decimal point "
                         "(faultfind does not guess which comma was meant)")
            return None
        if extra:
            shown = ", ".join(_show(c) for c in extra[:_LIST_AT_MOST])
            self.problem(line, None, f"{len(extra)} cell(s) in columns the header does not "
                         f"name ({shown}{', ...' if len(extra) > _LIST_AT_MOST else ''}): "
                         "name the column in the header or remove them")
        quantity = get("quantity").lower()
        if not quantity:
            self.problem(line, "quantity", "no quantity: write voltage, current, resistance "
                         "or diode-test")
            return None
        for sep, name in ((";", "semicolons"), ("\t", "tabs")):
            if sep in quantity and quantity.split(sep)[0].strip() in QUANTITIES:
                self.problem(line, "quantity", f"the row {_show(get('quantity'))} seems "
                             f"separated by {name}: faultfind reads comma-separated rows "
                             "with a decimal point; save the file as CSV with commas")
                return None
        if quantity not in QUANTITIES:
            self.problem(line, "quantity", f"unknown quantity {_show(get('quantity'))}"
                         f"{_did_you_mean(quantity, QUANTITIES)}: write voltage, current, "
                         "resistance or diode-test")
            return None
        mode, setup = self.mode_and_setup(line, quantity, get)
        plus, minus, part = self.probes(line, quantity, setup, get)
        frequency = self.frequency(line, mode, get("frequency"))
        meter = self.meter(line, get("meter"))
        value, overrange = self.value(line, quantity, mode, get("value"), meter)
        if self.circuit is not None and len(self.problems) == before:
            plus, minus = self.against_circuit(line, quantity, mode, plus, minus, part)
        if len(self.problems) > before:
            return None
        return Reading(quantity=quantity, mode=mode, plus=plus, minus=minus, part=part,
                       setup=setup, frequency=frequency, meter=meter, label=get("label"),
                       value=value, overrange=overrange, raw=get("value"), line=line)

    def mode_and_setup(self, line, quantity, get):
        mode, setup = get("mode").lower(), get("setup").lower()
        if quantity == "diode-test":
            for column, cell in (("mode", mode), ("setup", setup)):
                if cell:
                    self.problem(line, column, f"{column} {_show(get(column))} on a diode-test "
                                 "row: a diode test is a power-off reading (switch off, "
                                 "isolate, discharge capacitors first) and has no "
                                 f"{column}{_DIODE_TEST_NO[column]}: leave it empty")
            return None, None
        if quantity == "resistance":
            if mode:
                self.problem(line, "mode", f"mode {_show(get('mode'))} on a resistance reading: "
                             "an ohmmeter reading is neither dc nor ac; leave mode empty")
            setup = setup or "in-circuit"
            if setup not in SETUPS:
                self.problem(line, "setup", f"unknown setup {_show(get('setup'))}"
                             f"{_did_you_mean(setup, SETUPS)}: write in-circuit or lifted")
            return None, setup
        if setup:
            self.problem(line, "setup", f"setup {_show(get('setup'))} on a {quantity} reading: "
                         "setup is for resistance readings only; leave it empty")
        mode = mode or "dc"
        if mode not in MODES:
            self.problem(line, "mode", f"unknown mode {_show(get('mode'))}"
                         f"{_did_you_mean(mode, MODES)}: write dc or ac")
        return mode, None

    def probes(self, line, quantity, setup, get):
        plus, minus, part = (get(c) or None for c in ("plus", "minus", "part"))
        if quantity == "voltage":
            if part:
                self.problem(line, "part", "a voltage reading takes the probes' nodes in plus "
                             "and minus, not a part")
            if not plus:
                self.problem(line, "plus", "a voltage reading needs plus: the node the red "
                             "probe touches")
        elif quantity == "current":
            for column, node in (("plus", plus), ("minus", minus)):
                if node:
                    self.problem(line, column, f"{column} on a current reading: the meter goes "
                                 "in series with the part named in part; leave it empty")
            if not part:
                self.problem(line, "part", "a current reading needs part: the part whose "
                             "current the meter reads")
        else:
            what = "a diode test" if quantity == "diode-test" else "a resistance reading"
            if part and plus:
                self.problem(line, "part", f"{what} takes either part or plus/minus, not both")
            elif part and minus:
                self.problem(line, "minus", f"minus goes with plus: {what} across a part takes "
                             "only part")
            elif not part and not plus:
                if quantity == "diode-test":
                    self.problem(line, "part", "a diode test needs part (a diode, LED or zener: "
                                 "red probe on its anode, nodes[0]) or plus (and minus) for the "
                                 "nodes the red and black probes touch")
                else:
                    self.problem(line, "part", "a resistance reading needs part (across a part) "
                                 "or plus (and minus) for the nodes the probes touch")
            elif not part and setup == "lifted":
                # 'lifted' says the reading is one part alone; which part is
                # not for faultfind to guess from the probes' nodes.
                self.problem(line, "setup", "a lifted reading needs the part that was lifted: "
                             "write its reference in part instead of plus/minus, or write "
                             "setup in-circuit for a reading between two nodes"
                             + self.parts_between(plus, minus))
        if plus and minus and plus == minus:
            self.problem(line, "minus", f"plus and minus are the same node {_show(plus)}: the "
                         "meter would read nothing")
        return plus, minus, part

    def parts_between(self, plus, minus) -> str:
        """``; between A and B: R2`` -- the two-terminal parts the probes sat across."""
        if self.circuit is None:
            return ""
        ends = {plus, minus or self.circuit.ground}
        found = [p.ref for p in self.circuit.parts
                 if KINDS[p.kind].nodes == 2 and set(p.nodes) == ends]
        if not found:
            return ""
        shown = ", ".join(found[:_LIST_AT_MOST]) + (", ..." if len(found) > _LIST_AT_MOST else "")
        return f"; between {plus} and {minus or self.circuit.ground}: {shown}"

    def frequency(self, line, mode, raw):
        if not raw:
            return None
        if mode != "ac":
            if mode is not None and mode not in MODES:
                return None  # the mode's own problem says it all
            self.problem(line, "frequency", "frequency is for AC readings only (mode ac); "
                         "leave it empty")
            return None
        try:
            return parse_frequency(raw)
        except UnitError as exc:
            self.problem(line, "frequency", _unit_message(exc, raw, "frequency"))
            return None

    def value(self, line, quantity, mode, raw, meter=None):
        if not raw:
            if self.require_values:
                self.problem(line, "value", "no value: write the meter's display or OL")
            return None, 0
        over = _OVERRANGE.match(raw)
        if over:
            sign = -1 if over[1] == "-" else 1
            number = None
        else:
            try:
                number = parse_value(raw, QUANTITY_UNITS[quantity])
            except UnitError as exc:
                self.problem(line, "value", _unit_message(exc, raw, "value"))
                return None, 0
            sign = -1 if number < 0 else 1
        if sign < 0 and quantity == "diode-test":
            allowance = None if over else diode_test_allowance(self.profile(meter), number)
            if allowance is None or -number > allowance:
                beyond = ("" if allowance is None else ", further below zero than this "
                          "meter's diode-test accuracy allows on a short (down to "
                          f"{format_value(-allowance, 'V')})")
                self.problem(line, "value", f"negative diode test {_show(raw)}{beyond}: the "
                             "meter's own test current cannot develop a negative voltage, so "
                             "the circuit is still powered or a capacitor is charged. Switch "
                             "off, isolate and lock out, discharge capacitors, prove the "
                             "circuit dead, then test again (a reversed junction shows OL)")
        elif quantity == "diode-test" and not over and self.meters is not None:
            self.above_diode_test_top(line, raw, number, meter)
        elif sign < 0 and quantity == "resistance":
            allowance = None if over else zero_allowance(self.profile(meter), number)
            if allowance is None or -number > allowance:
                beyond = ("" if allowance is None else ", further below zero than this "
                          "meter's accuracy allows on a short (down to "
                          f"{format_value(-allowance, 'Ω')})")
                self.problem(line, "value", f"negative resistance {_show(raw)}{beyond}: the "
                             "circuit is still powered or a capacitor is charged, so this is not a "
                             "resistance. Switch off, isolate and lock out, discharge "
                             "capacitors, prove the circuit dead, then read again")
        elif sign < 0 and mode == "ac":
            self.problem(line, "value", f"negative AC reading {_show(raw)}: an AC reading is an "
                         "RMS value and cannot be below zero")
        return number, (sign if over else 0)

    def above_diode_test_top(self, line, raw, number, meter):
        """A diode test the row's meter could not display: above the top of its diode test.

        The display stops at ``diode_test_max`` (or the open-circuit voltage if
        lower) and shows OL above it (docs/meter-model.md), so a higher figure
        came from a meter whose diode test reads further than the profile
        says: judged against this profile it would be taken as a junction
        reading where the profile's meter shows OL.  Only with meter profiles
        given to the reader (the command line always gives them).
        """
        profile = self.profile(meter)
        top = diode_test_display_limit(profile)
        step = float(meter_model.resolution(profile, "diode-test", top))
        if number > (top + step / 2.0) * (1.0 + 1e-9):
            self.problem(line, "value", f"diode test {_show(raw)} is above the top of the "
                         f"diode-test display of meter profile '{profile.name}' "
                         f"({format_value(top, 'V')}; above it that meter shows OL): if your "
                         "meter's diode test reads higher, describe it in a meter profile "
                         "(diode_test_max, diode_test_voltage; docs/meter-model.md), give it "
                         "with --meters and name it in the row's meter column")

    def profile(self, meter) -> MeterProfile:
        """The profile a row's meter names (the built-in default when not known here)."""
        meters = self.meters or {}
        return meters.get(meter or "default") or meters.get("default") or DEFAULT_METER

    def meter(self, line, raw):
        if not raw or raw.lower() == "default":
            return None
        if self.meters is not None and raw not in self.meters:
            named = [m for m in self.meters if m != "default"]
            have = ", ".join(named) if named else "none besides the default"
            self.problem(line, "meter", f"unknown meter {_show(raw)}{_did_you_mean(raw, named)}: "
                         f"the meter profiles are {have}")
        return raw

    def against_circuit(self, line, quantity, mode, plus, minus, part):
        """Check names against the circuit; return (plus, minus) with minus defaulted."""
        circuit = self.circuit
        if quantity == "voltage" or (quantity in ("resistance", "diode-test") and part is None):
            if minus is None:
                minus = circuit.ground
                if plus == minus:
                    self.problem(line, "plus", f"plus is the ground node {_show(plus)} and minus "
                                 "is empty (ground): the meter would read nothing")
            for column, node in (("plus", plus), ("minus", minus)):
                if not circuit.has_node(node):
                    self.problem(line, column, f"node {_show(node)} is not in the circuit"
                                 + _hint(node, circuit.nodes, "nodes"))
        if part is not None:
            if not circuit.has_part(part):
                refs = [p.ref for p in circuit.parts]
                self.problem(line, "part", f"part {_show(part)} is not in the circuit"
                             + _hint(part, refs, "parts"))
            elif quantity == "diode-test" and circuit.part(part).kind in ("npn", "pnp"):
                self.problem(line, "part", _which_junction(circuit.part(part)))
            elif KINDS[circuit.part(part).kind].nodes != 2:
                kind = circuit.part(part).kind
                self.problem(line, "part", f"{part} is {_article(kind)} {kind} with "
                             f"{KINDS[kind].nodes} terminals: a {quantity} reading needs a "
                             "two-terminal part")
        if mode == "ac" and not circuit.has_ac:
            self.problem(line, "mode", "an AC reading, but the circuit has no AC source: "
                         "write dc, or add the AC source to the circuit file")
        return plus, minus


def _article(kind: str) -> str:
    """``a`` or ``an`` as the kind is said aloud: an opamp, an npn, an LED, a pnp."""
    return "an" if kind[0] in "aeiou" or kind in ("npn", "led") else "a"


def _which_junction(q) -> str:
    """The message for a diode test naming a transistor by ``part``: which junction?"""
    c, b, e = q.nodes
    if q.kind == "npn":
        be, bc = f"plus {b}, minus {e}", f"plus {b}, minus {c}"
    else:
        be, bc = f"plus {e}, minus {b}", f"plus {c}, minus {b}"
    return (f"{q.ref} is {_article(q.kind)} {q.kind} transistor with two junctions: a diode test names the "
            f"junction by its probes' nodes, not by part. Base-emitter forward: {be}; "
            f"base-collector forward: {bc} (leave part empty)")


def diode_test_allowance(profile: MeterProfile, value: float) -> float:
    """How far below zero a diode-test display may be and still read "about zero".

    Parameters
    ----------
    profile : MeterProfile
        The meter the reading was taken with.
    value : float
        The display in volts (negative when this matters).

    Returns
    -------
    float
        ``a + r / 2`` as in :func:`zero_allowance`, with the meter's
        diode-test accuracy (``diode_test``) and display step: a shorted
        junction, read with a meter inside its specification, shows a few
        counts either side of 0 V; further below zero the display is not the
        meter's test current through a junction (an external voltage:
        the circuit is powered or a capacitor is charged).
    """
    return _below_zero_allowance(profile, "diode-test", value)


def zero_allowance(profile: MeterProfile, value: float) -> float:
    """How far below zero a resistance display may be and still read "about zero".

    Parameters
    ----------
    profile : MeterProfile
        The meter the reading was taken with.
    value : float
        The display in ohms (negative when this matters).

    Returns
    -------
    float
        ``a + r / 2``: the meter's specification limit ``a`` at the display
        (:func:`faultfind.engine.meter.spec_limit`) plus half its display
        step ``r``.  A meter within its specification shows a true 0 Ω
        within that distance of zero (the bound of
        :func:`faultfind.engine.meter.simulate`); a meter whose leads were
        nulled (relative mode) shows such small negative values on a short.
        A display further below zero is not a resistance.
    """
    return _below_zero_allowance(profile, "resistance", value)


def _below_zero_allowance(profile, quantity, value) -> float:
    """``a + r / 2`` of ``quantity``'s display at ``value`` (spec limit plus half a step)."""
    a = meter_model.spec_limit(profile, quantity, None, value)
    r = meter_model.resolution(profile, quantity, value)
    return float(a + r / 2.0) * (1.0 + 1e-9)  # 1e-9: a display exactly at the bound is inside


def _unit_message(exc, raw, what) -> str:
    """A UnitError's message, or a short one when it would quote a very long cell."""
    if len(raw) <= _SHOW_AT_MOST:
        return exc.message
    return f"cannot read {what} {_show(raw)}: not a number with a unit"


def _hint(name, choices, what) -> str:
    """``; did you mean 'A'?`` and/or the full list when it is short."""
    choices = list(choices)
    bits = []
    same = [c for c in choices if c.lower() == name.lower()]
    close = same or (len(name) <= _CLOSE_WORD_AT_MOST and len(choices) <= _CLOSE_CHOICES_AT_MOST
                     and difflib.get_close_matches(name, choices, n=1))
    if close:
        bits.append(f"did you mean {_show(close[0])}?" + (" (names are case-sensitive)"
                                                      if same else ""))
    if len(choices) <= _LIST_AT_MOST:
        bits.append(f"the circuit's {what} are {', '.join(choices)}")
    return "; " + "; ".join(bits) if bits else ""


# -- writing -----------------------------------------------------------------------------


def _number_text(x: float) -> str:
    """Shortest plain decimal that reads back as exactly ``x`` (no exponent)."""
    return np.format_float_positional(float(x), unique=True, trim="-")


def _check_readings(readings) -> list[Reading]:
    if isinstance(readings, (str, bytes, Reading)):
        raise TypeError("readings must be a sequence of faultfind.model.Reading")
    try:
        items = list(readings)
    except TypeError:
        raise TypeError(f"readings must be a sequence of faultfind.model.Reading, "
                        f"not {type(readings).__name__}") from None
    for i, r in enumerate(items):
        if not isinstance(r, Reading):
            raise TypeError(f"readings[{i}] is a {type(r).__name__}, not a Reading")
        if r.quantity not in QUANTITIES:
            raise ReadingsError(f"readings[{i}] has quantity {_show(r.quantity)}: expected "
                                "voltage, current, resistance or diode-test", line=r.line,
                                key="quantity")
    return items


def _value_text(r: Reading) -> str:
    if r.raw:
        return r.raw
    if r.overrange:
        return "-OL" if r.overrange < 0 else "OL"
    if r.value is None or not math.isfinite(r.value):
        return ""
    return _number_text(r.value)


def readings_to_frame(readings) -> pd.DataFrame:
    """The readings as a table of text cells, exactly as :func:`write_readings` writes them.

    Parameters
    ----------
    readings : sequence of Reading

    Returns
    -------
    pandas.DataFrame
        One row per reading, all cells str (empty for None).  Columns
        ``quantity, mode, plus, minus, part, setup, value, label`` always,
        with ``frequency`` and ``meter`` before ``label`` when any reading
        has one.  ``value`` is ``raw`` when set, else ``OL``/``-OL`` or the
        number in SI units (shortest exact decimal); ``mode`` is empty for
        resistance and diode-test.

    Raises
    ------
    TypeError
        ``readings`` is not a sequence of Reading.
    ReadingsError
        A reading with an unknown quantity.
    """
    items = _check_readings(readings)
    columns = [c for c in COLUMNS if c in _ALWAYS
               or (c == "frequency" and any(r.frequency is not None for r in items))
               or (c == "meter" and any(r.meter for r in items))]
    rows = []
    for r in items:
        cells = {
            "quantity": r.quantity,
            "mode": "" if r.quantity in ("resistance", "diode-test") else (r.mode or ""),
            "plus": r.plus or "", "minus": r.minus or "", "part": r.part or "",
            "setup": (r.setup or "") if r.quantity == "resistance" else "",
            "value": _value_text(r),
            "frequency": "" if r.frequency is None else _number_text(r.frequency),
            "meter": r.meter or "", "label": r.label or "",
        }
        rows.append([cells[c] for c in columns])
    return pd.DataFrame(rows, columns=columns, dtype=object)


def write_readings(readings, path_or_buffer) -> None:
    """Write readings as a readings file that :func:`load_readings` reads back.

    Parameters
    ----------
    readings : sequence of Reading
    path_or_buffer : str, os.PathLike or text file object
        Where to write: a path (written as UTF-8 without a byte-order mark,
        replacing the file) or an open text stream.

    Notes
    -----
    ``load_readings(path)`` of the written file gives back the same
    readings apart from ``line`` (and labels' surrounding spaces, which the
    loader strips).  Cells are quoted as RFC 4180 does where needed.

    Raises
    ------
    TypeError
        ``readings`` is not a sequence of Reading.
    ReadingsError
        A reading with an unknown quantity, or the file cannot be written.
    """
    frame = readings_to_frame(readings)
    if isinstance(path_or_buffer, (str, os.PathLike)):
        try:
            frame.to_csv(path_or_buffer, index=False, lineterminator="\n", encoding="utf-8")
        except OSError as exc:
            raise ReadingsError(f"cannot write the readings file: {exc.strerror or exc}",
                                file=os.fspath(path_or_buffer)) from None
    elif hasattr(path_or_buffer, "write"):
        frame.to_csv(path_or_buffer, index=False, lineterminator="\n")
    else:
        raise TypeError("path_or_buffer must be a path or a text stream, not "
                        f"{type(path_or_buffer).__name__}")


def reading_to_row(reading) -> dict:
    """A reading as the JSON object of the command line (cli.md).

    Parameters
    ----------
    reading : Reading

    Returns
    -------
    dict
        Exactly the keys ``quantity, mode, plus, minus, part, setup,
        frequency, unit``: ``mode`` None for resistance and diode-test,
        ``setup`` None unless resistance, ``unit`` ``"V"``, ``"A"`` or ``"Ω"``
        (a diode test's unit is ``"V"``).

    Raises
    ------
    TypeError
        ``reading`` is not a Reading.
    ReadingsError
        An unknown quantity.
    """
    if not isinstance(reading, Reading):
        raise TypeError(f"reading must be a faultfind.model.Reading, not "
                        f"{type(reading).__name__}")
    if reading.quantity not in QUANTITIES:
        raise ReadingsError(f"quantity {_show(reading.quantity)}: expected voltage, current, "
                            "resistance or diode-test", line=reading.line, key="quantity")
    resistance = reading.quantity == "resistance"
    return {
        "quantity": reading.quantity,
        "mode": None if reading.quantity in ("resistance", "diode-test") else reading.mode,
        "plus": reading.plus,
        "minus": reading.minus,
        "part": reading.part,
        "setup": reading.setup if resistance else None,
        "frequency": reading.frequency,
        "unit": QUANTITY_UNITS[reading.quantity],
    }
