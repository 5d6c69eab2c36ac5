"""The CP-SAT model over the pruned candidate set.

Variables: the design index ``d`` (one tuple of the allowed-assignment table per
design the pre-pass kept), one integer per role (which candidate it takes, 0 when
the role is not used or absent), the topology and the transistor.  A table
constraint ties them together; booleans per (role, candidate), per resistance
value and per stock line carry the objectives and the stock constraints:

* stock: Σ over roles of the pieces of line L each role takes × build quantity ≤ qty(L)
  (a line used by two roles needs twice);
* ``cost``: Σ unit costs in integer micro-units (transistor included);
* ``part_count``: pieces per board (a pair is two, the transistor one);
* ``distinct_values``: resistance values used (a value is used when any role's part has it);
* ``bom_lines``: stock lines used (resistor lines and the transistor line);
* ``ic_margin``: an element of the design's margin in ppm of the target (maximised).

Everything is an integer; no float reaches the solver.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from ortools.sat.python import cp_model

__all__ = ["ModelDesign", "SearchModel", "build_model"]

ROLES = ("R1", "R2", "RB", "RC", "RE")


@dataclass(frozen=True)
class ModelDesign:
    """One design the model may pick, in integer terms.

    ``roles``: role → (candidate key id ≥ 1), a role missing when unused or absent;
    ``pieces``: role → tuple of shelf line indices (one or two); ``values``: role → value ids.
    """

    topology: int
    transistor: int
    roles: dict[str, int]
    pieces: dict[str, tuple[int, ...]]
    values: dict[str, tuple[int, ...]]
    margin_ppm: int
    transistor_cost: int
    role_cost: dict[str, int] = field(default_factory=dict)


@dataclass
class SearchModel:
    model: cp_model.CpModel
    design: cp_model.IntVar
    objectives: dict[str, cp_model.LinearExprT]


def build_model(designs: list[ModelDesign], objectives: tuple[str, ...],
                line_qty: list[int], build_qty: int, forbidden: set[int] = frozenset(),
                fixed: dict[str, int] | None = None) -> SearchModel:
    """CP-SAT model choosing one design of ``designs``; see the module notes."""
    from ortools.sat.python import cp_model

    m = cp_model.CpModel()
    n = len(designs)
    d = m.NewIntVar(0, max(n - 1, 0), "design")
    topo = m.NewIntVar(0, max(x.topology for x in designs), "topology")
    q = m.NewIntVar(0, max(x.transistor for x in designs), "transistor")
    role_vars = {}
    for role in ROLES:
        hi = max((x.roles.get(role, 0) for x in designs), default=0)
        role_vars[role] = m.NewIntVar(0, hi, f"cand_{role}")
    table = [[x.topology, x.transistor, *(x.roles.get(r, 0) for r in ROLES), i]
             for i, x in enumerate(designs) if i not in forbidden]
    m.AddAllowedAssignments([topo, q, *(role_vars[r] for r in ROLES), d], table)

    # booleans per (role, candidate) used by some design
    role_bool: dict[tuple[str, int], cp_model.IntVar] = {}
    info: dict[tuple[str, int], tuple[tuple[int, ...], tuple[int, ...], int]] = {}
    for x in designs:
        for role, c in x.roles.items():
            info[(role, c)] = (x.pieces[role], x.values[role], x.role_cost.get(role, 0))
    for role in ROLES:
        cs = sorted({c for (r, c) in info if r == role})
        bools = []
        for c in cs:
            b = m.NewBoolVar(f"{role}_{c}")
            m.Add(role_vars[role] == c).OnlyEnforceIf(b)
            m.Add(role_vars[role] != c).OnlyEnforceIf(b.Not())
            role_bool[(role, c)] = b
            bools.append(b)
    q_ids = sorted({x.transistor for x in designs})
    q_bool = {}
    for t in q_ids:
        b = m.NewBoolVar(f"q_{t}")
        m.Add(q == t).OnlyEnforceIf(b)
        m.Add(q != t).OnlyEnforceIf(b.Not())
        q_bool[t] = b
    q_cost = {x.transistor: x.transistor_cost for x in designs}

    # stock: pieces of each line × build quantity
    uses: dict[int, list[tuple[int, cp_model.IntVar]]] = {}
    for key, b in role_bool.items():
        pieces = info[key][0]
        for line in set(pieces):
            uses.setdefault(line, []).append((pieces.count(line), b))
    for line, terms in uses.items():
        if sum(k for k, _ in terms) * build_qty > line_qty[line]:
            m.Add(sum(k * b for k, b in terms) * build_qty <= line_qty[line])

    cost = sum(info[k][2] * b for k, b in role_bool.items()) + \
        sum(q_cost[t] * b for t, b in q_bool.items())
    parts = sum(len(info[k][0]) * b for k, b in role_bool.items()) + 1
    value_used = []
    by_value: dict[int, list[cp_model.IntVar]] = {}
    for key, b in role_bool.items():
        for v in set(info[key][1]):
            by_value.setdefault(v, []).append(b)
    for v, bs in by_value.items():
        u = m.NewBoolVar(f"value_{v}")
        m.AddMaxEquality(u, bs)
        value_used.append(u)
    line_used = []
    for line, terms in uses.items():
        u = m.NewBoolVar(f"line_{line}")
        m.AddMaxEquality(u, [b for _, b in terms])
        line_used.append(u)
    margins = [x.margin_ppm for x in designs]
    mvar = m.NewIntVar(min(margins), max(margins), "ic_margin_ppm")
    m.AddElement(d, margins, mvar)
    exprs: dict[str, cp_model.LinearExprT] = {
        "cost": cost, "part_count": parts, "distinct_values": sum(value_used),
        "bom_lines": sum(line_used) + 1, "ic_margin": -mvar, "changes": 0,
    }
    for name, value in (fixed or {}).items():
        m.Add(exprs[name] == value)
    return SearchModel(model=m, design=d, objectives={k: exprs[k] for k in objectives})
