"""What a stage does (gain, input resistance, swing, supply current) and the new-design
defaults (divider stiffness, supply current).

Expected values come from the closed forms of the constant-VBE stage, with no leakage, no
tempco and a 25 °C ambient (β and VBE are the row's values, VT = k·298.15 K/q with the
exact SI constants), and no θJA in the row (no self-heated corners):

* divider (DESIGN §2): VBB = VCC·R2/(R1+R2), RBB = R1‖R2, IE = (VBB−VBE)/(RE + RBB/(β+1)),
  IB = IE/(β+1), IC = β·IB, VB = VBE + IE·RE, VCE = VCC − IC·RC − IE·RE;
* supply current of a divider stage = IC + (VCC − VB)/R1 (Kirchhoff's current law at the
  supply node; hand calculation); split supply: the larger rail current, IE;
* hybrid-π mid-band figures without rₒ (no VAF in the row): rπ = β·VT/IC; RE bypassed:
  Av = −IC/VT·(RC‖RL), Rin = R1‖R2‖rπ; RE unbypassed: Av = −β·(RC‖RL)/(rπ + (β+1)·RE),
  Rin = R1‖R2‖(rπ + (β+1)·RE) (the textbook common-emitter results);
* peak swing = min(VCE − VCE(sat), IC·(RC‖RL)) (DC load line and cut-off).

Worst-case figures are compared with an exhaustive evaluation of those closed forms at
every corner of the tolerance box, written here.
"""

from __future__ import annotations

import itertools
import json
import math
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.cli.app import app
from stockbias.errors import JobError
from stockbias.job import load_job, parse_job
from stockbias.search.defaults import with_design_defaults
from stockbias.search.design import design
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "check.schema.json").read_text())
runner = CliRunner(env={"COLUMNS": "400"})

SHELF_TEXT = """\
kind,part_id,value,tolerance_pct,power_w,qty,unit_cost,location,polarity,hfe_min,hfe_max,\
vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,vce_sat,hfe_test_ic
resistor,PX-1K0,1k,5,0.25,50,0.01,B1,,,,,,,,,,
resistor,PX-3K3,3.3k,5,0.25,50,0.01,B2,,,,,,,,,,
resistor,PX-4K7,4.7k,5,0.25,50,0.01,B3,,,,,,,,,,
resistor,PX-8K2,8.2k,5,0.25,50,0.01,B4,,,,,,,,,,
resistor,PX-10K,10k,5,0.25,50,0.01,B5,,,,,,,,,,
resistor,PX-47K,47k,5,0.25,50,0.01,B6,,,,,,,,,,
transistor,PQ-N1,,,,40,0.05,C1,NPN,120,360,40V,200mA,500mW,0.62,0.70,0.2,1mA
"""
HFE = (120.0, 360.0)
VBE = (0.62, 0.70)
VCE_SAT = 0.2
TOL = 0.05
VT = 1.380649e-23 * 298.15 / 1.602176634e-19     # thermal voltage at 25 °C, V (SI exact)
R = {"R1": 47e3, "R2": 10e3, "RC": 4.7e3, "RE": 1e3}
VALUES = {"R1": "PX-47K", "R2": "PX-10K", "RC": "PX-4K7", "RE": "PX-1K0"}

JOB = """\
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1 mA"
ic_window_pct = 40
vce_min = "1 V"
{target}
[limits]
{limits}
{small}
[search]
topology = "divider"
"""


@pytest.fixture(scope="module")
def shelf(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("shelf") / "bench.csv"
    path.write_text(SHELF_TEXT)
    return path


def par(*rs: float) -> float:
    return 1.0 / sum(1.0 / r for r in rs)


def figures(vcc, r1, r2, rc, re_, beta, vbe, *, bypassed=True, load=math.inf) -> dict:
    """The closed forms of the module docstring at one point."""
    vbb, rbb = vcc * r2 / (r1 + r2), par(r1, r2)
    ie = (vbb - vbe) / (re_ + rbb / (beta + 1))
    ic = beta / (beta + 1) * ie
    vb = vbe + ie * re_
    vce = vcc - ic * rc - ie * re_
    r_pi = beta * VT / ic
    rl = rc if math.isinf(load) else par(rc, load)
    if bypassed:
        gain, r_base = -ic / VT * rl, r_pi
    else:
        gain, r_base = -beta * rl / (r_pi + (beta + 1) * re_), r_pi + (beta + 1) * re_
    return {"ic": ic, "vce": vce, "gain": gain, "rin": par(r1, r2, r_base),
            "swing": min(vce - VCE_SAT, ic * rl), "supply": ic + (vcc - vb) / r1,
            "ratio": (vb / r2) / (ie / (beta + 1))}


def every_corner(**kw) -> list[dict]:
    """The closed forms at all 2^7 corners of the box (VCC ±5 %, each R ±5 %, hFE, VBE)."""
    ends = [(12 * 0.95, 12 * 1.05)] + [(v * (1 - TOL), v * (1 + TOL))
                                        for v in (R["R1"], R["R2"], R["RC"], R["RE"])]
    return [figures(*p, **kw) for p in itertools.product(*ends, HFE, VBE)]


def _job(target: str = "", limits: str = "", small: str = "") -> str:
    return JOB.format(target=target, limits=limits, small=small)


@pytest.mark.parametrize(("small", "bypassed", "load"), [
    ("", True, math.inf),
    ('[small_signal]\nre_bypassed = false\nload = "10k"', False, 10e3),
])
def test_figures_nominal_and_worst_match_the_closed_forms(shelf, small, bypassed, load):
    job = parse_job(_job(small=small))
    res = analyze(job, VALUES, "PQ-N1", read_inventory(shelf), samples=0)
    p = res.purpose
    assert p is not None
    nominal = figures(12.0, R["R1"], R["R2"], R["RC"], R["RE"], math.sqrt(HFE[0] * HFE[1]),
                      sum(VBE) / 2, bypassed=bypassed, load=load)
    # the nominal point: hFE the geometric mean, VBE the middle (DESIGN §2 nominal)
    assert p["gain"].nominal == pytest.approx(nominal["gain"], rel=1e-9)
    assert p["rin"].nominal == pytest.approx(nominal["rin"], rel=1e-9)
    assert p["swing_pk"].nominal == pytest.approx(nominal["swing"], rel=1e-9)
    assert p["supply_current"].nominal == pytest.approx(nominal["supply"], rel=1e-9)
    corners = every_corner(bypassed=bypassed, load=load)
    assert p["gain"].low == pytest.approx(min(abs(c["gain"]) for c in corners), rel=1e-9)
    assert p["gain"].high == pytest.approx(max(abs(c["gain"]) for c in corners), rel=1e-9)
    assert p["rin"].worst == pytest.approx(min(c["rin"] for c in corners), rel=1e-9)
    assert p["swing_pk"].worst == pytest.approx(min(c["swing"] for c in corners), rel=1e-9)
    assert p["supply_current"].worst == pytest.approx(max(c["supply"] for c in corners),
                                                      rel=1e-9)
    text, taken = p.conditions, p.defaults
    if small:
        assert text == "RE not bypassed, load 10 kΩ" and taken == []
    else:
        assert text == "RE bypassed, no load"
        assert taken == ["RE taken as bypassed", "no load"]


def test_limits_on_the_figures_pass_and_fail_at_the_worst_corner(shelf):
    corners = every_corner()
    rin_w = min(c["rin"] for c in corners)
    sup_w = max(c["supply"] for c in corners)
    ratio_w = min(c["ratio"] for c in corners)
    inv = read_inventory(shelf)
    # just inside each worst value: every one passes
    ok = parse_job(_job(target=f"rin_min = {rin_w * 0.99}\ndivider_ratio_min = "
                               f"{ratio_w * 0.99}",
                        limits=f"supply_current_max = {sup_w * 1.01}"))
    res = analyze(ok, VALUES, "PQ-N1", inv, samples=0)
    by = {c.name: c for c in res.constraints}
    assert by["rin_min"].ok and by["supply_current_max"].ok and by["divider_ratio_min"].ok
    assert by["rin_min"].worst == pytest.approx(rin_w, rel=1e-9)
    assert by["supply_current_max"].worst == pytest.approx(sup_w, rel=1e-9)
    assert by["divider_ratio_min"].worst == pytest.approx(ratio_w, rel=1e-9)
    # just outside: each one fails, by the margin the closed forms give
    bad = parse_job(_job(target=f"rin_min = {rin_w * 1.01}\ndivider_ratio_min = "
                                f"{ratio_w * 1.01}",
                         limits=f"supply_current_max = {sup_w * 0.99}"))
    res = analyze(bad, VALUES, "PQ-N1", inv, samples=0)
    by = {c.name: c for c in res.constraints}
    assert not by["rin_min"].ok and not by["supply_current_max"].ok
    assert not by["divider_ratio_min"].ok
    assert by["rin_min"].margin == pytest.approx(-0.01 * rin_w, rel=1e-6)
    assert by["supply_current_max"].margin == pytest.approx(-0.01 * sup_w, rel=1e-6)


def test_split_supply_current_is_the_emitter_rail_current(tmp_path, shelf):
    """dual_supply, RB to ground: VCC delivers IC, VEE takes IE = IC + IB: the larger, IE
    (IE = (|VEE| − VBE)/(RE + RB/(β+1)), hand calculation)."""
    job = parse_job("""\
[supply]
volts = 12
negative_volts = -6
[target]
ic = "1 mA"
ic_window_pct = 40
[search]
topology = "dual_supply"
""")
    res = analyze(job, {"RB": "PX-10K", "RE": "PX-4K7", "RC": "PX-4K7"}, "PQ-N1",
                  read_inventory(shelf), samples=0)
    beta, vbe = math.sqrt(HFE[0] * HFE[1]), sum(VBE) / 2
    ie = (6.0 - vbe) / (4.7e3 + 10e3 / (beta + 1))
    assert res.purpose["supply_current"].nominal == pytest.approx(ie, rel=1e-9)
    assert res.nominal["supply_current"] == pytest.approx(ie, rel=1e-9)


def test_new_keys_read_with_notation_and_their_ranges():
    job = parse_job(_job(target='rin_min = "2.2k"\ndivider_ratio_min = 0',
                         limits='supply_current_max = "3 mA"'))
    t, lim = job.stage.target, job.stage.limits
    assert t.rin_min == pytest.approx(2200.0) and t.divider_ratio_min == 0.0
    assert lim.supply_current_max == pytest.approx(3e-3)
    for target, limits, key in (("rin_min = 0.5", "", "rin_min"),
                                ("", "supply_current_max = -1", "supply_current_max"),
                                ("divider_ratio_min = 5000", "", "divider_ratio_min")):
        with pytest.raises(JobError) as err:
            parse_job(_job(target=target, limits=limits), "bench.toml")
        e = err.value
        assert e.file == "bench.toml" and e.column.endswith(key) and e.line is not None
        assert key in e.message


def test_divider_ratio_zero_sets_no_limit(shelf):
    job = parse_job(_job(target="divider_ratio_min = 0"))
    res = analyze(job, VALUES, "PQ-N1", read_inventory(shelf), samples=0)
    assert "divider_ratio_min" not in {c.name for c in res.constraints}


def test_check_cli_stage_block_and_json(tmp_path, shelf):
    job = tmp_path / "job.toml"
    job.write_text(_job(target='rin_min = "5k"'))
    args = ["check", str(job), "-i", str(shelf), "-v",
            ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t", "PQ-N1", "--samples", "0"]
    out = runner.invoke(app, args)
    # R1‖R2‖rπ stays below 5 kΩ at every corner (closed forms above): the check fails
    assert max(c["rin"] for c in every_corner()) < 5e3
    assert out.exit_code == 1, out.output
    assert "FAIL" in out.stdout and "rin_min" in out.stdout
    assert "Stage: what it does (mid-band, RE bypassed, no load" in out.stdout
    assert "Assumed for gain and input resistance ([small_signal] not given): RE taken as " \
           "bypassed, no load" in out.stdout
    for label in ("voltage gain", "input resistance", "output swing (peak)",
                  "supply current"):
        assert label in out.stdout
    js = runner.invoke(app, [*args, "--json"])
    assert js.exit_code == 1
    payload = json.loads(js.stdout)
    jsonschema.validate(payload, SCHEMA)
    p = payload["purpose"]
    nominal = figures(12.0, R["R1"], R["R2"], R["RC"], R["RE"], math.sqrt(HFE[0] * HFE[1]),
                      sum(VBE) / 2)
    assert p["supply_current"]["nominal"] == pytest.approx(nominal["supply"], rel=1e-9)
    assert p["swing_pk"]["worst"] == pytest.approx(min(c["swing"] for c in every_corner()),
                                                   rel=1e-9)
    assert p["defaults"] == ["RE taken as bypassed", "no load"]


def test_design_defaults_are_filled_stated_and_overridable():
    job, notes = with_design_defaults(parse_job(_job()))
    t, lim = job.stage.target, job.stage.limits
    assert t.divider_ratio_min == 10.0                      # rule of thumb, common practice
    assert lim.supply_current_max == pytest.approx(1.5 * 1.4e-3)   # 1.5 × IC max
    assert any("divider current ≥ 10 × IB" in n and "target.divider_ratio_min = 0" in n
               for n in notes)
    assert any("supply current ≤ 1.5 × IC max = 2.1 mA" in n for n in notes)
    assert any("no target.swing_pk or target.gain_min" in n for n in notes)
    # the job's own keys stand: no default, no note
    own, notes = with_design_defaults(parse_job(_job(
        target='divider_ratio_min = 0\nswing_pk = "1 V"', limits='supply_power_max = "50 mW"')))
    assert own.stage.target.divider_ratio_min == 0.0
    assert own.stage.limits.supply_current_max is None
    assert notes == []
    # a gain limit without [small_signal]: the conditions it is judged under are stated
    _, notes = with_design_defaults(parse_job(_job(target="gain_min = 20")))
    assert "gain and input resistance with RE taken as bypassed, no load (small_signal not " \
           "given in the job)" in notes


def test_check_applies_no_design_default(shelf):
    res = analyze(parse_job(_job()), VALUES, "PQ-N1", read_inventory(shelf), samples=0)
    names = {c.name for c in res.constraints}
    assert "divider_ratio_min" not in names and "supply_current_max" not in names


def test_design_cli_states_the_defaults(tmp_path, shelf):
    job = tmp_path / "job.toml"
    job.write_text(_job(target='swing_pk = "1 V"'))
    out = runner.invoke(app, ["design", str(job), "-i", str(shelf), "--top", "1"])
    assert out.exit_code == 0, out.output
    assert "divider current ≥ 10 × IB at every corner" in out.stdout
    assert "supply current ≤ 1.5 × IC max" in out.stdout
    js = runner.invoke(app, ["design", str(job), "-i", str(shelf), "--top", "1", "--json"])
    payload = json.loads(js.stdout)
    assert any("divider_ratio_min = 0" in a for a in payload["assumptions"])
    names = {c["name"] for c in payload["designs"][0]["constraints"]}
    assert {"divider_ratio_min", "supply_current_max"} <= names


def test_bundled_job_first_design_is_one_an_engineer_builds():
    """The bundled line driver with its purpose and the design defaults: the best design
    sits at VE about 1–2 V (about 10 % of VCC) with VC near the middle of the window
    between VE and VCC (common practice), and meets the job's swing, gain and input
    resistance at the worst corner."""
    job, _ = with_design_defaults(load_job(SAMPLES / "line_driver_job.toml"))
    inv = read_inventory(SAMPLES / "workshop_drawers.csv")
    best = design(job, inv, top=1).designs[0]
    n, p, t = best.check.nominal, best.check.purpose, job.stage.target
    assert 1.0 <= n["ve"] <= 2.0
    middle = (12.0 + n["ve"]) / 2
    assert abs(n["vc"] - middle) <= 0.15 * (12.0 - n["ve"])
    assert p["swing_pk"].worst >= t.swing_pk
    assert t.gain_min <= p["gain"].low <= p["gain"].high <= t.gain_max
    assert p["rin"].worst >= t.rin_min
    assert best.check.ok


def test_demo_states_what_rank_1_does_and_the_defaults():
    out = runner.invoke(app, ["demo"])
    assert out.exit_code == 0, out.output
    assert "What rank 1 does (RE not bypassed, load 10 kΩ): voltage gain" in out.stdout
    assert "divider current ≥ 10 × IB at every corner" in out.stdout
    # the bundled job states supply_power_max: the job's power budget stands, no current
    # default (source: the job file and the defaults' rule)
    assert "supply current ≤ 1.5 × IC max" not in out.stdout
