"""A board stage's options cover every design that passes every vertex (soundness), and
the screens do cut (they are not the whole cross product).

Reference: every assignment of stock lines to the divider's four roles, evaluated at
every vertex with the analysis engine (tests/vertex_reference.py, no search code).
Jobs where the screened limits bind: supply power, resistor dissipation (low-rated
lines), a swing requirement (the free role's lower bound) and a tight headroom.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from vertex_reference import vertex_screen

from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.job import parse_job
from stockbias.parts import Resistor, Transistor
from stockbias.search.board_options import stage_options
from stockbias.search.candidates import build_shelf
from stockbias.topologies import get_network

ROLES = ("R1", "R2", "RC", "RE")

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "{ic}"
ic_window_pct = 30
vce_min = "{vce}"
{swing}
[limits]
supply_power_max = "{pmax}"
[environment]
ambient_min_c = 0
ambient_max_c = 60
[small_signal]
load = "10k"
[build]
quantity = 5
"""

VALUES = [220.0, 470.0, 1000.0, 2200.0, 3300.0, 4700.0, 10e3, 22e3, 47e3, 100e3]


def _lines(seed: int) -> tuple[Resistor, ...]:
    rng = np.random.default_rng(seed)
    return tuple(Resistor(f"L{i}", v, float(rng.choice([1.0, 5.0])),
                          float(rng.choice([0.063, 0.125, 0.25])),
                          float(rng.choice([50.0, 250.0])), 100, 0.01, line=i + 2)
                 for i, v in enumerate(VALUES))


Q = Transistor("QT", "NPN", 100.0, 300.0, 40.0, 0.2, 0.5, vbe_min=0.6, vbe_max=0.7,
               qty=50, theta_ja=200.0)

CASES = [
    {"ic": "1 mA", "vce": "3 V", "swing": "", "pmax": "30 mW", "seed": 1},
    {"ic": "2 mA", "vce": "2 V", "swing": "", "pmax": "40 mW", "seed": 2},
    {"ic": "1 mA", "vce": "2 V", "swing": 'swing_pk = "1 V"', "pmax": "60 mW", "seed": 3},
    {"ic": "4 mA", "vce": "4 V", "swing": "", "pmax": "100 mW", "seed": 4},
]


@pytest.mark.parametrize("case", CASES, ids=[f"seed{c['seed']}" for c in CASES])
def test_options_cover_every_vertex_feasible_design(case: dict) -> None:
    job = parse_job(JOB.format(**case), "<job>")
    lines = _lines(case["seed"])
    from stockbias.parts import Inventory

    inv = Inventory("<lines>", lines, (Q,))
    shelf = build_shelf(job, inv, pairs=False)
    net = get_network("divider")
    cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
    opts = stage_options(job, job.stage, 0, "divider", Q, cands)
    offered = set()
    for k in range(opts.size):
        for d in opts.designs(k):
            offered.add(tuple(int(cands[r].line_a[d[r]]) for r in ROLES))
    # reference: every assignment at every vertex
    combos = np.array(list(itertools.product(range(len(shelf.lines)), repeat=4)))
    span = 35.0
    val = np.array([r.value_ohm for r in shelf.lines])
    tol = np.array([r.tolerance_pct / 100 for r in shelf.lines])
    drift = np.array([(r.tempco_ppm or 0.0) * 1e-6 * span for r in shelf.lines])
    rating = np.array([r.power_w for r in shelf.lines])
    spec = StageSpec(network=net, resistors={role: ResistorSpec(val[combos[:, k]],
                                                                tol[combos[:, k]],
                                                                drift[combos[:, k]])
                                             for k, role in enumerate(ROLES)},
                     device=DeviceSpec.from_transistor(Q), vcc=12.0, vcc_tol=0.05, vee=None,
                     vee_tol=0.0, ambient_min_c=0.0, ambient_max_c=60.0, model="constant_vbe",
                     load=10e3, re_bypassed=True)
    ok, _, _ = vertex_screen(job, job.stage, spec,
                             {role: rating[combos[:, k]] for k, role in enumerate(ROLES)})
    feasible = {tuple(int(x) for x in combos[i]) for i in np.flatnonzero(ok)}
    assert feasible, "the case must have feasible designs to be a test"
    assert feasible <= offered                       # soundness: nothing feasible is lost
    assert len(offered) < 0.2 * len(combos)          # and the screens prune the box


def test_collector_feedback_options_are_exactly_the_vertex_feasible_designs() -> None:
    """No free role: every option is a whole design, screened at every vertex at build time,
    so the options equal the reference's vertex-feasible set (not only contain it)."""
    from stockbias.parts import Inventory

    job = parse_job(JOB.format(ic="1 mA", vce="0.8 V", swing="", pmax="60 mW")
                    + '[search]\ntopology = "collector_feedback"\n', "<job>")
    inv = Inventory("<lines>", _lines(7), (Q,))
    shelf = build_shelf(job, inv, pairs=False)
    net = get_network("collector_feedback")
    cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
    opts = stage_options(job, job.stage, 0, "collector_feedback", Q, cands)
    names = [r.name for r in net.roles]
    offered = {tuple(int(cands[r].line_a[opts.core[r][k]]) for r in names)
               for k in range(opts.size)}
    # reference over every assignment (-1: the optional role left out)
    choices = [([-1] if net.role(r).optional else []) + list(range(len(shelf.lines)))
               for r in names]
    combos = np.array(list(itertools.product(*choices)))
    span = 35.0

    def col(attr: str, k: int, absent: float) -> np.ndarray:
        vals = np.array([getattr(r, attr) or 0.0 for r in shelf.lines], dtype=float)
        return np.where(combos[:, k] < 0, absent, vals[np.maximum(combos[:, k], 0)])

    res = {r: ResistorSpec(col("value_ohm", k, 0.0), col("tolerance_pct", k, 0.0) / 100,
                           col("tempco_ppm", k, 0.0) * 1e-6 * span)
           for k, r in enumerate(names)}
    spec = StageSpec(network=net, resistors=res, device=DeviceSpec.from_transistor(Q),
                     vcc=12.0, vcc_tol=0.05, vee=None, vee_tol=0.0, ambient_min_c=0.0,
                     ambient_max_c=60.0, model="constant_vbe", load=10e3, re_bypassed=True)
    ok, _, _ = vertex_screen(job, job.stage, spec,
                             {r: col("power_w", k, 0.0) for k, r in enumerate(names)})
    feasible = {tuple(int(x) for x in combos[i]) for i in np.flatnonzero(ok)}
    assert feasible
    assert offered == feasible
