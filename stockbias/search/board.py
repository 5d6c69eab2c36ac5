"""Boards: several stages designed together from one shared stock (DESIGN §2, §3).

Data flow
    board job → per stage, the one-stage job and its candidate tables → the stage's
    options (:mod:`.board_options`: every design the pre-pass cannot reject, as cores ×
    runs of the free role) → one CP-SAT model for the whole board (:mod:`.board_model`:
    one option per stage, stock shared, BOM lines and values counted across the board)
    → lexicographic solve → each chosen stage re-verified with
    :func:`stockbias.analysis.check.analyze_stage` (the path ``check`` uses); a stage
    design that fails is forbidden and the board is solved again → the next rank is
    found with a no-good on the board already ranked.

What is proven
    The options of a stage contain every design that passes the full check (each
    rejection is exact at a vertex), the model is solved to proven optimality at every
    lexicographic step, and what is returned passes the full check, so ``optimal``
    means no board assignment from this stock ranks above it.  ``ic_margin`` is not
    ranked across a board (it is reported per stage).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from ..analysis.check import CheckResult, analyze_stage, collect_assumptions
from ..analysis.constraints import ic_margin
from ..assign import ResolvedResistor
from ..job import Job, Stage, stage_key_error
from ..parts import Inventory, Resistor, Transistor
from ..topologies import get_network
from .board_model import BoardModel, Choice, LineInfo, StageSetup
from .board_options import StageOptions, stage_options
from .candidates import Shelf, build_shelf, micro, stage_networks, usable_transistors
from .deadline import Deadline
from .keep_purpose import held_from_reference, screen_options
from .prepass import PLANS, vertex_check

__all__ = [
    "BOARD_OBJECTIVES",
    "BoardDesign",
    "BoardResult",
    "BoardStage",
    "design_board",
    "run_board",
    "stage_job",
]

BOARD_OBJECTIVES = ("cost", "part_count", "distinct_values", "bom_lines", "changes")
MAX_REVERIFY_ROUNDS = 400
Progress = Callable[[str, float], None]


def stage_job(job: Job, stage: Stage) -> Job:
    """The one-stage job of a board stage (shared sections, this stage)."""
    return replace(job, stages=(stage,))


@dataclass(frozen=True)
class BoardStage:
    """One stage of a ranked board: its network, transistor, parts and full check."""

    name: str
    topology: str
    transistor: Transistor
    check: CheckResult
    changed: dict[str, dict[str, Any]] = field(default_factory=dict)
    ic_margin: float = 0.0

    def to_dict(self) -> dict[str, object]:
        c = self.check.to_dict()
        parts = {}
        for role, p in self.check.parts.items():
            ids: object = p.part_ids[0] if len(p.parts) == 1 else (p.part_ids or None)
            parts[role] = {"part_id": ids, "value_ohm": p.value, "tolerance_pct": 100 * p.tol}
        return {"name": self.name, "topology": self.topology,
                "transistor": {"part_id": self.transistor.part_id,
                               "polarity": self.transistor.polarity},
                "parts": parts,
                "absent": [r for r in get_network(self.topology).optional_roles
                           if r not in parts],
                "ok": self.check.ok, "ic_margin": self.ic_margin,
                "changed": self.changed,
                "worst_case": c["worst_case"], "constraints": c["constraints"],
                "nominal": c["nominal"], "purpose": c.get("purpose"),
                "warnings": self.check.warnings,
                "cautions": self.check.cautions}


def ic_margin_of(res: CheckResult, stage: Stage) -> float:
    """Smallest distance of the worst-case IC to the window, as a fraction of the target."""
    t = stage.target
    b = res.worst.bounds["ic"]
    return float(ic_margin(b.min, b.max, t.ic_min, t.ic_max, t.ic))


@dataclass(frozen=True)
class BoardDesign:
    """One ranked board: the stages and the board-wide objective values."""

    rank: int
    stages: list[BoardStage]
    cost: float
    cost_micro: int
    part_count: int
    distinct_values: int
    bom_lines: int
    changes: int
    bom: list[dict[str, Any]]

    def to_dict(self) -> dict[str, object]:
        return {"rank": self.rank, "cost": self.cost, "cost_micro": self.cost_micro,
                "part_count": self.part_count, "distinct_values": self.distinct_values,
                "bom_lines": self.bom_lines, "changes": self.changes,
                "stages": [s.to_dict() for s in self.stages], "bom": self.bom}


@dataclass
class BoardResult:
    """What :func:`design_board` (and consolidation) returns."""

    status: str
    solve_seconds: float
    objectives: tuple[str, ...]
    designs: list[BoardDesign]
    bound: dict[str, float] = field(default_factory=dict)
    explanation: dict[str, object] | None = None
    stats: dict[str, object] = field(default_factory=dict)
    assumptions: list[str] = field(default_factory=list)

    @property
    def found(self) -> bool:
        return bool(self.designs)

    def to_dict(self) -> dict[str, object]:
        return {"status": self.status, "solve_seconds": self.solve_seconds,
                "objectives": list(self.objectives),
                "proven": self.status in ("optimal", "infeasible"), "bound": self.bound,
                "designs": [d.to_dict() for d in self.designs],
                "explanation": self.explanation, "assumptions": self.assumptions,
                "stats": self.stats}


# --- the engine shared by design BOARD and consolidate -----------------------------
@dataclass
class Universe:
    """Resistor lines the board may take (stock lines, then parts from outside the stock)."""

    lines: list[Resistor]
    qty: list[int | None]
    values: list[float]
    value_id: dict[float, int]


def universe_of(shelf: Shelf) -> Universe:
    vals = [float(v) for v in shelf.values]
    return Universe(list(shelf.lines), [r.qty for r in shelf.lines], vals,
                     {v: i for i, v in enumerate(vals)})


def board_objectives(job: Job) -> tuple[tuple[str, ...], list[str]]:
    """The job's objectives that rank a board, and a note for those left out."""
    notes = []
    objs = tuple(o for o in job.search.objectives if o in BOARD_OBJECTIVES)
    if "ic_margin" in job.search.objectives:
        notes.append("ic_margin is not ranked across a board; each stage's margin is reported")
    return objs or ("cost",), notes


def run_board(job: Job, inventory: Inventory, setups: list[StageSetup], universe: Universe,
              objectives: tuple[str, ...], top: int, deadline: float | Deadline,
              progress: Progress | None = None, stock: bool = True,
              limit_transistors: bool = True, skipped: dict[str, int] | None = None
              ) -> tuple[str, list[list[Choice]], list[dict[str, int]], dict[str, float],
                         BoardModel, dict[tuple, CheckResult | None], dict[str, Any]]:
    """Ranked board choices; every returned stage passes :func:`analyze_stage`.

    ``limit_transistors`` False: transistor lines are not held to their stock (they are not
    being chosen, as in consolidation).  ``skipped``: stage name → how many (network,
    transistor) option sets the time limit left unbuilt.  When options are missing, the
    status is at most ``feasible`` (``unknown`` without a board) and
    ``stats["prepass_cut"]`` says what was left out.

    ``deadline`` (a :func:`time.monotonic` value or a :class:`.deadline.Deadline`) bounds
    the solves and the full checks together: each solve leaves time for checking one
    board (by the longest check so far), and no check starts that the time left cannot
    finish; a board whose stages are not all checked is not returned, and
    ``stats["verify_cut"]`` says how far the checks of the board in hand went.
    """
    clock = deadline if isinstance(deadline, Deadline) else Deadline.until(deadline)
    tq: dict[str, int | None] = {q.part_id: q.qty if limit_transistors else None
                                 for q in inventory.transistors}
    info = LineInfo([universe.value_id.get(r.value_ohm, -1) for r in universe.lines],
                    universe.qty, tq, job.build.quantity)
    bm = BoardModel(setups, info, stock=stock)
    verified: dict[tuple, CheckResult | None] = {}
    stats: dict[str, Any] = {"reverify_rounds": 0, "stage_designs_verified": 0,
                             "stage_designs_forbidden": 0, "verify_cut": None}
    check_s = 0.02      # the longest full check so far, s (a guess until one is timed)
    ranked: list[list[Choice]] = []
    values_out: list[dict[str, int]] = []
    bound: dict[str, float] = {}
    status = "optimal"
    seed = job.search.seed
    while len(ranked) < top:
        if clock.expired():
            status = "feasible" if ranked else "unknown"
            break
        # the solve leaves time to check the board it finds (at most 30 % of what is left)
        reserve = min(0.3 * clock.remaining(), len(setups) * check_s)
        st, choices, vals, bnd = bm.solve_lex(objectives, seed, clock.monotonic_at() - reserve)
        if choices is None:
            if not ranked:
                status = st
            break
        if progress is not None:
            progress("verifying", min(1.0, (len(ranked) + 0.5) / top))
        all_ok = True
        for i, ch in enumerate(choices):
            g = bm.groups[ch.group]
            if _design_key(g, ch) not in verified and (clock.expired()
                                                       or clock.remaining() < check_s):
                stats["verify_cut"] = (
                    f"the time limit ended the full check of the {'next ' if ranked else ''}"
                    f"board found after {i} of {len(choices)} stages (each check "
                    f"{_seconds(check_s)}), so it is not shown")
                all_ok = False
                break
            t_check = clock.clock()
            ok = _verify(job, g, ch, universe.lines, verified, stats) is not None
            check_s = max(check_s, clock.clock() - t_check)
            if not ok:
                all_ok = False
                _forbid_failing(job, bm, ch, stats)
        if stats["verify_cut"] is not None:
            status = "feasible" if ranked else "unknown"
            bound.update(bnd)
            break
        if not all_ok:
            stats["reverify_rounds"] += 1
            if stats["reverify_rounds"] > MAX_REVERIFY_ROUNDS:
                status = "feasible" if ranked else "unknown"
                break
            continue
        if st != "optimal":
            status = "feasible"
            bound.update(bnd)
        ranked.append(choices)
        values_out.append(vals)
        bm.forbid_board(choices)
        if st != "optimal":
            break
    bm.clear_fixing()
    cut = prepass_cut(setups, skipped)
    stats["prepass_cut"] = cut
    if cut is not None:
        # options are missing: a board found is not proven best, none found proves nothing
        status = {"optimal": "feasible", "infeasible": "unknown"}.get(status, status)
        bound = {}
    return status, ranked, values_out, bound, bm, verified, stats


def _seconds(s: float) -> str:
    """A check's duration in words (s)."""
    return f"{s:.2g} s" if s < 10 else f"{s:.0f} s"


def prepass_cut(setups: list[StageSetup], skipped: dict[str, int] | None = None
                ) -> str | None:
    """What the time limit left out of the stage options (None when nothing)."""
    parts = []
    for st in setups:
        if skipped and skipped.get(st.name):
            parts.append(f"stage '{st.name}': {skipped[st.name]} network and transistor "
                         "pairs not reached")
        for g in st.options:
            if not g.complete:
                role = PLANS[g.network].enumerated[0]
                done = (f"{role} candidates 1–{g.rows_done:,} of {g.rows_total:,} scanned"
                        if g.rows_done else f"none of {g.rows_total:,} {role} candidates "
                        "scanned")
                parts.append(f"stage '{st.name}' {g.network} with {g.transistor.part_id}: "
                             + done)
    if not parts:
        return None
    return ("the time limit cut the pre-pass, so the status is not a proof: "
            + "; ".join(parts))


def _design(g: StageOptions, ch: Choice) -> dict[str, int]:
    out = {r: int(v[ch.option]) for r, v in g.core.items()}
    if g.free is not None:
        out[g.free] = ch.free
    return out


def _design_key(g: StageOptions, ch: Choice) -> tuple:
    """What identifies a stage design among the verified ones."""
    return (g.stage, g.network, g.transistor.part_id, tuple(sorted(_design(g, ch).items())))


def resolved_parts(g: StageOptions, design: dict[str, int], universe_lines: list[Resistor]
                   ) -> dict[str, ResolvedResistor]:
    parts = {}
    for role, i in design.items():
        c = g.cands[role]
        if int(c.arrangement[i]) < 0:
            continue
        a = universe_lines[int(c.line_a[i])]
        parts[role] = ResolvedResistor.of_part(role, a, off_stock=not a.part_id)
    return parts


def _verify(job: Job, g: StageOptions, ch: Choice, lines: list[Resistor],
            verified: dict[tuple, CheckResult | None], stats: dict[str, int]
            ) -> CheckResult | None:
    key = _design_key(g, ch)
    if key not in verified:
        stage = job.stages[g.stage]
        sj = stage_job(job, stage)
        parts = resolved_parts(g, _design(g, ch), lines)
        samples = 2000 if stage.target.yield_min is not None else 0
        res = analyze_stage(sj, stage, parts, g.transistor, samples=samples,
                            seed=job.search.seed, topology=g.network)
        stats["stage_designs_verified"] += 1
        verified[key] = res if res.ok else None
    return verified[key]


def _forbid_failing(job: Job, bm: BoardModel, ch: Choice, stats: dict[str, int]) -> None:
    """Forbid the failing stage design and every design of its run that fails a vertex."""
    g = bm.groups[ch.group]
    bm.forbid_design(ch)
    stats["stage_designs_forbidden"] += 1
    if g.free is None:
        return
    stage = job.stages[g.stage]
    sj = stage_job(job, stage)
    designs = g.designs(ch.option)
    roles = tuple(designs[0])
    arr = {r: (g.cands[r], np.array([d[r] for d in designs])) for r in roles}
    chk = vertex_check(sj, stage, g.network, g.transistor, arr)
    for d, ok in zip(designs, chk["ok"].tolist(), strict=True):
        if not ok and d[g.free] != ch.free:
            bm.forbid_design(Choice(ch.group, ch.option, d[g.free]))
            stats["stage_designs_forbidden"] += 1


def build_board(job: Job, inventory: Inventory, setups: list[StageSetup],
                universe: Universe, status: str, ranked: list[list[Choice]],
                values: list[dict[str, int]], bm: BoardModel,
                verified: dict[tuple, CheckResult | None]) -> list[BoardDesign]:
    """Ranked choices → :class:`BoardDesign` objects with BOMs and per-stage changes."""
    out = []
    for rank, choices in enumerate(ranked, start=1):
        stages = []
        for s, ch in enumerate(choices):
            g = bm.groups[ch.group]
            res = verified[_design_key(g, ch)]
            assert res is not None
            changed = _changed(setups[s], g, _design(g, ch), universe)
            stages.append(BoardStage(setups[s].name, g.network, g.transistor, res, changed,
                                     ic_margin_of(res, job.stages[g.stage])))
        out.append(_board_design(rank, stages, job.build.quantity, inventory))
    return out


def _changed(setup: StageSetup, g: StageOptions, design: dict[str, int],
             universe: Universe) -> dict[str, dict[str, Any]]:
    if setup.current_network is None:
        return {}
    out = {}
    for role, i in design.items():
        cur = setup.current.get(role)
        if setup.current_network == g.network and cur == i:
            continue
        c = g.cands[role]
        new = None if int(c.arrangement[i]) < 0 else universe.lines[int(c.line_a[i])]
        out[role] = {"part_id": None if new is None else (new.part_id or None),
                     "value_ohm": None if new is None else new.value_ohm}
    return out


def bom_of(stages: list[tuple[str, Transistor, dict[str, ResolvedResistor]]], build_qty: int,
           inventory: Inventory) -> list[dict[str, Any]]:
    """Bill of materials: one row per resistor line (or outside value) and transistor line."""
    rows: dict[tuple, dict[str, Any]] = {}
    for name, q, parts in stages:
        for role, p in parts.items():
            pieces = p.parts or (Resistor("", p.value, 100 * p.tol, p.rating),)
            for part in pieces:
                key = ("resistor", part.part_id or f"{part.value_ohm:g}@{part.tolerance_pct:g}")
                row = rows.setdefault(key, {
                    "kind": "resistor", "part_id": part.part_id or None,
                    "value_ohm": part.value_ohm, "tolerance_pct": part.tolerance_pct,
                    "unit_cost": part.unit_cost, "placements": 0, "uses": [],
                    "in_stock": part.qty if part.part_id else None,
                    "location": part.location or None})
                row["placements"] += 1
                row["uses"].append(f"{role}@{name}")
        key = ("transistor", q.part_id)
        row = rows.setdefault(key, {
            "kind": "transistor", "part_id": q.part_id, "value_ohm": None,
            "tolerance_pct": None, "unit_cost": q.unit_cost, "placements": 0, "uses": [],
            "in_stock": q.qty, "location": q.location or None})
        row["placements"] += 1
        row["uses"].append(f"Q@{name}")
    out = []
    for row in rows.values():
        row["needed"] = row["placements"] * build_qty
        row["short"] = (row["in_stock"] is not None and row["needed"] > row["in_stock"])
        out.append(row)
    out.sort(key=lambda r: (r["kind"] != "resistor", r["value_ohm"] or 0.0,
                            r["part_id"] or ""))
    return out


def bom_totals(bom: list[dict[str, Any]]) -> dict[str, Any]:
    res = [r for r in bom if r["kind"] == "resistor"]
    return {"bom_lines": len(bom), "resistor_lines": len(res),
            "distinct_values": len({r["value_ohm"] for r in res}),
            "placements": sum(int(r["placements"]) for r in bom),
            "cost": round(sum(float(r["unit_cost"]) * int(r["placements"]) for r in bom), 6)}


def _board_design(rank: int, stages: list[BoardStage], build_qty: int,
                  inventory: Inventory) -> BoardDesign:
    bom = bom_of([(s.name, s.transistor, s.check.parts) for s in stages], build_qty, inventory)
    tot = bom_totals(bom)
    cost_micro = sum(micro(float(r["unit_cost"])) * int(r["placements"]) for r in bom)
    return BoardDesign(rank=rank, stages=stages, cost=cost_micro / 1e6, cost_micro=cost_micro,
                       part_count=int(tot["placements"]),
                       distinct_values=int(tot["distinct_values"]),
                       bom_lines=int(tot["bom_lines"]),
                       changes=sum(len(s.changed) for s in stages), bom=bom)


def design_board(job: Job, inventory: Inventory, *, top: int | None = None,
                 time_limit_s: float | None = None, progress: Progress | None = None,
                 deadline: Deadline | None = None) -> BoardResult:
    """Design every stage of a board together from one shared stock (DESIGN §2, §3).

    Parameters
    ----------
    job : Job
        A board (several ``[[stage]]`` tables; one stage works too).
    inventory : Inventory
    top : int, optional
        How many distinct boards (default: the job's ``top``).
    time_limit_s : float, optional
        Wall-clock limit for the whole search, s (default: the job's): stage options,
        board model and re-verification.  A run it cuts short is at most ``feasible``
        and says in ``assumptions`` which rows of which stage were scanned.
    progress : callable(stage: str, fraction: float), optional
    deadline : Deadline, optional
        Use this deadline instead of one made from ``time_limit_s``.

    Returns
    -------
    BoardResult
    """
    t0 = time.monotonic()
    top = job.search.top if top is None else int(top)
    limit = job.search.time_limit_s if time_limit_s is None else float(time_limit_s)
    clock = Deadline(limit) if deadline is None else deadline   # one for the whole command
    prepass = clock.share(0.7)                   # options leave time for the board model
    objectives, notes = board_objectives(job)
    shelf = build_shelf(job, inventory, pairs=False)
    universe = universe_of(shelf)
    setups = []
    excluded: dict[str, list[dict[str, str]]] = {}
    n_opts = {}
    skipped: dict[str, int] = {}
    for stage in job.stages:
        if stage.transistor is not None and inventory.find_transistor(stage.transistor) is None:
            raise stage_key_error(job, stage.name, "transistor", f"transistor "
                                  f"{stage.transistor} is not in the stock file",
                                  stage.transistor)
    for si, stage in enumerate(job.stages):
        sj = stage_job(job, stage)
        qs, out = usable_transistors(sj, inventory)
        excluded[stage.name] = [{"part_id": q.part_id, "reason": why} for q, why in out]
        groups = []
        for net_name in stage_networks(job, stage.topology):
            net = get_network(net_name)
            cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
            for q in qs:
                if prepass.expired():
                    skipped[stage.name] = skipped.get(stage.name, 0) + 1
                    continue
                opts = stage_options(sj, stage, si, net_name, q, cands, prepass)
                if held_from_reference(stage) and not prepass.expired():
                    opts = screen_options(sj, stage, opts, prepass)
                groups.append(opts)
        n_opts[stage.name] = sum(g.size for g in groups)
        setups.append(StageSetup(stage.name, groups))
        if progress is not None:
            progress("pre-pass", (si + 1) / len(job.stages))
    status, ranked, values, bound, bm, verified, rstats = run_board(
        job, inventory, setups, universe, objectives, top, clock, progress,
        skipped=skipped)
    designs = build_board(job, inventory, setups, universe, status, ranked, values, bm,
                          verified)
    stats: dict[str, object] = {"options_per_stage": n_opts, **rstats,
                                "solver_steps": bm.step_seconds,
                                "resistor_lines": len(shelf.lines),
                                "excluded_transistors": excluded}
    result = BoardResult(status=status, solve_seconds=time.monotonic() - t0,
                         objectives=objectives, designs=designs, bound=bound, stats=stats,
                         assumptions=notes + _board_notes(job)
                         + collect_assumptions(s.check for d in designs for s in d.stages))
    if rstats.get("prepass_cut"):
        result.assumptions.append(str(rstats["prepass_cut"]))
    if rstats.get("verify_cut"):
        result.assumptions.append(str(rstats["verify_cut"]))
    if not designs:
        result.explanation = explain_board(job, inventory, setups, universe, objectives,
                                           status, clock, verify_cut=rstats.get("verify_cut"))
    result.solve_seconds = time.monotonic() - t0
    return result


def _board_notes(job: Job) -> list[str]:
    notes = ["stock is shared: every line's uses over all stages × the build quantity stay "
             "within its quantity"]
    if job.build.allow_pairs:
        notes.append("two-part combinations are not searched on boards; each role takes one "
                     "stock line")
    if any(s.target.yield_min is not None for s in job.stages):
        notes.append("the search requires every worst-case corner to pass, which implies the "
                     "yield target")
    return notes


def explain_board(job: Job, inventory: Inventory, setups: list[StageSetup],
                  universe: Universe, objectives: tuple[str, ...], status: str,
                  deadline: float | Deadline, limit_transistors: bool = True,
                  verify_cut: str | None = None) -> dict[str, object]:
    """Why no board was found, and one change that would help, within the time left of
    ``deadline`` (what the time limit cut short is said, never searched past it)."""
    clock = deadline if isinstance(deadline, Deadline) else Deadline.until(deadline)
    if status == "unknown":
        cut = [st.name for st in setups
               if not st.options or not all(g.complete for g in st.options)]
        options = sum(g.size for st in setups for g in st.options)
        where = (f"while listing the options of stage{'s' if len(cut) > 1 else ''} "
                 f"{', '.join(repr(n) for n in cut)}" if cut else
                 verify_cut.replace("the time limit ended the", "during the")
                 if verify_cut else
                 f"in the board solver, over {options:,} options for {len(setups)} stages")
        return {"reason": f"the time limit ran out before any board was found, {where}",
                "suggestion": "raise [search] time_limit_s or --time-limit"}
    if clock.expired() or clock.remaining() < 0.05:
        return {"reason": "no board meets every stage from this stock (the search was "
                          "complete); the time limit left no time to find which stage or "
                          "stock line is the cause, so that search was skipped",
                "suggestion": "raise [search] time_limit_s or --time-limit to have the cause "
                              "found, or run `stockbias design` on each stage alone"}
    empty = [st.name for st in setups if not any(g.size for g in st.options)]
    if empty:
        name = empty[0]
        stage = next(s for s in job.stages if s.name == name)
        from .design import design

        one = design(stage_job(job, stage), inventory, top=1, deadline=clock)
        ex: Any = one.explanation
        text = ex.to_dict() if ex is not None else {}
        return {"reason": f"stage '{name}' cannot be met from this stock on its own",
                "stage": name, "stage_explanation": text,
                "suggestion": text.get("suggestion", "see the stage explanation")}
    # every stage has options: either the full check rules them out, or stock is shared
    status2, ranked, _v, _b, bm, _ver, _st = run_board(
        job, inventory, setups, universe, objectives, 1, clock, stock=False,
        limit_transistors=limit_transistors)
    if not ranked and status2 == "unknown":
        return {"reason": "the time limit ran out before the cause was found",
                "suggestion": "raise [search] time_limit_s or --time-limit"}
    if not ranked:
        return {"reason": "no stage combination passes the full check at every corner",
                "suggestion": "widen the IC window or lower the headroom of the tightest "
                              "stage; `stockbias design` on each stage alone says which"}
    short = []
    need: dict[str, int] = {}
    for ch in ranked[0]:
        g = bm.groups[ch.group]
        for role, i in _design(g, ch).items():
            c = g.cands[role]
            if int(c.arrangement[i]) >= 0:
                pid = universe.lines[int(c.line_a[i])].part_id
                need[pid] = need.get(pid, 0) + job.build.quantity
        if limit_transistors:
            need[g.transistor.part_id] = (need.get(g.transistor.part_id, 0)
                                          + job.build.quantity)
    for pid, n in sorted(need.items()):
        part = inventory.find_resistor(pid) or inventory.find_transistor(pid)
        if part is not None and n > part.qty:
            short.append({"part_id": pid, "needed": n, "in_stock": part.qty,
                          "to_buy": n - part.qty})
    lines = ", ".join(f"{s['part_id']} ({s['needed']} needed, {s['in_stock']} in stock)"
                      for s in short)
    return {"reason": "every stage can be met alone, but not all at once from the shared "
                      f"stock: {lines or 'stock is short'}",
            "short_lines": short,
            "suggestion": "; ".join(f"buy {s['to_buy']} more of {s['part_id']}" for s in short)
            or "add stock", "status_without_stock_limits": status2}
