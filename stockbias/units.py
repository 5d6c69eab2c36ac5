"""Engineering notation at the edges: parse stock and job text, format results.

Inside stockbias every quantity is a float in SI base units (ohm, volt, ampere,
watt, second, hertz); percentages stay percentage numbers, tempcos stay ppm/°C,
temperatures stay °C and thermal resistances stay °C/W.  This module is the only
place that turns text such as ``4k7``, ``200 mA`` or ``4,7k`` into those floats
and floats back into text such as ``4.7 kΩ``.

The grammar, in words::

    quantity  = [sign] ( letter-code | decimal ) [spaces] [suffix]
    letter-code = [digits] code-letter digits        4k7, R47, 47K3, 2M2 (ohm only)
    decimal   = digits [. digits] [exponent]         4700, 4.7, .5, 4.7e3
    suffix    = [SI prefix] [unit]                   k, mA, kΩ, ohms, %, ppm/°C

The SI prefix keeps its case (``m`` milli, ``M`` mega; ``k`` and ``K`` are both
kilo, as the trade writes them); the unit word may be written in any case where
that is unambiguous (``ohm``, ``OHMS``, ``v``).  Anything else is a
:class:`~stockbias.errors.NotationError` that carries the exact input text:
the parser never guesses.
"""

from __future__ import annotations

import math
import re

from stockbias.errors import NotationError

__all__ = [
    "UNITS",
    "format_quantity",
    "format_resistance_code",
    "parse_quantity",
]

#: SI prefix character -> power of ten.  µ (micro sign) and μ (Greek mu) are both micro.
_PREFIX_EXPONENT: dict[str, int] = {
    "p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3,
    "k": 3, "K": 3, "M": 6, "G": 9, "T": 12,
}

#: Letters of the IEC 60062 letter-and-digit code for resistance (the letter stands
#: where the decimal point would be).  ``m`` (milliohm) is the shunt makers' usage.
_CODE_EXPONENT: dict[str, int] = {
    "R": 0, "r": 0, "m": -3, "k": 3, "K": 3, "M": 6, "G": 9, "T": 12,
}

#: Column unit -> accepted spellings (compared case-insensitively).
_SPELLINGS: dict[str, tuple[str, ...]] = {
    "ohm": ("Ω", "\u2126", "ohm", "ohms", "R"),
    "V": ("V", "volt", "volts"),
    "A": ("A", "amp", "amps", "ampere", "amperes"),
    "W": ("W", "watt", "watts"),
    "%": ("%",),
    "ppm/°C": ("ppm", "ppm/°C", "ppm/C", "ppm/K", "ppm/℃"),
    "°C/W": ("°C/W", "C/W", "K/W", "℃/W"),
    "°C": ("°C", "C", "℃"),
    "eV": ("eV",),
    "s": ("s",),
    "Hz": ("Hz",),
    "": (),
}

#: Every column unit this module knows.
UNITS: tuple[str, ...] = tuple(_SPELLINGS)

#: Units shown with an SI prefix.
_PREFIXED = frozenset({"ohm", "V", "A", "W", "eV", "s", "Hz"})
#: Units read with an SI prefix: those, and plain numbers (an hFE written ``1k``).
#: Percentages, tempcos, temperatures and thermal resistances take none.
_PREFIX_READ = _PREFIXED | {""}

#: How a unit is shown after a number.
_SYMBOL: dict[str, str] = {unit: unit for unit in UNITS} | {"ohm": "Ω"}

#: Case-folded spelling -> column unit, for telling the user what a foreign unit is.
_UNIT_OF_SPELLING: dict[str, str] = {
    spelling.casefold(): unit for unit, spellings in _SPELLINGS.items() for spelling in spellings
}

_QUANTITY = re.compile(
    r"""
    (?P<sign>[+-])?
    (?:
        (?P<whole>\d*)(?P<code>[RrmkKMGT])(?P<frac>\d+)             # letter code: 4k7, R47
      |
        (?P<number>(?:\d+(?:\.\d*)?|\.\d+))(?:[eE](?P<exp>[+-]?\d+))?  # 4.7, 4.7e3
    )
    \s*
    (?P<suffix>(?:[^\W\d_]|[%°/℃])*)                               # prefix and/or unit
    """,
    re.VERBOSE,
)

_NOT_FINITE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)


#: The column unit in plain words, for messages.
_WORDS: dict[str, str] = {
    "ohm": "ohm (Ω)", "V": "volt (V)", "A": "ampere (A)", "W": "watt (W)",
    "%": "percent (%)", "ppm/°C": "ppm/°C", "°C/W": "°C/W", "°C": "°C", "eV": "eV",
    "s": "second (s)", "Hz": "hertz (Hz)", "": "a plain number (no unit)",
}


def _expected(unit: str) -> str:
    """What the column wants, in plain words: 'a value in ohm (Ω)', 'a plain number'."""
    return "a plain number" if unit == "" else f"a value in {_WORDS[unit]}"


def _fail(text: str, message: str) -> NotationError:
    return NotationError(message, text=text)


def _split_suffix(suffix: str, unit: str) -> tuple[int, str | None, str]:
    """Split the letters after the number into SI prefix and unit word.

    The readings are tried in this order: the column's own unit, a prefix and the
    column's unit, a prefix alone, another unit, a prefix and another unit.

    Returns
    -------
    tuple
        The power of ten of the prefix (0 if none), the column unit the word is a
        spelling of (``None`` if no word) and the word as written.

    Raises
    ------
    LookupError
        No reading fits.
    """
    if suffix == "":
        return 0, None, ""
    readings: list[tuple[int, str]] = [(0, suffix)]
    if suffix[0] in _PREFIX_EXPONENT:
        readings.append((_PREFIX_EXPONENT[suffix[0]], suffix[1:]))
    found = [(exp, word, _UNIT_OF_SPELLING.get(word.casefold())) for exp, word in readings]
    for exp, word, word_unit in found:
        if word_unit == unit and word != "":
            return exp, word_unit, word
    for exp, word, _ in found:
        if word == "":
            return exp, None, ""
    for exp, word, word_unit in found:
        if word_unit is not None:
            return exp, word_unit, word
    raise LookupError(suffix)


def _diagnose(text: str, body: str, unit: str) -> NotationError:
    """The most specific message for text that does not fit the grammar."""
    if _NOT_FINITE.fullmatch(body):
        return _fail(text, "not a finite number; expected a value such as 4.7k")
    if not re.search(r"\d", body):
        return _fail(text, "no digits; expected a number such as 4700, 4.7k or 4k7")
    if body.count(".") > 1:
        return _fail(text, "more than one decimal separator; expected a number such as 4.7k")
    if re.search(r"[RrmkKMGT]\d+[eE]", body):
        return _fail(text, "letter code mixed with an exponent; write either 4k7 or 4.7e3")
    if re.search(r"[RrmkKMGT]\d*\.", body) or re.search(r"\.\d*[RrmkKMGT]\d", body):
        return _fail(text, "letter code with a decimal point; write either 4k7 or 4.7k")
    return _fail(text, f"not a quantity in engineering notation; expected {_expected(unit)}, "
                       "e.g. 4.7k, 4k7 or 1.5e-3")


def parse_quantity(text: str, unit: str, *, decimal_comma: bool = False) -> float:
    """Read one quantity in engineering notation.

    Parameters
    ----------
    text : str
        The text as found in a stock or job file, e.g. ``"4k7"``, ``"200 mA"``,
        ``"625mW"``, ``"5%"``.  Surrounding whitespace is ignored.
    unit : str
        The unit of the column or key, one of :data:`UNITS` (``"ohm"``, ``"V"``,
        ``"A"``, ``"W"``, ``"%"``, ``"ppm/°C"``, ``"°C/W"``, ``"°C"``, ``"eV"``,
        ``"s"``, ``"Hz"``, or ``""`` for a dimensionless number such as hFE).
    decimal_comma : bool, optional
        The text comes from a semicolon-delimited file that writes ``4,7k``: a comma
        is the decimal separator and a point is refused (it could be a thousands
        separator).  Otherwise a comma is refused (it could be one).

    Returns
    -------
    float
        The value in SI base units (ohm, volt, ampere, watt, eV, second, hertz);
        a percentage as a percentage number (``"5%"`` -> 5.0), a tempco in ppm/°C,
        a temperature in °C, a thermal resistance in °C/W.

    Raises
    ------
    NotationError
        The text is not a finite quantity of this unit; ``err.text`` is the exact
        input.  Zero and negative values are returned: range checks are the
        caller's.
    ValueError
        ``unit`` is not one of :data:`UNITS` (a programming error).
    """
    if unit not in _SPELLINGS:
        raise ValueError(f"unknown unit {unit!r}; expected one of {', '.join(map(repr, UNITS))}")
    body = text.strip()
    if body == "":
        raise _fail(text, f"empty; expected {_expected(unit)}")
    if decimal_comma:
        if "." in body:
            raise _fail(text, "a point in a decimal-comma file; use ',' as the decimal "
                              "separator (a point could be a thousands separator)")
        body = body.replace(",", ".")
    elif "," in body:
        raise _fail(text, "a comma in a number; use '.' as the decimal separator "
                          "(decimal commas only in semicolon-delimited files)")

    match = _QUANTITY.fullmatch(body)
    if match is None:
        raise _diagnose(text, body, unit)
    sign = match["sign"] or ""
    suffix = match["suffix"]

    try:
        prefix_exp, found_unit, word = _split_suffix(suffix, unit)
    except LookupError:
        raise _unreadable_suffix(text, suffix, unit) from None
    if found_unit is not None and found_unit != unit:
        raise _fail(text, f"unit '{word}' where {_WORDS[unit]} expected")

    if match["code"] is not None:
        if unit != "ohm":
            raise _fail(text, f"the letter-and-digit code ({match[0].strip()}) is for "
                              f"resistance only; expected {_expected(unit)}")
        if prefix_exp:
            raise _fail(text, f"letter code followed by the prefix '{suffix[0]}'; "
                              "after a letter code only Ω or ohm may follow")
        if word.casefold() == "r":
            raise _fail(text, "letter code followed by R; write 4K7 or 4K7Ω, not 4K7R")
        mantissa = f"{match['whole'] or '0'}.{match['frac']}"
        exponent = _CODE_EXPONENT[match["code"]]
    else:
        if match["exp"] is not None and prefix_exp:
            raise _fail(text, "both an exponent and an SI prefix; write 4.7e3 or 4.7k")
        if prefix_exp and unit not in _PREFIX_READ:
            raise _fail(text, f"no SI prefix on {_WORDS[unit]}; write the plain number")
        mantissa = match["number"]
        exponent = prefix_exp + _exponent(match["exp"])

    # One decimal string, converted once: "4.7e3" is exactly 4700.0, not 4.7 * 1e3.
    value = float(f"{sign}{mantissa}e{exponent}")
    if not math.isfinite(value):
        raise _fail(text, "out of range; expected a finite number")
    return value


def _exponent(digits: str | None) -> int:
    """The written exponent as an int; beyond ±10**6 it only needs to be beyond any float
    (Python refuses to read integers of more than 4300 digits)."""
    if digits is None:
        return 0
    sign = -1 if digits.startswith("-") else 1
    body = digits.lstrip("+-").lstrip("0") or "0"
    return sign * (int(body) if len(body) <= 6 else 10**6)


def _unreadable_suffix(text: str, suffix: str, unit: str) -> NotationError:
    if len(suffix) >= 2 and suffix[0] in _PREFIX_EXPONENT and suffix[1] in _PREFIX_EXPONENT:
        return _fail(text, f"two SI prefixes '{suffix[:2]}'; expected at most one "
                           "prefix before the unit")
    return _fail(text, f"unknown unit '{suffix}' where {_WORDS[unit]} expected")


# --------------------------------------------------------------------------- formatting


def _significant(value: float, digits: int) -> tuple[str, int]:
    """``abs(value)`` rounded to ``digits`` significant figures.

    Returns the digit string (exactly ``digits`` long) and the decimal exponent
    of its first digit, so that ``abs(value) ≈ 0.d1d2d3… × 10**(exponent + 1)``.
    """
    mantissa, exp = f"{abs(value):.{digits - 1}e}".split("e")
    return mantissa.replace(".", ""), int(exp)


def _place_point(digit_string: str, point: int) -> str:
    """Put a decimal point after ``point`` digits (may be ≤ 0 or past the end); drop zeros."""
    if point <= 0:
        out = "0." + "0" * (-point) + digit_string
    elif point >= len(digit_string):
        out = digit_string + "0" * (point - len(digit_string))
    else:
        out = digit_string[:point] + "." + digit_string[point:]
    if "." in out:
        out = out.rstrip("0").rstrip(".")
    return out


def _plain(value: float, digits: int) -> str:
    """A number to ``digits`` significant figures without prefix.

    Positional between 1e-4 and 1e6, otherwise ``1.23e6`` (which the parser reads).
    """
    digit_string, exp = _significant(value, digits)
    sign = "-" if value < 0 else ""
    if -4 <= exp < 6:
        return sign + _place_point(digit_string, exp + 1)
    return f"{sign}{_place_point(digit_string, 1)}e{exp}"


_PREFIX_OF_EXPONENT: dict[int, str] = {
    -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T",
}


def format_quantity(value: float, unit: str, *, digits: int = 3) -> str:
    """Show a quantity in engineering notation.

    Parameters
    ----------
    value : float
        The quantity in SI base units (ohm, volt, ampere, watt, eV, second,
        hertz), or a percentage number, ppm/°C, °C/W or °C for those units.
    unit : str
        One of :data:`UNITS`; ``"ohm"`` is shown as ``Ω``.
    digits : int, optional
        At most this many significant figures (trailing zeros are dropped).

    Returns
    -------
    str
        ``"4.7 kΩ"``, ``"1.29 mA"``, ``"-6 V"``, ``"5 %"``, ``"150"``; ``"n/a"``
        for NaN.  ``%``, ``ppm/°C``, ``°C/W``, ``°C`` and dimensionless numbers take
        no SI prefix.  Rounding carries into the next prefix (999.7 Ω -> ``"1 kΩ"``).
        Values beyond the T and p prefixes keep the outermost prefix.
    """
    if unit not in _SPELLINGS:
        raise ValueError(f"unknown unit {unit!r}; expected one of {', '.join(map(repr, UNITS))}")
    if digits < 1:
        raise ValueError(f"digits must be at least 1, got {digits}")
    value = float(value)
    symbol = f" {_SYMBOL[unit]}" if unit else ""
    if math.isnan(value):
        return "n/a"
    if math.isinf(value):
        return f"{'-' if value < 0 else ''}inf{symbol}"
    if value == 0.0:
        return f"0{symbol}"
    if unit not in _PREFIXED:
        return _plain(value, digits) + symbol
    digit_string, exp = _significant(value, digits)
    prefix_exp = min(max(3 * (exp // 3), -12), 12)
    sign = "-" if value < 0 else ""
    number = _place_point(digit_string, exp - prefix_exp + 1)
    return f"{sign}{number} {_PREFIX_OF_EXPONENT[prefix_exp]}{_SYMBOL[unit]}"


_CODE_LETTER: dict[int, str] = {0: "R", 3: "K", 6: "M", 9: "G", 12: "T"}


def format_resistance_code(value_ohm: float) -> str:
    """The IEC 60062 letter-and-digit code of a resistance, to 3 significant figures.

    The letter (R, K, M, G, T) stands where the decimal point would be:
    4700 -> ``"4K7"``, 0.47 -> ``"R47"``, 47300 -> ``"47K3"``, 2.2e6 -> ``"2M2"``.
    Whole values below 1 kΩ keep a trailing R (470 -> ``"470R"``, 10 -> ``"10R"``,
    0 -> ``"0R"``, the zero-ohm link).  Whole multiples of a prefix drop the zero
    after the letter (1e6 -> ``"1M"``, 10e3 -> ``"10K"``): both ``1M`` and ``1M0``
    are in use and read the same; we print the shorter.  Values below 1 Ω use the
    R form (0.047 -> ``"R047"``), as current-sense parts are marked.

    Parameters
    ----------
    value_ohm : float
        Resistance, ohm; finite and not negative.

    Returns
    -------
    str
        The code, readable back with ``parse_quantity(code, "ohm")``.
    """
    value = float(value_ohm)
    if not math.isfinite(value) or value < 0:
        raise ValueError(f"a resistance code needs a finite value ≥ 0 ohm, got {value_ohm!r}")
    if value == 0.0:
        return "0R"
    digit_string, exp = _significant(value, 3)
    if exp < 0:
        return "R" + ("0" * (-exp - 1) + digit_string).rstrip("0")
    letter_exp = min(3 * (exp // 3), 12)
    point = exp - letter_exp + 1
    digit_string = digit_string + "0" * max(0, point - len(digit_string))
    whole, frac = digit_string[:point], digit_string[point:].rstrip("0")
    letter = _CODE_LETTER[letter_exp]
    return f"{whole}{letter}{frac}"
