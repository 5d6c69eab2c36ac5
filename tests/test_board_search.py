"""Board search (`design_board`) equals an exhaustive search written in this test.

Small generated boards: two divider stages sharing one seeded shelf of 6–9
resistor lines and 1–2 transistors.  The reference, written here without any
search code, enumerates every stage design on its own (every role × stock line
× transistor), screens it at every vertex of the tolerance box with the analysis
engine, then crosses the two stages' feasible lists, applies the shared-stock
rule (placements of a line over both stages × build quantity ≤ its quantity)
and the board objective vector, and confirms the best boards stage by stage with
``analyze_stage`` (the path ``check`` uses).  The vertex screen is a necessary
condition of ``analyze_stage`` (the worst case it bounds includes every vertex),
so the first confirmed board in objective order is the exhaustive optimum.

Source of every expected value: that exhaustive enumeration (integer objective
vectors, compared exactly).
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
from stockbias.search.board import design_board
from stockbias.search.candidates import micro
from stockbias.topologies import get_network

ROLES = ("R1", "R2", "RC", "RE")   # the divider's roles, none optional

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
objectives = {objectives}
time_limit_s = 60
"""

STAGE = """
[[stage]]
name = "{name}"
topology = "divider"
[stage.target]
ic = "{ic}"
ic_window_pct = {window}
vce_min = "{vce}"
[stage.limits]
supply_power_max = "{pmax}"
"""


# --- generated shelves and boards ---------------------------------------------------


def _with_qty(inv: Inventory, qty: dict[str, int]) -> Inventory:
    return replace(inv, resistors=tuple(replace(r, qty=qty.get(r.part_id, r.qty))
                                        for r in inv.resistors))


def _board(objectives: list[str], build: int, stages: list[dict],
           temps: tuple[float, float] = (25, 25)) -> Job:
    text = BOARD.format(tmin=temps[0], tmax=temps[1], build=build,
                        objectives="[" + ", ".join(f'"{o}"' for o in objectives) + "]")
    for s in stages:
        text += STAGE.format(name=s["name"], ic=s["ic"], window=s["window"],
                             vce=s.get("vce", "2 V"), pmax=s.get("pmax", "80 mW"))
    return parse_job(text, "<board>")


# --- the exhaustive reference (analysis engine only) --------------------------------
def _stage_feasible(job: Job, stage: Stage, inv: Inventory) -> list[tuple[Transistor, tuple]]:
    """Every (transistor, line index per role) of one stage that passes every vertex."""
    one = replace(job, stages=(stage,))
    env = job.environment
    span = max(abs(env.ambient_min_c - 25), abs(env.ambient_max_c - 25))
    lines = inv.resistors
    combos = np.array(list(itertools.product(range(len(lines)), repeat=len(ROLES))))
    val = np.array([r.value_ohm for r in lines])
    tol = np.array([r.tolerance_pct / 100 for r in lines])
    drift = np.array([(r.tempco_ppm or 0.0) * 1e-6 * span for r in lines])
    rating = np.array([r.power_w for r in lines])
    out = []
    for q in inv.transistors:
        if stage.transistor is not None and q.part_id != stage.transistor:
            continue
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
        out += [(q, tuple(int(x) for x in combos[i])) for i in np.flatnonzero(ok)]
    return out


def _key(objectives, build: int, board: list[tuple[Transistor, list[Resistor]]]) -> tuple | None:
    """The board objective vector, or None when the shared stock rule fails."""
    uses = Counter(r.part_id for _, rs in board for r in rs)
    qty = {r.part_id: r.qty for _, rs in board for r in rs}
    if any(n * build > qty[pid] for pid, n in uses.items()):
        return None
    q_uses = Counter(q.part_id for q, _ in board)
    q_qty = {q.part_id: q.qty for q, _ in board}
    if any(n * build > q_qty[pid] for pid, n in q_uses.items()):
        return None
    vals = {
        "cost": sum(micro(q.unit_cost) + sum(micro(r.unit_cost) for r in rs) for q, rs in board),
        "part_count": sum(1 + len(rs) for _, rs in board),
        "distinct_values": len({r.value_ohm for _, rs in board for r in rs}),
        "bom_lines": len(uses) + len(q_uses),
    }
    return tuple(vals[o] for o in objectives)


def _exhaustive_ranked(job: Job, inv: Inventory, top: int):
    """The `top` best boards (vector, designs) by the reference, and each stage's list."""
    lines = inv.resistors
    per_stage = [_stage_feasible(job, st, inv) for st in job.stages]
    ranked = []
    for combo in itertools.product(*per_stage):
        board = [(q, [lines[i] for i in idx]) for q, idx in combo]
        key = _key(job.search.objectives, job.build.quantity, board)
        if key is not None:
            ranked.append((key, combo))
    ranked.sort(key=lambda x: x[0])
    confirmed: dict[tuple, bool] = {}
    best = []
    for key, combo in ranked:
        ok = True
        for st, (q, idx) in zip(job.stages, combo, strict=True):
            ck = (st.name, q.part_id, idx)
            if ck not in confirmed:
                parts = {role: _resolved(role, lines[i]) for role, i in zip(ROLES, idx,
                                                                             strict=True)}
                confirmed[ck] = analyze_stage(replace(job, stages=(st,)), st, parts, q,
                                              samples=0, topology="divider").ok
            ok = ok and confirmed[ck]
        if ok:
            best.append((key, combo))
            if len(best) == top:
                break
    return best, per_stage


def _exhaustive(job: Job, inv: Inventory):
    """Best board vector (None: no board), its designs, and each stage's feasible list."""
    best, per_stage = _exhaustive_ranked(job, inv, 1)
    if not best:
        return None, None, per_stage
    return best[0][0], best[0][1], per_stage


# --- reading the search's answer independently -------------------------------------


def _reported(job: Job, design) -> tuple:
    vals = {"cost": design.cost_micro, "part_count": design.part_count,
            "distinct_values": design.distinct_values, "bom_lines": design.bom_lines}
    return tuple(vals[o] for o in job.search.objectives)


OBJECTIVE_SETS = [
    ["cost", "part_count", "distinct_values"],
    ["bom_lines", "cost"],
    ["distinct_values", "cost"],
]

TWO = [dict(name="input", ic="1 mA", window=30), dict(name="driver", ic="2 mA", window=30)]
SAME = [dict(name="left", ic="1 mA", window=35), dict(name="right", ic="1 mA", window=25)]

# (seed, lines, transistors, build, objectives index, stages, temperature range)
CASES = [
    (1, 8, 2, 5, 0, TWO, (25, 25)),
    (4, 8, 2, 5, 1, TWO, (25, 25)),
    (5, 7, 1, 10, 2, TWO, (0, 50)),
    (7, 9, 2, 5, 1, SAME, (25, 25)),
    (11, 6, 2, 5, 2, SAME, (25, 25)),
    (6, 8, 1, 5, 0, SAME, (10, 40)),
]


@pytest.mark.parametrize("case", CASES, ids=[f"seed{c[0]}-obj{c[4]}" for c in CASES])
def test_board_optimum_matches_exhaustive(case):
    seed, n_lines, n_q, build, obj, stages, temps = case
    inv = _shelf(seed, n_lines, n_q, build)
    job = _board(OBJECTIVE_SETS[obj], build, stages, temps)
    expected, _combo, _ = _exhaustive(job, inv)
    assert expected is not None                     # these cases are chosen feasible
    result = design_board(job, inv, top=1)
    assert result.status == "optimal"
    assert len(result.designs) == 1
    d = result.designs[0]
    got = _key(job.search.objectives, build, _board_of(d))
    # source: the exhaustive enumeration above (exact integer vectors)
    assert got == expected
    assert _reported(job, d) == expected            # the reported totals agree
    assert [s.name for s in d.stages] == [s.name for s in job.stages]
    assert all(s.check.ok for s in d.stages)
    _recheck(job, d)


def test_ranked_boards_match_exhaustive():
    """Ranks 1–3 are the three best distinct boards (source: the exhaustive enumeration
    above, its first three boards that pass analyze_stage)."""
    build = 5
    inv = _shelf(4, 8, 2, build)
    job = _board(OBJECTIVE_SETS[2], build, TWO)
    best, _ = _exhaustive_ranked(job, inv, 3)
    assert len(best) == 3
    result = design_board(job, inv, top=3)
    assert result.status == "optimal"
    boards = [_board_of(d) for d in result.designs]
    got = [_key(job.search.objectives, build, b) for b in boards]
    assert got == [k for k, _ in best]
    ids = {tuple((q.part_id, *(r.part_id for r in rs)) for q, rs in b) for b in boards}
    assert len(ids) == 3                            # three distinct boards
    assert [d.rank for d in result.designs] == [1, 2, 3]
    for d in result.designs:
        _recheck(job, d)


def test_shared_stock_binds():
    """A line the unconstrained best board places in both stages is cut to what one stage
    needs: the search honours the shared stock and ranks worse than without the cut
    (source: the exhaustive enumeration above, before and after the cut)."""
    seed, build = 5, 5
    inv = _shelf(seed, 6, 2, build)
    job = _board(OBJECTIVE_SETS[1], build, SAME)
    free_key, combo, _ = _exhaustive(job, inv)
    assert free_key is not None
    lines = inv.resistors
    counts = [Counter(lines[i].part_id for i in idx) for _, idx in combo]
    shared = sorted(set(counts[0]) & set(counts[1]))
    assert shared, "the unconstrained optimum of this seed shares a line"
    pid = shared[0]
    cut = {pid: build * max(counts[0][pid], counts[1][pid])}  # one stage's worth, not both
    inv_cut = _with_qty(inv, cut)
    expected, _c, _ = _exhaustive(job, inv_cut)
    assert expected is not None and expected > free_key   # the cut binds in the reference

    free = design_board(job, inv, top=1)
    assert free.status == "optimal"
    assert _key(job.search.objectives, build, _board_of(free.designs[0])) == free_key

    result = design_board(job, inv_cut, top=1)
    assert result.status == "optimal"
    d = result.designs[0]
    board = _board_of(d)
    placed = sum(1 for _, rs in board for r in rs if r.part_id == pid)
    assert placed * build <= cut[pid]
    got = _key(job.search.objectives, build, board)
    assert got == expected
    assert got != free_key
    bom_row = next((r for r in d.bom if r["part_id"] == pid), None)
    if bom_row is not None:
        assert bom_row["needed"] <= cut[pid] and not bom_row["short"]
    _recheck(job, d)


def test_infeasible_when_a_stage_cannot_be_met():
    """A window too tight for this shelf in one stage (source: the exhaustive enumeration
    above finds no design for that stage)."""
    build = 5
    inv = _shelf(3, 8, 2, build)
    stages = [dict(name="input", ic="1 mA", window=30), dict(name="tight", ic="2 mA", window=3)]
    job = _board(OBJECTIVE_SETS[0], build, stages)
    expected, _c, per_stage = _exhaustive(job, inv)
    assert expected is None and per_stage[0] and not per_stage[1]
    result = design_board(job, inv, top=1)
    assert result.status == "infeasible"
    assert result.designs == []
    assert result.explanation is not None
    assert result.explanation.get("stage") == "tight"


def test_infeasible_only_because_stock_is_shared():
    """Every line holds exactly one build: each stage alone can be met with four distinct
    lines, but two stages need eight placements from six lines (source: the exhaustive
    enumeration above, per stage and crossed)."""
    build = 5
    inv = _shelf(5, 6, 1, build, qty_scale=(1,))
    job = _board(OBJECTIVE_SETS[1], build, TWO)
    expected, _c, per_stage = _exhaustive(job, inv)
    assert expected is None
    one_build = [[(q, idx) for q, idx in feas if len(set(idx)) == len(idx)]
                 for feas in per_stage]
    assert all(one_build), "each stage alone fits the stock"
    result = design_board(job, inv, top=1)
    assert result.status == "infeasible"
    assert result.designs == []
    assert result.explanation is not None
    assert "stock" in str(result.explanation["reason"])


def _nominal_gains(job: Job, inv: Inventory, combo) -> list[float]:
    """|gain| at the nominal point of each stage design of ``combo``, as check reports it."""
    lines = inv.resistors
    out = []
    for st, (q, idx) in zip(job.stages, combo, strict=True):
        parts = {role: _resolved(role, lines[i]) for role, i in zip(ROLES, idx, strict=True)}
        res = analyze_stage(replace(job, stages=(st,)), st, parts, q, samples=0)
        out.append(abs(res.purpose["gain"].nominal))
    return out


@pytest.mark.parametrize("seed, n_lines, n_q, obj, stages", [
    (7, 9, 2, 1, SAME),      # the band moves the optimum
    (1, 8, 2, 0, TWO),       # no design of this shelf reaches the band
], ids=["seed7-moved", "seed1-infeasible"])
def test_nominal_gain_band_matches_exhaustive(seed, n_lines, n_q, obj, stages):
    """A stage held to a band of |gain| at the nominal point (the limit an existing stage
    sets for consolidation) is honoured exactly by the board search: the band here is
    1.3–2 × the unheld optimum's gain of each stage, so that optimum is out (source: the
    exhaustive enumeration above with the same band in each stage's target)."""
    build = 5
    inv = _shelf(seed, n_lines, n_q, build)
    job = _board(OBJECTIVE_SETS[obj], build, stages)
    _free, combo, _ = _exhaustive(job, inv)
    gains = _nominal_gains(job, inv, combo)
    held = replace(job, stages=tuple(
        replace(st, target=replace(st.target, gain_nominal_min=1.3 * g, gain_nominal_max=2 * g))
        for st, g in zip(job.stages, gains, strict=True)))
    expected, _combo, _ = _exhaustive(held, inv)
    result = design_board(held, inv, top=1)
    if expected is None:
        assert result.status == "infeasible" and not result.designs
        return
    assert result.status == "optimal"
    d = result.designs[0]
    assert _key(job.search.objectives, build, _board_of(d)) == expected
    for s, g in zip(d.stages, gains, strict=True):
        assert 1.3 * g * (1 - 1e-9) <= abs(s.check.purpose["gain"].nominal) <= 2 * g * (1 + 1e-9)
    _recheck(held, d)


# The exponential model: board options come from the same cuts as the single-stage search
# (no assignment limit) and are screened at every vertex; the board optimum must equal the
# exhaustive enumeration above, which evaluates every assignment with the exponential model.
EXP_CASES = [
    (1, 8, 2, 5, 0, TWO, (25, 25)),
    (7, 8, 1, 5, 1, SAME, (0, 50)),
]


@pytest.mark.parametrize("case", EXP_CASES, ids=[f"exp-seed{c[0]}-obj{c[4]}" for c in EXP_CASES])
def test_exponential_board_matches_exhaustive(case):
    seed, n_lines, n_q, build, obj, stages, temps = case
    inv = _shelf(seed, n_lines, n_q, build)
    job = _board(OBJECTIVE_SETS[obj], build, stages, temps)
    job = replace(job, search=replace(job.search, model="exponential"))
    expected, _combo, _ = _exhaustive(job, inv)
    assert expected is not None                     # these cases are chosen feasible
    result = design_board(job, inv, top=1)
    assert result.status == "optimal"
    d = result.designs[0]
    # source: the exhaustive enumeration (exponential model at every vertex, then
    # analyze_stage), exact integer vectors
    assert _key(job.search.objectives, build, _board_of(d)) == expected
    assert _reported(job, d) == expected
    for s in d.stages:
        assert s.check.ok and s.check.model == "exponential"
    _recheck(job, d)
