"""Records of a stock CSV file as RFC 4180 defines them, with physical line numbers.

A record ends only at a line break outside a quoted field: CRLF or LF (and a lone CR,
which the :mod:`csv` module and the stock rewriter also end a line at).  A quoted
field may hold line breaks, delimiters and doubled quotes.  Blank lines and lines
whose first non-blank character is ``#`` are skipped only where a record would start,
never inside a quoted field.

Characters that other programs treat as line breaks or drop (the C0 and C1 control
characters other than tab, CR and LF, and U+2028/U+2029) are refused anywhere in the
file: a program that splits lines at them would see rows this reader does not, and the
stock rewriter numbers lines as this reader does only without them.  Invisible and
format characters (Unicode categories Cc, Cf, Zl, Zp, Co, Cn, Cs) and non-ASCII
digits are refused in part ids and numbers by :func:`field_fault`; :func:`visible`
spells such characters out (``CF-4K7<U+200B>``) so that a message shows them.
"""

from __future__ import annotations

import csv
import re
import unicodedata
from collections.abc import Iterator
from typing import NamedTuple

__all__ = ["Record", "field_fault", "line_faults", "records", "sanitise", "visible"]

#: Characters refused anywhere in a stock file (they break or hide lines elsewhere).
_LINE_FAULT = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\u2028\u2029]")
#: Categories that are invisible or not characters at all.
_HIDDEN = frozenset({"Cc", "Cf", "Zl", "Zp", "Co", "Cn", "Cs"})
_REPLACEMENT = "\ufffd"
_BREAK = re.compile(r"\r\n|\r|\n")

csv.field_size_limit(1 << 20)  # one field of up to 1 MiB; longer is a CSV syntax error


def _hidden(ch: str, *, spaces: bool) -> bool:
    """True for a character a reader cannot see (``spaces``: non-ASCII spaces too)."""
    cat = unicodedata.category(ch)
    return cat in _HIDDEN or (spaces and cat == "Zs" and ch != " ")


def visible(text: str) -> str:
    """``text`` with every invisible, format or control character written as ``<U+XXXX>``.

    Non-ASCII spaces are spelled out too (a no-break space looks like a space).  These are
    exactly the characters :meth:`str.isprintable` calls unprintable (categories C* and Z*
    other than the ASCII space).
    """
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() else f"<U+{ord(ch):04X}>" for ch in text)


def describe(ch: str) -> str:
    """``U+200B ZERO WIDTH SPACE``; control characters, which have no name, by code only."""
    name = unicodedata.name(ch, "")
    return f"U+{ord(ch):04X} {name}" if name else f"U+{ord(ch):04X}"


def field_fault(text: str, *, number: bool) -> str | None:
    """Why a part id or a number cannot be taken as written, or None.

    Parameters
    ----------
    text : str
        The field as found (surrounding spaces already stripped).
    number : bool
        The field is a number (with or without unit); otherwise a part id.

    Returns
    -------
    str or None
        A message naming the first offending character and its position (1-based):
        an invisible, format or control character, a non-ASCII space in a part id, or
        a digit other than ASCII 0-9.
    """
    if text.isprintable() and (text.isascii() or not any(ch.isdigit() for ch in text)):
        return None
    for pos, ch in enumerate(text, start=1):
        if _hidden(ch, spaces=not number):
            kind = "control" if unicodedata.category(ch) == "Cc" else "invisible"
            return (f"{kind} character {describe(ch)} at character {pos}; "
                    "retype the field without it")
        if not ch.isascii() and unicodedata.category(ch) == "Nd":
            where = "numbers" if number else "part ids"
            return (f"non-ASCII digit {describe(ch)} at character {pos}; write {where} "
                    "with the digits 0-9")
    return None


def line_faults(text: str) -> list[tuple[int, int, str]]:
    """Characters refused anywhere: (physical line, 1-based position in the line, char)."""
    found: list[tuple[int, int, str]] = []
    line, line_start, scanned = 1, 0, 0
    for match in _LINE_FAULT.finditer(text):
        begin = match.start()
        for brk in _BREAK.finditer(text, scanned, begin):
            line += 1
            line_start = brk.end()
        scanned = begin
        found.append((line, begin - line_start + 1, match.group()))
    return found


def sanitise(text: str) -> str:
    """``text`` with every refused character replaced by U+FFFD (same length, same lines)."""
    return _LINE_FAULT.sub(_REPLACEMENT, text)


class Record(NamedTuple):
    """One CSV record.

    Attributes
    ----------
    line : int
        Physical line the record starts on (1-based).
    last_line : int
        Physical line it ends on (> ``line`` when a quoted field holds line breaks).
    fields : list of str
        The fields, unquoted.
    field_lines : tuple of int
        The physical line each field starts on.
    """

    line: int
    last_line: int
    fields: list[str]
    field_lines: tuple[int, ...]


def _field_starts(raw: list[str], delimiter: str) -> list[tuple[int, int]]:
    """(index of the physical line within the record, position) where each field starts."""
    starts = [(0, 0)]
    quoted, field_start = False, True
    for k, line in enumerate(raw):
        for i, ch in enumerate(line):
            if quoted:
                quoted = ch != '"'  # a doubled quote reopens at once below
            elif ch == '"' and field_start:
                quoted = True
            elif ch == delimiter:
                starts.append((k, i + 1))
                field_start = True
                continue
            field_start = False
    return starts


def _skipped(line: str) -> bool:
    stripped = line.strip()
    return stripped == "" or stripped.startswith("#")


class CsvSyntax(Exception):
    """A record the :mod:`csv` module cannot read; ``line`` is where the record starts."""

    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


def records(lines: list[str], delimiter: str) -> Iterator[tuple[Record, list[str]]]:
    """Yield each record and its raw physical lines, skipping blank and comment lines.

    Parameters
    ----------
    lines : list of str
        The physical lines of a sanitised text, line breaks kept
        (``sanitise(text).splitlines(keepends=True)`` splits exactly at CR, LF, CRLF).
    delimiter : str
        ``","`` or ``";"``.

    Raises
    ------
    CsvSyntax
        A record breaks the CSV rules (an unterminated quote, text after a closing quote).
    """
    consumed: list[int] = []
    at_start = [True]

    def feed() -> Iterator[str]:
        for number, raw in enumerate(lines, start=1):
            if at_start[0] and _skipped(raw):
                continue  # outside any record: a blank or comment line
            at_start[0] = False
            consumed.append(number)
            yield raw

    reader = csv.reader(feed(), delimiter=delimiter, strict=True)
    while True:
        at_start[0] = True
        start = len(consumed)
        try:
            row = next(reader)
        except StopIteration:
            if len(consumed) > start:  # the file ended inside a quoted field
                raise CsvSyntax(consumed[start], "unexpected end of file inside a quoted "
                                "field (a quote is not closed)") from None
            return
        except csv.Error as exc:
            line = consumed[start] if start < len(consumed) else (consumed[-1] if consumed else 1)
            raise CsvSyntax(line, str(exc)) from None
        first, last = consumed[start], consumed[-1]
        raw = lines[first - 1:last]
        if first == last:
            field_lines = (first,) * len(row)
        else:
            field_lines = tuple(first + k for k, _ in _field_starts(raw, delimiter))
        yield Record(first, last, row, field_lines), raw
