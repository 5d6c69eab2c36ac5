"""Blocks of text laid out to the console width: items never split, columns when they fit.

A result shown as one block per design, candidate or BOM line reads at 80 columns
and at 120 alike: each block is a few lines of items (a value with its unit and part
id, a figure with its limit) placed three spaces apart, and an item is never split,
so a value or a part id is never cut.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.console import Console

from ..inert_text import console_text
from .console import wrap_plain

__all__ = ["Item", "aligned_rows", "fill", "item", "print_lines", "prose"]

#: One item of a block: its plain text (for the width) and the same with markup.
Item = tuple[str, str]


def item(text: str, style: str | None = None) -> Item:
    """An item from plain text: escaped for the console, styled when ``style`` is given."""
    shown = console_text(text)
    return text, (f"[{style}]{shown}[/{style}]" if style else shown)


def fill(items: Sequence[str | Item], width: int, indent: str = "",
         gap: str = "   ", hang: str | None = None) -> list[str]:
    """Items ``gap`` apart in lines of at most ``width`` characters (markup not counted).

    The first line starts with ``indent``, the others with ``hang`` (default: the
    same).  An item is never split: one longer than a line gets a line of its own.
    Plain ``str`` items are taken as console-safe text already.
    """
    lines: list[str] = []
    line, used = "", 0
    for it in items:
        plain, shown = (it, it) if isinstance(it, str) else it
        if line and used + len(gap) + len(plain) > width:
            lines.append(line)
            line, used = "", 0
        if line:
            line, used = f"{line}{gap}{shown}", used + len(gap) + len(plain)
        else:
            lead = indent if not lines or hang is None else hang
            line, used = f"{lead}{shown}", len(lead) + len(plain)
    if line:
        lines.append(line)
    return lines


def prose(text: str, width: int, indent: str = "") -> list[str]:
    """Free text wrapped to ``width`` after ``indent`` (never cutting a value), escaped."""
    return [indent + console_text(ln) for ln in
            wrap_plain(text, max(width - len(indent), 20), indent=2)]


def aligned_rows(head: Sequence[str], rows: Sequence[Sequence[Item]], width: int,
                 indent: str = "  ", right: Sequence[bool] = ()) -> list[str] | None:
    """Rows as aligned columns under ``head`` when they fit ``width``; else None.

    ``right[i]`` aligns column ``i`` to the right (numbers).  Cells keep their whole
    text; the caller falls back to blocks when the columns do not fit.
    """
    widths = [max([len(h)] + [len(r[i][0]) for r in rows]) for i, h in enumerate(head)]
    if len(indent) + sum(widths) + 2 * (len(widths) - 1) > width:
        return None

    def cell(i: int, plain: str, shown: str) -> str:
        pad = " " * (widths[i] - len(plain))
        return pad + shown if (i < len(right) and right[i]) else shown + pad

    out = [indent + "  ".join(cell(i, h, f"[bold]{console_text(h)}[/bold]")
                              for i, h in enumerate(head)).rstrip()]
    for r in rows:
        out.append(indent + "  ".join(cell(i, p, s) for i, (p, s) in enumerate(r)).rstrip())
    return out


def print_lines(console: Console, lines: Sequence[str]) -> None:
    """Lines already laid out to the width, printed as they are."""
    for line in lines:
        console.print(line, soft_wrap=True, highlight=False)
