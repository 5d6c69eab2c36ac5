"""Boards and consolidation to a yield target: every stage with ``[stage.target] yield_min``
is judged by Monte Carlo instead of its worst corner, the board still coupled through the
shared stock, the board-wide BOM counts and (consolidation) the changes.

What a board's yield means
    Each stage has its own parts, drawn independently of every other stage's, and every
    drawn board is judged at every environment corner (supply × ambient extremes, which are
    not random).  Each stage is held to its own ``yield_min`` at its own
    ``yield_confidence``; a stage without ``yield_min`` must pass every worst-case corner.
    The board's yield (every stage passes) is reported as the product of the stages'
    yields, which is exact because the stages' pass events depend on disjoint, independent
    draws; its lower bound is the product of the stages' lower bounds, holding jointly at
    1 − Σα over the sampled stages (Bonferroni).

Candidates
    The board search (:func:`.board.design_board`, or :func:`.consolidate.consolidate`) runs
    on the job's box and on the sub-boxes of :data:`.yield_search.LEVELS` (the shelf from
    :func:`.yield_search.shrunk_inventory`), with every stage held to the worst case on its
    box; the ranked boards of every box are the candidates (consolidation ranks one board
    per box), and so are boards mixing the stages of two of them where the shared stock
    covers the build (:func:`_mix_stages`).  Each candidate's parts are resolved again on
    the real shelf.

Evidence per stage design (the screens and the sampling of :mod:`.yield_evidence`)
    * found in a board of the job's own box: passes every worst-case corner, yield 1;
    * (board design) found on a sub-box whose probability (:func:`.yield_search.box_mass`)
      meets the stage's target: qualifies without sampling.  Consolidation does not use
      this screen: its purpose limits are taken from today's design on each box, so a
      sub-box's limits are not the real ones;
    * otherwise sampled: screened on common boards with a Bonferroni-adjusted upper bound
      (m = every stage design sampled, over all stages and boxes), then judged in rank order
      of the boards on fresh boards (lower bound at the stage's confidence), then checked
      again with the full check on an independent stream.
    A board qualifies when every stage does; the boards are ranked by the job's objectives
    (the board objectives of :mod:`.board`), ties to the wider box.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable
from dataclasses import dataclass, replace
from typing import Any

from ..analysis.check import CheckResult, analyze_stage
from ..analysis.statistics import YieldResult, one_sided_bounds
from ..assign import ResolvedResistor, resolve_resistor
from ..job import Job, Stage
from ..parts import Inventory
from .board import BoardDesign, BoardStage, _board_design, ic_margin_of, stage_job
from .deadline import Deadline
from .yield_board_result import StageEvidence, YieldBoard, YieldBoardResult
from .yield_evidence import (
    SCREEN_SAMPLES,
    YIELD_SAMPLES,
    Trial,
    final_check,
    judge,
    screen_counts,
    yield_result,
)
from .yield_search import LEVELS, box_mass, shrunk_inventory

__all__ = [
    "BOARD_LEVELS",
    "StageEvidence",
    "YieldBoard",
    "YieldBoardResult",
    "without_yield",
    "yield_board",
    "yield_consolidate",
]

Progress = Callable[[str, float], None]
#: Boards asked of each box's board search at least (--top asks more).
PER_LEVEL = 3
#: The boxes searched for candidates: the one-stage search's, and one narrower (±1σ
#: resistors, 90 % of the hFE and VBE ranges), since a board (a consolidation above all,
#: one board per box) needs more room to find candidates whose stages are all cheaper.
BOARD_LEVELS: tuple[tuple[float, float], ...] = (*LEVELS, (1.0 / 3, 0.9))
#: Candidate boards (the best by the objectives) whose stages are mixed into more candidates.
MIX_BOARDS = 24


def without_yield(job: Job) -> Job:
    """The job with no stage's ``yield_min`` (the box searches judge the worst case)."""
    return replace(job, stages=tuple(replace(s, target=replace(s.target, yield_min=None))
                                     for s in job.stages))


# --- candidates ----------------------------------------------------------------------
@dataclass
class _StageDesign:
    """One stage design met in some candidate board, with its evidence as it is gathered."""

    job: Job            # the one-stage job whose stage carries the targets
    trial: Trial
    stage: Stage
    level: int
    mass: float
    kind: str = "sampled"
    screen: YieldResult | None = None
    high: float | None = None
    judged: YieldResult | None = None
    judged_low: float | None = None
    check: CheckResult | None = None
    check_low: float | None = None


@dataclass
class _Board:
    board: BoardDesign
    level: int
    keys: tuple[tuple, ...]
    rank_key: tuple[float, ...]
    mixed: bool = False


def part_text(p: ResolvedResistor) -> str:
    """A role's part as it is written in a board file: a part id, ``A+B`` or ``A|B``, or the
    bare value of a part bought outside the stock."""
    ids = [r.part_id for r in p.parts if r.part_id]
    if not ids or len(ids) != len(p.parts):
        return f"{p.value:g}"
    return ids[0] if len(ids) == 1 else ("+" if p.arrangement == "series" else "|").join(ids)


def _stage_key(si: int, s: BoardStage) -> tuple:
    return (si, s.topology, s.transistor.part_id,
            tuple(sorted((r, part_text(p)) for r, p in s.check.parts.items())))


def _objective_key(b: BoardDesign, objectives: tuple[str, ...], level: int
                   ) -> tuple[float, ...]:
    cols = {"cost": b.cost_micro, "part_count": b.part_count,
            "distinct_values": b.distinct_values, "bom_lines": b.bom_lines,
            "changes": b.changes}
    return (*(float(cols[o]) for o in objectives if o in cols), float(level))


def _real_parts(job: Job, inventory: Inventory, s: BoardStage,
                current: dict[str, ResolvedResistor] | None) -> dict[str, ResolvedResistor]:
    """The stage's parts resolved on the real shelf (today's part where it stays)."""
    amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    out = {}
    for role, p in s.check.parts.items():
        text = part_text(p)
        cur = (current or {}).get(role)
        if cur is not None and part_text(cur) == text:
            out[role] = cur
        else:
            out[role] = resolve_resistor(role, text, inventory, job.build.default_tolerance_pct,
                                         source="search", ambient=amb)
    return out


def _collect(job: Job, real: Job, inventory: Inventory,
             found: list[tuple[int, list[BoardDesign]]], objectives: tuple[str, ...],
             levels: tuple[tuple[float, float], ...], sub_box: bool,
             current: list[dict[str, ResolvedResistor]] | None
             ) -> tuple[list[_Board], dict[tuple, _StageDesign]]:
    """Candidate boards (distinct, in rank order) and their stage designs with the evidence
    known without sampling."""
    designs: dict[tuple, _StageDesign] = {}
    boards: dict[tuple, _Board] = {}
    for level, found_boards in found:
        k, f = levels[level]
        for b in found_boards:
            keys = []
            for si, s in enumerate(b.stages):
                key = _stage_key(si, s)
                keys.append(key)
                if key in designs:
                    continue       # met on a wider box already: that evidence is stronger
                st = real.stages[si]
                parts = _real_parts(job, inventory, s, None if current is None else current[si])
                q = inventory.find_transistor(s.transistor.part_id)
                assert q is not None
                pieces = sum(max(1, len(p.pieces)) for p in parts.values())
                mass = 1.0 if level == 0 else box_mass(k, f, pieces)
                d = _StageDesign(stage_job(real, st), Trial(parts, q, s.topology), st, level,
                                 mass)
                y_min = st.target.yield_min
                if level == 0:
                    d.kind = "worst case"
                elif y_min is None:
                    d.kind = "no target"         # must pass the worst case: the full check
                elif sub_box and mass >= y_min:
                    d.kind = "sub-box"
                designs[key] = d
            bkey = tuple(keys)
            if bkey not in boards:
                boards[bkey] = _Board(b, level, bkey, _objective_key(b, objectives, level))
    _mix_stages(real, inventory, boards, designs, objectives, limit_transistors=sub_box)
    return sorted(boards.values(), key=lambda x: x.rank_key), designs


def _mix_stages(real: Job, inventory: Inventory, boards: dict[tuple, _Board],
                designs: dict[tuple, _StageDesign], objectives: tuple[str, ...],
                limit_transistors: bool) -> None:
    """More candidates from the same stage designs: boards whose stages come from two
    candidate boards (every split between them up to four stages, one stage swapped beyond),
    kept when the shared stock still covers the build.  Each stage is still judged on its
    own, so this adds no claim; it lets a cheap stage found on one box meet a stage that
    must pass the worst case (no ``yield_min``: only designs from the job's own box) or a
    cheaper stage found on another box."""
    n = len(real.stages)
    if n < 2:
        return
    base = sorted(boards.values(), key=lambda x: x.rank_key)[:MIX_BOARDS]
    masks = range(1, 2 ** n - 1) if n <= 4 else [1 << si for si in range(n)]
    for a in base:
        for b in base:
            if a is b:
                continue
            for mask in masks:
                pick = [b if mask >> si & 1 else a for si in range(n)]
                keys = tuple(p.keys[si] for si, p in enumerate(pick))
                if keys in boards or any(
                        real.stages[si].target.yield_min is None
                        and designs[k].kind != "worst case" for si, k in enumerate(keys)):
                    continue
                stages = [p.board.stages[si] for si, p in enumerate(pick)]
                mixed = _board_design(0, stages, real.build.quantity, inventory)
                if any(row["short"] and (limit_transistors or row["kind"] == "resistor")
                       for row in mixed.bom):
                    continue
                level = max(p.level for p in pick)
                boards[keys] = _Board(mixed, level, keys,
                                      _objective_key(mixed, objectives, level), True)


def _search_boxes(search: Callable[[Inventory, float], Any], inventory: Inventory,
                  levels: tuple[tuple[float, float], ...], clock: Deadline,
                  progress: Progress | None, pick: Callable[[Any], list[BoardDesign]]
                  ) -> tuple[Any, list[tuple[int, list[BoardDesign]]], list[dict[str, object]]]:
    worst = None
    found: list[tuple[int, list[BoardDesign]]] = []
    run: list[dict[str, object]] = []
    for i, (k, f) in enumerate(levels):
        left = clock.remaining()
        if i > 0 and left < 0.5:
            break
        if progress is not None:
            progress(f"box {i + 1} of {len(levels)}: worst-case board search",
                     i / (len(levels) + 2))
        # the job's own box first and longest: it gives the worst-case optimum shown beside
        # the result and the candidates that need no sampling
        share = max(0.5, (0.4 if i == 0 else 0.6 / (len(levels) - i)) * left)
        res = search(shrunk_inventory(inventory, k, f), share)
        if i == 0:
            worst = res
        got = pick(res)
        found.append((i, got))
        run.append({"resistor_factor": k, "range_fraction": f, "status": res.status,
                    "boards": len(got)})
    return worst, found, run


# --- judging ---------------------------------------------------------------------------
def _judge(job: Job, boards: list[_Board], designs: dict[tuple, _StageDesign], top: int,
           samples: int, ex: Any, clock: Deadline, progress: Progress | None,
           levels: tuple[tuple[float, float], ...], inventory: Inventory
           ) -> tuple[list[YieldBoard], dict[str, object]]:
    sampled = [d for d in designs.values() if d.kind == "sampled"]
    m = len(sampled)
    out_keys: set[tuple] = set()
    if m:
        if progress is not None:
            progress(f"screening {m} stage designs × {SCREEN_SAMPLES:,} boards",
                     len(levels) / (len(levels) + 2))
        # one screening call per stage (its own limits), on the common boards of stream 1;
        # the Bonferroni correction counts every stage design screened (m over all stages)
        counts: dict[int, tuple[int, int]] = {}
        for name in dict.fromkeys(d.stage.name for d in sampled):
            group = [d for d in sampled if d.stage.name == name]
            for d, kn in zip(group, screen_counts(ex, group[0].job, [d.trial for d in group]),
                             strict=True):
                counts[id(d)] = kn
        for d in sampled:
            k, n = counts[id(d)]
            d.screen = yield_result(k, n)
            conf = float(d.stage.target.yield_confidence)
            d.high = one_sided_bounds(k, n, 1.0 - (1.0 - conf) / m)[1]
            if d.high < float(d.stage.target.yield_min):  # type: ignore[arg-type]
                out_keys.add(_key_of(designs, d))
    alive = [b for b in boards if not out_keys.intersection(b.keys)]
    chosen: list[YieldBoard] = []
    judged = checked = cut = 0
    failed: list[str] = []
    for i, b in enumerate(alive):
        if len(chosen) >= top:
            break
        if clock.expired():
            cut = len(alive) - i
            break
        if progress is not None:
            progress(f"judging board {i + 1} of {len(alive)} on {samples:,} boards per stage",
                     (len(levels) + i / max(len(alive), 1)) / (len(levels) + 2))
        ok = True
        for key in b.keys:
            d = designs[key]
            y_min = d.stage.target.yield_min
            conf = float(d.stage.target.yield_confidence)
            if ((d.kind == "sampled" and d.judged is None) or d.check is None) \
                    and clock.expired():
                ok = False          # no Monte Carlo starts past the limit: this board and
                cut = len(alive) - i    # the rest are not judged
                break
            if d.kind == "sampled" and d.judged is None:
                judged += 1
                d.judged, d.judged_low = judge(ex, d.job, d.trial, samples, conf)
            if d.kind == "sampled" and d.judged_low < y_min:  # type: ignore[operator]
                ok = False
                break
            if d.check is None:
                if clock.expired():
                    ok, cut = False, len(alive) - i
                    break
                checked += 1
                d.check, d.check_low = final_check(d.job, d.trial, samples, conf)
            if not _stage_ok(d):
                ok = False
                failed.append(_failure(d))
                break
        if cut:
            break
        if not ok:
            continue
        chosen.append(_chosen(job, b, designs, len(chosen) + 1, levels, inventory))
    stats: dict[str, object] = {"sampled_stage_designs": m, "screened_out": len(out_keys),
             # the smallest per-design confidence (stages may state different ones)
             "screen_confidence_each": None if not m else min(
                 1.0 - (1.0 - float(d.stage.target.yield_confidence)) / m for d in sampled),
             "judged": judged, "final_checks": checked,
             "dropped_on_final_check": list(dict.fromkeys(failed)),
             "not_judged_time_limit": cut}
    return chosen, stats


def _key_of(designs: dict[tuple, _StageDesign], d: _StageDesign) -> tuple:
    return next(k for k, v in designs.items() if v is d)


def _stage_ok(d: _StageDesign) -> bool:
    """A stage passes its final check: the worst case where it has no target (or found on
    the job's box), the lower bound where it was sampled; a proven sub-box stands."""
    assert d.check is not None
    if d.kind in ("worst case", "no target"):
        return all(c.ok for c in d.check.constraints if c.name != "yield_min")
    if d.kind == "sampled":
        return float(d.check_low) >= float(d.stage.target.yield_min)  # type: ignore[arg-type]
    return True


def _failure(d: _StageDesign) -> str:
    c = d.trial
    parts = ", ".join(f"{r}={part_text(p)}" for r, p in c.parts.items())
    if d.kind == "sampled":
        assert d.check is not None and d.check.monte_carlo is not None
        assert d.check_low is not None
        return (f"stage '{d.stage.name}' {c.topology} {c.transistor.part_id} {parts}: final "
                f"check {100 * d.check.monte_carlo.yield_.yield_:.3f} %, one-sided lower "
                f"bound {100 * d.check_low:.3f} %")
    return (f"stage '{d.stage.name}' {c.topology} {c.transistor.part_id} {parts}: fails the "
            "worst case on the real shelf (it has no yield target)")


def _chosen(job: Job, b: _Board, designs: dict[tuple, _StageDesign], rank: int,
            levels: tuple[tuple[float, float], ...], inventory: Inventory) -> YieldBoard:
    stages, evidence = [], []
    for key, s in zip(b.keys, b.board.stages, strict=True):
        d = designs[key]
        assert d.check is not None and d.check_low is not None
        stages.append(BoardStage(s.name, s.topology, d.trial.transistor, d.check, s.changed,
                                 ic_margin_of(d.check, d.stage)))
        kind = "worst case" if d.kind == "no target" else d.kind
        evidence.append(StageEvidence(s.name, d.stage.target.yield_min,
                                      float(d.stage.target.yield_confidence), kind, d.mass,
                                      d.screen, d.judged, d.judged_low, d.check, d.check_low))
    board = _board_design(rank, stages, job.build.quantity, inventory)
    return YieldBoard(board, b.level, levels[b.level], evidence)


def _finish(kind: str, job: Job, worst: Any, chosen: list[YieldBoard],
            boards: list[_Board], designs: dict[tuple, _StageDesign], run: list,
            jstats: dict[str, object], objectives: tuple[str, ...], samples: int, ex: Any,
            t0: float, n_levels: int) -> YieldBoardResult:
    stats: dict[str, object] = {
        "boxes": run, "candidate_boards": len(boards),
        "candidate_boards_mixed": sum(b.mixed for b in boards), "stage_designs": len(designs),
        "proven_without_sampling": sum(d.kind in ("worst case", "sub-box")
                                       for d in designs.values()),
        **jstats, "executor": getattr(ex, "name", "this process")}
    res = YieldBoardResult(kind, "feasible" if chosen else "unknown", chosen, objectives,
                           samples, worst, time.monotonic() - t0, stats)
    targets = ", ".join(f"'{s.name}' {100 * s.target.yield_min:g} %" for s in job.stages
                        if s.target.yield_min is not None)
    res.assumptions = [
        f"yield targets by stage: {targets}; stages without yield_min pass every worst-case "
        "corner",
        "the board's yield is the product of its stages' yields: each stage draws its own "
        "parts independently and every board is judged at the same fixed supply and ambient "
        "extremes",
        "candidates: the ranked boards of the worst-case board search on the job's box and "
        "on sub-boxes (resistor tolerances × k, hFE and VBE ranges narrowed to a fraction "
        "f); boards outside these are not searched, so the ranking is the best among the "
        "candidates, not a proof over the shelf"]
    for d in chosen:
        for s in d.stages:
            for a in s.check.assumptions:
                if a not in res.assumptions:
                    res.assumptions.append(a)
    if jstats["not_judged_time_limit"]:
        res.assumptions.append(f"time limit reached: {jstats['not_judged_time_limit']} "
                               "candidate boards were not judged; a longer --time-limit may "
                               "find better boards")
    cut = [b for b in run if b["status"] in ("unknown", "feasible")]
    if cut or len(run) < n_levels:
        res.assumptions.append(
            f"time limit: {len(cut)} of {len(run)} box searches were cut short"
            + (f" and {n_levels - len(run)} boxes not searched" if len(run) < n_levels
               else "")
            + "; a longer --time-limit gives more candidates")
    if not chosen:
        dropped = [str(x) for x in jstats["dropped_on_final_check"]]  # type: ignore[attr-defined]
        not_judged = int(jstats["not_judged_time_limit"])  # type: ignore[call-overload]
        res.explanation = ("the time limit ran out before the box searches found a board; "
                           "raise [search] time_limit_s or --time-limit: " if not boards and cut
                           else f"the time limit ran out while the candidate boards were "
                           f"judged ({not_judged} not judged); raise [search] time_limit_s or "
                           "--time-limit: " if not_judged else "") + (
            f"no candidate board was shown to meet every stage's target: {len(boards)} "
            f"boards from {len(run)} boxes, {len(designs)} stage designs, "
            f"{jstats['screened_out']} screened out, {jstats['judged']} judged on "
            f"{samples:,} boards" + ("; " + "; ".join(dropped) if dropped else ""))
    return res


def _executor(executor: object | None) -> Any:
    from ..executor import InProcess

    return executor if executor is not None else InProcess()


def yield_board(job: Job, inventory: Inventory, *, top: int | None = None,
                time_limit_s: float | None = None, samples: int = YIELD_SAMPLES,
                executor: object | None = None, progress: Progress | None = None,
                levels: tuple[tuple[float, float], ...] = BOARD_LEVELS) -> YieldBoardResult:
    """The best boards (by the job's board objectives) whose every stage meets its yield
    target (or, without one, its worst case); see the module docstring.

    Parameters
    ----------
    job : Job
        A board with ``yield_min`` in at least one stage's target.
    inventory : Inventory
    top : int, optional
        How many boards (default: the job's).
    time_limit_s : float, optional
        Seconds for the whole search (default: the job's); the box searches share it.
    samples : int
        Boards per stage design when judged, and in the final check.
    executor : stockbias.executor.Executor, optional
        Where the screens and judgements run (default: this process).
    """
    from .board import board_objectives, design_board

    t0 = time.monotonic()
    top = job.search.top if top is None else int(top)
    clock = Deadline(job.search.time_limit_s if time_limit_s is None else float(time_limit_s))
    plain = without_yield(job)
    objectives, _notes = board_objectives(job)
    per_level = max(PER_LEVEL, top)

    def search(inv: Inventory, share: float) -> Any:
        return design_board(plain, inv, top=per_level, deadline=Deadline(share))

    worst, found, run = _search_boxes(search, inventory, levels, clock, progress,
                                      lambda r: list(r.designs))
    boards, designs = _collect(plain, job, inventory, found, objectives, levels, True, None)
    ex = _executor(executor)
    chosen, jstats = _judge(job, boards, designs, top, samples, ex, clock, progress, levels,
                            inventory)
    return _finish("board", job, worst, chosen, boards, designs, run, jstats, objectives,
                   samples, ex, t0, len(levels))


def yield_consolidate(job: Job, inventory: Inventory, *, keep: Iterable[tuple[str, str]] = (),
                      objectives: tuple[str, ...] | None = None,
                      time_limit_s: float | None = None,
                      keep_purpose: dict[str, float | None] | None = None,
                      purpose: bool = True, samples: int = YIELD_SAMPLES,
                      executor: object | None = None, progress: Progress | None = None,
                      levels: tuple[tuple[float, float], ...] = BOARD_LEVELS) -> YieldBoardResult:
    """The consolidation (fewest BOM lines, then changes, then cost, or ``objectives``) whose
    every stage meets its yield target, changes counted against the current board; today's
    board is judged on the same evidence as the reference.  Arguments as
    :func:`.consolidate.consolidate`, plus ``samples`` and ``executor``."""
    from ..selection import fitted_parts
    from .consolidate import CONSOLIDATE_OBJECTIVES, consolidate
    from .keep_purpose import effective_keep, figures_of, hold_purpose

    t0 = time.monotonic()
    keep = list(keep)
    order = tuple(objectives or CONSOLIDATE_OBJECTIVES)
    clock = Deadline(job.search.time_limit_s if time_limit_s is None else float(time_limit_s))
    plain = without_yield(job)
    current = [fitted_parts(job, st, inventory) for st in job.stages]
    # every stage as it stands is its own reference on the real shelf: the limits it holds
    held = []
    for st, (q, parts) in zip(job.stages, current, strict=True):
        ref = analyze_stage(stage_job(plain, st), replace(st, target=replace(
            st.target, yield_min=None)), parts, q, samples=0, seed=job.search.seed)
        held.append(hold_purpose(st, ref, effective_keep(st, keep_purpose, not purpose))[0])
    real = replace(job, stages=tuple(held))

    def search(inv: Inventory, share: float) -> Any:
        return consolidate(plain, inv, keep=keep, objectives=order, time_limit_s=share,
                           keep_purpose=keep_purpose, purpose=purpose)

    worst, found, run = _search_boxes(search, inventory, levels, clock, progress,
                                      lambda r: [] if r.after is None else [r.after])
    cur_parts = [parts for _q, parts in current]
    boards, designs = _collect(plain, real, inventory, found, order, levels, False, cur_parts)
    ex = _executor(executor)
    chosen, jstats = _judge(job, boards, designs, 1, samples, ex, clock, progress, levels,
                            inventory)
    res = _finish("consolidate", job, worst, chosen, boards, designs, run, jstats, order,
                  samples, ex, t0, len(levels))
    # today's board on the same footing: the full check on the final-check stream
    res.reference = [(st.name, final_check(stage_job(real, st), Trial(parts, q, st.topology),
                                           samples, float(st.target.yield_confidence))[0])
                     for st, (q, parts) in zip(real.stages, current, strict=True)]
    res.assumptions = list(dict.fromkeys(
        [*(a for a in worst.assumptions if "consolidated one" not in a), *res.assumptions]))
    after = res.after
    res.purpose = [replace(rec, after=None if after is None
                           else figures_of(after.stages[i].check))
                   for i, rec in enumerate(worst.purpose)]
    res.seconds = time.monotonic() - t0
    return res
