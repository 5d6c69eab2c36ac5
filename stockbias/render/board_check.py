"""Terminal rendering of `check BOARD`: one verdict block per stage and a board summary.

Each block fits the console width: it is made of phrases (a part with its value,
a range with its unit) that are kept whole and moved to the next line when they
do not fit, so no value or part id is ever cut.  Active-region figures (gain)
are shown only for a stage whose transistor is active at every corner; a stage
that saturates or cuts off says so with the number of corners.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from rich.console import Console
from rich.text import Text

from ..analysis.check import CheckResult
from ..analysis.constraints import ConstraintResult
from ..assign import ResolvedResistor
from ..inert_text import console_text
from ..job import Job
from ..units import format_quantity
from .yield_text import yield_text

__all__ = ["board_check_payload", "fill_phrases", "limit_sign", "render_board_check"]


def fill_phrases(phrases: Sequence[str], width: int, indent: str = "",
                 sep: str = ", ", hang: str | None = None) -> list[str]:
    """``phrases`` joined by ``sep`` in lines of at most ``width`` characters.

    A phrase is never split: one longer than the line stands alone on its line
    (and is shown whole, past the width).  The first line starts with ``indent``,
    the others with ``hang`` (default: ``indent``).
    """
    lines: list[str] = []
    line = ""
    for i, phrase in enumerate(phrases):
        piece = phrase + (sep.rstrip() if i < len(phrases) - 1 else "")
        if not line:
            line = (indent if not lines else (indent if hang is None else hang)) + piece
        elif len(line) + 1 + len(piece) <= width:
            line = f"{line} {piece}"
        else:
            lines.append(line)
            line = (indent if hang is None else hang) + piece
    if line:
        lines.append(line)
    return lines


def _print(console: Console, lines: Sequence[str], style: str = "") -> None:
    """Lines shown as written: no markup, emoji code or control character is acted on."""
    for line in lines:
        console.print(Text.from_markup(console_text(line), emoji=False, style=style),
                      soft_wrap=True)


def _words(text: str, width: int, hang: str = "  ") -> list[str]:
    """Prose filled to ``width`` at its spaces (a word, a path, is never split); lines
    after the first start with ``hang``."""
    return fill_phrases(text.split(" "), width, sep=" ", hang=hang)


def limit_sign(c: ConstraintResult) -> str:
    """``≥`` for a lower limit (``*_min``, the swings), ``≤`` for an upper one."""
    return "≥" if c.name.endswith("_min") or c.name.startswith("swing_") else "≤"


def _q(value: float, unit: str) -> str:
    if value != value:
        return "n/a"
    if unit in ("", "corners"):
        return f"{value:.3g}"
    if unit == "V/V":
        return f"{value:.3g} V/V"
    if unit == "°C":
        return f"{value:.3g} °C"
    return format_quantity(value, unit)


def _part_phrase(role: str, p: ResolvedResistor) -> str:
    sep = "+" if p.arrangement == "series" else "|"
    ids = sep.join(q.part_id for q in (p.pieces or p.parts) if q.part_id) or "not in stock"
    lo, hi = 100 * p.tol_low, 100 * p.tol_high
    band = f"±{hi:.3g} %" if f"{lo:.3g}" == f"{hi:.3g}" else f"−{lo:.3g}/+{hi:.3g} %"
    return f"{role} {_q(p.value, 'ohm')} {band} {ids}"


def _failure_phrase(c: ConstraintResult, r: CheckResult) -> str:
    if c.name == "active_region":
        wc = r.worst
        return (f"active_region: not active at {wc.non_active_corners} of {wc.n_vertices} "
                f"corners ({', '.join(wc.regions_seen) or 'not active'})")
    worst = _q(c.worst, c.unit)
    if math.isfinite(c.margin):
        by = f"misses by {_q(abs(c.margin), c.unit)}"
    else:
        by = "undefined where not active"
    return f"{c.name}: worst {worst} against {limit_sign(c)} {_q(c.limit, c.unit)}, {by}"


def _stage_lines(r: CheckResult, job: Job, width: int) -> list[tuple[str, str]]:
    """(text, style) lines of one stage's block."""
    t = r.transistor
    st = next((s for s in job.stages if s.name == r.stage), job.stage)
    n_all, failing = len(r.constraints), r.failing
    if failing:
        head = (f"FAIL  stage '{r.stage}': {len(failing)} of {n_all} limits fail at the "
                "worst-case corners")
    else:
        head = f"PASS  stage '{r.stage}': all {n_all} limits hold at every worst-case corner"
    lines = [(x, "bold red" if failing else "bold green")
             for x in _words(head, width, "      ")]
    about = [f"{r.topology}", f"{t.polarity} {t.part_id} (hFE {t.hfe_min:g}–{t.hfe_max:g})",
             *(_part_phrase(role, p) for role, p in r.parts.items())]
    lines += [(x, "") for x in fill_phrases(about, width, "      ")]
    wc = r.worst
    dc = []
    ic, vce = wc.bounds.get("ic"), wc.bounds.get("vce")
    if wc.non_active_corners:
        dc.append(f"not in the active region at {wc.non_active_corners} of "
                  f"{wc.n_vertices} corners ({', '.join(wc.regions_seen)})")
    if ic is not None:
        dc.append(f"IC {_q(ic.min, 'A')} … {_q(ic.max, 'A')} (window "
                  f"{_q(st.target.ic_min, 'A')} … {_q(st.target.ic_max, 'A')})")
    if vce is not None:
        dc.append(f"VCE {_q(vce.min, 'V')} … {_q(vce.max, 'V')}"
                  + (f" (≥ {_q(st.target.vce_min, 'V')})" if st.target.vce_min > 0 else ""))
    gain = wc.bounds.get("gain")
    if gain is not None and not wc.non_active_corners:
        lo, hi = sorted((abs(gain.min), abs(gain.max)))
        dc.append(f"|gain| {lo:.3g} … {hi:.3g} V/V")
    mc = r.monte_carlo
    if mc is not None:
        y = mc.yield_
        dc.append(f"Monte Carlo {yield_text(y.yield_, y.low, y.high, y.samples)}")
    lines += [(x, "") for x in fill_phrases(dc, width, "      ", sep=";")]
    for c in sorted(failing, key=lambda c: c.name):
        lines += [(x, "red") for x in fill_phrases(["✗ " + _failure_phrase(c, r)], width,
                                                   "      ")]
    for w in r.warnings:
        lines += [(x, "yellow") for x in fill_phrases(f"warning: {w}".split(" "), width,
                                                      "      ", sep=" ", hang="        ")]
    return lines


def render_board_check(console: Console, job: Job, results: Sequence[CheckResult],
                       command: str = "") -> None:
    """Print the board-wide check: each stage's verdict block, then the board's summary.

    ``command`` is the command line that shows one stage in full (``stockbias check
    BOARD -i SHELF``); ``--stage NAME`` is added to it in the hint.
    """
    width = max(console.width, 40)
    s, env = job.supply, job.environment
    supply = f"{_q(s.volts, 'V')} ±{s.tolerance_pct:g} %"
    if s.negative_volts is not None:
        supply += f", {_q(s.negative_volts, 'V')} ±{s.vee_tolerance_pct:g} %"
    model = {"constant_vbe": "constant-VBE", "exponential": "exponential"}.get(
        job.search.model, job.search.model)
    intro = (f"Board {job.path}: {len(results)} stages, {supply}, {env.ambient_min_c:g} to "
             f"{env.ambient_max_c:g} °C ambient, {model} model, build of {job.build.quantity}")
    _print(console, _words(intro, width, ""), "bold")
    for r in results:
        for text, style in _stage_lines(r, job, width):
            _print(console, [text], style)
    passed = [r.stage for r in results if r.ok]
    failed = [r.stage for r in results if not r.ok]
    summary = [f"Board: {len(passed)} of {len(results)} stages pass"]
    if failed:
        summary.append("failing: " + ", ".join(f"'{n}'" for n in failed))
    _print(console, fill_phrases(summary, width, sep=";"),
           "bold red" if failed else "bold green")
    cautions: list[str] = []
    for r in results:
        cautions += [c for c in r.cautions if c not in cautions]
    for c in cautions:
        _print(console, _words(f"caution: {c}", width), "yellow")
    assumed: list[str] = []
    for r in results:
        assumed += [a for a in r.assumptions if a not in assumed]
    if assumed:
        _print(console, _words("Assumed (in one stage or more): " + "; ".join(assumed), width))
    _print(console, _words("Every table of one stage (constraints, corners, stability, "
                           "thermal, assumptions): "
                           f"{command or 'stockbias check BOARD'} --stage NAME", width), "dim")


def board_check_payload(job: Job, results: Sequence[CheckResult]) -> dict[str, object]:
    """The `check BOARD --json` object (schema ``board_check``)."""
    return {"file": job.path, "ok": all(r.ok for r in results),
            "stages_passed": sum(r.ok for r in results),
            "stages_failed": [r.stage for r in results if not r.ok],
            "build_quantity": job.build.quantity,
            "stages": [r.to_dict() for r in results]}
