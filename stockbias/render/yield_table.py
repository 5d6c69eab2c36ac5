"""Terminal rendering of a yield design (`design` with [target] yield_min): what each design
claims and on what evidence, beside the worst-case optimum."""

from __future__ import annotations

from rich.console import Console

from ..inert_text import console_text
from ..job import Job
from .blocks import fill as _fill
from .blocks import print_lines, prose
from .design_table import design_block
from .yield_text import lower_percent, percent_text

__all__ = ["render_yield_design"]


def _pct(x: float) -> str:
    return f"{percent_text(x, 3)} %"


def _low(x: float) -> str:
    """A lower bound, rounded down: it never claims more than the counts support."""
    return f"{lower_percent(x)} %"


def render_yield_design(console: Console, job: Job, result) -> None:
    """Print a :class:`stockbias.search.yield_search.YieldDesignResult`."""
    st = job.stage
    width = max(console.width, 40)
    s = result.stats
    console.print(f"[bold]Yield design[/bold] for stage '{console_text(st.name)}': every "
                  f"board at every supply × ambient extreme, yield ≥ {100 * result.yield_min:g} "
                  f"% shown at {100 * result.confidence:g} % confidence (one-sided "
                  f"Clopper–Pearson lower bound); objectives {', '.join(result.objectives)}")
    status = ("[bold yellow]feasible[/bold yellow] (the best among the candidates searched, "
              "not a proof over the whole shelf)" if result.designs else
              "[bold red]unknown[/bold red] (no candidate shown to meet the target)")
    console.print(f"Status: {status} in {result.seconds:.2f} s on {s['executor']}")
    wc = result.worst_case.designs[0] if result.worst_case.designs else None
    if wc is not None:
        console.print(console_text(
            f"Worst-case optimum for comparison: cost {wc.cost:.4g}/board ({wc.topology}, "
            f"{wc.transistor.part_id}; every board passes at every corner)"))
    else:
        console.print(f"Worst case: no design passes every corner "
                      f"({result.worst_case.status})")
    boxes = "; ".join(f"±{3 * b['resistor_factor']:g}σ resistors, {100 * b['range_fraction']:g} "
                      f"% of hFE/VBE ranges: {b['designs']}" for b in s["boxes"])
    console.print(f"Candidates: {s['candidates']} distinct networks from the worst-case "
                  f"search on {len(s['boxes'])} boxes ({boxes}).")
    screen = f"{s['sampled_candidates']} sampled"
    line = (f"Evidence: {s['proven_without_sampling']} shown without sampling (a design that "
            "passes the full box has yield 1; one that passes a sub-box has yield at least "
            f"the sub-box's probability); {screen}")
    if s["sampled_candidates"]:
        line += (f" — {s['screened_out']} screened out by a one-sided upper bound below the "
                 f"target on 2,000 common boards at {100 * s['screen_confidence_each']:.3g} % "
                 f"each (Bonferroni over {s['sampled_candidates']}), {s['judged']} judged on "
                 f"{result.samples:,} fresh boards each")
    console.print(line + ".")
    for d in result.designs:
        data = d.design.to_dict()
        data["rank"] = d.rank
        for text in design_block(data, width):
            console.print(text, soft_wrap=True, highlight=False)
        mc = d.check.monte_carlo
        items = []
        if d.evidence == "worst case":
            items.append("yield 1: passes every worst-case corner")
        elif d.evidence == "sub-box":
            items.append(f"yield ≥ {_low(d.box_mass)}: passes the sub-box that holds that "
                         "share of boards")
        else:
            j = d.judged
            items.append(f"judged {_pct(j.yield_)} of {j.samples:,} boards (≥ "
                         f"{_low(d.judged_low)})")
        items.append(f"final check {_pct(mc.yield_.yield_)} of {mc.yield_.samples:,} fresh "
                     f"boards (≥ {_low(d.check_low)})")
        fails = [c.name for c in d.check.constraints if not c.ok and c.name != "yield_min"]
        for text in _fill(["yield:", *items], width, "    "):
            console.print(console_text(text), soft_wrap=True, highlight=False)
        if fails:   # wrapped between names: five limits do not fit one item at 80 columns
            print_lines(console, prose("worst case fails " + ", ".join(fails), width,
                                       "    "))
    if result.stats.get("dropped_on_final_check"):
        console.print(console_text("Dropped on the final check: "
                                   + "; ".join(result.stats["dropped_on_final_check"])))
    if not result.designs and result.explanation:
        console.print("[bold red]No design.[/bold red] " + console_text(result.explanation))
    cautions = {c for d in result.designs for c in d.check.cautions}
    for c in sorted(cautions):
        console.print(f"[yellow]Caution:[/yellow] {console_text(c)}")
    if result.assumptions:
        console.print("Assumptions: " + console_text("; ".join(result.assumptions)))
