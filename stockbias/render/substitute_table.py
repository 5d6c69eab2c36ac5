"""Terminal rendering of `substitute`: drop-ins first, then by rework, ruled-out parts named."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..inert_text import console_text
from ..job import Job
from ..search.substitute import SubstituteResult
from ..units import format_quantity

__all__ = ["render_substitute", "verdict_lines"]


def verdict_lines(result: SubstituteResult) -> list[str]:
    """One plain sentence per stock transistor, best first (for reports)."""
    out = []
    for rank, c in enumerate(result.candidates, start=1):
        q = c.transistor.part_id
        if c.ruled_out:
            out.append(f"{rank}. {q}: ruled out, {c.ruled_out}.")
        elif c.drop_in:
            out.append(f"{rank}. {q}: drop-in, passes every limit as it stands.")
        elif c.changes:
            change = ", ".join(f"{role} to {format_quantity(p.value, 'ohm')} "
                               f"({'+'.join(p.part_ids)})" for role, p in c.changes.items())
            proof = "" if c.proven else " (time limit: fewer changes not ruled out)"
            out.append(f"{rank}. {q}: {len(c.changes)} change(s): {change}; added cost "
                       f"{c.added_cost:g} per board{proof}.")
        else:
            out.append(f"{rank}. {q}: no fix from stock; {c.note}.")
    if result.purpose is not None:
        out.append(f"Every verdict keeps the stage's purpose: {result.purpose_rule}.")
    return out


def _purpose(console: Console, result: SubstituteResult) -> None:
    """Today's figures → each fixed transistor's, and the tolerances held."""
    from rich.markup import escape

    from ..search.keep_purpose import FIGURE_LABELS, change_text, figures_of

    held = result.purpose
    if held is None:
        return
    table = Table(title=f"What the stage does: today ({console_text(result.current.part_id)}, "
                  "values as "
                  "they stand) → with each transistor that fits", title_justify="left")
    table.add_column("transistor")
    for label, _unit in FIGURE_LABELS.values():
        table.add_column(label)
    for c in result.candidates:
        if not c.fixed or c.check is None:
            continue
        after = figures_of(c.check)
        table.add_row(console_text(c.transistor.part_id),
                      *(change_text(held.before.get(k), after.get(k), u)
                        for k, (_l, u) in FIGURE_LABELS.items()))
    if table.row_count:
        console.print(table)
    else:
        today = ", ".join(f"{label} {change_text(held.before.get(k), None, u).split(' →')[0]}"
                          for k, (label, u) in FIGURE_LABELS.items())
        console.print(f"Today's stage: {today}.")
    console.print(escape(f"The stage keeps its purpose: {result.purpose_rule} (set in the "
                         "job's [keep_purpose] or with --keep-purpose NAME=PERCENT; "
                         "--no-keep-purpose holds only the job's limits)."))
    for note in held.notes:
        console.print(f"[yellow]Today's stage:[/yellow] {escape(note)}")


def render_substitute(console: Console, job: Job, result: SubstituteResult) -> None:
    """Print the ranked substitution candidates."""
    values = console_text(", ".join(f"{role} = {format_quantity(p.value, 'ohm')}"
                                    + (f" ({'+'.join(p.part_ids)})" if p.part_ids else "")
                                    for role, p in result.values.items()))
    t = job.stage.target
    console.print(f"[bold]Substitutes for {console_text(result.current.part_id)}[/bold] in "
                  f"stage '{console_text(result.stage)}' ({result.topology}): {values}; IC "
                  f"{format_quantity(t.ic_min, 'A')}–{format_quantity(t.ic_max, 'A')}, "
                  f"VCE ≥ {format_quantity(t.vce_min, 'V')}, build of {job.build.quantity}")
    table = Table(title="Stock transistors, best first", title_justify="left")
    widest_id = max((len(c.transistor.part_id) for c in result.candidates), default=0)
    for col in ("#", "transistor", "verdict", "least rework from stock", "added cost/board",
                "IC margin", "why"):
        # a part id keeps its whole width; other text wraps or folds, never cut with "…"
        table.add_column(col, overflow="fold",
                         min_width=widest_id if col == "transistor" else None)
    for rank, c in enumerate(result.candidates, start=1):
        q = c.transistor
        name = console_text(f"{q.part_id} ({q.polarity}, hFE {q.hfe_min:g}–{q.hfe_max:g})")
        margin = ""
        if c.check is not None and (c.drop_in or c.changes):
            margin = f"{100 * c.check.ic_margin:.2f} %"
        if c.ruled_out:
            table.add_row(str(rank), name, "[red]ruled out[/red]", "", "", "",
                          console_text(c.ruled_out))
        elif c.drop_in:
            table.add_row(str(rank), name, "[green]drop-in[/green]", "none", "0", margin,
                          "passes every limit as it stands")
        elif c.changes:
            change = console_text(", ".join(f"{role} → {format_quantity(p.value, 'ohm')} "
                                            f"({'+'.join(p.part_ids)})"
                                            for role, p in c.changes.items()))
            fails = ", ".join(x.name for x in c.drop_in_check.failing) \
                if c.drop_in_check else ""
            why = f"as it stands fails {fails}"
            if not c.proven:
                why += "; time limit: fewer changes not ruled out"
            table.add_row(str(rank), name, f"[yellow]{len(c.changes)} change"
                          f"{'s' if len(c.changes) > 1 else ''}[/yellow]", change,
                          f"{c.added_cost:g}", margin, why)
        else:
            fails = ", ".join(x.name for x in c.drop_in_check.failing) \
                if c.drop_in_check else ""
            table.add_row(str(rank), name, "[red]no fix[/red]", "", "", "",
                          console_text(f"fails {fails}; {c.note}"))
    console.print(table)
    _purpose(console, result)
    console.print(f"{IC_MARGIN_DEFINITION} ({format_quantity(t.ic, 'A')}). Every "
                  "verdict is the full worst-case check (the same as `stockbias check`); a "
                  "rework is the fewest resistor changes, then the lowest added cost, then the "
                  "largest margin.")
    for c in result.candidates:
        for w in (c.check.warnings if c.check is not None else []):
            console.print(f"[yellow]warning[/yellow] "
                          f"({console_text(c.transistor.part_id)}): {console_text(w)}")
    cautions = {w for c in result.candidates if c.check is not None for w in c.check.cautions}
    for w in sorted(cautions):
        console.print(f"[bold yellow]caution[/bold yellow]: {console_text(w)}")
