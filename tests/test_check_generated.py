"""`check` end to end on generated jobs and shelves: every network, both polarities, both models.

Each case writes its own job file and stock file (values drawn from a seeded generator,
sized so that the whole tolerance box stays in the active region), runs
``stockbias check --json`` through the command line and compares:

* constant VBE: the worst-case IC and VCE bounds with a dense evaluation of the tolerance
  box written here from the closed forms of DESIGN §2 (three points per axis: both ends
  and the middle), with the drift rule R·(1 ± tol)·(1 ± |tempco|·max|T − 25 °C|),
  β(T) = hFE·(T/298.15 K)^XTB, VBE(T) = VBE − 2 mV/°C·(T − 25 °C) and ICBO doubling every
  10 °C.  IC and VCE are monotone in every parameter in the active region, so the grid
  holds the extremes and the bounds must equal it to rounding (1e-9 relative);
* every corner the JSON names: IC recomputed by a hand formula from the corner's own
  ``used`` values alone (1e-9 relative);
* exponential model: the nominal point against ngspice ``.op`` on the same card
  (ngspice-39; measured agreement about 1e-7, allowed 1e-5 relative, 0.2 mV).
"""

from __future__ import annotations

import itertools
import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app

runner = CliRunner()

NETWORKS = ("divider", "collector_feedback", "dual_supply", "fixed_base")
T_REF_K = 298.15
VBE_TEMPCO = -2e-3  # V/°C, common practice (the tool's stated default)
XTB = 1.5  # the tool's stated default when the row has none
RTOL = 1e-9


def _case(network: str, polarity: str, model: str, seed: int) -> dict:
    """A job and a shelf with values sized for IC near 1 mA and VCE well clear of saturation."""
    rng = np.random.default_rng(seed)
    vcc = float(rng.choice([9.0, 12.0, 15.0]))
    ic = float(rng.uniform(0.6e-3, 2.0e-3))
    hfe_min = float(rng.choice([80.0, 110.0]))
    hfe_max = hfe_min * float(rng.uniform(2.0, 3.0))
    beta = math.sqrt(hfe_min * hfe_max)
    vbe = 0.65
    tol = [float(rng.choice([1.0, 2.0, 5.0])) for _ in range(4)]
    tempco = [float(rng.choice([50.0, 100.0, 250.0])) for _ in range(4)]
    vee = None
    if network == "divider":
        re = 0.12 * vcc / ic
        r2 = 0.1 * beta * re
        vbb = vbe + ic * re + ic / beta * r2 * 0.9
        r1 = r2 * (vcc - vbb) / vbb
        rc = 0.35 * vcc / ic
        values = {"R1": r1, "R2": r2, "RC": rc, "RE": re}
    elif network == "collector_feedback":
        rc = 0.4 * vcc / ic
        re = 0.05 * vcc / ic
        rb = beta * (vcc - vbe - ic * (rc + re)) / ic
        values = {"RB": rb, "RC": rc, "RE": re}
    elif network == "dual_supply":
        vee = -float(rng.choice([6.0, 9.0]))
        rail_e, rail_c = (abs(vee), vcc) if polarity == "NPN" else (vcc, abs(vee))
        rb = 0.05 * beta * 1e3
        re = (rail_e - vbe - ic / beta * rb) / ic
        rc = 0.4 * rail_c / ic
        values = {"RB": rb, "RE": re, "RC": rc}
    else:
        re = 0.1 * vcc / ic
        rb = beta * (vcc - vbe - ic * re) / ic
        rc = 0.35 * vcc / ic
        values = {"RB": rb, "RC": rc, "RE": re}
    values = {k: float(f"{v:.3g}") for k, v in values.items()}
    parts = {role: (values[role], tol[i], tempco[i]) for i, role in enumerate(values)}
    return {"network": network, "polarity": polarity, "model": model, "vcc": vcc,
            "vcc_tol": 5.0, "vee": vee, "vee_tol": 5.0, "parts": parts,
            "hfe": (hfe_min, hfe_max), "vbe": (0.60, 0.70), "icbo": 20e-9 if model ==
            "constant_vbe" else 0.0, "vce_sat": 0.2, "ambient": (-10.0, 60.0), "ic": ic}


def _write(case: dict, folder: Path) -> tuple[Path, Path, list[str]]:
    job = folder / "job.toml"
    # the negative rail takes the supply's tolerance
    negative = "" if case["vee"] is None else f"negative_volts = {case['vee']}\n"
    job.write_text(
        "[supply]\n"
        f"volts = {case['vcc']}\ntolerance_pct = {case['vcc_tol']}\n{negative}"
        "[target]\n"
        f"ic = {case['ic']}\nic_window_pct = 90\nvce_min = 0.5\n"
        "[environment]\n"
        f"ambient_min_c = {case['ambient'][0]}\nambient_max_c = {case['ambient'][1]}\n"
        "[build]\nquantity = 1\n"
        "[search]\n"
        f"topology = \"{case['network']}\"\nmodel = \"{case['model']}\"\n")
    shelf = folder / "shelf.csv"
    rows = ["kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,polarity,hfe_min,"
            "hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,vce_sat,hfe_test_ic,icbo_a"]
    args = []
    for role, (value, tol, tempco) in case["parts"].items():
        rows.append(f"resistor,G-{role},{value!r},{tol},0.5,{tempco},5,,,,,,,,,,,")
        args.append(f"{role}=G-{role}")
    h, v = case["hfe"], case["vbe"]
    rows.append(f"transistor,GQ,,,,,5,{case['polarity']},{h[0]!r},{h[1]!r},60,0.2,0.5,"
                f"{v[0]},{v[1]},{case['vce_sat']},1m,{case['icbo']!r}")
    shelf.write_text("\n".join(rows) + "\n")
    return job, shelf, args


def _run(case: dict, folder: Path) -> dict:
    job, shelf, args = _write(case, folder)
    result = runner.invoke(app, ["check", str(job), "-i", str(shelf), "-v", ",".join(args),
                                 "-t", "GQ", "--samples", "0", "--json"])
    assert result.exit_code in (0, 1), result.output
    return json.loads(result.stdout)


def _currents(network: str, polarity: str, vcc, vee, r: dict, beta, vbe, icbo):
    """Active-region closed forms of DESIGN §2 with the leakage term: (IC, VCE), magnitudes.

    IC = β·IB + (β+1)·ICBO, IE = (β+1)·(IB + ICBO); IB from the base–emitter loop.  A PNP
    stage is the mirror: in ``dual_supply`` its emitter-side rail is +VCC and its
    collector-side rail VEE, so the two rails swap roles.
    """
    if network == "dual_supply" and polarity == "PNP":
        vcc, vee = abs(vee), vcc
    b1 = beta + 1.0
    if network == "divider":
        vbb = vcc * r["R2"] / (r["R1"] + r["R2"])
        rbb = r["R1"] * r["R2"] / (r["R1"] + r["R2"])
        ib = (vbb - vbe - b1 * icbo * r["RE"]) / (rbb + b1 * r["RE"])
    elif network == "collector_feedback":
        ib = (vcc - vbe - b1 * icbo * (r["RC"] + r["RE"])) / (r["RB"] + b1 * (r["RC"] + r["RE"]))
    else:  # dual_supply (|VEE| drives the base loop) and fixed_base
        drive = abs(vee) if network == "dual_supply" else vcc
        ib = (drive - vbe - b1 * icbo * r["RE"]) / (r["RB"] + b1 * r["RE"])
    ic = beta * ib + b1 * icbo
    ie = ic + ib
    if network == "collector_feedback":
        vce = vcc - ie * (r["RC"] + r["RE"])
    elif network == "dual_supply":
        vce = vcc - ic * r["RC"] - (-ib * r["RB"] - vbe)
    else:
        vce = vcc - ic * r["RC"] - ie * r["RE"]
    return ic, vce


def _dense_bounds(case: dict) -> dict[str, tuple[float, float]]:
    """IC and VCE over a 3-point grid on every axis of the tolerance box."""
    t_lo, t_hi = case["ambient"]
    span = max(abs(t_lo - 25.0), abs(t_hi - 25.0))
    axes: dict[str, np.ndarray] = {}
    tv = case["vcc_tol"] / 100
    axes["vcc"] = np.array([1 - tv, 1.0, 1 + tv]) * case["vcc"]
    if case["vee"] is not None:
        te = case["vee_tol"] / 100
        axes["vee"] = np.array([1 - te, 1.0, 1 + te]) * case["vee"]
    for role, (value, tol, tempco) in case["parts"].items():
        lo = value * (1 - tol / 100) * (1 - tempco * 1e-6 * span)
        hi = value * (1 + tol / 100) * (1 + tempco * 1e-6 * span)
        axes[role] = np.array([lo, 0.5 * (lo + hi), hi])
    axes["hfe"] = np.array([case["hfe"][0], 0.5 * sum(case["hfe"]), case["hfe"][1]])
    axes["vbe"] = np.array([case["vbe"][0], 0.5 * sum(case["vbe"]), case["vbe"][1]])
    axes["icbo"] = np.array([0.0, 0.5, 1.0]) * case["icbo"]
    axes["ambient"] = np.array([t_lo, 0.5 * (t_lo + t_hi), t_hi])
    names = list(axes)
    grid = np.meshgrid(*(axes[n] for n in names), indexing="ij")
    g = {n: a.reshape(-1) for n, a in zip(names, grid, strict=True)}
    temp = g["ambient"]
    beta = g["hfe"] * ((temp + 273.15) / T_REF_K) ** XTB
    vbe = g["vbe"] + VBE_TEMPCO * (temp - 25.0)
    icbo = g["icbo"] * 2.0 ** ((temp - 25.0) / 10.0)
    r = {role: g[role] for role in case["parts"]}
    ic, vce = _currents(case["network"], case["polarity"], g["vcc"], g.get("vee"), r, beta,
                        vbe, icbo)
    assert np.all(vce > case["vce_sat"]), "generated case left the active region"
    return {"ic": (float(ic.min()), float(ic.max())), "vce": (float(vce.min()), float(vce.max()))}


def _hand_ic(case: dict, corner: dict) -> float:
    """IC from a corner's ``used`` values alone (nominal where an axis is not named)."""
    def used(name: str, default: float) -> float:
        return float(corner[name]["used"]) if name in corner else default

    r = {role: used(role, value) for role, (value, _, _) in case["parts"].items()}
    ic, _ = _currents(case["network"], case["polarity"], used("vcc", case["vcc"]),
                      used("vee", case["vee"] or 0.0), r, used("hfe", math.nan),
                      used("vbe", math.nan), used("icbo", 0.0))
    return float(ic)


CONSTANT = [(n, p, "constant_vbe", 100 + i) for i, (n, p) in
            enumerate(itertools.product(NETWORKS, ("NPN", "PNP")))]
EXPONENTIAL = [(n, p, "exponential", 200 + i) for i, (n, p) in
               enumerate(itertools.product(NETWORKS, ("NPN", "PNP")))]


@pytest.mark.parametrize(("network", "polarity", "model", "seed"), CONSTANT,
                         ids=[f"{n}-{p}" for n, p, _, _ in CONSTANT])
def test_bounds_equal_a_dense_evaluation(network, polarity, model, seed, tmp_path) -> None:
    case = _case(network, polarity, model, seed)
    out = _run(case, tmp_path)
    dense = _dense_bounds(case)
    for q in ("ic", "vce"):
        got = out["worst_case"][q]
        assert got["min"] == pytest.approx(dense[q][0], rel=RTOL), q
        assert got["max"] == pytest.approx(dense[q][1], rel=RTOL), q


@pytest.mark.parametrize(("network", "polarity", "model", "seed"), CONSTANT,
                         ids=[f"{n}-{p}" for n, p, _, _ in CONSTANT])
def test_corner_values_recompute_ic_by_hand(network, polarity, model, seed, tmp_path) -> None:
    case = _case(network, polarity, model, seed)
    out = _run(case, tmp_path)
    ic = out["worst_case"]["ic"]
    for end in ("min", "max"):
        corner = ic[f"corner_{end}"]
        # every parameter that varies is named with the value the solve used
        assert {"vcc", "hfe", "vbe", "icbo", "ambient_c", *case["parts"]} <= set(corner)
        assert _hand_ic(case, corner) == pytest.approx(ic[end], rel=RTOL)
    # the datasheet value is not what the solve used away from 25 °C: a hand check from
    # "value" misses (the ambient range here is −10…60 °C)
    hot = ic["corner_max"]
    stale = {k: {**v, "used": v["value"]} for k, v in hot.items()}
    assert abs(_hand_ic(case, stale) / ic["max"] - 1) > 1e-3


@pytest.mark.parametrize("network", ("dual_supply",))
def test_negative_rail_is_named_by_magnitude(network, tmp_path) -> None:
    # the largest |VEE| gives the largest IC (IE = (|VEE| − VBE)/(RE + RB/(β+1)), DESIGN §2):
    # its corner says vee "max" with the most negative value, and the text says |VEE|+
    from stockbias.render.check_table import corner_text

    case = _case(network, "NPN", "constant_vbe", 7)
    out = _run(case, tmp_path)
    vee = out["worst_case"]["ic"]["corner_max"]["vee"]
    assert vee["setting"] == "max"
    assert vee["value"] == pytest.approx(case["vee"] * 1.05, rel=1e-12)
    assert "|VEE|+" in corner_text(out["worst_case"]["ic"]["corner_max"])
    assert "|VEE|−" in corner_text(out["worst_case"]["ic"]["corner_min"])


@pytest.mark.spice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed")
@pytest.mark.parametrize(("network", "polarity", "model", "seed"), EXPONENTIAL,
                         ids=[f"{n}-{p}" for n, p, _, _ in EXPONENTIAL])
def test_exponential_nominal_point_matches_ngspice(network, polarity, model, seed,
                                                   tmp_path) -> None:
    from stockbias.analysis.spice import spice_operating_point
    from stockbias.render.netlist import model_card
    from stockbias.stock_io import read_inventory

    case = _case(network, polarity, model, seed)
    out = _run(case, tmp_path)
    inv = read_inventory(tmp_path / "shelf.csv")
    card, _ = model_card(inv.find_transistor("GQ"))
    values = {role: v for role, (v, _, _) in case["parts"].items()}
    sp = spice_operating_point(network, values, polarity, case["vcc"], case["vee"], card, 25.0)
    nom = out["nominal"]
    assert nom["region"] == "active"
    # ngspice-39: measured about 1e-7; allowed 1e-5 relative and 0.2 mV
    assert nom["ic"] == pytest.approx(sp["ic"], rel=1e-5)
    for node in ("vb", "vc", "ve"):
        assert nom[node] == pytest.approx(sp[node], abs=2e-4), node
