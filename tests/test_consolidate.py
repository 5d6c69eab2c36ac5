"""`consolidate` equals an exhaustive search written in this test.

Small generated boards: two divider stages, each with a fixed transistor and a
current set of parts (``[stage.values]``) chosen here to spread over as many stock
lines as possible.  The reference, written without any search code, enumerates
every assignment of stock lines to each stage's four roles with the stage's own
transistor, screens it at every vertex of the tolerance box with the analysis
engine, crosses the two stages, applies the shared-stock rule (placements of a
line over both stages × build quantity ≤ its quantity) and ranks by
(bom_lines, changes, cost) — bom_lines: distinct resistor lines + distinct
transistor lines; changes: (stage, role) pairs whose line differs from the
current one; cost: micro-units per board — then confirms the best board stage by
stage with ``analyze_stage``.  The vertex screen is a necessary condition of
``analyze_stage``, so the first confirmed board is the exhaustive optimum.

These cases judge the worst-case targets alone (``purpose=False``); the stage's purpose
held from today's design is tested in tests/test_keep_purpose.py.

Source of every expected value: that exhaustive enumeration (integer vectors,
compared exactly), or the current board as written in the test.
"""

from __future__ import annotations

import itertools
from collections import Counter
from dataclasses import replace

import numpy as np
import pytest
from board_reference import board_of as _board_of
from board_reference import generated_shelf as _shelf
from board_reference import recheck as _recheck
from board_reference import resolved as _resolved
from vertex_reference import vertex_screen

from stockbias.analysis.check import analyze_stage
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.job import Job, Stage, parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.candidates import micro
from stockbias.search.consolidate import consolidate
from stockbias.topologies import get_network

ROLES = ("R1", "R2", "RC", "RE")   # the divider's roles, none optional
DEFAULT = ("bom_lines", "changes", "cost")

BOARD = """
[supply]
volts = 12
tolerance_pct = 5
[environment]
ambient_min_c = {tmin}
ambient_max_c = {tmax}
[build]
quantity = {build}
[search]
time_limit_s = 60
"""

STAGE = """
[[stage]]
name = "{name}"
topology = "divider"
transistor = "{q}"
[stage.target]
ic = "{ic}"
ic_window_pct = {window}
vce_min = "2 V"
[stage.limits]
supply_power_max = "80 mW"
[stage.values]
{values}
"""

TWO = [dict(name="input", ic="1 mA", window=30), dict(name="driver", ic="2 mA", window=30)]
SAME = [dict(name="left", ic="1 mA", window=35), dict(name="right", ic="1 mA", window=25)]


# --- generated shelves and boards ---------------------------------------------------


def _board(build: int, stages: list[dict], transistors: list[str],
           current: list[dict[str, str]], temps: tuple[float, float] = (25, 25)) -> Job:
    text = BOARD.format(tmin=temps[0], tmax=temps[1], build=build)
    for s, q, cur in zip(stages, transistors, current, strict=True):
        values = "\n".join(f'{role} = "{pid}"' for role, pid in cur.items())
        text += STAGE.format(name=s["name"], q=q, ic=s["ic"], window=s["window"],
                             values=values)
    return parse_job(text, "<board>")


# --- the exhaustive reference (analysis engine only) --------------------------------
def _stage_feasible(job: Job, stage: Stage, inv: Inventory, q: Transistor) -> list[tuple]:
    """Every line index per role of one stage (transistor q) that passes every vertex."""
    one = replace(job, stages=(stage,))
    env = job.environment
    span = max(abs(env.ambient_min_c - 25), abs(env.ambient_max_c - 25))
    lines = inv.resistors
    combos = np.array(list(itertools.product(range(len(lines)), repeat=len(ROLES))))
    val = np.array([r.value_ohm for r in lines])
    tol = np.array([r.tolerance_pct / 100 for r in lines])
    drift = np.array([(r.tempco_ppm or 0.0) * 1e-6 * span for r in lines])
    rating = np.array([r.power_w for r in lines])
    arrays = {role: ResistorSpec(val[combos[:, k]], tol[combos[:, k]], drift[combos[:, k]])
              for k, role in enumerate(ROLES)}
    spec = StageSpec(network=get_network("divider"), resistors=arrays,
                     device=DeviceSpec.from_transistor(q), vcc=job.supply.volts,
                     vcc_tol=job.supply.tolerance_pct / 100, vee=None, vee_tol=0.0,
                     ambient_min_c=env.ambient_min_c, ambient_max_c=env.ambient_max_c,
                     model=job.search.model, load=job.small_signal.load,
                     re_bypassed=job.small_signal.re_bypassed)
    ratings = {role: rating[combos[:, k]] for k, role in enumerate(ROLES)}
    ok, _, _ = vertex_screen(one, stage, spec, ratings)
    return [tuple(int(x) for x in combos[i]) for i in np.flatnonzero(ok)]


def _key(objectives, job: Job, board: list[tuple[Transistor, list[Resistor]]]) -> tuple | None:
    """Objective vector of a board against the job's current values (None: stock fails).

    A line holding less than one build (a current part short of stock) is bought outside
    the stock and may only stay where it is now; stock lines obey the shared-stock rule.
    Transistors stay and are not stock-limited here.
    """
    build = job.build.quantity
    uses = Counter(r.part_id for _, rs in board for r in rs)
    qty = {r.part_id: r.qty for _, rs in board for r in rs}
    changes = 0
    for st, (_, rs) in zip(job.stages, board, strict=True):
        for role, r in zip(ROLES, rs, strict=True):
            if r.part_id != st.values[role]:
                changes += 1
                if r.qty < build:
                    return None            # an outside part cannot spread to a new position
    if any(n * build > qty[pid] for pid, n in uses.items() if qty[pid] >= build):
        return None
    vals = {
        "cost": sum(micro(q.unit_cost) + sum(micro(r.unit_cost) for r in rs) for q, rs in board),
        "part_count": sum(1 + len(rs) for _, rs in board),
        "distinct_values": len({r.value_ohm for _, rs in board for r in rs}),
        "bom_lines": len(uses) + len({q.part_id for q, _ in board}),
        "changes": changes,
    }
    return tuple(vals[o] for o in objectives)


def _exhaustive(job: Job, inv: Inventory, objectives=DEFAULT, keep=()):
    """Best (vector, board) by the reference; roles in ``keep`` held at their current line."""
    lines = inv.resistors
    index = {r.part_id: i for i, r in enumerate(lines)}
    qs = [inv.find_transistor(st.transistor) for st in job.stages]
    per_stage = []
    for st, q in zip(job.stages, qs, strict=True):
        feas = _stage_feasible(job, st, inv, q)
        held = [(ROLES.index(role), index[st.values[role]]) for name, role in keep
                if name == st.name]
        per_stage.append([idx for idx in feas if all(idx[k] == i for k, i in held)])
    ranked = []
    for combo in itertools.product(*per_stage):
        board = [(q, [lines[i] for i in idx]) for q, idx in zip(qs, combo, strict=True)]
        key = _key(objectives, job, board)
        if key is not None:
            ranked.append((key, combo))
    ranked.sort(key=lambda x: x[0])
    confirmed: dict[tuple, bool] = {}
    for key, combo in ranked:
        ok = True
        for st, q, idx in zip(job.stages, qs, combo, strict=True):
            if (st.name, idx) not in confirmed:
                parts = {role: _resolved(role, lines[i]) for role, i in zip(ROLES, idx,
                                                                             strict=True)}
                confirmed[(st.name, idx)] = analyze_stage(replace(job, stages=(st,)), st, parts,
                                                          q, samples=0, topology="divider").ok
            ok = ok and confirmed[(st.name, idx)]
        if ok:
            return key, combo
    return None, None


# --- current boards, chosen here ------------------------------------------------------
def _spread_current(job: Job, inv: Inventory, transistors: list[str], passing: bool):
    """Current values over as many distinct lines as possible.

    ``passing``: each stage's current design passes every vertex (taken from the
    reference's feasible lists); otherwise a spread of lines chosen without regard to
    the targets (disjoint lines per stage).
    """
    lines = inv.resistors
    if not passing:
        n = len(lines)
        return [{role: lines[(4 * s + k) % n].part_id for k, role in enumerate(ROLES)}
                for s in range(len(job.stages))]
    feas = [_stage_feasible(job, st, inv, inv.find_transistor(q))
            for st, q in zip(job.stages, transistors, strict=True)]
    best = max(itertools.product(*feas), key=lambda c: (len({i for idx in c for i in idx}),
                                                        [-i for idx in c for i in idx]))
    return [{role: lines[i].part_id for role, i in zip(ROLES, idx, strict=True)}
            for idx in best]


def _make(seed, n_lines, n_q, build, stages, transistors, passing, temps=(25, 25)):
    inv = _shelf(seed, n_lines, n_q, build)
    placeholder = [{role: inv.resistors[0].part_id for role in ROLES} for _ in stages]
    probe = _board(build, stages, transistors, placeholder, temps)
    current = _spread_current(probe, inv, transistors, passing)
    return inv, _board(build, stages, transistors, current, temps), current


# --- reading the answer independently -------------------------------------------------


def _common_checks(job: Job, inv: Inventory, result, expected, objectives=DEFAULT):
    assert result.status == "optimal"
    d = result.after
    assert d is not None
    board = _board_of(d)
    # source: the exhaustive enumeration above
    assert _key(objectives, job, board) == expected
    # transistors stay
    assert [q.part_id for q, _ in board] == [st.transistor for st in job.stages]
    # changes: recounted here from the parts against the current values
    changed = {(st.name, role) for st, (_, rs) in zip(job.stages, board, strict=True)
               for role, r in zip(ROLES, rs, strict=True) if r.part_id != st.values[role]}
    assert d.changes == len(changed)
    assert {(s.name, role) for s in d.stages for role in s.changed} == changed
    # stock: placements over the board × build within each line
    uses = Counter(r.part_id for _, rs in board for r in rs)
    for pid, n in uses.items():
        assert n * job.build.quantity <= inv.find_resistor(pid).qty
    # reported totals agree with the parts
    out = result.to_dict()
    assert out["status"] == "optimal"
    assert out["bom_lines_after"] == len(uses) + len({q.part_id for q, _ in board})
    assert out["distinct_values_after"] == len({r.value_ohm for _, rs in board for r in rs})
    assert out["changes"] == len(changed)
    # before: the current board as written here
    cur = [inv.find_resistor(pid) for st in job.stages for pid in st.values.values()]
    assert result.before["bom_lines"] == out["bom_lines_before"] == \
        len({r.part_id for r in cur}) + len({st.transistor for st in job.stages})
    assert out["distinct_values_before"] == len({r.value_ohm for r in cur})
    assert all(s.check.ok for s in d.stages)
    _recheck(job, d)
    return d


# (seed, lines, transistors, build, stages, stage transistors, current passes, temps)
CASES = [
    (4, 8, 2, 5, TWO, ["Q0", "Q1"], True, (25, 25)),
    (5, 7, 2, 5, SAME, ["Q0", "Q0"], True, (25, 25)),
    (9, 6, 2, 5, SAME, ["Q1", "Q0"], True, (25, 25)),
    (1, 8, 1, 10, TWO, ["Q0", "Q0"], False, (0, 50)),
    (11, 9, 2, 5, SAME, ["Q0", "Q1"], True, (10, 40)),
]


@pytest.mark.parametrize("case", CASES, ids=[f"seed{c[0]}-{c[1]}lines" for c in CASES])
def test_consolidation_matches_exhaustive(case):
    seed, n_lines, n_q, build, stages, qs, passing, temps = case
    inv, job, _current = _make(seed, n_lines, n_q, build, stages, qs, passing, temps)
    expected, _combo = _exhaustive(job, inv)
    assert expected is not None
    result = consolidate(job, inv, purpose=False)
    d = _common_checks(job, inv, result, expected)
    # the current board was spread: consolidation needs fewer lines (source: the current
    # values chosen above against the exhaustive optimum)
    assert d.bom_lines <= result.before["bom_lines"]
    if passing:
        assert all(result.before_ok.values())


def test_keep_holds_a_role():
    """A role the free optimum changes is kept: it stays at its current part and the
    optimum equals the exhaustive optimum with that role fixed (source: the exhaustive
    enumeration above, with and without the role held)."""
    inv, job, _current = _make(4, 8, 2, 5, TWO, ["Q0", "Q1"], True)
    free_key, combo = _exhaustive(job, inv)
    lines = inv.resistors
    moved = [(st.name, role) for st, idx in zip(job.stages, combo, strict=True)
             for role, i in zip(ROLES, idx, strict=True) if lines[i].part_id != st.values[role]]
    assert moved
    keep = [moved[0]]
    expected, _c = _exhaustive(job, inv, keep=keep)
    assert expected is not None and expected >= free_key
    result = consolidate(job, inv, keep=keep, purpose=False)
    d = _common_checks(job, inv, result, expected)
    name, role = keep[0]
    stage = next(s for s in d.stages if s.name == name)
    cur = next(s for s in job.stages if s.name == name).values[role]
    assert stage.check.parts[role].parts[0].part_id == cur
    assert role not in stage.changed
    assert result.kept == [f"{role}@{name}"]


def test_other_objective_order():
    """distinct_values first (source: the exhaustive enumeration above, same order)."""
    objectives = ("distinct_values", "changes", "cost")
    inv, job, _ = _make(5, 7, 2, 5, SAME, ["Q0", "Q0"], True)
    expected, _c = _exhaustive(job, inv, objectives=objectives)
    result = consolidate(job, inv, objectives=objectives, purpose=False)
    _common_checks(job, inv, result, expected, objectives)


def test_current_part_short_of_stock_may_stay():
    """A current part holding less than one build may stay where it is (bought outside the
    stock, so not stock-limited there) but may not spread to another position (source:
    the exhaustive enumeration above with that rule, and with the full stock)."""
    base, job, _current = _make(9, 6, 2, 5, SAME, ["Q1", "Q0"], True)
    pid = "R03"
    where = {(st.name, role) for st in job.stages for role in ROLES if st.values[role] == pid}
    assert len(where) == 2                          # current at two positions
    inv = replace(base, resistors=tuple(replace(r, qty=2) if r.part_id == pid else r
                                        for r in base.resistors))
    full_key, _ = _exhaustive(job, base)
    expected, _combo = _exhaustive(job, inv)
    assert expected is not None and expected != full_key     # the rule binds here
    result = consolidate(job, inv, purpose=False)
    assert result.status == "optimal"
    d = result.after
    board = _board_of(d)
    assert _key(DEFAULT, job, board) == expected
    placed = {(st.name, role) for st, (_, rs) in zip(job.stages, board, strict=True)
              for role, r in zip(ROLES, rs, strict=True) if r.part_id == pid}
    assert placed <= where                          # only where it is now
    assert placed                                   # and here it does stay
    _recheck(job, d)
