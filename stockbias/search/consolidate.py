"""`consolidate`: fewer resistor lines on an existing board, every stage still in spec.

Starting from a board file whose stages give their transistor and ``[stage.values]``,
find the assignment of stock lines to every resistor role of every stage that
minimises, lexicographically, ``bom_lines`` (distinct lines over the board), then
``changes`` (roles whose part differs from the board's current one), then ``cost``
(the order can be set; ``distinct_values`` and ``part_count`` may be named too),
with every stage meeting its own worst-case targets and the stock shared.

Every stage keeps its purpose (:mod:`.keep_purpose`): the stage as it stands is its
own reference, and by default a change keeps the nominal gain within ±10 %, the
worst-case input resistance at or above 80 %, the worst-case swing at or above 90 % and
the worst-case supply current at or below 125 % of today's figures (per stage in
``[stage.keep_purpose]``, for every stage with ``keep_purpose=``; ``purpose=False``
drops them).  They are limits of the stage like any other: screened in the stage's
options and re-verified with the full check.

Transistors stay as they are (this is about resistor values).  A current part that
is not a usable stock line (a bare value off the shelf, or a line short of one build)
may stay where it is, as a line bought outside the stock; it cannot spread to other
positions.  Roles named in ``keep`` (``ROLE@STAGE``) are held at their current part.

The engine is the board search (:mod:`.board`): the stage's options, one CP-SAT
model for the board, each chosen stage re-verified with the full check.
"""

from __future__ import annotations

import time
from collections.abc import Iterable
from dataclasses import dataclass, field, replace

import numpy as np

from ..analysis.check import analyze_stage, collect_assumptions
from ..assign import ResolvedResistor
from ..errors import InputError
from ..job import OBJECTIVES, Job
from ..parts import Inventory, Resistor, Transistor
from ..selection import fitted_parts
from ..topologies import get_network
from .board import (
    BoardDesign,
    Universe,
    bom_of,
    bom_totals,
    build_board,
    explain_board,
    run_board,
    stage_job,
    universe_of,
)
from .board_model import StageSetup
from .board_options import stage_options
from .candidates import SINGLE, RoleCandidates, _concat, _sorted, _table, build_shelf
from .deadline import Deadline
from .keep_purpose import (
    HeldPurpose,
    defaults_text,
    effective_keep,
    figures_of,
    hold_purpose,
    screen_options,
)

__all__ = ["CONSOLIDATE_OBJECTIVES", "ConsolidateResult", "consolidate", "parse_keep"]

CONSOLIDATE_OBJECTIVES = ("bom_lines", "changes", "cost")


@dataclass
class ConsolidateResult:
    """Before and after of a consolidation (``after`` None when nothing was found)."""

    status: str
    solve_seconds: float
    objectives: tuple[str, ...]
    before_bom: list[dict[str, object]]
    before: dict[str, object]
    before_ok: dict[str, bool]
    after: BoardDesign | None
    bound: dict[str, float] = field(default_factory=dict)
    explanation: dict[str, object] | None = None
    kept: list[str] = field(default_factory=list)
    assumptions: list[str] = field(default_factory=list)
    stats: dict[str, object] = field(default_factory=dict)
    purpose: list[HeldPurpose] = field(default_factory=list)
    purpose_rule: str = ""

    @property
    def found(self) -> bool:
        return self.after is not None

    def to_dict(self) -> dict[str, object]:
        after = self.after.to_dict() if self.after is not None else None
        after_tot = bom_totals(self.after.bom) if self.after is not None else None
        return {
            "status": self.status, "solve_seconds": self.solve_seconds,
            "proven": self.status in ("optimal", "infeasible"),
            "objectives": list(self.objectives), "bound": self.bound,
            "bom_lines_before": self.before["bom_lines"],
            "bom_lines_after": None if after_tot is None else after_tot["bom_lines"],
            "distinct_values_before": self.before["distinct_values"],
            "distinct_values_after": None if after_tot is None else after_tot["distinct_values"],
            "changes": None if self.after is None else self.after.changes,
            "before": {**self.before, "stages_ok": self.before_ok},
            "after": None if after_tot is None else after_tot,
            "stages": None if after is None else after["stages"],
            "bom_before": self.before_bom,
            "bom_after": None if self.after is None else self.after.bom,
            "kept": self.kept, "explanation": self.explanation,
            "assumptions": self.assumptions, "stats": self.stats,
            "purpose_rule": self.purpose_rule,
            "purpose": [p.to_dict() for p in self.purpose],
        }


def _cut_before_search(job: Job, inventory: Inventory, current, objectives, keep, notes,
                       before_ok: dict[str, bool], held: list[HeldPurpose], checked: int,
                       check_s: float, t0: float, rule: str) -> ConsolidateResult:
    """The result of a run whose time limit ended while today's board was being checked
    (``checked`` stages done): nothing searched, status ``unknown``."""
    before_bom = bom_of([(st.name, q, parts) for st, (q, parts) in zip(job.stages, current,
                                                                      strict=True)],
                        job.build.quantity, inventory)
    each = f", each about {check_s:.2g} s" if check_s else ""
    why = (f"the time limit ran out while today's board was being checked ({checked} of "
           f"{len(job.stages)} stages{each}); its figures are what every stage must keep, "
           "so no consolidation was searched")
    return ConsolidateResult(
        status="unknown", solve_seconds=time.monotonic() - t0, objectives=objectives,
        before_bom=before_bom, before=bom_totals(before_bom), before_ok=before_ok,
        after=None, kept=[f"{r}@{s}" for s, r in sorted(keep)],
        assumptions=notes,
        explanation={"reason": why, "suggestion": "raise [search] time_limit_s or "
                     "--time-limit"},
        stats={"prepass_cut": why, "current_checked": checked},
        purpose=held, purpose_rule=rule)


def parse_keep(text: str | Iterable[str] | None, job: Job) -> list[tuple[str, str]]:
    """``"RC@input,RE@driver"`` → [(stage, role)], each checked against the board."""
    if not text:
        return []
    items: list[str] = []
    for chunk in ([text] if isinstance(text, str) else text):
        items += [p.strip() for p in chunk.split(",") if p.strip()]
    out = []
    for item in items:
        role, at, stage = item.partition("@")
        role, stage = role.strip().upper(), stage.strip()
        if not at or not role or not stage:
            raise InputError("expected ROLE@STAGE", column="--keep", text=item)
        st = next((s for s in job.stages if s.name == stage), None)
        if st is None:
            raise InputError(f"no stage named '{stage}'; stages: "
                             f"{', '.join(s.name for s in job.stages)}", column="--keep",
                             text=item)
        if role not in st.values:
            raise InputError(f"stage '{stage}' has no current part for {role}", column="--keep",
                             text=item)
        out.append((stage, role))
    return out


def _current(job: Job, inventory: Inventory
             ) -> list[tuple[Transistor, dict[str, ResolvedResistor]]]:
    """Each stage's current transistor and resolved parts (errors name the stage)."""
    return [fitted_parts(job, st, inventory) for st in job.stages]


def _purpose_rule(job: Job, override: dict[str, float | None] | None, on: bool) -> str:
    """The tolerances in words: one phrase when every stage holds the same, else per stage."""
    texts = {st.name: defaults_text(effective_keep(st, override, not on)) for st in job.stages}
    if len(set(texts.values())) == 1:
        return next(iter(texts.values()))
    return "; ".join(f"{name}: {text}" for name, text in texts.items())


def _virtual_row(line: int, value_id: int, p: ResolvedResistor, ambient: tuple[float, float],
                 part: Resistor) -> RoleCandidates:
    """A candidate row for a current part that is not a stock line (its exact band)."""
    lo, hi = p.band(*ambient)
    drift = float(p.spec(*ambient).drift)
    return _table([p.value], [p.tol], [abs(p.tempco_ppm or 0.0)], [drift], [lo], [hi],
                  [p.rating], [round(part.unit_cost * 1e6)], [1], [line], [-1], [value_id],
                  [-1], [SINGLE])


def consolidate(job: Job, inventory: Inventory, *, keep: Iterable[tuple[str, str]] = (),
                objectives: tuple[str, ...] | None = None, time_limit_s: float | None = None,
                progress=None, keep_purpose: dict[str, float | None] | None = None,
                purpose: bool = True) -> ConsolidateResult:
    """Fewest BOM lines (then changes, then cost) for an existing board (DESIGN §3).

    Parameters
    ----------
    job : Job
        A board file whose stages give ``topology``, ``transistor`` and ``[stage.values]``.
    inventory : Inventory
    keep : iterable of (stage name, role)
        Roles held at their current part.
    objectives : tuple of str, optional
        Lexicographic order (default ``bom_lines, changes, cost``).
    time_limit_s : float, optional
        Wall-clock limit, s (default: the job's ``time_limit_s``).
    keep_purpose : dict, optional
        Tolerances for every stage (``KeepPurpose`` field → % or None), over the file's.
    purpose : bool
        False: no stage's purpose is held (only its worst-case targets).

    Returns
    -------
    ConsolidateResult
        or, when a stage states ``yield_min``, the
        :class:`~stockbias.search.yield_board_result.YieldBoardResult` of
        :func:`~stockbias.search.yield_board.yield_consolidate`.
    """
    if any(s.target.yield_min is not None for s in job.stages):
        # stages with a yield target are judged by Monte Carlo (a YieldBoardResult)
        from .yield_board import yield_consolidate

        return yield_consolidate(job, inventory, keep=keep, objectives=objectives,  # type: ignore[return-value]
                                 time_limit_s=time_limit_s, keep_purpose=keep_purpose,
                                 purpose=purpose, progress=progress)
    t0 = time.monotonic()
    objectives = tuple(objectives or CONSOLIDATE_OBJECTIVES)
    bad = [o for o in objectives if o not in OBJECTIVES or o == "ic_margin"]
    if bad:
        raise InputError(f"consolidation ranks by {', '.join(CONSOLIDATE_OBJECTIVES)}, "
                         "distinct_values or part_count", column="--objectives", text=bad[0])
    limit = job.search.time_limit_s if time_limit_s is None else float(time_limit_s)
    clock = Deadline(limit)                      # one deadline for the whole command
    keep = set(keep)
    current = _current(job, inventory)
    shelf = build_shelf(job, inventory, pairs=False)
    universe: Universe = universe_of(shelf)
    line_of = {r.part_id: i for i, r in enumerate(universe.lines)}
    virtual: dict[tuple, int] = {}
    setups: list[StageSetup] = []
    before_ok: dict[str, bool] = {}
    notes: list[str] = []
    held_stages, held = [], []
    check_s = 0.0                # the longest check of a current stage so far, s
    for i, (st, (q, parts)) in enumerate(zip(job.stages, current, strict=True)):
        if clock.expired() or clock.remaining() < check_s:
            # today's figures are what every stage must keep: without them, no search
            return _cut_before_search(job, inventory, current, objectives, keep, notes,
                                      before_ok, held, i, check_s, t0,
                                      _purpose_rule(job, keep_purpose, purpose))
        t_check = clock.clock()
        res = analyze_stage(stage_job(job, st), st, parts, q, samples=0, seed=job.search.seed)
        check_s = max(check_s, clock.clock() - t_check)
        before_ok[st.name] = res.ok
        st2, record = hold_purpose(st, res, effective_keep(st, keep_purpose, not purpose))
        held_stages.append(st2)
        held.append(record)
    original, job = job, replace(job, stages=tuple(held_stages))
    prepass = clock.share(0.7)                   # options leave time for the board model
    for si, (st, (q, parts)) in enumerate(zip(job.stages, current, strict=True)):
        sj = stage_job(job, st)
        net = get_network(st.topology)
        cands: dict[str, RoleCandidates] = {}
        cur: dict[str, int | None] = {}
        for role in net.roles:
            base = shelf.candidates(role.optional, False)
            p = parts.get(role.name)
            kept = (st.name, role.name) in keep
            if p is None:                         # optional role absent now
                cands[role.name] = base
                cur[role.name] = 0
                continue
            if p.arrangement != "single":           # a pair (halves in stock or not)
                if kept:
                    raise InputError(f"stage '{st.name}': a kept {role.name} must be one part, "
                                     "not a pair", file=job.path, column="--keep",
                                     text=f"{role.name}@{st.name}")
                cands[role.name] = base
                cur[role.name] = None
                notes.append(f"{role.name}@{st.name} is a pair now; consolidation replaces it "
                             "with one stock line")
                continue
            line = line_of.get(p.parts[0].part_id) if p.parts else None
            if line is None:
                part = p.parts[0] if p.parts else p.pieces[0] if p.pieces else Resistor(
                    "", p.value, 100 * p.tol, p.rating)
                vkey = (part.part_id, p.value, p.tol, p.rating)
                if vkey not in virtual:
                    virtual[vkey] = len(universe.lines)
                    universe.lines.append(part)
                    universe.qty.append(None)
                    if p.value not in universe.value_id:
                        universe.value_id[p.value] = len(universe.values)
                        universe.values.append(p.value)
                    why = ("is not a stock part" if not part.part_id
                           else f"has fewer than {job.build.quantity} in stock")
                    notes.append(f"{role.name}@{st.name} ({part.part_id or f'{p.value:g} Ω'}) "
                                 f"{why}: it may stay where it is, bought outside the stock")
                row = _virtual_row(virtual[vkey], universe.value_id[p.value], p,
                                   shelf.ambient_c, part)
                table = row if kept else _sorted(_concat(base, row))
                idx = int(np.flatnonzero((table.line_a == virtual[vkey])
                                         & (table.arrangement == SINGLE))[0])
            else:
                table = base
                idx = int(np.flatnonzero((base.line_a == line) & (base.arrangement == SINGLE))[0])
                if kept:
                    table = base.take(np.array([idx]))
                    idx = 0
            cands[role.name] = table
            cur[role.name] = idx
        opts = stage_options(sj, st, si, st.topology, q, cands, prepass)
        # the screen only spares the board search rounds (it is sound to skip when late)
        if held[si].limits and not prepass.expired():
            opts = screen_options(sj, st, opts, prepass)
        setups.append(StageSetup(st.name, [opts], st.topology, cur))
        if progress is not None:
            progress("pre-pass", (si + 1) / len(job.stages))
    before_bom = bom_of([(st.name, q, parts) for st, (q, parts) in zip(job.stages, current,
                                                                      strict=True)],
                        job.build.quantity, inventory)
    # transistors stay: not limited by the model (the BOM flags a short line)
    status, ranked, values, bound, bm, verified, rstats = run_board(
        job, inventory, setups, universe, objectives, 1, clock, progress,
        limit_transistors=False)
    designs = build_board(job, inventory, setups, universe, status, ranked, values, bm,
                          verified)
    after = designs[0] if designs else None
    if after is not None:
        for record, s in zip(held, after.stages, strict=True):
            record.after = figures_of(s.check)
    result = ConsolidateResult(
        status=status, solve_seconds=time.monotonic() - t0, objectives=objectives,
        before_bom=before_bom, before=bom_totals(before_bom), before_ok=before_ok, after=after,
        bound=bound, kept=[f"{r}@{s}" for s, r in sorted(keep)],
        assumptions=[*notes, "transistors stay as they are; stock is shared across stages "
                     "(uses × build quantity within each line's quantity)",
                     *collect_assumptions(s.check for s in (after.stages if after else []))],
        stats={"options_per_stage": {s.name: sum(g.size for g in s.options) for s in setups},
               **rstats, "resistor_lines": len(shelf.lines), "solver_steps": bm.step_seconds},
        purpose=held, purpose_rule=_purpose_rule(original, keep_purpose, purpose))
    if rstats.get("prepass_cut"):
        result.assumptions.append(str(rstats["prepass_cut"]))
    if rstats.get("verify_cut"):
        result.assumptions.append(str(rstats["verify_cut"]))
    failing = [n for n, ok in before_ok.items() if not ok]
    if failing:
        result.assumptions.append("the current board fails its targets in "
                                  f"{', '.join(failing)}"
                                  + ("; the consolidated one meets them" if after else ""))
    if after is None:
        result.explanation = explain_board(job, inventory, setups, universe, objectives,
                                           status, clock, limit_transistors=False,
                                           verify_cut=rstats.get("verify_cut"))
        if any(h.limits for h in held) and status == "infeasible":
            result.explanation["purpose"] = (
                "every stage must also keep its purpose (" + result.purpose_rule + "); "
                "--keep-purpose or [stage.keep_purpose] loosens a figure, "
                "--no-keep-purpose drops them")
    result.solve_seconds = time.monotonic() - t0
    return result

