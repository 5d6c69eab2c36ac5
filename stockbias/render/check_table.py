"""Terminal rendering of a `check` result: failures first, units, corners named."""

from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from ..analysis.check import CheckResult
from ..analysis.constraints import IC_MARGIN_DEFINITION, ConstraintResult
from ..inert_text import console_text
from ..job import Job
from ..units import format_quantity

__all__ = ["CORNER_LEGEND", "corner_text", "purpose_rows", "render_check", "render_constraints",
           "render_purpose"]

_UNITS = {"ic": "A", "ib": "A", "ie": "A", "vb": "V", "vc": "V", "ve": "V", "vce": "V",
          "supply_power": "W", "pd": "W", "tj": "°C", "gain": "", "rin": "ohm"}
_LABELS = {"ic": "IC", "ib": "IB", "ie": "IE", "vb": "VB", "vc": "VC", "ve": "VE", "vce": "VCE",
           "supply_power": "supply power", "pd": "PD (transistor)", "tj": "TJ",
           "gain": "gain (V/V)", "rin": "input resistance"}
_MODEL_NAMES = {"constant_vbe": "constant-VBE", "exponential": "exponential (Gummel–Poon)"}
_AXIS_LABELS = {"vcc": "VCC", "vee": "|VEE|", "hfe": "hFE", "vbe": "VBE", "icbo": "ICBO"}


def _q(value: float, unit: str) -> str:
    if unit in ("", "corners"):
        return f"{value:.3g}"
    if unit == "V/V":  # a voltage gain: a plain ratio, no scale prefix
        return f"{value:.3g} V/V"
    return format_quantity(value, unit)


#: What a corner in the tables means (the drift rule and the rail convention), one line.
CORNER_LEGEND = (
    "A corner names each parameter's setting (+ the high end of its range, − the low end, "
    "~ a value inside) and the value the analysis used there: supplies as set, the negative "
    "rail by magnitude (|VEE|+ is the largest magnitude); each resistor with its tolerance "
    "and tempco drift applied (R·(1 ± tol)·(1 + tempco·(T − 25 °C)) at its extreme over the "
    "ambient range, either sign for an unsigned tempco); β = hFE·(T/298.15 K)^XTB, "
    "VBE = VBE(25 °C) − 2 mV/°C·(T − 25 °C) (exponential model: the VBE at the hFE test "
    "current), ICBO doubling every 10 °C, at the device temperature: the ambient, or TJ "
    "where the junction is self-heated.")

_CORNER_UNITS = {"vcc": "V", "vee": "V", "vbe": "V", "icbo": "A"}


def corner_text(corner: dict | None) -> str:
    """A corner with the values used: ``VCC+ 12.6 V, R1− 9.31 kΩ, hFE+ β 342, 55 °C``.

    The sign after a name is the setting (+ high end, − low end, ~ inside); the value
    beside it is the one the analysis used at the corner's device temperature
    (``used``: β(T), VBE(T), ICBO(T); resistors with tolerance and drift).  The
    negative rail is named by magnitude: ``|VEE|+`` is its largest magnitude.
    """
    if not corner:
        return ""
    parts = []
    for axis, item in corner.items():
        setting, value = item["setting"], float(item["value"])
        used = float(item.get("used", value))
        if axis == "junction_c":
            parts.append(f"TJ {used:.4g} °C self-heated")
            continue
        if axis == "ambient_c":
            parts.append(f"{used:.4g} °C" if setting != "interior" else f"TA~{used:.4g} °C")
            continue
        label = _AXIS_LABELS.get(axis, axis)
        mark = {"max": "+", "min": "−"}.get(setting, "~")
        if axis == "hfe":
            parts.append(f"{label}{mark} β {used:.4g}")
        else:
            unit = _CORNER_UNITS.get(axis, "ohm")
            parts.append(f"{label}{mark} {format_quantity(abs(used), unit, digits=4)}")
    return ", ".join(parts)


def shown_in_percent(c: ConstraintResult) -> tuple[float, float, float, str]:
    """A constraint's limit, worst value, margin and unit as the screens show them: the
    yield (a fraction in the result and in JSON) in percent, like every percent key."""
    if c.name == "yield_min":
        return 100 * c.limit, 100 * c.worst, 100 * c.margin, "%"
    return c.limit, c.worst, c.margin, c.unit


def render_constraints(console: Console, constraints: list[ConstraintResult],
                       title: str = "Constraints (failures first)") -> None:
    """The pass/fail table of constraints with margins."""
    table = Table(title=title, title_justify="left")
    for col in ("", "constraint", "limit", "worst", "margin", "at corner"):
        table.add_column(col)
    ordered = sorted(constraints, key=lambda c: (c.ok, c.name))
    for c in ordered:
        sign = "≥" if c.name in ("ic_min", "vce_min", "swing_saturation", "swing_cutoff",
                                 "gain_min", "yield_min", "rin_min",
                                 "divider_ratio_min") else "≤"
        mark = "[green]ok[/green]" if c.ok else "[bold red]FAIL[/bold red]"
        lim, wst, mgn, unit = shown_in_percent(c)
        limit = f"{sign} {_q(lim, unit)}"
        worst = _q(wst, unit) if wst == wst else "n/a"
        margin = _q(mgn, unit) if mgn not in (float("inf"), float("-inf")) \
            else "fails (undefined where not active)"
        table.add_row(mark, console_text(f"{c.name}: {c.description}"), limit, worst, margin,
                      console_text(corner_text(c.corner)))
    console.print(table)


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
    table = Table(title=f"Stage: what it does (mid-band, {p.conditions}; worst case at the "
                        "worst corner)", title_justify="left")
    for col in ("figure", "nominal", "worst case", "limit", "worst corner"):
        table.add_column(col)
    for r in purpose_rows(result):
        unit = " V/V" if r["unit"] == "V/V" else ""
        nominal = r["nominal"] + (unit if r["nominal"] != "n/a" else "")
        limit = console_text(r["limit"]).replace(" FAIL", " [bold red]FAIL[/bold red]")
        table.add_row(r["figure"], nominal, r["worst"] + unit, limit, console_text(r["corner"]))
    console.print(table)
    console.print("  swing = min(VCE − VCE(sat), IC·(RC‖RL)), peak, symmetric; supply current "
                  "= current drawn from the supply (the larger rail current on a split supply)",
                  style="dim")
    if p.defaults:
        console.print(escape("  Assumed for gain and input resistance ([small_signal] not "
                             "given): " + ", ".join(p.defaults) + "; set [small_signal] load "
                             "and re_bypassed to state them"))


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
                  f"{env.ambient_min_c:g} to {env.ambient_max_c:g} °C")
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
    render_constraints(console, result.constraints)
    render_purpose(console, result)

    console.print(f"IC margin {100 * result.ic_margin:.2f} % of the target "
                  f"{_q(result.ic_target, 'A')} ({IC_MARGIN_DEFINITION})")

    nom = result.nominal
    region = str(nom["region"])
    beta = "β n/a" if nom.get("beta") is None else \
        f"β {float(nom['beta']):.3g}"  # type: ignore[arg-type]
    console.print(f"[bold]Nominal Q-point[/bold] ({nom['temperature_c']:g} °C, {beta}, "
                  f"nominal values and supply): region {region.upper()}")
    line = "  ".join(f"{_LABELS[k]} {_q(float(nom[k]), _UNITS[k])}"  # type: ignore[arg-type]
                     for k in ("ic", "ib", "vce", "vb", "vc", "ve", "pd", "supply_power"))
    console.print("  " + line)
    if region == "active":
        console.print(f"  gain {float(nom['gain']):.3g} V/V, input resistance "  # type: ignore[arg-type]
                      f"{_q(float(nom['rin']), 'ohm')}, gm "  # type: ignore[arg-type]
                      f"{_q(float(nom['gm']), 'A')}/V")  # type: ignore[arg-type]
    else:
        console.print(f"  [yellow]Not applicable: {console_text(nom['not_active_reason'])} "
                      "(β, gain, gm, input resistance, RSS spreads, stability factors); the "
                      "voltages and currents above are the real ones.[/yellow]")

    wc = result.worst
    table = Table(title=f"Worst case over {wc.n_vertices} corners (extreme values; maxima of "
                        "products refined inside the tolerance box)", title_justify="left")
    for col in ("quantity", "min", "max", "RSS range", "corner of min", "corner of max"):
        table.add_column(col)
    rows = [*_LABELS, *(f"p_{r}" for r in result.parts)]
    for q in rows:
        b = wc.bounds.get(q)
        if b is None:
            continue
        unit = _UNITS.get(q, "W")
        rss = result.rss.get(q)
        rss_txt = f"{_q(rss['min'], unit)} … {_q(rss['max'], unit)}" \
            if isinstance(rss, dict) else ("n/a" if q in ("ic", "vce") else "")
        label = _LABELS.get(q, f"P {q[2:]}")
        table.add_row(console_text(label), _q(b.min, unit), _q(b.max, unit), rss_txt,
                      console_text(corner_text(b.corner_min)),
                      console_text(corner_text(b.corner_max)))
    console.print(table)
    console.print(CORNER_LEGEND, style="dim")
    if wc.non_active_corners:
        console.print(f"[yellow]{wc.non_active_corners} of {wc.n_vertices} corners are not in "
                      f"the active region ({', '.join(wc.regions_seen)}); e.g. at "
                      f"{console_text(corner_text(wc.non_active_example))}. Gain and input "
                      "resistance are bounded over the active corners only.[/yellow]")
    mc = result.monte_carlo
    if mc is not None:
        y = mc.yield_
        fails = ", ".join(f"{k} {v}" for k, v in mc.failing.items()) or "none"
        console.print(f"[bold]Monte Carlo[/bold]: {y.samples} boards (seed {mc.seed}), each at "
                      f"every supply × ambient extreme: yield {100 * y.yield_:.2f} % "
                      f"(95 % interval {100 * y.low:.2f}–{100 * y.high:.2f} %); failing boards "
                      f"by constraint: {fails}; IC over boards × corners: median "
                      f"{_q(mc.ic.percentile(50), 'A')}, 0.135–99.865 % "
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
                      f"at the hottest corner ({float(th['ambient_at_hottest_corner_c']):.3g} °C "  # type: ignore[arg-type]
                      f"ambient) the self-heated junction settles at "
                      f"{float(th['tj_self_heated_c']):.3g} °C; runaway factor ∂PD/∂TJ·θJA = "  # type: ignore[arg-type]
                      f"{float(th['runaway_factor']):.2g} (must stay below 1)")  # type: ignore[arg-type]
    if result.warnings:
        for w in result.warnings:
            console.print(f"[yellow]warning[/yellow]: {console_text(w)}")
    if result.assumptions:
        console.print("Assumed: " + console_text("; ".join(result.assumptions)))
    for c in result.cautions:
        console.print(f"[bold yellow]caution[/bold yellow]: {console_text(c)}")
