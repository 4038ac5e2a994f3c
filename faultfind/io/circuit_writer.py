"""Write a :class:`~faultfind.model.Circuit` as a circuit file in the canonical layout.

The canonical layout (docs/circuit-files.md, "The canonical layout"):

* the top-level keys ``format``, ``title``, ``ground``, ``frequency``,
  ``notes`` in that order (``title``, ``frequency`` and ``notes`` only when
  the circuit has them), then a blank line;
* one ``[[part]]`` table a part, in the circuit's order, blank lines between
  them, keys in the fixed order :data:`PART_KEY_ORDER`; a key is left out
  when the part holds the value the file would have given it anyway
  (``waveform = "dc"``, ``phase`` 0, no winding resistance, ...), except
  ``off_state`` of a source and ``state`` of a switch, which are always
  written because a technician should see them;
* values written the way a technician writes them: resistances as RKM codes
  of IEC 60062 (``"4k7"``, ``"470"``, ``"4R7"``, ``"R15"``, ``"2M2"``) or in
  milliohms (``"1.2 mΩ"``), capacitances with a bare prefix (``"100n"``,
  ``"4.7u"``), other quantities with prefix and unit (``"24 V"``,
  ``"12.8 mA"``, ``"2.2 mH"``, ``"50 Hz"``), tolerances in percent (``"1%"``,
  ``"-20%/+80%"``) or, when the percentage would need more than four
  significant digits, as the absolute amount it came from (``"±0.2 V"``).

Every number is written with enough digits that reading the file back gives
exactly the same float (the shortest decimal that round-trips, then moved to
the prefix), so load -> write -> load gives an equal circuit and write ->
load -> write gives the same bytes.  Each text is checked by reading it back
with :mod:`faultfind.units` before it is used.

Comments are not kept: :func:`lost_comments` lists the comments of a file's
text that a rewrite would drop, so that a caller can warn before saving.
"""

from __future__ import annotations

import dataclasses
import decimal
import math
import os
import tempfile

from faultfind.errors import CircuitError
from faultfind.io.junction_keys import JUNCTION_KEYS
from faultfind.model import KINDS, Circuit, Part
from faultfind import units

__all__ = ["PART_KEY_ORDER", "Comment", "circuit_text", "write_circuit", "value_text",
           "tolerance_text", "lost_comments", "same_content"]

#: The order of the keys in a ``[[part]]`` table (formats.md's table order; the
#: supply's ``current_limit`` beside the other source keys).
PART_KEY_ORDER = ("ref", "kind", "nodes", "value", "tolerance", "test_current",
                  "forward_voltage", "ideality", "series_resistance", "reverse_leakage",
                  "off_state", "waveform", "phase", "current_limit", "state", "resistance",
                  "gain", "vbe", "label")

# Part fields the writer handles (every dataclass field of Part but `line`, the
# place in the file, which a new file sets afresh).
_HANDLED_FIELDS = frozenset(PART_KEY_ORDER) - {"tolerance"} | {"tol_low", "tol_high"}

_PREFIX_LETTER = {-12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
# Significant digits up to which a resistance is written as an RKM code ("4k7");
# beyond it the decimal form ("4.70123k") reads better.
_RKM_DIGITS = 4
# A tolerance's percentage with more significant digits than this came from an
# absolute amount (0.2 V of 24 V is 0.8333... %): write the amount if it reads back.
_PERCENT_DIGITS = 4


# -- numbers ------------------------------------------------------------------

def _digits(x: float) -> tuple[int, str, int]:
    """``x`` as (sign, digits, exponent): ``x == sign * int(digits) * 10**exponent``.

    The digits are those of the shortest decimal that reads back as ``x``
    (Python's ``repr``), without trailing zeros.
    """
    d = decimal.Decimal(repr(float(x)))
    if d == 0:
        return 0, "0", 0
    sign, digit_tuple, exponent = d.normalize().as_tuple()
    return (-1 if sign else 1), "".join(map(str, digit_tuple)), exponent


def _place(digits: str, before: int) -> tuple[str, str]:
    """(integer part, fraction part) of ``digits`` with the point after ``before`` digits."""
    if before <= 0:
        return "0", "0" * (-before) + digits
    if before >= len(digits):
        return digits + "0" * (before - len(digits)), ""
    return digits[:before], digits[before:]


def _engineering(x: float) -> tuple[str, str, str, int] | None:
    """``x`` as (sign, integer part, fraction part, power of ten of the prefix).

    The prefix power is a multiple of 3 from -12 to 9 with an integer part of
    1 to 3 digits; None outside that range (and for 0, which has no prefix).
    """
    sign, digits, exponent = _digits(x)
    if sign == 0:
        return None
    first = len(digits) - 1 + exponent          # power of ten of the first digit
    power = 3 * (first // 3)
    if power not in _PREFIX_LETTER:
        return None
    whole, frac = _place(digits, first - power + 1)
    return ("-" if sign < 0 else ""), whole, frac, power


def _scientific(x: float) -> str:
    """``x`` in exponent form, ``1.5e-15``, exactly."""
    sign, digits, exponent = _digits(x)
    first = len(digits) - 1 + exponent
    mantissa = digits[0] + ("." + digits[1:] if len(digits) > 1 else "")
    return f"{'-' if sign < 0 else ''}{mantissa}e{first}"


def _plain_number(x: float) -> str:
    """A plain decimal number for ``x`` (no prefix), exactly: ``120``, ``-0.5``, ``1e-20``."""
    sign, digits, exponent = _digits(x)
    if sign == 0:
        return "0"
    first = len(digits) - 1 + exponent
    if not -7 <= first <= 15:
        return _scientific(x)
    whole, frac = _place(digits, first + 1)
    return f"{'-' if sign < 0 else ''}{whole}{'.' + frac if frac else ''}"


def _rkm_or_decimal(x: float) -> str:
    """A resistance in ohms as a technician writes it (see the module docstring)."""
    eng = _engineering(x)
    if eng is None:
        return _plain_number(x) if x == 0 else f"{_scientific(x)} Ω"
    sign, whole, frac, power = eng
    digits = len(_digits(x)[1])
    if sign or power < -3:                       # not a resistance a part has: plain form
        return f"{sign}{whole}{'.' + frac if frac else ''} {_PREFIX_LETTER[power]}Ω"
    if power == -3:
        if len(whole) == 3 and digits <= _RKM_DIGITS:   # 0.1 to 0.999 ohm: R15, R47
            return "R" + (whole + frac).rstrip("0")
        return f"{whole}{'.' + frac if frac else ''} mΩ"
    letter = "R" if power == 0 else _PREFIX_LETTER[power]
    if not frac:
        return whole + ("" if power == 0 else letter)   # 470, 22k, 1M
    if digits <= _RKM_DIGITS:
        return f"{whole}{letter}{frac}"                 # 4R7, 4k7, 2M2
    return f"{whole}.{frac}{_PREFIX_LETTER[power]}"     # 4.70123k


def value_text(value: float, unit: str) -> str:
    """A value as a technician writes it in a circuit file; reads back exactly.

    Parameters
    ----------
    value : float
        The value in SI units, finite.
    unit : str
        The kind's unit: ``"Ω"`` (RKM code ``"4k7"``, ``"R15"``, or
        ``"1.2 mΩ"``), ``"F"`` (bare prefix ``"100n"``; ``"500 mF"``, ``"1 F"``
        without one), or ``"H"``, ``"V"``, ``"A"``, ``"Hz"`` (``"2.2 mH"``,
        ``"24 V"``).  Outside the prefixes p..G the exponent form is used
        (``"1.5e-15 F"``).

    Returns
    -------
    str
        A text that :func:`faultfind.units.parse_value` reads back as exactly
        ``value``.

    Raises
    ------
    CircuitError
        ``value`` is not a finite number or ``unit`` is not one of the above.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise CircuitError(f"value must be a finite number, not {value!r}")
    if unit not in ("Ω", "F", "H", "V", "A", "Hz"):
        raise CircuitError(f"unit must be one of Ω F H V A Hz, not {unit!r}")
    value = float(value)
    if unit == "Ω":
        text = _rkm_or_decimal(value)
    else:
        eng = _engineering(value)
        if eng is None:
            text = f"{_plain_number(value) if value == 0 else _scientific(value)} {unit}"
        else:
            sign, whole, frac, power = eng
            number = f"{sign}{whole}{'.' + frac if frac else ''}"
            letter = _PREFIX_LETTER[power]
            if unit == "F" and letter in ("p", "n", "u"):
                text = number + letter
            else:
                text = f"{number} {letter}{unit}"
    if units.parse_value(text, unit) != value:    # never write what reads back otherwise
        text = f"{_plain_number(value)} {unit}"
    return text


def _percent(fraction: float) -> str:
    """A relative fraction as an exact percentage text, without the sign: ``2%``."""
    d = decimal.Decimal(repr(float(fraction))).scaleb(2).normalize()
    if d == 0:
        return "0%"
    if -6 <= d.adjusted() <= 12:
        text = format(d, "f")
    else:
        text = format(d, "e").replace("E", "e").replace("e+", "e")
    return text + "%"


def tolerance_text(below: float, above: float, nominal: float | None, unit: str | None) -> str:
    """A tolerance as a technician writes it; reads back as exactly ``(below, above)``.

    Parameters
    ----------
    below, above : float
        Relative tolerance below and above nominal (fractions, finite, >= 0).
    nominal : float or None
        The part's nominal value (for the absolute form).
    unit : str or None
        The kind's unit (for the absolute form).

    Returns
    -------
    str
        ``"1%"``, ``"-20%/+80%"``, or ``"±0.2 V"`` when the percentage would
        need more than four significant digits and the absolute amount reads
        back exactly.  :func:`faultfind.units.parse_tolerance` reads it back as
        ``(below, above)``.

    Raises
    ------
    CircuitError
        A side that is not a finite number >= 0.
    """
    for name, side in (("below", below), ("above", above)):
        if isinstance(side, bool) or not isinstance(side, (int, float)) \
                or not math.isfinite(side) or side < 0:
            raise CircuitError(f"tolerance {name} nominal must be a finite fraction >= 0, "
                               f"not {side!r}")
    below, above = float(below), float(above)
    if below >= 1:
        raise CircuitError(f"tolerance below nominal must be under 100 % (a part cannot go "
                           f"below zero), not {below!r}")
    if below == above:
        text = _percent(below)
        digits = len(_digits(below)[1].lstrip("0"))
        if digits > _PERCENT_DIGITS and nominal and unit and math.isfinite(nominal):
            absolute = _absolute(below, nominal, unit)
            if absolute is not None:
                text = absolute
    else:
        text = f"-{_percent(below)}/+{_percent(above)}"
    if units.parse_tolerance(text, nominal, unit) != (below, above):   # exact by construction
        raise CircuitError(f"tolerance {below!r}/{above!r} cannot be written exactly")
    return text


def _absolute(fraction: float, nominal: float, unit: str) -> str | None:
    """``±amount unit`` with the fewest digits that reads back as ``fraction``, or None."""
    amount = fraction * abs(nominal)
    if not (math.isfinite(amount) and amount > 0):
        return None
    for digits in range(1, 7):
        rounded = float(f"{amount:.{digits - 1}e}")
        text = "±" + value_text(rounded, unit)
        try:
            if units.parse_tolerance(text, nominal, unit) == (fraction, fraction):
                return text
        except units.UnitError:
            return None
    return None


# -- TOML text ----------------------------------------------------------------

_ESCAPES = {"\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r", '"': '\\"',
            "\\": "\\\\"}


def _control(ch: str) -> bool:
    return ch < " " or ch == "\x7f"


def _check_text(text) -> None:
    if not isinstance(text, str):
        raise CircuitError(f"names, labels and notes must be text, not {text!r}")
    if any("\ud800" <= ch <= "\udfff" for ch in text):
        raise CircuitError(f"text {text!r} holds a lone surrogate, which UTF-8 cannot store")


def _basic(text: str) -> str:
    """A TOML basic string (TOML 1.0.0, "String": escapes for quote, backslash, controls)."""
    _check_text(text)
    out = []
    for ch in text:
        if ch in _ESCAPES:
            out.append(_ESCAPES[ch])
        elif _control(ch):
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _multiline(text: str) -> str:
    """A TOML multi-line basic string that reads back as ``text`` (the newline after
    the opening quotes is trimmed by TOML, so one is written)."""
    _check_text(text)
    out = []
    for i, ch in enumerate(text):
        if ch == "\\":
            out.append("\\\\")
        elif ch == '"':
            # no run of quotes may reach three, nor touch the closing delimiter
            last = i == len(text) - 1
            out.append('\\"' if last or text[i + 1] == '"' else '"')
        elif ch in ("\n", "\t"):
            out.append(ch)
        elif ch == "\r":
            out.append("\\r")
        elif _control(ch):
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"""\n' + "".join(out) + '"""'


def _gain_text(gain: float) -> str:
    """A gain or ideality as a TOML number that reads back exactly (``200000``, ``1e+16``)."""
    text = repr(float(gain))
    return text[:-2] if text.endswith(".0") else text


# -- the circuit --------------------------------------------------------------

def _part_lines(part: Part) -> list[str]:
    if not isinstance(part, Part):
        raise TypeError(f"circuit parts must be faultfind.model.Part, not {type(part).__name__}")

    def fail(message):
        raise CircuitError(message, part=part.ref)

    if part.kind not in KINDS:
        fail(f"unknown kind {part.kind!r}")
    info = KINDS[part.kind]
    if len(part.nodes) != info.nodes:
        fail(f"{part.kind} takes {info.nodes} nodes, this part has {len(part.nodes)}")
    keys: dict[str, str] = {
        "ref": _basic(part.ref),
        "kind": _basic(part.kind),
        "nodes": "[" + ", ".join(_basic(n) for n in part.nodes) + "]",
    }
    if info.unit is not None:
        if part.value is None or not math.isfinite(part.value):
            fail(f"a {part.kind} needs a finite value, not {part.value!r}")
        at_default = info.default_value is not None and part.value == info.default_value
        if not at_default:
            keys["value"] = _basic(value_text(part.value, info.unit))
        if not (at_default and (part.tol_low, part.tol_high) == info.default_tolerance):
            keys["tolerance"] = _basic(tolerance_text(part.tol_low, part.tol_high, part.value,
                                                      info.unit))
    if part.is_source:
        keys["off_state"] = _basic(part.off_state)
        if part.waveform != "dc":
            keys["waveform"] = _basic(part.waveform)
        if part.waveform == "ac" and part.phase != 0:
            if not math.isfinite(part.phase):
                fail(f"phase must be finite, not {part.phase!r}")
            keys["phase"] = _basic(f"{_plain_number(part.phase)} deg")
    limit = getattr(part, "current_limit", None)
    if limit is not None:
        keys["current_limit"] = _basic(value_text(limit, "A"))
    if part.kind == "switch":
        keys["state"] = _basic(part.state)
    if part.resistance is not None:
        keys["resistance"] = _basic(value_text(part.resistance, "Ω"))
    if part.gain is not None:
        if not math.isfinite(part.gain):
            fail(f"gain must be finite, not {part.gain!r}")
        keys["gain"] = _gain_text(part.gain)
    for key in ("test_current", "forward_voltage", "ideality", "series_resistance",
                "reverse_leakage", "vbe"):
        x = getattr(part, key)
        if x is None:
            continue
        if isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x):
            fail(f"{key} must be a finite number, not {x!r}")
        unit = JUNCTION_KEYS[key].unit
        keys[key] = _gain_text(x) if unit == "" else _basic(value_text(x, unit))
    if part.label:
        keys["label"] = _basic(part.label)
    return ["[[part]]"] + [f"{k} = {keys[k]}" for k in PART_KEY_ORDER if k in keys]


def circuit_text(circuit: Circuit) -> str:
    """The text of a circuit file holding ``circuit``, in the canonical layout.

    Parameters
    ----------
    circuit : Circuit
        Any circuit whose parts have known kinds, the right node counts and
        finite values (topology is not checked here: that is the reader's
        job, and an editor may save a circuit still being drawn).

    Returns
    -------
    str
        UTF-8-ready text ending in one newline.  Reading it with
        :func:`faultfind.io.circuit_file.parse_circuit` gives a circuit with
        the same content (:func:`same_content`); writing that again gives the
        same text.

    Raises
    ------
    CircuitError
        A part with an unknown kind, a wrong node count, a missing or
        non-finite value, tolerance, phase, gain or semiconductor key
        (naming the part).
    TypeError
        ``circuit`` is not a Circuit.
    """
    if not isinstance(circuit, Circuit):
        raise TypeError(f"circuit must be a faultfind.model.Circuit, not "
                        f"{type(circuit).__name__}")
    lines = ["format = 1"]
    if circuit.title:
        lines.append(f"title = {_basic(circuit.title)}")
    lines.append(f"ground = {_basic(circuit.ground)}")
    if circuit.frequency is not None:
        lines.append(f"frequency = {_basic(value_text(circuit.frequency, 'Hz'))}")
    if circuit.notes:
        notes = _multiline(circuit.notes) if "\n" in circuit.notes else _basic(circuit.notes)
        lines.append(f"notes = {notes}")
    for part in circuit.parts:
        lines.append("")
        lines.extend(_part_lines(part))
    return "\n".join(lines) + "\n"


def write_circuit(circuit: Circuit, path) -> None:
    """Save ``circuit`` to ``path`` in the canonical layout, replacing the file atomically.

    The text goes to a temporary file in the same folder, is flushed to disk,
    then renamed over ``path``: a crash or a full disk leaves the old file as
    it was, never half a file.

    Parameters
    ----------
    circuit : Circuit
    path : str or os.PathLike

    Raises
    ------
    CircuitError
        The circuit cannot be written (see :func:`circuit_text`), or the
        file cannot be (folder missing, no permission, disk full), naming
        the file.
    TypeError
        ``circuit`` is not a Circuit or ``path`` not a path.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise TypeError(f"path must be a str or os.PathLike, not {type(path).__name__}")
    text = circuit_text(circuit)
    name = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(name))
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(prefix=".circuit-", suffix=".tmp", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if os.path.exists(name):
            os.chmod(tmp, os.stat(name).st_mode & 0o777)
        else:
            os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, name)
        tmp = None
    except OSError as err:
        raise CircuitError(f"cannot write the circuit file ({err.strerror or err})",
                           file=name) from None
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def same_content(a: Circuit, b: Circuit) -> bool:
    """True when two circuits say the same thing, wherever they were read from.

    Compares every field of the circuits and their parts except the places in
    a file (``Circuit.source`` and ``Part.line``).
    """
    for c, name in ((a, "a"), (b, "b")):
        if not isinstance(c, Circuit):
            raise TypeError(f"{name} must be a faultfind.model.Circuit, not {type(c).__name__}")

    def content(c):
        parts = tuple(dataclasses.replace(p, line=None) for p in c.parts)
        return dataclasses.replace(c, parts=parts, source=None)

    return content(a) == content(b)


# -- comments -----------------------------------------------------------------

@dataclasses.dataclass(frozen=True)
class Comment:
    """A comment in a circuit file's text.

    Attributes
    ----------
    line : int
        1-based line number.
    text : str
        The comment from its ``#`` to the end of the line.
    """

    line: int
    text: str


def lost_comments(text: str) -> list[Comment]:
    """The comments of a circuit file's text, which a rewrite would lose.

    :func:`circuit_text` writes no comments, so every comment of a
    hand-written file is lost when the circuit is saved over it; a caller
    shows these (line and text) and asks before saving.  A ``#`` inside a
    quoted string (``label = "pump #2"``, a multi-line ``notes``) is not a
    comment.

    Parameters
    ----------
    text : str
        The file's text.

    Returns
    -------
    list of Comment
        In file order; empty when the file holds none.

    Raises
    ------
    TypeError
        ``text`` is not a str.
    """
    if not isinstance(text, str):
        raise TypeError(f"text must be a str, not {type(text).__name__}")
    found = []
    in_multi = None          # '"""' or "'''" while inside a multi-line string
    for number, line in enumerate(text.split("\n"), 1):
        i, n = 0, len(line)
        while i < n:
            if in_multi is not None:
                end = line.find(in_multi, i)
                if in_multi == '"""':        # a backslash escapes the next character
                    j = i
                    while True:
                        end = line.find('"""', j)
                        if end < 0:
                            break
                        backslashes = len(line[:end]) - len(line[:end].rstrip("\\"))
                        if backslashes % 2 == 0:
                            break
                        j = end + 1
                if end < 0:
                    i = n
                    break
                i = end + 3
                while i < n and line[i] == in_multi[0]:   # up to two quotes belong inside
                    i += 1
                in_multi = None
                continue
            ch = line[i]
            if ch == "#":
                found.append(Comment(number, line[i:].rstrip("\r")))
                break
            if line.startswith('"""', i) or line.startswith("'''", i):
                in_multi = line[i:i + 3]
                i += 3
                continue
            if ch == '"':
                i += 1
                while i < n and line[i] != '"':
                    i += 2 if line[i] == "\\" else 1
                i += 1
                continue
            if ch == "'":
                end = line.find("'", i + 1)
                i = n if end < 0 else end + 1
                continue
            i += 1
    return found
