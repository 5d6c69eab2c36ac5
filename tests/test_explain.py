"""Advice for an impossible job keeps the stage working, and applied, it works.

Generated impossible jobs: collector-feedback stages on drawers whose largest resistor
is well below the base resistor a high-hFE transistor needs.  Relaxing the headroom
there admits only stages whose VCE sits within a few hundred millivolts of VCE(sat)
(shown below by a search without the headroom).  The explanation must never propose
such a stage, a gain or swing below the job's; it must name the cause (the RB the
headroom needs, computed here by hand) and every lever it offers must, applied to the
shelf or job by this test, make the job feasible (an outside check of the advice).
"""

from __future__ import annotations

import json
import re
from dataclasses import replace
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.eseries import series_values
from stockbias.job import Job, parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.design import design
from stockbias.search.levers import headroom_floor

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "design.schema.json").read_text())

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1 mA"
ic_window_pct = {window}
vce_min = "{vce_min} V"
{swing}
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 10
[search]
topology = "collector_feedback"
time_limit_s = 60
"""


def _drawer(seed: int, largest: float = 82e3, hfe=(150.0, 450.0)) -> Inventory:
    """E12 values from 1 kΩ to ``largest`` (a random dozen, the largest always in)."""
    rng = np.random.default_rng(seed)
    pool = [v for v in series_values("E12", 1e3, largest) if v < largest]
    values = sorted({*rng.choice(pool, size=11, replace=False).tolist(), largest})
    res = tuple(Resistor(part_id=f"D{i:02d}", value_ohm=float(v), tolerance_pct=5.0,
                         power_w=0.25, tempco_ppm=200.0, qty=60, unit_cost=0.01, line=i + 2)
                for i, v in enumerate(values))
    q = Transistor(part_id="QH", polarity="NPN", hfe_min=hfe[0], hfe_max=hfe[1],
                   vceo_max=40.0, ic_max=0.1, pd_max_w=0.5, vbe_min=0.6, vbe_max=0.72,
                   qty=100, unit_cost=0.05, line=50)
    return Inventory(path=f"<drawer {seed}>", resistors=res, transistors=(q,))


def _apply(lever: dict, job: Job, inv: Inventory) -> tuple[Job, Inventory]:
    """The job and shelf with the lever applied, from the lever's own numbers."""
    kind = lever["kind"]
    if kind == "buy_value":
        extra = tuple(Resistor(part_id=f"NEW{k}", value_ohm=it["value_ohm"],
                               tolerance_pct=it["tolerance_pct"], power_w=it["power_w"],
                               tempco_ppm=it["tempco_ppm"], qty=it["pieces"], unit_cost=0.5,
                               line=900 + k) for k, it in enumerate(lever["buy"]))
        return job, replace(inv, resistors=inv.resistors + extra)
    if kind == "one_percent":
        extra = tuple(Resistor(part_id=f"ONE{k}", value_ohm=it["value_ohm"], tolerance_pct=1.0,
                               power_w=0.25, tempco_ppm=it["tempco_ppm"], qty=it["pieces"],
                               unit_cost=0.5, line=950 + k)
                      for k, it in enumerate(lever["parts"]))
        return job, replace(inv, resistors=inv.resistors + extra)
    if kind == "hfe_bin":
        qs = tuple(replace(q, hfe_min=lever["hfe_min"], hfe_max=lever["hfe_max"])
                   if q.part_id == lever["transistor"] else q for q in inv.transistors)
        return job, replace(inv, transistors=qs)
    if kind == "other_network":
        return job.with_topology(lever["topology"]), inv
    if kind == "build_quantity":
        return replace(job, build=replace(job.build, quantity=lever["quantity"])), inv
    st = job.stage
    if kind == "lower_headroom":
        t = replace(st.target, vce_min=lever["vce_min_v"])
    elif kind == "wider_window":
        t = replace(st.target, ic_min=lever["ic_min_a"], ic_max=lever["ic_max_a"])
    elif kind == "higher_supply_power":
        return replace(job, stages=(replace(st, limits=replace(
            st.limits, supply_power_max=lever["supply_power_max_w"] * (1 + 1e-9))),)), inv
    else:
        raise AssertionError(f"unexpected lever {kind}")
    return replace(job, stages=(replace(st, target=t),)), inv


# (seed, IC window %, vce_min V, swing, a single value to buy exists); with ±30 % the
# hFE spread of collector feedback cannot be held with any one value (the search says so)
CASES = [(1, 40, 2.0, None, True), (2, 40, 3.0, None, True), (3, 50, 2.0, "1 V", True),
         (4, 30, 2.5, None, False)]


@pytest.mark.parametrize(("seed", "window", "vce_min", "swing", "buy"), CASES,
                         ids=[f"seed{c[0]}" for c in CASES])
def test_advice_keeps_the_stage_working_and_applied_it_works(seed, window, vce_min, swing,
                                                              buy):
    inv = _drawer(seed)
    text = JOB.format(window=window, vce_min=vce_min,
                      swing=f'swing_pk = "{swing}"' if swing else "")
    job = parse_job(text, f"<impossible {seed}>")
    result = design(job, inv)
    assert result.status == "infeasible"
    floor = headroom_floor(inv.transistors[0].vce_sat)
    # what relaxing the headroom alone admits: a stage at or near VCE(sat) (below the floor)
    st = job.stage
    loose = replace(job, stages=(replace(st, target=replace(st.target, vce_min=0.0,
                                                            swing_pk=None)),))
    near_sat = design(loose, inv, top=1)
    assert near_sat.designs
    assert near_sat.designs[0].check.worst.bounds["vce"].min < floor
    ex = result.explanation
    assert ex is not None and ex.levers
    # the cause: VCE = VBE + IB·RB ≥ vce_min at the largest hFE and the window's top IC;
    # hand calculation: VBE 0.6 V − 2 mV/°C × 25 °C, hFE 450 × (323.15/298.15)^1.5 at 50 °C
    need = max(vce_min, 0.2 + (1.0 if swing else 0.0))
    beta = 450 * (323.15 / 298.15) ** 1.5
    rb = (need - (0.6 - 0.002 * 25)) * beta / (1e-3 * (1 + window / 100))
    m = re.search(r"RB would need about ([\d.]+) kΩ", ex.message)
    assert m, ex.message
    assert float(m.group(1)) == pytest.approx(rb / 1e3, rel=2e-3)
    assert "82 kΩ" in ex.message
    assert any(c["name"] == "vce_min" for c in ex.misses)      # every miss named
    for lever in ex.levers:
        assert lever["kind"] not in ("gain_window", "lower_swing")
        if lever["kind"] == "lower_headroom":
            assert lever["vce_min_v"] >= floor
        j2, inv2 = _apply(lever, job, inv)
        if lever["kind"] == "lower_headroom":
            assert j2.stage.target.swing_pk == job.stage.target.swing_pk
        again = design(j2, inv2, top=1)
        # the outside check: the advice, applied, makes the job feasible
        assert again.designs, (lever["text"], again.status)
        d = again.designs[0]
        assert d.check.ok and d.check.worst.bounds["vce"].min >= floor
    kinds = {x["kind"] for x in ex.levers}
    assert ("buy_value" in kinds) == buy
    if not buy:
        return
    buy = next(x for x in ex.levers if x["kind"] == "buy_value")
    assert len(buy["buy"]) == 1 and buy["buy"][0]["value_ohm"] >= rb * 0.999
    assert buy["buy"][0]["pieces"] == 10 * len(buy["buy"][0]["roles"])


def test_hfe_bin_lever_when_the_spread_binds():
    """A shelf whose values could bias a narrower bin: the lever names the bin, and the
    binned transistor makes the job feasible."""
    inv = _drawer(7, largest=1e6, hfe=(100.0, 400.0))
    job = parse_job(JOB.format(window=30, vce_min=2.0, swing=""), "<bin>")
    result = design(job, inv)
    assert result.status == "infeasible"
    levers = {x["kind"]: x for x in result.explanation.levers}
    assert "hfe_bin" in levers, result.explanation.to_dict()
    b = levers["hfe_bin"]
    assert 100.0 <= b["hfe_min"] < b["hfe_max"] <= 400.0
    assert b["hfe_max"] / b["hfe_min"] < 4.0 and b["pieces"] == 10
    j2, inv2 = _apply(b, job, inv)
    assert design(j2, inv2, top=1).designs


def test_cli_lists_every_lever(tmp_path: Path):
    job = tmp_path / "tight.toml"
    job.write_text(re.sub(r"ic_window_pct = \d+", "ic_window_pct = 3",
                          (SAMPLES / "line_driver_job.toml").read_text()))
    out = CliRunner().invoke(app, ["design", str(job), "--inventory",
                                   str(SAMPLES / "workshop_drawers.csv")],
                             env={"COLUMNS": "200"})
    assert out.exit_code == 1
    assert "What would help" in out.output
    assert "lower the VCE headroom to 0.2 V" not in out.output
    js = CliRunner().invoke(app, ["design", str(job), "--inventory",
                                  str(SAMPLES / "workshop_drawers.csv"), "--json"])
    assert js.exit_code == 1
    payload = json.loads(js.stdout)
    jsonschema.validate(payload, SCHEMA)
    ex = payload["explanation"]
    assert ex["levers"] and ex["relaxation"] == ex["levers"][0]
    for lever in ex["levers"]:
        assert lever["kind"] in ("wider_window", "buy_value", "hfe_bin", "one_percent",
                                 "other_network", "build_quantity", "lower_headroom",
                                 "higher_supply_power")


def test_headroom_floor():
    # max(1 V, VCE(sat) + 0.5 V) (common practice, see stockbias.search.levers)
    assert headroom_floor(0.2) == pytest.approx(1.0)
    assert headroom_floor(0.7) == pytest.approx(1.2)


def test_headroom_lever_stays_above_the_floor():
    """A headroom the shelf cannot give: the lever lowers it, to a value at or above the
    floor, and the job with that headroom is feasible; every miss is named."""
    from stockbias.stock_io import read_inventory

    inv = read_inventory(SAMPLES / "workshop_drawers.csv")
    text = re.sub(r'vce_min = "[^"]*"', 'vce_min = "8 V"',
                  (SAMPLES / "line_driver_job.toml").read_text())
    job = parse_job(text, "<high headroom>")
    result = design(job, inv)
    assert result.status == "infeasible"
    ex = result.explanation
    assert [c["name"] for c in ex.misses if not c["ok"]] == [c["name"] for c in ex.misses]
    assert "vce_min" in ex.message
    levers = {x["kind"]: x for x in ex.levers}
    assert "lower_headroom" in levers
    v = levers["lower_headroom"]["vce_min_v"]
    assert headroom_floor(0.2) <= v < 8.0
    j2, inv2 = _apply(levers["lower_headroom"], job, inv)
    assert design(j2, inv2, top=1).designs


DIVIDER = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1 mA"
ic_window_pct = {window}
vce_min = "2 V"
[environment]
ambient_min_c = 20
ambient_max_c = 30
[build]
quantity = {build}
[search]
topology = "divider"
"""


def test_one_percent_lever_names_the_roles_that_bind():
    """Every drawer line is ±5 %: with a ±15 % window a 1 % part on the binding role is the
    lever; applied (that value bought at 1 %), the job is feasible."""
    inv = _drawer(2, largest=100e3, hfe=(150.0, 300.0))
    job = parse_job(DIVIDER.format(window=15, build=10), "<one percent>")
    result = design(job, inv)
    assert result.status == "infeasible"
    levers = {x["kind"]: x for x in result.explanation.levers}
    assert "one_percent" in levers, result.explanation.to_dict()
    lever = levers["one_percent"]
    assert all(p["pieces"] == 10 * len(p["roles"]) for p in lever["parts"])
    assert "at 1 % instead of" in lever["text"]
    j2, inv2 = _apply(lever, job, inv)
    assert design(j2, inv2, top=1).designs


def test_build_quantity_lever_is_the_largest_the_stock_covers():
    """Every line holds 60 pieces: 70 boards cannot be built; the lever names the largest
    build that can, and one board more cannot (both checked by searching here)."""
    inv = _drawer(2, largest=100e3, hfe=(150.0, 300.0))
    job = parse_job(DIVIDER.format(window=30, build=70), "<build>")
    result = design(job, inv)
    assert result.status == "infeasible"
    levers = {x["kind"]: x for x in result.explanation.levers}
    assert "build_quantity" in levers, result.explanation.to_dict()
    n = levers["build_quantity"]["quantity"]
    assert 1 <= n < 70
    j2, inv2 = _apply(levers["build_quantity"], job, inv)
    assert design(j2, inv2, top=1).designs
    more = replace(job, build=replace(job.build, quantity=n + 1))
    assert not design(more, inv, top=1).designs


@pytest.mark.parametrize(("ic", "power_mw"), [("12 mA", 60), ("40 mA", 60), ("3 mA", 20)])
def test_a_supply_power_no_design_can_meet_is_said_with_its_numbers(
        tmp_path: Path, ic: str, power_mw: float) -> None:
    """Hand calculation: every design holds IC ≥ IC min at the highest supply, so the supply
    power is at least VCC·(1 + tol)·IC min; a limit below that is named with the numbers."""
    root = Path(__file__).resolve().parent.parent / "inventory_samples"
    text = (root / "line_driver_job.toml").read_text()
    text = text.replace('ic = "1.5 mA"', f'ic = "{ic}"').replace(
        'supply_power_max = "60 mW"', f'supply_power_max = "{power_mw} mW"')
    job_path = tmp_path / "job.toml"
    job_path.write_text(text)
    res = CliRunner(env={"COLUMNS": "200"}).invoke(
        app, ["design", str(job_path), "-i", str(root / "workshop_drawers.csv"), "--json"])
    assert res.exit_code == 1, res.output
    ex = json.loads(res.stdout)["explanation"]
    ic_a = float(ic.split()[0]) * 1e-3
    need_w = 12 * 1.05 * ic_a * (1 - 0.30)              # 12 V +5 %, window ±30 %
    assert ex["binding"] == "supply_power_max"
    assert ex["levers"][0]["supply_power_max_min_w"] == pytest.approx(need_w, rel=1e-12)
    assert f"{need_w * 1e3:.4g} mW" in ex["message"]
