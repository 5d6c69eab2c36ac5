"""Terminal rendering of `stock check`.

A file of up to :data:`ROW_LIMIT` lines is drawn row by row (rich tables).  A bigger
file is summarised (lines and pieces per kind, per series, per tolerance, per
polarity) and its rows are drawn only on request (``--rows``), then as plain
fixed-width text, which stays fast for 100 000 rows.  Long lists (parts with no pieces
left, notes) show their first :data:`LIST_LIMIT` entries and a count of the rest
unless every row was asked for.
"""

from __future__ import annotations

import functools
import json
import time
from collections.abc import Sequence
from typing import TYPE_CHECKING, cast

from rich.console import Console
from rich.markup import escape
from rich.table import Table

if TYPE_CHECKING:
    from rich.progress import Progress, TaskID

from ..parts import MODEL_CARD_FIELDS, TRANSISTOR_DEFAULTS, Inventory, Resistor, Transistor
from ..stock_csv import visible
from ..stock_summary import StockSummary
from ..units import format_quantity as _format_quantity

__all__ = ["LIST_LIMIT", "ROW_LIMIT", "ReadingProgress", "render_stock_summary",
           "stock_check_json"]

#: Above this many stock lines the rows are summarised unless ``--rows`` is given.
ROW_LIMIT = 200
#: Entries shown of a long list (no pieces left, notes) when the rows are summarised.
LIST_LIMIT = 20

#: Stock files repeat their values: each (value, unit) is formatted once.
format_quantity = functools.lru_cache(maxsize=1 << 16)(_format_quantity)

_SERIES_ORDER = ("E3", "E6", "E12", "E24", "E48", "E96", "E192", "off-series")
_R_COLUMNS = ("part id", "value", "tol", "power", "tempco", "qty", "series", "location")
_T_COLUMNS = ("part id", "pol", "hFE", "at IC", "VBE", "VCEO", "IC max", "PD", "qty")


def _text(value: str) -> str:
    """Free text from the file, shown literally: markup escaped, invisibles spelled out."""
    return escape(visible(value))


def _resistor_cells(r: Resistor, summary: StockSummary) -> list[str]:
    series = "link" if r.is_link else (summary.series_of_value.get(r.part_id) or "-")
    tempco = r.tempco_text  # −350 (signed), +100 (signed) or ±350 (either sign)
    return [r.part_id, format_quantity(r.value_ohm, "ohm"), f"±{r.tolerance_pct:g} %",
            format_quantity(r.power_w, "W"), tempco, str(r.qty), series, r.location]


def _transistor_cells(t: Transistor) -> list[str]:
    return [t.part_id, t.polarity, f"{t.hfe_min:g}–{t.hfe_max:g}",
            format_quantity(t.hfe_test_ic, "A"), f"{t.vbe_min:.3g}–{t.vbe_max:.3g} V",
            format_quantity(t.vceo_max, "V"), format_quantity(t.ic_max, "A"),
            format_quantity(t.pd_max_w, "W"), str(t.qty)]


def _rich_table(console: Console, title: str, columns: Sequence[str], right: set[str],
                rows: list[list[str]], zero_qty_col: int | None) -> None:
    table = Table(title=title, title_justify="left")
    for i, col in enumerate(columns):
        # a part id keeps its whole width; other text wraps or folds, never cut with "…"
        widest = max((len(cells[i]) for cells in rows), default=0) if col == "part id" else None
        table.add_column(col, justify="right" if col in right else "left", overflow="fold",
                         min_width=widest)
    for cells in rows:
        shown = [_text(c) for c in cells]
        if zero_qty_col is not None and cells[zero_qty_col] == "0":
            shown[zero_qty_col] = "[red]0[/red]"
        table.add_row(*shown)
    console.print(table)


def _plain_table(console: Console, title: str, columns: Sequence[str], right: set[str],
                 rows: list[list[str]]) -> None:
    """Fixed-width text rows: the same columns as the rich table, drawn in linear time."""
    cells = [[visible(c) for c in row] for row in rows]
    widths = [max([len(col)] + [len(row[i]) for row in cells]) for i, col in enumerate(columns)]

    def line(values: Sequence[str]) -> str:
        return "  ".join(v.rjust(w) if col in right else v.ljust(w)
                         for v, w, col in zip(values, widths, columns, strict=True)).rstrip()

    out = [title, line(columns), "  ".join("-" * w for w in widths)]
    out.extend(line(row) for row in cells)
    console.file.write("\n".join(out) + "\n")  # plain text, past rich's per-line processing


def _shortened(items: list[str], limit: int | None) -> str:
    if limit is None or len(items) <= limit:
        return ", ".join(items)
    return ", ".join(items[:limit]) + f" … and {len(items) - limit} more"


def _counts(counts: dict[str, int], order: Sequence[str] | None = None,
            suffix: str = "") -> str:
    keys = [k for k in order if k in counts] if order is not None else list(counts)
    return ", ".join(f"{k}{suffix}: {counts[k]}" for k in keys)


def render_stock_summary(console: Console, inv: Inventory, summary: StockSummary, *,
                         rows: bool | None = None) -> None:
    """Print the summary of a valid stock file.

    Parameters
    ----------
    console : rich.console.Console
        Where to print.
    inv : Inventory
        The validated stock.
    summary : StockSummary
        Its summary.
    rows : bool or None, optional
        True: draw every row; False: never; None (default): only when the file has at
        most :data:`ROW_LIMIT` lines.
    """
    n_lines = summary.counts["resistor"] + summary.counts["transistor"]
    big = n_lines > ROW_LIMIT
    draw = (not big) if rows is None else rows
    limit = None if draw else LIST_LIMIT
    delim = ("semicolon-delimited (decimal commas read)" if inv.delimiter == ";"
             else "comma-delimited")
    from .console import keep_together

    said = (f"valid, {summary.counts['resistor']} resistor lines, "
            f"{summary.counts['transistor']} transistor lines, {delim}")
    path = f"[bold]{keep_together(_text(inv.path))}[/bold]:"
    if len(str(inv.path)) + 2 + len(said) <= console.width:
        console.print(f"{path} {said}")
    else:  # the file's path on a line of its own, the verdict whole below it
        console.print(path)
        console.print(f"  {said}")
    if summary.resistance_min is not None and summary.resistance_max is not None:
        console.print(f"Resistance range: {format_quantity(summary.resistance_min, 'ohm')} to "
                      f"{format_quantity(summary.resistance_max, 'ohm')}")
    if summary.series_counts:
        console.print("Values by coarsest IEC 60063 series: "
                      + _counts(summary.series_counts, _SERIES_ORDER))
    if big:
        pieces = summary.pieces
        console.print(f"Pieces on the shelf: {pieces.get('resistor', 0)} resistors, "
                      f"{pieces.get('transistor', 0)} transistors")
        if summary.tolerance_counts:
            console.print("Resistor lines by tolerance: "
                          + _counts(summary.tolerance_counts, suffix=" %"))
        if summary.polarity_counts:
            console.print("Transistor lines by polarity: " + _counts(summary.polarity_counts))
    if draw:
        r_rows = [_resistor_cells(r, summary) for r in inv.resistors]
        t_rows = [_transistor_cells(t) for t in inv.transistors]
        if big:
            if r_rows:
                _plain_table(console, "Resistors", _R_COLUMNS, {"value", "qty"}, r_rows)
            if t_rows:
                _plain_table(console, "Transistors", _T_COLUMNS, set(), t_rows)
        else:
            if r_rows:
                _rich_table(console, "Resistors", _R_COLUMNS, {"value", "qty"}, r_rows, 5)
            if t_rows:
                _rich_table(console, "Transistors", _T_COLUMNS, set(), t_rows, None)
    else:
        console.print(f"{n_lines} lines: rows not drawn above {ROW_LIMIT} lines "
                      "(--rows draws every row, --json gives every part)")
    if summary.zero_qty:
        console.print("[yellow]No pieces left:[/yellow] "
                      + _text(_shortened(summary.zero_qty, limit)))
    shown = inv.warnings if limit is None else inv.warnings[:limit]
    for line, col, text, message in shown:
        console.print(f"[yellow]note[/yellow] line {line} column '{_text(col)}' "
                      f"('{_text(text)}'): {_text(message)}")
    if len(shown) < len(inv.warnings):
        console.print(f"[yellow]note[/yellow] … and {len(inv.warnings) - len(shown)} more "
                      "notes (--rows shows them all)")
    _render_assumptions(console, inv, limit)
    _render_device_data(console, summary)
    if summary.extra_columns:
        console.print("Columns kept but not used: " + _text(", ".join(summary.extra_columns)))


def _render_device_data(console: Console, summary: StockSummary) -> None:
    if not summary.device_data:
        return
    console.print("[bold]Device data[/bold] (the hFE bin moved along each curve, 25 °C):")
    for part_id, d in summary.device_data.items():
        lo, hi = float(d["ic_min"]), float(d["ic_max"])  # type: ignore[arg-type]
        h_lo, h_hi = float(d["hfe_min"]), float(d["hfe_max"])  # type: ignore[arg-type]
        console.print(f"  - {_text(part_id)}: hFE {h_lo:.0f}–{h_hi:.0f} over IC "
                      f"{_format_quantity(lo, 'A')}–{_format_quantity(hi, 'A')}; from the "
                      f"{_text(str(d['source']))}")


def _render_assumptions(console: Console, inv: Inventory, limit: int | None) -> None:
    grouped: dict[str, list[str]] = {}
    card = "Gummel–Poon parameters not given (IS, BR, NF, NR, VAF, XTI, EG): SPICE " \
           "defaults, IS from the VBE range; used by the exponential model only"
    order = list(TRANSISTOR_DEFAULTS)
    for t in inv.transistors:
        items = {card if name in MODEL_CARD_FIELDS else TRANSISTOR_DEFAULTS[name][1]: None
                 for name in sorted(t.assumed, key=order.index)}
        for item in items:
            grouped.setdefault(item, []).append(t.part_id)
    if not grouped:
        return
    console.print("[bold]Assumed where the stock file is silent[/bold] "
                  "(later analyses use these):")
    for item, part_ids in grouped.items():
        who = "all transistors" if len(part_ids) == len(inv.transistors) > 1 \
            else _text(_shortened(part_ids, limit))
        console.print(f"  - {item}: {who}")


class ReadingProgress:
    """A progress bar on stderr for reading a big file, shown only after ``delay_s``.

    Call the instance with (lines read, lines in the file), as
    :func:`stockbias.stock_io.read_inventory` does; use it as a context manager so that
    the bar is removed at the end.
    """

    def __init__(self, console: Console, label: str, delay_s: float = 1.0) -> None:
        self.console = console
        self.label = label
        self.delay_s = delay_s
        self.started = time.monotonic()
        self.bar: Progress | None = None     # rich.progress loaded when a bar is shown
        self.task: TaskID = cast("TaskID", 0)

    def __call__(self, done: int, total: int) -> None:
        if self.bar is None:
            if time.monotonic() - self.started < self.delay_s:
                return
            from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

            self.bar = Progress(TextColumn("{task.description}"), BarColumn(),
                                TextColumn("{task.completed}/{task.total} lines"),
                                TimeElapsedColumn(), console=self.console, transient=True)
            self.bar.start()
            self.task = self.bar.add_task(self.label, total=total)
        self.bar.update(self.task, completed=done, total=total)

    def __enter__(self) -> ReadingProgress:
        return self

    def __exit__(self, *exc: object) -> None:
        if self.bar is not None:
            self.bar.stop()


_SLOT = "\x00{}\x00"  # strings no stock file can hold (NUL is refused)


def stock_check_json(payload: dict[str, object]) -> str:
    """The ``stock check --json`` object: indented, one part (one series entry) per line.

    Everything but the two long members, ``parts`` and ``summary.series_of_value``, goes
    through :func:`stockbias.render.json_out.dumps`; their items (plain numbers, strings,
    booleans, None) are encoded by the C encoder, one per line, which keeps 100 000 parts
    to about a second.
    """
    from .json_out import clean, dumps

    encode = json.JSONEncoder(ensure_ascii=False, allow_nan=False).encode
    parts = payload.get("parts")
    summary = payload.get("summary")
    series = summary.get("series_of_value") if isinstance(summary, dict) else None
    if not isinstance(parts, list) or not isinstance(series, dict):
        return dumps(payload)
    assert isinstance(summary, dict)
    slim = {**payload, "parts": _SLOT.format("parts"),
            "summary": {**summary, "series_of_value": _SLOT.format("series")}}
    head = dumps(slim)
    try:
        part_lines = [encode(part) for part in parts]
    except (TypeError, ValueError):  # anything beyond plain values: the general path
        part_lines = [encode(clean(part)) for part in parts]
    series_lines = [f"{encode(str(k))}: {encode(v)}" for k, v in series.items()]

    def block(lines: list[str], indent: str, empty: str) -> str:
        if not lines:
            return empty
        return empty[0] + "\n" + indent + f",\n{indent}".join(lines) + "\n" \
            + indent[:-2] + empty[1]

    for name, lines, indent, empty in (("parts", part_lines, "    ", "[]"),
                                       ("series", series_lines, "      ", "{}")):
        head = head.replace(json.dumps(_SLOT.format(name), ensure_ascii=False),
                            block(lines, indent, empty), 1)
    return head
