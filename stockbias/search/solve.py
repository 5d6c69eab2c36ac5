"""Lexicographic CP-SAT solves and top-K distinct designs.

Lexicographic by successive solves: minimise the first objective, fix it at its
optimum, minimise the next, and so on.  The next-best design is found by
forbidding the designs already ranked (a no-good on the design index) and solving
again from the first objective.  The solver is deterministic: one worker, a fixed
seed, a time limit.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

from ortools.sat.python import cp_model

from .model import ModelDesign, build_model

__all__ = ["RankedSolve", "solve_one"]


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
