"""The search's purpose prunes: each bound holds at every active vertex, and no design that
passes every vertex is dropped.

The prunes (:mod:`stockbias.search.purpose_bounds`): rows of R1/R2 (or RB) that break
rin_min, divider_ratio_min, supply_current_max or supply_power_max at one vertex, and the
free role RC narrowed by gain_min and gain_max.  Sources of the expected values: the
closed forms derived in the module notes of :mod:`stockbias.search.purpose_bounds` (node
equations of the hybrid-π stage, hand derivation), checked against the analysis engine's
own vertex evaluation (``evaluate`` at ``vertex_points``) on generated stages of both
polarities; soundness against the engine's full vertex screen (:mod:`vertex_reference`);
the row thresholds by hand calculation.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from vertex_reference import vertex_screen

from stockbias.analysis.small_signal import stage_response
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec, evaluate
from stockbias.analysis.worst_case import vertex_points
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.candidates import build_shelf
from stockbias.search.prepass import PLANS, free_role_bounds, materialise, row_cuts
from stockbias.search.purpose_bounds import (
    dead_rows,
    gain_max_conductance,
    gain_min_conductance,
)
from stockbias.topologies import get_network


def test_gain_closed_form_matches_node_solution():
    """v_c/v_b = (gₒ·gπ·R_E − gm)/D, D = G·(1 + (gπ + gm + gₒ)·R_E) + gₒ·(1 + gπ·R_E)
    (module notes of purpose_bounds, hand derivation) equals the engine's node solution."""
    rng = np.random.default_rng(11)
    n = 20000
    gm = 10 ** rng.uniform(-5, -0.5, n)
    beta = rng.uniform(10, 900, n)
    gpi = gm / beta
    r_load = 10 ** rng.uniform(1, 7, n)
    re = np.where(rng.random(n) < 0.2, 0.0, 10 ** rng.uniform(0, 5, n))
    ro = np.where(rng.random(n) < 0.2, np.inf, 10 ** rng.uniform(2, 8, n))
    gain, _ = stage_response(gm, gpi, r_load, re, ro)
    g, go = 1 / r_load, 1 / ro
    d = g * (1 + (gpi + gm + go) * re) + go * (1 + gpi * re)
    np.testing.assert_allclose(gain, (go * gpi * re - gm) / d, rtol=1e-9)


def _stage(network: str, q: Transistor, rng, n: int, load: float) -> StageSpec:
    net = get_network(network)
    res = {}
    for role in net.roles:
        v = 10 ** rng.uniform(2, 5.7, n)
        if role.name == "R2":
            v = v / 4
        res[role.name] = ResistorSpec(v, rng.choice([0.01, 0.05, 0.1], n),
                                      rng.choice([0.0, 0.004], n))
    return StageSpec(network=net, resistors=res, device=DeviceSpec.from_transistor(q),
                     vcc=15.0, vcc_tol=0.1, vee=-9.0 if net.supply == "dual" else None,
                     vee_tol=0.05, ambient_min_c=-20, ambient_max_c=70, model="constant_vbe",
                     load=load, re_bypassed=False)


TRANSISTORS = [
    Transistor("QN", "NPN", 60, 400, 40, 0.2, 0.5, vaf_v=20.0, icbo_a=5e-8, qty=1),
    Transistor("QP", "PNP", 90, 250, 40, 0.2, 0.5, vaf_v=80.0, icbo_a=1e-8, qty=1),
    Transistor("QI", "NPN", 120, 180, 40, 0.2, 0.5, qty=1),        # no VAF: rₒ = ∞
]


@pytest.mark.parametrize("network", ["divider", "dual_supply", "fixed_base"])
@pytest.mark.parametrize("q", TRANSISTORS, ids=[t.part_id for t in TRANSISTORS])
def test_bounds_hold_at_every_active_vertex(network, q):
    """Dense evaluation: at every active vertex of generated stages, rin ≤ R_bias, and the
    gain bounds of purpose_bounds bracket G = 1/(RC‖RL) for gain_min = gain_max = |gain|."""
    rng = np.random.default_rng(5)
    load = 10e3
    spec = _stage(network, q, rng, 600, load)
    point, _ = vertex_points(spec)
    with np.errstate(all="ignore"):
        ev = evaluate(spec, point)
    qs = ev.quantities
    active = ev.op.region == 0
    assert active.sum() > 2000              # the check is not vacuous
    r = {k: np.broadcast_to(v, ev.op.shape)[active] for k, v in point.r.items()}
    r_bias = (r["R1"] * r["R2"] / (r["R1"] + r["R2"]) if network == "divider" else r["RB"])
    assert np.all(qs["rin"][active] <= r_bias * (1 + 1e-12))
    gain = qs["gain_abs"][active]
    ic = np.abs(np.broadcast_to(qs["ic"], ev.op.shape)[active])
    temp = np.broadcast_to(ev.temp_c, ev.op.shape)[active]
    beta = np.broadcast_to(ev.beta, ev.op.shape)[active]
    g = 1 / r["RC"] + 1 / load
    checked = 0
    for t in np.unique(temp):           # the bound functions take one temperature each
        m = temp == t
        hi = gain_max_conductance(ic[m], float(t), beta[m], r["RE"][m], q.vaf_v, gain[m])
        assert np.all(g[m] >= hi * (1 - 1e-9))
        big = m & (gain >= 1.0)
        lo = gain_min_conductance(ic[big], float(t), beta[big], r["RE"][big], gain[big])
        assert np.all(g[big] <= lo * (1 + 1e-9))
        checked += int(big.sum())
    assert checked > 500


@pytest.mark.parametrize("q", TRANSISTORS, ids=[t.part_id for t in TRANSISTORS])
def test_divider_currents_at_the_leakage_free_vertices(q):
    """Where ICBO = 0: IB = IC/β, I(R2) ≤ VCC/(R1 + R2) and the supply current
    ≥ VCC/(R1 + R2) + IC (Thevenin divider with IB ≥ 0; module notes)."""
    rng = np.random.default_rng(8)
    spec = _stage("divider", q, rng, 600, 10e3)
    point, _ = vertex_points(spec)
    with np.errstate(all="ignore"):
        ev = evaluate(spec, point)
    shape = ev.op.shape
    sel = (ev.op.region == 0) & (np.broadcast_to(point.icbo, shape) == 0)
    assert sel.sum() > 1000
    r1 = np.broadcast_to(point.r["R1"], shape)[sel]
    r2 = np.broadcast_to(point.r["R2"], shape)[sel]
    vcc = np.broadcast_to(point.vcc, shape)[sel]
    ic = np.abs(ev.op.ic[sel])
    ib = np.abs(ev.op.ib[sel])
    np.testing.assert_allclose(ib * np.broadcast_to(ev.beta, shape)[sel], ic, rtol=1e-9)
    i2 = np.abs(np.asarray(ev.op.resistor_current("R2"))[sel])
    assert np.all(i2 <= vcc / (r1 + r2) * (1 + 1e-9))
    sup = np.broadcast_to(ev.quantities["supply_current"], shape)[sel]
    assert np.all(sup >= (vcc / (r1 + r2) + ic) * (1 - 1e-9))
    power = np.broadcast_to(ev.quantities["supply_power"], shape)[sel]
    assert np.all(np.abs(power) >= vcc * (vcc / (r1 + r2) + ic) * (1 - 1e-9))


ROW_JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1.5 mA"
ic_window_pct = 30
{target}
[limits]
{limits}
[environment]
ambient_min_c = 0
ambient_max_c = 55
[search]
topology = "divider"
"""


def _row(job, r1, r2, tol=0.0):
    q = Transistor("Q", "NPN", 100, 300, 40, 0.2, 0.5, xtb=0.0, qty=1)
    low = {"R1": np.array([r1 * (1 - tol)]), "R2": np.array([r2 * (1 - tol)])}
    high = {"R1": np.array([r1 * (1 + tol)]), "R2": np.array([r2 * (1 + tol)])}
    return bool(dead_rows(job, job.stage, "divider", q, low, high)[0])


def test_row_thresholds_by_hand():
    """Hand calculation: rin_min 5 kΩ needs R1‖R2 ≥ 5 kΩ at the low ends; ratio 10 with
    IC ≥ 1.05 mA and β ≥ 100 (XTB 0) needs R1 + R2 ≤ 11.4 V·100/(10·1.05 mA) = 108.57 kΩ
    at the high ends; 3 mA supply current needs 12.6 V/(R1 + R2) + 1.05 mA ≤ 3 mA, i.e.
    R1 + R2 ≥ 6.4615 kΩ at the low ends; 30 mW needs 12.6 V·(…) ≤ 30 mW, i.e.
    R1 + R2 ≥ 12.6/(30e-3/12.6 − 1.05e-3) = 9.4646 kΩ."""
    rin = parse_job(ROW_JOB.format(target='rin_min = "5 k"', limits=""))
    assert _row(rin, 10.1e3, 10.1e3) is False
    assert _row(rin, 9.9e3, 9.9e3) is True
    assert _row(rin, 10.3e3, 10.3e3, tol=0.05) is True      # low ends 9.785 kΩ each
    ratio = parse_job(ROW_JOB.format(target="divider_ratio_min = 10", limits=""))
    assert _row(ratio, 80e3, 28.5e3) is False               # 108.5 kΩ
    assert _row(ratio, 80e3, 28.7e3) is True                # 108.7 kΩ
    cur = parse_job(ROW_JOB.format(target="", limits='supply_current_max = "3 mA"'))
    assert _row(cur, 4.0e3, 2.47e3) is False                # 6.47 kΩ
    assert _row(cur, 4.0e3, 2.45e3) is True                 # 6.45 kΩ
    pw = parse_job(ROW_JOB.format(target="", limits='supply_power_max = "30 mW"'))
    assert _row(pw, 7.0e3, 2.47e3) is False                 # 9.47 kΩ
    assert _row(pw, 7.0e3, 2.46e3) is True                  # 9.46 kΩ


SHELF = [100, 220, 470, 1000, 1500, 2200, 3300, 4700, 6800, 10e3, 15e3, 22e3, 47e3, 100e3]

PRUNE_JOB = """
[supply]
volts = 12
tolerance_pct = 5
negative_volts = -9
[target]
ic = "{ic}"
ic_window_pct = {window}
vce_min = "1 V"
gain_min = {gmin}
gain_max = {gmax}
rin_min = "{rin}"
divider_ratio_min = 8
[limits]
supply_current_max = "{imax}"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[small_signal]
load = "10k"
re_bypassed = false
[search]
topology = "{t}"
"""


def _inventory(extra: tuple[float, ...]) -> Inventory:
    rs = tuple(Resistor(f"R{i}", v, 5.0 if i % 2 else 1.0, 0.25, 100.0, 100, 0.01, line=i)
               for i, v in enumerate([*SHELF, *extra]))
    qs = (Transistor("QN", "NPN", 100, 200, 40, 0.2, 0.5, vaf_v=60.0, qty=10),
          Transistor("QP", "PNP", 120, 260, 40, 0.2, 0.5, vaf_v=100.0, qty=10))
    return Inventory("<t>", rs, qs)


# (network, gain_min, gain_max, rin_min, supply_current_max, IC, window %, extra lines)
PRUNE_CASES = [("divider", 1.5, 4, "2.5k", "1.9 mA", "1 mA", 35, ()),
               ("divider", 2, 6, "1k", "5 mA", "1 mA", 35, ()),
               ("fixed_base", 0.3, 0.6, "100k", "5 mA", "1.3 mA", 45, (330e3, 470e3, 1e6)),
               ("dual_supply", 0.3, 0.6, "2k", "5 mA", "1 mA", 35, ())]


@pytest.mark.parametrize("case", PRUNE_CASES, ids=[f"{c[0]}-{i}"
                                                   for i, c in enumerate(PRUNE_CASES)])
def test_purpose_prunes_keep_every_design_that_passes(case):
    """Every assignment that passes every limit at every vertex (the engine's full screen)
    keeps its row and its RC; and the prunes do drop rows and RC values (not vacuous)."""
    network, gmin, gmax, rin, imax, ic, window, extra = case
    text = PRUNE_JOB.format(t=network, gmin=gmin, gmax=gmax, rin=rin, imax=imax, ic=ic,
                            window=window)
    job = parse_job(text)
    plain = parse_job(text
                      .replace(f"gain_min = {gmin}\ngain_max = {gmax}\nrin_min = \"{rin}\"\n"
                               "divider_ratio_min = 8\n", "")
                      .replace(f'supply_current_max = "{imax}"', ""))
    inv = _inventory(extra)
    net = get_network(network)
    plan = PLANS[network]
    cands = {r.name: build_shelf(job, inv).candidates(r.optional, False) for r in net.roles}
    roles = [r.name for r in net.roles]
    passing_total = dropped_rows = dropped_rc = 0
    env = job.environment
    for q in inv.transistors:
        rows = row_cuts(job, job.stage, network, q, cands)
        base = row_cuts(plain, plain.stage, network, q, cands)
        dropped_rows += int(np.sum((base.i1 > base.i0) & (rows.i1 == rows.i0)))
        cores = materialise(network, q, cands, rows)
        kept = set(zip(*(cores.idx[r] for r in (*plan.enumerated, plan.interval)),
                       strict=True))
        combos = np.array(list(itertools.product(*(range(len(cands[r])) for r in roles))))
        res, ratings = {}, {}
        for k, r in enumerate(roles):
            c, i = cands[r], combos[:, k]
            res[r] = ResistorSpec(c.value[i], c.tol[i], c.drift[i], band=(c.low[i], c.high[i]))
            ratings[r] = c.rating[i]
        spec = StageSpec(network=net, resistors=res, device=DeviceSpec.from_transistor(q),
                         vcc=12.0, vcc_tol=0.05, vee=job.supply.negative_volts,
                         vee_tol=job.supply.vee_tolerance_pct / 100,
                         ambient_min_c=env.ambient_min_c, ambient_max_c=env.ambient_max_c,
                         model="constant_vbe", load=10e3, re_bypassed=False)
        ok, _, _ = vertex_screen(job, job.stage, spec, ratings)
        passing = combos[ok]
        passing_total += len(passing)
        cols = [roles.index(r) for r in (*plan.enumerated, plan.interval)]
        for row in passing:
            assert tuple(int(row[c]) for c in cols) in kept
        if len(passing):
            sub = {r: passing[:, roles.index(r)] for r in (*plan.enumerated, plan.interval)}
            h, low_need, _ = free_role_bounds(job, job.stage, network, q, cands, sub)
            fc = cands[plan.free]
            rc = passing[:, roles.index(plan.free)]
            assert np.all(fc.high[rc] <= h * (1 + 1e-9))
            assert np.all(fc.low[rc] >= low_need * (1 - 1e-9))
        # RC values the gain bounds drop on the cores of the plain job
        pc = materialise(network, q, cands, base)
        if pc.ic_hi.size:
            h0, l0, _ = free_role_bounds(plain, plain.stage, network, q, cands, pc.idx)
            h1, l1, _ = free_role_bounds(job, job.stage, network, q, cands, pc.idx)
            fc = cands[plan.free]
            ok0 = (fc.high[None, :] <= h0[:, None]) & (fc.low[None, :] >= l0[:, None])
            ok1 = (fc.high[None, :] <= h1[:, None]) & (fc.low[None, :] >= l1[:, None])
            assert not np.any(ok1 & ~ok0)          # only ever narrower
            dropped_rc += int(np.sum(ok0 & ~ok1))
    assert passing_total > 0
    assert dropped_rc > 0
    assert dropped_rows > 0
