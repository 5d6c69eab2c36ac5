"""The pick list for a build (by stock location) and the record of a reservation.

Lines are sorted by location, then part id, so one walk along the drawers
pulls everything; values that are not in stock come last, marked.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from pathlib import Path

from rich.console import Console
from rich.table import Table

from ..errors import InputError
from ..inert_text import console_text, spreadsheet_row
from ..selection import Need
from ..stock_write import Reservation

__all__ = ["PICK_LIST_COLUMNS", "pick_list_csv", "pick_order", "render_pick_list",
           "render_reservation", "write_pick_list"]

PICK_LIST_COLUMNS = ("location", "part_id", "kind", "value", "roles", "per_board", "pull",
                     "in_stock", "remaining")


def pick_order(needs: Sequence[Need]) -> list[Need]:
    """Stock lines by location then part id; off-stock values last."""
    return sorted(needs, key=lambda n: (n.part_id == "", n.location == "", n.location.lower(),
                                        n.part_id.lower(), n.roles))


def _row(n: Need) -> list[str]:
    # Text columns (location and part id come from the stock file) go through
    # spreadsheet_cell, which quotes a formula-like lead with "'".  The counts
    # (per_board, pull, in_stock, remaining) are integers we computed and stay
    # numbers: a negative "remaining" (a short line) must add up in a spreadsheet.
    return spreadsheet_row([n.location, n.part_id, n.kind, n.description, " ".join(n.roles),
                            int(n.per_board), int(n.quantity), n.in_stock, n.remaining])


def pick_list_csv(needs: Sequence[Need]) -> str:
    """The pick list as CSV text (header :data:`PICK_LIST_COLUMNS`, RFC 4180).

    Rows end with CRLF as RFC 4180 says, so that a field holding a carriage
    return or a line feed is quoted and a reader splits rows only between them.

    A text cell that a spreadsheet would take as a formula (``=``, ``+``, ``-``,
    ``@``, tab or carriage return first) starts with ``'`` instead; see
    :func:`stockbias.inert_text.spreadsheet_cell`.
    """
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(spreadsheet_row(PICK_LIST_COLUMNS))
    for n in pick_order(needs):
        writer.writerow(_row(n))
    return buf.getvalue()


def write_pick_list(path: str | Path, needs: Sequence[Need]) -> None:
    """Write the pick list CSV (UTF-8)."""
    try:
        Path(path).write_text(pick_list_csv(needs), encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the pick list: {exc.strerror}", file=str(path),
                         column="--pick-list") from None


def render_pick_list(console: Console, needs: Sequence[Need], build_quantity: int,
                     title: str | None = None) -> None:
    """The pick list as a terminal table; short lines in red."""
    from .blocks import aligned_rows, fill, item, print_lines

    head = ["location", "part id", "value", "roles", "per board", "pull", "in stock",
            "left after"]
    rows = []
    for n in pick_order(needs):
        left = "" if n.remaining is None else str(n.remaining)
        # location, part id and (for an off-stock value) description are shown, never
        # read as markup or terminal escapes
        rows.append([item(n.location), item(n.part_id or "-"), item(n.description),
                     item(" ".join(n.roles)), item(str(n.per_board)), item(str(n.quantity)),
                     item("" if n.in_stock is None else str(n.in_stock)),
                     item(left or "not in stock", "bold red") if n.short else item(left)])
    width = max(console.width, 40)
    title = title or f"Pick list for {build_quantity} board(s), by location"
    console.print(f"[bold]{console_text(title)}[/bold]")
    lines = aligned_rows(head, rows, width, right=(False,) * 4 + (True,) * 4)
    if lines is None:  # one block per line of the list: where, what, how many
        lines = []
        for r in rows:
            lines += fill([(f"{r[0][0]}  {r[1][0]}", f"{r[0][1]}  {r[1][1]}"), r[2],
                           (f"for {r[3][0]}", f"for {r[3][1]}")], width, "  ", hang="      ")
            lines += fill([(f"{h} {p}", f"{h} {sh}") for h, (p, sh) in zip(head[4:], r[4:],
                                                                           strict=True) if p],
                          width, "      ")
    print_lines(console, lines)
    short = [n for n in needs if n.short]
    if short:
        console.print("[bold red]short[/bold red]: " + "; ".join(
            f"{console_text(n.part_id or n.description)} needs {n.quantity}, "
            f"{'none in stock' if n.in_stock is None else f'{n.in_stock} in stock'}"
            for n in short))


def render_reservation(console: Console, res: Reservation, build_quantity: int) -> None:
    """What a reservation took (or, in a dry run, would take)."""
    verb = "Reserved" if res.written else "Would reserve (dry run, nothing written)"
    table = Table(title=f"{verb} for {build_quantity} board(s) in {console_text(res.path)}",
                  title_justify="left")
    for col in ("part id", "line", "before", "taken", "after"):
        table.add_column(col, justify="left" if col == "part id" else "right")
    for c in res.changes:
        table.add_row(console_text(c.part_id), str(c.line), str(c.before), str(c.taken),
                      str(c.after))
    console.print(table)
    if res.backup:
        console.print(f"Backup of the previous file: {console_text(res.backup)}")
