"""Circuit files (TOML, formats.md section 1) read into a :class:`~faultfind.model.Circuit`.

Every mistake a file can hold is reported as a :class:`~faultfind.errors.CircuitError`
naming the file, the line and the part or key; docs/circuit-files.md is the
user's guide to the format as this module reads it.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import sys
import tomllib

from faultfind.engine.topology import dangling_nodes, floating_nodes, voltage_loops
from faultfind.errors import CircuitError, UnitError
from faultfind.io.fast_toml import loads_subset
from faultfind.io.junction_keys import (JUNCTION_KEYS, KEYS_OF, TERMINALS, key_problem,
                                       series_drop_problem)
from faultfind.io.textfile import read_text
from faultfind.model import KINDS, Circuit, Part
from faultfind import units

__all__ = ["load_circuit", "parse_circuit", "circuit_warnings", "PART_KEYS", "TOP_KEYS"]

#: Keys allowed at the top of a circuit file.
TOP_KEYS = ("format", "title", "ground", "frequency", "notes", "part")

_SOURCE_KEYS = ("off_state", "waveform", "phase")
_PLAIN = ("ref", "kind", "nodes", "value", "tolerance", "label")

#: Keys a ``[[part]]`` of each kind may hold.
PART_KEYS: dict[str, tuple[str, ...]] = {
    "resistor": _PLAIN,
    "capacitor": _PLAIN,
    "inductor": _PLAIN + ("resistance",),
    "fuse": _PLAIN,
    "switch": _PLAIN + ("state",),
    "voltage-source": _PLAIN + _SOURCE_KEYS + ("current_limit",),
    "current-source": _PLAIN + _SOURCE_KEYS,
    "opamp": ("ref", "kind", "nodes", "gain", "label"),
    # Semiconductors (formats.md section 4; faultfind.io.junction_keys).
    "diode": _PLAIN[:-1] + KEYS_OF["diode"] + ("label",),
    "led": _PLAIN[:-1] + KEYS_OF["led"] + ("label",),
    "zener": _PLAIN[:-1] + KEYS_OF["zener"] + ("label",),
    "npn": ("ref", "kind", "nodes") + KEYS_OF["npn"] + ("label",),
    "pnp": ("ref", "kind", "nodes") + KEYS_OF["pnp"] + ("label",),
}
_ALL_PART_KEYS = frozenset(k for keys in PART_KEYS.values() for k in keys)
_ALLOWED = {kind: frozenset(keys) for kind, keys in PART_KEYS.items()}
# Who a key is for, for "does not apply" messages.
_KEY_OWNER = {
    "off_state": "sources", "waveform": "sources", "phase": "AC sources",
    "state": "switches", "resistance": "inductors (winding resistance)",
    "gain": "opamps and transistors (npn, pnp)", "current_limit": "voltage sources",
    "value": "every kind but opamp, npn and pnp",
    "tolerance": "every kind but opamp, npn and pnp",
    "test_current": "diodes, LEDs and zeners", "ideality": "diodes, LEDs and zeners",
    "series_resistance": "diodes, LEDs and zeners", "reverse_leakage": "diodes and LEDs",
    "forward_voltage": "zeners (a diode's or LED's forward voltage is its value)",
    "vbe": "transistors (npn, pnp)",
}
_ENUMS = {"off_state": ("open", "short"), "waveform": ("dc", "ac"), "state": ("closed", "open")}
# Kinds whose value must be > 0.
_POSITIVE = frozenset(("resistor", "capacitor", "inductor", "fuse", "switch", "diode", "led",
                       "zener"))
# Kinds without a value (and so without a tolerance).
_NO_VALUE = frozenset(("opamp", "npn", "pnp"))

_HEADER_RE = re.compile(r"""^[ \t]*\[\[[ \t]*(?:part|"part"|'part')[ \t]*\]\]""")
_TOML_POS_RE = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")
_TOML_END_RE = re.compile(r"\s*\(at end of document\)\s*$")
_LONG_NUMBER_RE = re.compile(r"[0-9_]{%d,}" % (sys.get_int_max_str_digits() + 1))
# Messages quote a value up to this many characters; a longer one is cut.
_SHOW_AT_MOST = 60


def load_circuit(path) -> Circuit:
    """Read a circuit file.

    Parameters
    ----------
    path : str or os.PathLike
        The circuit file (TOML, UTF-8; a leading byte-order mark is allowed).

    Returns
    -------
    Circuit
        The circuit, with ``source`` set to ``str(path)`` and each part's
        ``line`` set to its ``[[part]]`` header.

    Raises
    ------
    CircuitError
        The file is missing, unreadable or not UTF-8, or its content is not a
        valid circuit (see :func:`parse_circuit`).
    TypeError
        ``path`` is not a str or path-like object.
    """
    text = read_text(path, CircuitError, "circuit file")
    name = os.fspath(path)
    return parse_circuit(text, source=name)


def parse_circuit(text: str, source: str = "<string>") -> Circuit:
    """Read a circuit from the text of a circuit file.

    Parameters
    ----------
    text : str
        The file's content (formats.md, section 1).
    source : str, optional
        Name of the file, used in messages and stored as ``Circuit.source``.

    Returns
    -------
    Circuit
        Values in SI units; tolerances as relative fractions (an absolute
        tolerance is divided by the magnitude of the nominal value); a kind's
        default tolerance from :data:`faultfind.model.KINDS` where the file
        gives none; fuse, switch, diode and LED values default to
        ``KINDS[kind].default_value``; an opamp's ``value`` is None and its
        ``gain`` the number given or None.  Semiconductors (formats.md
        section 4): the keys of :data:`faultfind.io.junction_keys.KEYS_OF`
        in SI units, None where the file gives none (``Part.junction``
        fills in the defaults); a transistor's ``value`` is None.

    Raises
    ------
    CircuitError
        On the first mistake found, naming ``source``, the line and the part
        or key: TOML syntax; unknown, missing or misplaced keys; ``format``
        not 1; unknown kind; duplicate ref; wrong node count or bad node
        names; a value or tolerance that does not parse, has the wrong unit
        or an impossible sign (a zener's value, a semiconductor key out of
        its limits: :func:`faultfind.io.junction_keys.key_problem`); bad
        ``off_state``/``waveform``/``state``; an
        AC source without ``frequency``; ``ground`` on no part; a node with
        no DC path to ground; a loop of voltage sources, op-amp outputs and
        ideal inductors.
    TypeError
        ``text`` or ``source`` is not a str.
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    if not isinstance(source, str):
        raise TypeError(f"source must be a str, not {type(source).__name__}")
    return _Reader(text, source).read()


class _Reader:
    """One pass over one file's text; holds the file name and line map for messages."""

    def __init__(self, text: str, source: str):
        text = text[1:] if text.startswith("\ufeff") else text
        # Line ends: CRLF (Windows) is TOML already; a lone CR (old Mac) is read as one too.
        self.text = text.replace("\r\n", "\n").replace("\r", "\n") if "\r" in text else text
        self.source = source
        self.lines = self.text.split("\n")
        # Values repeat from part to part ("4k7", "5%"): parse each text once.
        self.cache: dict[tuple, object] = {}

    def cached(self, parse, *args):
        key = (parse, *args)
        try:
            return self.cache[key]
        except KeyError:
            result = self.cache[key] = parse(*args)
            return result

    # -- messages -----------------------------------------------------------
    def fail(self, message, *, line=None, part=None, key=None):
        raise CircuitError(message, file=self.source, line=line, part=part, key=key)

    def top_line(self, key):
        """Line of a top-level key's assignment or table header (None if not found)."""
        assign = re.compile(r"""^[ \t]*(["']?)%s\1[ \t]*[.=]""" % re.escape(key))
        header = re.compile(r"""^[ \t]*\[\[?[ \t]*(["']?)%s\1[ \t]*[\].]""" % re.escape(key))
        in_tables = False
        for i, line in enumerate(self.lines, 1):
            if header.match(line):
                return i
            if line.lstrip().startswith("["):
                in_tables = True
            elif not in_tables and assign.match(line):
                return i
        return None

    def deepest_line(self):
        """Line holding the most opening brackets and braces (the deep nesting)."""
        counts = [line.count("[") + line.count("{") for line in self.lines]
        return 1 + max(range(len(counts)), key=counts.__getitem__) if counts else None

    def first_line(self, pattern):
        """First line matching ``pattern`` (None if none does)."""
        return next((i for i, line in enumerate(self.lines, 1) if pattern.search(line)), None)

    def part_lines(self, count):
        lines = [i for i, line in enumerate(self.lines, 1) if _HEADER_RE.match(line)]
        return lines if len(lines) == count else [None] * count

    # -- the file -----------------------------------------------------------
    def read(self) -> Circuit:
        try:
            doc = loads_subset(self.text)  # fast path for plain files; None: use tomllib
            if doc is None:
                doc = tomllib.loads(self.text)
        except tomllib.TOMLDecodeError as err:
            self.syntax_error(str(err))
        except RecursionError:  # tomllib recurses once per level of nested arrays/tables
            self.fail("TOML nested too deeply (arrays or inline tables inside one another "
                      "hundreds of levels deep): this is not a circuit file",
                      line=self.deepest_line())
        except ValueError as err:  # an integer too long for int() (sys.int_info)
            if "digits" not in str(err):
                raise
            self.fail(f"a number with more than {sys.get_int_max_str_digits():,} digits: "
                      "this is not a value a circuit file can hold",
                      line=self.first_line(_LONG_NUMBER_RE))
        for key in doc:
            if key not in TOP_KEYS:
                hint = _did_you_mean(key, TOP_KEYS)
                self.fail(f"unknown top-level key '{key}'{hint}", line=self.top_line(key), key=key)

        fmt = doc.get("format")
        if fmt is None:
            self.fail("missing 'format' (write format = 1 at the top)", key="format")
        if type(fmt) is not int or fmt != 1:
            self.fail(f"format must be 1 (the only version this faultfind reads), not {_show(fmt)}",
                      line=self.top_line("format"), key="format")
        title = self.text_key(doc, "title")
        notes = self.text_key(doc, "notes")
        if "ground" not in doc:
            self.fail("missing 'ground' (the reference node, e.g. ground = \"0V\")", key="ground")
        ground = doc["ground"]
        if not _good_name(ground):
            self.fail(f"ground must be a node name (non-empty text without leading or "
                      f"trailing spaces), not {_show(ground)}", line=self.top_line("ground"),
                      key="ground")
        frequency = self.frequency(doc)

        tables = doc.get("part")
        if tables is None:
            self.fail("the file has no [[part]] tables", key="part")
        if not isinstance(tables, list):
            self.fail("'part' must be a list of tables: write each part under its own [[part]]",
                      line=self.top_line("part"), key="part")
        lines = self.part_lines(len(tables))
        seen: dict[str, int | None] = {}
        parts = []
        for i, table in enumerate(tables):
            part = self.part(table, i, lines[i], ground)
            if part.ref in seen:
                where = f" (first at line {seen[part.ref]})" if seen[part.ref] else ""
                self.fail(f"duplicate ref '{part.ref}'{where}", line=part.line,
                          part=part.ref, key="ref")
            seen[part.ref] = part.line
            parts.append(part)

        circuit = Circuit(title=title, ground=ground, parts=tuple(parts), frequency=frequency,
                          notes=notes, source=self.source)
        self.check_whole(circuit)
        return circuit

    def syntax_error(self, message):
        m = _TOML_POS_RE.search(message)
        if m:
            line = int(m.group(1))
            message = f"TOML syntax error: {message[:m.start()]} (column {m.group(2)})"
        else:
            line = max(1, len(self.lines) - (self.lines[-1] == ""))   # the last line
            message = "TOML syntax error: " + _TOML_END_RE.sub(" at the end of the file", message)
        self.fail(message, line=line)

    def text_key(self, doc, key):
        value = doc.get(key, "")
        if not isinstance(value, str):
            self.fail(f"{key} must be text in quotes, not {_show(value)}", line=self.top_line(key),
                      key=key)
        return value

    def frequency(self, doc):
        if "frequency" not in doc:
            return None
        raw = doc["frequency"]
        line = self.top_line("frequency")
        value = self.number(raw, lambda t: units.parse_frequency(t), line=line, key="frequency")
        if not value > 0:
            self.fail(f"frequency must be above 0 Hz, not {_show(raw)}", line=line, key="frequency")
        return value

    def number(self, raw, parse, *, line, key, part=None):
        """A TOML number taken as is, or a string through ``parse``; finite or an error."""
        if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
            self.fail(f"{key} must be a number or text such as \"4k7\", not {_show(raw)}",
                      line=line, part=part, key=key)
        if isinstance(raw, str):
            try:
                value = parse(raw)
            except UnitError as err:
                self.fail(_unit_message(err, raw, key), line=line, part=part, key=key)
        else:
            try:
                value = float(raw)
            except OverflowError:  # an integer beyond the float range (above 1e308)
                value = math.inf
        if not math.isfinite(value):
            self.fail(f"{key} must be a finite number, not {_show(raw)}", line=line, part=part,
                      key=key)
        return value

    # -- one part -----------------------------------------------------------
    def part(self, table, index, line, ground) -> Part:
        if not isinstance(table, dict):
            self.fail(f"part #{index + 1} must be a table of keys, not {_show(table)}", line=line,
                      key="part")
        if "ref" not in table:
            self.fail(f"part #{index + 1} has no 'ref' (its reference designator)", line=line,
                      key="ref")
        ref = table["ref"]
        if not _good_name(ref):
            self.fail("ref must be non-empty text without leading or trailing spaces, not "
                      f"{_show(ref)}", line=line, key="ref")

        def fail(message, key):
            self.fail(message, line=line, part=ref, key=key)

        if "kind" not in table:
            fail("missing 'kind' (one of " + ", ".join(KINDS) + ")", "kind")
        kind = table["kind"]
        if not isinstance(kind, str) or kind not in _ALLOWED:
            fail(f"unknown kind {_show(kind)}{_did_you_mean(kind, KINDS)}; the kinds are "
                 + ", ".join(KINDS), "kind")
        info = KINDS[kind]
        allowed = _ALLOWED[kind]
        for key in table:
            if key in allowed:
                continue
            if key in _ALL_PART_KEYS:
                fail(f"'{key}' does not apply to {_a(kind)} (it is for {_KEY_OWNER[key]})", key)
            hint = _did_you_mean(key, sorted(allowed))
            if key in TOP_KEYS:
                hint += " (top-level keys must come before the first [[part]])"
            fail(f"unknown key '{key}' in {_a(kind)}{hint}", key)

        nodes = self.nodes(table, info, ground, fail)
        fields = dict(ref=ref, kind=kind, nodes=nodes, line=line, label=table.get("label", ""))
        if not isinstance(fields["label"], str):
            fail(f"label must be text in quotes, not {_show(fields['label'])}", "label")

        if kind not in _NO_VALUE:
            for key in ("off_state", "waveform", "state"):
                if key in table:
                    fields[key] = self.enum(table[key], key, fail)
            if kind in ("voltage-source", "current-source"):
                self.source_extras(table, fields, fail)
            value = self.value(table, kind, fields, fail)
            fields["value"] = value
            fields["tol_low"], fields["tol_high"] = self.tolerance(table, kind, value, fail)
            if "resistance" in table:
                r = self.number(table["resistance"], lambda t: units.parse_value(
                    t, "Ω", what="resistance"), line=line, part=ref, key="resistance")
                if not r > 0:
                    fail("resistance (winding) must be above 0 Ω, not "
                         f"{_show(table['resistance'])}; leave it out for an ideal winding",
                         "resistance")
                fields["resistance"] = r
        if "gain" in table:
            fields["gain"] = self.gain(table["gain"], fail,
                                       "150" if kind in ("npn", "pnp") else "2e5")
        for key in KEYS_OF.get(kind, ()):
            if key in table and key != "gain":
                fields[key] = self.junction_key(table[key], key, fields, fail)
        if "current_limit" in table:
            fields["current_limit"] = self.current_limit(table["current_limit"], fields, fail)
        part = Part(**fields)
        problem = series_drop_problem(part)
        if problem is not None:
            fail(problem, "series_resistance")
        return part

    def nodes(self, table, info, ground, fail):
        if "nodes" not in table:
            fail(f"missing 'nodes' (a list of {info.nodes} node names)", "nodes")
        nodes = table["nodes"]
        what = f"{info.nodes} node names"
        if info.name in TERMINALS:
            what += " [" + ", ".join(TERMINALS[info.name]) + "]"
        if not isinstance(nodes, list):
            fail(f"nodes must be a list of {what}, not {_show(nodes)}", "nodes")
        if len(nodes) != info.nodes:
            fail(f"{_a(info.name)} takes {what}; this one lists {len(nodes)}", "nodes")
        for n in nodes:
            if not _good_name(n):
                hint = f' (write "{n}" in quotes)' if isinstance(n, (int, float)) else ""
                fail(f"node {_show(n)} is not a node name: non-empty text without leading or "
                     f"trailing spaces{hint}", "nodes")
        if info.nodes == 2 and nodes[0] == nodes[1]:
            fail(f"both ends are on node '{nodes[0]}' (the part is shorted by its own wiring)",
                 "nodes")
        if info.nodes == 3 and info.name != "opamp" and len(set(nodes)) == 1:
            fail(f"all three terminals are on node '{nodes[0]}' (the part is shorted by its "
                 "own wiring)", "nodes")
        if info.name == "opamp" and nodes[2] == ground:
            fail(f"the output is on the ground node '{ground}'; an op-amp output is referred "
                 "to ground, so it would be shorted", "nodes")
        return tuple(nodes)

    def enum(self, raw, key, fail):
        choices = _ENUMS[key]
        if raw not in choices:
            fail(f"{key} must be " + " or ".join(f'"{c}"' for c in choices)
                 + f", not {_show(raw)}", key)
        return raw

    def source_extras(self, table, fields, fail):
        if "phase" in table:
            if fields.get("waveform", "dc") != "ac":
                fail('phase applies only to an AC source (waveform = "ac")', "phase")
            fields["phase"] = self.number(table["phase"], units.parse_phase,
                                          line=fields["line"], part=fields["ref"], key="phase")

    def value(self, table, kind, fields, fail):
        info = KINDS[kind]
        waveform = fields.get("waveform", "dc")
        if "value" not in table:
            if kind == "zener":
                fail("missing 'value': a zener needs its breakdown (zener) voltage at its "
                     "test_current, e.g. value = \"5.1 V\" for a BZX79-C5V1", "value")
            if info.default_value is None:
                fail(f"missing 'value' ({_a(kind)} needs one, in {info.unit})", "value")
            return info.default_value
        raw = table["value"]
        value = self.number(raw, lambda t: self.cached(units.parse_value, t, info.unit),
                            line=fields["line"], part=fields["ref"], key="value")
        if kind == "zener" and not value > 0:
            fail(f"a zener's value is its breakdown voltage as a number above 0 V, not "
                 f"{_show(raw)}: the direction comes from nodes [anode, cathode], so a 5.1 V "
                 "zener is value = \"5.1 V\" with its cathode on the positive side", "value")
        if kind in ("diode", "led") and not value > 0:
            fail(f"{_a(kind)}'s value is its forward voltage at test_current, above 0 V, not "
                 f"{_show(raw)}; the direction comes from nodes [anode, cathode]", "value")
        if kind in _POSITIVE and not value > 0:
            fail(f"{_a(kind)}'s value must be above 0 {info.unit}, not {_show(raw)}", "value")
        if waveform == "ac" and value < 0:
            fail(f"an AC source's value is its RMS, which cannot be negative ({_show(raw)}); "
                 "use phase = \"180 deg\" to invert it", "value")
        return value

    def tolerance(self, table, kind, value, fail):
        info = KINDS[kind]
        if "tolerance" not in table:
            return info.default_tolerance
        raw = table["tolerance"]
        if not isinstance(raw, str):
            fail(f"tolerance must be text such as \"5%\" or \"±0.2 V\", not {_show(raw)}",
                 "tolerance")
        try:
            low, high = self.cached(units.parse_tolerance, raw, value, info.unit)
        except UnitError as err:
            fail(_unit_message(err, raw, "tolerance"), "tolerance")
        if not (math.isfinite(low) and math.isfinite(high) and low >= 0 and high >= 0):
            fail(f"tolerance {_show(raw)} does not give finite limits of 0 or more", "tolerance")
        if kind in _POSITIVE and low >= 1:
            fail(f"tolerance {_show(raw)} reaches 100 % or more below nominal, i.e. a value of "
                 "0 or less", "tolerance")
        return float(low), float(high)

    def gain(self, raw, fail, example="2e5"):
        if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
            fail(f"gain must be a plain number such as {example}, not {_show(raw)}", "gain")
        try:
            gain = float(raw)
        except OverflowError:
            gain = math.inf
        except ValueError:
            fail(f"gain must be a plain number such as {example} (no unit, no dB), not "
                 f"{_show(raw)}", "gain")
        if not (math.isfinite(gain) and gain > 0):
            fail(f"gain must be a finite number above 0, not {_show(raw)}", "gain")
        return gain

    def junction_key(self, raw, key, fields, fail):
        """A semiconductor key (faultfind.io.junction_keys): a number, finite, in its limits."""
        spec = JUNCTION_KEYS[key]
        value = self.number(raw, lambda t: units.parse_value(t, spec.unit, what=key),
                            line=fields["line"], part=fields["ref"], key=key)
        problem = key_problem(key, value)
        if problem is not None:
            fail(f"{problem}, not {_show(raw)}", key)
        return value

    def current_limit(self, raw, fields, fail):
        """A voltage source's current limit: a current in A, finite and above 0."""
        limit = self.number(raw, lambda t: units.parse_value(t, "A", what="current_limit"),
                            line=fields["line"], part=fields["ref"], key="current_limit")
        if not limit > 0:
            fail(f"current_limit must be above 0 A, not {_show(raw)}; leave it out for a supply "
                 "whose limit is not known", "current_limit")
        return limit

    # -- the whole circuit ----------------------------------------------------
    def check_whole(self, circuit: Circuit):
        ground = circuit.ground
        parts = circuit.parts
        if not parts:
            self.fail("the file has no [[part]] tables", key="part")
        # Op-amp outputs are referred to ground too, but a ground no part names is
        # far more often a misspelling: the ground must be in some part's nodes.
        if not any(ground in p.nodes for p in parts):
            self.fail(f"ground node '{ground}' is not on any part", line=self.top_line("ground"),
                      key="ground")
        if circuit.frequency is None:
            for p in parts:
                if p.is_source and p.waveform == "ac":
                    self.fail("an AC source needs a top-level frequency (e.g. frequency = "
                              "\"50 Hz\")", line=p.line, part=p.ref, key="frequency")
        floating = floating_nodes(circuit)
        if floating:
            self.floating_error(circuit, floating)
        loops = voltage_loops(circuit)
        if loops:
            self.loop_error(circuit, loops[0])

    def floating_error(self, circuit, floating):
        first = floating[0]
        touching = [p for p in circuit.parts if first in p.nodes]
        names = ", ".join(_terminal(p, first) for p in touching[:8])
        if len(touching) > 8:
            names += f" and {len(touching) - 8} more"
        more = ""
        if len(floating) > 1:
            others = ", ".join(f"'{n}'" for n in floating[1:6])
            if len(floating) > 6:
                others += f" and {len(floating) - 6} more"
            more = f"; also floating: {others}"
        self.fail(f"node '{first}' has no DC path to ground '{circuit.ground}' (floating): it "
                  f"connects only through {names}{more}. Capacitors, current sources, open "
                  "switches and op-amp inputs carry no steady current; draw the resistance the "
                  "board really has there, or check the node's spelling",
                  line=touching[0].line, part=touching[0].ref)

    def loop_error(self, circuit, loop):
        loop_parts = [circuit.part(r) for r in loop]
        refs = ", ".join(loop[:12]) + (f" and {len(loop) - 12} more" if len(loop) > 12 else "")
        ideal = [p for p in loop_parts if p.kind == "inductor"]
        if ideal:
            L = ideal[0]
            self.fail(f"{L.ref} is an ideal inductor, a short at DC, so the loop ({refs}) is made "
                      f"only of zero-impedance branches; give {L.ref} its winding resistance "
                      f"(resistance = \"...\", from its datasheet or a lifted-leg reading)",
                      line=L.line, part=L.ref, key="resistance")
        head = loop_parts[0]
        if any(p.kind == "opamp" for p in loop_parts):
            self.fail(f"a loop made only of voltage sources and op-amp outputs ({refs}); an "
                      "op-amp output is a voltage source to ground", line=head.line, part=head.ref)
        self.fail(f"a loop made only of voltage sources ({refs}): they fix the same voltage "
                  "twice and the current round the loop is undetermined; check their nodes, or "
                  "draw the wiring or internal resistance between them", line=head.line,
                  part=head.ref)


def _terminal(part, node):
    if part.kind in TERMINALS:
        which = TERMINALS[part.kind][part.nodes.index(node)]
        return f"{part.ref} ({which})"
    if part.kind == "switch" and part.state == "open":
        return f"{part.ref} (open)"
    return part.ref


def _a(kind: str) -> str:
    """``a resistor``, ``an inductor``, ``an npn``, ``an led``: as the kind is said aloud."""
    return ("an " if kind[0] in "aeiou" or kind in ("npn", "led") else "a ") + kind


def _good_name(name) -> bool:
    return isinstance(name, str) and name != "" and name == name.strip()


def _unit_message(err, raw: str, key: str) -> str:
    """A UnitError's message, or a short one when it would quote a very long text."""
    if len(raw) <= _SHOW_AT_MOST:
        return err.message
    return f"cannot read {key} {_show(raw)}: not a number with a unit"


def _show(value) -> str:
    """``repr(value)`` for a message, cut to about :data:`_SHOW_AT_MOST` characters."""
    shown = repr(value)
    if len(shown) <= _SHOW_AT_MOST:
        return shown
    return f"{shown[:_SHOW_AT_MOST - 4]}... ({len(shown):,} characters)"


def _did_you_mean(word, choices) -> str:
    if not isinstance(word, str) or len(word) > 40:  # difflib is quadratic in the length
        return ""
    close = difflib.get_close_matches(word, list(choices), n=1)
    return f" (did you mean '{close[0]}'?)" if close else ""


def circuit_warnings(circuit: Circuit) -> list[str]:
    """Things legal in a circuit but worth a second look.

    Parameters
    ----------
    circuit : Circuit
        A circuit, usually from :func:`load_circuit`.

    Returns
    -------
    list of str
        One sentence each, in this order:

        - a node only one terminal touches (a test point, or a misspelt
          node name): ``node 'TP9' is touched only by R4 ...``;
        - node names, or refs, that differ only in letter case;
        - a fuse or closed switch straight across a non-zero voltage source
          (a short of that source, usually a part drawn on the wrong node);
        - a ``frequency`` given while no source is AC.
    """
    if not isinstance(circuit, Circuit):
        raise TypeError(f"circuit must be a faultfind.model.Circuit, not {type(circuit).__name__}")
    warnings = [f"node '{node}' is touched only by {ref} (fine for a test point; otherwise "
                "check the node's spelling)" for node, ref in dangling_nodes(circuit)]
    for what, names in (("nodes", circuit.nodes), ("refs", [p.ref for p in circuit.parts])):
        folded: dict[str, str] = {}
        for name in names:
            other = folded.setdefault(name.casefold(), name)
            if other != name:
                warnings.append(f"{what} '{other}' and '{name}' differ only in letter case; "
                                "faultfind treats them as different")
    sources: dict[frozenset, str] = {}
    for p in circuit.parts:
        if p.kind == "voltage-source" and p.value:
            sources.setdefault(frozenset(p.nodes), p.ref)
    for p in circuit.parts:
        if p.kind == "fuse" or (p.kind == "switch" and p.state == "closed"):
            src = sources.get(frozenset(p.nodes))
            if src is not None:
                warnings.append(f"{p.ref} ({p.kind}) sits straight across {src}, shorting it; "
                                "is one of its nodes wrong?")
    if circuit.frequency is not None and not circuit.has_ac:
        warnings.append(f"frequency is {circuit.frequency:g} Hz but no source has "
                        "waveform = \"ac\"; every AC reading of this circuit is 0")
    return warnings
