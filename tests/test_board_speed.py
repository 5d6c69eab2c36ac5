"""The board search's shortcuts lose nothing.

* ``keep_purpose.screen_options`` takes the nominal-point limits (the gain band an existing
  stage sets) before the vertex check: its survivors must be exactly the designs of the
  stage's options that ``vertex_check`` passes when it is run on every design (no
  shortcut), and the gain band must actually bind in the case.
* With ``model = "exponential"`` a stage's options come from the same cuts as the
  single-stage search (no assignment limit): they must hold exactly the designs that pass
  every vertex among every assignment of the stock lines (enumerated here).
* A cost step whose incumbent already reaches the sum of each stage's cheapest option is
  taken as proven without a solve: on a board where that happens, the result must still
  be the exhaustive optimum (tests/test_board_search.py's enumeration).
"""

from __future__ import annotations

import itertools
from dataclasses import replace

import numpy as np

from stockbias.analysis.check import analyze_stage
from stockbias.assign import ResolvedResistor
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.board_options import stage_options
from stockbias.search.candidates import build_shelf
from stockbias.search.keep_purpose import screen_options
from stockbias.search.prepass import nominal_check, vertex_check
from stockbias.topologies import get_network

# invented test data: a 12 V stage and an E12-like shelf of 5 % and 1 % lines
JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1.2 mA"
ic_window_pct = 30
vce_min = "2 V"
[environment]
ambient_min_c = 0
ambient_max_c = 55
[small_signal]
load = "22k"
re_bypassed = false
[build]
quantity = 5
"""
VALUES = [150.0, 330.0, 470.0, 680.0, 1000.0, 1500.0, 2200.0, 3300.0, 4700.0, 6800.0,
          10e3, 15e3, 22e3, 33e3, 47e3, 68e3, 100e3]
Q = Transistor("QA", "NPN", 110.0, 330.0, 40.0, 0.2, 0.5, vbe_min=0.6, vbe_max=0.7, qty=50,
               theta_ja=250.0)
QE = replace(Q, part_id="QE", theta_ja=None)      # exponential cases: no self-heated solve


def _inventory() -> Inventory:
    rng = np.random.default_rng(11)
    lines = tuple(Resistor(f"L{i}", v, float(rng.choice([1.0, 5.0])), 0.25, 100.0, 100, 0.01,
                           line=i + 2) for i, v in enumerate(VALUES))
    return Inventory("<lines>", lines, (Q,))


def _designs(g) -> dict[str, np.ndarray]:
    """Every design of every option, as role → candidate index arrays."""
    rows = [d for k in range(g.size) for d in g.designs(k)]
    return {r: np.array([d[r] for d in rows], dtype=np.int64) for r in rows[0]}


def test_screen_options_nominal_first_equals_vertex_check_of_every_design() -> None:
    job = parse_job(JOB, "<job>")
    inv = _inventory()
    shelf = build_shelf(job, inv, pairs=False)
    net = get_network("divider")
    cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
    opts = stage_options(job, job.stage, 0, "divider", Q, cands)
    every = _designs(opts)
    # today's design: the first design of the options that passes the full check; its
    # nominal |gain| ±10 % is the band (as consolidation holds it)
    ok_all = vertex_check(job, job.stage, "divider", Q,
                          {r: (cands[r], v) for r, v in every.items()})["ok"]
    assert ok_all.any()
    stage = job.stage
    for i in np.flatnonzero(ok_all)[:20]:
        parts = {r: ResolvedResistor.of_part(r, shelf.lines[int(cands[r].line_a[v[i]])])
                 for r, v in every.items()}
        ref = analyze_stage(job, job.stage, parts, Q, samples=0)
        if ref.ok:
            g = abs(float(ref.purpose["gain"].nominal))
            stage = replace(job.stage, target=replace(job.stage.target,
                                                      gain_nominal_min=0.9 * g,
                                                      gain_nominal_max=1.1 * g))
            break
    assert stage is not job.stage, "no passing design to take as today's"
    held = replace(job, stages=(stage,))
    screened = screen_options(held, stage, opts)
    kept = set(zip(*(v.tolist() for v in _designs(screened).values()), strict=True)) \
        if screened.size else set()
    roles = {r: (cands[r], v) for r, v in every.items()}
    direct = vertex_check(held, stage, "divider", Q, roles)["ok"]
    expect = {d for d, ok in zip(zip(*(v.tolist() for v in every.values()), strict=True),
                                 direct.tolist(), strict=True) if ok}
    assert expect, "the band must leave designs to be a test"
    assert kept == expect
    # the band binds: the nominal shortcut rejects designs the vertices alone would pass
    nominal = nominal_check(held, stage, "divider", Q, roles)
    assert (~nominal & ok_all).any()
    assert not (direct & ~nominal).any()        # never keeps what the nominal check drops


def _exp_job(extra: str = "") -> object:
    job = parse_job(JOB + '[search]\nmodel = "exponential"\n' + extra, "<job>")
    assert job.search.model == "exponential"
    return job


def test_exponential_options_are_exactly_the_vertex_feasible_assignments() -> None:
    job = _exp_job()
    lines = _inventory().resistors[3:13]            # 10 lines: 10⁴ assignments
    inv = Inventory("<lines>", lines, (QE,))
    shelf = build_shelf(job, inv, pairs=False)
    net = get_network("divider")
    cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
    opts = stage_options(job, job.stage, 0, "divider", QE, cands)
    offered = set(zip(*(v.tolist() for v in _designs(opts).values()), strict=True))
    roles = tuple(_designs(opts))
    # reference: every assignment of the candidate tables, checked at every vertex
    grid = np.array(list(itertools.product(*(range(len(cands[r])) for r in roles))))
    ok = vertex_check(job, job.stage, "divider", QE,
                      {r: (cands[r], grid[:, k]) for k, r in enumerate(roles)})["ok"]
    expect = {tuple(int(x) for x in grid[i]) for i in np.flatnonzero(ok)}
    assert expect, "the case must have feasible designs to be a test"
    assert offered == expect
    assert len(grid) > 20 * len(expect)             # and the case prunes


def test_exponential_options_have_no_assignment_limit() -> None:
    """24 lines: 331,776 assignments per transistor, above the 200,000 the enumeration took;
    the cuts list the options, and every one passes the vertex check."""
    job = _exp_job()
    rng = np.random.default_rng(3)
    values = [100.0 * 10 ** (i / 8) for i in range(24)]      # 100 Ω … 75 kΩ, 8 per decade
    lines = tuple(Resistor(f"M{i}", round(v, 1), float(rng.choice([1.0, 5.0])), 0.25, 100.0,
                           100, 0.01, line=i + 2) for i, v in enumerate(values))
    inv = Inventory("<lines>", lines, (QE,))
    shelf = build_shelf(job, inv, pairs=False)
    cands = {r.name: shelf.candidates(r.optional, False) for r in get_network("divider").roles}
    assert np.prod([len(c) for c in cands.values()]) > 200_000
    opts = stage_options(job, job.stage, 0, "divider", QE, cands)
    every = _designs(opts)
    assert 0 < len(every["R1"]) < 20_000
    assert vertex_check(job, job.stage, "divider", QE,
                        {r: (cands[r], v) for r, v in every.items()})["ok"].all()


def test_step_at_the_summed_lower_bound_is_the_exhaustive_optimum() -> None:
    import test_board_search as ref

    from stockbias.search.board import design_board

    seed, n_lines, n_q, build, obj, stages, temps = ref.CASES[2]   # distinct_values, cost
    inv = ref._shelf(seed, n_lines, n_q, build)
    job = ref._board(ref.OBJECTIVE_SETS[obj], build, stages, temps)
    expected, _combo, _ = ref._exhaustive(job, inv)
    result = design_board(job, inv, top=1)
    assert ("cost", 0.0, "AT_LOWER_BOUND") in result.stats["solver_steps"]
    assert result.status == "optimal"
    # source: the exhaustive enumeration of tests/test_board_search.py (exact vectors)
    assert ref._key(job.search.objectives, build, ref._board_of(result.designs[0])) == expected


def test_exponential_board_without_the_vertex_screen_is_the_exhaustive_optimum(monkeypatch
                                                                               ) -> None:
    """Above ``EXP_SCREEN_MAX`` designs the options are the cuts alone (a superset of the
    designs that pass), and the board must still be the exhaustive optimum
    (tests/test_board_search.py's enumeration with the exponential model), every stage
    confirmed by the full check."""
    import test_board_search as ref

    from stockbias.search import board_options
    from stockbias.search.board import design_board

    monkeypatch.setattr(board_options, "EXP_SCREEN_MAX", 0)
    seed, n_lines, n_q, build, obj, stages, temps = ref.EXP_CASES[0]
    inv = ref._shelf(seed, n_lines, n_q, build)
    job = ref._board(ref.OBJECTIVE_SETS[obj], build, stages, temps)
    job = replace(job, search=replace(job.search, model="exponential"))
    expected, _combo, _ = ref._exhaustive(job, inv)
    result = design_board(job, inv, top=1)
    assert result.status == "optimal"
    assert ref._key(job.search.objectives, build, ref._board_of(result.designs[0])) == expected
    ref._recheck(job, result.designs[0])
