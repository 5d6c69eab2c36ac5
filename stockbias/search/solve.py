"""Lexicographic CP-SAT solves and top-K distinct designs.

Lexicographic by successive solves: minimise the first objective, fix it at its
optimum, minimise the next, and so on.  The next-best design is found by
forbidding the designs already ranked (a no-good on the design index) and solving
again from the first objective.  The solver is deterministic: one worker, a fixed
seed, a time limit.

One design is picked from a list, so the stock constraint of the model only ever
concerns the picked design's own lines.  When every design fits the stock on its own
(the single-stage search hands over only such designs), no stock quantity can bind
and the model is a lexicographic minimum over a list: :func:`pick_one` takes it
directly, with the same objective values as the model and without loading OR-Tools.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import TYPE_CHECKING

from .model import ModelDesign, build_model

if TYPE_CHECKING:
    from ortools.sat.python import cp_model

__all__ = ["RankedSolve", "design_objectives", "fits_stock", "pick_one", "solve_one"]


@dataclass(frozen=True)
class RankedSolve:
    """One rank's result: the design index, objective values, and whether each is proven.

    ``bound``: objective → the solver's best bound when that step hit the time limit.
    """

    design: int
    values: dict[str, int]
    proven: bool
    bound: dict[str, float]


def _solver(seed: int, seconds: float) -> cp_model.CpSolver:
    from ortools.sat.python import cp_model

    s = cp_model.CpSolver()
    s.parameters.num_workers = 1
    s.parameters.catch_sigint_signal = False  # Ctrl-C reaches Python as KeyboardInterrupt
    s.parameters.random_seed = seed
    s.parameters.max_time_in_seconds = max(seconds, 0.01)
    return s


def solve_one(designs: list[ModelDesign], objectives: tuple[str, ...], line_qty: list[int],
              build_qty: int, forbidden: set[int], seed: int, deadline: float
              ) -> RankedSolve | str:
    """The lexicographically best design not forbidden; "infeasible" or "unknown" if none."""
    from ortools.sat.python import cp_model

    fixed: dict[str, int] = {}
    proven = True
    bound: dict[str, float] = {}
    design = -1
    for name in objectives:
        sm = build_model(designs, objectives, line_qty, build_qty, forbidden, fixed)
        sm.model.Minimize(sm.objectives[name])
        solver = _solver(seed, deadline - time.monotonic())
        status = solver.Solve(sm.model)
        if status == cp_model.INFEASIBLE or status == cp_model.MODEL_INVALID:
            if not fixed:
                return "infeasible"
            raise RuntimeError("a fixed objective made the model infeasible")
        if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
            return "unknown" if not fixed else RankedSolve(design, fixed, False, bound)
        fixed[name] = round(solver.ObjectiveValue())
        design = int(solver.Value(sm.design))
        if status != cp_model.OPTIMAL:
            proven = False
            bound[name] = float(solver.BestObjectiveBound())
    return RankedSolve(design, fixed, proven, bound)


def design_objectives(x: ModelDesign) -> dict[str, int]:
    """The model's objective values (:func:`.model.build_model`) of one design."""
    pieces = [line for p in x.pieces.values() for line in p]
    return {"cost": sum(x.role_cost.values()) + x.transistor_cost,
            "part_count": len(pieces) + 1,
            "distinct_values": len({v for vs in x.values.values() for v in vs}),
            "bom_lines": len(set(pieces)) + 1,
            "ic_margin": -x.margin_ppm, "changes": 0}


def fits_stock(x: ModelDesign, line_qty: list[int], build_qty: int) -> bool:
    """Every line's pieces in the design × the build quantity ≤ the line's quantity."""
    count: dict[int, int] = {}
    for p in x.pieces.values():
        for line in p:
            count[line] = count.get(line, 0) + 1
    return all(n * build_qty <= line_qty[line] for line, n in count.items())


def pick_one(designs: list[ModelDesign], objectives: tuple[str, ...], line_qty: list[int],
             build_qty: int, forbidden: set[int]) -> RankedSolve | str:
    """What :func:`solve_one` returns, found without a solver: the lexicographically best
    design not forbidden that fits the stock (ties: the lowest index); "infeasible" if
    none.  Always proven."""
    best: tuple[tuple[int, ...], int] | None = None
    values: dict[str, int] = {}
    for i, x in enumerate(designs):
        if i in forbidden or not fits_stock(x, line_qty, build_qty):
            continue
        v = design_objectives(x)
        key = (tuple(v[o] for o in objectives), i)
        if best is None or key < best:
            best, values = key, v
    if best is None:
        return "infeasible"
    return RankedSolve(best[1], {o: values[o] for o in objectives}, True, {})
