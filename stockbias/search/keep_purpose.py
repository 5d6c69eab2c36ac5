"""An existing stage keeps its purpose: limits set from the stage as it stands.

``consolidate`` (each stage of a board with ``[stage.values]``) and ``substitute`` (the
stage given) take the stage as it stands as its own reference.  Its purpose figures come
from the analysis ``check`` runs (:attr:`stockbias.analysis.check.CheckResult.purpose`),
and become per-stage limits of the one limit list
(:func:`stockbias.analysis.constraints.stage_limits`), so that the search, its screens and
the re-verification judge a change by the same rule:

========================  =====================================================  =========
figure                    limit (``KeepPurpose`` default)                        where
========================  =====================================================  =========
voltage gain              ``gain_nominal_min``/``max`` = |gain|·(1 ∓ 10 %)        nominal
input resistance          ``rin_min`` = 80 % of today's worst-case (lowest)       every corner
output swing (peak)       ``swing_pk`` = 90 % of today's worst-case (lowest)      every corner
supply current            ``supply_current_max`` = 125 % of today's worst (highest) every corner
========================  =====================================================  =========

A limit the job itself sets on the same figure stays when it is the stricter one; it is
never relaxed.  Where today's design does not meet one of the job's own purpose limits
(its worst-case swing below ``swing_pk``, say), the record says so and the job's limit
stands.  A figure today's design does not define (a nominal point that is not active, no
swing left at some corner) is not held, and the record says why; a design saturated or
cut off at some corner is no reference for the worst-case figures (input resistance,
swing, supply current), which are then not held either.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..analysis.check import CheckResult
from ..errors import InputError
from ..job import Job, KeepPurpose, Stage
from ..units import format_quantity
from .board_options import StageOptions, _passes, _runs, screen_every_vertex
from .deadline import Deadline

__all__ = [
    "DEFAULT_KEEP",
    "PURPOSE_OPTION",
    "HeldPurpose",
    "change_text",
    "defaults_text",
    "effective_keep",
    "figures_of",
    "held_from_reference",
    "hold_purpose",
    "parse_keep_purpose",
    "screen_options",
]

DEFAULT_KEEP = KeepPurpose()
PURPOSE_OPTION = "--keep-purpose"
#: command-line name → KeepPurpose field
_CLI_NAMES = {"gain": "gain_pct", "rin": "rin_pct", "swing": "swing_pct",
              "current": "supply_current_pct", "supply_current": "supply_current_pct"}
_RANGES = {"gain_pct": (0.0, 100.0), "rin_pct": (0.0, 100.0), "swing_pct": (0.0, 100.0),
           "supply_current_pct": (100.0, 1000.0)}
_OFF = ("off", "false", "no", "none")
#: figure → (label, unit); the order of every table
FIGURE_LABELS = {"gain": ("gain (nominal)", "V/V"), "rin": ("input resistance (worst)", "ohm"),
                 "swing_pk": ("swing (worst, peak)", "V"),
                 "supply_current": ("supply current (worst)", "A")}


def parse_keep_purpose(text: str | None) -> dict[str, float | None]:
    """``"gain=15,rin=70,swing=off"`` → {"gain_pct": 15.0, "rin_pct": 70.0, "swing_pct": None}.

    Percentages of today's figure; ``off`` (or false, no, none) drops that figure.
    """
    out: dict[str, float | None] = {}
    if not text:
        return out
    for item in (p.strip() for p in text.split(",")):
        if not item:
            continue
        name, eq, raw = item.partition("=")
        key = _CLI_NAMES.get(name.strip().lower())
        if not eq or key is None:
            raise InputError("expected NAME=PERCENT or NAME=off with NAME one of gain, rin, "
                             "swing, current", column=PURPOSE_OPTION, text=item)
        raw = raw.strip().removesuffix("%").strip()
        if raw.lower() in _OFF:
            out[key] = None
            continue
        try:
            value = float(raw)
        except ValueError:
            raise InputError("expected a percentage of today's figure or off",
                             column=PURPOSE_OPTION, text=item) from None
        lo, hi = _RANGES[key]
        if not (math.isfinite(value) and lo < value <= hi):
            raise InputError(f"{name.strip()} is a percentage of today's figure: more than "
                             f"{lo:g} and at most {hi:g}", column=PURPOSE_OPTION, text=item)
        out[key] = value
    return out


def effective_keep(stage: Stage, override: dict[str, float | None] | None = None,
                   off: bool = False) -> KeepPurpose | None:
    """The tolerances that hold for ``stage``: defaults, then the file's, then the command
    line's (``override``); None when ``off`` (``--no-keep-purpose``)."""
    if off:
        return None
    keep = stage.keep_purpose or DEFAULT_KEEP
    if override:
        keep = replace(keep, **override)
    return keep


def defaults_text(keep: KeepPurpose | None = DEFAULT_KEEP) -> str:
    """The tolerances in words (stated on every screen)."""
    if keep is None:
        return "not held (--no-keep-purpose)"
    parts = []
    if keep.gain_pct is not None:
        parts.append(f"nominal gain within ±{keep.gain_pct:g} %")
    if keep.rin_pct is not None:
        parts.append(f"input resistance ≥ {keep.rin_pct:g} %")
    if keep.swing_pct is not None:
        parts.append(f"worst-case swing ≥ {keep.swing_pct:g} %")
    if keep.supply_current_pct is not None:
        parts.append(f"supply current ≤ {keep.supply_current_pct:g} %")
    return (", ".join(parts) + " of today's") if parts else "none held"


def _num(x: object) -> float | None:
    if x is None:
        return None
    v = float(x)  # type: ignore[arg-type]
    return None if math.isnan(v) else v


def figures_of(res: CheckResult) -> dict[str, float | None]:
    """The four figures a table shows: nominal gain (signed, V/V), worst-case input
    resistance (ohm), worst-case peak swing (V), worst-case supply current (A)."""
    p = res.purpose
    if p is None:
        return dict.fromkeys(FIGURE_LABELS)
    return {"gain": _num(p["gain"].nominal), "rin": _num(p["rin"].worst),
            "swing_pk": _num(p["swing_pk"].worst),
            "supply_current": _num(p["supply_current"].worst)}


@dataclass
class HeldPurpose:
    """One stage's reference: today's figures, the tolerances, the limits they set, notes."""

    stage: str
    keep: KeepPurpose | None
    before: dict[str, float | None]
    limits: dict[str, float | None] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    after: dict[str, float | None] | None = None

    def to_dict(self) -> dict[str, object]:
        return {"stage": self.stage,
                "keep": None if self.keep is None else dict(vars(self.keep)),
                "before": self.before, "after": self.after, "limits": self.limits,
                "notes": self.notes}


_JOB_PURPOSE = {"swing_saturation": "swing_pk", "swing_cutoff": "swing_pk",
                "gain_min": "gain_min", "gain_max": "gain_max", "rin_min": "rin_min",
                "supply_current_max": "supply_current_max"}


def hold_purpose(stage: Stage, ref: CheckResult, keep: KeepPurpose | None
                 ) -> tuple[Stage, HeldPurpose]:
    """The stage with its purpose limits set from ``ref`` (today's design), and the record.

    Each limit is the stricter of the job's own and the one from today's figure.
    """
    before = figures_of(ref)
    held = HeldPurpose(stage.name, keep, before)
    # the job's own purpose limits that today's design misses: reported, they stand
    for c in ref.constraints:
        if not c.ok and c.name in _JOB_PURPOSE:
            held.notes.append(
                f"today's design misses the job's {_JOB_PURPOSE[c.name]} ({c.description}: "
                f"worst {_fmt(c.worst, c.unit)}, limit {_fmt(c.limit, c.unit)}); the job's "
                "limit stands")
    if keep is None:
        return stage, held
    t, lim = stage.target, stage.limits
    gain, rin, swing, cur = (before["gain"], before["rin"], before["swing_pk"],
                             before["supply_current"])
    tr: dict[str, Any] = {}
    lr: dict[str, Any] = {}
    # a stage saturated or cut off at some corner is no reference for the figures taken over
    # the corners (its current, input resistance and swing there are not a working stage's)
    working = all(c.ok for c in ref.constraints if c.name == "active_region")
    if not working:
        held.notes.append("today's design is saturated or cut off at some corner: its "
                          "worst-case input resistance, swing and supply current are not held")
    if keep.gain_pct is not None:
        if gain is None or gain == 0:
            held.notes.append("today's nominal point does not amplify (not active): its gain "
                              "is not held")
        else:
            g, f = abs(gain), keep.gain_pct / 100
            tr["gain_nominal_min"], tr["gain_nominal_max"] = g * (1 - f), g * (1 + f)
    if keep.rin_pct is not None and working:
        if rin is None or rin <= 0:
            held.notes.append("today's input resistance is not defined at every corner: not "
                              "held")
        else:
            tr["rin_min"] = _stricter_min(t.rin_min, rin * keep.rin_pct / 100)
    if keep.swing_pct is not None and working:
        if swing is None or swing <= 0:
            held.notes.append("today's design has no swing left at some corner (saturated or "
                              "cut off there): its swing is not held")
        else:
            tr["swing_pk"] = _stricter_min(t.swing_pk, swing * keep.swing_pct / 100)
    if keep.supply_current_pct is not None and working and cur is not None and cur > 0:
        new = cur * keep.supply_current_pct / 100
        lr["supply_current_max"] = new if lim.supply_current_max is None else min(
            new, lim.supply_current_max)
    held.limits = {**tr, **lr}
    return replace(stage, target=replace(t, **tr), limits=replace(lim, **lr)), held


def _stricter_min(job_value: float | None, kept: float) -> float:
    return kept if job_value is None else max(job_value, kept)


def _fmt(x: float, unit: str) -> str:
    if unit in ("", "V/V"):
        return f"{x:.3g}{' V/V' if unit else ''}"
    return format_quantity(x, unit)


def held_from_reference(stage: Stage) -> bool:
    """True when ``stage`` carries a nominal-gain band (a limit only a reference sets): its
    options are then screened at every vertex (:func:`screen_options`), since the stage's
    own screens leave the gain to re-verification."""
    return stage.target.gain_nominal_min is not None or stage.target.gain_nominal_max is not None


#: designs screened at once when a deadline is given (it is asked between blocks)
SCREEN_BLOCK = 4096


def screen_options(job: Job, stage: Stage, g: StageOptions,
                   deadline: Deadline | None = None) -> StageOptions:
    """Only the designs of ``g`` that pass every limit at every vertex (purpose limits too).

    A design rejected here fails the full check (``vertex_check`` is exact at the vertex
    it names, and the nominal-gain limit is evaluated by the same code), so this removes
    nothing the verify-and-forbid loop of the board search would keep; it only spares the
    loop a round per failing design.  The nominal-point limits are taken first
    (:func:`.board_options.screen_every_vertex`).  With ``deadline``, the designs are
    screened in blocks and those left when it expires are kept unscreened (sound: the
    loop judges them).
    """
    if deadline is None or g.size == 0:
        return screen_every_vertex(job, stage, g)
    if g.free is None:
        roles = {r: (g.cands[r], g.core[r]) for r in g.core_roles}
        opt = fj = None
    else:
        counts = g.hi - g.lo + 1
        opt = np.repeat(np.arange(g.size), counts)
        fj = np.repeat(g.lo, counts) + np.arange(int(counts.sum())) - np.repeat(
            np.cumsum(counts) - counts, counts)
        roles = {r: (g.cands[r], v[opt]) for r, v in g.core.items()}
        roles[g.free] = (g.cands[g.free], fj)
    n = next(iter(roles.values()))[1].size
    ok = np.ones(n, dtype=bool)
    for a in range(0, n, SCREEN_BLOCK):
        if deadline.expired():
            break
        ok[a:a + SCREEN_BLOCK] = _passes(job, stage, g, {r: (c, ix[a:a + SCREEN_BLOCK])
                                                         for r, (c, ix) in roles.items()})
    if opt is None:
        return replace(g, core={r: v[ok] for r, v in g.core.items()}, lo=g.lo[ok],
                       hi=g.hi[ok])
    crow, lo, hi = _runs(opt[ok], fj[ok])
    return replace(g, core={r: v[crow] for r, v in g.core.items()},
                   lo=lo.astype(np.int64), hi=hi.astype(np.int64))


def change_text(before: float | None, after: float | None, unit: str) -> str:
    """``"−116 → −16.2 V/V (−86 %)"``; "—" where a figure is undefined."""
    def one(x: float | None) -> str:
        if x is None:
            return "—"
        return f"{x:.3g}" if unit == "V/V" else format_quantity(x, unit)

    text = f"{one(before)} → {one(after)}{' V/V' if unit == 'V/V' else ''}"
    if before is not None and after is not None and before != 0:
        change = 100 * (after / before - 1)
        text += f" ({change:+.0f} %)" if round(change) != 0 else " (±0 %)" if change == 0 \
            else f" ({change:+.1g} %)"
    return text
