"""Tests of faultfind.engine.meter: resolution, display, uncertainty, OL, simulation."""

import math

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

from faultfind.engine import meter
from faultfind.errors import InputError
from faultfind.model import Accuracy, MeterProfile

# A 6000-count handheld as the tests' meter (the same figures as the built-in
# default, built here so these tests need nothing outside the engine).
H6000 = MeterProfile(
    name="h6000", counts=6000, input_resistance=10e6, current_shunt=1.0,
    dc_voltage=Accuracy(0.5, 2), ac_voltage=Accuracy(1.0, 3),
    dc_current=Accuracy(1.0, 3), ac_current=Accuracy(1.5, 3),
    resistance=Accuracy(0.5, 2), max_resistance=60e6,
    voltage_resolution=1e-4, current_resolution=1e-7, resistance_resolution=0.1,
)


def profile(**kw):
    from dataclasses import replace
    return replace(H6000, **kw)


# ---------------------------------------------------------------- resolution
# The rule (formats.md section 3): the smallest power of ten r with
# counts * r > |value| (strictly), never finer than the finest resolution.

@pytest.mark.parametrize("value, expected", [
    (11.91, 0.01),     # 6000 * 0.001 = 6 does not exceed 11.91; 6000 * 0.01 = 60 does
    (0.4, 0.0001),     # 6000 * 1e-4 = 0.6 > 0.4
    (5.999, 0.001),    # 6000 * 0.001 = 6 > 5.999
    (6.0, 0.01),       # exactly 6000 * 0.001: not exceeded, so the next range
    (0.6, 0.001),      # exactly 6000 * 1e-4 (0.6000000000000001 in binary): next range
    (59.99, 0.01),
    (60.0, 0.1),
    (230.0, 0.1),
    (-11.91, 0.01),    # the sign is ignored
])
def test_resolution_rule_6000_counts(value, expected):
    # formats.md section 3, applied by hand; the ranges it gives for 6000
    # counts (600.0 mV, 6.000 V, 60.00 V, 600.0 V) are those of common
    # 6000-count handhelds (from memory).
    assert meter.resolution(H6000, "voltage", value) == pytest.approx(expected, rel=1e-12)


def test_resolution_other_counts():
    # A 4000-count meter's ranges are 400.0 mV, 4.000 V, 40.00 V (from memory):
    p4000 = profile(counts=4000)
    assert meter.resolution(p4000, "voltage", 3.999) == pytest.approx(0.001)
    assert meter.resolution(p4000, "voltage", 4.5) == pytest.approx(0.01)
    # a 50 000-count bench meter shows 4.9999 V on its 5 V range (from memory)
    p50k = profile(counts=50000, voltage_resolution=1e-5)
    assert meter.resolution(p50k, "voltage", 4.9999) == pytest.approx(1e-4)
    assert meter.resolution(p50k, "voltage", 0.49) == pytest.approx(1e-5)


def test_resolution_never_finer_than_finest():
    # formats.md section 3: "never finer than the profile's finest resolution"
    assert meter.resolution(H6000, "voltage", 1e-6) == pytest.approx(1e-4)
    assert meter.resolution(H6000, "voltage", 0.0) == pytest.approx(1e-4)
    assert meter.resolution(H6000, "resistance", 12.0) == pytest.approx(0.1)  # rule alone: 0.01
    assert meter.resolution(H6000, "current", 2.45e-3) == pytest.approx(1e-6)
    assert meter.resolution(H6000, "current", 1e-6) == pytest.approx(1e-7)
    coarse = profile(voltage_resolution=1e-3)
    assert meter.resolution(coarse, "voltage", 0.4) == pytest.approx(1e-3)
    # a finest step that is not a power of ten is still the floor
    odd = profile(voltage_resolution=0.05)
    assert meter.resolution(odd, "voltage", 0.4) == pytest.approx(0.05)
    assert meter.resolution(odd, "voltage", 120.0) == pytest.approx(0.1)


def test_resolution_vectorised_and_inf():
    got = meter.resolution(H6000, "voltage", np.array([0.4, 5.999, 6.0, 11.91]))
    assert isinstance(got, np.ndarray)
    np.testing.assert_allclose(got, [1e-4, 1e-3, 1e-2, 1e-2], rtol=1e-12)
    assert meter.resolution(H6000, "resistance", math.inf) == math.inf
    assert isinstance(meter.resolution(H6000, "voltage", 1.0), float)


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=1e-9, max_value=1e9, allow_nan=False),
       st.sampled_from([2000, 4000, 6000, 20000, 50000]))
def test_resolution_property(x, counts):
    # formats.md section 3: counts * r exceeds |x|, and the next finer power of
    # ten does not (unless r is the finest step).
    p = profile(counts=counts)
    r = meter.resolution(p, "voltage", x)
    assert counts * r > x * (1 - 1e-12)
    assert r == pytest.approx(1e-4) or counts * r / 10 <= x * (1 + 1e-9)
    k = math.log10(r)
    assert k == pytest.approx(round(k), abs=1e-9)   # a power of ten


# ---------------------------------------------------------------- display

def test_display_rounds_to_resolution():
    # rounding to the step given by the formats.md rule
    assert meter.display(H6000, "voltage", 11.912) == 11.91   # the float nearest 11.91
    assert meter.display(H6000, "voltage", 0.40004) == pytest.approx(0.4)
    assert meter.display(H6000, "voltage", -2.34567) == pytest.approx(-2.346)
    assert meter.display(H6000, "resistance", 4712.34) == pytest.approx(4712.0)
    assert meter.display(H6000, "voltage", -0.00004) == 0.0
    assert math.copysign(1.0, meter.display(H6000, "voltage", -0.00004)) == 1.0  # no "-0"


def test_display_carries_to_next_range():
    # A 6000-count display cannot show 6.000 (6000 counts): 5.9996 V rounds up
    # to full scale and is shown on the next range as 6.00 (common practice,
    # no source: the meter can show at most counts - 1).
    d = meter.display(H6000, "voltage", 5.9996)
    assert d == pytest.approx(6.0)
    assert meter.resolution(H6000, "voltage", d) == pytest.approx(0.01)


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False))
def test_display_within_half_a_step(x):
    # rounding to a step r moves a value at most r / 2 (arithmetic)
    d = meter.display(H6000, "voltage", x)
    r = meter.resolution(H6000, "voltage", d)
    assert abs(d - x) <= r / 2 * (1 + 1e-9)


# ---------------------------------------------------------------- uncertainty

def test_spec_limit_hand_computation():
    # ±(0.5 % of reading + 2 counts) at 11.91 V, counts at the 0.01 V step
    # (the usual reading of a DMM accuracy spec: common practice, no source)
    assert meter.spec_limit(H6000, "voltage", "dc", 11.91) == pytest.approx(
        0.005 * 11.91 + 2 * 0.01)
    # AC voltage uses ±(1.0 % + 3)
    assert meter.spec_limit(H6000, "voltage", "ac", 230.0) == pytest.approx(
        0.01 * 230.0 + 3 * 0.1)
    # resistance ignores the mode
    assert meter.spec_limit(H6000, "resistance", None, 4700.0) == pytest.approx(
        0.005 * 4700.0 + 2 * 1.0)
    assert meter.spec_limit(H6000, "resistance", "ac", 4700.0) == pytest.approx(
        0.005 * 4700.0 + 2 * 1.0)
    # mode None is DC for voltage
    assert meter.spec_limit(H6000, "voltage", None, 11.91) == pytest.approx(
        meter.spec_limit(H6000, "voltage", "dc", 11.91))
    assert meter.spec_limit(H6000, "resistance", None, math.inf) == math.inf


def test_standard_uncertainty_gum():
    # JCGM 100:2008 (GUM) 4.3.7: a quantity known only to lie within ±a,
    # rectangular distribution: u = a / sqrt(3).  GUM F.2.2.1: a digital
    # display of resolution r adds u = r / sqrt(12).  Combined in quadrature.
    a = 0.005 * 11.91 + 2 * 0.01
    r = 0.01
    expected = math.sqrt(a ** 2 / 3 + r ** 2 / 12)
    assert expected == pytest.approx(0.04602, abs=5e-6)   # hand computation
    assert meter.standard_uncertainty(H6000, "voltage", "dc", 11.91) == pytest.approx(
        expected, rel=1e-12)


def test_rectangular_std_matches_scipy():
    # scipy.stats.uniform on [-a, a] (loc=-a, scale=2a) has standard deviation
    # a / sqrt(3), the GUM 4.3.7 figure; the rounding term r / sqrt(12) is the
    # standard deviation of uniform on [-r/2, r/2].
    x = 4700.0
    a = meter.spec_limit(H6000, "resistance", None, x)
    r = meter.resolution(H6000, "resistance", x)
    ref = math.hypot(scipy.stats.uniform(loc=-a, scale=2 * a).std(),
                     scipy.stats.uniform(loc=-r / 2, scale=r).std())
    assert meter.standard_uncertainty(H6000, "resistance", None, x) == pytest.approx(ref)


def test_uncertainty_vectorised():
    xs = np.array([0.4, 11.91, 230.0])
    u = meter.standard_uncertainty(H6000, "voltage", "ac", xs)
    assert u.shape == (3,)
    for x, ui in zip(xs, u):
        assert ui == pytest.approx(meter.standard_uncertainty(H6000, "voltage", "ac", float(x)))
    assert np.all(np.diff(u) > 0)


# ---------------------------------------------------------------- over range

def test_overrange():
    # formats.md section 3: above the top resistance range the display shows
    # OL; an open circuit (inf) is over range too.
    assert meter.overrange(H6000, "resistance", 61e6) is True
    assert meter.overrange(H6000, "resistance", math.inf) is True
    assert meter.overrange(H6000, "resistance", 60e6) is False    # "above": strict
    assert meter.overrange(H6000, "resistance", 4700.0) is False
    assert meter.overrange(H6000, "voltage", 1e6) is False        # no top range in v1
    assert meter.overrange(H6000, "current", -1e3) is False
    np.testing.assert_array_equal(
        meter.overrange(H6000, "resistance", [1.0, np.inf, 7e7]), [False, True, True])


def test_simulate_ol():
    rng = np.random.default_rng(7)
    assert meter.simulate(H6000, "resistance", None, math.inf, rng) == (None, 1)
    assert meter.simulate(H6000, "resistance", None, 75e6, rng) == (None, 1)
    value, ol = meter.simulate(H6000, "resistance", None, 4700.0, rng)
    assert ol == 0 and value is not None


# ---------------------------------------------------------------- simulation

@pytest.mark.parametrize("quantity, mode, x", [
    ("voltage", "dc", 11.91),
    ("voltage", "ac", 230.0),
    ("voltage", "dc", -5.2),
    ("current", "dc", 2.45e-3),
    ("resistance", None, 4700.0),
])
def test_simulate_within_spec(quantity, mode, x):
    # A meter within its specification reads within ±a of the true value,
    # plus at most half a display step from the rounding (GUM F.2.2.1).
    rng = np.random.default_rng(12345)
    a = meter.spec_limit(H6000, quantity, mode, x)
    for _ in range(3000):
        d, ol = meter.simulate(H6000, quantity, mode, x, rng)
        assert ol == 0
        r = meter.resolution(H6000, quantity, d)
        assert abs(d - x) <= a + r / 2 + 1e-12 * abs(x)
        assert d == meter.display(H6000, quantity, d)   # on the display's grid


def test_simulate_spread_is_rectangular():
    # GUM 4.3.7: uniform on ±a has standard deviation a / sqrt(3).  At 4.7 kΩ
    # the 1 Ω display step is small beside a = 25.5 Ω, so the rounding adds
    # under 0.1 % to the spread.  With n draws the sample standard deviation of
    # a uniform variable has relative standard error sqrt((k - 1) / (4 n)),
    # k = 1.8 its kurtosis (the delta-method formula, from memory): about 0.3 %
    # for n = 20000; we allow 5 standard errors.
    rng = np.random.default_rng(2024)
    x, n = 4700.0, 20000
    a = meter.spec_limit(H6000, "resistance", None, x)
    draws = np.array([meter.simulate(H6000, "resistance", None, x, rng)[0] for _ in range(n)])
    se = math.sqrt(0.8 / (4 * n))
    assert draws.std(ddof=1) == pytest.approx(a / math.sqrt(3), rel=5 * se)
    assert abs(draws.mean() - x) < 5 * (a / math.sqrt(3)) / math.sqrt(n)   # unbiased
    assert draws.min() >= x - a - 0.5 and draws.max() <= x + a + 0.5
    # and the combined u of standard_uncertainty describes the spread too
    u = meter.standard_uncertainty(H6000, "resistance", None, x)
    assert draws.std(ddof=1) == pytest.approx(u, rel=5 * se)


def test_simulate_reproducible_and_signs():
    a = [meter.simulate(H6000, "voltage", "dc", 3.3, np.random.default_rng(5)) for _ in range(3)]
    assert a[0] == a[1] == a[2]
    assert meter.simulate(H6000, "voltage", "dc", 3.3, 5) == a[0]    # int seed
    neg = [meter.simulate(H6000, "current", "dc", -0.02, k)[0] for k in range(50)]
    assert all(v < 0 for v in neg)                                    # negatives allowed
    # an ohmmeter does not show a negative resistance (common practice, no source)
    near0 = [meter.simulate(H6000, "resistance", None, 0.05, k)[0] for k in range(200)]
    assert min(near0) >= 0.0


# ---------------------------------------------------------------- loading

def test_loading_divider_reads_one_third():
    # A 10 MΩ meter across the lower leg of two 10 MΩ resistors: the reference
    # library lcapy solves the loaded divider; the meter reads a third of the
    # supply, not half (docs/meter-model.md).
    from lcapy import Circuit
    rm = 1.0 / meter.loading_conductance(H6000)
    assert rm == pytest.approx(10e6)
    c = Circuit(f"""
V1 1 0 dc 12
R1 1 2 10e6
R2 2 0 10e6
RM 2 0 {rm:.6g}
""")
    v = float(c[2].V.dc.expr)
    assert v == pytest.approx(4.0)
    g = 1 / 10e6
    assert v == pytest.approx(12 * g / (g + g + meter.loading_conductance(H6000)))


def test_shunt_in_series():
    # 5 V across 100 Ω read through the meter's 1 Ω shunt: lcapy gives the
    # current with the shunt in series, 5 / 101 A, about 1 % low.
    from lcapy import Circuit
    rs = meter.shunt_resistance(H6000)
    c = Circuit(f"""
V1 1 0 dc 5
R1 1 2 100
RS 2 0 {rs:.6g}
""")
    assert float(c.RS.I.dc.expr) == pytest.approx(5 / (100 + rs))
    assert rs == 1.0


# ---------------------------------------------------------------- bad input

@pytest.mark.parametrize("call, key", [
    (lambda: meter.resolution(H6000, "power", 1.0), "quantity"),
    (lambda: meter.resolution(H6000, "voltage", "twelve"), "value"),
    (lambda: meter.resolution(H6000, "voltage", math.nan), "value"),
    (lambda: meter.display(H6000, "voltage", [1.0, math.nan]), "value"),
    (lambda: meter.spec_limit(H6000, "voltage", "rf", 1.0), "mode"),
    (lambda: meter.standard_uncertainty(H6000, "current", "pulse", 1.0), "mode"),
    (lambda: meter.overrange(H6000, "ohms", 1.0), "quantity"),
    (lambda: meter.simulate(H6000, "voltage", "dc", math.inf, 1), "true_value"),
    (lambda: meter.simulate(H6000, "voltage", "dc", "5", 1), "true_value"),
    (lambda: meter.simulate(H6000, "resistance", None, -1.0, 1), "true_value"),
    (lambda: meter.simulate(H6000, "voltage", "dc", 5.0, "seed"), "rng"),
    (lambda: meter.resolution({"counts": 6000}, "voltage", 1.0), "profile"),
    (lambda: meter.loading_conductance(None), "profile"),
])
def test_bad_arguments(call, key):
    # project rule: bad input raises InputError (a ValueError) naming the argument
    with pytest.raises(InputError) as info:
        call()
    assert info.value.key == key
    assert isinstance(info.value, ValueError)
    assert key in str(info.value)


def test_diode_test_display_ol_and_uncertainty():
    # formats.md section 4: a diode test shows the voltage the test current develops, OL
    # above the display's top (default 2 V); a handheld's diode range is 1 % + 3 counts
    # with 1 mV steps (from memory), uncertainty rectangular (JCGM 100:2008, 4.3.7).
    m = H6000
    assert meter.overrange(m, "diode-test", 2.5) and meter.overrange(m, "diode-test", math.inf)
    assert not meter.overrange(m, "diode-test", 0.62)
    assert meter.simulate(m, "diode-test", None, math.inf, 1) == (None, 1)
    # a white LED at 1 mA develops about 2.8 V: over the 2 V top, OL (common practice)
    assert meter.simulate(m, "diode-test", None, 2.8, 1) == (None, 1)
    for seed in range(20):
        v, ol = meter.simulate(m, "diode-test", None, 0.612, seed)
        assert ol == 0 and abs(v - 0.612) <= 0.01 * 0.612 + 3e-3 + 0.5e-3
        assert v == pytest.approx(round(v, 3), abs=1e-12)          # 1 mV steps
    a = 0.01 * 0.612 + 3 * 1e-3
    r = 1e-3
    want = math.sqrt(a ** 2 / 3 + r ** 2 / 12)
    assert meter.standard_uncertainty(m, "diode-test", None, 0.612) == pytest.approx(want, rel=1e-9)
    # never below zero: a shorted junction reads 0.000
    assert all(meter.simulate(m, "diode-test", None, 0.0, s)[0] >= 0 for s in range(20))
