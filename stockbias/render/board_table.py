"""Terminal rendering of board results: `design BOARD` and `consolidate BOARD`."""

from __future__ import annotations

from rich.console import Console

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..inert_text import console_text
from ..job import Job
from ..units import format_quantity
from .blocks import Item, aligned_rows, fill, item, print_lines
from .corners import CORNER_KEY
from .purpose_change import purpose_change_lines

__all__ = ["purpose_lines", "render_board", "render_consolidate"]

_STATUS = {
    "optimal": "[bold green]optimal[/bold green] (proven: no assignment from this stock ranks "
               "higher)",
    "feasible": "[bold yellow]feasible[/bold yellow] (time limit reached: best found, not "
                "proven optimal)",
    "infeasible": "[bold red]infeasible[/bold red] (proven: the stock cannot meet every stage "
                  "at once)",
    "unknown": "[bold red]unknown[/bold red] (time limit reached before any board was found)",
}


def _status(console: Console, status: str, seconds: float, bound: dict[str, float]) -> None:
    line = f"Status: {_STATUS.get(status, status)} in {seconds:.2f} s"
    if bound:
        line += "; best bound " + ", ".join(
            f"{k} {'≤' if k == 'ic_margin' else '≥'} {v:g}" for k, v in bound.items())
    console.print(line)


def _part(p: dict) -> str:
    """A part as plain text: its value and stock part id(s)."""
    ids = p.get("part_id")
    ids = "+".join(ids) if isinstance(ids, list) else (ids or "outside stock")
    return f"{format_quantity(p['value_ohm'], 'ohm')} {ids}"


def _item(text: str, bold: bool = False) -> Item:
    return item(text, "bold" if bold else None)


def _stage_blocks(console: Console, title: str, stages: list[dict],
                  show_changes: bool) -> None:
    """One block per stage: name, network and transistor; its parts; its worst-case DC
    point.  Lines fit the console width and never cut a value or a part id."""
    width = max(console.width, 40)
    console.print(console_text(title), soft_wrap=True)
    for s in stages:
        changed = set(s.get("changed", [])) if show_changes else set()
        head = [_item(f"{s['name']}: {s['topology']}, {s['transistor']['part_id']}")]
        parts = [_item(f"{role} {_part(p)}", bold=role in changed)
                 for role, p in s["parts"].items()]
        wc = s["worst_case"]
        ic, vce = wc.get("ic", {}), wc.get("vce", {})
        dc = [_item(f"IC {format_quantity(ic.get('min', 0), 'A')}–"
                    f"{format_quantity(ic.get('max', 0), 'A')}"),
              _item(f"VCE ≥ {format_quantity(vce.get('min', 0), 'V')}"),
              _item(f"IC margin {100 * s['ic_margin']:.2f} %")]
        if show_changes:
            dc.append(_item("changed " + (", ".join(s["changed"]) or "none")))
        print_lines(console, fill(head, width, "  ") + fill(parts, width, "    ")
                    + fill(dc, width, "    "))


def _bom_lines(title: str, bom: list[dict], build: int, width: int) -> list[str]:
    """A BOM: one row per stock line in aligned columns, its uses on the line below;
    as blocks when the columns do not fit ``width`` (part ids and values never cut)."""
    head = ["line", "value", "tol", "per board", f"for {build}", "in stock", "cost each"]
    rows: list[list[Item]] = []
    for r in bom:
        value = ("transistor" if r["kind"] == "transistor"
                 else format_quantity(r["value_ohm"], "ohm"))
        tol = "" if r["tolerance_pct"] is None else f"{r['tolerance_pct']:g} %"
        stock = "—" if r["in_stock"] is None else str(r["in_stock"])
        rows.append([item(r["part_id"] or "(buy)"), item(value), item(tol),
                     item(str(r["placements"])), item(str(r["needed"])),
                     item(f"{stock} (short)", "red") if r["short"] else item(stock),
                     item(f"{r['unit_cost']:g}")])
    out = [f"[bold]{console_text(title)}[/bold]"]
    table = aligned_rows(head, rows, width, right=(False, True, True, True, True, True, True))
    for i, r in enumerate(bom):
        uses = [f"{u}," for u in r["uses"][:-1]] + list(r["uses"][-1:])
        if uses:
            uses[0] = "used in " + uses[0]
        if table is not None:
            out.append(table[i + 1])
        else:
            labelled = [rows[i][0], rows[i][1]] + [
                (f"{h} {p}", f"{h} {s}") for h, (p, s) in zip(head[2:], rows[i][2:], strict=True)
                if p]
            out += fill(labelled, width, "  ", hang="      ")
        out += fill([item(u) for u in uses], width, "      ", gap=" ")
    return out if table is None else [out[0], table[0], *out[1:]]


def _totals(t: dict) -> str:
    return (f"{t['bom_lines']} BOM lines ({t['resistor_lines']} resistor lines, "
            f"{t['distinct_values']} values), {t['placements']} placements, "
            f"cost {t['cost']:g} per board")


def _cautions(console: Console, stage_checks) -> None:
    cautions = {c for chk in stage_checks for c in chk.cautions}
    for c in sorted(cautions):
        console.print(f"[yellow]Caution:[/yellow] {console_text(c)}")


def _explanation(console: Console, ex: dict | None) -> None:
    if not ex:
        return
    console.print(f"[bold red]No board.[/bold red] {console_text(ex.get('reason', ''))}")
    inner = ex.get("stage_explanation") or {}
    if inner.get("message"):
        console.print(console_text(f"Stage '{ex.get('stage')}': binding "
                                   f"{inner.get('binding')}. {inner['message']}"))
        if inner.get("closest"):
            console.print(CORNER_KEY, style="dim")
    relax = inner.get("relaxation") or {}
    hint = relax.get("text") or ex.get("suggestion")
    if hint:
        console.print(f"[bold]What would help:[/bold] {console_text(hint)}")


def purpose_lines(title: str, records: list, width: int, show_after: bool = True) -> list[str]:
    """Per stage: each purpose figure today → after, and the limits held from today's."""
    out = [f"[bold]{console_text(title)}[/bold]"]
    for h in records:
        after = h.after if (show_after and h.after) else None
        out += purpose_change_lines(h.stage, h.before, after, width,
                                    held=_held_text(h.limits))
    return out


def _held_text(limits: dict) -> str:
    if not limits:
        return "—"
    out = []
    if "gain_nominal_min" in limits:
        out.append(f"|gain| {limits['gain_nominal_min']:.3g}–{limits['gain_nominal_max']:.3g}")
    if "rin_min" in limits:
        out.append(f"rin ≥ {format_quantity(limits['rin_min'], 'ohm')}")
    if "swing_pk" in limits:
        out.append(f"swing ≥ {format_quantity(limits['swing_pk'], 'V')}")
    if "supply_current_max" in limits:
        out.append(f"current ≤ {format_quantity(limits['supply_current_max'], 'A')}")
    return ", ".join(out)


def purpose_notes(console: Console, rule: str, records: list) -> None:
    """The tolerances in words, and what today's design itself does not meet."""
    from rich.markup import escape

    console.print(escape(f"Each stage keeps its purpose: {rule} (set per stage in "
                         "[stage.keep_purpose] or [keep_purpose], for every stage with "
                         "--keep-purpose NAME=PERCENT, none with --no-keep-purpose)."))
    for h in records:
        for note in h.notes:
            console.print(f"[yellow]Stage '{escape(h.stage)}':[/yellow] {escape(note)}")


def render_board(console: Console, job: Job, result) -> None:
    """Print a :class:`stockbias.search.board.BoardResult`."""
    console.print(f"[bold]Board design[/bold] of {len(job.stages)} stages sharing the stock, "
                  f"build of {job.build.quantity}; objectives {', '.join(result.objectives)}")
    _status(console, result.status, result.solve_seconds, result.bound)
    for d in result.designs:
        data = d.to_dict()
        _stage_blocks(console,
                      f"Rank {d.rank}: cost {d.cost:g} per board, {d.part_count} parts, "
                      f"{d.distinct_values} values, {d.bom_lines} BOM lines", data["stages"],
                      False)
    if result.designs:
        best = result.designs[0]
        print_lines(console, _bom_lines("BOM of rank 1", best.bom, job.build.quantity,
                                        max(console.width, 40)))
        console.print(f"{IC_MARGIN_DEFINITION}, each stage against its own target.")
        console.print("Every stage was re-verified with the same analysis as `stockbias check`.")
        _cautions(console, [s.check for s in best.stages])
    _explanation(console, result.explanation)
    if result.assumptions:
        console.print("Assumptions: " + "; ".join(result.assumptions), style="dim", markup=False)


def render_consolidate(console: Console, job: Job, result) -> None:
    """Print a :class:`stockbias.search.consolidate.ConsolidateResult`."""
    console.print(f"[bold]Consolidation[/bold] of {len(job.stages)} stages, build of "
                  f"{job.build.quantity}; objectives {', '.join(result.objectives)}"
                  + (f"; kept {console_text(', '.join(result.kept))}" if result.kept else ""))
    _status(console, result.status, result.solve_seconds, result.bound)
    failing = [console_text(n) for n, ok in result.before_ok.items() if not ok]
    width = max(console.width, 40)
    print_lines(console, _bom_lines("BOM before", result.before_bom, job.build.quantity, width))
    console.print("Before: " + _totals(result.before)
                  + (f"; [red]fails its targets in {', '.join(failing)}[/red]" if failing
                     else "; every stage meets its targets"))
    purpose = getattr(result, "purpose", [])
    if result.after is not None:
        from ..search.board import bom_totals

        data = result.after.to_dict()
        _stage_blocks(console, f"After: {result.after.changes} part(s) changed (in bold)",
                      data["stages"], True)
        print_lines(console, _bom_lines("BOM after", result.after.bom, job.build.quantity,
                                        width))
        after = bom_totals(result.after.bom)
        saved = result.before["bom_lines"] - after["bom_lines"]
        console.print("After: " + _totals(after) + f" — {saved} BOM line(s) fewer")
        if purpose:
            print_lines(console, purpose_lines("What each stage does: today → after", purpose,
                                               width))
        console.print(f"{IC_MARGIN_DEFINITION}, each stage against its own target.")
        console.print("Every stage was re-verified with the same analysis as `stockbias check`.")
        _cautions(console, [s.check for s in result.after.stages])
    elif purpose:
        print_lines(console, purpose_lines("What each stage does today", purpose, width,
                                           show_after=False))
    if purpose:
        purpose_notes(console, result.purpose_rule, purpose)
    _explanation(console, result.explanation)
    if result.explanation and result.explanation.get("purpose"):
        console.print(f"[bold]Purpose:[/bold] {console_text(result.explanation['purpose'])}")
    if result.assumptions:
        console.print("Assumptions: " + "; ".join(result.assumptions), style="dim", markup=False)
