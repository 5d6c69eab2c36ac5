"""Terminal rendering of a `design` result: status, ranked table, assumptions, failures."""

from __future__ import annotations

from rich.console import Console
from rich.table import Table

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..job import Job
from ..units import format_quantity

__all__ = ["render_design"]

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
    return (f"{format_quantity(rng['min_ohm'], 'ohm')} … "
            f"{format_quantity(rng['max_ohm'], 'ohm')}, {n} values in stock")


def render_design(console: Console, job: Job, result, show_variants: bool = False) -> None:
    """Print a :class:`stockbias.search.design.DesignResult`.

    Each row is one bias network; its free role (RC) shows the representative part and
    the range of stock values that work with the network.  ``show_variants`` adds a row
    per variant under each network.
    """
    st = job.stage
    t = st.target
    console.print(f"[bold]Design[/bold] for stage '{st.name}': {st.topology}, IC "
                  f"{format_quantity(t.ic_min, 'A')}–{format_quantity(t.ic_max, 'A')}, VCE ≥ "
                  f"{format_quantity(t.vce_min, 'V')}, build of {job.build.quantity}; "
                  f"objectives {', '.join(result.objectives)}")
    line = f"Status: {_STATUS.get(result.status, result.status)} in {result.solve_seconds:.2f} s"
    if result.bound:
        line += "; best bound " + ", ".join(f"{k} ≥ {v:g}" for k, v in result.bound.items())
    console.print(line)
    if result.designs:
        data = [d.to_dict() for d in result.designs]
        roles: list[str] = []
        for d in data:
            roles += [r for r in d["parts"] if r not in roles]
        table = Table(title="Ranked designs: each row a distinct bias network (the "
                      "transistor and the resistors that set IC)", title_justify="left")
        for col in ("#", "topology", "transistor", *roles, "cost/board", "parts", "values",
                    "IC worst case", "VCE min", "margin"):
            table.add_column(col)
        for d in data:
            wc = d["worst_case"]
            ic = wc.get("ic", {})
            vce = wc.get("vce", {})
            cells = [str(d["rank"]), d["topology"], f"{d['transistor']['part_id']} "
                     f"({d['polarity']})"]
            for r in roles:
                text = _parts_text(d["parts"][r]) if r in d["parts"] else "absent"
                if r == d.get("free_role") and _range_text(d):
                    text += f"\n({_range_text(d)})"
                cells.append(text)
            cells += [f"{d['cost']:.4g}", str(d["part_count"]), str(d["distinct_values"]),
                      f"{format_quantity(ic.get('min', 0), 'A')}–"
                      f"{format_quantity(ic.get('max', 0), 'A')}",
                      format_quantity(vce.get("min", 0), "V"), f"{100 * d['ic_margin']:.2f} %"]
            table.add_row(*cells)
            if show_variants and d.get("free_role"):
                for v in d["variants"]:
                    if v["representative"]:
                        continue
                    sub = ["", "", f"  {d['free_role']} variant"]
                    for r in roles:
                        sub.append(_parts_text(v) if r == d["free_role"] else "")
                    sub += [f"{v['cost']:.4g}", "", "", "",
                            format_quantity(v["vce_min"], "V"),
                            f"{100 * v['ic_margin']:.2f} %"]
                    table.add_row(*sub)
        console.print(table)
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
        console.print(f"IC window {format_quantity(t.ic_min, 'A')}–"
                      f"{format_quantity(t.ic_max, 'A')}, target {format_quantity(t.ic, 'A')}; "
                      f"margin: {IC_MARGIN_DEFINITION}. Every design was re-verified with the "
                      "same analysis as `stockbias check`.")
        cautions = {c for d in result.designs for c in d.check.cautions}
        for c in sorted(cautions):
            console.print(f"[yellow]Caution:[/yellow] {c}")
    else:
        ex = result.explanation
        if ex is not None:
            console.print(f"[bold red]No design.[/bold red] Binding: {ex.binding}. {ex.message}")
            if ex.closest:
                parts = ", ".join(f"{r} {format_quantity(p['value_ohm'], 'ohm')}"
                                  for r, p in ex.closest.get("parts", {}).items())
                console.print(f"Closest design: {ex.closest.get('topology')}, "
                              f"{ex.closest.get('transistor')}" + (f", {parts}" if parts else ""))
            levers = getattr(ex, "levers", None) or ([ex.relaxation] if ex.relaxation else [])
            if levers:
                console.print("[bold]What would help[/bold] (each lever computed: the search "
                              "re-run with it finds the design named):")
                for lever in levers:
                    console.print(f"  • {lever['text']}")
    if result.excluded_transistors:
        console.print("Transistors left out: " + "; ".join(
            f"{x['part_id']} ({x['reason']})" for x in result.excluded_transistors))
    if result.assumptions:
        console.print("[dim]Assumptions: " + "; ".join(result.assumptions) + "[/dim]")
