"""Terminal rendering of `stock check`."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from ..parts import MODEL_CARD_FIELDS, TRANSISTOR_DEFAULTS, Inventory
from ..stock_summary import StockSummary
from ..units import format_quantity

__all__ = ["render_stock_summary"]


def render_stock_summary(console: Console, inv: Inventory, summary: StockSummary) -> None:
    """Print the summary of a valid stock file."""
    delim = ("semicolon-delimited (decimal commas read)" if inv.delimiter == ";"
             else "comma-delimited")
    console.print(f"[bold]{inv.path}[/bold]: valid, {summary.counts['resistor']} resistor lines, "
                  f"{summary.counts['transistor']} transistor lines, {delim}")
    if summary.resistance_min is not None and summary.resistance_max is not None:
        console.print(f"Resistance range: {format_quantity(summary.resistance_min, 'ohm')} to "
                      f"{format_quantity(summary.resistance_max, 'ohm')}")
    if summary.series_counts:
        order = ["E3", "E6", "E12", "E24", "E48", "E96", "E192", "off-series"]
        parts = [f"{k}: {summary.series_counts[k]}" for k in order if k in summary.series_counts]
        console.print("Values by coarsest IEC 60063 series: " + ", ".join(parts))

    if inv.resistors:
        table = Table(title="Resistors", title_justify="left")
        for col in ("part id", "value", "tol", "power", "tempco", "qty", "series", "location"):
            table.add_column(col, justify="right" if col in ("value", "qty") else "left")
        for r in inv.resistors:
            series = "link" if r.is_link else (summary.series_of_value.get(r.part_id) or "-")
            tempco = r.tempco_text  # −350 (signed), +100 (signed) or ±350 (either sign)
            qty = f"[red]{r.qty}[/red]" if r.qty == 0 else str(r.qty)
            table.add_row(r.part_id, format_quantity(r.value_ohm, "ohm"),
                          f"±{r.tolerance_pct:g} %", format_quantity(r.power_w, "W"), tempco,
                          qty, series, r.location)
        console.print(table)
    if inv.transistors:
        table = Table(title="Transistors", title_justify="left")
        for col in ("part id", "pol", "hFE", "at IC", "VBE", "VCEO", "IC max", "PD", "qty"):
            table.add_column(col)
        for t in inv.transistors:
            table.add_row(t.part_id, t.polarity, f"{t.hfe_min:g}–{t.hfe_max:g}",
                          format_quantity(t.hfe_test_ic, "A"),
                          f"{t.vbe_min:.3g}–{t.vbe_max:.3g} V", format_quantity(t.vceo_max, "V"),
                          format_quantity(t.ic_max, "A"), format_quantity(t.pd_max_w, "W"),
                          str(t.qty))
        console.print(table)
    if summary.zero_qty:
        console.print("[yellow]No pieces left:[/yellow] " + ", ".join(summary.zero_qty))
    for line, col, text, message in inv.warnings:
        console.print(f"[yellow]note[/yellow] line {line} column '{col}' ('{text}'): {message}")
    if summary.assumptions:
        console.print("[bold]Assumed where the stock file is silent[/bold] "
                      "(later analyses use these):")
        grouped: dict[str, list[str]] = {}
        card = "Gummel–Poon parameters not given (IS, BR, NF, NR, VAF, XTI, EG): SPICE " \
               "defaults, IS from the VBE range; used by the exponential model only"
        for t in inv.transistors:
            for name in sorted(t.assumed, key=list(TRANSISTOR_DEFAULTS).index):
                item = card if name in MODEL_CARD_FIELDS else TRANSISTOR_DEFAULTS[name][1]
                if t.part_id not in grouped.setdefault(item, []):
                    grouped[item].append(t.part_id)
        for item, part_ids in grouped.items():
            who = "all transistors" if len(part_ids) == len(inv.transistors) > 1 \
                else ", ".join(part_ids)
            console.print(f"  - {item}: {who}")
    if summary.extra_columns:
        console.print("Columns kept but not used: " + ", ".join(summary.extra_columns))
