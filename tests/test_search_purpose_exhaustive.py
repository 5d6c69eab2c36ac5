"""The search honours the purpose limits exactly: its optimum equals an exhaustive search.

The limits are the stage's purpose: rin_min, gain_min, gain_max, swing_pk in [target],
supply_current_max in [limits], and the divider rule divider_ratio_min.  Generated small
shelves (seeded, invented test data); the reference enumerates EVERY assignment of stock
lines to roles × transistor, evaluates each at every vertex of the tolerance box with the
analysis engine (no search code, :mod:`vertex_reference`), applies the stock rule and the
objective order, and confirms the best with ``analyze_stage`` (the path ``check`` uses).
Source of the expected values: this exhaustive enumeration.  Each case is built so that
the purpose limits bind: without them the reference's optimum is another design.
"""

from __future__ import annotations

import itertools
import math

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
volts = 12
tolerance_pct = 5
{vee}
[target]
ic = "1 mA"
ic_window_pct = {window}
vce_min = "1 V"
{target}
[limits]
supply_power_max = "80 mW"
{limits}
[environment]
ambient_min_c = {tmin}
ambient_max_c = {tmax}
[small_signal]
{small}
[build]
quantity = 5
[search]
topology = "{topology}"
objectives = ["cost", "part_count", "ic_margin"]
top = 1
"""

# (seed, topology, lines, transistors, window %, [target] purpose, [limits], [small_signal],
#  temperature range, feasible with the purpose limits)
CASES = [
    (21, "divider", 9, 2, 30, 'rin_min = "1 k"', "", 're_bypassed = false\nload = "10k"',
     (25, 25), True),
    (22, "divider", 9, 2, 30, "divider_ratio_min = 10", 'supply_current_max = "1.45 mA"',
     "", (0, 50), True),
    (22, "divider", 9, 2, 30, "divider_ratio_min = 30", "", "", (0, 50), True),
    (23, "divider", 9, 2, 35, 'swing_pk = "1.5 V"\ngain_min = 30', "", 'load = "22k"',
     (25, 25), True),
    (24, "divider", 9, 2, 30, "gain_min = 0.5\ngain_max = 3", "",
     're_bypassed = false\nload = "10k"', (25, 25), True),
    (25, "collector_feedback", 12, 2, 45, 'gain_max = 185\nrin_min = "1.2 k"', "",
     'load = "10k"', (25, 25), True),
    (26, "fixed_base", 14, 2, 60, 'swing_pk = "0.5 V"', 'supply_current_max = "0.8 mA"',
     "", (25, 25), True),
    (27, "dual_supply", 14, 2, 40, 'rin_min = "2 k"', 'supply_current_max = "0.9 mA"',
     "re_bypassed = false", (25, 25), True),
    (28, "divider", 8, 2, 30, 'rin_min = "50 k"', "", "re_bypassed = false", (25, 25), False),
]


def _shelf(seed: int, n_lines: int, n_q: int, narrow: bool) -> Inventory:
    rng = np.random.default_rng(seed)
    pool = series_values("E12", 1e3, 1e6) if narrow else series_values("E12", 100.0, 100e3)
    values = sorted(rng.choice(pool, size=n_lines, replace=False))
    resistors = [Resistor(part_id=f"R{i:02d}", value_ohm=float(v),
                          tolerance_pct=float(rng.choice([1.0, 2.0, 5.0])), power_w=0.25,
                          tempco_ppm=float(rng.choice([0.0, 100.0])), qty=20,
                          unit_cost=float(rng.choice([0.01, 0.02, 0.05])), line=i + 2)
                 for i, v in enumerate(values)]
    transistors = []
    for j in range(n_q):
        lo = float(rng.choice([80, 100, 150]))
        transistors.append(Transistor(
            part_id=f"Q{j}", polarity="NPN" if j % 2 == 0 else "PNP", hfe_min=lo,
            hfe_max=lo * float(rng.choice([1.5, 2.0, 3.0])), vceo_max=40.0, ic_max=0.1,
            pd_max_w=0.5, vbe_min=0.6, vbe_max=0.72, vaf_v=float(rng.choice([60.0, 120.0])),
            qty=100, unit_cost=float(rng.choice([0.03, 0.05])), line=100 + j))
    return Inventory(path=f"<shelf {seed}>", resistors=tuple(resistors),
                     transistors=tuple(transistors))


def _job(case, purpose: bool = True) -> Job:
    seed, topology, _, _, window, target, limits, small, temps, _ = case
    text = JOB.format(vee="negative_volts = -6" if topology == "dual_supply" else "",
                      window=window, target=target if purpose else "",
                      limits=limits if purpose else "", small=small, tmin=temps[0],
                      tmax=temps[1], topology=topology)
    return parse_job(text, f"<job {seed}>")


def _resolved(role: str, r: Resistor) -> ResolvedResistor:
    return ResolvedResistor(role=role, value=r.value_ohm, tol=r.tolerance_pct / 100,
                            tempco_ppm=r.tempco_ppm or 0.0, rating=r.power_w, parts=(r,))


def _exhaustive(job: Job, inv: Inventory) -> tuple | None:
    """The best (cost µ, part count, −IC margin µ) key over every assignment; None: none."""
    st, env = job.stage, job.environment
    t = st.target
    span = max(abs(env.ambient_min_c - 25), abs(env.ambient_max_c - 25))
    lines = list(inv.resistors)
    net = get_network(st.topology)
    choices = [list(range(len(lines))) + ([None] if role.optional else [])
               for role in net.roles]
    combos = list(itertools.product(*choices))
    found = []
    for q in inv.transistors:
        arrays, ratings = {}, {}
        for k, role in enumerate(net.roles):
            idx = [c[k] for c in combos]
            pick = [lines[i] if i is not None else None for i in idx]
            arrays[role.name] = ResistorSpec(
                np.array([0.0 if r is None else r.value_ohm for r in pick]),
                np.array([0.0 if r is None else r.tolerance_pct / 100 for r in pick]),
                np.array([0.0 if r is None else (r.tempco_ppm or 0) * 1e-6 * span
                          for r in pick]))
            ratings[role.name] = np.array([0.0 if r is None else r.power_w for r in pick])
        spec = StageSpec(network=net, resistors=arrays, device=DeviceSpec.from_transistor(q),
                         vcc=job.supply.volts, vcc_tol=job.supply.tolerance_pct / 100,
                         vee=job.supply.negative_volts,
                         vee_tol=job.supply.vee_tolerance_pct / 100,
                         ambient_min_c=env.ambient_min_c, ambient_max_c=env.ambient_max_c,
                         model=job.search.model, load=job.small_signal.load,
                         re_bypassed=job.small_signal.re_bypassed)
        ok, low, high = vertex_screen(job, st, spec, ratings)
        icm = np.minimum(low["ic"] - t.ic_min, t.ic_max - high["ic"]) / t.ic
        for i in np.flatnonzero(ok):
            used = [lines[x] for x in combos[i] if x is not None]
            counts: dict[str, int] = {}
            for r in used:
                counts[r.part_id] = counts.get(r.part_id, 0) + 1
            if any(r.qty < counts[r.part_id] * job.build.quantity for r in used):
                continue
            key = (round(q.unit_cost * 1e6) + sum(round(r.unit_cost * 1e6) for r in used),
                   1 + len(used), -math.floor(icm[i] * 1e6 + 1e-6))
            found.append((key, q, [(role.name, combos[i][k])
                                   for k, role in enumerate(net.roles)]))
    found.sort(key=lambda x: x[0])
    for key, q, assign in found:   # the vertex screen is a superset: confirm in full
        parts = {role: _resolved(role, lines[i]) for role, i in assign if i is not None}
        if analyze_stage(job, st, parts, q, samples=0).ok:
            return key
    return None


def _key(result) -> tuple | None:
    if not result.designs:
        return None
    d = result.designs[0]
    return (d.cost_micro, d.part_count, -math.floor(d.ic_margin * 1e6 + 1e-6))


@pytest.mark.parametrize("case", CASES, ids=[f"case{i}-seed{c[0]}-{c[1]}"
                                              for i, c in enumerate(CASES)])
def test_purpose_optimum_matches_exhaustive(case):
    seed, topology, n_lines, n_q = case[:4]
    feasible = case[-1]
    inv = _shelf(seed, n_lines, n_q, topology in ("collector_feedback", "fixed_base"))
    job = _job(case)
    expected = _exhaustive(job, inv)
    # the purpose limits bind: without them the optimum is another design (or one exists)
    assert _exhaustive(_job(case, purpose=False), inv) != expected
    assert (expected is not None) == feasible
    result = design(job, inv, top=1)
    # source: the exhaustive enumeration above (exact integer keys)
    assert _key(result) == expected, (result.status, result.stats)
    if expected is None:
        assert result.status == "infeasible"
    else:
        assert result.status == "optimal"
        assert result.designs[0].check.ok
        names = {c.name for c in result.designs[0].check.constraints}
        purpose_names = {"rin_min", "gain_min", "gain_max", "swing_saturation",
                         "supply_current_max", "divider_ratio_min"}
        assert names & purpose_names          # the re-verification checked them


# --- the board search: two divider stages on one shelf --------------------------------

def _worst_figures(job: Job, inv: Inventory, combo) -> list[dict[str, float]]:
    """Each stage's worst-case rin, swing and supply current as check reports them."""
    from dataclasses import replace

    from board_reference import resolved

    out = []
    for st, (q, idx) in zip(job.stages, combo, strict=True):
        parts = {role: resolved(role, inv.resistors[i])
                 for role, i in zip(("R1", "R2", "RC", "RE"), idx, strict=True)}
        p = analyze_stage(replace(job, stages=(st,)), st, parts, q, samples=0).purpose
        out.append({k: p[k].worst for k in ("rin", "swing_pk", "supply_current")})
    return out


@pytest.mark.parametrize("seed, n_lines, n_q, obj, limit, feasible", [
    (7, 9, 2, 1, "rin_min", True),
    (5, 8, 2, 1, "supply_current_max", True),
    (4, 8, 2, 1, "swing_pk", True),
    (1, 8, 2, 0, "supply_current_max", False),
], ids=["seed7-rin", "seed5-current", "seed4-swing", "seed1-current-infeasible"])
def test_board_purpose_limits_match_exhaustive(seed, n_lines, n_q, obj, limit, feasible):
    """Each stage is held just past the unheld optimum's worst figure (rin 5 % above it,
    supply current 5 % below, swing 5 % above), so that optimum is out; the board search's
    optimum equals the exhaustive one with the same limits (source: the exhaustive
    enumeration of tests/test_board_search.py, per stage and crossed)."""
    from dataclasses import replace

    from board_reference import board_of, generated_shelf, recheck
    from test_board_search import OBJECTIVE_SETS, SAME, TWO, _board, _exhaustive
    from test_board_search import _key as board_key

    from stockbias.search.board import design_board

    build = 5
    inv = generated_shelf(seed, n_lines, n_q, build)
    job = _board(OBJECTIVE_SETS[obj], build, SAME if seed == 7 else TWO)
    free, combo, _ = _exhaustive(job, inv)
    assert free is not None
    worst = _worst_figures(job, inv, combo)

    def held_stage(st, w):
        if limit == "rin_min":
            return replace(st, target=replace(st.target, rin_min=1.05 * w["rin"]))
        if limit == "swing_pk":
            return replace(st, target=replace(st.target, swing_pk=1.05 * w["swing_pk"]))
        return replace(st, limits=replace(st.limits,
                                          supply_current_max=0.95 * w["supply_current"]))

    held = replace(job, stages=tuple(held_stage(st, w)
                                     for st, w in zip(job.stages, worst, strict=True)))
    expected, _combo, _ = _exhaustive(held, inv)
    assert (expected is not None) == feasible
    result = design_board(held, inv, top=1)
    if expected is None:
        assert result.status == "infeasible" and not result.designs
        return
    assert expected != free                     # the limits moved the optimum
    assert result.status == "optimal"
    d = result.designs[0]
    # source: the exhaustive enumeration (exact integer objective vectors)
    assert board_key(job.search.objectives, build, board_of(d)) == expected
    names = {c.name for s in d.stages for c in s.check.constraints}
    assert {"rin_min": "rin_min", "swing_pk": "swing_saturation",
            "supply_current_max": "supply_current_max"}[limit] in names
    recheck(held, d)


@pytest.mark.parametrize("case", [CASES[0], CASES[4], CASES[6]],
                         ids=["divider-rin", "collector_feedback-gain", "dual_supply-rin"])
def test_vertex_screen_is_never_stricter_than_check(case):
    """Every design the search's vertex screen (prepass.vertex_check) rejects fails the
    full check as well, the purpose limits included: a sample of 40 rejected designs per
    transistor, each re-run through analyze_stage (source: analyze_stage itself)."""
    from stockbias.search.candidates import build_shelf
    from stockbias.search.prepass import vertex_check

    seed, topology, n_lines, n_q = case[:4]
    inv = _shelf(seed, n_lines, n_q, topology in ("collector_feedback", "fixed_base"))
    job = _job(case)
    st = job.stage
    shelf = build_shelf(job, inv)
    table = shelf.candidates(optional=False, pairs=False)
    required = [r.name for r in get_network(topology).roles if not r.optional]
    combos = np.array(list(itertools.product(range(len(table)), repeat=len(required))))
    rng = np.random.default_rng(seed)
    for q in inv.transistors:
        roles = {role: (table, combos[:, k]) for k, role in enumerate(required)}
        chk = vertex_check(job, st, topology, q, roles)
        rejected = np.flatnonzero(~chk["ok"])
        assert rejected.size
        for i in rng.choice(rejected, size=min(40, rejected.size), replace=False):
            parts = {role: shelf.resolved(role, table, int(combos[i, k]))
                     for k, role in enumerate(required)}
            assert not analyze_stage(job, st, parts, q, samples=0).ok
