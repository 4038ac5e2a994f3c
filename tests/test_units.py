"""Tests of faultfind.units: values, prefixes, RKM codes, tolerances, formatting."""

from __future__ import annotations

import math
import random
import unicodedata

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from faultfind.errors import InputError, UnitError
from faultfind.units import (
    UNIT_NAMES,
    UNITS,
    format_tolerance,
    format_value,
    parse_accuracy,
    parse_frequency,
    parse_phase,
    parse_tolerance,
    parse_value,
)

# Characters looked up by their Unicode names (Unicode Character Database, via
# the stdlib's unicodedata), so the tests do not depend on how this file's
# editor shows them.
MICRO_SIGN = unicodedata.lookup("MICRO SIGN")  # U+00B5
GREEK_MU = unicodedata.lookup("GREEK SMALL LETTER MU")  # U+03BC
OHM_SIGN = unicodedata.lookup("OHM SIGN")  # U+2126
OMEGA = unicodedata.lookup("GREEK CAPITAL LETTER OMEGA")  # U+03A9
PLUS_MINUS = unicodedata.lookup("PLUS-MINUS SIGN")  # U+00B1


def test_looked_up_characters_are_the_expected_code_points():
    # Unicode Character Database: the code points named in the brief.
    assert (ord(MICRO_SIGN), ord(GREEK_MU), ord(OHM_SIGN), ord(OMEGA)) == (
        0xB5, 0x3BC, 0x2126, 0x3A9)
    # Unicode: the ohm sign's canonical decomposition is capital omega, which is
    # why both must mean the same unit.
    assert unicodedata.normalize("NFC", OHM_SIGN) == OMEGA
    assert "Ω" == OMEGA  # the canonical symbol the project uses is U+03A9


# --- the forms of formats.md section 1 ------------------------------------

# Source of the expected numbers: SI prefixes of the BIPM SI Brochure, 9th ed.
# (2019), Table 7 (k = 1e3, m = 1e-3, n = 1e-9; from memory) and the RKM code
# of IEC 60062:2016 (4k7 = 4.7 k, R47 = 0.47; from memory).
@pytest.mark.parametrize("text, unit, expected", [
    ("4k7", "Ω", 4700.0),
    ("4.7k", "Ω", 4700.0),
    ("4.7 kΩ", "Ω", 4700.0),
    ("4700", "Ω", 4700.0),
    ("R47", "Ω", 0.47),
    ("100n", "F", 100e-9),
    ("2.2 mH", "H", 2.2e-3),
    ("24 V", "V", 24.0),
    ("12", "Ω", 12.0),
    ("60 Hz", "Hz", 60.0),
    ("10M", "Ω", 10e6),
    ("0.01u", "A", 0.01e-6),
    ("11.82 V", "V", 11.82),
    ("2.1 mA", "A", 2.1e-3),
    ("4k61", "Ω", 4610.0),
])
def test_formats_md_section_1_forms(text, unit, expected):
    assert parse_value(text, unit) == pytest.approx(expected, rel=1e-12)
    assert parse_value(text) == pytest.approx(expected, rel=1e-12)  # unit=None: any unit


@pytest.mark.parametrize("text, expected", [
    ("4700", 4700.0), ("1e3", 1000.0), ("-0.5", -0.5), ("+2.5", 2.5), (".5", 0.5),
    ("5.", 5.0), ("1.5E-3", 1.5e-3), ("  47  ", 47.0), ("0", 0.0),
])
def test_plain_numbers(text, expected):
    # Decimal notation as Python's float() reads it (reference: float()).
    assert parse_value(text) == float(text.strip()) == expected


# SI prefixes: BIPM SI Brochure, 9th ed. (2019), Table 7 (from memory).
@pytest.mark.parametrize("prefix, power", [
    ("p", -12), ("n", -9), ("u", -6), (MICRO_SIGN, -6), (GREEK_MU, -6), ("m", -3),
    ("k", 3), ("M", 6), ("G", 9),
])
def test_si_prefixes(prefix, power):
    assert parse_value(f"3.3{prefix}") == pytest.approx(3.3 * 10.0 ** power, rel=1e-12)
    assert parse_value(f"3.3 {prefix}F", "F") == pytest.approx(3.3 * 10.0 ** power, rel=1e-12)


def test_prefixes_are_case_sensitive():
    # BIPM SI Brochure, 9th ed. (2019), 3: prefix symbols are case-sensitive,
    # m (milli) and M (mega) differ by 10**9 (from memory).
    assert parse_value("1m") == pytest.approx(1e-3)
    assert parse_value("1M") == pytest.approx(1e6)
    assert parse_value("2.2 mH", "H") != parse_value("2.2 MH", "H")


def test_capital_k_is_kilo_as_on_resistor_markings():
    # IEC 60062:2016, RKM code writes kilo-ohms with a capital K (4K7; from memory).
    assert parse_value("4K7") == 4700.0
    assert parse_value("4.7K") == 4700.0


# --- RKM code of IEC 60062 ---------------------------------------------------

# IEC 60062:2016, RKM code: the multiplier letter (R for 1) stands where the
# decimal point would be.  Examples from memory.
@pytest.mark.parametrize("code, expected", [
    ("R47", 0.47), ("4R7", 4.7), ("47R", 47.0), ("470R", 470.0), ("0R1", 0.1),
    ("4K7", 4.7e3), ("47K", 47e3), ("4k7", 4.7e3), ("2M2", 2.2e6), ("1G0", 1e9),
    ("p68", 0.68e-12), ("6p8", 6.8e-12), ("1n5", 1.5e-9), ("4n7", 4.7e-9),
    ("2" + MICRO_SIGN + "2", 2.2e-6), ("1u5", 1.5e-6), ("3m3", 3.3e-3), ("k47", 470.0),
])
def test_rkm_codes(code, expected):
    assert parse_value(code) == pytest.approx(expected, rel=1e-12)


def test_rkm_with_unit_after_it():
    # IEC 60062:2016, RKM code, followed by the unit as on a parts list (from memory).
    assert parse_value("4k7 Ω", "Ω") == 4700.0
    assert parse_value("1n5F", "F") == pytest.approx(1.5e-9)


def test_rkm_r_marks_ohms():
    # IEC 60062:2016: the letter R is used for resistance values (from memory).
    assert parse_value("4R7", "Ω") == 4.7
    with pytest.raises(UnitError, match="does not fit here: expected F"):
        parse_value("4R7", "F")
    with pytest.raises(UnitError):
        parse_value("4R7 V")


def test_3v3_trade_form_carries_volts():
    # common practice (no source): supply rails written 3V3, 1V8, 2V5.
    assert parse_value("3V3", "V") == pytest.approx(3.3)
    assert parse_value("1V8") == pytest.approx(1.8)
    with pytest.raises(UnitError, match="expected Ω"):
        parse_value("3V3", "Ω")


@pytest.mark.parametrize("code", ["-4k7", "-R47", "-47R", "+2M2", "-3V3"])
def test_rkm_code_takes_no_sign(code):
    # IEC 60062:2016: an RKM code marks a component value, never negative (from memory).
    with pytest.raises(UnitError, match="no sign"):
        parse_value(code)


@settings(max_examples=300, deadline=None)
@given(st.text(alphabet="0123456789", max_size=4),
       st.sampled_from(list("RpnumkKMG") + [MICRO_SIGN]),
       st.text(alphabet="0123456789", min_size=1, max_size=4))
def test_rkm_code_never_negative(whole, letter, frac):
    # IEC 60062:2016, RKM code: digits, a letter at the decimal point, digits.
    # The value is the decimal number with the point there, times the letter's
    # multiplier (SI Brochure Table 7; R = 1).
    power = {"R": 0, "p": -12, "n": -9, "u": -6, MICRO_SIGN: -6, "m": -3, "k": 3, "K": 3,
             "M": 6, "G": 9}[letter]
    value = parse_value(whole + letter + frac)
    assert value >= 0
    assert value == pytest.approx(float(f"{whole or '0'}.{frac}") * 10.0 ** power, rel=1e-12)


# --- units ---------------------------------------------------------------------

@pytest.mark.parametrize("text", [
    "4.7 k" + OMEGA, "4.7 k" + OHM_SIGN, "4.7 kohm", "4.7 kohms", "4.7kOhm", "4.7 kOHMS",
    "4.7k" + OMEGA,
])
def test_ohm_spellings(text):
    # Unicode: U+2126 OHM SIGN and U+03A9 are the same unit; "ohm" is the SI name
    # of the unit (SI Brochure, 9th ed., Table 4; from memory).
    assert parse_value(text, "Ω") == 4700.0


def test_ohm_sign_accepted_as_unit_argument():
    assert parse_value("10", OHM_SIGN) == 10.0
    assert parse_value("10 Ω", "ohm") == 10.0


@pytest.mark.parametrize("text, unit", [
    ("24 V", "V"), ("2 A", "A"), ("100 nF", "F"), ("10 mH", "H"), ("1.5 kHz", "Hz"),
    ("10 Ω", "Ω"),
])
def test_every_unit_is_accepted_where_it_fits(text, unit):
    # SI Brochure, 9th ed., Table 4: V, A, F, H, Hz, Ω are the derived-unit symbols (from memory).
    assert unit in UNITS
    parse_value(text, unit)


def test_unit_names():
    # SI Brochure, 9th ed., Table 4: names of the units (from memory).
    assert UNIT_NAMES["Ω"] == "ohm" and UNIT_NAMES["F"] == "farad"
    assert UNIT_NAMES["H"] == "henry" and UNIT_NAMES["Hz"] == "hertz"


@pytest.mark.parametrize("text, unit, written", [
    ("24 V", "Ω", "V"), ("4.7 kΩ", "V", "Ω"), ("100 nF", "H", "F"), ("2.2 mH", "F", "H"),
    ("1 A", "V", "A"), ("50 Hz", "V", "Hz"),
])
def test_unit_mismatch(text, unit, written):
    with pytest.raises(UnitError) as info:
        parse_value(text, unit)
    assert f"unit '{written}' does not fit here: expected {unit}" in str(info.value)
    assert isinstance(info.value, ValueError)


def test_dimensionless_refuses_a_unit():
    assert parse_value("100k", "") == 1e5
    with pytest.raises(UnitError, match="no unit"):
        parse_value("100 V", "")


def test_unknown_unit_argument():
    with pytest.raises(UnitError, match="unit"):
        parse_value("1", "W")


def test_deg_is_not_a_value_unit():
    with pytest.raises(UnitError, match="'deg'"):
        parse_value("30 deg")


def test_numbers_pass_through():
    assert parse_value(4700) == 4700.0 and isinstance(parse_value(4700), float)
    assert parse_value(2.2e-3, "H") == 2.2e-3
    assert parse_value(np.float64(1.5)) == 1.5
    assert parse_value(np.int64(3)) == 3.0


# --- bad input ---------------------------------------------------------------

@pytest.mark.parametrize("text", [
    "", "   ", "abc", "nan", "NaN", "inf", "-inf", "4,7k", "4.7kk", "4k7k", "R", "k", "4.7R",
    "1.2.3", "12 W", "4.7 uf", "1e400", "OL", "--5", "4 k7", "1e", "e3", "Ω", "10 %",
    "\u0663k",  # ARABIC-INDIC DIGIT THREE: only ASCII digits are read
])
def test_garbage_raises_unit_error_naming_the_text(text):
    with pytest.raises(UnitError) as info:
        parse_value(text, what="value of R3")
    assert isinstance(info.value, ValueError) and isinstance(info.value, InputError)
    message = str(info.value)
    assert "value of R3" in message
    if text.strip():
        assert repr(text) in message


@pytest.mark.parametrize("bad", [True, False, None, [4700], {"v": 1}, float("nan"),
                                 float("inf"), -float("inf")])
def test_bad_types_and_non_finite_numbers(bad):
    with pytest.raises(UnitError):
        parse_value(bad)


def test_error_can_take_context_for_the_caller():
    with pytest.raises(UnitError) as info:
        parse_value("24 V", "Ω")
    located = info.value.with_context(file="cooler.toml", line=12, part="R1", key="value")
    assert isinstance(located, UnitError)
    assert str(located).startswith("cooler.toml:12: part R1: key 'value': ")


@settings(max_examples=400, deadline=None)
@given(st.one_of(
    st.text(max_size=12),
    st.text(alphabet="0123456789.eE+-pnuµμmkKMGRVΩΩohmsFHAHz %/±", max_size=10),
))
def test_any_text_gives_a_finite_float_or_unit_error(text):
    # common practice (no source): bad input must never escape as a raw exception.
    try:
        value = parse_value(text)
    except UnitError:
        return
    assert isinstance(value, float) and math.isfinite(value)


# --- frequency and phase -------------------------------------------------------

def test_parse_frequency():
    # SI Brochure Table 7 (k = 1e3; from memory).
    assert parse_frequency("60 Hz") == 60.0
    assert parse_frequency("1.5 kHz") == 1500.0
    assert parse_frequency("180") == 180.0
    assert parse_frequency(50) == 50.0
    for bad in ("0", "-50 Hz", "60 V", "fast", 0, True):
        with pytest.raises(UnitError):
            parse_frequency(bad)


@pytest.mark.parametrize("text, expected", [
    ("-120 deg", -120.0), ("-120°", -120.0), ("30", 30.0), (30, 30.0), ("240 degrees", 240.0),
    ("+90 deg", 90.0), (-120.5, -120.5),
])
def test_parse_phase_degrees(text, expected):
    # Three-phase supplies are 120 degrees apart (fact of the trade).
    assert parse_phase(text) == expected


def test_parse_phase_radians():
    # SI Brochure, 9th ed., Table 8: 1 degree = pi/180 rad (from memory); reference numpy.rad2deg.
    assert parse_phase("0.5 rad") == pytest.approx(float(np.rad2deg(0.5)), rel=1e-12)
    assert parse_phase(f"{math.pi!r} rad") == pytest.approx(180.0, rel=1e-12)


@pytest.mark.parametrize("bad", ["", "north", "30 V", "nan", "1e999", True, None, float("nan")])
def test_parse_phase_bad(bad):
    with pytest.raises(UnitError):
        parse_phase(bad)


# --- tolerances ----------------------------------------------------------------

@pytest.mark.parametrize("text", ["1%", PLUS_MINUS + "1%", "+/-1%", PLUS_MINUS + " 1 %", "+-1%",
                                  "+/- 1 %", "1 %"])
def test_symmetric_percent_tolerance(text):
    # formats.md section 1: "1%", "±1%"; 1 % = 0.01 by definition.
    assert parse_tolerance(text, 4700.0) == pytest.approx((0.01, 0.01), rel=1e-12)


@pytest.mark.parametrize("text", ["-20%/+80%", "+80%/-20%", "-20 %/+80 %", "-20% / +80%"])
def test_asymmetric_tolerance(text):
    # IEC 60062:2016 tolerance letter Z is -20 %/+80 %, usual for ceramic and
    # electrolytic capacitors (from memory).
    assert parse_tolerance(text, 100e-9) == pytest.approx((0.20, 0.80), rel=1e-12)


def test_above_may_exceed_100_percent():
    # common practice (no source): old electrolytics were sold as -10 %/+100 % and wider.
    assert parse_tolerance("-10%/+150%", 1e-3) == pytest.approx((0.10, 1.50))


@pytest.mark.parametrize("text, nominal, unit, expected", [
    (PLUS_MINUS + "0.2 V", 24.0, "V", 0.2 / 24.0),
    ("0.2 V", 24.0, "V", 0.2 / 24.0),
    (PLUS_MINUS + "0.2 V", -12.0, "V", 0.2 / 12.0),  # |nominal| is used
    (PLUS_MINUS + "200 mV", 5.0, None, 0.04),
    (PLUS_MINUS + "10 Ω", 1000.0, "Ω", 0.01),
    (PLUS_MINUS + "0R1", 10.0, "Ω", 0.01),
])
def test_absolute_tolerance(text, nominal, unit, expected):
    # formats.md section 1: absolute with unit, converted with the nominal.
    below, above = parse_tolerance(text, nominal, unit)
    assert (below, above) == pytest.approx((expected, expected), rel=1e-12)


def test_asymmetric_absolute_tolerance():
    assert parse_tolerance("-0.1 V/+0.3 V", 10.0, "V") == pytest.approx((0.01, 0.03))


@pytest.mark.parametrize("text, nominal, unit, fragment", [
    ("5", 1.0, None, "5%"),                       # bare number: explain how to write it
    ("0.05", 1.0, None, "5%"),
    ("-5%", 1.0, None, "cannot be"),              # negative / one-sided
    (PLUS_MINUS + "-5%", 1.0, None, "cannot be"),
    (PLUS_MINUS + "100%", 1.0, None, "below zero"),
    ("-100%/+10%", 1.0, None, "below zero"),
    ("-150%/+10%", 1.0, None, "below zero"),
    (PLUS_MINUS + "0.2 V", 0.0, "V", "nominal"),  # absolute with nominal 0
    (PLUS_MINUS + "0.2 V", None, "V", "nominal"),
    (PLUS_MINUS + "0.2 V", 4700.0, "Ω", "does not fit here: expected Ω"),
    (PLUS_MINUS + "200m", 5.0, None, "no unit"),
    ("+5%/+10%", 1.0, None, "one '-' side"),
    ("5%/10%", 1.0, None, "one '-' side"),
    ("-5%/+10%/+1%", 1.0, None, "-20%/+80%"),
    ("", 1.0, None, "empty"),
    ("loose", 1.0, None, "loose"),
    ("x%", 1.0, None, "percentage"),
])
def test_bad_tolerances(text, nominal, unit, fragment):
    with pytest.raises(UnitError) as info:
        parse_tolerance(text, nominal, unit)
    assert fragment in str(info.value)
    assert isinstance(info.value, ValueError)


@pytest.mark.parametrize("bad", [5, 0.05, True, None, ["5%"]])
def test_tolerance_must_be_text(bad):
    with pytest.raises(UnitError):
        parse_tolerance(bad, 1.0)


def test_tolerance_bad_nominal():
    for nominal in ("4k7", float("nan"), True):
        with pytest.raises(UnitError, match="nominal"):
            parse_tolerance("5%", nominal)


# --- formatting ----------------------------------------------------------------

# Engineering notation with SI prefixes (SI Brochure Table 7; the project's
# examples in the brief).
@pytest.mark.parametrize("value, unit, expected", [
    (4700.0, "Ω", "4.7 kΩ"), (12.0, "V", "12 V"), (100e-9, "F", "100 nF"),
    (2.45e-3, "A", "2.45 mA"), (0.0, "V", "0 V"), (-0.0, "V", "0 V"), (-1.2, "V", "-1.2 V"),
    (1.23e-6, "A", "1.23 " + MICRO_SIGN + "A"), (2.2e6, "Ω", "2.2 MΩ"), (1e9, "Ω", "1 GΩ"),
    (6.8e-12, "F", "6.8 pF"), (60.0, "Hz", "60 Hz"), (4700.0, "", "4.7 k"), (12.0, "", "12"),
    (999.6, "V", "1 kV"), (1.5e-15, "F", "1.5e-15 F"), (1.5e12, "Ω", "1.5e+12 Ω"),
    (4700.0, "ohm", "4.7 kΩ"), (123456.0, "Hz", "123 kHz"),
])
def test_format_value(value, unit, expected):
    assert format_value(value, unit) == expected


def test_format_value_digits():
    assert format_value(4712.3, "Ω", digits=4) == "4.712 kΩ"
    assert format_value(4712.3, "Ω", digits=1) == "5 kΩ"
    assert format_value(12345.0, "", digits=1) == "10 k"  # rounding goes into the padding
    assert format_value(11.82, "V", digits=6) == "11.82 V"  # trailing zeros dropped


def test_format_value_missing_and_infinite():
    assert format_value(None, "V") == "—"
    assert format_value(float("nan"), "V") == "—"
    assert format_value(float("inf"), "Ω") == "∞ Ω"
    assert format_value(-float("inf"), "V") == "-∞ V"


@pytest.mark.parametrize("kwargs", [
    dict(value="4k7"), dict(value=True), dict(value=1.0, digits=0), dict(value=1.0, digits=2.5),
    dict(value=1.0, digits=True), dict(value=1.0, unit=None),
])
def test_format_value_bad_arguments(kwargs):
    with pytest.raises(UnitError):
        format_value(**kwargs)


def _random_values(seed, n=400):
    rng = random.Random(seed)
    for _ in range(n):
        sign = rng.choice((-1.0, 1.0))
        yield sign * 10.0 ** rng.uniform(-16.0, 14.0)


@pytest.mark.parametrize("digits", [1, 2, 3, 4, 6, 9])
def test_format_round_trip_matches_python_rounding(digits):
    # Reference: Python's format mini-language, 'g' presentation type, rounds a
    # float to the given significant digits; faultfind must show the same number.
    for x in _random_values(seed=60063 + digits):
        for unit in ("", "V", "Ω"):
            text = format_value(x, unit, digits)
            assert parse_value(text) == pytest.approx(float(f"{x:.{digits}g}"), rel=1e-12), text


def test_format_uses_engineering_prefix_range():
    # Engineering notation: mantissa in [1, 1000) with a prefix of a power of
    # 1000 (common practice, no source).
    for x in _random_values(seed=2019):
        text = format_value(abs(x), "V", 3)
        number = text.split(" ")[0]
        if "e" not in number:
            assert 1.0 <= float(number) < 1000.0, text
        else:
            assert abs(x) < 0.9995e-12 or abs(x) >= 999.5e9, text


@pytest.mark.parametrize("below, above, expected", [
    (0.01, 0.01, "±1 %"), (0.05, 0.05, "±5 %"), (0.2, 0.8, "-20 %/+80 %"),
    (0.001, 0.001, "±0.1 %"), (1 / 3, 1 / 3, "±33.3 %"), (0.00125, 0.00125, "±0.125 %"),
    (0.0, 0.1, "-0 %/+10 %"), (0.1, 10.0, "-10 %/+1000 %"), (0.05, 0.0500000001, "±5 %"),
])
def test_format_tolerance(below, above, expected):
    assert format_tolerance(below, above) == expected.replace("±", PLUS_MINUS)


def test_format_tolerance_round_trip():
    # parse_tolerance must read back what format_tolerance writes (3 significant digits).
    rng = random.Random(62)
    for _ in range(300):
        below = 10.0 ** rng.uniform(-4.0, -0.05)
        above = rng.choice((below, 10.0 ** rng.uniform(-4.0, 0.5)))
        b, a = parse_tolerance(format_tolerance(below, above), 1.0)
        assert b == pytest.approx(below, rel=5e-3) and a == pytest.approx(above, rel=5e-3)


@pytest.mark.parametrize("below, above", [(-0.01, 0.01), (0.01, float("nan")), ("5%", 0.05),
                                          (0.01, None), (True, 0.01)])
def test_format_tolerance_bad(below, above):
    with pytest.raises(UnitError):
        format_tolerance(below, above)


# --- meter accuracy --------------------------------------------------------------

@pytest.mark.parametrize("text, expected", [
    ("0.05% + 2", (0.05, 2.0)), ("0.5%+5", (0.5, 5.0)), ("1 %", (1.0, 0.0)),
    ("0.8 % + 3", (0.8, 3.0)),
    # Handheld meter data sheets write ±(% of reading + counts/digits)
    # (common practice, no source).
    (PLUS_MINUS + "(0.5% + 2)", (0.5, 2.0)), ("±(1.0% + 3 counts)", (1.0, 3.0)),
    ("0.5% + 2 digits", (0.5, 2.0)), ("0.5% + 2d", (0.5, 2.0)), ("2% + 10 dgt", (2.0, 10.0)),
])
def test_parse_accuracy(text, expected):
    assert parse_accuracy(text) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("bad", ["", "0.5", "2 counts", "0.5% + ", "0.5% - 2", "x% + 2",
                                 "0.5% + 2 + 1", 0.5, None, True])
def test_parse_accuracy_bad(bad):
    with pytest.raises(UnitError) as info:
        parse_accuracy(bad)
    assert "accuracy" in str(info.value)
