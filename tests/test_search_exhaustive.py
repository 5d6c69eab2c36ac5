"""The search's optimum equals an exhaustive search written here with the same model.

Generated small shelves (8–20 resistor lines, 2–4 transistors, seeded): some
infeasible, some where the best design repeats a value, some with quantity limits
that bind.  The reference enumerates EVERY assignment of stock lines to roles ×
transistor, evaluates each at every vertex of the tolerance box with the analysis
engine (no search code), applies the stock rule (uses × build quantity ≤ qty) and
the objective order, and confirms the best ones with ``analyze_stage`` (the path
``check`` uses).  The top K are K distinct bias networks (the transistor and every role
but RC in the divider, dual supply and fixed base; every role in collector feedback):
the reference takes, in key order, the first design of each network that passes the full
check.  Source of the expected values: this exhaustive enumeration, grouped by network.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from vertex_reference import vertex_screen

from stockbias.analysis.check import analyze_stage
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.assign import ResolvedResistor
from stockbias.eseries import series_values
from stockbias.job import Job, parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.design import design
from stockbias.topologies import get_network

JOB = """
[supply]
volts = {vcc}
tolerance_pct = 5
{vee}
[target]
ic = "{ic}"
ic_window_pct = {window}
vce_min = "{vce_min}"
[limits]
supply_power_max = "{pmax}"
[environment]
ambient_min_c = {tmin}
ambient_max_c = {tmax}
[build]
quantity = {build}
[search]
topology = "{topology}"
objectives = {objectives}
top = 3
"""

NARROW = ("collector_feedback", "fixed_base")

#: the role whose values are variants of one network (it does not set IC)
FREE_ROLE = {"divider": "RC", "dual_supply": "RC", "fixed_base": "RC",
             "collector_feedback": None}


def _network(net_name: str, q: Transistor, assign) -> tuple:
    """A design's bias network: topology, transistor and the parts of the IC-setting roles."""
    return (net_name, q.part_id, tuple((r, x) for r, x in assign if r != FREE_ROLE[net_name]))

OBJECTIVE_SETS = [
    ["cost", "part_count", "distinct_values", "ic_margin"],
    ["distinct_values", "cost", "ic_margin"],
    ["bom_lines", "ic_margin", "cost"],
    ["ic_margin", "cost"],
]

# (seed, topology, lines, transistors, window %, build, objectives index, temperature range)
CASES = [
    (1, "divider", 9, 2, 25, 5, 0, (25, 25)),
    (2, "divider", 9, 2, 30, 10, 1, (0, 50)),
    (3, "divider", 8, 4, 4, 5, 0, (25, 25)),        # window too tight: infeasible
    (4, "divider", 10, 2, 30, 20, 0, (25, 25)),     # stock binds (a line used twice)
    (5, "collector_feedback", 16, 3, 45, 5, 0, (0, 60)),
    (6, "collector_feedback", 18, 2, 50, 10, 2, (25, 25)),
    (7, "fixed_base", 18, 3, 60, 5, 3, (25, 25)),
    (8, "fixed_base", 20, 3, 35, 5, 0, (10, 40)),
    (9, "dual_supply", 14, 3, 20, 5, 1, (25, 25)),
    (10, "dual_supply", 18, 2, 25, 10, 0, (0, 50)),
    (11, "divider", 9, 3, 22, 5, 1, (25, 25)),      # duplicate values on the shelf
    (12, "any", 8, 2, 30, 5, 0, (25, 25)),
    (13, "collector_feedback", 12, 2, 3, 5, 0, (25, 25)),   # infeasible
    (14, "divider", 10, 2, 28, 10, 2, (25, 25)),
]


def _shelf(seed: int, n_lines: int, n_q: int, build: int, narrow: bool = False) -> Inventory:
    rng = np.random.default_rng(seed)
    pool = series_values("E24", 1e3, 1e6) if narrow else series_values("E12", 100.0, 100e3)
    values = rng.choice(pool, size=n_lines, replace=seed != 11)
    resistors = []
    for i, v in enumerate(sorted(values)):
        tol = float(rng.choice([1.0, 2.0, 5.0]))
        qty = int(rng.choice([build, 2 * build, 3 * build])) if seed != 4 else build
        resistors.append(Resistor(part_id=f"R{i:02d}", value_ohm=float(v), tolerance_pct=tol,
                                  power_w=0.25, tempco_ppm=float(rng.choice([0.0, 100.0])),
                                  qty=qty, unit_cost=float(rng.choice([0.01, 0.02, 0.05])),
                                  line=i + 2))
    transistors = []
    for j in range(n_q):
        lo = float(rng.choice([80, 100, 150]))
        transistors.append(Transistor(
            part_id=f"Q{j}", polarity="NPN" if j % 2 == 0 else "PNP", hfe_min=lo,
            hfe_max=lo * float(rng.choice([1.3, 2.0, 3.0])), vceo_max=40.0, ic_max=0.1,
            pd_max_w=0.5, vbe_min=0.6, vbe_max=0.72, qty=100,
            unit_cost=float(rng.choice([0.03, 0.05])), line=100 + j))
    return Inventory(path=f"<shelf {seed}>", resistors=tuple(resistors),
                     transistors=tuple(transistors))


def _job(seed, topology, window, build, objectives, temps) -> Job:
    dual = topology in ("dual_supply", "any")
    text = JOB.format(vcc=12, vee="negative_volts = -6" if dual else "", ic="1 mA",
                      window=window, vce_min="2 V", pmax="80 mW", tmin=temps[0], tmax=temps[1],
                      build=build, topology=topology,
                      objectives="[" + ", ".join(f'"{o}"' for o in objectives) + "]")
    return parse_job(text, f"<job {seed}>")


def _spec(job: Job, network: str, q: Transistor, arrays: dict) -> StageSpec:
    env = job.environment
    return StageSpec(network=get_network(network), resistors=arrays,
                     device=DeviceSpec.from_transistor(q), vcc=job.supply.volts,
                     vcc_tol=job.supply.tolerance_pct / 100, vee=job.supply.negative_volts,
                     vee_tol=job.supply.vee_tolerance_pct / 100,
                     ambient_min_c=env.ambient_min_c, ambient_max_c=env.ambient_max_c,
                     model=job.search.model, load=job.small_signal.load,
                     re_bypassed=job.small_signal.re_bypassed)


def _exhaustive(job: Job, inv: Inventory, top: int):
    """Every assignment, every vertex; then analyze_stage on the best until `top` pass."""
    st = job.stage
    t = st.target
    span = max(abs(job.environment.ambient_min_c - 25), abs(job.environment.ambient_max_c - 25))
    lines = [r for r in inv.resistors if r.qty >= job.build.quantity]
    nets = ["divider", "collector_feedback", "fixed_base", "dual_supply"] \
        if st.topology == "any" else [st.topology]
    found = []
    for net_name in nets:
        net = get_network(net_name)
        choices = [list(range(len(lines))) + ([None] if role.optional else [])
                   for role in net.roles]
        combos = list(itertools.product(*choices))
        for q in inv.transistors:
            arrays = {}
            for k, role in enumerate(net.roles):
                idx = [c[k] for c in combos]
                v = np.array([0.0 if i is None else lines[i].value_ohm for i in idx])
                tol = np.array([0.0 if i is None else lines[i].tolerance_pct / 100 for i in idx])
                dr = np.array([0.0 if i is None else (lines[i].tempco_ppm or 0) * 1e-6 * span
                               for i in idx])
                arrays[role.name] = ResistorSpec(v, tol, dr)
            spec = _spec(job, net_name, q, arrays)
            ratings = {role.name: np.array([0.0 if c[k] is None else lines[c[k]].power_w
                                            for c in combos])
                       for k, role in enumerate(net.roles)}
            ok, low, high = vertex_screen(job, st, spec, ratings)
            icm = np.minimum(low["ic"] - t.ic_min, t.ic_max - high["ic"]) / t.ic
            for i in np.flatnonzero(ok):
                used = [lines[x] for x in combos[i] if x is not None]
                counts = {}
                for r in used:
                    counts[r.part_id] = counts.get(r.part_id, 0) + 1
                if any(r.qty < counts[r.part_id] * job.build.quantity for r in used):
                    continue
                cost = round(q.unit_cost * 1e6) + sum(round(r.unit_cost * 1e6) for r in used)
                vals = {"cost": cost, "part_count": 1 + len(used),
                        "distinct_values": len({r.value_ohm for r in used}),
                        "bom_lines": 1 + len({r.part_id for r in used}),
                        "ic_margin": -math.floor(icm[i] * 1e6 + 1e-6)}
                key = tuple(vals[o] for o in job.search.objectives)
                found.append((key, net_name, q, [(role.name, combos[i][k])
                                                 for k, role in enumerate(net.roles)]))
    found.sort(key=lambda x: x[0])
    best, nets = [], set()
    for key, net_name, q, assign in found:
        if _network(net_name, q, assign) in nets:
            continue
        parts = {role: _resolved(role, lines[i]) for role, i in assign if i is not None}
        if analyze_stage(job, st, parts, q, samples=0, topology=net_name).ok:
            best.append(key)
            nets.add(_network(net_name, q, assign))
            if len(best) == top:
                break
    return best


def _resolved(role: str, r: Resistor) -> ResolvedResistor:
    return ResolvedResistor(role=role, value=r.value_ohm, tol=r.tolerance_pct / 100,
                            tempco_ppm=r.tempco_ppm or 0.0, rating=r.power_w, parts=(r,))


def _result_networks(result) -> list[tuple]:
    """Each ranked design's network, from its parts (ids and arrangement of every role that
    sets IC)."""
    return [(d.topology, d.transistor.part_id,
             tuple(sorted((r, tuple(p.part_ids), p.arrangement)
                          for r, p in d.check.parts.items() if r != FREE_ROLE[d.topology])))
            for d in result.designs]


def _search_keys(job: Job, result) -> list[tuple]:
    out = []
    for d in result.designs:
        vals = {"cost": d.cost_micro, "part_count": d.part_count,
                "distinct_values": d.distinct_values, "bom_lines": d.bom_lines,
                "ic_margin": -math.floor(d.ic_margin * 1e6 + 1e-6)}
        out.append(tuple(vals[o] for o in job.search.objectives))
    return out


@pytest.mark.parametrize("case", CASES, ids=[f"seed{c[0]}-{c[1]}" for c in CASES])
def test_optimum_matches_exhaustive(case):
    seed, topology, n_lines, n_q, window, build, obj, temps = case
    inv = _shelf(seed, n_lines, n_q, build, topology in NARROW)
    job = _job(seed, topology, window, build, OBJECTIVE_SETS[obj], temps)
    expected = _exhaustive(job, inv, 3)
    result = design(job, inv, top=3)
    got = _search_keys(job, result)
    # source: the exhaustive enumeration above, grouped by network (exact integer keys)
    assert got == expected, (result.status, result.stats)
    nets = _result_networks(result)
    assert len(set(nets)) == len(nets), "the ranked designs are distinct networks"
    if expected:
        assert result.status == "optimal"
        assert all(d.check.ok for d in result.designs)
        assert result.stats["rejected_on_verification"] == 0
    else:
        assert result.status == "infeasible"
        assert result.explanation is not None


def test_cases_cover_the_kinds_the_brief_names():
    """At least one infeasible shelf, one whose best design repeats a value, one where
    stock binds (source: the brief's list of kinds)."""
    kinds = set()
    for case in CASES:
        seed, topology, n_lines, n_q, window, build, obj, temps = case
        inv = _shelf(seed, n_lines, n_q, build, topology in NARROW)
        job = _job(seed, topology, window, build, OBJECTIVE_SETS[obj], temps)
        r = design(job, inv, top=1)
        if not r.designs:
            kinds.add("infeasible")
            continue
        d = r.designs[0]
        if d.distinct_values < d.part_count - 1:
            kinds.add("repeats")
        relaxed = replace(job, build=replace(job.build, quantity=1))
        r1 = design(relaxed, replace(inv), top=1)
        if r1.designs and _search_keys(relaxed, r1)[0] != _search_keys(job, r)[0]:
            kinds.add("stock_binds")
    assert {"infeasible", "repeats", "stock_binds"} <= kinds


# Pairs: every role may also be a series or parallel pair of two stock lines (unequal
# values, unequal tolerances, signed and unsigned tempcos).  The reference computes each
# pair's exact band and worst-split rating here, from the parts' extremes (written out
# below, sharing no code with the search or stockbias.resistor_band).
PAIR_CASES = [
    # (seed, topology, lines, transistors, window %, objectives, temperature range); in
    # each, a pair of two different lines with different tolerances ranks among the best three
    (34, "fixed_base", 5, 2, 60, ["cost", "part_count", "ic_margin"], (0, 60)),
    (31, "collector_feedback", 5, 2, 50, ["part_count", "cost", "ic_margin"], (-20, 70)),
    (31, "divider", 3, 1, 30, ["ic_margin", "cost"], (0, 50)),
    (37, "dual_supply", 3, 2, 30, ["cost", "ic_margin"], (0, 50)),
]


def _pair_shelf(seed: int, n_lines: int, narrow: bool, n_q: int = 2) -> Inventory:
    rng = np.random.default_rng(seed)
    pool = series_values("E12", 2.2e3, 470e3) if narrow else series_values("E6", 220.0, 47e3)
    values = sorted(rng.choice(pool, size=n_lines, replace=False))
    resistors = []
    for i, v in enumerate(values):
        tc, signed = [(-350.0, True), (100.0, True), (200.0, False), (0.0, False)][i % 4]
        resistors.append(Resistor(
            part_id=f"P{i:02d}", value_ohm=float(v), tolerance_pct=[1.0, 10.0, 5.0][i % 3],
            power_w=float(rng.choice([0.063, 0.125, 0.25])), tempco_ppm=tc, tempco_signed=signed,
            qty=20, unit_cost=float(rng.choice([0.01, 0.02, 0.05])), line=i + 2))
    q = [Transistor(part_id=f"Q{j}", polarity="NPN", hfe_min=100.0 + 50 * j,
                    hfe_max=300.0 + 100 * j, vceo_max=40.0, ic_max=0.1, pd_max_w=0.5,
                    vbe_min=0.6, vbe_max=0.72, qty=100, unit_cost=0.05, line=100 + j)
         for j in range(n_q)]
    return Inventory(path=f"<pair shelf {seed}>", resistors=tuple(resistors),
                     transistors=tuple(q))


def _piece(r: Resistor, tmin: float, tmax: float, at: float | None = None
           ) -> tuple[float, float]:
    """(low, high) of one part over its tolerance and drift (at one temperature if given):
    R·(1 ± tol)·(1 + tc·(T − 25)), a signed tc as written, an unsigned one either way."""
    temps = [tmin, tmax] if at is None else [at]
    tc = (r.tempco_ppm or 0.0) * 1e-6
    if r.tempco_signed:
        f_lo = min(1 + tc * (t - 25) for t in temps)
        f_hi = max(1 + tc * (t - 25) for t in temps)
    else:
        f_lo = min(1 - abs(tc) * abs(t - 25) for t in temps)
        f_hi = max(1 + abs(tc) * abs(t - 25) for t in temps)
    t = r.tolerance_pct / 100
    return r.value_ohm * (1 - t) * f_lo, r.value_ohm * (1 + t) * f_hi


def _pair_candidates(lines: list[Resistor], build: int, tmin: float, tmax: float):
    """Every single line and every series/parallel pair: (pieces, arrangement, nominal, low,
    high, allowed total at 70 °C)."""
    out = []
    for r in lines:
        lo, hi = _piece(r, tmin, tmax)
        out.append(((r,), "single", r.value_ohm, lo, hi, r.power_w))
    for i, a in enumerate(lines):
        for b in lines[i:]:
            if a is b and a.qty < 2 * build:
                continue
            (al, ah), (bl, bh) = _piece(a, tmin, tmax), _piece(b, tmin, tmax)
            for arr in ("series", "parallel"):
                if arr == "series":
                    nom, lo, hi = a.value_ohm + b.value_ohm, al + bl, ah + bh
                else:
                    nom = 1 / (1 / a.value_ohm + 1 / b.value_ohm)
                    lo, hi = 1 / (1 / al + 1 / bl), 1 / (1 / ah + 1 / bh)
                rating = math.inf
                for temp in {tmin, tmax}:     # both parts at the same ambient
                    (xl, xh), (yl, yh) = _piece(a, tmin, tmax, temp), _piece(b, tmin, tmax, temp)
                    if arr == "series":       # a carries Ra/(Ra+Rb): a high, b low
                        sa, sb = xh / (xh + yl), yh / (yh + xl)
                    else:                     # a carries Rb/(Ra+Rb): a low, b high
                        sa, sb = yh / (xl + yh), xh / (xh + yl)
                    rating = min(rating, a.power_w / sa, b.power_w / sb)
                out.append(((a, b), arr, nom, lo, hi, rating))
    return out


def _exhaustive_pairs(job: Job, inv: Inventory, top: int):
    st = job.stage
    t = st.target
    env = job.environment
    lines = [r for r in inv.resistors if r.qty >= job.build.quantity]
    cands = _pair_candidates(lines, job.build.quantity, env.ambient_min_c, env.ambient_max_c)
    net = get_network(st.topology)
    choices = [list(range(len(cands))) + ([None] if role.optional else []) for role in net.roles]
    combos = list(itertools.product(*choices))
    found = []
    for q in inv.transistors:
        arrays, ratings = {}, {}
        for k, role in enumerate(net.roles):
            rows = [(0.0, 0.0, 0.0, 0.0) if c[k] is None else cands[c[k]][2:] for c in combos]
            nom, lo, hi, rating = (np.array(x) for x in zip(*rows, strict=True))
            arrays[role.name] = ResistorSpec(nom, np.zeros_like(nom), band=(lo, hi))
            ratings[role.name] = rating
        spec = _spec(job, st.topology, q, arrays)
        ok, low, high = vertex_screen(job, st, spec, ratings)
        icm = np.minimum(low["ic"] - t.ic_min, t.ic_max - high["ic"]) / t.ic
        for i in np.flatnonzero(ok):
            used = [r for x in combos[i] if x is not None for r in cands[x][0]]
            counts: dict[str, int] = {}
            for r in used:
                counts[r.part_id] = counts.get(r.part_id, 0) + 1
            if any(r.qty < counts[r.part_id] * job.build.quantity for r in used):
                continue
            vals = {"cost": round(q.unit_cost * 1e6) + sum(round(r.unit_cost * 1e6)
                                                          for r in used),
                    "part_count": 1 + len(used),
                    "ic_margin": -math.floor(icm[i] * 1e6 + 1e-6)}
            key = tuple(vals[o] for o in job.search.objectives)
            found.append((key, q, [(role.name, combos[i][k])
                                   for k, role in enumerate(net.roles)]))
    found.sort(key=lambda x: x[0])
    from stockbias.assign import pair_of

    amb = (env.ambient_min_c, env.ambient_max_c)
    best, seen = [], set()
    for key, q, assign in found:
        if _network(st.topology, q, assign) in seen:
            continue
        parts = {}
        for role, x in assign:
            if x is None:
                continue
            pieces, arr = cands[x][0], cands[x][1]
            parts[role] = (_resolved(role, pieces[0]) if arr == "single"
                           else pair_of(role, pieces[0], pieces[1], arr, ambient=amb))
        if analyze_stage(job, st, parts, q, samples=0).ok:
            best.append(key)
            seen.add(_network(st.topology, q, assign))
            if len(best) == top:
                break
    return best


@pytest.mark.parametrize("case", PAIR_CASES, ids=[f"pairs-seed{c[0]}-{c[1]}" for c in PAIR_CASES])
def test_optimum_with_pairs_matches_exhaustive(case):
    seed, topology, n_lines, n_q, window, objectives, temps = case
    inv = _pair_shelf(seed, n_lines, topology in NARROW, n_q)
    job = _job(seed, topology, window, 5, objectives, temps)
    job = replace(job, build=replace(job.build, allow_pairs=True))
    expected = _exhaustive_pairs(job, inv, 3)
    result = design(job, inv, top=3)
    # source: the exhaustive enumeration above, grouped by network (exact integer keys)
    assert _search_keys(job, result) == expected, (result.status, result.stats)
    nets = _result_networks(result)
    assert len(set(nets)) == len(nets), "the ranked designs are distinct networks"
    assert expected, "each pair case is built to be feasible"
    assert result.status == "optimal"
    assert any(p.arrangement != "single" and len({x.part_id for x in p.parts}) == 2
               and p.parts[0].tolerance_pct != p.parts[1].tolerance_pct
               for d in result.designs for p in d.check.parts.values())
