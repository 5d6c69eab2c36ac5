"""Terminal rendering of `substitute`: drop-ins first, then by rework, ruled-out parts named."""

from __future__ import annotations

from rich.console import Console

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..inert_text import console_text
from ..job import Job
from ..search.substitute import SubstituteResult
from ..units import format_quantity
from .blocks import fill, item, print_lines, prose
from .purpose_change import purpose_change_lines
from .yield_text import lower_percent, percent_text

#: the indent of a block's second and later lines
_PAD = "     "

__all__ = ["candidate_lines", "evidence_text", "render_substitute", "verdict_lines"]


def evidence_text(ev, y_min: float) -> list[str]:
    """A yield verdict's evidence as items: what was shown, on how many boards, and the
    worst-case verdict of the same parts (:class:`.yield_substitute.YieldEvidence`)."""
    out = []
    target = f"{100 * y_min:g} %"
    if ev.kind == "worst case":
        out.append("yield 1: passes every worst-case corner")
    elif ev.kind == "sub-box":
        out.append(f"yield ≥ {lower_percent(ev.box_mass)} %: passes the sub-box holding that "
                   "share of boards")
    elif ev.kind == "screened out":
        out.append(f"yield ≤ {percent_text(ev.screen_high, 3)} % on {ev.screen.samples:,} "
                   f"screening boards, below {target}")
    elif ev.kind == "not judged":
        out.append("not judged: time limit")
    if ev.judged is not None:
        out.append(f"judged {percent_text(ev.judged.yield_, 3)} % of {ev.judged.samples:,} "
                   f"boards (≥ {lower_percent(ev.judged_low)} %)"
                   + (f", below {target}" if ev.kind == "below target" else ""))
    if ev.final is not None:
        out.append(f"final check {percent_text(ev.final.yield_, 3)} % of "
                   f"{ev.final.samples:,} fresh boards (≥ {lower_percent(ev.final_low)} %)"
                   + (f", below {target}" if ev.kind == "failed final check" else ""))
        out.append("worst case fails " + ", ".join(ev.worst_case_failing)
                   if ev.worst_case_failing else "worst case passes too")
    return out


def _evidence_lines(label: str, ev, y_min: float, width: int) -> list[str]:
    items = evidence_text(ev, y_min)
    items = [f"{x};" for x in items[:-1]] + items[-1:]
    return fill([item(label), *(item(x) for x in items)], width, _PAD, gap=" ")


def verdict_lines(result: SubstituteResult) -> list[str]:
    """One plain sentence per stock transistor, best first (for reports)."""
    out = []
    ys = result.yield_search
    for rank, c in enumerate(result.candidates, start=1):
        q = c.transistor.part_id
        if ys is not None and c.ruled_out is None:
            out.append(_yield_verdict_line(rank, c, float(ys["yield_min"])))
        elif c.ruled_out:
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


def _yield_head(c, margin: list[str]) -> list[str]:
    if c.drop_in:
        return [item("drop-in", "green"), item("no rework"), *margin]
    if c.changes:
        n = len(c.changes)
        return [item(f"{n} change{'s' if n > 1 else ''}", "yellow"),
                item(f"added cost {c.added_cost:g}/board"), *margin]
    return [item("no fix", "red")]


def _yield_rest(c, y_min: float, width: int) -> list[str]:
    """The yield verdict's evidence under a candidate's head line."""
    out: list[str] = []
    if c.changes:
        changes = [f"{role} → {format_quantity(p.value, 'ohm')} ({'+'.join(p.part_ids)})"
                   for role, p in c.changes.items()]
        changes = [f"{x}," for x in changes[:-1]] + changes[-1:]
        changes[0] = "rework: " + changes[0]
        out += fill([item(x) for x in changes], width, _PAD, gap=" ")
    if c.drop_in_yield is not None:
        out += _evidence_lines("as it stands:", c.drop_in_yield, y_min, width)
    if c.yield_evidence is not None:
        out += _evidence_lines("with the rework:" if c.changes else "as it stands:",
                               c.yield_evidence, y_min, width)
    if c.note:
        out += prose(c.note, width, _PAD)
    elif c.changes and not c.proven:
        out += prose("time limit: fewer changes not ruled out", width, _PAD)
    if c.worst_case is not None:
        out += prose("by the worst-case rules: " + worst_case_text(c.worst_case), width, _PAD)
    return out


def worst_case_text(w: dict) -> str:
    """The worst-case rules' verdict for one transistor, in words."""
    if w["verdict"] == "drop-in":
        return "drop-in"
    if w["verdict"] == "not searched":
        return "not searched (time limit)"
    if w["verdict"] == "none":
        return "no fix from stock" + ("" if w["proven"] else " found before the time limit")
    n = len(w["changes"])
    return (f"{n} change{'s' if n > 1 else ''} ("
            + ", ".join(f"{x['role']} → {x['part_id']}" for x in w["changes"])
            + f"), added cost {w['added_cost']:g}/board"
            + ("" if w["proven"] else "; time limit: fewer changes not ruled out"))


def _yield_verdict_line(rank: int, c, y_min: float) -> str:
    """One sentence for a transistor judged by the yield rule (reports)."""
    q = c.transistor.part_id
    if c.drop_in:
        head = "drop-in by the yield rule"
    elif c.changes:
        change = ", ".join(f"{role} to {format_quantity(p.value, 'ohm')} "
                           f"({'+'.join(p.part_ids)})" for role, p in c.changes.items())
        head = (f"{len(c.changes)} change(s) by the yield rule: {change}; added cost "
                f"{c.added_cost:g} per board")
    else:
        head = f"no fix; {c.note}"
    ev = c.yield_evidence if c.yield_evidence is not None else c.drop_in_yield
    parts = [head, *(evidence_text(ev, y_min) if ev is not None else [])]
    if c.worst_case is not None:
        parts.append("by the worst-case rules: " + worst_case_text(c.worst_case))
    return f"{rank}. {q}: " + "; ".join(parts) + "."


def candidate_lines(rank: int, c, width: int, y_min: float | None = None) -> list[str]:
    """One stock transistor as a block: rank, part and hFE, verdict, rework, reason (with a
    yield target, ``y_min``: the yield evidence of the verdict and of the drop-in)."""
    q = c.transistor
    head = [item(f"{rank:>2}. {q.part_id} ({q.polarity}, hFE {q.hfe_min:g}–{q.hfe_max:g})")]
    margin = []
    if c.check is not None and (c.drop_in or c.changes):
        margin = [item(f"IC margin {100 * c.check.ic_margin:.2f} %")]
    fails = ", ".join(x.name for x in c.drop_in_check.failing) if c.drop_in_check else ""
    rest: list[str] = []
    if y_min is not None and c.ruled_out is None:
        return fill(head + _yield_head(c, margin), width, " ", hang=_PAD) + \
            _yield_rest(c, y_min, width)
    if c.ruled_out:
        head.append(item("ruled out", "red"))
        rest = prose(c.ruled_out, width, _PAD)
    elif c.drop_in:
        head += [item("drop-in", "green"), item("no rework"), *margin]
        rest = prose("passes every limit as it stands", width, _PAD)
    elif c.changes:
        n = len(c.changes)
        head += [item(f"{n} change{'s' if n > 1 else ''}", "yellow"),
                 item(f"added cost {c.added_cost:g}/board"), *margin]
        changes = [f"{role} → {format_quantity(p.value, 'ohm')} ({'+'.join(p.part_ids)})"
                   for role, p in c.changes.items()]
        changes = [f"{x}," for x in changes[:-1]] + changes[-1:]
        changes[0] = "rework: " + changes[0]
        why = f"as it stands fails {fails}"
        if not c.proven:
            why += "; time limit: fewer changes not ruled out"
        rest = fill([item(x) for x in changes], width, _PAD, gap=" ") + prose(why, width, _PAD)
    else:
        head.append(item("no fix", "red"))
        rest = prose(f"fails {fails}; {c.note}", width, _PAD)
    return fill(head, width, " ", hang=_PAD) + rest


def _purpose(console: Console, result: SubstituteResult) -> None:
    """Today's figures → each fixed transistor's, and the tolerances held."""
    from rich.markup import escape

    from ..search.keep_purpose import FIGURE_LABELS, change_text, figures_of

    held = result.purpose
    if held is None:
        return
    fitted = [c for c in result.candidates if c.fixed and c.check is not None]
    width = max(console.width, 40)
    if fitted:
        console.print(f"[bold]What the stage does[/bold]: today "
                      f"({console_text(result.current.part_id)}, values as they stand) → with "
                      "each transistor that fits")
        for c in fitted:
            assert c.check is not None  # fitted holds checked candidates only
            print_lines(console, purpose_change_lines(c.transistor.part_id, held.before,
                                                      figures_of(c.check), width))
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
    width = max(console.width, 40)
    ys = result.yield_search
    y_min = None if ys is None else float(ys["yield_min"])
    if ys is not None:
        _yield_intro(console, result, width)
    console.print("[bold]Stock transistors, best first[/bold]")
    for rank, c in enumerate(result.candidates, start=1):
        print_lines(console, candidate_lines(rank, c, width, y_min))
    _purpose(console, result)
    if ys is None:
        console.print(f"{IC_MARGIN_DEFINITION} ({format_quantity(t.ic, 'A')}). Every "
                      "verdict is the full worst-case check (the same as `stockbias check`); "
                      "a rework is the fewest resistor changes, then the lowest added cost, "
                      "then the largest margin.")
    else:
        console.print(f"{IC_MARGIN_DEFINITION} ({format_quantity(t.ic, 'A')}). A rework is "
                      "the fewest resistor changes, then the lowest added cost, among the "
                      "candidates judged; " + console_text("; ".join(ys["assumptions"])) + ".")
        dropped = ys["stats"]["dropped_on_final_check"]
        if dropped:
            console.print(console_text("Dropped on the final check: " + "; ".join(dropped)))
    for c in result.candidates:
        for w in (c.check.warnings if c.check is not None else []):
            console.print(f"[yellow]warning[/yellow] "
                          f"({console_text(c.transistor.part_id)}): {console_text(w)}")
    cautions = {w for c in result.candidates if c.check is not None for w in c.check.cautions}
    for w in sorted(cautions):
        console.print(f"[bold yellow]caution[/bold yellow]: {console_text(w)}")


def _yield_intro(console: Console, result: SubstituteResult, width: int) -> None:
    """What a yield verdict claims and on what evidence, before the candidates."""
    ys = result.yield_search
    assert ys is not None
    st = ys["stats"]
    text = (f"Yield rule: a transistor fits when the stage with it yields ≥ "
            f"{100 * ys['yield_min']:g} %, shown at {100 * ys['yield_confidence']:g} % "
            "confidence (one-sided Clopper–Pearson lower bound): every board at every supply "
            "× ambient extreme. Passing every worst-case corner shows yield 1 without "
            f"sampling; other candidates are screened on {ys['screen_samples']:,} common "
            "boards (an upper bound below the target at a Bonferroni-adjusted confidence "
            f"puts one out), judged on {ys['samples_per_design']:,} fresh boards and "
            f"checked again on {ys['samples_per_design']:,} more from an independent stream. "
            f"This run: {st['sampled_candidates']} "
            f"candidate{'' if st['sampled_candidates'] == 1 else 's'} sampled, "
            f"{st['proven_without_sampling']} shown without sampling, {st['screened_out']} "
            f"screened out, {st['judged']} judged, in {result.solve_seconds:.1f} s on "
            f"{st['executor']}.")
    print_lines(console, prose(text, width))
    if st["cut_by_time_limit"]:
        console.print(console_text("Time limit reached while judging "
                                   + ", ".join(st["cut_by_time_limit"])
                                   + "; a longer --time-limit may find more"))
