"""`check` outputs: every job key through every output, gain limits at saturated corners,
figures that do not apply at a non-active nominal point, and the one IC margin.

Expected values come from the DESIGN §2 closed forms of the divider with a constant VBE
(VBB = VCC·R2/(R1+R2), RBB = R1‖R2, IE = (VBB−VBE)/(RE + RBB/(β+1)), IC = α·IE,
VCE = VCC − IC·RC − IE·RE; saturated where that VCE is below the row's VCE(sat); cut off
where VBB < VBE), evaluated here over every corner of the tolerance box.  The shelf has no
leakage and no tempco, and the ambient is 25 °C, so β and VBE are the row's values.
"""

from __future__ import annotations

import itertools
import json
import math
import re
import tomllib
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze, build_spec
from stockbias.analysis.constraints import ic_margin
from stockbias.analysis.montecarlo import board_values
from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.job import _SECTIONS, parse_job
from stockbias.stock_io import read_inventory
from stockbias.units import format_quantity

ROOT = Path(__file__).resolve().parent.parent
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "check.schema.json").read_text())
runner = CliRunner(env={"COLUMNS": "400"})   # wide: table cells are not wrapped

SHELF_TEXT = """\
kind,part_id,value,tolerance_pct,power_w,qty,unit_cost,location,polarity,hfe_min,hfe_max,\
vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,vce_sat,hfe_test_ic
resistor,FX-100R,100,5,0.25,50,0.01,B1,,,,,,,,,,
resistor,FX-1K0,1k,5,0.25,50,0.01,B2,,,,,,,,,,
resistor,FX-2K2,2.2k,5,0.25,50,0.01,B3,,,,,,,,,,
resistor,FX-3K3,3.3k,5,0.25,50,0.01,B4,,,,,,,,,,
resistor,FX-6K8,6.8k,5,0.25,50,0.01,B5,,,,,,,,,,
resistor,FX-8K2,8.2k,5,0.25,50,0.01,B6,,,,,,,,,,
resistor,FX-10K,10k,5,0.25,50,0.01,B7,,,,,,,,,,
resistor,FX-12K,12k,5,0.25,50,0.01,B8,,,,,,,,,,
resistor,FX-39K,39k,5,0.25,50,0.01,B9,,,,,,,,,,
transistor,TQ-N1,,,,40,0.05,C1,NPN,80,400,40V,200mA,500mW,0.60,0.70,0.2,1mA
"""
VCE_SAT = 0.2                           # the row's VCE(sat), V
HFE = (80.0, 400.0)                     # the row's hFE range
VBE = (0.60, 0.70)                      # the row's VBE range, V
TOL = 0.05                              # every resistor ±5 %
VALUES = {"39k": 39e3, "8.2k": 8.2e3, "1k": 1e3, "100": 100.0, "3.3k": 3.3e3, "6.8k": 6.8e3,
          "12k": 12e3}

DIVIDER_JOB = """\
[supply]
volts = 12
tolerance_pct = 10
[target]
ic = "1.4 mA"
ic_window_pct = 35
vce_min = "0.5 V"
gain_min = 100
gain_max = 2000
[small_signal]
re_bypassed = true
[search]
topology = "divider"
model = "constant_vbe"
"""


@pytest.fixture(scope="module")
def shelf(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("shelf") / "bench.csv"
    path.write_text(SHELF_TEXT)
    return path


def closed_form(vcc: float, r1: float, r2: float, rc: float, re_: float, beta: float,
                vbe: float) -> tuple[float, float]:
    """(IC, VCE) of the active divider stage, DESIGN §2 (ICBO 0), A and V."""
    vbb, rbb = vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2)
    ie = (vbb - vbe) / (re_ + rbb / (beta + 1))
    ic = beta / (beta + 1) * ie
    return ic, vcc - ic * rc - ie * re_


def every_corner(vcc: float, vcc_tol: float, r: dict[str, float]) -> list[tuple[float, float]]:
    """(IC, VCE) by the closed form at every corner of the tolerance box (exhaustive)."""
    out = []
    ends = [(vcc * (1 - vcc_tol), vcc * (1 + vcc_tol))]
    ends += [(v * (1 - TOL), v * (1 + TOL)) for v in (r["R1"], r["R2"], r["RC"], r["RE"])]
    for vs, r1, r2, rc, re_, beta, vbe in itertools.product(*ends, HFE, VBE):
        out.append(closed_form(vs, r1, r2, rc, re_, beta, vbe))
    return out


def parts(r1: str, r2: str, rc: str, re_: str) -> dict[str, str]:
    ids = {"39k": "FX-39K", "8.2k": "FX-8K2", "1k": "FX-1K0", "100": "FX-100R",
           "3.3k": "FX-3K3", "6.8k": "FX-6K8", "12k": "FX-12K"}
    return {"R1": ids[r1], "R2": ids[r2], "RC": ids[rc], "RE": ids[re_]}


# --- 1. every job key through every output ------------------------------------------------

ALL_KEYS_DIVIDER = """\
[supply]
volts = 12
tolerance_pct = 5
mains_derived = true
[target]
ic = "1.4 mA"
ic_window_pct = 40
vce_min = "1 V"
swing_pk = "0.5 V"
gain_min = 1.5
gain_max = 3
yield_min = 50
rin_min = "100"
divider_ratio_min = 5
[limits]
supply_power_max = "100 mW"
supply_current_max = "20 mA"
resistor_derating = 0.6
tj_max = "125 °C"
derating_knee_c = 70
derating_zero_c = 155
[environment]
ambient_min_c = 0
ambient_max_c = 50
[small_signal]
load = "10k"
re_bypassed = false
[build]
quantity = 4
allow_pairs = false
default_tolerance_pct = 5
[keep_purpose]
gain_pct = 10
rin_pct = 80
swing_pct = 90
supply_current_pct = 125
[search]
topology = "divider"
model = "constant_vbe"
objectives = ["cost", "ic_margin"]
top = 3
time_limit_s = 10
seed = 7
"""
ALL_KEYS_DUAL = """\
[supply]
volts = 9
tolerance_pct = 5
negative_volts = -6
negative_tolerance_pct = 5
[target]
ic_min = "1.2 mA"
ic_max = "2.0 mA"
vce_min = "2 V"
swing_pk = "1 V"
gain_min = 0.3
gain_max = 5
yield_min = "90 %"
yield_confidence = "97.5 %"
[limits]
supply_power_max = "60 mW"
[environment]
ambient_min_c = -10
ambient_max_c = 60
[small_signal]
load = "10k"
re_bypassed = false
[search]
topology = "dual_supply"
model = "exponential"
"""
ALL_KEY_CASES = [
    pytest.param(ALL_KEYS_DIVIDER, "R1=FX-39K,R2=FX-8K2,RC=FX-2K2,RE=FX-1K0", id="divider"),
    pytest.param(ALL_KEYS_DUAL, "RB=FX-10K,RE=FX-3K3,RC=FX-2K2", id="dual_supply"),
]


def test_the_cases_use_every_job_key() -> None:
    """Together the two jobs set every key of every section (job._SECTIONS)."""
    used: dict[str, set[str]] = {}
    for case in ALL_KEY_CASES:
        for section, keys in tomllib.loads(case.values[0]).items():
            used.setdefault(section, set()).update(keys)
    assert {s: set(k) for s, k in _SECTIONS.items()} == used


@pytest.mark.parametrize(("job_text", "values"), ALL_KEY_CASES)
def test_every_job_key_through_every_output(tmp_path: Path, shelf: Path, job_text: str,
                                            values: str) -> None:
    job = tmp_path / "job.toml"
    job.write_text(job_text)
    base = ["check", str(job), "-i", str(shelf), "-v", values, "-t", "TQ-N1", "--samples",
            "300"]
    expected = {"ic_min", "ic_max", "vce_min", "swing_saturation", "swing_cutoff", "gain_min",
                "gain_max", "supply_power", "yield_min"}
    if "rin_min" in job_text:
        expected |= {"rin_min", "divider_ratio_min", "supply_current_max"}

    js = runner.invoke(app, [*base, "--json"])
    assert js.exit_code in (0, 1), js.output
    payload = json.loads(js.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert js.exit_code == (0 if payload["ok"] else 1)
    names = {c["name"] for c in payload["constraints"]}
    assert expected <= names
    by = {c["name"]: c for c in payload["constraints"]}
    assert by["gain_min"]["unit"] == by["gain_max"]["unit"] == "V/V"
    # the job writes yield_min in percent; JSON keeps the fraction, the screens the percent
    pct = 50 if "yield_min = 50" in job_text else 90
    assert by["yield_min"]["limit"] == pct / 100
    assert 0 <= by["yield_min"]["worst"] <= 1

    plots, report = tmp_path / "plots", tmp_path / "report.html"
    text = runner.invoke(app, [*base, "--plot", str(plots), "--report", str(report)])
    assert text.exit_code == js.exit_code, text.output
    assert "Traceback" not in text.output
    for name in expected:
        assert name in text.stdout
    assert re.search(r"≥ \d[\d.]* V/V", text.stdout)        # gain limits in their unit
    assert f"≥ {pct} %" in text.stdout
    assert f"{format_quantity(100 * by['yield_min']['worst'], '%')}" in text.stdout
    assert "IC margin" in text.stdout
    html = report.read_text()
    for name in expected:
        assert name in html
    assert "V/V" in html
    assert f"<td>{pct} %</td>" in html                       # the limit cell and the setting
    written = sorted(p.name for p in plots.iterdir())
    assert written == ["ic_histogram.png", "ic_histogram.svg", "qpoints.png", "qpoints.svg"]
    assert all((plots / n).stat().st_size > 10_000 for n in written)


# --- 2. gain limits at saturated corners ---------------------------------------------------

def test_gain_min_fails_at_saturated_corners_and_names_one(shelf: Path) -> None:
    """RC 6.8 kΩ: the closed form saturates the stage at 24 of the 128 corners."""
    job = parse_job(DIVIDER_JOB)
    r = {"R1": 39e3, "R2": 8.2e3, "RC": 6.8e3, "RE": 1e3}
    corners = every_corner(12.0, 0.10, r)
    saturated = sum(vce < VCE_SAT for _, vce in corners)
    assert saturated == 24                         # exhaustive closed-form evaluation above
    res = analyze(job, parts("39k", "8.2k", "6.8k", "1k"), "TQ-N1", read_inventory(shelf),
                  samples=0)
    wc = res.worst
    assert wc.non_active_corners / wc.n_vertices == pytest.approx(saturated / len(corners))
    by = {c.name: c for c in res.constraints}
    gmin, gmax = by["gain_min"], by["gain_max"]
    # the active corners alone would pass gain_min: the test bites on the saturated ones
    assert wc.bounds["gain_abs"].min > 100
    assert not gmin.ok
    assert gmin.worst == 0.0
    assert gmin.margin == pytest.approx(-100.0, abs=1e-12)   # 0 − gain_min
    c = gmin.corner
    assert c is not None
    _, vce = closed_form(c["vcc"]["value"], c["R1"]["value"], c["R2"]["value"],
                          c["RC"]["value"], c["RE"]["value"], c["hfe"]["value"],
                          c["vbe"]["value"])
    assert vce < VCE_SAT                               # the named corner saturates
    # gain_max is judged on the active corners: a saturated corner does not exceed it
    assert gmax.ok
    assert gmax.worst == pytest.approx(wc.bounds["gain_abs"].max, rel=1e-12)
    assert gmax.margin == pytest.approx(2000 - wc.bounds["gain_abs"].max, rel=1e-12)


def test_gain_limits_when_every_corner_is_cut_off(shelf: Path) -> None:
    """R2 100 Ω: VBB = 13.2·100/(37.05k+100) < 0.36 V < VBE min at every corner."""
    job = parse_job(DIVIDER_JOB)
    vbb_max = 13.2 * 105 / (37.05e3 + 105)             # hand calculation, largest VBB
    assert vbb_max < VBE[0]
    res = analyze(job, parts("39k", "100", "3.3k", "1k"), "TQ-N1", read_inventory(shelf),
                  samples=0)
    by = {c.name: c for c in res.constraints}
    assert res.worst.non_active_corners == res.worst.n_vertices
    assert not by["gain_min"].ok and by["gain_min"].worst == 0.0
    assert by["gain_min"].corner is not None
    assert by["gain_max"].ok and by["gain_max"].worst == 0.0


# --- 3. active-region figures at a non-active nominal point --------------------------------

@pytest.mark.parametrize(
    ("values", "region", "reason"),
    [
        (("39k", "8.2k", "12k", "1k"), "saturated",
         "saturated at the nominal point: active-region figures do not apply"),
        (("39k", "100", "3.3k", "1k"), "cutoff",
         "cut off at the nominal point: active-region figures do not apply"),
    ],
)
def test_not_active_nominal_point_in_text_json_and_html(tmp_path: Path, shelf: Path,
                                                        values: tuple[str, ...], region: str,
                                                        reason: str) -> None:
    r1, r2, rc, re_ = (VALUES[v] for v in values)
    # nominal point: β the geometric mean of the hFE range, VBE mid-range (DESIGN §3)
    beta, vbe = math.sqrt(HFE[0] * HFE[1]), sum(VBE) / 2
    if region == "saturated":
        assert closed_form(12.0, r1, r2, rc, re_, beta, vbe)[1] < VCE_SAT
    else:
        assert 12.0 * r2 / (r1 + r2) < vbe
    job = tmp_path / "job.toml"
    job.write_text(DIVIDER_JOB)
    args = ["check", str(job), "-i", str(shelf), "-v",
            ",".join(f"{k}={v}" for k, v in parts(*values).items()), "-t", "TQ-N1",
            "--samples", "200"]

    js = runner.invoke(app, [*args, "--json"])
    assert js.exit_code == 1
    payload = json.loads(js.stdout)
    jsonschema.validate(payload, SCHEMA)
    nom = payload["nominal"]
    assert nom["region"] == region
    assert nom["beta"] is None and nom["gm"] is None and nom["gain"] is None
    assert nom["rin"] is None
    assert nom["not_active_reason"] == reason
    assert payload["stability"] == {"s_icbo": None, "s_vbe": None, "s_beta": None,
                                    "reason": reason}
    assert payload["rss"] == {"ic": None, "vce": None, "reason": reason}

    report = tmp_path / "r.html"
    text = runner.invoke(app, [*args, "--report", str(report)])
    assert text.exit_code == 1, text.output
    flat = " ".join(text.stdout.split())
    assert reason in flat
    assert "β n/a" in flat
    assert f"Stability factors: not applicable ({reason})" in flat
    assert "S_VBE =" not in flat
    html = report.read_text()
    assert reason in html
    assert "Stability factors: not applicable" in html and "S_VBE" not in html


def test_active_nominal_point_keeps_its_figures(shelf: Path) -> None:
    res = analyze(parse_job(DIVIDER_JOB), parts("39k", "8.2k", "3.3k", "1k"), "TQ-N1",
                  read_inventory(shelf), samples=0)
    assert res.nominal["region"] == "active" and res.nominal["not_active_reason"] is None
    # DESIGN §3: β at the nominal point is the geometric mean of the hFE range (25 °C)
    assert res.nominal["beta"] == pytest.approx(math.sqrt(80 * 400), rel=1e-12)
    assert res.stability["reason"] is None and res.rss["reason"] is None
    assert isinstance(res.stability["s_vbe"], float) and res.stability["s_vbe"] < 0


# --- 4. one IC margin ----------------------------------------------------------------------

def test_ic_margin_function_hand_values() -> None:
    # hand calculation: min(1.40 − 1.32, 1.68 − 1.62) mA / 1.5 mA = 0.06/1.5 = 0.04
    assert ic_margin(1.40e-3, 1.62e-3, 1.32e-3, 1.68e-3, 1.5e-3) == pytest.approx(0.04)
    # below the window: (1.30 − 1.32)/1.5 = −0.013333…
    got = ic_margin(np.array([1.30e-3, 1.40e-3]), np.array([1.50e-3, 1.50e-3]), 1.32e-3,
                    1.68e-3, 1.5e-3)
    np.testing.assert_allclose(got, [-0.02 / 1.5, 0.08 / 1.5], rtol=1e-12)


def test_target_is_the_jobs_ic() -> None:
    job = parse_job('[supply]\nvolts = 12\n[target]\nic = "1.5 mA"\nic_window_pct = 20\n')
    assert job.stage.target.ic == pytest.approx(1.5e-3, rel=1e-15)   # not √(1.2·1.8) mA
    job = parse_job('[supply]\nvolts = 12\n[target]\nic_min = "1.2 mA"\nic_max = "1.8 mA"\n')
    # hand calculation: √(1.2·1.8) mA = 1.46969… mA, the window's geometric centre
    assert job.stage.target.ic == pytest.approx(1.469693845669907e-3, rel=1e-12)


@pytest.mark.parametrize(
    ("window", "target"),
    [
        ('ic = "1.4 mA"\nic_window_pct = 35', 1.4e-3),
        ('ic_min = "0.91 mA"\nic_max = "1.89 mA"', math.sqrt(0.91e-3 * 1.89e-3)),
    ],
)
def test_check_ic_margin_in_json_and_text(tmp_path: Path, shelf: Path, window: str,
                                          target: float) -> None:
    job_text = DIVIDER_JOB.replace('ic = "1.4 mA"\nic_window_pct = 35', window)
    job = tmp_path / "job.toml"
    job.write_text(job_text)
    ics = [ic for ic, _ in every_corner(12.0, 0.10, {"R1": 39e3, "R2": 8.2e3, "RC": 3.3e3,
                                                    "RE": 1e3})]
    # hand arithmetic on the exhaustive closed-form IC range, window 0.91–1.89 mA
    expected = min(min(ics) - 0.91e-3, 1.89e-3 - max(ics)) / target
    args = ["check", str(job), "-i", str(shelf), "-v",
            "R1=FX-39K,R2=FX-8K2,RC=FX-3K3,RE=FX-1K0", "-t", "TQ-N1", "--samples", "0"]
    js = runner.invoke(app, [*args, "--json"])
    payload = json.loads(js.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["ic_target"] == pytest.approx(target, rel=1e-12)
    assert payload["ic_margin"] == pytest.approx(expected, rel=1e-9)
    text = runner.invoke(app, args)
    flat = " ".join(text.stdout.split())
    assert f"IC margin {100 * expected:.2f} % of the target" in flat
    assert "min(IC worst-case min − IC min, IC max − IC worst-case max) / IC target" in flat


def test_substitute_shows_the_same_margin_in_percent_of_the_target() -> None:
    data = ROOT / "tests" / "data"
    job, shelf = data / "substitute_job.toml", data / "substitute_shelf.csv"
    values = {"R1": "R-47K", "R2": "R-47K", "RC": "R-2K7", "RE": "R-4K7"}
    res = analyze(parse_job(job.read_text()), values, "Q-A", read_inventory(shelf),
                  samples=0)
    b = res.worst.bounds["ic"]
    # hand arithmetic: window 0.7–1.4 mA given as ic_min/ic_max, target √(0.7·1.4) mA
    expected = min(b.min - 0.7e-3, 1.4e-3 - b.max) / math.sqrt(0.7e-3 * 1.4e-3)
    assert res.ic_margin == pytest.approx(expected, rel=1e-12)
    args = ["substitute", str(job), "-i", str(shelf), "-v",
            ",".join(f"{k}={v}" for k, v in values.items()), "-t", "Q-A", "--samples", "0"]
    js = runner.invoke(app, [*args, "--json"])
    qa = next(c for c in json.loads(js.stdout)["candidates"] if c["part_id"] == "Q-A")
    assert qa["ic_margin"] == pytest.approx(expected, rel=1e-12)
    text = runner.invoke(app, args)
    row = next(line for line in text.stdout.splitlines() if "Q-A (NPN" in line)
    assert f"{100 * expected:.2f} %" in row
    assert "IC margin = min(IC worst-case min − IC min, IC max − IC worst-case max)" in \
        text.stdout


def test_monte_carlo_counts_gain_max_failures_on_boards_with_saturated_corners(
        shelf: Path) -> None:
    """RC 6.8 kΩ saturates some corners; every active corner has a gain above 100 V/V (the
    worst case above), so with gain_max = 50 every board with one active corner fails it.
    Reference: the boards' own VCE at each environment corner: a saturated corner is solved
    with VCE held at VCE(sat), an active one lies above it (the DESIGN §2 region rule)."""
    job = parse_job(DIVIDER_JOB.replace("gain_max = 2000", "gain_max = 50")
                    .replace("gain_min = 100", "gain_min = 10"))
    res = analyze(job, parts("39k", "8.2k", "6.8k", "1k"), "TQ-N1", read_inventory(shelf),
                  samples=4000, seed=3)
    mc = res.monte_carlo
    assert mc is not None
    # the same boards one by one (same seed and stream as check's streamed run)
    inv = read_inventory(shelf)
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    rp = {role: resolve_resistor(role, pid, inv, 5.0, ambient=ambient)
          for role, pid in parts("39k", "8.2k", "6.8k", "1k").items()}
    spec = build_spec(job, job.stage, rp, inv.find_transistor("TQ-N1"))
    q, _ = board_values(spec, [], 4000, 3, tempco_ppm={r: p.tempco_ppm for r, p in rp.items()})
    active = np.asarray(q["vce"]) > VCE_SAT + 1e-9
    some_saturated = (~active).any(axis=1)
    assert some_saturated.sum() > 100            # the case bites: many boards saturate somewhere
    assert res.worst.bounds["gain_abs"].min > 50
    assert mc.failing["gain_max"] == int(active.any(axis=1).sum())


def test_spreads_are_worked_out_when_first_read(shelf: Path) -> None:
    """RSS and stability factors are computed when read (the search's re-verification of a
    design never reads them), and equal what the eager computation gives."""
    from stockbias.analysis.check import _stability
    from stockbias.analysis.worst_case import rss

    job, inv = parse_job(DIVIDER_JOB), read_inventory(shelf)
    res = analyze(job, parts("39k", "8.2k", "3.3k", "1k"), "TQ-N1", inv, samples=0)
    assert res._spread_cache == []          # nothing computed by the analysis itself
    spec = build_spec(job, job.stage, res.parts, res.transistor)
    for q in ("ic", "vce"):                 # expected: the same functions called directly
        nominal, low, high = rss(spec, q)
        assert res.rss[q] == {"nominal": nominal, "min": low, "max": high}
    assert res.stability == _stability(spec, "active")
    assert res.to_dict()["rss"] is res.rss  # worked out once
