"""Values with SI prefixes and units, RKM codes, tolerances: parse and format.

Everything a technician writes for a value goes through here: ``"4k7"``,
``"4.7 kΩ"``, ``"100n"``, ``"2.2 mH"``, ``"24 V"``, ``"R47"``; tolerances such
as ``"1%"``, ``"-20%/+80%"`` or ``"±0.2 V"``; meter accuracies such as
``"0.5% + 2"``; phases such as ``"-120 deg"``.  Values come back as floats in
SI units (ohm, farad, henry, volt, ampere, hertz).

Rules of the grammar, fixed here once for the whole project:

* SI prefixes are case-sensitive: ``p`` 1e-12, ``n`` 1e-9, ``u`` / ``µ`` 1e-6
  (U+00B5 micro sign or U+03BC Greek mu), ``m`` 1e-3, ``k`` 1e3, ``M`` 1e6,
  ``G`` 1e9.  ``K`` is also read as kilo, as resistor markings write it.
* Units: ``Ω`` (U+03A9, or the ohm sign U+2126, or ``ohm`` / ``ohms`` in any
  case), ``F``, ``H``, ``V``, ``A``, ``Hz``.  ``V``, ``A`` and ``Hz`` are also
  read in lower case (no prefix clashes with them); ``F`` and ``H`` are not.
* RKM code of IEC 60062: the prefix letter or ``R`` stands where the decimal
  point would be (``4k7``, ``R47``, ``4R7``, ``47R``, ``2M2``, ``1n5``,
  ``p68``).  ``R`` marks ohms, so a code with ``R`` carries the unit Ω.  The
  trade form ``3V3`` (volts, ``V`` as the decimal point) is read the same way
  and carries the unit V.  An RKM code takes no sign.
* No thousands separators and no decimal comma: ``"4,7k"`` is refused rather
  than guessed at.
"""

from __future__ import annotations

import decimal
import math
import numbers
import re

from faultfind.errors import UnitError

__all__ = [
    "UNITS",
    "UNIT_NAMES",
    "PREFIXES",
    "parse_value",
    "parse_tolerance",
    "parse_accuracy",
    "parse_phase",
    "parse_frequency",
    "format_value",
    "format_tolerance",
]

#: Units a value may carry, as canonical symbols.
UNITS = ("Ω", "F", "H", "V", "A", "Hz")

#: Name of each unit, for messages and help text.
UNIT_NAMES = {"Ω": "ohm", "F": "farad", "H": "henry", "V": "volt", "A": "ampere", "Hz": "hertz"}

#: Power of ten of each SI prefix accepted on input (``u`` and ``K`` are aliases).
PREFIXES = {"p": -12, "n": -9, "u": -6, "µ": -6, "m": -3, "k": 3, "K": 3, "M": 6, "G": 9}

# Prefixes used on output, by power of ten.
_OUT_PREFIX = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}

_MICRO_SIGN = "\u00b5"
_GREEK_MU = "\u03bc"
_OHM_SIGN = "\u2126"
_OMEGA = "\u03a9"
_MINUS_SIGN = "\u2212"

# A unit as written -> canonical symbol.  Lower-cased spellings are looked up
# via _unit_symbol, which knows which units are case-insensitive.
_UNIT_RE = r"(?P<unit>Ω|[Oo][Hh][Mm][Ss]?|F|H|[Vv]|[Aa]|[Hh][Zz])"
_NUMBER_RE = r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"  # linear: no nested digit runs

_DECIMAL = re.compile(
    rf"^(?P<sign>[+-]?)(?P<num>{_NUMBER_RE})\s*(?P<prefix>[pnuµmkKMG]?){_UNIT_RE}?$"
)
_RKM = re.compile(
    rf"^(?P<sign>[+-]?)(?P<int>[0-9]*)(?P<letter>[RpnuµmkKMGV])(?P<frac>[0-9]*)\s*{_UNIT_RE}?$"
)
_PLAIN_NUMBER = re.compile(rf"^[+-]?{_NUMBER_RE}$")
_NUMBER_THEN = re.compile(rf"^[+-]?{_NUMBER_RE}\s*(?P<tail>.+)$")

_EXAMPLES = "write it like '4.7k', '4k7', '100n', '2.2 mH' or '24 V'"


def _normalize(text: str) -> str:
    """Fold the look-alike characters people paste into one spelling each."""
    return (text.strip().replace(_OHM_SIGN, _OMEGA).replace(_GREEK_MU, _MICRO_SIGN)
            .replace(_MINUS_SIGN, "-"))


def _unit_symbol(written: str | None) -> str | None:
    """Canonical symbol of a unit as matched by ``_UNIT_RE`` (None stays None)."""
    if written is None:
        return None
    low = written.lower()
    if low in ("ohm", "ohms") or written == _OMEGA:
        return _OMEGA
    if low == "hz":
        return "Hz"
    if written in ("F", "H"):
        return written
    return written.upper()  # V, A


def _check_unit_argument(unit) -> str | None:
    """The ``unit`` argument as a canonical symbol; ``""`` means dimensionless."""
    if unit is None or unit == "":
        return unit
    if not isinstance(unit, str):
        raise UnitError(f"unit must be a unit symbol such as 'V' or 'Ω', got {unit!r}")
    symbol = _normalize(unit)
    if symbol.lower() in ("ohm", "ohms"):
        symbol = _OMEGA
    if symbol not in UNITS:
        raise UnitError(f"unit {unit!r} is not one faultfind knows: expected one of "
                        + ", ".join(UNITS))
    return symbol


def _is_real(x) -> bool:
    """A real number that is not a bool (numpy's bool is not a ``numbers.Real``)."""
    return isinstance(x, numbers.Real) and not isinstance(x, bool)


def _scaled(number: str, power: int, text, what: str) -> float:
    """``number`` × 10**power, correctly rounded to a float; finite or UnitError."""
    try:
        value = float(decimal.Decimal(number).scaleb(power))
    except (decimal.DecimalException, OverflowError, ValueError):
        value = math.inf
    if not math.isfinite(value):
        raise UnitError(f"{what} {text!r} is too large to be a value")
    return value


def _unreadable(s: str, text, what: str) -> str:
    """The message for a value that matches no form, naming the bad tail if any."""
    m = _NUMBER_THEN.match(s)
    if m and (m["tail"][0].isalpha() or m["tail"][0] in "°%"):
        return (f"cannot read {what} {text!r}: {m['tail']!r} is not a prefix and unit "
                "faultfind knows (prefixes p n µ m k M G, case-sensitive: m milli, M mega; "
                "units Ω F H V A Hz)")
    return f"cannot read {what} {text!r}: {_EXAMPLES}"


def parse_value(text, unit=None, *, what="value") -> float:
    """Read a value written with an optional SI prefix and unit.

    Parameters
    ----------
    text : str, int or float
        The value as written: a plain number (``"4700"``, ``"1e3"``,
        ``"-0.5"``), a number with a prefix and/or unit (``"4.7k"``,
        ``"4.7 kΩ"``, ``"2.2 mH"``, ``"100n"``, ``"24 V"``), or an RKM code of
        IEC 60062 (``"4k7"``, ``"R47"``, ``"4R7"``, ``"2M2"``, ``"1n5"``,
        ``"p68"``).  A number (not a bool) is taken as it stands.
    unit : str, optional
        The unit the value must have (one of :data:`UNITS`; ``"ohm"`` is read
        as Ω).  A unit written in ``text`` must be this one.  None accepts any
        known unit; ``""`` means the value is dimensionless and may carry none.
    what : str, optional
        What the value is, for messages (``"value"``, ``"tolerance"`` ...).

    Returns
    -------
    float
        The value in SI units (finite).  An RKM code never gives a negative.

    Raises
    ------
    UnitError
        Empty, non-finite or unreadable text, a sign on an RKM code, or a
        unit that does not fit ``unit`` ("unit 'V' does not fit here:
        expected Ω").  The message quotes the text and names ``what``.

    Examples
    --------
    >>> parse_value("4k7")
    4700.0
    >>> parse_value("2.2 mH", "H")
    0.0022
    """
    if not isinstance(what, str):
        raise UnitError(f"what must be a str naming the value, got {what!r}")
    expected = _check_unit_argument(unit)
    value, carried = _read(text, what)
    if expected is not None and carried is not None and carried != expected:
        fits = expected if expected else "no unit"
        raise UnitError(f"{what} {text!r}: unit '{carried}' does not fit here: expected {fits}")
    return value


def _read(text, what: str) -> tuple[float, str | None]:
    """The value of ``text`` and the unit it carries (None when it carries none)."""
    if _is_real(text):
        try:
            value = float(text)
        except OverflowError:  # an int beyond the float range
            value = math.inf
        if not math.isfinite(value):
            raise UnitError(f"{what} {text!r} is not a finite number")
        return value, None
    if not isinstance(text, str):
        raise UnitError(f"{what} must be a number or a string such as '4k7', got {text!r}")
    s = _normalize(text)
    if not s:
        raise UnitError(f"{what} is empty: {_EXAMPLES}")
    if "," in s:
        raise UnitError(f"cannot read {what} {text!r}: write a decimal point, not a comma, "
                        "and no thousands separators")
    m = _DECIMAL.match(s)
    if m:
        power = PREFIXES[m["prefix"]] if m["prefix"] else 0
        return _scaled(m["sign"] + m["num"], power, text, what), _unit_symbol(m["unit"])
    m = _RKM.match(s)
    if not m or not (m["int"] or m["frac"]) or (not m["frac"] and m["letter"] not in "RV"):
        raise UnitError(_unreadable(s, text, what))
    if m["sign"]:
        raise UnitError(f"{what} {text!r}: an RKM code such as '4k7' takes no sign; "
                        "write a signed value with a decimal point, e.g. '-4.7k'")
    letter = m["letter"]
    implied = {"R": _OMEGA, "V": "V"}.get(letter)
    carried = _unit_symbol(m["unit"])
    if implied is not None and carried is not None and carried != implied:
        raise UnitError(f"{what} {text!r}: the code letter {letter!r} means {implied} "
                        f"but the unit written is {carried}")
    value = _scaled(f"{m['int'] or '0'}.{m['frac'] or '0'}", PREFIXES.get(letter, 0), text, what)
    return value, carried or implied


def parse_frequency(text, *, what="frequency") -> float:
    """Read a frequency: :func:`parse_value` with unit Hz, which must be > 0.

    Parameters
    ----------
    text : str, int or float
        ``"60 Hz"``, ``"1.5 kHz"``, ``"180"``, ``50``.
    what : str, optional
        What the frequency is, for messages.

    Returns
    -------
    float
        The frequency in hertz, positive and finite.

    Raises
    ------
    UnitError
        Unreadable text, a unit other than Hz, or a frequency <= 0.
    """
    value = parse_value(text, "Hz", what=what)
    if value <= 0:
        raise UnitError(f"{what} {text!r} must be above 0 Hz")
    return value


def _percent_or_absolute(part: str, text, nominal, unit, what) -> float:
    """One side of a tolerance as a non-negative relative fraction."""
    part = part.strip()
    if part.endswith("%"):
        number = part[:-1].strip()
        if not _PLAIN_NUMBER.match(number):
            raise UnitError(f"cannot read {what} {text!r}: {number!r} is not a percentage")
        return _scaled(number, -2, text, what)
    if _PLAIN_NUMBER.match(part):
        raise UnitError(f"{what} {text!r} is a bare number: write a percentage such as '5%' "
                        "or an absolute amount with its unit such as '0.2 V'")
    try:
        amount = parse_value(part, unit, what=what)
        carried = _read(part, what)[1]
    except UnitError as exc:
        raise UnitError(f"cannot read {what} {text!r}: {exc.message}") from None
    if carried is None:
        raise UnitError(f"{what} {text!r} has no unit: write a percentage such as '5%' "
                        "or an absolute amount with its unit such as '0.2 V'")
    if nominal is None or nominal == 0:
        raise UnitError(f"{what} {text!r} is an absolute amount but the nominal value is "
                        f"{'missing' if nominal is None else 0}: give the tolerance in %")
    return amount / abs(nominal)


def parse_tolerance(text, nominal, unit=None) -> tuple[float, float]:
    """Read a tolerance as relative fractions below and above nominal.

    Parameters
    ----------
    text : str
        ``"1%"``, ``"±1%"``, ``"+/-1%"``, ``"± 1 %"``, asymmetric
        ``"-20%/+80%"`` (or ``"+80%/-20%"``), or absolute with a unit
        (``"±0.2 V"``, ``"0.2 V"``), converted with ``|nominal|``.  Each side
        of an asymmetric tolerance may be in % or absolute.
    nominal : float or None
        The nominal value the tolerance applies to, in SI units; needed (and
        not 0) only for an absolute tolerance.
    unit : str, optional
        The unit an absolute tolerance must carry (as for :func:`parse_value`).

    Returns
    -------
    below, above : float
        Positive relative fractions (``"5%"`` -> ``(0.05, 0.05)``).

    Raises
    ------
    UnitError
        A bare number (write ``"5%"``), a negative amount, ``below`` of
        100 % or more (a part cannot go below zero), an absolute tolerance
        with nominal 0, a unit that does not fit, or unreadable text.
        ``above`` may exceed 100 %.
    """
    what = "tolerance"
    if nominal is not None and (not _is_real(nominal) or not math.isfinite(nominal)):
        raise UnitError(f"nominal must be a finite number or None, got {nominal!r}")
    _check_unit_argument(unit)
    if _is_real(text):
        raise UnitError(f"{what} {text!r} is a bare number: write a percentage such as '5%'")
    if not isinstance(text, str):
        raise UnitError(f"{what} must be a string such as '5%', got {text!r}")
    s = _normalize(text)
    if not s:
        raise UnitError(f"{what} is empty: write a percentage such as '5%'")
    if "/" in s and not re.match(r"^\+\s*/\s*-", s):
        sides = s.split("/")
        if len(sides) != 2:
            raise UnitError(f"cannot read {what} {text!r}: write it like '-20%/+80%'")
        found = {}
        for side in sides:
            side = side.strip()
            sign = side[:1]
            if sign not in "+-" or not sign or sign in found:
                raise UnitError(f"cannot read {what} {text!r}: an asymmetric tolerance needs "
                                "one '-' side and one '+' side, like '-20%/+80%'")
            found[sign] = _percent_or_absolute(side[1:], text, nominal, unit, what)
        below, above = found["-"], found["+"]
    else:
        m = re.match(r"^(±|\+\s*/\s*-|\+-)?\s*(.*)$", s)
        body = m[2]
        if body.startswith(("-", "+")):
            raise UnitError(f"{what} {text!r}: a one-sided or negative tolerance cannot be "
                            "read; write '±5%' or '-0%/+5%'")
        below = above = _percent_or_absolute(body, text, nominal, unit, what)
    if below < 0 or above < 0:
        raise UnitError(f"{what} {text!r} is negative")
    if below >= 1.0:
        raise UnitError(f"{what} {text!r} goes 100 % or more below nominal: "
                        "a part cannot go below zero")
    return below, above


def parse_accuracy(text) -> tuple[float, float]:
    """Read a meter accuracy ``±(percent % of reading + counts)``.

    Parameters
    ----------
    text : str
        ``"0.05% + 2"``, ``"0.5%+5"``, ``"1 %"``, ``"±(0.8% + 3 counts)"``
        (``counts``, ``digits``, ``dgt`` or ``d`` may follow the counts).

    Returns
    -------
    percent, counts : float
        Percent of reading (``0.5`` for 0.5 %) and counts of the last digit,
        both >= 0 (counts 0 when not given).

    Raises
    ------
    UnitError
        Anything else, including a bare number.
    """
    if not isinstance(text, str):
        raise UnitError(f"meter accuracy must be a string such as '0.5% + 2', got {text!r}")
    s = _normalize(text)
    inner = re.match(r"^±?\s*\((.*)\)$", s)
    s = inner[1].strip() if inner else s.lstrip("±").strip()
    m = re.match(rf"^(?P<pct>{_NUMBER_RE})\s*%\s*(?:\+\s*(?P<counts>{_NUMBER_RE})\s*"
                 r"(?:counts?|digits?|dgts?|d)?)?$", s)
    if m is None:
        raise UnitError(f"cannot read meter accuracy {text!r}: write it like '0.5% + 2' "
                        "(percent of reading plus counts)")
    percent = _scaled(m["pct"], 0, text, "meter accuracy")
    counts = _scaled(m["counts"], 0, text, "meter accuracy") if m["counts"] else 0.0
    return percent, counts


def parse_phase(text) -> float:
    """Read a phase angle in degrees.

    Parameters
    ----------
    text : str, int or float
        ``"-120 deg"``, ``"-120°"``, ``"30"``, ``30``, ``"0.5 rad"``
        (``degree(s)`` is also read).  A bare number is in degrees.

    Returns
    -------
    float
        The phase in degrees, as given (not wrapped into a range).

    Raises
    ------
    UnitError
        A bool, non-finite or unreadable phase.
    """
    if _is_real(text):
        value = float(text)
    elif isinstance(text, str):
        s = _normalize(text)
        m = re.match(rf"^(?P<num>[+-]?{_NUMBER_RE})\s*(?P<unit>°|deg|degs|degrees?|rad|rads|"
                     r"radians?)?$", s)
        if m is None:
            raise UnitError(f"cannot read phase {text!r}: write it like '-120 deg' or '0.5 rad'")
        value = _scaled(m["num"], 0, text, "phase")
        if m["unit"] and m["unit"].startswith("rad"):
            value = math.degrees(value)
    else:
        raise UnitError(f"phase must be a number or a string such as '-120 deg', got {text!r}")
    if not math.isfinite(value):
        raise UnitError(f"phase {text!r} is not a finite number")
    return value


def _significant(x: float, digits: int) -> tuple[str, int]:
    """``|x|`` rounded to ``digits`` significant digits: (digit string, exponent of the first)."""
    mantissa, exponent = f"{abs(x):.{digits - 1}e}".split("e")
    return mantissa.replace(".", ""), int(exponent)


def _place_point(digit_str: str, before: int) -> str:
    """Digits with the decimal point after ``before`` of them, trailing zeros dropped."""
    if before >= len(digit_str):
        return digit_str + "0" * (before - len(digit_str))
    whole, frac = digit_str[:before], digit_str[before:].rstrip("0")
    return whole + ("." + frac if frac else "")


def format_value(value, unit="", digits=3) -> str:
    """Write a value in engineering notation with an SI prefix.

    Parameters
    ----------
    value : float or None
        The value in SI units.  None or NaN gives ``"—"``; ±inf gives
        ``"∞"`` / ``"-∞"`` with the unit.
    unit : str, optional
        Unit symbol to append (``"ohm"`` is written Ω); ``""`` for none.
    digits : int, optional
        Significant digits (>= 1).  Trailing zeros are dropped.

    Returns
    -------
    str
        ``"4.7 kΩ"``, ``"12 V"``, ``"100 nF"``, ``"2.45 mA"``, ``"0 V"``,
        ``"-1.2 V"``, ``"1.23 µA"``.  Outside the prefix range p..G the
        exponent form is used (``"1.5e-15 F"``).  :func:`parse_value` reads
        every result back.

    Raises
    ------
    UnitError
        ``value`` not a number or None, ``unit`` not a str, ``digits`` not
        an int >= 1.
    """
    if not isinstance(unit, str):
        raise UnitError(f"unit must be a str, got {unit!r}")
    if isinstance(digits, bool) or not isinstance(digits, numbers.Integral) or digits < 1:
        raise UnitError(f"digits must be an int >= 1, got {digits!r}")
    if value is not None and not _is_real(value):
        raise UnitError(f"value must be a number or None, got {value!r}")
    if value is None or math.isnan(value):
        return "—"
    unit = _normalize(unit)
    if unit.lower() in ("ohm", "ohms"):
        unit = _OMEGA
    tail = f" {unit}" if unit else ""
    if math.isinf(value):
        return ("-∞" if value < 0 else "∞") + tail
    if value == 0:
        return "0" + tail
    sign = "-" if value < 0 else ""
    digit_str, exponent = _significant(float(value), int(digits))
    power = 3 * (exponent // 3)
    if power in _OUT_PREFIX:
        number = _place_point(digit_str, exponent - power + 1)
        prefix = _OUT_PREFIX[power]
        return f"{sign}{number}{(' ' + prefix + unit) if prefix or unit else ''}"
    number = _place_point(digit_str, 1)
    return f"{sign}{number}e{exponent:+d}{tail}"


def _percent_text(fraction: float) -> str:
    digit_str, exponent = _significant(fraction * 100.0, 3)
    if exponent >= 0:
        return _place_point(digit_str, exponent + 1)
    return _place_point("0" * (-exponent) + digit_str, 1)


def format_tolerance(below, above) -> str:
    """Write a tolerance given as relative fractions, in percent.

    Parameters
    ----------
    below, above : float
        Relative tolerance below and above nominal, >= 0 (0.05 for 5 %).

    Returns
    -------
    str
        ``"±1 %"`` when both sides show the same, else ``"-20 %/+80 %"``;
        up to 3 significant digits.  :func:`parse_tolerance` reads it back.

    Raises
    ------
    UnitError
        A side that is not a finite number >= 0.
    """
    for name, side in (("below", below), ("above", above)):
        if not _is_real(side) or not math.isfinite(side) or side < 0:
            raise UnitError(f"{name} must be a finite fraction >= 0, got {side!r}")
    low, high = _percent_text(float(below)), _percent_text(float(above))
    if low == high:
        return f"±{low} %"
    return f"-{low} %/+{high} %"
