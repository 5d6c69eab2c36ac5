"""Free text made inert before it reaches a file another program interprets.

Two outputs read text as commands: a SPICE deck (``ngspice -b`` runs a
``.control`` block, a ``*#`` line, and joins a line starting with ``+`` to the
card before it) and a spreadsheet (a cell starting with ``=``, ``+``, ``-``,
``@`` is a live formula).  Part ids, locations, notes, stage names and file
paths come from files a user may not have written, so every such text goes
through one function here before it is written:

- :func:`netlist_text` -- one line of printable ASCII for a SPICE comment or
  title: every line break and control character (C0, DEL, C1, U+2028, U+2029,
  U+0085, and invisible format characters such as U+200B or U+202E) becomes a
  visible placeholder ``<U+XXXX>``, so the text can never end the comment line.
- :func:`netlist_comment` -- a ``* `` comment line holding such text.
- :func:`spice_name` / :func:`check_spice_name` -- element, node and model names
  from ``[A-Za-z0-9_]`` only.
- :func:`spreadsheet_cell` / :func:`spreadsheet_row` -- a text cell that a
  spreadsheet would take as a formula gets a leading ``'`` (OWASP "CSV
  Injection" guidance); numbers we computed stay numbers.
- :func:`console_text` -- text for a rich terminal table: markup (``[bold]``,
  ``[link=...]``, a stray ``[/x]`` that would stop the program) escaped and
  control characters (terminal escape sequences start with ESC) shown as
  ``<U+XXXX>``.
"""

from __future__ import annotations

import re
import unicodedata
from collections.abc import Iterable, Sequence

__all__ = [
    "FORMULA_LEADS",
    "NETLIST_TEXT_LIMIT",
    "check_spice_name",
    "console_text",
    "netlist_comment",
    "netlist_text",
    "spice_name",
    "spreadsheet_cell",
    "spreadsheet_row",
]

#: Longest free text written into one netlist comment, characters (longer text is cut, "...").
NETLIST_TEXT_LIMIT = 200

# Readable ASCII for the symbols stockbias itself writes.
_SYMBOLS = {"Ω": "ohm", "±": "+/-", "µ": "u", "μ": "u", "°": "", "–": "-", "—": "-",
            "‖": "||", "θ": "theta", "×": "x", "…": "..."}
# Unicode categories that are never shown as text: controls, format (zero-width,
# bidirectional overrides), line and paragraph separators, surrogates, private use,
# unassigned.
_HIDDEN_CATEGORIES = {"Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"}
_NAME = re.compile(r"[A-Za-z0-9_]+")


def _placeholder(ch: str) -> str:
    return f"<U+{ord(ch):04X}>"


def netlist_text(text: object, limit: int = NETLIST_TEXT_LIMIT) -> str:
    """``text`` as one inert line of printable ASCII for a SPICE comment or title.

    Parameters
    ----------
    text : object
        Any text (``str()`` is taken of anything else).
    limit : int
        Longest result before the placeholder expansion, characters; longer
        text is cut and ends with ``...``.

    Returns
    -------
    str
        Printable ASCII (0x20..0x7E) only.  Line breaks and control or invisible
        characters become ``<U+XXXX>``; the symbols stockbias writes become
        ASCII words (``Ω`` → ``ohm``); accented letters lose the accent; any
        other character becomes ``?``.  No character of the result ends a line
        for any reader (``str.splitlines`` gives exactly one line).
    """
    s = str(text)
    if len(s) > limit:
        s = s[: max(limit - 3, 0)] + "..."
    out = []
    for ch in s:
        code = ord(ch)
        if 0x20 <= code < 0x7F:
            out.append(ch)
        elif unicodedata.category(ch) in _HIDDEN_CATEGORIES:
            out.append(_placeholder(ch))
        elif ch in _SYMBOLS:
            out.append(_SYMBOLS[ch])
        else:
            plain = unicodedata.normalize("NFKD", ch)
            plain = "".join(c for c in plain if 0x20 <= ord(c) < 0x7F)
            out.append(plain or "?")
    return "".join(out)


def netlist_comment(text: object, limit: int = NETLIST_TEXT_LIMIT) -> str:
    """A SPICE comment line ``* <text>`` with ``text`` made inert by :func:`netlist_text`.

    The space after ``*`` matters: ngspice runs a line that starts ``*#`` as a
    command.
    """
    return f"* {netlist_text(text, limit)}".rstrip()


def check_spice_name(name: str) -> str:
    """``name`` unchanged when it is a safe SPICE element, node or model name.

    Raises
    ------
    ValueError
        When ``name`` is empty or holds a character outside ``[A-Za-z0-9_]``.
    """
    if not isinstance(name, str) or _NAME.fullmatch(name) is None:
        raise ValueError(f"not a safe SPICE name (letters, digits, '_' only): {name!r}")
    return name


def spice_name(text: str, prefix: str, used: Iterable[str] = ()) -> str:
    """A safe SPICE name generated for free text ``text``.

    Parameters
    ----------
    text : str
        A free-text id (a part id, a reference designator).
    prefix : str
        Leading letters of the name (the SPICE element letter, e.g. ``"R_"``);
        must itself be a safe name.
    used : iterable of str
        Names already taken in the netlist (compared case-insensitively, as
        SPICE does); a suffix ``_2``, ``_3``... keeps the result unique.

    Returns
    -------
    str
        ``prefix`` followed by ``text`` with every character outside
        ``[A-Za-z0-9_]`` replaced by ``_`` (at most 32 of them).  Write the
        mapping name → text into a comment with :func:`netlist_comment`.
    """
    check_spice_name(prefix)
    base = prefix + re.sub(r"[^A-Za-z0-9_]", "_", text)[:32]
    taken = {u.lower() for u in used}
    name, n = base, 1
    while name.lower() in taken:
        n += 1
        name = f"{base}_{n}"
    return name


#: Leading characters that make a spreadsheet read a cell as a formula (OWASP "CSV
#: Injection": = + - @ tab carriage return), plus line feed and the full-width forms
#: some spreadsheets also accept.
FORMULA_LEADS = frozenset("=+-@\t\r\n\uff1d\uff0b\uff0d\uff20")
_BLANK = " \u00a0\u3000"


def spreadsheet_cell(value: object) -> str:
    """One CSV cell that no spreadsheet takes as a formula.

    Parameters
    ----------
    value : str, int or None
        Text (from a file or ours), an integer we computed, or None (empty cell).

    Returns
    -------
    str
        Text whose first character (after any leading blanks) is one of
        :data:`FORMULA_LEADS` is prefixed with ``'``, which spreadsheets read as
        "this cell is text" (OWASP guidance).  Integers are written as plain
        numbers (``-3`` stays a number a spreadsheet can add up: it is a count
        we computed, not text from a file), None as an empty cell.
    """
    if value is None:
        return ""
    if isinstance(value, bool) or not isinstance(value, (str, int)):
        raise TypeError(f"a CSV cell is text, an integer or None, not {type(value).__name__}")
    if isinstance(value, int):
        return str(value)
    lead = value.lstrip(_BLANK)[:1]
    if lead and lead in FORMULA_LEADS:
        return "'" + value
    return value


def spreadsheet_row(values: Sequence[object]) -> list[str]:
    """Every cell of one CSV row through :func:`spreadsheet_cell`."""
    return [spreadsheet_cell(v) for v in values]


def console_text(value: object) -> str:
    """Free text for a rich console: shown as written, never read as markup or escapes.

    Parameters
    ----------
    value : object
        Any text (``str()`` is taken of anything else).

    Returns
    -------
    str
        ``value`` with rich markup escaped (``[`` shown, not interpreted) and every
        control or invisible character (ESC, line breaks, U+202E...) shown as
        ``<U+XXXX>``, so no part id or location can colour, retitle or clear
        the terminal, or stop the program with a markup error.
    """
    from rich.markup import escape  # rich only where a console is drawn

    shown = "".join(_placeholder(ch) if unicodedata.category(ch) in _HIDDEN_CATEGORIES
                    else ch for ch in str(value))
    return escape(shown)
