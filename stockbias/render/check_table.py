"""Terminal rendering of a `check` result: failures first, units, corners named.

Every table is a list of blocks laid out to the console width (one block per
constraint, per figure of the stage, per worst-case quantity), so the result reads
at 80 columns as at 120 and no value, part id or corner entry is ever cut.
"""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape

from ..analysis.check import CheckResult
from ..analysis.constraints import IC_MARGIN_DEFINITION, ConstraintResult
from ..inert_text import console_text
from ..job import Job
from ..units import format_quantity
from .blocks import fill, item, print_lines, prose
from .corners import CORNER_KEY, CORNER_LEGEND, corner_items, corner_text
from .yield_text import yield_text

__all__ = ["CORNER_LEGEND", "constraint_lines", "corner_lines", "corner_text", "purpose_rows",
           "region_verdict", "render_check", "render_constraints", "render_purpose",
           "shown_in_percent"]

_UNITS = {"ic": "A", "ib": "A", "ie": "A", "vb": "V", "vc": "V", "ve": "V", "vce": "V",
          "supply_power": "W", "pd": "W", "tj": "°C", "gain": "", "rin": "ohm"}
_LABELS = {"ic": "IC", "ib": "IB", "ie": "IE", "vb": "VB", "vc": "VC", "ve": "VE", "vce": "VCE",
           "supply_power": "supply power", "pd": "PD (transistor)", "tj": "TJ",
           "gain": "gain (V/V)", "rin": "input resistance"}
_MODEL_NAMES = {"constant_vbe": "constant-VBE", "exponential": "exponential (Gummel–Poon)"}

_REGION_WORDS = (("active", "active"), ("saturated", "saturated"), ("cutoff", "cut off"))

#: the indent of a block's second and later lines
_PAD = "        "


def _q(value: float, unit: str) -> str:
    if unit in ("", "corners"):
        return f"{value:.3g}"
    if unit == "V/V":  # a voltage gain: a plain ratio, no scale prefix
        return f"{value:.3g} V/V"
    if unit in ("V", "A", "W") and abs(value) < 1e-12:
        value = 0.0  # rounding residue of a solve (a swing of −4 fV is none)
    return format_quantity(value, unit)


def shown_in_percent(c: ConstraintResult) -> tuple[float, float, float, str]:
    """A constraint's limit, worst value, margin and unit as the screens show them: the
    yield (a fraction in the result and in JSON) in percent, like every percent key."""
    if c.name == "yield_min":
        return 100 * c.limit, 100 * c.worst, 100 * c.margin, "%"
    return c.limit, c.worst, c.margin, c.unit


def region_verdict(counts: dict[str, int], n_corners: int) -> str:
    """Where the transistor is at the corners of the tolerance box, in words.

    ``active at 256 of 256 corners``; ``saturated at 64 of 256 corners, active at 192``
    (a fault first).
    """
    said = [(word, counts[key]) for key, word in _REGION_WORDS if counts.get(key)]
    said.sort(key=lambda x: x[0] == "active")
    if not said:
        return f"{n_corners} corners"
    (word, k), rest = said[0], said[1:]
    return ", ".join([f"{word} at {k} of {n_corners} corners",
                      *(f"{w} at {m}" for w, m in rest)])


def corner_lines(corner: dict | None, width: int, indent: str = _PAD,
                 lead: str = "at ") -> list[str]:
    """A corner after ``lead``, one parameter per item, wrapped to ``width``."""
    items = corner_items(corner)
    if not items:
        return []
    items = [f"{x}," for x in items[:-1]] + items[-1:]
    items[0] = lead + items[0]
    return fill([item(x) for x in items], width, indent, gap=" ")


def constraint_lines(c: ConstraintResult, width: int, regions: dict[str, int] | None = None,
                     n_corners: int | None = None) -> list[str]:
    """One constraint as a block of lines of at most ``width`` characters.

    Verdict, name, limit (with ≤ or ≥), worst value and margin; what the limit means;
    the corner of the worst value.  With ``regions`` and ``n_corners`` the active-region
    row reads ``active at 256 of 256 corners`` (or where it saturates or cuts off).
    """
    mark = ("ok  ", "[green]ok[/green]  ") if c.ok else ("FAIL", "[bold red]FAIL[/bold red]")
    if c.name == "active_region" and regions and n_corners:
        text = f"{c.name}: {region_verdict(regions, n_corners)}"
        lines = fill([(f"{mark[0]}  {text}", f"{mark[1]}  {console_text(text)}")], width, "  ")
        return lines + ([] if c.ok else corner_lines(c.corner, width, lead="e.g. at "))
    sign = c.sign
    lim, wst, mgn, unit = shown_in_percent(c)
    worst = _q(wst, unit) if wst == wst else "n/a"
    margin = _q(mgn, unit) if mgn not in (float("inf"), float("-inf")) \
        else "fails (undefined where not active)"
    head = [(f"{mark[0]}  {c.name} {sign} {_q(lim, unit)}",
             f"{mark[1]}  {console_text(c.name)} {sign} {_q(lim, unit)}"),
            item(f"worst {worst}"), item(f"margin {margin}")]
    return fill(head, width, "  ", hang=_PAD) + prose(c.description, width, _PAD) \
        + corner_lines(c.corner, width)


def render_constraints(console: Console, constraints: list[ConstraintResult],
                       title: str = "Constraints (failures first)",
                       regions: dict[str, int] | None = None,
                       n_corners: int | None = None) -> None:
    """The constraints, failures first, each a block with its margin and corner."""
    console.print(f"[bold]{console_text(title)}[/bold]")
    width = max(console.width, 40)
    for c in sorted(constraints, key=lambda c: (c.ok, c.name)):
        print_lines(console, constraint_lines(c, width, regions, n_corners))


#: figure → the limits that bound it (constraint names) and the sign each shows
_FIGURE_LIMITS = {"gain": (("gain_min", "≥"), ("gain_max", "≤")), "rin": (("rin_min", "≥"),),
                  "swing_pk": (("swing_saturation", "≥"),),
                  "supply_current": (("supply_current_max", "≤"),)}


def purpose_rows(result: CheckResult) -> list[dict[str, str]]:
    """The Stage block as text rows: figure, nominal, worst case, limit (with its verdict).

    The worst case of the gain is its |gain| range; of input resistance and swing the
    smallest, of the supply current the largest, each at the worst corner.
    """
    p = result.purpose
    if p is None:
        return []
    by = {c.name: c for c in result.constraints}
    rows = []
    for name, f in p.figures.items():
        unit = "" if f.unit == "V/V" else f.unit

        def show(x: float | None, unit: str = unit) -> str:
            if x is None or x != x:
                return "n/a"
            return f"{x:.3g}" if unit == "" else format_quantity(x, unit)

        if name == "gain":
            worst = f"|gain| {show(f.low)} … {show(f.high)}"
        else:
            worst = ("≥ " if name != "supply_current" else "≤ ") + show(f.worst)
        limits = []
        for cname, sign in _FIGURE_LIMITS[name]:
            c = by.get(cname)
            if c is not None:
                verdict = "ok" if c.ok and (cname != "swing_saturation" or
                                            by["swing_cutoff"].ok) else "FAIL"
                limits.append(f"{sign} {show(c.limit)} {verdict}")
        rows.append({"figure": f.label, "nominal": show(f.nominal), "worst": worst,
                     "limit": ", ".join(limits) or "none set", "unit": f.unit,
                     "corner": corner_text(f.corner)})
    return rows


def render_purpose(console: Console, result: CheckResult) -> None:
    """The Stage block: what the stage does, nominal and at the worst corner."""
    p = result.purpose
    if p is None:
        return
    width = max(console.width, 40)
    console.print(f"[bold]Stage: what it does[/bold] (mid-band, {console_text(p.conditions)}; "
                  "worst case at the worst corner)")
    for r, fig in zip(purpose_rows(result), p.figures.values(), strict=True):
        unit = " V/V" if r["unit"] == "V/V" else ""
        nominal = r["nominal"] + (unit if r["nominal"] != "n/a" else "")
        limit = console_text(r["limit"]).replace(" FAIL", " [bold red]FAIL[/bold red]")
        items = [(r["figure"], f"[bold]{console_text(r['figure'])}[/bold]"),
                 item(f"nominal {nominal}"), item(f"worst case {r['worst']}{unit}"),
                 (f"limit {r['limit']}", f"limit {limit}")]
        print_lines(console, fill(items, width, "  ", hang=_PAD)
                    + corner_lines(fig.corner, width))
    console.print("  swing = min(VCE − VCE(sat), IC·(RC‖RL)), peak, symmetric; supply current "
                  "= current drawn from the supply (the larger rail current on a split supply)",
                  style="dim")
    if p.defaults:
        console.print(escape("  Assumed for gain and input resistance ([small_signal] not "
                             "given): " + ", ".join(p.defaults) + "; set [small_signal] load "
                             "and re_bypassed to state them"))


def _worst_case(console: Console, result: CheckResult) -> None:
    """Each quantity's bounds, its RSS range, and the corner of each bound."""
    wc = result.worst
    width = max(console.width, 40)
    console.print(f"[bold]Worst case over {wc.n_vertices} corners[/bold] (extreme values; "
                  "maxima of products refined inside the tolerance box)")
    for q in [*_LABELS, *(f"p_{r}" for r in result.parts)]:
        b = wc.bounds.get(q)
        if b is None:
            continue
        unit = _UNITS.get(q, "W")
        rss = result.rss.get(q)
        items = [(_LABELS.get(q, f"P {q[2:]}"),
                  f"[bold]{console_text(_LABELS.get(q, f'P {q[2:]}'))}[/bold]"),
                 item(f"{_q(b.min, unit)} … {_q(b.max, unit)}")]
        if isinstance(rss, dict):
            items.append(item(f"RSS {_q(rss['min'], unit)} … {_q(rss['max'], unit)}"))
        elif q in ("ic", "vce"):
            items.append(item("RSS n/a"))
        print_lines(console, fill(items, width, "  ", hang=_PAD)
                    + corner_lines(b.corner_min, width,
                                                               lead="min at ")
                    + corner_lines(b.corner_max, width, lead="max at "))
    console.print(CORNER_LEGEND, style="dim")


def render_check(console: Console, job: Job, result: CheckResult) -> None:
    """Print a `check` result."""
    s = job.supply
    supply = f"{_q(s.volts, 'V')} ±{s.tolerance_pct:g} %"
    if s.negative_volts is not None:
        supply += f", {_q(s.negative_volts, 'V')} ±{s.vee_tolerance_pct:g} %"
    env = job.environment
    t = result.transistor
    console.print(f"[bold]Stage '{console_text(result.stage)}'[/bold]: {result.topology}, "
                  f"{t.polarity} {console_text(t.part_id)} (hFE {t.hfe_min:g}–{t.hfe_max:g}), "
                  f"{_MODEL_NAMES.get(result.model, result.model)} model, {supply}, "
                  f"ambient {env.ambient_min_c:g} to {env.ambient_max_c:g} °C")
    parts = []
    for role, p in result.parts.items():
        ids = [console_text(q.part_id) if q.part_id else "[yellow]NOT IN STOCK[/yellow]"
               for q in (p.pieces or p.parts)]
        ids = ids if p.pieces or p.parts else ["[yellow]NOT IN STOCK[/yellow]"]
        where = f" ({('+' if p.arrangement == 'series' else '|').join(ids)})"
        lo, hi = 100 * p.tol_low, 100 * p.tol_high
        band = f"±{hi:.3g} %" if f"{lo:.3g}" == f"{hi:.3g}" else f"−{lo:.3g}/+{hi:.3g} %"
        parts.append(f"{console_text(role)} = {_q(p.value, 'ohm')} {band}{where}")
    console.print("Parts: " + ", ".join(parts))
    n_fail = len(result.failing)
    n_all = len(result.constraints)
    unstocked = [console_text(role) for role, p in result.parts.items() if not p.in_stock]
    flag = (f" [yellow](with values not in stock: {', '.join(unstocked)})[/yellow]"
            if unstocked else "")
    if n_fail:
        console.print(f"[bold red]FAIL[/bold red]: {n_fail} of {n_all} constraints fail: "
                      + ", ".join(c.name for c in result.failing) + flag)
    else:
        console.print(f"[bold green]PASS[/bold green]: all {n_all} constraints hold at every "
                      "worst-case corner" + flag)
    console.print(CORNER_KEY, style="dim")
    wc = result.worst
    render_constraints(console, result.constraints, regions=wc.corner_regions,
                       n_corners=wc.n_vertices)
    render_purpose(console, result)

    console.print(f"IC margin {100 * result.ic_margin:.2f} % of the target "
                  f"{_q(result.ic_target, 'A')} ({IC_MARGIN_DEFINITION})")

    nom = result.nominal
    region = str(nom["region"])
    beta = "β n/a" if nom.get("beta") is None else \
        f"β {float(nom['beta']):.3g}"  # type: ignore[arg-type]
    console.print(f"[bold]Nominal Q-point[/bold] (ambient {nom['temperature_c']:g} °C, {beta}, "
                  f"nominal values and supply): region {region.upper()}")
    items = [item(f"{_LABELS[k]} {_q(float(nom[k]), _UNITS[k])}")  # type: ignore[arg-type]
             for k in ("ic", "ib", "vce", "vb", "vc", "ve", "pd", "supply_power")]
    print_lines(console, fill(items, max(console.width, 40), "  "))
    if region == "active":
        console.print(f"  gain {float(nom['gain']):.3g} V/V, input resistance "  # type: ignore[arg-type]
                      f"{_q(float(nom['rin']), 'ohm')}, gm "  # type: ignore[arg-type]
                      f"{_q(float(nom['gm']), 'A')}/V")  # type: ignore[arg-type]
    else:
        console.print(f"  [yellow]Not applicable: {console_text(nom['not_active_reason'])} "
                      "(β, gain, gm, input resistance, RSS spreads, stability factors); the "
                      "voltages and currents above are the real ones.[/yellow]")

    _worst_case(console, result)
    if wc.non_active_corners:
        console.print(f"[yellow]{region_verdict(wc.corner_regions, wc.n_vertices)}; e.g. at "
                      f"{console_text(corner_text(wc.non_active_example))}. Gain and input "
                      "resistance are bounded over the active corners only.[/yellow]")
    mc = result.monte_carlo
    if mc is not None:
        y = mc.yield_
        fails = ", ".join(f"{k} {v}" for k, v in mc.failing.items()) or "none"
        console.print(f"[bold]Monte Carlo[/bold] (seed {mc.seed}), each board at every "
                      f"supply × ambient extreme: {yield_text(y.yield_, y.low, y.high, y.samples)}"
                      f"; failing boards by constraint: {fails}; IC over boards × corners: "
                      f"median {_q(mc.ic.percentile(50), 'A')}, 0.135–99.865 % "
                      f"{_q(mc.ic.percentile(0.135), 'A')}–{_q(mc.ic.percentile(99.865), 'A')} "
                      f"(from a histogram, ±{_q(mc.ic.resolution, 'A')})")
    st = result.stability
    if st.get("reason"):
        console.print(f"[bold]Stability[/bold] factors: not applicable "
                      f"({console_text(st['reason'])})")
    else:
        console.print(f"[bold]Stability[/bold] at the nominal point: S_ICBO = "
                      f"{float(st['s_icbo']):.3g}, S_VBE = "  # type: ignore[arg-type]
                      f"{_q(float(st['s_vbe']), 'A')}/V, S_β = "  # type: ignore[arg-type]
                      f"{_q(float(st['s_beta']), 'A')} per unit β")  # type: ignore[arg-type]
    th = result.thermal
    if "tj_self_heated_c" in th:
        source = "from the stock data" if th["theta_ja_from_data"] else \
            "derived from the PD rating"
        console.print(f"[bold]Thermal[/bold]: θJA {float(th['theta_ja']):.3g} °C/W ({source}); "  # type: ignore[arg-type]
                      f"at the hottest corner (ambient "
                      f"{float(th['ambient_at_hottest_corner_c']):.3g} °C) "  # type: ignore[arg-type]
                      f"the self-heated junction settles at "
                      f"{float(th['tj_self_heated_c']):.3g} °C; runaway factor ∂PD/∂TJ·θJA = "  # type: ignore[arg-type]
                      f"{float(th['runaway_factor']):.2g} (must stay below 1)")  # type: ignore[arg-type]
    if result.warnings:
        for w in result.warnings:
            console.print(f"[yellow]warning[/yellow]: {console_text(w)}")
    if result.assumptions:
        console.print("Assumed: " + console_text("; ".join(result.assumptions)))
    for c in result.cautions:
        console.print(f"[bold yellow]caution[/bold yellow]: {console_text(c)}")
