"""The meter model: display resolution, specification limits, uncertainty, OL.

Every function takes a :class:`faultfind.model.MeterProfile` and works on SI
values (volt, ampere, ohm).  Functions that take a ``value`` accept a scalar
or an array-like and return a float (or bool) for a scalar, an ndarray of the
same shape for an array.

Resolution rule (formats.md section 3): a reading's resolution is the
smallest power of ten of the unit for which ``counts * resolution`` exceeds
``|value|`` (strictly), but never finer than the profile's finest resolution
for that quantity.  With 6000 counts, 5.999 V reads in steps of 0.001 V while
6.0 V -- exactly ``6000 * 0.001`` -- needs the next range, 0.01 V.

Uncertainty (docs/meter-model.md): the accuracy ``±(p % of reading + n
counts)`` is a specification limit ``a``; treated as the half-width of a
rectangular distribution its standard uncertainty is ``a / sqrt(3)``
(JCGM 100:2008, GUM 4.3.7).  The display's own rounding to a step ``r``
contributes ``r / sqrt(12)`` (GUM F.2.2.1); the two are combined in
quadrature.

This module imports numpy only and does no I/O.
"""

from __future__ import annotations

import math
import numbers

import numpy as np

from faultfind.errors import InputError
from faultfind.model import MODES, QUANTITIES, MeterProfile

__all__ = [
    "resolution",
    "display",
    "spec_limit",
    "standard_uncertainty",
    "overrange",
    "simulate",
    "loading_conductance",
    "shunt_resistance",
    "ohmmeter_ranges",
    "OHMS_COMPLIANCE",
]

#: Open-circuit voltage of the ohmmeter's test source, volts (at least 1.5
#: times the full-scale voltage of the ranges, see :func:`ohmmeter_ranges`):
#: handhelds' ohms ranges have open-circuit voltages of roughly 0.4 to 3 V
#: (from memory).
OHMS_COMPLIANCE = 1.0

# Relative slack when comparing |value| with counts * step: a value within
# float noise of a range's full scale (e.g. 0.6 V against 6000 * 1e-4 V, which
# is 0.6000000000000001 in binary) counts as reaching it, so it goes to the
# next range as an exact decimal value would.
_REL_EPS = 1e-12


# --------------------------------------------------------------------------
# argument checks
# --------------------------------------------------------------------------

def _check_profile(profile) -> MeterProfile:
    if not isinstance(profile, MeterProfile):
        raise InputError(f"expected a MeterProfile, got {type(profile).__name__}",
                         key="profile")
    return profile


def _check_quantity(quantity) -> str:
    if quantity not in QUANTITIES:
        raise InputError(f"unknown quantity {quantity!r}; expected one of "
                         f"{', '.join(QUANTITIES)}", key="quantity")
    return quantity


def _check_mode(quantity: str, mode) -> str | None:
    if quantity in ("resistance", "diode-test"):
        return None
    if mode is None:
        return "dc"
    if mode not in MODES:
        raise InputError(f"unknown mode {mode!r}; expected one of {', '.join(MODES)}",
                         key="mode")
    return mode


def _as_array(value, name: str, *, allow_inf: bool) -> np.ndarray:
    """``value`` as a float ndarray, refusing NaN (and infinities unless allowed)."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"not a number or array of numbers: {value!r}", key=name) from None
    if np.isnan(arr).any():
        raise InputError("contains NaN", key=name)
    if not allow_inf and np.isinf(arr).any():
        raise InputError("must be finite", key=name)
    return arr


def _out(arr: np.ndarray, like: np.ndarray):
    """A Python scalar for a 0-d input, else the array."""
    if like.ndim == 0:
        return arr.item()
    return arr


# --------------------------------------------------------------------------
# resolution and display
# --------------------------------------------------------------------------

def _resolution_array(profile: MeterProfile, quantity: str, mag: np.ndarray) -> np.ndarray:
    """Resolution for magnitudes ``mag`` >= 0 (infinite magnitudes give inf)."""
    counts = float(profile.counts)
    finest = float(profile.finest_resolution(quantity))
    finite = np.isfinite(mag) & (mag > 0)
    safe = np.where(finite, mag, 1.0)
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        k = np.floor(np.log10(safe / counts)) + 1.0
        # correct the logarithm's rounding: counts * 10**k must exceed mag ...
        fits = counts * 10.0 ** k > safe * (1.0 + _REL_EPS)
        k = np.where(fits, k, k + 1.0)
        # ... and counts * 10**(k-1) must not
        finer_fits = counts * 10.0 ** (k - 1.0) > safe * (1.0 + _REL_EPS)
        k = np.where(finer_fits, k - 1.0, k)
        res = np.maximum(10.0 ** k, finest)
    res = np.where(mag == 0, finest, res)
    return np.where(np.isinf(mag), np.inf, res)


def resolution(profile, quantity, value):
    """Display resolution of a reading.

    Parameters
    ----------
    profile : MeterProfile
        The meter.
    quantity : {"voltage", "current", "resistance"}
        What is read.
    value : float or array_like
        The reading in SI units (its sign is ignored).  ``inf`` is allowed
        (an open circuit) and gives ``inf``.

    Returns
    -------
    float or ndarray
        The smallest power of ten ``r`` (in the SI unit) with
        ``profile.counts * r > |value|``, raised to the profile's finest
        resolution for ``quantity`` when that is coarser.  Zero reads at the
        finest resolution.

    Raises
    ------
    InputError
        Unknown ``quantity``, a non-numeric or NaN ``value``, or ``profile``
        not a MeterProfile.

    Notes
    -----
    The rule is formats.md section 3.  "Exceeds" is strict: a value equal
    to ``counts * r`` needs the next range (a 6000-count meter shows at most
    5999 counts, so 6.0 V reads as 6.00 V, not 6.000 V).

    Examples
    --------
    With 6000 counts and a finest voltage step of 0.1 mV: 11.91 V reads in
    0.01 V steps, 0.4 V in 0.0001 V steps, 5.999 V in 0.001 V steps.
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    arr = _as_array(value, "value", allow_inf=True)
    return _out(_resolution_array(profile, quantity, np.abs(arr)), arr)


def _round_to(x: np.ndarray, r: np.ndarray) -> np.ndarray:
    """``x`` rounded half away from zero to a multiple of ``r``.

    When ``1 / r`` is an integer (r = 0.01, 1e-4, ...) the result is formed as
    ``n / (1 / r)``, which gives the float nearest the decimal value (11.91,
    not 11.910000000000002).
    """
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        n = np.sign(x) * np.floor(np.abs(x) / r + 0.5)
        inv = 1.0 / r
        inv_int = np.round(inv)
        exact_inv = (inv >= 1.0) & (np.abs(inv - inv_int) <= 1e-9 * inv)
        out = np.where(exact_inv, n / np.where(exact_inv, inv_int, 1.0), n * r)
    return np.where(np.isfinite(x), out + 0.0, x)  # + 0.0: no "-0.0" on a display


def _display_array(profile: MeterProfile, quantity: str, x: np.ndarray) -> np.ndarray:
    r = _resolution_array(profile, quantity, np.abs(x))
    d = _round_to(x, r)
    # Rounding up to full scale (5.9996 -> 6.000 on 6000 counts) cannot be
    # shown on that range: the meter shows it on the next one (6.00).
    r2 = _resolution_array(profile, quantity, np.abs(d))
    return np.where(r2 > r, _round_to(x, r2), d)


def display(profile, quantity, value):
    """What the meter shows for a value: the value rounded to its resolution.

    Parameters
    ----------
    profile : MeterProfile
    quantity : {"voltage", "current", "resistance"}
    value : float or array_like
        The value at the probes, SI units; ``inf`` is returned unchanged.

    Returns
    -------
    float or ndarray
        ``value`` rounded (half away from zero) to ``resolution(profile,
        quantity, value)``.  When rounding carries the display to full scale
        of that range (5.9996 V on 6000 counts) it is shown on the next range
        instead (6.00 V).  No over-range check is made here: see
        :func:`overrange`.

    Raises
    ------
    InputError
        As :func:`resolution`.
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    arr = _as_array(value, "value", allow_inf=True)
    return _out(_display_array(profile, quantity, arr), arr)


# --------------------------------------------------------------------------
# accuracy and uncertainty
# --------------------------------------------------------------------------

def _spec_limit_array(profile, quantity, mode, x) -> np.ndarray:
    acc = profile.accuracy(quantity, mode)
    mag = np.abs(x)
    r = _resolution_array(profile, quantity, mag)
    with np.errstate(invalid="ignore"):
        return acc.percent / 100.0 * mag + acc.counts * r


def spec_limit(profile, quantity, mode, value):
    """Half-width of the meter's specified accuracy at a reading.

    Parameters
    ----------
    profile : MeterProfile
    quantity : {"voltage", "current", "resistance"}
    mode : {"dc", "ac"} or None
        Ignored for resistance; None means "dc" for voltage and current.
    value : float or array_like
        The reading, SI units.  ``inf`` gives ``inf``.

    Returns
    -------
    float or ndarray
        ``a = percent / 100 * |value| + counts * resolution(value)`` for the
        profile's accuracy ``±(percent % of reading + counts)`` of that
        quantity and mode: the meter's reading lies within ``value ± a``.

    Raises
    ------
    InputError
        Unknown ``quantity`` or ``mode``, a non-numeric or NaN ``value``.
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    mode = _check_mode(quantity, mode)
    arr = _as_array(value, "value", allow_inf=True)
    return _out(_spec_limit_array(profile, quantity, mode, arr), arr)


def standard_uncertainty(profile, quantity, mode, value):
    """Standard uncertainty of a reading from the meter's specification.

    Parameters
    ----------
    profile : MeterProfile
    quantity : {"voltage", "current", "resistance"}
    mode : {"dc", "ac"} or None
        Ignored for resistance; None means "dc" for voltage and current.
    value : float or array_like
        The reading, SI units.  ``inf`` gives ``inf``.

    Returns
    -------
    float or ndarray
        ``u = sqrt(a**2 / 3 + r**2 / 12)`` where ``a`` is
        :func:`spec_limit` and ``r`` is :func:`resolution` at ``value``.

    Raises
    ------
    InputError
        As :func:`spec_limit`.

    Notes
    -----
    The specification limit ``±a`` is read as the half-width of a
    rectangular distribution, whose standard uncertainty is ``a / sqrt(3)``
    (JCGM 100:2008, "GUM", 4.3.7).  A digital display rounded to steps of
    ``r`` adds a rectangular distribution of half-width ``r / 2``, standard
    uncertainty ``r / sqrt(12)`` (GUM F.2.2.1).  The two are independent and
    combined in quadrature (GUM 5.1.2 with unit sensitivity coefficients).

    Examples
    --------
    6000 counts, DC voltage ``±(0.5 % + 2)``, a reading of 11.91 V:
    ``r = 0.01``, ``a = 0.05955 + 0.02 = 0.07955`` V,
    ``u = sqrt(0.07955**2 / 3 + 0.01**2 / 12) = 0.04602`` V.
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    mode = _check_mode(quantity, mode)
    arr = _as_array(value, "value", allow_inf=True)
    a = _spec_limit_array(profile, quantity, mode, arr)
    r = _resolution_array(profile, quantity, np.abs(arr))
    with np.errstate(invalid="ignore"):
        u = np.hypot(a / np.sqrt(3.0), r / np.sqrt(12.0))  # hypot: no overflow on huge displays
    return _out(u, arr)


# --------------------------------------------------------------------------
# over range, simulation, loading
# --------------------------------------------------------------------------

def overrange(profile, quantity, value):
    """Whether the meter shows ``OL`` for a value.

    Parameters
    ----------
    profile : MeterProfile
    quantity : {"voltage", "current", "resistance"}
    value : float or array_like
        The value at the probes, SI units; ``inf`` (no path between the
        probes) is allowed.

    Returns
    -------
    bool or ndarray of bool
        Resistance: ``value > profile.max_resistance`` (so ``inf`` is over
        range).  Diode test: ``value`` above the display's top
        (``diode_test_max``) or the open-circuit voltage.  Voltage and
        current: always False (version 1 models no top range for them).

    Raises
    ------
    InputError
        Unknown ``quantity``, a non-numeric or NaN ``value``.
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    arr = _as_array(value, "value", allow_inf=True)
    if quantity == "resistance":
        out = arr > profile.max_resistance
    elif quantity == "diode-test":
        out = arr > min(profile.diode_test_max, profile.diode_test_voltage)
    else:
        out = np.zeros(arr.shape, dtype=bool)
    return bool(out) if arr.ndim == 0 else out


def simulate(profile, quantity, mode, true_value, rng=None):
    """What the meter would display for a true value (drills, benchmarks).

    Parameters
    ----------
    profile : MeterProfile
    quantity : {"voltage", "current", "resistance"}
    mode : {"dc", "ac"} or None
        Ignored for resistance; None means "dc".
    true_value : float
        The true value at the probes, SI units.  Resistance may be ``inf``
        (open circuit) and must not be negative; voltage and current must be
        finite and may be negative.
    rng : numpy.random.Generator, int or None
        Source of randomness (an int or None seeds a new Generator).

    Returns
    -------
    value : float or None
        The display in SI units, or None for ``OL``.
    overrange : int
        +1 for ``OL``, 0 otherwise.

    Raises
    ------
    InputError
        Bad ``quantity``, ``mode``, ``true_value`` or ``rng``.

    Notes
    -----
    The error is drawn uniformly on ``±a`` with ``a = spec_limit(true_value)``,
    the rectangular distribution :func:`standard_uncertainty` assumes, then
    the result is rounded with :func:`display`; so ``|display - true| <= a +
    r / 2`` with ``r`` the display's resolution.  Resistance shows ``OL``
    when the true value is over range (:func:`overrange`) or when the drawn
    value lands above ``max_resistance``; a resistance display never goes
    below zero (an ohmmeter shows 0 for a dead short).
    """
    profile = _check_profile(profile)
    quantity = _check_quantity(quantity)
    mode = _check_mode(quantity, mode)
    if isinstance(true_value, bool) or not isinstance(true_value, numbers.Real):
        raise InputError(f"expected a real number, got {true_value!r}", key="true_value")
    x = float(true_value)
    if math.isnan(x):
        raise InputError("is NaN", key="true_value")
    if quantity in ("resistance", "diode-test"):
        if x < 0:
            raise InputError(f"a {quantity} reading cannot be negative: {x!r}", key="true_value")
    elif math.isinf(x):
        raise InputError(f"a {quantity} must be finite", key="true_value")
    if isinstance(rng, np.random.Generator):
        gen = rng
    elif rng is None or (isinstance(rng, numbers.Integral) and not isinstance(rng, bool)):
        gen = np.random.default_rng(rng)
    else:
        raise InputError(f"expected a numpy Generator, an int or None, got {rng!r}",
                         key="rng")

    top = {"resistance": profile.max_resistance,
           "diode-test": min(profile.diode_test_max, profile.diode_test_voltage)}.get(quantity)
    if top is not None and x > top:
        return None, 1
    a = float(_spec_limit_array(profile, quantity, mode, np.asarray(x)))
    y = x + gen.uniform(-a, a)
    if top is not None:
        if y > top:
            return None, 1
        y = max(y, 0.0)
    return float(_display_array(profile, quantity, np.asarray(y))), 0


def loading_conductance(profile) -> float:
    """Conductance the meter puts across the probes on a voltage range, siemens.

    Parameters
    ----------
    profile : MeterProfile

    Returns
    -------
    float
        ``1 / profile.input_resistance``.
    """
    return 1.0 / _check_profile(profile).input_resistance


def shunt_resistance(profile) -> float:
    """Resistance the meter inserts in series when reading current, ohms.

    Parameters
    ----------
    profile : MeterProfile

    Returns
    -------
    float
        ``profile.current_shunt``.
    """
    return float(_check_profile(profile).current_shunt)


def ohmmeter_ranges(profile):
    """The resistance ranges of the meter and the test current of each.

    Parameters
    ----------
    profile : MeterProfile

    Returns
    -------
    list of (float, float)
        ``(full scale, test current)`` per range, lowest first: full scales
        ``counts * resistance_resolution * 10**k`` up to the first that
        reaches ``max_resistance``; the test current of a range is the
        lowest voltage range's full scale (``counts * voltage_resolution``,
        600 mV on a 6000-count meter) divided by the range's full scale
        (1 mA on 600 Ω, 100 µA on 6 kΩ, ... 10 nA on 60 MΩ).  A
        constant-current ohmmeter of this kind is typical of handhelds (from
        memory; docs/meter-model.md).  On a linear network the reading does
        not depend on the current; across a junction it does.
    """
    profile = _check_profile(profile)
    vfs = profile.counts * profile.voltage_resolution
    r = profile.counts * profile.resistance_resolution
    out = []
    for _ in range(30):
        out.append((r, vfs / r))
        if r >= profile.max_resistance:
            break
        r *= 10.0
    return out
