"""The pre-pass: its monotonicity facts, and that it never rejects a design that passes.

Monotonicity (constant VBE, active region) is what picks the few vertices the pre-pass
evaluates; each fact is checked here by finite differences at random points of a wide
box (source: the closed forms of DESIGN §2 and the network modules).  Soundness is
checked directly: every assignment the pre-pass drops fails at least one vertex of the
full enumeration (source: the analysis engine's vertex evaluation).
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.candidates import build_shelf
from stockbias.search.prepass import (
    PLANS,
    free_role_bounds,
    ie_terms,
    materialise,
    row_cuts,
    vertex_check,
)
from stockbias.topologies import get_network

N = 4000


def _random_point(rng, network):
    r = {role.name: 10 ** rng.uniform(2, 6, N) for role in get_network(network).roles}
    return dict(r=r, vcc=rng.uniform(5, 30, N), vee=rng.uniform(3, 15, N),
                beta=rng.uniform(20, 800, N), vbe=rng.uniform(0.5, 0.8, N),
                icbo=10 ** rng.uniform(-12, -7, N))


def _ic(network, p):
    net = get_network(network)
    rail_e = -p["vee"] if net.supply == "dual" else np.zeros(N)
    ib, ic, *_ = net.active_closed_form(p["r"], p["vcc"], rail_e, p["beta"], p["vbe"],
                                       p["icbo"])
    return ic, ic + ib


# (network, parameter, expected sign of dIC/dparameter)
FACTS = [
    *[(n, "beta", +1) for n in PLANS], *[(n, "icbo", +1) for n in PLANS],
    *[(n, "vbe", -1) for n in PLANS],
    ("divider", "vcc", +1), ("collector_feedback", "vcc", +1), ("fixed_base", "vcc", +1),
    ("dual_supply", "vee", +1), ("dual_supply", "vcc", 0), ("divider", "RC", 0),
    ("dual_supply", "RC", 0), ("fixed_base", "RC", 0),
    ("divider", "RE", -1), ("collector_feedback", "RC", -1), ("dual_supply", "RE", -1),
    ("fixed_base", "RE", -1), ("collector_feedback", "RE", -1), ("divider", "R1", -1),
]


@pytest.mark.parametrize(("network", "param", "sign"), FACTS)
def test_ic_monotone(network, param, sign, rng):
    p = _random_point(rng, network)
    if network == "divider" and param == "R1":
        p["icbo"] = np.zeros(N)          # the DESIGN §2 proof is without leakage
    ic0, ie0 = _ic(network, p)
    q = {**p, "r": dict(p["r"])}
    if param in q["r"]:
        q["r"][param] = q["r"][param] * 1.001
    else:
        q[param] = q[param] * 1.001
    ic1, _ = _ic(network, q)
    active = ie0 > 0
    d = (ic1 - ic0)[active]
    if sign == 0:
        assert np.allclose(d, 0.0, atol=1e-15)
    else:
        assert np.all(sign * d > -1e-15 * np.abs(ic0[active]))


def test_divider_ic_rises_with_r2_without_leakage(rng):
    """DESIGN §2: VCC·(RE + RBB/(β+1)) exceeds (VBB − VBE)·R1/(β+1), so dIC/dR2 > 0."""
    p = _random_point(rng, "divider")
    p["icbo"] = np.zeros(N)
    ic0, ie0 = _ic("divider", p)
    p["r"]["R2"] = p["r"]["R2"] * 1.001
    ic1, _ = _ic("divider", p)
    assert np.all((ic1 - ic0)[ie0 > 0] > 0)


@pytest.mark.parametrize("network", list(PLANS))
def test_ie_terms_match_closed_form(network, rng):
    p = _random_point(rng, network)
    plan = PLANS[network]
    _, ie = _ic(network, p)
    n_, d0 = ie_terms(network, p["r"], p["vcc"], p["vee"], p["beta"], p["vbe"], p["icbo"])
    x = p["r"][plan.interval]
    # source: the network's own closed form (IE = IB + IC)
    assert np.allclose(n_ / (d0 + x), ie, rtol=1e-12)


SHELF_VALUES = [470, 1000, 2200, 4700, 6800, 10e3, 22e3, 100e3, 330e3, 1e6]


def _inventory() -> Inventory:
    rs = tuple(Resistor(f"R{i}", v, 5.0 if i % 2 else 1.0, 0.25, 100.0, 100, 0.01, line=i)
               for i, v in enumerate(SHELF_VALUES))
    qs = (Transistor("QN", "NPN", 100, 160, 40, 0.2, 0.5, qty=10),
          Transistor("QP", "PNP", 120, 260, 40, 0.2, 0.5, qty=10))
    return Inventory("<t>", rs, qs)


JOB = """
[supply]
volts = 12
tolerance_pct = 5
negative_volts = -9
[target]
ic = "1 mA"
ic_window_pct = 30
vce_min = "1 V"
[environment]
ambient_min_c = 0
ambient_max_c = 60
[search]
topology = "{t}"
"""


@pytest.mark.parametrize("network", list(PLANS))
def test_prepass_never_drops_a_design_that_passes_every_vertex(network):
    job = parse_job(JOB.format(t=network))
    inv = _inventory()
    shelf = build_shelf(job, inv)
    net = get_network(network)
    cands = {r.name: shelf.candidates(r.optional, False) for r in net.roles}
    plan = PLANS[network]
    total = 0
    for q in inv.transistors:
        rows = row_cuts(job, job.stage, network, q, cands)
        cores = materialise(network, q, cands, rows)
        kept_cores = set(zip(*(cores.idx[r] for r in (*plan.enumerated, plan.interval)),
                             strict=True))
        roles = [r.name for r in net.roles]
        combos = np.array(list(itertools.product(*(range(len(cands[r])) for r in roles))))
        idx = {r: combos[:, k] for k, r in enumerate(roles)}
        chk = vertex_check(job, job.stage, network, q, {r: (cands[r], idx[r]) for r in roles})
        passing = combos[chk["ok"]]
        total += len(passing)
        core_cols = [roles.index(r) for r in (*plan.enumerated, plan.interval)]
        for row in passing:
            assert tuple(int(row[c]) for c in core_cols) in kept_cores
        if plan.free is not None and len(passing):
            # the free role's cut keeps every passing RC
            sub = {r: passing[:, roles.index(r)] for r in (*plan.enumerated, plan.interval)}
            h, low_need, _ = free_role_bounds(job, job.stage, network, q, cands, sub)
            fc = cands[plan.free]
            rc = passing[:, roles.index(plan.free)]
            assert np.all(fc.high[rc] <= h * (1 + 1e-9))
            assert np.all(fc.low[rc] >= low_need * (1 - 1e-9))
    if network != "fixed_base":
        assert total > 0          # the check is not vacuous
