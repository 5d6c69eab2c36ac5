"""Engineering notation: parsing, formatting and the IEC 60062 letter code."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from stockbias.errors import InputError, NotationError
from stockbias.units import UNITS, format_quantity, format_resistance_code, parse_quantity

# Relative tolerance for values that are exact decimal conversions: the parser builds one
# decimal string and converts it once, so these compare equal to the float literal.
EXACT = 0.0

# --------------------------------------------------------------------------- parsing


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        # plain numbers
        ("4700", "ohm", 4700.0),
        ("4.7e3", "ohm", 4700.0),
        ("4.7E3", "ohm", 4700.0),
        ("1e-3", "A", 1e-3),
        ("-6", "V", -6.0),
        ("+5", "V", 5.0),
        (".5", "V", 0.5),
        ("5.", "V", 5.0),
        ("0", "ohm", 0.0),
        ("  12  ", "V", 12.0),
        ("\t4.7k\n", "ohm", 4700.0),
        # SI prefixes, case kept: m milli, M mega, k and K both kilo
        ("4.7k", "ohm", 4700.0),
        ("4.7K", "ohm", 4700.0),
        ("2.2M", "ohm", 2.2e6),
        ("1.5G", "ohm", 1.5e9),
        ("1T", "ohm", 1e12),
        ("200m", "A", 0.2),
        ("10p", "s", 10e-12),
        ("3n", "s", 3e-9),
        ("50u", "A", 50e-6),
        ("50µ", "A", 50e-6),  # U+00B5 micro sign
        ("50μ", "A", 50e-6),  # U+03BC Greek mu
        ("-2.5m", "V", -2.5e-3),
        # a space between number and prefix/unit
        ("200 mA", "A", 0.2),
        ("200mA", "A", 0.2),
        ("5 MA", "A", 5e6),  # prefix case matters: mega-ampere, not milli
        ("625mW", "W", 0.625),
        ("0.25 W", "W", 0.25),
        ("0.25 watt", "W", 0.25),
        ("2 watts", "W", 2.0),
        ("12 V", "V", 12.0),
        ("12v", "V", 12.0),  # unit word case may not matter
        ("12 volts", "V", 12.0),
        ("1 amp", "A", 1.0),
        ("3 amps", "A", 3.0),
        ("20mamps", "A", 20e-3),
        ("4.7 kΩ", "ohm", 4700.0),
        ("4.7kΩ", "ohm", 4700.0),
        ("4.7k\u2126", "ohm", 4700.0),  # U+2126 ohm sign
        ("4.7 kohm", "ohm", 4700.0),
        ("1 MOhms", "ohm", 1e6),
        ("100 ohm", "ohm", 100.0),
        ("100 OHMS", "ohm", 100.0),
        ("1 mΩ", "ohm", 1e-3),
        ("10 kHz", "Hz", 1e4),
        ("10 khz", "Hz", 1e4),
        ("2 ms", "s", 2e-3),
        ("1.11 eV", "eV", 1.11),
        ("1.11", "eV", 1.11),
        # percentages, tempcos, temperatures, thermal resistance stay in their own unit
        ("5%", "%", 5.0),
        ("5 %", "%", 5.0),
        ("5", "%", 5.0),
        ("0.1%", "%", 0.1),
        ("100", "ppm/°C", 100.0),
        ("-250 ppm", "ppm/°C", -250.0),
        ("50ppm/°C", "ppm/°C", 50.0),
        ("50 ppm/C", "ppm/°C", 50.0),
        ("50 ppm/K", "ppm/°C", 50.0),
        ("200 °C/W", "°C/W", 200.0),
        ("200 C/W", "°C/W", 200.0),
        ("200K/W", "°C/W", 200.0),
        ("150 °C", "°C", 150.0),
        ("-40C", "°C", -40.0),
        ("25", "°C", 25.0),
        # dimensionless: hFE, ideality factor
        ("150", "", 150.0),
        ("1.02", "", 1.02),
        ("1k", "", 1000.0),
        # IEC 60062 letter-and-digit code, resistance only
        ("4k7", "ohm", 4700.0),
        ("4K7", "ohm", 4700.0),
        ("4k7Ω", "ohm", 4700.0),
        ("4K7 ohm", "ohm", 4700.0),
        ("47K3", "ohm", 47300.0),
        ("2M2", "ohm", 2.2e6),
        ("1G5", "ohm", 1.5e9),
        ("1T2", "ohm", 1.2e12),
        ("R47", "ohm", 0.47),
        ("r47", "ohm", 0.47),
        ("R047", "ohm", 0.047),
        ("4R7", "ohm", 4.7),
        ("4m7", "ohm", 4.7e-3),  # milliohm shunt marking
        ("M47", "ohm", 0.47e6),
        ("470R", "ohm", 470.0),
        ("470r", "ohm", 470.0),
        ("0R", "ohm", 0.0),
        ("-4k7", "ohm", -4700.0),
        ("1M", "ohm", 1e6),
        ("10K", "ohm", 1e4),
    ],
)
def test_parse_accepts(text: str, unit: str, expected: float) -> None:
    # expected values: SI prefix definitions and IEC 60062 letter code (the standard's rule:
    # the letter stands in place of the decimal point)
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=EXACT, abs=0.0)


@pytest.mark.parametrize(
    ("code", "ohm"),
    [
        ("R47", 0.47),
        ("4R7", 4.7),
        ("470R", 470.0),
        ("4K7", 4700.0),
        ("47K3", 47300.0),
        ("2M2", 2.2e6),
    ],
)
def test_iec60062_letter_code_reference(code: str, ohm: float) -> None:
    # source: IEC 60062 letter-and-digit code check values, as quoted in REFERENCES.md
    assert parse_quantity(code, "ohm") == pytest.approx(ohm, rel=1e-15)
    assert format_resistance_code(ohm) == code


def test_parse_is_exact_decimal_conversion() -> None:
    # common practice: 4.7k must equal the literal 4700.0, not 4.7 * 1e3 rounded twice
    assert parse_quantity("4.7k", "ohm") == 4700.0
    assert parse_quantity("4k7", "ohm") == 4700.0
    assert parse_quantity("1.29m", "A") == 1.29e-3
    assert parse_quantity("0.1u", "A") == 0.1e-6


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("4,7k", "ohm", 4700.0),
        ("4,7 kΩ", "ohm", 4700.0),
        ("0,25", "W", 0.25),
        ("-0,6", "V", -0.6),
        ("4k7", "ohm", 4700.0),
        ("1500", "ohm", 1500.0),
        ("0,1 %", "%", 0.1),
    ],
)
def test_parse_decimal_comma(text: str, unit: str, expected: float) -> None:
    # DESIGN.md: a semicolon-delimited file may write decimal commas
    assert parse_quantity(text, unit, decimal_comma=True) == expected


# Each error kind: (text, unit, decimal_comma, words the message must contain).
ERROR_CASES = [
    ("", "ohm", False, ["empty", "ohm"]),
    ("   ", "V", False, ["empty", "volt"]),
    ("abc", "ohm", False, ["no digits"]),
    ("k", "ohm", False, ["no digits"]),
    ("kΩ", "ohm", False, ["no digits"]),
    ("-", "V", False, ["no digits"]),
    ("4k7k", "ohm", False, ["letter code", "prefix 'k'"]),
    ("4k7mΩ", "ohm", False, ["letter code", "prefix 'm'"]),
    ("4K7R", "ohm", False, ["letter code", "R"]),
    ("1..5", "V", False, ["more than one decimal separator"]),
    ("1.2.3k", "ohm", False, ["more than one decimal separator"]),
    ("1,5k", "ohm", False, ["comma", "decimal separator"]),
    ("1,000", "ohm", False, ["comma"]),
    ("1.5k", "ohm", True, ["point", "decimal-comma"]),
    ("1,2,3", "ohm", True, ["more than one decimal separator"]),
    ("10 kV", "ohm", False, ["unit 'V'", "ohm"]),
    ("5 mA", "ohm", False, ["unit 'A'", "ohm"]),
    ("3 ppm", "ohm", False, ["unit 'ppm'", "ohm"]),
    ("4.7 kΩ", "V", False, ["unit 'Ω'", "volt"]),
    ("2 W", "A", False, ["unit 'W'", "ampere"]),
    ("5 %", "", False, ["unit '%'", "plain number"]),
    ("25 °C", "%", False, ["unit '°C'", "percent"]),
    ("4.7xyz", "ohm", False, ["unknown unit 'xyz'", "ohm"]),
    ("nan", "ohm", False, ["not a finite number"]),
    ("NaN", "V", False, ["not a finite number"]),
    ("inf", "V", False, ["not a finite number"]),
    ("-Infinity", "A", False, ["not a finite number"]),
    ("1e999", "V", False, ["out of range"]),
    ("4kk", "ohm", False, ["two SI prefixes 'kk'"]),
    ("4kMΩ", "ohm", False, ["two SI prefixes 'kM'"]),
    ("3mmA", "A", False, ["two SI prefixes 'mm'"]),
    ("4k7e3", "ohm", False, ["letter code", "exponent"]),
    ("R47e3", "ohm", False, ["letter code", "exponent"]),
    ("4.7k3", "ohm", False, ["letter code", "decimal point"]),
    ("4.7e3k", "ohm", False, ["exponent", "SI prefix"]),
    ("5k%", "%", False, ["no SI prefix", "percent"]),
    ("2m°C", "°C", False, ["no SI prefix", "°C"]),
    ("4k7", "V", False, ["letter-and-digit code", "resistance only", "volt"]),
    ("4 7", "V", False, ["not a quantity in engineering notation"]),
    ("4g7", "ohm", False, ["not a quantity in engineering notation"]),
    ("0x10", "", False, ["not a quantity in engineering notation"]),
]


@pytest.mark.parametrize(("text", "unit", "decimal_comma", "words"), ERROR_CASES)
def test_parse_rejects(text: str, unit: str, decimal_comma: bool, words: list[str]) -> None:
    with pytest.raises(NotationError) as caught:
        parse_quantity(text, unit, decimal_comma=decimal_comma)
    err = caught.value
    assert err.text == text  # the exact input, whitespace included
    for word in words:
        assert word in err.message, (word, err.message)
    assert isinstance(err, InputError) and isinstance(err, ValueError)


def test_parse_error_names_both_units() -> None:
    with pytest.raises(NotationError) as caught:
        parse_quantity("10 kV", "ohm")
    assert caught.value.message == "unit 'V' where ohm (Ω) expected"
    assert "(text '10 kV')" in caught.value.one_line()


def test_parse_unknown_column_unit_is_programming_error() -> None:
    with pytest.raises(ValueError, match="unknown unit 'furlong'") as caught:
        parse_quantity("1", "furlong")
    assert not isinstance(caught.value, NotationError)


# --------------------------------------------------------------------------- formatting


@pytest.mark.parametrize(
    ("value", "unit", "digits", "expected"),
    [
        (4700, "ohm", 3, "4.7 kΩ"),
        (1.2904e-3, "A", 3, "1.29 mA"),
        (0.0, "V", 3, "0 V"),
        (-0.0, "V", 3, "0 V"),
        (-6, "V", 3, "-6 V"),
        (999.7, "ohm", 3, "1 kΩ"),  # rounding carries into the next prefix
        (999.4, "ohm", 3, "999 Ω"),
        (999_700.0, "ohm", 3, "1 MΩ"),
        (5.0, "%", 3, "5 %"),
        (0.1, "%", 3, "0.1 %"),
        (-250.0, "ppm/°C", 3, "-250 ppm/°C"),
        (200.0, "°C/W", 3, "200 °C/W"),
        (1234.5, "°C", 3, "1230 °C"),  # no prefix on °C
        (150, "", 3, "150"),
        (1.02, "", 3, "1.02"),
        (2_500_000.0, "", 3, "2.5e6"),
        (47300, "ohm", 3, "47.3 kΩ"),
        (470e3, "ohm", 3, "470 kΩ"),
        (2.2e6, "ohm", 3, "2.2 MΩ"),
        (0.47, "ohm", 3, "470 mΩ"),
        (2.5e-6, "A", 3, "2.5 µA"),
        (3.3e-9, "s", 3, "3.3 ns"),
        (12e-12, "s", 3, "12 ps"),
        (1.5e12, "ohm", 3, "1.5 TΩ"),
        (1e15, "ohm", 3, "1000 TΩ"),  # beyond T keeps T
        (1e-15, "A", 3, "0.001 pA"),  # below p keeps p
        (10e3, "Hz", 3, "10 kHz"),
        (0.625, "W", 3, "625 mW"),
        (1.11, "eV", 3, "1.11 eV"),
        (4712.3, "ohm", 2, "4.7 kΩ"),
        (4712.3, "ohm", 5, "4.7123 kΩ"),
        (4712.3, "ohm", 1, "5 kΩ"),
        (float("nan"), "V", 3, "n/a"),
        (float("inf"), "V", 3, "inf V"),
    ],
)
def test_format_quantity(value: float, unit: str, digits: int, expected: str) -> None:
    # expected strings: SI prefix rules and the display contract in the module docstring
    assert format_quantity(value, unit, digits=digits) == expected


def test_format_quantity_rejects_bad_arguments() -> None:
    with pytest.raises(ValueError, match="digits"):
        format_quantity(1.0, "V", digits=0)
    with pytest.raises(ValueError, match="unknown unit"):
        format_quantity(1.0, "ohms")


@pytest.mark.parametrize(
    ("ohm", "code"),
    [
        (4700, "4K7"),
        (0.47, "R47"),
        (470, "470R"),
        (47300, "47K3"),
        (2.2e6, "2M2"),
        (100, "100R"),
        (10, "10R"),
        (1, "1R"),
        (1.5, "1R5"),
        (0.047, "R047"),
        (0.001, "R001"),
        (0, "0R"),
        (1e3, "1K"),  # whole multiples drop the zero: 1K, not 1K0 (both are in use)
        (1e6, "1M"),
        (10e3, "10K"),
        (1.5e9, "1G5"),
        (2.2e12, "2T2"),
        (12345, "12K3"),  # 3 significant figures
        (999.7, "1K"),  # rounding carries into the next letter
        (4.749e3, "4K75"),
    ],
)
def test_format_resistance_code(ohm: float, code: str) -> None:
    # IEC 60062: the letter (R, K, M, G, T) stands in place of the decimal point
    assert format_resistance_code(ohm) == code


@pytest.mark.parametrize("bad", [-1.0, float("nan"), float("inf")])
def test_format_resistance_code_rejects(bad: float) -> None:
    with pytest.raises(ValueError, match="resistance code"):
        format_resistance_code(bad)


# --------------------------------------------------------------------------- round trips

positive = st.floats(min_value=1e-12, max_value=1e12, allow_nan=False, allow_infinity=False)


@given(x=positive, unit=st.sampled_from(UNITS))
def test_round_trip_format_then_parse(x: float, unit: str) -> None:
    # 3 significant figures round to within half a unit of the third figure: 5e-3 relative
    back = parse_quantity(format_quantity(x, unit), unit)
    assert math.isclose(back, x, rel_tol=5e-3)


@given(x=positive, unit=st.sampled_from(UNITS))
def test_round_trip_negative(x: float, unit: str) -> None:
    back = parse_quantity(format_quantity(-x, unit), unit)
    assert math.isclose(back, -x, rel_tol=5e-3)


@given(mantissa=st.integers(min_value=100, max_value=999), exponent=st.integers(-5, 10))
def test_round_trip_letter_code(mantissa: int, exponent: int) -> None:
    # a value with 3 significant figures survives the code exactly (one decimal conversion)
    value = float(f"{mantissa}e{exponent}")
    assert parse_quantity(format_resistance_code(value), "ohm") == value


@given(x=positive)
def test_round_trip_letter_code_rounds(x: float) -> None:
    back = parse_quantity(format_resistance_code(x), "ohm")
    assert math.isclose(back, x, rel_tol=5e-3)


@given(x=positive, unit=st.sampled_from(UNITS))
def test_round_trip_decimal_comma(x: float, unit: str) -> None:
    text = format_quantity(x, unit).replace(".", ",")
    back = parse_quantity(text, unit, decimal_comma=True)
    assert math.isclose(back, x, rel_tol=5e-3)


# --------------------------------------------------------------------------- long exponents


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("1e-" + "9" * 5000, 0.0),                     # underflows to zero, as float() does
        ("1e-" + "0" * 5000 + "3", 1e-3),              # leading zeros are only zeros
        ("2.5e+" + "0" * 4400 + "2", 250.0),
        ("7.5E-" + "0" * 10 + "6", 7.5e-6),
        ("-4.7e0000000000003", -4700.0),
    ],
)
def test_exponent_of_any_length(text: str, expected: float) -> None:
    # Python refuses int() of more than 4300 digits; the exponent is read without it
    assert parse_quantity(text, "") == expected


@pytest.mark.parametrize("text", ["1e" + "9" * 5000, "1e+" + "9" * 5000, "-1e" + "1" * 7])
def test_exponent_beyond_any_float_is_a_notation_error(text: str) -> None:
    with pytest.raises(NotationError) as info:
        parse_quantity(text, "A")
    assert info.value.text == text
    assert "finite" in info.value.message
