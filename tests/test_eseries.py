"""Tests of faultfind.eseries: the preferred numbers of IEC 60063."""

from __future__ import annotations

import math
import random

import pytest

from faultfind.errors import InputError
from faultfind.eseries import SERIES, nearest, neighbours, series_for_tolerance, series_values

# IEC 60063:2015, from memory: the E12 and E24 tables (historical two-digit values).
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
       3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)

# IEC 60063:2015, from memory: the E96 table (three significant digits, x 100).
E96_X100 = (
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
    147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
    215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
    316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
    464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
    681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976,
)

# IEC 60063:2015, from memory: the E48 table (x 100).
E48_X100 = (
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205,
    215, 226, 237, 249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442,
    464, 487, 511, 536, 562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
)


def _x100(values):
    return tuple(round(v * 100) for v in values)


def test_e12_table():
    assert series_values("E12") == E12  # IEC 60063:2015, from memory


def test_e24_table():
    assert series_values("E24") == E24  # IEC 60063:2015, from memory


def test_e3_and_e6_tables():
    # IEC 60063:2015, from memory.
    assert series_values("E3") == (1.0, 2.2, 4.7)
    assert series_values("E6") == (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)


def test_e96_table():
    assert _x100(series_values("E96")) == E96_X100  # IEC 60063:2015, from memory


def test_e48_table():
    assert _x100(series_values("E48")) == E48_X100  # IEC 60063:2015, from memory


@pytest.mark.parametrize("name, count", [
    ("E3", 3), ("E6", 6), ("E12", 12), ("E24", 24), ("E48", 48), ("E96", 96), ("E192", 192),
])
def test_count_per_decade(name, count):
    # IEC 60063:2015: the number after E is the number of values per decade.
    assert len(series_values(name)) == count
    assert len(set(series_values(name))) == count


@pytest.mark.parametrize("value", [1.00, 1.02, 1.05, 1.07, 2.49, 4.99, 5.11, 9.09, 9.76])
def test_e96_spot_values(value):
    # IEC 60063:2015, from memory: common 1 % resistor values (4.99 k, 49.9 k ...).
    assert value in series_values("E96")


@pytest.mark.parametrize("value", [1.01, 1.04, 2.03, 4.93, 9.20, 9.88])
def test_e192_spot_values(value):
    # IEC 60063:2015, from memory: E192 values, including the exception 9.20.
    assert value in series_values("E192")


def test_e192_exception_at_9_20():
    # IEC 60063:2015 (from memory): 10**(185/192) rounds to 9.19, but the table has 9.20.
    assert round(10 ** (185 / 192), 2) == 9.19
    assert 9.19 not in series_values("E192")
    assert series_values("E192")[185] == 9.20


def test_e24_historical_values_differ_from_formula():
    # IEC 60063:2015 (from memory): the two-digit E24 values at 2.7, 3.0, 3.3, 3.6,
    # 3.9, 4.3, 4.7 and 8.2 are not 10**(i/24) rounded to two digits.
    formula = tuple(round(10 ** (i / 24), 1) for i in range(24))
    differ = {e for e, f in zip(series_values("E24"), formula) if e != f}
    assert differ == {2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2}


@pytest.mark.parametrize("name", list(SERIES))
def test_monotonic_within_one_decade_and_geometric(name):
    # IEC 60063: values rise by a ratio of about 10**(1/n) (the definition of the series);
    # the rounded values stay within a few percent of it (common practice, no source).
    values = series_values(name)
    assert values[0] == 1.0 and values[-1] < 10.0
    assert all(a < b for a, b in zip(values, values[1:]))
    n = len(values)
    step = 10 ** (1 / n)
    ratios = [b / a for a, b in zip(values, values[1:] + (10.0,))]
    assert max(abs(r / step - 1) for r in ratios) < 0.05


@pytest.mark.parametrize("coarse, fine", [("E3", "E6"), ("E6", "E12"), ("E12", "E24"),
                                          ("E48", "E96"), ("E96", "E192")])
def test_each_series_is_every_second_value_of_the_next(coarse, fine):
    # IEC 60063:2015: each series takes every second value of the next finer one (from memory).
    assert series_values(coarse) == series_values(fine)[::2]


def test_e24_is_not_part_of_e48():
    # IEC 60063:2015 (from memory): the three-digit series do not contain 4.7 or 2.2
    # (E48 has 4.64 and 4.87, 2.15 and 2.26).
    assert 4.7 not in series_values("E48") and 2.2 not in series_values("E96")


def test_names_are_case_insensitive():
    assert series_values("e24") == series_values("E24") == series_values(" E24 ")


@pytest.mark.parametrize("bad", ["E5", "E", "24", "", None, 24, "E1000"])
def test_unknown_series(bad):
    with pytest.raises(InputError) as info:
        series_values(bad)
    assert isinstance(info.value, ValueError)
    with pytest.raises(InputError):
        nearest(100.0, bad)


# --- nearest and neighbours ------------------------------------------------------

@pytest.mark.parametrize("value, series, expected", [
    (4600.0, "E24", 4700.0),      # common practice (no source): 4.6 k is read as a 4k7
    (9.9, "E24", 10.0),           # into the next decade
    (0.00047, "E24", 0.00047),
    (0.000461, "E24", 0.00047),
    (4700.0, "E24", 4700.0),
    (1e6, "E12", 1e6),
    (5000.0, "E12", 4700.0),      # log midpoint of 4.7 and 5.6 is 5.13
    (5200.0, "E12", 5600.0),
    (5000.0, "E24", 5100.0),
    (12345.0, "E96", 12400.0),    # log midpoint of 1.21 and 1.24 is 1.2249
    (4990.0, "E96", 4990.0),
    (9.2e3, "E192", 9.2e3),
    (1.04e-9, "e6", 1.0e-9),
    (0.95, "E12", 1.0),
    (0.86, "E12", 0.82),
    (3.0e11, "E3", 2.2e11),       # log midpoint of 2.2 and 4.7 is 3.22
])
def test_nearest_cases(value, series, expected):
    # Standard values from IEC 60063:2015 (from memory); nearness on a log scale.
    assert nearest(value, series) == expected


def test_nearest_returns_the_float_of_the_decimal_value():
    # 4.7e-4 written in decimal: the result must equal Python's float("4.7e-4") exactly,
    # not 4.7 * 10**-4 with a rounding error.
    assert nearest(0.000468) == float("4.7e-4")
    assert nearest(3.3e-9, "E6") == float("3.3e-9")


@pytest.mark.parametrize("name", list(SERIES))
def test_nearest_is_a_standard_value_no_other_closer(name):
    # Brute-force reference over three decades: the result is a series value and no
    # other series value is closer in ratio.
    rng = random.Random(60063 + len(name))
    mantissas = series_values(name)
    for _ in range(200):
        value = 10 ** rng.uniform(-12, 9)
        got = nearest(value, name)
        decade = math.floor(math.log10(got) + 1e-9)
        assert round(got / 10 ** decade, 2) in mantissas
        d0 = math.floor(math.log10(value))
        pool = [m * 10.0 ** d for d in (d0 - 1, d0, d0 + 1) for m in mantissas]
        best = min(abs(math.log(p / value)) for p in pool)
        assert abs(math.log(got / value)) <= best + 1e-9


@pytest.mark.parametrize("value, series, expected", [
    (4600.0, "E24", (4300.0, 4700.0)),
    (4700.0, "E24", (4700.0, 4700.0)),
    (9.5, "E24", (9.1, 10.0)),
    (0.95, "E12", (0.82, 1.0)),
    (1.0, "E12", (1.0, 1.0)),
    (1050.0, "E96", (1050.0, 1050.0)),
    (1060.0, "E96", (1050.0, 1070.0)),
    (1e-3, "E3", (1e-3, 1e-3)),
    (1.1e-3, "E3", (1e-3, 2.2e-3)),
    (5e5, "E6", (4.7e5, 6.8e5)),
])
def test_neighbours(value, series, expected):
    # Standard values from IEC 60063:2015 (from memory).
    assert neighbours(value, series) == pytest.approx(expected, rel=1e-12)


def test_neighbours_bracket_and_contain_nearest():
    rng = random.Random(24)
    for _ in range(300):
        value = 10 ** rng.uniform(-9, 7)
        below, above = neighbours(value, "E24")
        assert below <= value <= above
        assert nearest(value, "E24") in (below, above)
        # The widest E24 step is 1.3 -> 1.5 (IEC 60063:2015 table, from memory).
        assert above / below <= 1.5 / 1.3 + 1e-12


@pytest.mark.parametrize("bad", [0, 0.0, -4700.0, float("nan"), float("inf"), True, "4k7", None])
def test_nearest_and_neighbours_bad_value(bad):
    for function in (nearest, neighbours):
        with pytest.raises(InputError) as info:
            function(bad)
        assert "value" in str(info.value)


# --- tolerance grades ------------------------------------------------------------

@pytest.mark.parametrize("fraction, expected", [
    (0.20, "E6"), (0.10, "E12"), (0.05, "E24"), (0.02, "E48"), (0.01, "E96"),
    (0.005, "E192"), (0.0025, "E192"), (0.001, "E192"), (0.0, "E192"),
    (0.40, "E3"), (0.03, "E24"), (0.15, "E6"), (0.0075, "E96"), (0.05 * (1 + 1e-12), "E24"),
])
def test_series_for_tolerance(fraction, expected):
    # IEC 60063:2015 pairs E6 with 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %,
    # E192 0.5 % and finer; E3 with wider than 20 % (from memory).  A tolerance
    # between two grades takes the wider grade (common practice, no source).
    assert series_for_tolerance(fraction) == expected


@pytest.mark.parametrize("bad", [-0.01, 1.0, 5, float("nan"), True, "5%", None])
def test_series_for_tolerance_bad(bad):
    with pytest.raises(InputError, match="fraction"):
        series_for_tolerance(bad)
