"""Report sections for the commands that change an existing design: consolidation and
substitution.

A consolidation section shows the bill of materials before and after, every part
that changes (stage, role, today's part and value → the new ones) and what each
stage does today → after (gain, input resistance, swing, supply current) with the
limits held from today's figures.  A substitution section shows every stock
transistor's verdict once (a table, not numbered notes) with the rework it needs
and what the stage does with it.  All text from files is escaped
(:func:`stockbias.render.html_blocks.esc`).
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any

from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..units import format_quantity
from .html_blocks import bullet_list, esc, table

__all__ = ["STATUS_TEXT", "consolidation_section", "substitution_section"]

#: What each search status means, in words.
STATUS_TEXT = {
    "optimal": "optimal (proven: no assignment from this stock ranks higher)",
    "feasible": "feasible (time limit reached: best found, not proven optimal)",
    "infeasible": "infeasible (proven: the stock cannot meet every stage at once)",
    "unknown": "unknown (time limit reached before any board was found)",
}


_IDS = re.compile(r"\(([^()]*)\)")


def _ids_whole(text: str) -> str:
    """``text`` escaped, each parenthesised part id kept on one line (never broken at a
    hyphen)."""
    return _IDS.sub(r'<span class="nw">(\1)</span>', esc(text))


def _part_text(part_id: object, value: object, tol_pct: object = None) -> str:
    """``10 kΩ ±5 % (CF-10K)``; a pair's ids joined; "absent" for a role left out."""
    if value is None:
        return "absent"
    ids = "+".join(str(x) for x in part_id) if isinstance(part_id, (list, tuple)) \
        else (part_id or "not in stock")
    tol = f" ±{float(tol_pct):.3g} %" if isinstance(tol_pct, (int, float)) else ""
    return f"{format_quantity(float(value), 'ohm')}{tol} ({ids})"  # type: ignore[arg-type]


def _bom(title: str, bom: Sequence[Mapping[str, Any]], build: int) -> str:
    rows = []
    for r in bom:
        value = ("transistor" if r["kind"] == "transistor"
                 else format_quantity(r["value_ohm"], "ohm"))
        tol = "" if r.get("tolerance_pct") is None else f"{r['tolerance_pct']:g} %"
        stock = "—" if r.get("in_stock") is None else str(r["in_stock"])
        short = bool(r.get("short"))
        stock_cell = (f'<span class="fail">{esc(stock)} (short)</span>' if short
                      else esc(stock))
        rows.append([f'<span class="nw">{esc(r.get("part_id") or "(bought outside the stock)")}'
                     "</span>", esc(value),
                     esc(tol), esc(r["placements"]), esc(r["needed"]), stock_cell,
                     esc(f"{r['unit_cost']:g}"), esc(", ".join(r.get("uses", [])))])
    return (f"<h3>{esc(title)}</h3>"
            + table(["line", "value", "tolerance", "per board", f"for {build}", "in stock",
                     "cost each", "where used (role@stage)"], rows, numeric=(3, 4, 5, 6)))


def _totals(t: Mapping[str, Any]) -> str:
    return (f"{t['bom_lines']} BOM lines ({t['resistor_lines']} resistor lines, "
            f"{t['distinct_values']} values), {t['placements']} placements, cost "
            f"{t['cost']:g} per board")


def _today_parts(bom: Sequence[Mapping[str, Any]]) -> dict[tuple[str, str], list[dict]]:
    """(stage, role) → the stock lines (or outside values) the role uses today."""
    out: dict[tuple[str, str], list[dict]] = {}
    for r in bom:
        if r["kind"] != "resistor":
            continue
        for use in r.get("uses", []):
            role, _, stage = str(use).partition("@")
            out.setdefault((stage, role), []).append(dict(r))
    return out


def _today_text(lines: list[dict]) -> str:
    if not lines:
        return "absent"
    if len(lines) == 1:
        r = lines[0]
        return _part_text(r.get("part_id"), r["value_ohm"], r.get("tolerance_pct"))
    return " and ".join(_part_text(r.get("part_id"), r["value_ohm"], r.get("tolerance_pct"))
                        for r in lines) + " (a pair)"


def change_rows(result: Any) -> list[tuple[str, str, str, str]]:
    """Every part a consolidation changes: (stage, role, today, after) as plain text.

    Today's part comes from the BOM before (where each line is used); the new one from
    the stage's re-verified check.  A stage without changes has one row saying so.
    """
    if result.after is None:
        return []
    today = _today_parts(result.before_bom)
    rows = []
    for s in result.after.stages:
        if not s.changed:
            rows.append((s.name, "", "no change", ""))
            continue
        for role in s.changed:
            p = s.check.parts.get(role)
            after = "absent" if p is None else _part_text(
                p.part_ids if len(p.part_ids) > 1 else (p.part_ids[0] if p.part_ids else None),
                p.value, 100 * p.tol)
            rows.append((s.name, role, _today_text(today.get((s.name, role), [])), after))
    return rows


def _held(limits: Mapping[str, Any]) -> str:
    out = []
    if "gain_nominal_min" in limits:
        out.append(f"|gain| {limits['gain_nominal_min']:.3g} to "
                   f"{limits['gain_nominal_max']:.3g} V/V")
    for key, label, sign, unit in (("rin_min", "input resistance", "≥", "ohm"),
                                   ("swing_pk", "swing", "≥", "V"),
                                   ("supply_current_max", "supply current", "≤", "A")):
        if key in limits:
            out.append(f"{label} {sign} {format_quantity(limits[key], unit)}")
    return "; ".join(out) or "none"


def _purpose_table(title: str, rows: Sequence[tuple[str, dict, dict | None, str]]) -> str:
    """Rows of (name, today's figures, after figures or None, held limits text)."""
    from ..search.keep_purpose import FIGURE_LABELS, change_text

    body = []
    for name, before, after, held in rows:
        cells = [esc(name)]
        for key, (_label, unit) in FIGURE_LABELS.items():
            text = change_text(before.get(key), None if after is None else after.get(key), unit)
            if after is None:
                text = text.split(" →")[0] + (" V/V" if unit == "V/V" else "")
            cells.append(esc(text))
        cells.append(esc(held))
        body.append(cells)
    header = ["", *(label for label, _u in FIGURE_LABELS.values()), "held from today's"]
    return f"<h3>{esc(title)}</h3>" + table(header, body, numeric=(1, 2, 3, 4))


def _status_text(result: Any) -> str:
    """The status in words: the result's own wording where it has one (a consolidation to a
    yield target), else the search status's."""
    return getattr(result, "status_text", None) or STATUS_TEXT.get(result.status, result.status)


def consolidation_section(result: Any, build: int) -> str:
    """The consolidation: status, totals, BOM before and after, the changes per stage and
    each stage's purpose today → after (a :class:`~stockbias.search.consolidate.
    ConsolidateResult`; ``build`` the build quantity)."""
    out = ["<h2>Consolidation</h2>",
           f"<p>Status: <b>{esc(_status_text(result))}</b> in "
           f"{result.solve_seconds:.2f} s; objectives {esc(', '.join(result.objectives))}"
           + (f"; kept as they are: {esc(', '.join(result.kept))}" if result.kept else "")
           + "</p>"]
    failing = [n for n, ok in result.before_ok.items() if not ok]
    out.append(f"<p>Before: {esc(_totals(result.before))}"
               + (f'; <span class="fail">fails its targets in {esc(", ".join(failing))}</span>'
                  if failing else "; every stage meets its targets") + "</p>")
    if result.after is not None:
        from ..search.board import bom_totals

        after = bom_totals(result.after.bom)
        saved = result.before["bom_lines"] - after["bom_lines"]
        out.append(f"<p>After: {esc(_totals(after))}: <b>{saved} BOM line(s) fewer</b>, "
                   f"{result.after.changes} part(s) changed.</p>")
    out.append(_bom("BOM before", result.before_bom, build))
    if result.after is not None:
        out.append(_bom("BOM after", result.after.bom, build))
        rows = [[esc(a), esc(b), _ids_whole(c), _ids_whole(d)]
                for a, b, c, d in change_rows(result)]
        out.append("<h3>What changes, per stage</h3>"
                   + table(["stage", "role", "today", "after"], rows))
        stage_rows = [[esc(s.name), esc(s.topology), esc(s.transistor.part_id),
                       esc(f"{format_quantity(s.check.worst.bounds['ic'].min, 'A')} to "
                           f"{format_quantity(s.check.worst.bounds['ic'].max, 'A')}"),
                       esc(format_quantity(s.check.worst.bounds['vce'].min, 'V')),
                       esc(f"{100 * s.ic_margin:.2f} %"),
                       '<span class="ok">ok</span>' if s.check.ok
                       else '<span class="fail">FAIL</span>'] for s in result.after.stages]
        out.append("<h3>Each stage after, at its worst corner</h3>"
                   + table(["stage", "network", "transistor", "IC", "VCE at least",
                            "IC margin", "check"], stage_rows, numeric=(3, 4, 5))
                   + f"<p class=\"small\">{esc(IC_MARGIN_DEFINITION)}, each stage against "
                     "its own target. Every stage was re-verified with the same analysis as "
                     "<code>stockbias check</code> (its full section follows).</p>")
    purpose = list(result.purpose or [])
    if purpose:
        title = ("What each stage does: today → after" if result.after is not None
                 else "What each stage does today")
        out.append(_purpose_table(title, [(h.stage, h.before, h.after, _held(h.limits))
                                          for h in purpose]))
        notes = [f"Each stage keeps its purpose: {result.purpose_rule}."]
        notes += [f"Stage '{h.stage}': {n}" for h in purpose for n in h.notes]
        out.append(bullet_list(notes))
    ex = result.explanation
    if ex:
        out.append(f"<p class=\"fail\">No board. {esc(ex.get('reason', ''))}</p>")
        if ex.get("purpose"):
            out.append(f"<p>Purpose: {esc(ex['purpose'])}</p>")
    out.append("<h3>Assumptions of the search</h3>" + bullet_list(result.assumptions))
    return "".join(out)


def _rework_text(c: Any, today: Mapping[str, Any]) -> str:
    parts = []
    for role, p in c.changes.items():
        old = today.get(role)
        was = "absent" if old is None else _part_text(
            old.part_ids if len(old.part_ids) > 1 else (old.part_ids[0] if old.part_ids
                                                        else None), old.value, 100 * old.tol)
        now = _part_text(p.part_ids if len(p.part_ids) > 1 else
                         (p.part_ids[0] if p.part_ids else None), p.value, 100 * p.tol)
        parts.append(f"{role}: {was} → {now}")
    return "; ".join(parts)


def substitution_section(result: Any) -> str:
    """Every stock transistor's verdict for the stage, once each, best first, with the
    rework it needs and the stage's purpose with each fitting transistor (a
    :class:`~stockbias.search.substitute.SubstituteResult`)."""
    from ..search.keep_purpose import figures_of

    values = ", ".join(f"{role} = " + _part_text(
        p.part_ids if len(p.part_ids) > 1 else (p.part_ids[0] if p.part_ids else None),
        p.value, 100 * p.tol) for role, p in result.values.items())
    out = ["<h2>Substitution</h2>",
           f"<p>Stage <b>{esc(result.stage)}</b> ({esc(result.topology)}) with today's "
           f"transistor <b>{esc(result.current.part_id)}</b>: {esc(values)}.</p>"]
    rows = []
    for rank, c in enumerate(result.candidates, start=1):
        q = c.transistor
        margin = (f"{100 * c.check.ic_margin:.2f} %" if c.check is not None and c.fixed
                  else "")
        fails = ", ".join(x.name for x in c.drop_in_check.failing) if c.drop_in_check else ""
        if c.ruled_out:
            verdict, rework, cost, why = ("ruled out", "", "", c.ruled_out)
        elif c.drop_in:
            verdict, rework, cost, why = ("drop-in", "none", "0",
                                          "passes every limit as it stands")
        elif c.changes:
            verdict = f"{len(c.changes)} change{'s' if len(c.changes) > 1 else ''}"
            rework, cost = _rework_text(c, result.values), f"{c.added_cost:g}"
            why = f"as it stands fails {fails}" + (
                "" if c.proven else "; time limit: fewer changes not ruled out")
        else:
            verdict, rework, cost, why = ("no fix from stock", "", "",
                                          f"fails {fails}; {c.note}")
        cls = "ok" if c.fixed else "fail"
        rows.append([esc(rank), f'<span class="nw">{esc(q.part_id)}</span> '
                     + esc(f"({q.polarity}, hFE {q.hfe_min:g}–{q.hfe_max:g})"),
                     f'<span class="{cls}">{esc(verdict)}</span>', _ids_whole(rework), esc(cost),
                     esc(margin), esc(why)])
    out.append("<h3>Stock transistors, best first</h3>" + table(
        ["rank", "transistor", "verdict", "least rework from stock (today → new)",
         "added cost per board", "IC margin", "why"], rows, numeric=(0, 4, 5)))
    out.append(f"<p class=\"small\">{esc(IC_MARGIN_DEFINITION)}. A rework is the fewest "
               "resistor changes, then the lowest added cost, then the largest margin; every "
               "verdict is the full worst-case check.</p>")
    held = result.purpose
    if held is not None:
        rows = [(f"today ({result.current.part_id})", held.before, None, _held(held.limits))]
        rows += [(c.transistor.part_id, held.before, figures_of(c.check), "")
                 for c in result.candidates if c.fixed and c.check is not None]
        out.append(_purpose_table("What the stage does: today → with each transistor that "
                                  "fits", rows))
        notes = [f"The stage keeps its purpose: {result.purpose_rule}."]
        notes += [f"Today's stage: {n}" for n in held.notes]
        out.append(bullet_list(notes))
    return "".join(out)
