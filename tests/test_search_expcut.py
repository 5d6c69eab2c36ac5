"""The exponential model searched with interval cuts (search/exp_cut.py).

1. The monotonicity the cut rests on, sampled: for random circuits of every supported
   network, random device rows (with and without an Early voltage, both polarities) and
   random corners, the collector current of :func:`solve_exponential` (the engine the
   worst case uses) falls with the interval role, rises with R2 and falls with R1
   (divider), rises with hFE, with IS (VBE row at its low end), with ICBO and with the
   drive supply, and falls as the collector side pulls VCE down (RC up) — wherever both
   points are active.
2. The pinned thresholds bound the engine: at the IC-max vertex no active design whose
   VCE keeps the job's headroom has IC ≤ ic_max with the interval role below A; at the
   IC-min vertex none has IC ≥ ic_min above B.
3. The search equals an exhaustive enumeration with the exponential model (same optimum,
   same top K), small generated shelves, both polarities, every network.

Sources of expected values: the analysis engine (``solve_exponential``, ``vertex_check``
and ``analyze_stage``) evaluated here with no search code, and the exhaustive reference of
``tests/test_search_exhaustive.py``.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from test_search_exhaustive import (
    NARROW,
    OBJECTIVE_SETS,
    _exhaustive,
    _job,
    _result_networks,
    _search_keys,
    _shelf,
)

from stockbias.analysis import device
from stockbias.analysis.operating_point import ACTIVE, solve_exponential
from stockbias.analysis.stage import DeviceSpec, gummel_poon_of
from stockbias.parts import Inventory, Transistor
from stockbias.search.design import design
from stockbias.search.exp_cut import drive_terms, exp_corner, pinned_ic

NETWORKS = ("divider", "collector_feedback", "dual_supply", "fixed_base")
INTERVAL = {"divider": "RE", "collector_feedback": "RC", "dual_supply": "RE",
            "fixed_base": "RE"}


def _device(rng: np.random.Generator, n: int, hfe=None, vbe=None, temp=None, vaf=None,
            icbo=None):
    """Random Gummel–Poon parameters at temperature (the stock-row route of the engine)."""
    hfe = rng.uniform(40, 600, n) if hfe is None else hfe
    vbe = rng.uniform(0.55, 0.75, n) if vbe is None else vbe
    temp = rng.uniform(-40, 85, n) if temp is None else temp
    vaf = np.where(rng.random(n) < 0.5, np.inf, rng.uniform(20, 150, n)) if vaf is None else vaf
    dev = DeviceSpec(polarity="NPN", hfe_min=40.0, hfe_max=600.0, vaf_v=vaf,
                     nf=rng.uniform(1.0, 1.05, n), br=rng.uniform(0.5, 5, n),
                     hfe_test_ic=rng.choice([1e-3, 2e-3, 10e-3], n))

    class _P:
        pass

    p = _P()
    p.vbe, p.hfe = vbe, hfe
    gp = gummel_poon_of(type("S", (), {"device": dev})(), p, temp)
    icbo = rng.uniform(0, 50e-9, n) if icbo is None else icbo
    return gp, temp + device.CELSIUS_TO_KELVIN, device.icbo_at(icbo, temp)


def _circuit(rng, net: str, n: int):
    """Random resistor values (log-uniform) and supplies for a network."""
    def lu(lo, hi):
        return np.exp(rng.uniform(np.log(lo), np.log(hi), n))

    r = {"divider": {"R1": lu(5e3, 500e3), "R2": lu(1e3, 100e3), "RC": lu(100, 10e3),
                     "RE": lu(50, 5e3)},
         "collector_feedback": {"RB": lu(10e3, 1e6), "RC": lu(500, 10e3),
                                "RE": np.where(rng.random(n) < 0.3, 0.0, lu(10, 2e3))},
         "dual_supply": {"RB": lu(1e3, 200e3), "RC": lu(100, 10e3), "RE": lu(500, 20e3)},
         "fixed_base": {"RB": lu(50e3, 5e6), "RC": lu(100, 10e3),
                        "RE": np.where(rng.random(n) < 0.3, 0.0, lu(10, 2e3))}}[net]
    return r, rng.uniform(5, 24, n), -rng.uniform(3, 12, n)


def _ic(net, r, vcc, vee, gp, tk, icbo, polarity="NPN"):
    """IC and where the point is active with VCE ≥ 0.3 V (every passing design keeps at
    least that: its headroom, or VCE(sat) plus its swing; right at the saturation rule's
    edge the reverse injection may turn the temperature direction by parts per million)."""
    op = solve_exponential(net, r, polarity, vcc, vee, gp, tk, icbo)
    return op.ic, (op.region == ACTIVE) & (op.vce >= 0.3)


def _rising(base, up, ok):
    """Where both points are active: the current at the raised parameter is not lower
    (relative slack 1e-9 for the Newton tolerance)."""
    return np.all((up >= base * (1 - 1e-9)) | ~ok)


@pytest.mark.parametrize("net", NETWORKS)
@pytest.mark.parametrize("polarity", ["NPN", "PNP"])
def test_ic_monotone_in_each_parameter(net, polarity):
    """Sampled proof of the directions the cut's vertices rest on (module notes of
    search/exp_cut.py); source: solve_exponential, the engine the worst case uses."""
    rng = np.random.default_rng(hash((net, polarity)) % 2**32)
    n = 4000
    r, vcc, vee = _circuit(rng, net, n)
    hfe, vbe = rng.uniform(40, 600, n), rng.uniform(0.55, 0.75, n)
    temp, vaf = rng.uniform(-40, 85, n), np.where(rng.random(n) < 0.5, np.inf,
                                                   rng.uniform(20, 150, n))
    icbo = rng.uniform(0, 50e-9, n)
    sub = np.random.default_rng(1)

    def ic_of(r_=r, vcc_=vcc, vee_=vee, hfe_=hfe, vbe_=vbe, temp_=temp, icbo_=icbo):
        gp, tk, ib = _device(np.random.default_rng(7), n, hfe_, vbe_, temp_, vaf, icbo_)
        return _ic(net, r_, vcc_, vee_, gp, tk, ib, polarity)

    base, ok0 = ic_of()
    step = 1.0 + sub.uniform(1e-3, 0.2, n)
    x = INTERVAL[net]
    checks = {
        f"{x} up (falls)": (ic_of(r_={**r, x: r[x] * step}), -1),
        "hFE up": (ic_of(hfe_=hfe * step), +1),
        "VBE row down (IS up)": (ic_of(vbe_=vbe - 0.01 * (step - 1) * 5), +1),
        "ICBO up": (ic_of(icbo_=icbo * step + 1e-12), +1),
    }
    if net == "divider":
        checks["R2 up"] = (ic_of(r_={**r, "R2": r["R2"] * step}), +1)
        checks["R1 up (falls)"] = (ic_of(r_={**r, "R1": r["R1"] * step}), -1)
    if net == "dual_supply":
        checks["|VEE| up"] = (ic_of(vee_=vee * step), +1)
    else:
        checks["VCC up"] = (ic_of(vcc_=vcc * step), +1)
    if net != "collector_feedback":
        checks["RC up (falls)"] = (ic_of(r_={**r, "RC": r["RC"] * step}), -1)
    checks["ambient up"] = (ic_of(temp_=temp + 10 * (step - 1) * 5), +1)
    for name, ((ic1, ok1), sign) in checks.items():
        ok = ok0 & ok1 & (base > 1e-6)
        assert ok.sum() > n // 4, name
        if sign > 0:
            assert _rising(base, ic1, ok), name
        else:
            assert _rising(ic1, base, ok), name


@pytest.mark.parametrize("net", NETWORKS)
def test_pinned_current_bounds_the_engine(net):
    """At the IC-max vertex the pinned IC (VCE held at the job's headroom) is at most the
    engine's IC of any active design keeping that headroom; at the IC-min vertex the pinned
    IC (VCE at its largest) is at least the engine's.  Source: solve_exponential."""
    from test_search_exhaustive import _job as make_job

    job = make_job(0, net, 30, 5, OBJECTIVE_SETS[0], (0, 50))
    rng = np.random.default_rng(5)
    n = 3000
    for vaf in (np.inf, 30.0):
        q = Transistor("QX", "NPN", 100.0, 300.0, 40.0, 0.1, 0.5, vbe_min=0.6, vbe_max=0.72,
                       vaf_v=vaf, icbo_a=20e-9, qty=10)
        r, _vcc, _vee = _circuit(rng, net, n)
        for up in (True, False):
            temp = job.environment.ambient_max_c if up else job.environment.ambient_min_c
            cn = exp_corner(job, job.stage, q, net, up, temp)
            dev = DeviceSpec.from_transistor(q)
            gp = gummel_poon_of(type("S", (), {"device": dev})(),
                                type("P", (), {"vbe": np.asarray(q.vbe_min if up else
                                                                 q.vbe_max),
                                               "hfe": np.asarray(q.hfe_max if up else
                                                                 q.hfe_min)})(),
                                np.asarray(temp))
            icbo = cn.icbo
            vee = -cn.vee if net == "dual_supply" else None
            op = solve_exponential(net, r, "NPN", cn.vcc, vee, gp,
                                   temp + device.CELSIUS_TO_KELVIN, icbo)
            v_d, r_b, r_x = drive_terms(net, r, cn.vcc, cn.vee)
            x = r[INTERVAL[net]]
            ic_p, _ie, conv = pinned_ic(cn, v_d, r_b, x + r_x)
            assert conv.all()
            active = op.region == ACTIVE
            if up:
                keeps = active & (op.vce >= 2.0)       # the job's vce_min
                assert keeps.sum() > 50
                assert np.all(ic_p[keeps] <= op.ic[keeps] * (1 + 1e-9))
            else:
                assert active.sum() > 50
                assert np.all(ic_p[active] >= op.ic[active] * (1 - 1e-9))


# (seed, topology, lines, transistors, window %, build, objectives index, temperatures)
EXP_CASES = [
    (11, "divider", 7, 2, 40, 5, 0, (0, 50)),       # NPN and PNP among the best three
    (12, "divider", 7, 2, 40, 5, 1, (0, 50)),       # with an Early voltage
    (5, "collector_feedback", 9, 2, 45, 5, 0, (0, 60)),
    (7, "fixed_base", 10, 2, 60, 5, 3, (25, 25)),
    (8, "fixed_base", 10, 3, 35, 5, 0, (10, 40)),    # with an Early voltage
    (11, "dual_supply", 8, 2, 35, 5, 0, (0, 50)),   # NPN and PNP among the best three
    (27, "dual_supply", 8, 2, 35, 5, 2, (0, 50)),   # PNP, with an Early voltage
    (3, "divider", 6, 2, 4, 5, 0, (25, 25)),        # window too tight: infeasible
]


def _exp(job):
    return replace(job, search=replace(job.search, model="exponential"))


def _with_early(inv: Inventory, vaf: float) -> Inventory:
    return replace(inv, transistors=tuple(replace(q, vaf_v=vaf) for q in inv.transistors))


@pytest.mark.parametrize("case", EXP_CASES, ids=[f"seed{c[0]}-{c[1]}" for c in EXP_CASES])
def test_exponential_optimum_matches_exhaustive(case):
    seed, topology, n_lines, n_q, window, build, obj, temps = case
    inv = _shelf(seed, n_lines, n_q, build, topology in NARROW)
    if seed in (12, 8, 27):
        inv = _with_early(inv, 40.0)          # the pinned relaxation with an Early voltage
    job = _exp(_job(seed, topology, window, build, OBJECTIVE_SETS[obj], temps))
    expected = _exhaustive(job, inv, 3)
    result = design(job, inv, top=3)
    # source: the exhaustive enumeration (exponential model), grouped by network
    assert _search_keys(job, result) == expected, (result.status, result.stats)
    nets = _result_networks(result)
    assert len(set(nets)) == len(nets)
    if expected:
        assert result.status == "optimal"
        assert all(d.check.ok and d.check.model == "exponential" for d in result.designs)
    else:
        assert result.status == "infeasible"


@pytest.mark.spice
@pytest.mark.parametrize("seed,topology,n_lines,window,temps",
                         [(11, "divider", 7, 40, (0, 50)), (11, "dual_supply", 8, 35, (0, 50))])
def test_chosen_exponential_design_matches_ngspice(seed, topology, n_lines, window, temps):
    """The best exponential-model design's nominal point (25 °C, hFE geometric mean, VBE
    middle) against ngspice with the design's values and the stock row's model card.
    Tolerances of tests/test_spice_match.py, measured against ngspice-39: IC within
    3e-5 relative, node voltages within 0.2 mV."""
    import shutil

    from stockbias.analysis.spice import spice_operating_point
    from stockbias.render.netlist import model_card

    if shutil.which("ngspice") is None:
        pytest.skip("ngspice is not installed")
    inv = _shelf(seed, n_lines, 2, 5)
    job = _exp(_job(seed, topology, window, 5, OBJECTIVE_SETS[0], temps))
    result = design(job, inv, top=3)
    # both polarities are among the designs checked (source: the search result itself)
    assert {d.transistor.polarity for d in result.designs} == {"NPN", "PNP"}
    for d in result.designs:
        card, _notes = model_card(d.transistor)
        values = {r: p.value for r, p in d.check.parts.items()}
        # the rails as check takes them (write_netlist maps them to the network's rails)
        sp = spice_operating_point(d.topology, values, d.transistor.polarity,
                                   job.supply.volts, job.supply.negative_volts, card, 25.0)
        nom = d.check.nominal
        assert abs(float(nom["ic"]) - sp["ic"]) <= 3e-5 * abs(sp["ic"]) + 1e-10
        for node in ("vb", "vc", "ve"):
            assert abs(float(nom[node]) - sp[node]) <= 2e-4, node


def test_characterised_shelf_searches_with_the_exponential_model():
    """A row whose model card leaves VAF at SPICE's 0 (no Early effect) reads as VAF = inf
    (SPICE convention: the BJT parameter table gives VAF default 0 = infinite), and the
    exponential search on the characterised sample shelf finishes with every design
    re-verified."""
    from pathlib import Path

    from stockbias.job import load_job
    from stockbias.stock_io import load_inventory

    samples = Path(__file__).resolve().parent.parent / "inventory_samples"
    inv = load_inventory(samples / "characterised_parts.csv")
    assert next(q for q in inv.transistors if q.part_id == "QF-LC").vaf_v == float("inf")
    job = _exp(load_job(samples / "line_driver_job.toml"))
    r = design(job, inv, top=2)
    assert r.status in ("optimal", "infeasible")
    assert all(d.check.ok and d.check.model == "exponential" for d in r.designs)
