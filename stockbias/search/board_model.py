"""The CP-SAT model of a board: one option per stage, stock shared, BOM counted board-wide.

Variables
    ``o[s,k]``: stage s takes option k (exactly one per stage); ``x[s,n,r,i]``: in network
    n, role r of stage s takes candidate i (a core role's x is the sum of its options, the
    free role's x is tied to an integer ``f[s,n]`` that each option bounds to its run);
    ``u[l]``: resistor line l is on the BOM; ``w[v]``: resistance value v is used;
    ``t[q]``: transistor line q is on the BOM.

Constraints
    Σ uses of line l over every stage and role × build quantity ≤ stock of l (the same
    for transistors); u, w, t are at least every x (or option) that uses them.

Objectives (all integers, minimised)
    ``cost`` (micro-units per board), ``part_count``, ``distinct_values``, ``bom_lines``
    (resistor lines + transistor lines), ``changes`` (roles whose part differs from the
    board's current one).

Lexicographic order is solved by successive solves, each fixing the previous
objective at its optimum through a constraint that is later cleared (so one model
serves every rank); ranked boards are kept distinct by no-goods on the chosen
literals.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field

import numpy as np
from ortools.sat.python import cp_model

from .board_options import StageOptions
from .ranking import bound_in_units

__all__ = ["BoardModel", "LineInfo", "StageSetup"]

SOLVER_PARAMS: dict[str, object] = {}
COUNT_OBJECTIVES = ("bom_lines", "changes", "distinct_values", "part_count")
CORE_OBJECTIVES = COUNT_OBJECTIVES


@dataclass(frozen=True)
class LineInfo:
    """Line universe: per resistor line its value id and stock (None: not stock-limited)."""

    value_id: list[int]
    qty: list[int | None]
    transistor_qty: dict[str, int | None]
    build_qty: int


@dataclass
class StageSetup:
    """What one stage may take, and (for consolidation) what it has now.

    ``current``: network, transistor part id and role → candidate index into that
    network's tables (None for a role whose current part is not a candidate).
    """

    name: str
    options: list[StageOptions]
    current_network: str | None = None
    current: dict[str, int | None] = field(default_factory=dict)


@dataclass
class Choice:
    """A stage's pick in a solution: option group, option index, free candidate (or −1)."""

    group: int
    option: int
    free: int

    def design(self, groups: list[StageOptions]) -> dict[str, int]:
        g = groups[self.group]
        out = {r: int(v[self.option]) for r, v in g.core.items()}
        if g.free is not None:
            out[g.free] = self.free
        return out


class BoardModel:
    """Build once; solve lexicographically, rank after rank."""

    def __init__(self, stages: list[StageSetup], lines: LineInfo, *, stock: bool = True):
        self.stages = stages
        self.lines = lines
        m = self.model = cp_model.CpModel()
        self.groups: list[StageOptions] = []
        self.group_stage: list[int] = []
        self.o: list[list[cp_model.IntVar]] = []       # per group
        self.x: dict[tuple[int, int, str, int], cp_model.IntVar] = {}  # (stage, group, role, i)
        self.f: dict[int, cp_model.IntVar] = {}        # group → free index
        self.sel: dict[int, cp_model.IntVar] = {}      # group → used
        cost_terms, part_terms = [], []
        part_upper = 0
        line_uses: dict[int, list] = {}
        value_uses: dict[int, list] = {}
        q_uses: dict[str, list] = {}
        self.change_terms: list = []
        self.change_const = 0
        # per stage: the least cost and part count over its options (stock ignored), and
        # the cheapest option (group, option, free candidate) as a starting board
        self.least: list[tuple[int, int]] = []
        self.cheapest: list[tuple[int, int, int] | None] = []
        for s, st in enumerate(stages):
            stage_opts = []
            best: tuple[int, int, int, int, int] | None = None   # cost, parts, group, k, free
            least_parts = None
            for g in st.options:
                gi = len(self.groups)
                self.groups.append(g)
                self.group_stage.append(s)
                ov = [m.new_bool_var(f"o{s}_{gi}_{k}") for k in range(g.size)]
                self.o.append(ov)
                stage_opts += ov
                sel = m.new_bool_var(f"sel{s}_{gi}")
                m.add(sum(ov) == sel)
                self.sel[gi] = sel
                q = g.transistor
                q_uses.setdefault(q.part_id, []).append(sel)
                qcost = round(q.unit_cost * 1_000_000)
                # core roles: x = Σ options that take candidate i
                core_cost = [qcost] * g.size
                core_parts = [1] * g.size
                for r in g.core_roles:
                    c = g.cands[r]
                    by_i: dict[int, list] = {}
                    for k, i in enumerate(g.core[r].tolist()):
                        by_i.setdefault(i, []).append(ov[k])
                        core_cost[k] += int(c.cost[i])
                        core_parts[k] += int(c.parts[i])
                    for i, lits in by_i.items():
                        xv = m.new_bool_var(f"x{s}_{gi}_{r}_{i}")
                        m.add(xv == sum(lits))
                        self.x[(s, gi, r, i)] = xv
                        self._uses(c, i, xv, line_uses, value_uses, s)
                cost_terms += [cst * v for cst, v in zip(core_cost, ov, strict=True)]
                part_terms += [p * v for p, v in zip(core_parts, ov, strict=True)]
                for k, (cst, parts, free, free_parts) in enumerate(
                        zip(core_cost, core_parts, *self._free_least(g), strict=True)):
                    cand = (cst + int(g.cands[g.free].cost[free]) if free >= 0 else cst,
                            parts + (int(g.cands[g.free].parts[free]) if free >= 0 else 0),
                            gi, k, free)
                    if best is None or cand[:2] < best[:2]:
                        best = cand
                    if least_parts is None or parts + free_parts < least_parts:
                        least_parts = parts + free_parts
                if g.free is not None and g.size:
                    c = g.cands[g.free]
                    lo_all, hi_all = int(g.lo.min()), int(g.hi.max())
                    fv = m.new_int_var(0, hi_all, f"f{s}_{gi}")
                    self.f[gi] = fv
                    covered: set[int] = set()
                    for a, b in zip(g.lo.tolist(), g.hi.tolist(), strict=True):
                        covered.update(range(a, b + 1))
                    xs = []
                    for i in sorted(covered):
                        xv = m.new_bool_var(f"x{s}_{gi}_{g.free}_{i}")
                        self.x[(s, gi, g.free, i)] = xv
                        xs.append((i, xv))
                        self._uses(c, i, xv, line_uses, value_uses, s)
                        cost_terms.append(int(c.cost[i]) * xv)
                        part_terms.append(int(c.parts[i]) * xv)
                    m.add(sum(v for _, v in xs) == sel)
                    m.add(fv == sum(i * v for i, v in xs))
                    for k, (a, b) in enumerate(zip(g.lo.tolist(), g.hi.tolist(), strict=True)):
                        if a > lo_all:
                            m.add(fv >= a).only_enforce_if(ov[k])
                        if b < hi_all:
                            m.add(fv <= b).only_enforce_if(ov[k])
            part_upper += 1 + max((len(g.cands) for g in st.options), default=0) * 2
            self.least.append((best[0], int(least_parts)) if best is not None else (0, 0))
            self.cheapest.append(best[2:] if best is not None else None)
            if stage_opts:
                m.add_exactly_one(stage_opts)
            else:
                m.add_bool_or([])                      # no option: the board is infeasible
            self._changes(s, st)
        # BOM, values, stock
        bq = lines.build_qty
        self.u = {}
        for line, lits in line_uses.items():
            uv = m.new_bool_var(f"u{line}")
            by_stage: dict[int, list] = {}
            for st_i, v in lits:
                by_stage.setdefault(st_i, []).append(v)
            for st_i, vs in by_stage.items():
                # y: stage st_i uses the line (at most one option per stage, so Σ over the
                # stage's options that use the line is ≤ 1: a tighter bound than each x)
                if len(vs) > 1:
                    yv = m.new_bool_var(f"y{st_i}_{line}")
                    for v in vs:
                        m.add_implication(v, yv)
                    m.add_bool_or(vs).only_enforce_if(yv)
                    m.add_implication(yv, uv)
                else:
                    m.add_implication(vs[0], uv)
            lits = [v for _, v in lits]
            self.u[line] = uv
            qty = lines.qty[line]
            if stock and qty is not None:
                m.add(sum(lits) * bq <= qty)
        self.w = {val: self._used(lits, f"w{val}") for val, lits in value_uses.items()}
        self.t = {}
        for pid, lits in q_uses.items():
            self.t[pid] = self._used(lits, f"t{pid}")
            qty = lines.transistor_qty.get(pid)
            if stock and qty is not None:
                m.add(sum(lits) * bq <= qty)
        self.objectives: dict[str, cp_model.LinearExprT] = {
            "cost": sum(cost_terms),
            "part_count": sum(part_terms),
            "distinct_values": sum(self.w.values()),
            "bom_lines": sum(self.u.values()) + sum(self.t.values()),
            "changes": sum(self.change_terms) + self.change_const,
        }
        # redundant bounds: the board costs at least the sum of each stage's cheapest option
        # (the shared stock only removes boards), and likewise for the part count; they give
        # the solver the bound a relaxation would take long to find on large boards
        m.add(self.objectives["cost"] >= sum(c for c, _ in self.least))
        m.add(self.objectives["part_count"] >= sum(p for _, p in self.least))
        self._hint_cheapest()
        self._fixing: list[int] = []
        self.part_upper = part_upper
        self.step_seconds: list[tuple[str, float, str]] = []

    @staticmethod
    def _free_least(g: StageOptions) -> tuple[list[int], list[int]]:
        """Per option: the free role's cheapest candidate in its run (fewest parts on a tie;
        −1 without a free role) and the fewest parts of any candidate in the run."""
        if g.free is None:
            return [-1] * g.size, [0] * g.size
        c = g.cands[g.free]
        cost, parts = c.cost.astype(np.int64), c.parts.astype(np.int64)
        free, least = [], []
        for a, b in zip(g.lo.tolist(), g.hi.tolist(), strict=True):
            run = slice(a, b + 1)
            best = np.flatnonzero(cost[run] == cost[run].min())
            free.append(a + int(best[np.argmin(parts[run][best])]))
            least.append(int(parts[run].min()))
        return free, least

    def _hint_cheapest(self) -> None:
        """Hint the board of each stage's cheapest option (the first step starts from it; the
        steps after start from the previous step's board)."""
        if any(ch is None for ch in self.cheapest):
            return
        for gi, ov in enumerate(self.o):
            pick = self.cheapest[self.group_stage[gi]]
            for k, v in enumerate(ov):
                self.model.add_hint(v, bool(pick is not None and pick[:2] == (gi, k)))
        for gi, fv in self.f.items():
            pick = self.cheapest[self.group_stage[gi]]
            self.model.add_hint(fv, pick[2] if pick is not None and pick[0] == gi else 0)

    def _used(self, lits: list, name: str) -> cp_model.IntVar:
        """A boolean at least every literal of ``lits`` (used when any of them is)."""
        var = self.model.new_bool_var(name)
        for v in lits:
            self.model.add_implication(v, var)
        return var

    @staticmethod
    def _uses(c, i: int, xv, line_uses: dict, value_uses: dict, stage: int) -> None:
        for la in (int(c.line_a[i]), int(c.line_b[i])):
            if la >= 0:
                line_uses.setdefault(la, []).append((stage, xv))
        for va in (int(c.value_a[i]), int(c.value_b[i])):
            if va >= 0:
                value_uses.setdefault(va, []).append(xv)

    def _changes(self, s: int, st: StageSetup) -> None:
        """changes += roles of stage s whose candidate differs from the current one."""
        if st.current_network is None:
            return
        for gi, g in enumerate(self.groups):
            if self.group_stage[gi] != s:
                continue
            if g.network != st.current_network:
                # another network replaces every current role
                self.change_terms.append(len(st.current) * self.sel[gi])
                continue
            for r in (*g.core_roles, *((g.free,) if g.free else ())):
                cur = st.current.get(r)
                keep = self.x.get((s, gi, r, cur)) if cur is not None else None
                if keep is None:
                    self.change_terms.append(self.sel[gi])
                else:
                    self.change_terms.append(self.sel[gi] - keep)

    # --- solving ---------------------------------------------------------------------
    def forbid_design(self, ch: Choice) -> None:
        g = self.groups[ch.group]
        lit = self.o[ch.group][ch.option]
        if g.free is None:
            self.model.add_bool_or([lit.negated()])
        else:
            s = self.group_stage[ch.group]
            free = self.x[(s, ch.group, g.free, ch.free)]
            self.model.add_bool_or([lit.negated(), free.negated()])

    def forbid_board(self, choices: list[Choice]) -> None:
        lits = []
        for ch in choices:
            g = self.groups[ch.group]
            lits.append(self.o[ch.group][ch.option].negated())
            if g.free is not None:
                s = self.group_stage[ch.group]
                lits.append(self.x[(s, ch.group, g.free, ch.free)].negated())
        self.model.add_bool_or(lits)

    def clear_fixing(self) -> None:
        proto = self.model.proto
        for idx in self._fixing:
            proto.constraints[idx].clear_linear()
        self._fixing = []

    def steps(self, objectives: tuple[str, ...]) -> list[list[str]]:
        """Consecutive count objectives merge into one weighted step (exactly lexicographic:
        each weight exceeds the largest value of everything after it)."""
        out: list[list[str]] = []
        for name in objectives:
            if out and name in COUNT_OBJECTIVES and out[-1][-1] in COUNT_OBJECTIVES:
                out[-1].append(name)
            else:
                out.append([name])
        return out

    def upper(self, name: str) -> int:
        """A proven upper bound of a count objective."""
        if name == "bom_lines":
            return len(self.u) + len(self.t)
        if name == "distinct_values":
            return len(self.w)
        if name == "changes":
            return self.change_const + sum(len(st.current) for st in self.stages)
        if name == "part_count":
            return self.part_upper
        raise KeyError(name)

    def solve_lex(self, objectives: tuple[str, ...], seed: int, deadline: float
                  ) -> tuple[str, list[Choice] | None, dict[str, int], dict[str, float]]:
        """Lexicographic optimum: (status, choices, values, bounds of unproven steps)."""
        self.clear_fixing()
        values: dict[str, int] = {}
        bounds: dict[str, float] = {}
        proven = True
        choices: list[Choice] | None = None
        steps = self.steps(objectives)
        last: cp_model.CpSolver | None = None          # the incumbent's solve
        floor = {"cost": sum(c for c, _ in self.least),
                 "part_count": sum(p for _, p in self.least)}
        for si, step in enumerate(steps):
            if last is not None and len(step) == 1 and step[0] in floor:
                at = round(last.value(self.objectives[step[0]]))
                if at == floor[step[0]]:
                    # the incumbent meets every constraint so far and reaches the proven
                    # lower bound of this objective: it is this step's optimum as it stands
                    values[step[0]] = at
                    self._fixing.append(self.model.add(self.objectives[step[0]] <= at).index)
                    self.step_seconds.append((step[0], 0.0, "AT_LOWER_BOUND"))
                    continue
            weights = [1] * len(step)
            for j in range(len(step) - 2, -1, -1):
                weights[j] = weights[j + 1] * (self.upper(step[j + 1]) + 1)
            expr = sum(w * self.objectives[n] for w, n in zip(weights, step, strict=True))
            self.model.minimize(expr)
            solver = cp_model.CpSolver()
            solver.parameters.num_workers = 1
            solver.parameters.catch_sigint_signal = False  # Ctrl-C reaches Python
            solver.parameters.random_seed = seed
            solver.parameters.max_time_in_seconds = max(deadline - time.monotonic(), 0.05)
            # core-based lower bounds suit sums of literals; cost has large coefficients
            core = step[0] in CORE_OBJECTIVES
            solver.parameters.optimize_with_core = core
            if core:
                # the count steps are sums of literals over a set-cover-like model: the LP
                # relaxation only slows the core search (8-stage consolidation: 4.6 s CPU
                # → 0.8 s; benchmarks/RESULTS_board.md), and so does minimising each core
                solver.parameters.linearization_level = 0
                solver.parameters.core_minimization_level = 0
            for k, v in SOLVER_PARAMS.items():
                setattr(solver.parameters, k, v)
            t_step = time.monotonic()
            status = solver.solve(self.model)
            self.step_seconds.append(("+".join(step), round(time.monotonic() - t_step, 3),
                                      solver.status_name(status)))
            if status in (cp_model.INFEASIBLE, cp_model.MODEL_INVALID):
                if values:
                    raise RuntimeError("fixing an objective at its optimum made the board "
                                       "model infeasible")
                return "infeasible", None, values, bounds
            if status not in (cp_model.OPTIMAL, cp_model.FEASIBLE):
                if choices is None:
                    return "unknown", None, values, bounds
                proven = False
                break
            if status != cp_model.OPTIMAL:
                proven = False
                # the weighted sum's bound gives the step's first objective: each weight
                # exceeds everything after it, so ⌊⌈B⌉ / w⌋ bounds it
                b = math.floor(math.ceil(solver.best_objective_bound - 1e-9) / weights[0])
                bounds[step[0]] = bound_in_units(step[0], float(b))
            for n in step:
                values[n] = round(solver.value(self.objectives[n]))
            choices = self._read(solver)
            last = solver
            self.model.clear_hints()
            for ov in self.o:
                for v in ov:
                    self.model.add_hint(v, solver.value(v))
            for fv in self.f.values():
                self.model.add_hint(fv, solver.value(fv))
            for n in step:
                ct = self.model.add(self.objectives[n] <= values[n])
                self._fixing.append(ct.index)
            if time.monotonic() > deadline and si < len(steps) - 1:
                proven = False
                break
        self.model.clear_objective()
        return ("optimal" if proven and len(values) == len(objectives) else "feasible"), \
            choices, values, bounds

    def _read(self, solver: cp_model.CpSolver) -> list[Choice]:
        out: list[Choice | None] = [None] * len(self.stages)
        for gi, ov in enumerate(self.o):
            for k, v in enumerate(ov):
                if solver.value(v):
                    fv = self.f.get(gi)
                    out[self.group_stage[gi]] = Choice(gi, k, int(solver.value(fv))
                                                       if fv is not None else -1)
        assert all(c is not None for c in out)
        return out  # type: ignore[return-value]
