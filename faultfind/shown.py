"""How a value a meter would read is written in findings, suggestions and ``expect``.

One rule for every place that quotes a predicted or expected reading: a value
smaller than half the meter's finest resolution for that quantity is written
as zero, because that is what the meter shows there.  A prediction of
``44.1 nV`` across a shorted part is ``0`` on any handheld (finest 0.1 mV on a
4,000-count meter), and quoting the nanovolts suggests a precision no reading
can have.  Without a meter profile the rule falls back to a numerical zero
(below 1e-10, far below any meter's resolution).
"""
from __future__ import annotations

import math

from .units import format_value

__all__ = ["reading_text", "shows_zero"]

#: Below this a value is a numerical zero of the solver when no meter is known.
NUMERICAL_ZERO = 1e-10


def shows_zero(value, meter=None, quantity=None) -> bool:
    """Whether ``meter`` would display ``value`` of ``quantity`` as zero.

    Parameters
    ----------
    value : float
        The value in SI units (finite).
    meter : MeterProfile, optional
        The profile of the meter that reads it.  Without it, only a numerical
        zero (``|value| < 1e-10``) counts.
    quantity : str, optional
        The reading's quantity (``"voltage"``, ``"current"``, ``"resistance"``,
        ``"diode-test"``); required with ``meter``.

    Returns
    -------
    bool
        True when ``|value|`` is below half the finest resolution of
        ``quantity`` on ``meter`` (the display rounds it to zero).
    """
    if meter is None or quantity is None:
        return abs(value) < NUMERICAL_ZERO
    return abs(value) < 0.5 * float(meter.finest_resolution(quantity))


def reading_text(value, unit, meter=None, quantity=None, digits=3) -> str:
    """A reading's value as written in a finding: ``"38.2 mV"``, ``"0 V"``, ``"OL"``.

    Parameters
    ----------
    value : float or None
        The value in SI units; None or a non-finite value is written ``"OL"``
        (what the meter shows past its top range or on an open junction).
    unit : str
        The quantity's unit symbol.
    meter, quantity : optional
        As :func:`shows_zero`: with both, values the meter shows as zero are
        written as zero.
    digits : int, optional
        Significant digits (default 3, the findings' and suggestions' precision).

    Returns
    -------
    str
    """
    if value is None or not math.isfinite(value):
        return "OL"
    if shows_zero(value, meter, quantity):
        value = 0.0
    return format_value(value, unit, digits=digits)
