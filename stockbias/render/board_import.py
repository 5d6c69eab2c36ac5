"""What `board from-netlist` found, for the terminal: stages, parts not classified, entries
to fill in.  Lines wrap at the console width; references, values and part ids are never cut
(each ``role=ref value`` item is kept whole)."""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from rich.console import Console
from rich.text import Text

from ..errors import printable
from ..units import format_quantity

if TYPE_CHECKING:
    from ..kicad.board_writer import ImportedBoard

__all__ = ["render_import"]


def _words(text: str) -> list[str]:
    """Words to wrap between; a number stays with its unit (``330 µA`` is one word)."""
    out: list[str] = []
    for word in text.split(" "):
        if out and re.search(r"\d$", out[-1]) and re.fullmatch(r"[µmkMG]?[AVΩ%][),;.]*", word):
            out[-1] += " " + word
        else:
            out.append(word)
    return out


def _items(console: Console, lead: str, items: list[str]) -> None:
    """``lead`` then the items, wrapped between items only (an item is never split)."""
    width = max(console.width, 40)
    line, indent = lead, " " * min(len(lead), 8)
    for item in items:
        piece = f" {item}" if line.strip() else item
        if len(line) + len(piece) > width and line.strip() and line != lead:
            console.print(Text(printable(line)))
            line = indent + item
        else:
            line += piece
    console.print(Text(printable(line)))


def render_import(console: Console, board: ImportedBoard, written: str | None) -> None:
    """The stages, the parts not classified and what is left to fill in."""
    g = board.graph
    rails = [f"{g.names[n]} {'?' if r.volts is None else f'{r.volts:g} V'}"
             for n, r in sorted(g.rails.items())]
    rails = [f"{r}," for r in rails[:-1]] + rails[-1:]
    _items(console, f"Netlist {board.netlist.path}:",
           [f"{len(board.stages)} stage(s);", "rails:", *(rails or ["none"])])
    for s in board.stages:
        part = s.transistor or "(part to fill in)"
        items = [f"{role}={e.label} {s.values.get(role) or '(value to fill in)'}"
                 for role, e in s.found.roles.items()]
        _items(console, f"  {s.name}: {s.found.topology} {s.found.polarity} {part}:", items)
        if s.ic is not None:
            _items(console, "      target:", _words(f"IC {format_quantity(s.ic, 'A')} "
                   f"±{s.ic_window_pct:g} % ({s.target_note})"))
    if board.problems:
        console.print(Text("Not classified:"))
        for p in board.problems:
            _items(console, "  " + ", ".join(p.refs) + ":", _words(p.reason))
    if board.to_fill:
        console.print(Text(f"To fill in before `check` ({len(board.to_fill)}):"))
        for what in board.to_fill:
            _items(console, "  -", _words(what))
    if written:
        console.print(Text(printable(f"Board file written: {written}")))
