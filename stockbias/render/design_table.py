"""Terminal rendering of a `design` result: status, ranked table, assumptions, failures."""

from __future__ import annotations

from rich.console import Console

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..inert_text import console_text
from ..job import Job
from ..units import format_quantity
from .blocks import fill, print_lines
from .corners import CORNER_KEY

__all__ = ["design_block", "render_design"]

_STATUS = {
    "optimal": "[bold green]optimal[/bold green] (proven: no design on the shelf ranks higher)",
    "feasible": "[bold yellow]feasible[/bold yellow] (time limit reached: best found, not "
                "proven optimal)",
    "infeasible": "[bold red]infeasible[/bold red] (proven: nothing on the shelf meets the job)",
    "unknown": "[bold red]unknown[/bold red] (time limit reached before any design was found)",
}


def _parts_text(part: dict) -> str:
    ids = part["part_id"]
    sep = "+" if part.get("arrangement") == "series" else "|"
    ids = sep.join(ids) if isinstance(ids, list) else str(ids)
    return f"{format_quantity(part['value_ohm'], 'ohm')} {ids}"


def _range_text(d: dict) -> str:
    """The free role's variants as a range: '100 Ω … 680 Ω, 5 values in stock'."""
    rng = d.get("variant_range")
    if not rng:
        return ""
    n = rng["count"]
    if n == 1:
        return "the only value in stock"
    span = (f"{format_quantity(rng['min_ohm'], 'ohm')} … "
            f"{format_quantity(rng['max_ohm'], 'ohm')}")
    if n is None:
        # only the ends were sought: the count is bounded, not counted
        return f"{span}, up to {rng['count_at_most']} values in stock"
    return f"{span}, {n} values in stock"


def design_block(d: dict, width: int) -> list[str]:
    """One ranked design as lines of at most ``width`` characters (console-safe text).

    Header (rank, network, transistor, cost and counts), the parts (the free role with
    the range of stock values that work with the network), the worst-case DC point, and
    what the stage does (gain, input resistance, swing, supply current at the worst
    corner) when the result carries it.
    """
    width = max(width, 40)
    head = [f"{d['rank']:>2}. {d['topology']}, {d['transistor']['part_id']} ({d['polarity']})",
            f"cost {d['cost']:.4g}/board, {d['part_count']} parts, "
            f"{d['distinct_values']} values"]
    parts = []
    for role, part in d["parts"].items():
        text = f"{role} {_parts_text(part)}"
        if role == d.get("free_role") and _range_text(d):
            text += f" ({_range_text(d)})"
        parts.append(text)
    parts += [f"{role} absent" for role in d.get("absent", [])]
    wc = d["worst_case"]
    ic, vce = wc.get("ic", {}), wc.get("vce", {})
    dc = [f"IC {format_quantity(ic.get('min', 0), 'A')}–{format_quantity(ic.get('max', 0), 'A')}",
          f"VCE ≥ {format_quantity(vce.get('min', 0), 'V')}",
          f"IC margin {100 * d['ic_margin']:.2f} %"]
    lines = fill(head, width, "") + fill(parts, width, "    ") + fill(dc, width, "    ")
    pur = d.get("purpose") or {}
    does = []
    gain = pur.get("gain") or {}
    if gain.get("nominal") is not None:
        does.append(f"gain {gain['nominal']:.3g} V/V (|gain| ≥ {gain['worst']:.3g})"
                    if gain.get("worst") is not None else f"gain {gain['nominal']:.3g} V/V")
    for key, label, unit, side in (("rin", "input", "ohm", "≥"),
                                   ("swing_pk", "swing", "V", "≥"),
                                   ("supply_current", "supply", "A", "≤")):
        fig = pur.get(key) or {}
        if fig.get("worst") is not None:
            does.append(f"{label} {side} {format_quantity(fig['worst'], unit)}"
                        + (" pk" if key == "swing_pk" else ""))
    if does:
        lines += fill(["does:", *does], width, "    ")
    return [console_text(line) for line in lines]


def render_design(console: Console, job: Job, result, show_variants: bool = False) -> None:
    """Print a :class:`stockbias.search.design.DesignResult`.

    Each row is one bias network; its free role (RC) shows the representative part and
    the range of stock values that work with the network.  ``show_variants`` adds a row
    per variant under each network.
    """
    st = job.stage
    t = st.target
    console.print(f"[bold]Design[/bold] for stage '{console_text(st.name)}': {st.topology}, IC "
                  f"{format_quantity(t.ic_min, 'A')}–{format_quantity(t.ic_max, 'A')}, VCE ≥ "
                  f"{format_quantity(t.vce_min, 'V')}, build of {job.build.quantity}; "
                  f"objectives {', '.join(result.objectives)}")
    line = f"Status: {_STATUS.get(result.status, result.status)} in {result.solve_seconds:.2f} s"
    if result.bound:
        line += "; best bound " + ", ".join(
            f"{k} {'≤' if k == 'ic_margin' else '≥'} {v:g}" for k, v in result.bound.items())
    console.print(line)
    if result.designs:
        data = [d.to_dict() for d in result.designs]
        console.print("[bold]Ranked designs[/bold]: each a distinct bias network (the "
                      "transistor and the resistors that set IC)")
        for d in data:
            print_lines(console, design_block(d, console.width))
            if show_variants and d.get("free_role"):
                for v in d["variants"]:
                    if v["representative"]:
                        continue
                    console.print(console_text(
                        f"      {d['free_role']} variant {_parts_text(v)}: cost "
                        f"{v['cost']:.4g}/board, VCE ≥ {format_quantity(v['vce_min'], 'V')}, "
                        f"IC margin {100 * v['ic_margin']:.2f} %"), soft_wrap=True,
                        highlight=False)
        free = sorted({d["free_role"] for d in data if d.get("free_role")})
        if free:
            check = ("each re-verified with the same analysis as `stockbias check`"
                     if show_variants else
                     "each passes every limit at every vertex of the tolerance box; the "
                     "part shown is re-verified in full (--variants lists and re-verifies "
                     "every one)")
            console.print(f"{', '.join(free)}: the range counts the stock values that work "
                          f"with the network (the role does not set IC); {check}. --top "
                          "counts networks.")
            if any((d.get("variant_range") or {}).get("count") is None
                   for d in data if d.get("free_role")):
                console.print("'up to': a long range is found from its ends, each end "
                              "checked; the values between them are counted as the search's "
                              "necessary conditions leave them, not each checked "
                              "(--variants checks each).")
        console.print(f"IC window {format_quantity(t.ic_min, 'A')}–"
                      f"{format_quantity(t.ic_max, 'A')}, target {format_quantity(t.ic, 'A')}; "
                      f"margin: {IC_MARGIN_DEFINITION}. Every design was re-verified with the "
                      "same analysis as `stockbias check`.")
        cautions = {c for d in result.designs for c in d.check.cautions}
        for c in sorted(cautions):
            console.print(f"[yellow]Caution:[/yellow] {console_text(c)}")
    else:
        ex = result.explanation
        if ex is not None:
            console.print("[bold red]No design.[/bold red] "
                          + console_text(f"Binding: {ex.binding}. {ex.message}"))
            if ex.closest:
                console.print(CORNER_KEY, style="dim")
            if ex.closest:
                parts = ", ".join(f"{r} {format_quantity(p['value_ohm'], 'ohm')}"
                                  for r, p in ex.closest.get("parts", {}).items())
                console.print(console_text(f"Closest design: {ex.closest.get('topology')}, "
                                           f"{ex.closest.get('transistor')}"
                                           + (f", {parts}" if parts else "")))
            levers = getattr(ex, "levers", None) or ([ex.relaxation] if ex.relaxation else [])
            if levers:
                note = (" (each lever computed: the search re-run with it finds the design "
                        "named)" if any(lv.get("design") for lv in levers) else "")
                console.print(f"[bold]What would help[/bold]{note}:")
                for lever in levers:
                    console.print(f"  • {console_text(lever['text'])}")
    if result.excluded_transistors:
        console.print("Transistors left out: " + console_text("; ".join(
            f"{x['part_id']} ({x['reason']})" for x in result.excluded_transistors)))
    if result.assumptions:
        console.print("Assumptions: " + "; ".join(result.assumptions), style="dim",
                      markup=False)
