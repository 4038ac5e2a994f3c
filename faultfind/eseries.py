"""Preferred numbers of IEC 60063:2015 (the E-series) and the nearest standard value.

A technician who finds a burnt resistor with an unreadable band, or an
estimate of 4.61 kΩ for a part, wants the standard value it most likely is.
The series E3 ... E192 divide each decade into 3 ... 192 steps of about equal
ratio.

* E3, E6, E12 and E24 use the historical two-digit values of IEC 60063, which
  differ from ``10**(i/n)`` rounded to two digits at 2.7, 3.0, 3.3, 3.6, 3.9,
  4.3, 4.7 and 8.2.  They are written out below.
* E48, E96 and E192 are ``10**(i/n)`` rounded to three significant digits,
  with the one exception IEC 60063 makes: 9.20 in E192 (the formula gives
  9.19).  E96 is every second value of E192 and E48 every second of E96.

Each series is paired in IEC 60063 with a tolerance grade; see
:func:`series_for_tolerance`.
"""

from __future__ import annotations

import math
import numbers

from faultfind.errors import InputError

__all__ = ["SERIES", "series_values", "nearest", "neighbours", "series_for_tolerance"]

_E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
        3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)


def _three_digit_series() -> tuple[float, ...]:
    """E192: ``10**(i/192)`` to three significant digits, 9.19 replaced by 9.20."""
    values = [round(10.0 ** (i / 192), 2) for i in range(192)]
    values[values.index(9.19)] = 9.20
    return tuple(values)


_E192 = _three_digit_series()

#: Mantissas of each series, ascending, in [1, 10).
SERIES: dict[str, tuple[float, ...]] = {
    "E3": _E24[::8],
    "E6": _E24[::4],
    "E12": _E24[::2],
    "E24": _E24,
    "E48": _E192[::4],
    "E96": _E192[::2],
    "E192": _E192,
}

# Tolerance grade (fraction) paired with each series, finest first.  E3 is
# paired with tolerances wider than 20 %.
_GRADES = (("E192", 0.005), ("E96", 0.01), ("E48", 0.02), ("E24", 0.05),
           ("E12", 0.10), ("E6", 0.20))


def series_values(name) -> tuple[float, ...]:
    """The mantissas of a series.

    Parameters
    ----------
    name : str
        ``"E3"``, ``"E6"``, ``"E12"``, ``"E24"``, ``"E48"``, ``"E96"`` or
        ``"E192"``, in any case.

    Returns
    -------
    tuple of float
        The series' values in [1, 10), ascending.

    Raises
    ------
    InputError
        ``name`` not a str or not one of the series.
    """
    return SERIES[_series_name(name)]


def _series_name(name) -> str:
    if not isinstance(name, str):
        raise InputError(f"series must be a name such as 'E24', got {name!r}")
    key = name.strip().upper()
    if key not in SERIES:
        raise InputError(f"series {name!r} is not an IEC 60063 series: use one of "
                         + ", ".join(SERIES))
    return key


def _check_value(value, what: str = "value") -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise InputError(f"{what} must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"{what} must be positive and finite to have a standard value, "
                         f"got {value!r}")
    return value


def _candidates(value: float, series: tuple[float, ...]) -> list[float]:
    """Standard values of the decades around ``value``, ascending.

    Each is built from its decimal text (``"4.7e3"``) so that it is the float
    nearest the standard value, e.g. exactly ``4700.0``.
    """
    decade = math.floor(math.log10(value))
    out = []
    for d in (decade - 1, decade, decade + 1):
        out.extend(float(f"{s!r}e{d}") for s in series)
    out.append(float(f"1e{decade + 2}"))
    return out


_SAME = 1e-9  # relative difference below which a value counts as "at" a standard value


def nearest(value, series="E24") -> float:
    """The standard value of a series nearest a value, on a log scale.

    Parameters
    ----------
    value : float
        A positive value in any unit (4600 for 4.6 kΩ).
    series : str, optional
        The series name (default ``"E24"``), any case.

    Returns
    -------
    float
        The standard value, in the decade of ``value`` or the next one up
        (``nearest(9.9)`` is 10.0).  Nearness is measured by the ratio, so
        ``nearest(4600)`` is 4700.0; an exact tie goes to the lower value.

    Raises
    ------
    InputError
        ``value`` not positive and finite; unknown ``series``.
    """
    mantissas = series_values(series)
    value = _check_value(value)
    return min(_candidates(value, mantissas), key=lambda c: (abs(math.log(c / value)), c))


def neighbours(value, series="E24") -> tuple[float, float]:
    """The standard values at or just below and at or just above a value.

    Parameters
    ----------
    value : float
        A positive value in any unit.
    series : str, optional
        The series name (default ``"E24"``), any case.

    Returns
    -------
    below, above : float
        The largest standard value <= ``value`` and the smallest >= ``value``.
        When ``value`` is a standard value (within a relative 1e-9) both are
        that value: ``neighbours(4700)`` is ``(4700.0, 4700.0)``.

    Raises
    ------
    InputError
        ``value`` not positive and finite; unknown ``series``.
    """
    mantissas = series_values(series)
    value = _check_value(value)
    candidates = _candidates(value, mantissas)
    for c in candidates:
        if abs(c - value) <= _SAME * value:
            return c, c
    below = max(c for c in candidates if c < value)
    above = min(c for c in candidates if c > value)
    return below, above


def series_for_tolerance(fraction) -> str:
    """The series IEC 60063 pairs with a tolerance grade.

    Parameters
    ----------
    fraction : float
        Relative tolerance, 0 <= fraction < 1 (0.05 for ±5 %).

    Returns
    -------
    str
        The coarsest series whose grade the tolerance meets: up to 0.5 %
        ``"E192"``, 1 % ``"E96"``, 2 % ``"E48"``, 5 % ``"E24"``, 10 %
        ``"E12"``, 20 % ``"E6"``, wider ``"E3"``.  A tolerance between two
        grades takes the wider grade's series (3 % -> ``"E24"``).

    Raises
    ------
    InputError
        ``fraction`` not a finite number in [0, 1) (give 0.05, not 5, for 5 %).
    """
    if isinstance(fraction, bool) or not isinstance(fraction, numbers.Real):
        raise InputError(f"fraction must be a number, got {fraction!r}")
    fraction = float(fraction)
    if not math.isfinite(fraction) or not 0 <= fraction < 1:
        raise InputError(f"fraction must be a relative tolerance in [0, 1) such as 0.05 "
                         f"for 5 %, got {fraction!r}")
    for name, grade in _GRADES:
        if fraction <= grade * (1 + _SAME):
            return name
    return "E3"
