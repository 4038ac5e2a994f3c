"""SPICE-style netlists read into a :class:`~faultfind.model.Circuit` (``faultfind import``).

A netlist is the plain-text interchange schematic editors export.  This module
reads the SPICE syntax as ngspice does (ngspice manual, chapter 2, "Circuit
description"), maps what faultfind can represent and reports every line it
cannot; docs/importing-netlists.md is the user's guide.

The syntax read:

* The first line is the title, whatever it holds.  ``.end`` ends the netlist
  (later lines are ignored, as SPICE does).  ``*`` starts a comment line,
  ``;`` (and `` $ ``) an end-of-line comment; a line starting with ``+``
  continues the one before it.  Names, keywords and suffixes are
  case-insensitive; node ``0`` (or ``gnd``) is ground.
* Numbers take the SPICE scale factors, case-insensitive: ``t`` 1e12, ``g``
  1e9, ``meg`` 1e6, ``k`` 1e3, ``m`` 1e-3 (so ``M`` is milli too), ``mil``
  25.4e-6, ``u`` (or ``µ``) 1e-6, ``n`` 1e-9, ``p`` 1e-12, ``f`` 1e-15; any
  letters after the number and scale factor are ignored (``10uF``,
  ``1kohm``), and so are digits: ``4k7`` is 4 k in SPICE, with a warning.
* ``R``, ``C``, ``L`` (value, ``m=`` and ``scale=`` applied), ``V`` and ``I``
  (``DC x``, a bare value, ``AC mag [phase]``, ``SIN(0 amp freq ...)``),
  ``E`` (a linear voltage-controlled voltage source with one output node on
  ground: an op-amp with that open-loop gain), ``X`` instances of
  ``.subckt`` definitions (flattened: refs ``X1.R2``, inner nodes ``X1.n3``).
* ``D`` (diodes, with their ``.model`` card of type ``D``: a diode, LED or
  zener) and ``Q`` (bipolar transistors, ``.model`` type ``NPN`` or
  ``PNP``), mapped by :mod:`faultfind.io.netlist_models`; the model
  parameters faultfind does not use are named in a warning.
* Everything else -- other element letters, ``.model`` cards of other
  types, ``.param``, ``.include``, analysis and output commands,
  ``.control`` blocks -- is listed as not mapped, with its line.

Tolerances are not in a netlist: every part takes its kind's default
(:data:`faultfind.model.KINDS`), and the circuit's notes say so.
"""

from __future__ import annotations

import dataclasses
import math
import os
import re
import textwrap
from dataclasses import dataclass, field

from faultfind.errors import CircuitError
from faultfind.io.circuit_file import circuit_warnings, parse_circuit
from faultfind.io.circuit_writer import circuit_text
from faultfind.io.netlist_models import Model, diode_part, parse_model, transistor_fields
from faultfind.io.netlist_syntax import (GROUND, OTHER_ELEMENTS, TRANSIENT, Line, NetlistError,
                                         logical_lines, reason_for_command, split_params,
                                         spice_number)
from faultfind.io.textfile import read_text
from faultfind.model import KINDS, Circuit, Part

__all__ = ["NetlistError", "Unmapped", "Imported", "spice_number", "parse_netlist",
           "load_netlist"]


@dataclass(frozen=True)
class Unmapped:
    """A netlist line that did not become a part.

    Attributes
    ----------
    line : int
        1-based line in the netlist file (the first line of a continued line).
    element : str or None
        The element's name as a flattened ref (``D1``, ``X1.Q2``); None for a
        command line (``.model``, ``.op``, ...).
    text : str
        The line as written (continuations joined by a space, comments cut).
    reason : str
        Why it was not mapped, in words a technician understands.
    """

    line: int
    element: str | None
    text: str
    reason: str


@dataclass(frozen=True)
class Imported:
    """A netlist read into a circuit.

    Attributes
    ----------
    circuit : Circuit
        The mapped parts, ground ``"0"``, every tolerance the kind's default.
    unmapped : tuple of Unmapped
        Every line not mapped, in file order (elements of a subcircuit once
        per instance).
    warnings : tuple of str
        ``"line 7: R3: ..."`` sentences: values SPICE reads differently from
        a schematic's marking, parameters ignored, and what ``faultfind
        check`` would say of the result.
    defaults : dict
        The default tolerance ``(below, above)`` each mapped kind took.
    elements : int
        Element lines read (after flattening), mapped or not.
    check_error : str or None
        None when the circuit passes the circuit-file checks; else the first
        check's message (the file is still written, to be fixed by hand or in
        the editor).
    """

    circuit: Circuit
    unmapped: tuple[Unmapped, ...]
    warnings: tuple[str, ...]
    defaults: dict = field(default_factory=dict)
    elements: int = 0
    check_error: str | None = None


class _Reader:
    """One pass over one netlist; collects parts, unmapped lines and warnings."""

    def __init__(self, text: str, source: str, frequency):
        self.source = source
        self.frequency = frequency
        self.title, self.lines, self.after_end = logical_lines(text, source)
        self.parts: list[Part] = []
        self.refs: dict[str, str] = {}
        self.nodes: dict[str, str] = {}
        self.unmapped: list[Unmapped] = []
        self.warnings: list[str] = []
        self.subckts: dict[str, tuple] = {}
        self.elements = 0
        self.ac_lines: list[tuple[int, str]] = []
        self.frequencies: list[tuple[int, float, str]] = []   # (line, Hz, where from)
        self.ac_command: tuple[int, list] | None = None
        self.instantiated: set[str] = set()
        self.models: dict[str, Model] = {}

    def fail(self, message, line):
        raise NetlistError(message, file=self.source, line=line)

    def skip(self, ln: Line, reason: str, element=None, where=""):
        self.unmapped.append(Unmapped(ln.number, element, ln.text, reason + where))

    def warn(self, ln: Line, element: str, message: str):
        self.warnings.append(f"line {ln.number}: {element}: {message}")

    # -- structure --------------------------------------------------------------
    def read(self):
        first = self.title.split()
        if len(first) >= 4 and first[0][0].lower() in "rclvi" and \
                spice_number(first[3]) is not None:
            self.warnings.append(f"line 1: {first[0]}: the first line of a netlist is its "
                                 "title, so this element is not read; put a title line above it")
        top = self.collect_subckts()
        for ln in top:
            word = ln.tokens[0].lower()
            if word.startswith("."):
                self.command(ln, word)
            else:
                self.element(ln, "", {}, (), "")
        for model in self.models.values():
            if not model.used and model.type in _SEMI_MODELS:
                self.warnings.append(f"line {model.line}: model {model.name} is defined but no "
                                     "element uses it")
        for key, (name, _ports, header, _body, _params) in self.subckts.items():
            if key not in self.instantiated:
                self.warnings.append(f"line {header}: subcircuit {name} is defined but no X "
                                     "line uses it")
        self.unmapped.sort(key=lambda u: u.line)
        if self.after_end:
            self.warnings.append(f"{self.after_end} line(s) after .end ignored (as SPICE "
                                 "ignores them)")
        return self

    def collect_subckts(self):
        top, current, control = [], None, None
        for ln in self.lines:
            word = ln.tokens[0].lower()
            if control is not None:
                if word == ".endc":
                    self.unmapped.append(Unmapped(control.number, None, control.text,
                                                  f"a .control block (lines {control.number}-"
                                                  f"{ln.number}): simulator commands, not "
                                                  "part of the circuit"))
                    control = None
                continue
            if word == ".control":
                control = ln
                continue
            if word == ".model":
                self.model_card(ln)
                continue
            if word == ".subckt":
                if current is not None:
                    self.fail(f"a .subckt inside .subckt {current[0]} (line {current[2]}): "
                              "nested subcircuit definitions are not supported; move it out",
                              ln.number)
                positional, params = split_params(ln.tokens[1:])
                if not positional:
                    self.fail(".subckt needs a name and its port nodes", ln.number)
                has_params = bool(params) or any(t.lower() == "params:" for t in positional)
                ports = [t for t in positional[1:] if t.lower() != "params:"]
                current = (positional[0], ports, ln.number, [], has_params)
                continue
            if word == ".ends":
                if current is None:
                    self.fail(".ends with no .subckt before it", ln.number)
                key = current[0].lower()
                if key in self.subckts:
                    self.fail(f"subcircuit {current[0]} is defined twice (first at line "
                              f"{self.subckts[key][2]})", current[2])
                self.subckts[key] = current
                current = None
                continue
            if current is not None and word.startswith("."):
                self.skip(ln, reason_for_command(word) + f" (inside .subckt {current[0]})")
                continue
            (current[3] if current is not None else top).append(ln)
        if current is not None:
            self.fail(f".subckt {current[0]} has no .ends", current[2])
        if control is not None:
            self.fail(".control has no .endc", control.number)
        return top

    def model_card(self, ln: Line):
        model, problems = parse_model(ln.tokens, ln.number)
        if model is None:
            self.skip(ln, problems[0])
            return
        for problem in problems:
            self.warnings.append(f"line {ln.number}: model {model.name}: {problem}")
        if model.type not in _SEMI_MODELS:
            self.skip(ln, f"a model card of type {model.type.upper()}, which faultfind does "
                          "not map (it maps D, NPN and PNP models)")
            return
        key = model.name.lower()
        if key in self.models:
            self.warnings.append(f"line {ln.number}: model {model.name} is defined again "
                                 f"(first at line {self.models[key].line}): the first is used")
            return
        self.models[key] = model

    def command(self, ln: Line, word: str):
        if word == ".title":
            self.title = ln.text[len(ln.tokens[0]):].strip()
            return
        if word == ".ac":
            self.ac_command = (ln.number, ln.tokens[1:])
        self.skip(ln, reason_for_command(word))

    def node(self, name: str, prefix: str, ports: dict) -> str:
        low = name.lower()
        if low in GROUND:
            return "0"
        if low in ports:
            return ports[low]
        spelled = prefix + name
        return self.nodes.setdefault(spelled.lower(), spelled)

    # -- elements ---------------------------------------------------------------
    def element(self, ln: Line, prefix: str, ports: dict, stack: tuple, where: str):
        name = ln.tokens[0]
        letter = name[0].lower()
        ref = prefix + name
        if letter == "x":
            self.instance(ln, prefix, ports, stack, where)
            return
        self.elements += 1
        if letter not in "rclviedq":
            reason = OTHER_ELEMENTS.get(letter, f"an element of type {name[0]!r}, unknown to "
                                         "SPICE")
            self.skip(ln, reason, ref, where)
            return
        if "{" in ln.text or "'" in ln.text:
            self.skip(ln, "a parameter expression: .param is not read; write the number",
                      ref, where)
            return
        if ref.lower() in self.refs:
            self.skip(ln, f"a second element named {ref} (the first is kept)", ref, where)
            return
        positional, params = split_params(ln.tokens)
        if letter == "e":
            part = self.vcvs(ln, ref, positional, params, prefix, ports, where)
        elif letter in "dq":
            part = self.semiconductor(ln, ref, letter, positional, params, prefix, ports, where)
        else:
            if len(positional) < 3:
                self.fail(f"{name} needs two nodes" + ("" if letter in "vi" else " and a value"),
                          ln.number)
            a, b = (self.node(n, prefix, ports) for n in positional[1:3])
            if a == b:
                self.skip(ln, f"both ends on node {a}: the part is shorted by its own wiring",
                          ref, where)
                return
            if letter in "rcl":
                part = self.passive(ln, ref, letter, positional[3:], params, (a, b), where)
            else:
                part = self.supply(ln, ref, letter, ln.tokens[3:], (a, b))
        if part is None:
            return
        if not where and ln.comment:
            part = dataclasses.replace(part, label=ln.comment)
        self.refs[ref.lower()] = ref
        self.parts.append(part)

    def value(self, ln, ref, token, what):
        got = spice_number(token)
        if got is None:
            self.fail(f"{ref}: {what} {token!r} is not a number", ln.number)
        value, scale, tail = got
        if any(ch.isdigit() for ch in tail):
            self.warn(ln, ref, f"{token!r} reads as {_g(value)} in SPICE (the digits after the "
                               f"scale factor are ignored); if the marking means "
                               f"{_rkm_hint(token)}, write that and import again")
        elif scale == "M":
            self.warn(ln, ref, f"{token!r} is {_g(value)} (milli) in SPICE; mega is 'Meg'")
        elif scale == "F" and not tail:
            self.warn(ln, ref, f"{token!r} is {_g(value)} (femto) in SPICE")
        elif tail.lower() not in _UNIT_WORDS:
            self.warn(ln, ref, f"{tail!r} after the number in {token!r} is ignored")
        return value

    def passive(self, ln, ref, letter, rest, params, nodes, where):
        kind = {"r": "resistor", "c": "capacitor", "l": "inductor"}[letter]
        key = {"r": ("r", "resistance"), "c": ("c", "capacitance"),
               "l": ("l", "inductance")}[letter]
        if rest and rest[0][:1] in "0123456789.+-" and spice_number(rest[0]) is None:
            self.fail(f"{ref}: value {rest[0]!r} is not a number", ln.number)
        raw = rest[0] if rest and spice_number(rest[0]) is not None else None
        for k in key:
            if raw is None and k in params:
                raw = params.pop(k)
        if raw is None:
            self.skip(ln, f"no value on this {kind} (a model-based part is not mapped)", ref,
                      where)
            return None
        value = self.value(ln, ref, raw, "value")
        for extra in rest[1:] if rest and rest[0] == raw else rest:
            self.warn(ln, ref, f"{extra!r} (a model name) is ignored")
        m = self.value(ln, ref, params.pop("m"), "m") if "m" in params else 1.0
        scale = self.value(ln, ref, params.pop("scale"), "scale") if "scale" in params else 1.0
        params.pop("noisy", None)
        params.pop("ic", None)          # an initial condition: no effect on steady state
        for k in params:
            self.warn(ln, ref, f"parameter {k}= is ignored")
        value = value * scale * (m if letter == "c" else 1.0 / m) if m else value
        if not value > 0 or not math.isfinite(value):
            self.skip(ln, f"a {kind} of {_g(value)}: faultfind needs a value above 0", ref,
                      where)
            return None
        return Part(ref, kind, nodes, value, *KINDS[kind].default_tolerance)

    def supply(self, ln, ref, letter, rest, nodes):
        kind = "voltage-source" if letter == "v" else "current-source"
        dc = ac = None
        phase = 0.0
        tran = None
        i = 0
        while i < len(rest):
            t = rest[i].lower()
            nxt = rest[i + 1] if i + 1 < len(rest) else None
            if t == "=":
                i += 1
                continue
            if t == "dc":
                j = i + 2 if nxt == "=" else i + 1
                if j >= len(rest) or spice_number(rest[j]) is None:
                    self.fail(f"{ref}: DC needs a value", ln.number)
                dc = self.value(ln, ref, rest[j], "DC value")
                i = j + 1
            elif t == "ac":
                j = i + 1
                ac = 1.0                  # SPICE: AC with no magnitude is 1
                if j < len(rest) and spice_number(rest[j]) is not None:
                    ac = self.value(ln, ref, rest[j], "AC magnitude")
                    j += 1
                    if j < len(rest) and spice_number(rest[j]) is not None:
                        phase = self.value(ln, ref, rest[j], "AC phase")
                        j += 1
                i = j
            elif t in TRANSIENT:
                j, args = i + 1, []
                if j < len(rest) and rest[j] == "(":
                    j += 1
                    while j < len(rest) and rest[j] != ")":
                        if rest[j] != ",":
                            args.append(rest[j])
                        j += 1
                    j += 1
                else:
                    while j < len(rest) and spice_number(rest[j]) is not None:
                        args.append(rest[j])
                        j += 1
                tran = (t, [self.value(ln, ref, a, t.upper() + " argument") for a in args])
                i = j
            elif i == 0 and spice_number(rest[i]) is not None:
                dc = self.value(ln, ref, rest[i], "value")
                i += 1
            elif t in ("distof1", "distof2"):
                i += 1
                while i < len(rest) and spice_number(rest[i]) is not None:
                    i += 1
            else:
                self.warn(ln, ref, f"{rest[i]!r} is ignored")
                i += 1
        if tran is not None and ac is None and (dc is None or dc == 0) and tran[0] == "sin":
            args = tran[1] + [0.0] * (6 - len(tran[1]))
            offset, amplitude, freq, _delay, damping, sin_phase = args[:6]
            if offset == 0 and damping == 0 and freq > 0:
                ac, phase = amplitude / math.sqrt(2.0), sin_phase
                self.frequencies.append((ln.number, freq, f"{ref}'s SIN"))
                self.warn(ln, ref, f"SIN amplitude {_g(amplitude)} taken as an AC source of "
                                   f"{_g(ac)} RMS at {_g(freq)} Hz")
                tran = None
        if tran is not None:
            self.warn(ln, ref, f"the {tran[0].upper()}(...) waveform is ignored (faultfind "
                               "reads DC and steady AC)")
        if ac is not None and ac != 0 and not dc:
            if ac < 0:
                ac, phase = -ac, phase + 180.0
            self.ac_lines.append((ln.number, ref))
            value, waveform = ac, "ac"
        else:
            if ac:
                self.warn(ln, ref, f"the AC part ({_g(ac)}) is not used: a faultfind source is "
                                   "DC or AC; draw a second source for the other")
            if dc is None:
                self.warn(ln, ref, "no value: taken as 0, as SPICE does")
            value, waveform, phase = (dc or 0.0), "dc", 0.0
            if kind == "voltage-source" and value == 0:
                self.warn(ln, ref, "a 0 V source (an ammeter in SPICE) is mapped as a 0 V "
                                   "voltage source; replace it with a wire if that is what it is")
        if kind == "current-source":
            # SPICE: current flows from n+ through the source to n-, so it leaves the
            # source at n-; faultfind drives it out of nodes[0] (formats.md)
            nodes = (nodes[1], nodes[0])
        return Part(ref, kind, nodes, float(value), *KINDS[kind].default_tolerance,
                    waveform=waveform, phase=float(phase))

    def vcvs(self, ln, ref, positional, params, prefix, ports, where):
        words = {t.lower() for t in ln.tokens[1:]}
        if words & {"poly", "value", "vol", "table", "laplace", "freq", "cur"} or params:
            self.skip(ln, "a non-linear or behavioural controlled source", ref, where)
            return None
        if len(positional) != 6:
            self.fail(f"{ref}: a voltage-controlled voltage source takes 4 nodes and a gain "
                      f"(E out+ out- in+ in- gain); this one has {len(positional) - 1} fields",
                      ln.number)
        out_p, out_m, in_p, in_m = (self.node(n, prefix, ports) for n in positional[1:5])
        gain = self.value(ln, ref, positional[5], "gain")
        if out_p == "0" and out_m != "0":          # output upside down: swap the inputs
            out_p, out_m, in_p, in_m = out_m, out_p, in_m, in_p
        if out_m != "0" or out_p == "0":
            self.skip(ln, "a controlled source whose output is not referred to ground "
                          "(faultfind's op-amp output is)", ref, where)
            return None
        if gain == 0:
            self.skip(ln, "a controlled source of gain 0", ref, where)
            return None
        if gain < 0:
            in_p, in_m, gain = in_m, in_p, -gain
        return Part(ref, "opamp", (in_p, in_m, out_p), gain=gain)

    def semiconductor(self, ln, ref, letter, positional, params, prefix, ports, where):
        """A D or Q element as a diode/LED/zener or npn/pnp part (None: skipped)."""
        positional = [t for t in positional if t != ","]
        count = 2 if letter == "d" else 3
        if len(positional) < count + 2:
            what = "two nodes" if letter == "d" else "three nodes (collector base emitter)"
            self.fail(f"{ref}: a {'diode' if letter == 'd' else 'transistor'} needs {what} "
                      "and a model name", ln.number)
        at = count + 1
        if letter == "q" and positional[at].lower() not in self.models \
                and len(positional) > at + 1 and positional[at + 1].lower() in self.models:
            self.warn(ln, ref, f"substrate node {positional[at]} is not used (faultfind's "
                               "transistor has three terminals)")
            at += 1
        name = positional[at]
        model = self.models.get(name.lower())
        if model is None:
            self.skip(ln, f"no .model {name} in this netlist (a library's model is not read)",
                      ref, where)
            return None
        wanted = ("d",) if letter == "d" else ("npn", "pnp")
        if model.type not in wanted:
            self.skip(ln, f"model {model.name} is of type {model.type.upper()}, not "
                          f"{' or '.join(w.upper() for w in wanted)}", ref, where)
            return None
        area = 1.0
        rest = positional[at + 1:]
        if rest and spice_number(rest[0]) is not None:
            area = self.value(ln, ref, rest.pop(0), "area")
        for key in ("area", "m"):
            if key in params:
                area *= self.value(ln, ref, params.pop(key), key)
        if not (area > 0 and math.isfinite(area)):
            self.skip(ln, f"an area factor of {_g(area)}: it must be above 0", ref, where)
            return None
        for extra in rest:
            if extra.lower() != "off":
                self.warn(ln, ref, f"{extra!r} is ignored")
        for key in params:
            self.warn(ln, ref, f"parameter {key}= is ignored")
        nodes = tuple(self.node(n, prefix, ports) for n in positional[1:count + 1])
        if len(set(nodes)) == 1:
            self.skip(ln, f"every terminal on node {nodes[0]}: the part is shorted by its own "
                          "wiring", ref, where)
            return None
        if letter == "d" and nodes[0] == nodes[1]:
            self.skip(ln, f"both ends on node {nodes[0]}: the part is shorted by its own "
                          "wiring", ref, where)
            return None
        first_use = not model.used
        model.used = True
        if letter == "d":
            kind, fields, warnings = diode_part(model, area)
        else:
            got = transistor_fields(model, area)
            kind, fields, warnings = (model.type, got[0], got[1]) if got[0] is not None \
                else (None, got[1], [])
        if kind is None:
            self.skip(ln, fields, ref, where)
            return None
        if first_use:
            for text in warnings:
                self.warnings.append(f"line {model.line}: {text}")
        fields = {k: _round(v) for k, v in fields.items()}
        if fields.get("series_resistance") == 0.0:
            del fields["series_resistance"]
        if kind in ("npn", "pnp"):
            return Part(ref, kind, nodes, None, 0.0, 0.0, **fields)
        value = fields.pop("value")
        return Part(ref, kind, nodes, value, *KINDS[kind].default_tolerance, **fields)

    def instance(self, ln, prefix, ports, stack, where):
        positional, params = split_params(ln.tokens)
        ref = prefix + positional[0]
        if len(positional) < 2:
            self.fail(f"{positional[0]}: a subcircuit instance needs its nodes and the "
                      "subcircuit's name", ln.number)
        sub = self.subckts.get(positional[-1].lower())
        if sub is None:
            self.elements += 1
            self.skip(ln, f"no .subckt {positional[-1]} in this netlist (a library's "
                          "subcircuit is not read)", ref, where)
            return
        name, sub_ports, header, body, has_params = sub
        if has_params or params:
            self.elements += 1
            self.skip(ln, f"subcircuit {name} takes parameters, which are not read", ref, where)
            return
        if name.lower() in stack:
            self.fail(f"subcircuit {name} contains itself (through "
                      f"{' -> '.join(stack + (name.lower(),))})", ln.number)
        nodes = positional[1:-1]
        if len(nodes) != len(sub_ports):
            self.fail(f"{positional[0]}: subcircuit {name} (line {header}) has "
                      f"{len(sub_ports)} ports, this instance gives {len(nodes)} nodes",
                      ln.number)
        self.instantiated.add(name.lower())
        inner = {p.lower(): self.node(n, prefix, ports) for p, n in zip(sub_ports, nodes)}
        here = f" (in subcircuit {name}, instance {ref} at line {ln.number})"
        for body_line in body:
            self.element(body_line, ref + ".", inner, stack + (name.lower(),), here)

    # -- the result ---------------------------------------------------------------
    def circuit_frequency(self):
        if not self.ac_lines:
            return self.frequency
        if self.frequency is not None:
            return self.frequency
        line, ref = self.ac_lines[0]
        if self.ac_command is not None:
            cmd_line, args = self.ac_command
            numbers = [spice_number(a) for a in args]
            numbers = [n[0] for n in numbers if n is not None]
            if len(numbers) >= 3 and numbers[-2] == numbers[-1] and numbers[-1] > 0:
                return numbers[-1]
        found = {f for _, f, _ in self.frequencies}
        if len(found) == 1 and len(self.frequencies) == len(self.ac_lines):
            return found.pop()
        self.fail(f"{ref} is an AC source but the netlist gives no single frequency for it "
                  "(a .ac line with one frequency, or a SIN source): give one with "
                  "--frequency", line)


# What may follow a number as its unit without a warning (SPICE ignores it anyway).
_UNIT_WORDS = {"", "ohm", "ohms", "r", "ω", "f", "farad", "h", "henry", "v", "volt", "volts",
               "a", "amp", "amps", "hz", "s", "w", "deg"}


# Model types mapped to parts.
_SEMI_MODELS = ("d", "npn", "pnp")
# Significant digits of a value computed from a model card: 1e-5 relative, far
# inside any tolerance and the 0.2 % the engine is checked to.
_MODEL_DIGITS = 6


def _round(x: float) -> float:
    return float(f"{x:.{_MODEL_DIGITS}g}")


def _g(x: float) -> str:
    return f"{x:.6g}"


def _rkm_hint(token: str) -> str:
    m = re.match(r"^([0-9]*)(meg|[tgkmunpfr])([0-9]+)", token, re.IGNORECASE)
    if not m:
        return "something else"
    whole, letter, frac = m.groups()
    letter = "" if letter.lower() == "r" else letter
    return f"{whole or '0'}.{frac}{letter}"


def _notes(source: str, reader: _Reader, kinds) -> str:
    name = os.path.basename(source)
    lines = [f"Imported from the netlist {name} by faultfind import."]
    defaults = ", ".join(f"{k} {_percent(KINDS[k].default_tolerance)}" for k in kinds)
    lines.append("Tolerances are not in a netlist: every part has its kind's default "
                 f"({defaults}); replace them with the parts' real tolerances.")
    if any(p.is_semiconductor for p in reader.parts):
        lines.append("Diode and transistor values were worked out from their .model cards "
                     "at 25 °C: forward or zener voltage at the test current, gain and vbe.")
    if any(p.is_source for p in reader.parts):
        lines.append('Sources are off_state = "open" (what an ohmmeter sees with power off); '
                     'set "short" for a transformer winding or a generator output.')
    if reader.unmapped:
        refs = [u.element for u in reader.unmapped if u.element]
        if refs:
            shown = ", ".join(refs[:12]) + (f" and {len(refs) - 12} more" if len(refs) > 12
                                            else "")
            lines.append(f"Not mapped: {shown} (see the import's messages).")
    return "\n".join(textwrap.fill(line, 76, break_on_hyphens=False) for line in lines) + "\n"


def _percent(tol) -> str:
    low, high = tol
    return f"±{low * 100:g} %" if low == high else f"-{low * 100:g} %/+{high * 100:g} %"


def parse_netlist(text: str, source: str = "<string>", *, frequency: float | None = None
                  ) -> Imported:
    """Read a netlist's text into a circuit.

    Parameters
    ----------
    text : str
        The netlist (SPICE syntax, see the module docstring).
    source : str, optional
        The file's name, for messages and the circuit's notes.
    frequency : float, optional
        The frequency of the AC sources in hertz; without it, a ``.ac`` line
        with one frequency or the sources' ``SIN`` frequency.

    Returns
    -------
    Imported

    Raises
    ------
    NetlistError
        Naming the file and line: an empty netlist, a continuation line with
        nothing before it, an element line without its nodes or with a value
        that is not a number, ``.subckt`` without ``.ends`` (or nested, or
        recursive), an instance with the wrong number of nodes, an AC source
        without a frequency, or nothing that maps to a part.
    TypeError
        ``text`` or ``source`` is not a str.
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    if not isinstance(source, str):
        raise TypeError(f"source must be a str, not {type(source).__name__}")
    if frequency is not None and not (isinstance(frequency, (int, float))
                                      and math.isfinite(frequency) and frequency > 0):
        raise NetlistError(f"frequency must be a number of hertz above 0, not {frequency!r}",
                           key="--frequency")
    text = text[1:] if text.startswith("\ufeff") else text
    if not text.strip():
        raise NetlistError("the netlist is empty", file=source, line=1)
    reader = _Reader(text, source, frequency).read()
    if not reader.parts:
        listed = "\n".join(f"  line {u.line}: {u.text}  -- {u.reason}"
                           for u in reader.unmapped[:20])
        more = f"\n  and {len(reader.unmapped) - 20} more" if len(reader.unmapped) > 20 else ""
        first = reader.unmapped[0].line if reader.unmapped else 1
        raise NetlistError("nothing in the netlist maps to a part faultfind knows (resistors, "
                           "capacitors, inductors, sources, linear controlled sources, "
                           "diodes and bipolar transistors with their .model cards)"
                           + (":\n" + listed + more if listed else ": it holds no elements"),
                           file=source, line=first)
    freq = reader.circuit_frequency()
    kinds = list(dict.fromkeys(p.kind for p in reader.parts if KINDS[p.kind].unit is not None))
    circuit = Circuit(title=reader.title, ground="0", parts=tuple(reader.parts), frequency=freq,
                      notes=_notes(source, reader, kinds), source=None)
    warnings = list(reader.warnings)
    check_error = None
    try:
        checked = parse_circuit(circuit_text(circuit), source="imported circuit")
    except CircuitError as err:
        check_error = err.message
        where = f" ({err.part})" if err.part else ""
        warnings.append(f"the imported circuit does not pass faultfind's checks yet{where}: "
                        f"{check_error}")
    else:
        warnings.extend(circuit_warnings(checked))
    return Imported(circuit=circuit, unmapped=tuple(reader.unmapped), warnings=tuple(warnings),
                    defaults={k: KINDS[k].default_tolerance for k in kinds},
                    elements=reader.elements, check_error=check_error)


def load_netlist(path, *, frequency: float | None = None) -> Imported:
    """Read a netlist file (UTF-8; see :func:`parse_netlist`).

    Raises
    ------
    NetlistError
        The file is missing, unreadable or not UTF-8, or see :func:`parse_netlist`.
    """
    text = read_text(path, NetlistError, "netlist", hint="save it as UTF-8 (or ASCII)")
    return parse_netlist(text, source=os.fspath(path), frequency=frequency)
