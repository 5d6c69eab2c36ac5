"""Terminal rendering of a board or a consolidation designed to a yield target: what each
stage claims and on what evidence, the board's yield, and the worst-case optimum beside it.
Every line is laid out in blocks to the console width (values and part ids never cut)."""

from __future__ import annotations

from rich.console import Console

from ..inert_text import console_text
from ..job import Job
from .blocks import fill, print_lines, prose
from .board_table import _bom_lines, _stage_blocks, _totals, purpose_lines, purpose_notes
from .yield_text import lower_percent, percent_text

__all__ = ["render_yield_board"]


def _pct(x: float) -> str:
    return f"{percent_text(x, 3)} %"


def _low(x: float) -> str:
    """A lower bound, rounded down: it never claims more than the counts support."""
    return f"{lower_percent(x)} %"


def _evidence_items(e) -> list[str]:
    mc = e.check.monte_carlo
    head = f"{e.name}:"
    if e.kind == "worst case":
        items = [head, "yield 1: passes every worst-case corner"]
    elif e.kind == "sub-box":
        items = [head, f"yield ≥ {_low(e.box_mass)}: passes the sub-box that holds that share "
                       "of boards"]
    else:
        j = e.judged
        items = [head, f"judged {_pct(j.yield_)} of {j.samples:,} boards (≥ "
                       f"{_low(e.judged_low)})"]
    items.append(f"final check {_pct(mc.yield_.yield_)} of {mc.yield_.samples:,} fresh boards "
                 f"(≥ {_low(e.check_low)})")
    if e.yield_min is not None:
        items.append(f"target {100 * e.yield_min:g} %")
    fails = [c.name for c in e.check.constraints if not c.ok and c.name != "yield_min"]
    items = [items[0], *(f"{t};" for t in items[1:-1]), items[-1]]
    if fails:   # one item per limit: a long list wraps between names
        items[-1] += ";"
        items += ["worst case fails", *(f"{n}," for n in fails[:-1]), fails[-1]]
    return items


def _header(console: Console, job: Job, result) -> None:
    what = ("Yield consolidation" if result.kind == "consolidate" else "Yield board design")
    targets = ", ".join(
        f"'{s.name}' ≥ {100 * s.target.yield_min:g} % at "
        f"{100 * s.target.yield_confidence:g} %" if s.target.yield_min is not None
        else f"'{s.name}' worst case" for s in job.stages)
    console.print(f"[bold]{what}[/bold] of {len(job.stages)} stages sharing the stock, build "
                  f"of {job.build.quantity}; objectives {', '.join(result.objectives)}")
    console.print(console_text(
        f"Stage targets: {targets} confidence (one-sided Clopper–Pearson lower bound); every "
        "board at every supply × ambient extreme"))
    status = ("[bold yellow]feasible[/bold yellow] (the best among the candidates searched, "
              "not a proof over the whole shelf)" if result.designs else
              "[bold red]unknown[/bold red] (no candidate shown to meet every stage's target)")
    console.print(f"Status: {status} in {result.seconds:.2f} s on {result.stats['executor']}")
    wc = result.worst_case_best()
    if wc is not None:
        extra = (f", {wc.bom_lines} BOM lines, {wc.changes} changes"
                 if result.kind == "consolidate" else f", {wc.part_count} parts")
        console.print(f"Worst-case optimum for comparison: cost {wc.cost:.4g}/board{extra} "
                      f"({result.worst_case.status}; every board passes at every corner)")
    else:
        console.print(f"Worst case: no board passes every corner "
                      f"({result.worst_case.status})")


def _evidence(console: Console, result) -> None:
    s = result.stats
    boxes = "; ".join(f"±{3 * b['resistor_factor']:g}σ resistors, {100 * b['range_fraction']:g} "
                      f"% of hFE/VBE ranges: {b['boards']}" for b in s["boxes"])
    mixed = s.get("candidate_boards_mixed", 0)
    console.print(console_text(
        f"Candidates: {s['candidate_boards']} distinct boards from {s['stage_designs']} stage "
        f"designs: {s['candidate_boards'] - mixed} from the worst-case board search on "
        f"{len(s['boxes'])} boxes ({boxes}), {mixed} with their stages mixed."))
    line = (f"Evidence: {s['proven_without_sampling']} stage designs shown without sampling "
            "(found on the job's box: yield 1; on a sub-box: at least its probability); "
            f"{s['sampled_stage_designs']} sampled")
    if s["sampled_stage_designs"]:
        line += (f" — {s['screened_out']} screened out by a one-sided upper bound below the "
                 f"target on 2,000 common boards at {100 * s['screen_confidence_each']:.3g} % "
                 f"each (Bonferroni over {s['sampled_stage_designs']}), {s['judged']} judged "
                 f"on {result.samples:,} fresh boards each")
    console.print(console_text(line + "."))


def _board(console: Console, d, width: int, show_changes: bool) -> None:
    b = d.board
    title = (f"After: {b.changes} part(s) changed (in bold)" if show_changes else
             f"Rank {b.rank}: cost {b.cost:g} per board, {b.part_count} parts, "
             f"{b.distinct_values} values, {b.bom_lines} BOM lines")
    _stage_blocks(console, title, b.to_dict()["stages"], show_changes)
    lines = ["  Yield by stage (each at its own confidence):"]
    for e in d.stages:
        lines += fill([console_text(t) for t in _evidence_items(e)], width, "    ",
                      hang="      ", gap=" ")
    lines += prose(f"Board yield (every stage passes): {_pct(d.board_yield)}, ≥ "
                   f"{_low(d.board_low)} at {100 * d.board_confidence:.3g} % joint confidence "
                   "— the product of the stages' yields, since each stage draws its own parts "
                   "and every board meets the same fixed corners.", width, "  ")
    print_lines(console, lines)


def render_yield_board(console: Console, job: Job, result) -> None:
    """Print a :class:`stockbias.search.yield_board.YieldBoardResult` (board or
    consolidation)."""
    width = max(console.width, 40)
    _header(console, job, result)
    _evidence(console, result)
    cons = result.kind == "consolidate"
    if cons:
        wc = result.worst_case
        print_lines(console, _bom_lines("BOM before", wc.before_bom, job.build.quantity, width))
        ref = result.reference or []
        product = 1.0
        items = ["Today's board:"]
        for name, chk in ref:
            y = chk.monte_carlo.yield_
            product *= y.yield_
            items.append(f"{name} {_pct(y.yield_)} of {y.samples:,}")
        items.append(f"board {_pct(product)}")
        print_lines(console, fill([console_text(t) for t in items], width, "", hang="  "))
        console.print("Before: " + _totals(wc.before))
    for d in result.designs:
        _board(console, d, width, cons)
    if result.designs:
        best = result.designs[0].board
        print_lines(console, _bom_lines("BOM after" if cons else "BOM of rank 1", best.bom,
                                        job.build.quantity, width))
        if cons:
            from ..search.board import bom_totals

            after = bom_totals(best.bom)
            saved = result.worst_case.before["bom_lines"] - after["bom_lines"]
            console.print("After: " + _totals(after) + f" — {saved} BOM line(s) fewer")
            if result.purpose:
                print_lines(console, purpose_lines("What each stage does: today → after",
                                                   result.purpose, width))
        console.print("Every stage was checked again with the same analysis as "
                      "`stockbias check`, on fresh boards.")
        cautions = {c for s in best.stages for c in s.check.cautions}
        for c in sorted(cautions):
            console.print(f"[yellow]Caution:[/yellow] {console_text(c)}")
    if cons and result.purpose:
        purpose_notes(console, result.purpose_rule, result.purpose)
    if result.stats.get("dropped_on_final_check"):
        console.print(console_text("Dropped on the final check: "
                                   + "; ".join(result.stats["dropped_on_final_check"])))
    if not result.designs and result.explanation:
        console.print("[bold red]No board.[/bold red] " + console_text(result.explanation))
        ex = result.worst_case.explanation
        if isinstance(ex, dict) and ex.get("reason"):
            console.print(console_text(f"At the worst case: {ex['reason']}"))
            inner = ex.get("stage_explanation") or {}
            hint = (inner.get("relaxation") or {}).get("text") or ex.get("suggestion")
            if hint:
                console.print(f"[bold]What would help:[/bold] {console_text(hint)}")
    if result.assumptions:
        console.print("Assumptions: " + "; ".join(result.assumptions), style="dim",
                      markup=False)
