"""Shortcuts of the single-stage search that must not change its answer.

* A search with pairs starts from κ of the same search over single parts (every
  single-part design is a design of the larger set): the designs and status equal those
  of the search with pairs started from ∞.  Expected values: the run from ∞.
* A search with pairs whose single parts' κ lies below every design holding a pair (on
  cost or part count, the first objective) takes the single-part search's ranking, with
  the free role's ranges listed from the table with pairs.  Expected values: the search
  with pairs run in full; the bound itself against a brute-force minimum over every
  assignment with a pair (numpy, written here).
* The interval role's candidates drawn level by level of an objective attribute give
  the same cores as listing the whole cut and filtering by the attribute.  Expected
  values: the unlevelled listing.
* The ranking of a single stage without a solver (:func:`pick_one`) gives the same
  objective values as the CP-SAT model, rank by rank.  Expected values: CP-SAT (OR-Tools,
  the version installed), on randomly generated design lists.
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np
import pytest

from stockbias.job import load_job
from stockbias.parts import Inventory, Resistor
from stockbias.samples import sample_path
from stockbias.search import design as design_module
from stockbias.search.candidates import SINGLE, build_shelf
from stockbias.search.deadline import Deadline
from stockbias.search.design import design
from stockbias.search.model import ModelDesign
from stockbias.search.prepass import PLANS, attribute_levels, materialise, row_cuts
from stockbias.search.solve import fits_stock, pick_one, solve_one
from stockbias.stock_io import read_inventory
from stockbias.topologies import get_network
from tests.test_search_bounded import generated_shelf, job_for, signature


def _pairs_job(objectives: str):
    job = job_for(objectives=objectives)
    return replace(job, build=replace(job.build, allow_pairs=True))


@pytest.mark.parametrize("objectives", ['["cost", "part_count", "distinct_values", "ic_margin"]',
                                        '["part_count", "cost", "ic_margin"]',
                                        '["distinct_values", "cost"]'])
def test_pairs_started_from_the_single_part_bound_give_the_same_designs(objectives,
                                                                        monkeypatch):
    inv = generated_shelf(22, 2, seed=5)
    job = _pairs_job(objectives)
    seeded = design(job, inv)
    assert seeded.stats.get("single_part_bound") == 1
    monkeypatch.setattr(design_module, "_single_part_bound", lambda *a, **k: None)
    unseeded = design(job, inv)
    assert seeded.status == "optimal"
    assert signature(seeded) == signature(unseeded)
    assert [len(d.variants) for d in seeded.designs] == [len(d.variants)
                                                         for d in unseeded.designs]


def test_levelled_cut_equals_the_filtered_cut():
    inv = generated_shelf(40, 1, seed=3)
    job = _pairs_job('["cost", "part_count"]')
    shelf = build_shelf(job, inv)
    cands = {r: shelf.candidates(r == "RE", True) for r in ("R1", "R2", "RC", "RE")}
    cands["R1"] = cands["R2"] = shelf.candidates(False, False)
    q = inv.transistors[0]
    rows = row_cuts(job, job.stage, "divider", q, cands)
    sel = np.flatnonzero(rows.i1 > rows.i0)
    assert sel.size > 100
    attr = cands[PLANS["divider"].interval].cost
    levels = attribute_levels(attr)
    assert levels is not None and len(levels) > 2
    rng = np.random.default_rng(7)
    limit = rng.choice(np.unique(attr), sel.size).astype(np.int64)
    plain = materialise("divider", q, cands, rows, sel, attr, limit)
    levelled = materialise("divider", q, cands, rows, sel, attr, limit, levels)
    assert plain.row.size > 0
    for r in plain.idx:
        np.testing.assert_array_equal(plain.idx[r], levelled.idx[r])
    np.testing.assert_array_equal(plain.ic_hi, levelled.ic_hi)
    np.testing.assert_array_equal(plain.ic_lo, levelled.ic_lo)


def _random_designs(rng: np.random.Generator, n: int, lines: int) -> list[ModelDesign]:
    out = []
    ids: dict[tuple[str, tuple[int, ...]], int] = {}
    for _ in range(n):
        roles, pieces, values, cost = {}, {}, {}, {}
        for role in ("R1", "R2", "RC", "RE"):
            k = int(rng.integers(1, 3))
            # a candidate's cost is a function of its lines (the model keys costs by candidate)
            ls = tuple(int(x) for x in rng.integers(0, lines, k))
            pieces[role] = ls
            values[role] = tuple(x % 5 for x in ls)
            roles[role] = ids.setdefault((role, ls), 1 + len(ids))
            cost[role] = sum(1000 + 500 * (x % 3) for x in ls)
        out.append(ModelDesign(0, int(rng.integers(0, 2)), roles, pieces, values,
                               int(rng.integers(-5, 5)) * 1000, 20_000, cost))
    return out


@pytest.mark.parametrize("seed", range(6))
def test_direct_pick_ranks_like_cp_sat(seed):
    rng = np.random.default_rng(seed)
    lines = 8
    designs = _random_designs(rng, 30, lines)
    qty = [int(x) for x in rng.choice([10, 20, 40], lines)]
    objectives = [("cost", "part_count", "distinct_values", "ic_margin"),
                  ("bom_lines", "cost"), ("ic_margin", "distinct_values", "part_count")][seed % 3]
    forbidden: set[int] = set()
    deadline = time.monotonic() + 60
    for _ in range(6):
        direct = pick_one(designs, objectives, qty, 10, forbidden)
        solved = solve_one(designs, objectives, qty, 10, forbidden, 1, deadline)
        if solved == "infeasible":
            assert direct == "infeasible"
            break
        assert direct.values == solved.values                   # CP-SAT's optimum
        assert fits_stock(designs[direct.design], qty, 10)
        forbidden.add(direct.design)
    assert forbidden


def test_a_cut_run_with_pairs_is_honest_and_states_its_bound_in_currency():
    """A search with pairs that a deadline (counted in checks, no clock) stops: never
    ``optimal``; designs re-verified and never better than the uncut optimum; a stated
    bound on cost is per board in currency (the parts here cost 0.001–0.03 each), at most
    the best design's cost.  Expected values: the uncut run."""
    from stockbias.search.deadline import Deadline

    inv = generated_shelf(40, 3, seed=8)
    job = _pairs_job('["cost", "part_count", "distinct_values", "ic_margin"]')
    full = design(job, inv)
    assert full.status == "optimal"
    best = full.designs[0].cost_micro
    seen, bounds = set(), []
    for n in (1, 3, 8, 20, 40, 80, 160, 320):
        r = design(job, inv, deadline=Deadline.after_checks(n))
        if r.stats["prepass_cut"] is None and not r.stats["unverified_networks"]:
            assert r.status == "optimal"
            continue
        # cut in the search, or in the final checks after it (networks left unchecked)
        assert r.status in ("feasible", "unknown")
        assert (r.status == "unknown") == (not r.designs)
        for d in r.designs:
            assert d.check.ok and d.cost_micro >= best
        if "cost" in r.bound:
            bounds.append(r.bound["cost"])
            assert 0 < r.bound["cost"] <= full.designs[0].cost + 1e-12
        seen.add(r.status)
    assert "feasible" in seen or "unknown" in seen


def test_a_search_cut_before_any_design_names_where_the_time_went():
    """The advice of an ``unknown`` run names the phase and the size of the problem
    (not only 'raise the limit'); a board cut before any option says 'none of N'."""
    from stockbias.job import parse_job
    from stockbias.search.board import design_board
    from stockbias.search.deadline import Deadline
    from tests.test_search_bounded import BOARD

    inv = generated_shelf(60, 3, seed=4)
    r = design(job_for(), inv, deadline=Deadline.after_checks(1))
    assert r.status == "unknown" and r.explanation.binding == "time_limit"
    assert ("while scanning the rows of the IC-setting resistors (60 resistor lines and 3 "
            "usable transistors)") in r.explanation.message
    board, shelf70 = parse_job(BOARD, "<board>"), generated_shelf(70, 2, seed=6)
    b = design_board(board, shelf70, deadline=Deadline.after_checks(1))
    assert b.status == "unknown"
    reason = b.to_dict()["explanation"]["reason"]
    assert reason == ("the time limit ran out before any board was found, while listing the "
                      "options of stages 'input', 'driver'")
    # an option list cut before its first row says so in words
    from stockbias.search.board import prepass_cut, stage_job
    from stockbias.search.board_model import StageSetup
    from stockbias.search.board_options import stage_options
    from stockbias.search.candidates import build_shelf

    st = board.stages[0]
    shelf = build_shelf(board, shelf70, pairs=False)
    cands = {r: shelf.candidates(False, False) for r in ("R1", "R2", "RC", "RE")}
    cut = stage_options(stage_job(board, st), st, 0, "divider", shelf70.transistors[0], cands,
                        Deadline.after_checks(1), row_budget=200)
    assert not cut.complete and cut.rows_done == 0
    assert prepass_cut([StageSetup("input", [cut])]) == (
        "the time limit cut the pre-pass, so the status is not a proof: stage 'input' "
        f"divider with {shelf70.transistors[0].part_id}: none of 70 R1 candidates scanned")


def test_a_single_stage_design_does_not_load_the_solver(tmp_path):
    """A one-stage design ranks without CP-SAT, so OR-Tools (and the pandas it pulls in)
    is never imported; checked in a fresh interpreter."""
    import subprocess
    import sys
    from pathlib import Path

    samples = Path(__file__).resolve().parent.parent / "inventory_samples"
    code = ("import sys\n"
            "from stockbias import load_inventory, load_job\n"
            "from stockbias.search.design import design\n"
            f"r = design(load_job({str(samples / 'line_driver_job.toml')!r}), "
            f"load_inventory({str(samples / 'workshop_drawers.csv')!r}))\n"
            "print(r.status, len(r.designs), 'ortools' in sys.modules, 'pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.split()
    assert out == ["optimal", "5", "False", "False"]      # five ranked designs, no solver


def _ranges(result) -> list:
    return [d.variant_range() for d in result.designs]


@pytest.mark.parametrize(("case", "objectives"), [
    ((22, 2, 5), '["part_count", "cost", "ic_margin"]'),
    ((26, 2, 2), '["part_count", "cost", "ic_margin"]'),
    ("line-driver", None)])
def test_pairs_ruled_out_by_the_bound_give_the_same_designs(case, objectives, monkeypatch):
    if case == "line-driver":
        job = load_job(sample_path("line_driver_job.toml"))
        job = replace(job, build=replace(job.build, allow_pairs=True),
                      search=replace(job.search, time_limit_s=600.0))
        inv = read_inventory(sample_path("stockroom_e96_reels.csv"))
    else:
        job, inv = _pairs_job(objectives), generated_shelf(case[0], case[1], seed=case[2])
    short = design(job, inv)
    assert short.stats["pairs_ruled_out_by_bound"], "each case is one the bound settles"
    assert any(a.startswith("pairs: every design with a series or parallel pair")
               for a in short.assumptions)
    monkeypatch.setattr(design_module, "_pair_floor", lambda s: None)
    full = design(job, inv)
    assert not full.stats["pairs_ruled_out_by_bound"]
    assert short.status == full.status == "optimal"
    assert signature(short) == signature(full)
    assert _ranges(short) == _ranges(full)
    assert [len(d.variants) for d in short.designs] == [len(d.variants) for d in full.designs]


def test_the_pair_floor_is_the_least_design_with_a_pair():
    rng = np.random.default_rng(4)
    for objectives, topology in (('["cost", "part_count"]', "divider"),
                                 ('["part_count", "cost"]', "divider"),
                                 ('["cost", "part_count"]', "fixed_base"),
                                 ('["part_count", "cost"]', "fixed_base")):
        res = tuple(Resistor(f"F{i}", float(v), 1.0, 0.25, 100.0, 100,
                             float(rng.choice([0.001, 0.004, 0.007])), line=i + 2)
                    for i, v in enumerate(np.sort(10 ** rng.uniform(2, 5, 5))))
        base = generated_shelf(4, 2, seed=9)
        inv = Inventory("<floor>", res, base.transistors)
        job = job_for(topology, objectives=objectives)
        job = replace(job, build=replace(job.build, allow_pairs=True))
        s = design_module._Search(job, inv, 3, Deadline(600.0), None)
        floor = design_module._pair_floor(s)
        col = "cost" if objectives.startswith('["cost"') else "parts"
        # brute force over every assignment of the network's roles (an optional one may be
        # absent) with a pair in at least one
        roles = get_network(topology).roles
        tabs = [s.shelf.candidates(r.optional, True) for r in roles]
        total, any_pair = np.zeros(()), np.zeros((), dtype=bool)
        for t in tabs:
            total = total[..., None] + getattr(t, col)
            any_pair = any_pair[..., None] | (t.arrangement > SINGLE)
        q = min(round(t.unit_cost * 1e6) for t in s.transistors) if col == "cost" else 1
        assert floor == q + int(total[any_pair].min())
