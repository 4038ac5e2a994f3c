"""The syntax of SPICE-style netlists: numbers, lines, commands (for :mod:`faultfind.io.netlist`).

As ngspice reads it (ngspice manual, chapter 2): the first line is the title;
``*`` comment lines; ``;`` and `` $ `` end-of-line comments; ``+`` continues
the line before; ``.end`` ends the netlist; numbers with the scale factors of
:data:`SCALE`, case-insensitive, any letters after them ignored.
"""

from __future__ import annotations

import decimal
import math
import re
from dataclasses import dataclass, field

from faultfind.errors import InputError

__all__ = ["NetlistError", "SCALE", "spice_number", "Line", "logical_lines", "split_params",
           "reason_for_command", "OTHER_ELEMENTS", "TRANSIENT", "GROUND"]


class NetlistError(InputError):
    """A netlist that cannot be read, or from which nothing can be mapped."""


# -- numbers --------------------------------------------------------------------

#: SPICE scale factors (ngspice manual, section 2.4 "Values"; case-insensitive).
SCALE = {"t": "1e12", "g": "1e9", "meg": "1e6", "k": "1e3", "mil": "25.4e-6", "m": "1e-3",
         "u": "1e-6", "µ": "1e-6", "n": "1e-9", "p": "1e-12", "f": "1e-15"}
_NUMBER = re.compile(r"^([+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)"
                     r"(meg|mil|[tgkmuµnpf])?(.*)$", re.IGNORECASE)


def spice_number(token: str) -> tuple[float, str, str] | None:
    """Read a SPICE number: ``(value, scale factor as written, ignored tail)``.

    Parameters
    ----------
    token : str
        ``"4.7k"``, ``"1Meg"``, ``"10uF"``, ``"1e-3"``, ``"4k7"``.

    Returns
    -------
    tuple or None
        The value (``"4k7"`` gives 4000.0 and tail ``"7"``, as SPICE reads
        it), or None when ``token`` does not start with a number.
    """
    if not isinstance(token, str):
        raise TypeError(f"token must be a str, not {type(token).__name__}")
    m = _NUMBER.match(token)
    if m is None:
        return None
    number, scale, tail = m.groups()
    # in decimal, so that 100n is the double nearest 1e-7 (not 100 * 1e-9)
    exact = decimal.Decimal(number) * decimal.Decimal(SCALE[scale.lower()] if scale else 1)
    try:
        value = float(exact)
    except (OverflowError, decimal.DecimalException):
        return None
    if not math.isfinite(value):
        return None
    return value, scale or "", tail


# -- lines ----------------------------------------------------------------------

@dataclass
class Line:
    """One logical line: its first line number, text (comments cut), comment, tokens."""

    number: int
    text: str
    comment: str
    tokens: list = field(default_factory=list)


_TOKEN = re.compile(r"[^\s=(),]+|[=(),]")
_COMMENT = re.compile(r";|\s\$\s|\s\$$")


def logical_lines(text: str, source: str):
    """(title, lines, lines after .end); continuation lines joined."""
    raw = text.split("\n")
    title = raw[0].rstrip("\r").strip() if raw else ""
    lines: list[Line] = []
    after_end = 0
    for number, line in enumerate(raw[1:], 2):
        line = line.rstrip("\r")
        stripped = line.strip()
        if not stripped or stripped.startswith("*"):
            continue
        m = _COMMENT.search(stripped)
        body, comment = (stripped[:m.start()], stripped[m.end():]) if m else (stripped, "")
        body, comment = body.strip(), comment.strip()
        if stripped.startswith("+"):
            if not lines:
                raise NetlistError("a continuation line ('+') with no element or command "
                                   "before it", file=source, line=number)
            lines[-1].text += " " + body[1:].strip()
            if comment:
                lines[-1].comment = (lines[-1].comment + " " + comment).strip()
            continue
        if not body:
            continue
        if body.lower().split()[0] == ".end":
            after_end = sum(1 for rest in raw[number:] if rest.strip()
                            and not rest.strip().startswith("*"))
            break
        lines.append(Line(number, body, comment))
    for ln in lines:
        ln.tokens = _TOKEN.findall(ln.text)
    return title, lines, after_end


def split_params(tokens):
    """Positional tokens and ``name = value`` parameters (names lower-cased)."""
    positional, params = [], {}
    i = 0
    while i < len(tokens):
        if i + 1 < len(tokens) and tokens[i + 1] == "=":
            params[tokens[i].lower()] = tokens[i + 2] if i + 2 < len(tokens) else ""
            i += 3
        else:
            positional.append(tokens[i])
            i += 1
    return positional, params


# -- commands and element types ------------------------------------------------

SIMULATOR = {".op", ".ac", ".dc", ".tran", ".noise", ".tf", ".sens", ".disto", ".pz",
              ".four", ".print", ".plot", ".save", ".probe", ".meas", ".measure", ".options",
              ".option", ".opt", ".temp", ".ic", ".nodeset", ".width", ".csparam", ".global",
              ".func", ".lib", ".endl", ".spiceinit"}
OTHER_ELEMENTS = {
    "b": "a behavioural source", "f": "a current-controlled current source",
    "g": "a voltage-controlled current source", "h": "a current-controlled voltage source",
    "k": "coupled inductors (a transformer): faultfind has no coupling",
    "s": "a voltage-controlled switch (draw a closed switch as a small resistor, leave an "
         "open one out)", "w": "a current-controlled switch",
    "m": "a MOSFET", "j": "a JFET", "z": "a MESFET", "t": "a transmission line",
    "o": "a lossy transmission line", "u": "a distributed RC line", "y": "a transmission line",
    "a": "an XSPICE code model", "n": "an OSDI device", "p": "a coupled transmission line",
}
TRANSIENT = {"pulse", "sin", "exp", "pwl", "sffm", "am", "trnoise", "trrandom"}
GROUND = {"0", "gnd"}


def reason_for_command(word: str) -> str:
    if word == ".model":
        return "a model card faultfind does not map"
    if word == ".param":
        return "a parameter: .param is not read; write the numbers into the element lines"
    if word in (".include", ".inc"):
        return "the file it names is not read: put its parts into this netlist"
    if word == ".title":
        return "the title"
    if word in SIMULATOR:
        return "a simulator command, not part of the circuit (faultfind works out its own " \
               "readings)"
    return f"a {word} command faultfind does not know"
