"""One self-contained HTML report: the job, the stock file, the design(s), the analysis, the plots.

The file stands alone: CSS inline, plots embedded as base64 PNG data URIs, no
scripts and nothing fetched from the network, so it can be mailed, archived
or printed.  Every piece of text from the user's files is escaped.
:func:`render_report` is the entry point every command uses (``check``
today; ``design``, ``substitute`` and ``consolidate`` pass their ranked
designs and their own checks).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from ..analysis.check import CheckResult
from ..analysis.constraints import IC_MARGIN_DEFINITION, ConstraintResult
from ..errors import InputError
from ..job import Job
from ..parts import Inventory
from ..units import format_quantity
from .check_table import CORNER_LEGEND, corner_text, shown_in_percent
from .html_blocks import bullet_list as _list
from .html_blocks import esc as _e
from .html_blocks import figure as _figure
from .html_blocks import quantity as _q
from .html_blocks import table as _table
from .yield_text import interval_text, percent_text

__all__ = ["CAUTION_FOOTER", "constraint_cells", "render_report", "render_report_html"]

CAUTION_FOOTER = ("The cautions above are reminders, not a safety review: follow local "
                  "electrical codes and licensed practice wherever power, heat or mains "
                  "supplies are involved.")

_CSS = """
body { font-family: "DejaVu Sans", Arial, sans-serif; font-size: 10.5pt; color: #111;
       max-width: 1100px; margin: 1.5em auto; padding: 0 1em; }
h1 { font-size: 16pt; margin-bottom: 0.2em; } h2 { font-size: 13pt; margin-top: 1.6em;
  border-bottom: 1px solid #999; } h3 { font-size: 11pt; margin-bottom: 0.3em; }
table { border-collapse: collapse; margin: 0.4em 0 1em; }
th, td { border: 1px solid #bbb; padding: 2px 6px; text-align: left; vertical-align: top; }
th { background: #eee; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.fail { color: #a00; font-weight: bold; } .ok { color: #060; } .nw { white-space: nowrap; }
.badge { display: inline-block; padding: 1px 8px; border: 2px solid; font-weight: bold; }
.caution { border-left: 4px solid #c80; padding: 0.2em 0.6em; background: #fff7e6; }
.small { color: #555; font-size: 9pt; } img { max-width: 100%; height: auto; }
figure { margin: 0.6em 0 1.2em; } figcaption { font-size: 9pt; color: #333; }
code { font-family: "DejaVu Sans Mono", monospace; font-size: 9.5pt; }
@media print { h2 { page-break-after: avoid; } figure, table { page-break-inside: avoid; } }
"""

_UNITS = {"ic": "A", "ib": "A", "ie": "A", "vb": "V", "vc": "V", "ve": "V", "vce": "V",
          "supply_power": "W", "pd": "W", "tj": "°C", "gain": "", "rin": "ohm", "gm": ""}
_LABELS = {"ic": "IC", "ib": "IB", "ie": "IE", "vb": "VB", "vc": "VC", "ve": "VE", "vce": "VCE",
           "supply_power": "supply power", "pd": "PD (transistor)", "tj": "TJ",
           "gain": "gain (V/V)", "rin": "input resistance", "gm": "gm (A/V)"}


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("stockbias")
    except PackageNotFoundError:
        return "(version unknown)"


def _value_text(value: object) -> str:
    if isinstance(value, float):
        return "none" if math.isinf(value) else f"{value:.6g}"
    if isinstance(value, (tuple, list)):
        return ", ".join(str(v) for v in value)
    return "not set" if value is None else str(value)


_SETTING_UNITS = {"volts": "V", "negative_volts": "V", "load": "ohm", "ic_min": "A",
                  "ic_max": "A", "vce_min": "V", "swing_pk": "V", "supply_power_max": "W",
                  "time_limit_s": "s", "rin_min": "ohm", "supply_current_max": "A",
                  "ic_set": "A"}


def _setting(key: str, value: object) -> str:
    if key == "yield_min" and isinstance(value, float):  # a fraction inside, a percent shown
        return format_quantity(100 * value, "%", digits=4)
    unit = _SETTING_UNITS.get(key)
    if unit and isinstance(value, float) and math.isfinite(value):
        return format_quantity(value, unit, digits=4)
    return _value_text(value)


def _job_section(job: Job) -> str:
    """The job as read, compactly: the shared settings that are set, then one row per stage
    with the targets and limits any stage sets (empty cells: not set)."""
    rows = []
    for section in ("supply", "environment", "small_signal", "build", "search"):
        for key, value in dataclasses.asdict(getattr(job, section)).items():
            if value is None or key == "stated":
                continue
            rows.append([_e(f"[{section}] {key}"), _e(_setting(key, value))])
    columns: list[tuple[str, str]] = []
    for part in ("target", "limits"):
        for key in dataclasses.asdict(getattr(job.stages[0], part)):
            if any(getattr(getattr(st, part), key) is not None for st in job.stages):
                columns.append((part, key))
    stage_rows = []
    for st in job.stages:
        cells = [_e(st.name), _e(st.topology), _e(st.transistor or "")]
        for part, key in columns:
            value = getattr(getattr(st, part), key)
            cells.append("" if value is None else _e(_setting(key, value)))
        cells.append(_e(", ".join(f"{r}={v}" for r, v in st.values.items())))
        stage_rows.append(cells)
    header = ["stage", "topology", "transistor", *(key for _p, key in columns), "values"]
    return (f"<h2>Job as read</h2><p>File <code>{_e(job.path)}</code>, {len(job.stages)} "
            "stage(s). Settings that are set (°C and percent where the key says so; "
            "limits.tj_max empty: each transistor's own):</p>"
            + _table(["setting", "value"], rows)
            + _table(header, stage_rows))


def _stock_section(inv: Inventory) -> str:
    return (f"<h2>Stock file</h2><p><code>{_e(inv.path)}</code><br>SHA-256 "
            f"<code>{_e(inv.sha256)}</code><br>{len(inv.resistors)} resistor lines, "
            f"{len(inv.transistors)} transistor lines"
            + (f"; columns kept but not used: {_e(', '.join(inv.extra_columns))}"
               if inv.extra_columns else "") + "</p>")


def _purpose_cells(purpose: object) -> list[str]:
    """A design's gain (nominal), input resistance, swing and supply current (worst), as
    escaped cells; empty where the design carries no figures."""
    if not isinstance(purpose, Mapping):
        return [""] * 4
    out = []
    for key, unit, side in (("gain", "", "nominal"), ("rin", "ohm", "worst"),
                            ("swing_pk", "V", "worst"), ("supply_current", "A", "worst")):
        fig = purpose.get(key)
        value = fig.get(side) if isinstance(fig, Mapping) else None
        text = "n/a" if not isinstance(value, (int, float)) else (
            f"{value:.3g} V/V" if key == "gain" else _q(value, unit))
        out.append(_e(text))
    return out


def _designs_section(designs: Sequence[Mapping[str, Any]]) -> str:
    rows = []
    for d in designs:
        parts = []
        for role, p in (d.get("parts") or {}).items():
            pid = p.get("part_id") if isinstance(p, Mapping) else None
            if isinstance(pid, list):
                sep = "+" if p.get("arrangement") == "series" else "|"
                pid = sep.join(str(x) for x in pid)
            value = p.get("value_ohm") if isinstance(p, Mapping) else None
            parts.append(f"{role} = {_q(value, 'ohm')} ({pid or 'not in stock'})")
        tr = d.get("transistor") or {}
        ok = d.get("ok")
        mark = "" if ok is None else ('<span class="ok">ok</span>' if ok
                                      else '<span class="fail">FAIL</span>')
        cost = d.get("cost")
        margin = d.get("ic_margin")
        rows.append([_e(d.get("rank", "")), _e(d.get("topology", "")),
                     _e(tr.get("part_id", "") if isinstance(tr, Mapping) else ""),
                     _e("; ".join(parts)),
                     _e(f"{cost:.4g}" if isinstance(cost, (int, float)) else ""),
                     _e(d.get("part_count", "")),
                     _e(f"{100 * margin:.2f} %" if isinstance(margin, (int, float)) else ""),
                     *_purpose_cells(d.get("purpose")), mark])
    html_out = "<h2>Ranked designs</h2>" + _table(
        ["rank", "topology", "transistor", "parts", "cost per board", "parts per board",
         "IC margin", "gain (nominal)", "input resistance (worst)", "swing (worst)",
         "supply current (worst)", "check"], rows, numeric=(0, 4, 5, 6, 7, 8, 9, 10)) + \
        f"<p class=\"small\">{_e(IC_MARGIN_DEFINITION)}.</p>"
    try:
        from .plots import design_margin_figure, figure_bytes

        png = figure_bytes(design_margin_figure(designs), "png")
        html_out += _figure(png, "Cost per board against the worst-case IC margin")
    except InputError:
        pass  # no design carries IC margins: nothing to plot
    return html_out


def constraint_cells(c: ConstraintResult, r: CheckResult) -> tuple[str, str, str]:
    """A constraint's limit (with ≥ or ≤, as the terminal shows it), worst value and margin
    as plain text; the active-region row in words (corners counted), not as numbers."""
    if c.name == "active_region":
        n, bad = r.worst.n_vertices, r.worst.non_active_corners
        if bad:
            seen = " or ".join(x.replace("cutoff", "cut off") for x in r.worst.regions_seen
                               if x != "active") or "not active"
            worst = (f"{seen} at {bad} of {n} corners" if bad <= n else
                     f"{seen} at {bad} of the corners and boundary points checked")
        else:
            worst = f"active at {n} of {n} corners"
        return "active at every corner", worst, "" if c.ok else f"{bad} corner(s) outside"
    lim, wst, mgn, unit = shown_in_percent(c)   # the yield in percent, like the screens
    worst = _q(wst, unit) if wst == wst else "n/a"
    margin = _q(mgn, unit) if math.isfinite(mgn) else "fails (undefined where not active)"
    return f"{c.sign} {_q(lim, unit)}", worst, margin


def _purpose_section(r: CheckResult) -> str:
    """The Stage block: gain, input resistance, swing and supply current, nominal and worst."""
    from .check_table import purpose_rows

    if r.purpose is None:
        return ""
    rows = []
    for row in purpose_rows(r):
        unit = " V/V" if row["unit"] == "V/V" else ""
        limit = _e(row["limit"]).replace(" ok", ' <span class="ok">ok</span>').replace(
            " FAIL", ' <span class="fail">FAIL</span>')
        rows.append([_e(row["figure"]), _e(row["nominal"] + unit), _e(row["worst"] + unit),
                     limit, _e(row["corner"])])
    return (f"<h3>Stage: what it does (mid-band, {_e(r.purpose.conditions)})</h3>"
            + _table(["figure", "nominal", "worst case", "limit", "worst corner"], rows,
                     numeric=(1, 2))
            + "<p class=\"small\">swing = min(VCE − VCE(sat), IC·(RC‖RL)), peak, symmetric; "
              "supply current = current drawn from the supply (the larger rail current on a "
              "split supply).</p>")


def _check_section(heading: str, job: Job, r: CheckResult, plots: bool) -> str:
    t = r.transistor
    badge = ('<span class="badge ok">PASS</span>' if r.ok
             else f'<span class="badge fail">FAIL: {len(r.failing)} of '
                  f'{len(r.constraints)} constraints</span>')
    out = [f"<h2>{_e(heading)}</h2>",
           f"<p>{badge} Stage <b>{_e(r.stage)}</b>: {_e(r.topology)}, {_e(t.polarity)} "
           f"<b>{_e(t.part_id)}</b> (hFE {t.hfe_min:g}–{t.hfe_max:g}, VCEO "
           f"{_e(_q(t.vceo_max, 'V'))}, PD {_e(_q(t.pd_max_w, 'W'))}), {_e(r.model)} model.</p>"]
    rows = []
    for role, p in r.parts.items():
        sep = "+" if p.arrangement == "series" else "|"
        ids = sep.join(p.part_ids) or "not in stock"
        locations = ", ".join(x.location for x in p.parts if x.location)
        rows.append([_e(role), _e(_q(p.value, "ohm")), _e(f"±{100 * p.tol:.3g} %"),
                     _e(ids), _e(p.arrangement), _e(_q(p.rating, "W")), _e(locations)])
    rows.append(["Q", "", "", _e(t.part_id), "", _e(_q(t.pd_max_w, "W")), _e(t.location)])
    out.append("<h3>Parts</h3>" + _table(
        ["role", "value", "tolerance", "part id(s)", "arrangement", "rating", "location"],
        rows, numeric=(1,)))

    nom = r.nominal
    rows = [[_e(_LABELS[k]), _e(_q(nom.get(k), _UNITS[k]))]
            for k in ("ic", "ib", "vce", "vb", "vc", "ve", "pd", "supply_power", "gain", "rin")
            if k in nom]
    reason = nom.get("not_active_reason")
    out.append(f"<h3>Nominal Q-point</h3><p>{_e(nom.get('temperature_c'))} °C, β "
               f"{_e(_q(nom.get('beta'), ''))}, nominal values and supply; region "
               f"<b>{_e(nom.get('region'))}</b></p>"
               + (f"<p class=\"fail\">Not applicable: {_e(reason)} (β, gain, gm, input "
                  "resistance, RSS spreads, stability factors); the voltages and currents "
                  "are the real ones.</p>" if reason else "")
               + _table(["quantity", "value"], rows, numeric=(1,)))
    st = r.stability
    if st.get("reason"):
        out.append(f"<p>Stability factors: not applicable ({_e(st['reason'])}).</p>")
    else:
        out.append(f"<p>Stability at the nominal point: S_ICBO {_e(_q(st.get('s_icbo'), ''))}, "
                   f"S_VBE {_e(_q(st.get('s_vbe'), 'A'))}/V, S_β "
                   f"{_e(_q(st.get('s_beta'), 'A'))} per unit β.</p>")

    rows = []
    for c in sorted(r.constraints, key=lambda c: (c.ok, c.name)):
        mark = '<span class="ok">ok</span>' if c.ok else '<span class="fail">FAIL</span>'
        limit, worst, margin = constraint_cells(c, r)
        rows.append([mark, _e(c.name), _e(c.description), _e(limit), _e(worst), _e(margin),
                     _e(corner_text(c.corner))])
    out.append("<h3>Constraints at the worst corner (failures first)</h3>" + _table(
        ["", "constraint", "what", "limit", "worst", "margin", "at corner"], rows,
        numeric=(3, 4, 5)))
    out.append(_purpose_section(r))
    out.append(f"<p>IC margin <b>{100 * r.ic_margin:.2f} %</b> of the target "
               f"{_e(_q(r.ic_target, 'A'))} ({_e(IC_MARGIN_DEFINITION)}).</p>")

    wc = r.worst
    rows = []
    for q in [*_LABELS, *(f"p_{role}" for role in r.parts)]:
        b = wc.bounds.get(q)
        if b is None:
            continue
        unit = _UNITS.get(q, "W")
        rows.append([_e(_LABELS.get(q, f"P {q[2:]}")), _e(_q(b.min, unit)),
                     _e(_q(b.max, unit)), _e(corner_text(b.corner_min)),
                     _e(corner_text(b.corner_max))])
    out.append(f"<h3>Worst case over {wc.n_vertices} corners</h3>"
               f"<p class=\"small\">{_e(CORNER_LEGEND)}</p>"
               + _table(["quantity", "min", "max", "corner of min", "corner of max"], rows,
                        numeric=(1, 2)))
    if wc.non_active_corners:
        out.append(f"<p class=\"fail\">{wc.non_active_corners} of {wc.n_vertices} corners "
                   f"are not in the active region ({_e(', '.join(wc.regions_seen))}).</p>")
    mc = r.monte_carlo
    if mc is not None:
        y = mc.yield_
        fails = ", ".join(f"{k} {v}" for k, v in mc.failing.items()) or "none"
        out.append(f"<h3>Monte Carlo</h3><p>{y.samples} boards (seed {mc.seed}), each at every "
                   f"supply × ambient extreme: yield <b>{percent_text(y.yield_)} %</b> "
                   f"({interval_text(y.low, y.high)}); failing boards by "
                   f"constraint: {_e(fails)}</p>")
    if plots:
        from .plots import figure_bytes, ic_histogram_figure, qpoint_figure

        out.append("<h3>Plots</h3>")
        out.append(_figure(figure_bytes(qpoint_figure(r, job), "png"),
                           "Output characteristic: DC load lines, Q-points at the worst-case "
                           "corners and of the Monte Carlo boards, and the limits"))
        if mc is not None:
            out.append(_figure(figure_bytes(ic_histogram_figure(r, job), "png"),
                               "Monte Carlo collector current against the target window"))
    out.append("<h3>Assumptions</h3>" + _list(r.assumptions))
    out.append("<h3>Warnings</h3>" + _list(r.warnings))
    out.append("<h3>Cautions</h3>" + _list(r.cautions, "caution"))
    return "".join(out)


def render_report_html(*, title: str, job: Job | None = None,
                       inventory: Inventory | None = None,
                       checks: Sequence[tuple[str, CheckResult]] = (),
                       designs: Sequence[Mapping[str, Any]] | None = None,
                       notes: Sequence[str] = (), command: str = "", plots: bool = True,
                       generated: datetime | None = None, consolidation: Any = None,
                       substitution: Any = None, assumptions: Sequence[str] = ()) -> str:
    """The report as one HTML document (see :func:`render_report`)."""
    when = (generated or datetime.now()).strftime("%Y-%m-%d %H:%M")
    body = [f"<h1>{_e(title)}</h1>",
            f"<p class=\"small\">stockbias {_e(_version())}, {_e(when)}"
            + (f"; command <code>{_e(command)}</code>" if command else "") + "</p>"]
    cautions: list[str] = []
    for _, r in checks:
        cautions += [c for c in r.cautions if c not in cautions]
    if cautions:
        body.append("<h2>Cautions</h2>" + _list(cautions, "caution"))
    if notes:
        body.append("<h2>Notes</h2>" + _list(list(notes)))
    if consolidation is not None:
        from .report_changes import consolidation_section

        if job is None:
            raise ValueError("a consolidation report needs the job")
        body.append(consolidation_section(consolidation, job.build.quantity))
    if substitution is not None:
        from .report_changes import substitution_section

        body.append(substitution_section(substitution))
    if designs is not None:
        body.append(_designs_section(designs) if designs else
                    "<h2>Ranked designs</h2><p class=\"fail\">No design meets the job.</p>")
    if assumptions:
        body.append("<h3>Assumptions of the search</h3>" + _list(list(assumptions)))
    for heading, r in checks:
        if job is None:
            raise ValueError("a report with checks needs the job")
        body.append(_check_section(heading, job, r, plots))
    if job is not None:
        body.append(_job_section(job))
    if inventory is not None:
        body.append(_stock_section(inventory))
    body.append(f"<hr><p class=\"small\">{_e(CAUTION_FOOTER)}</p>")
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(title)}</title><style>{_CSS}</style></head><body>"
            + "\n".join(body) + "</body></html>\n")


def render_report(path: str | Path, *, title: str, job: Job | None = None,
                  inventory: Inventory | None = None,
                  checks: Sequence[tuple[str, CheckResult]] = (),
                  designs: Sequence[Mapping[str, Any]] | None = None,
                  notes: Sequence[str] = (), command: str = "", plots: bool = True,
                  consolidation: Any = None, substitution: Any = None,
                  assumptions: Sequence[str] = ()) -> Path:
    """Write the HTML report.

    Parameters
    ----------
    path : str or Path
        Output file (``.html``).
    title : str
        Heading of the report.
    job : Job, optional
        The job (its file name and every setting are listed).
    inventory : Inventory, optional
        The stock file used (name and SHA-256).
    checks : sequence of (heading, CheckResult)
        Analysed stages, each with parts, nominal point, constraints, worst case,
        Monte Carlo, plots, assumptions, warnings and cautions.
    designs : sequence of dict, optional
        Ranked designs as ``design`` returns them in JSON (a table, and the cost
        against margin plot).
    notes : sequence of str
        Extra lines shown near the top.
    command : str
        The command line that made the report.
    plots : bool
        Embed the plots of each check.
    consolidation : ConsolidateResult, optional
        A consolidation: the BOM before and after, the changes per stage and each
        stage's purpose today → after (:mod:`stockbias.render.report_changes`).
    substitution : SubstituteResult, optional
        A substitution: every stock transistor's verdict, its rework and the stage's
        purpose with it.
    assumptions : sequence of str
        What a search assumed (its defaults and its checks' assumptions, each once).

    Returns
    -------
    Path
        The file written.
    """
    text = render_report_html(title=title, job=job, inventory=inventory, checks=checks,
                              designs=designs, notes=notes, command=command, plots=plots,
                              consolidation=consolidation, substitution=substitution,
                              assumptions=assumptions)
    path = Path(path)
    try:
        path.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the report: {exc.strerror}", file=str(path),
                         column="--report") from None
    return path
