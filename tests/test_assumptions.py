"""Everything a check assumes is said, once, and only what the chosen model uses.

Cases: the device model (constant VBE states its VBE tempco and no Gummel–Poon defaults;
the exponential model the reverse), the small-signal conditions taken without
``[small_signal]``, a resistor row without a tempco (the figure taken, named with the
parts, and used by the analysis), and the same list in the terminal, the JSON and the HTML
report.  A PNP stage is designed and checked end to end.

The shelves and jobs are invented here.  Expected values: hand calculation (named beside
each check) and the rule in :data:`stockbias.parts.ASSUMED_TEMPCO_PPM`.
"""

from __future__ import annotations

import html
import json
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.job import parse_job
from stockbias.parts import assumed_tempco_ppm
from stockbias.stock_io import read_inventory

runner = CliRunner()

HEADER = ("kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,polarity,"
          "hfe_min,hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,icbo_a")
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1 mA"
ic_window_pct = 25
vce_min = "3 V"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 5
[search]
topology = "divider"
top = 2
{model}
{small_signal}
"""

VALUES = {"R1": "CF-47K", "R2": "CF-10K", "RC": "MF-3K3", "RE": "MF-1K0"}


def _job(model: str = "", small_signal: str = "") -> str:
    return JOB.format(model=f'model = "{model}"' if model else "", small_signal=small_signal)


@pytest.fixture()
def shelf(tmp_path: Path) -> Path:
    """Two 5 % lines without a tempco, two 1 % lines (one without), an NPN without IS."""
    path = tmp_path / "drawer.csv"
    path.write_text(HEADER + "\n"
                    "resistor,CF-47K,47k,5,0.25,,50,0.01,,,,,,,,,\n"
                    "resistor,CF-10K,10k,5,0.25,,50,0.01,,,,,,,,,\n"
                    "resistor,MF-3K3,3k3,1,0.25,,50,0.02,,,,,,,,,\n"
                    "resistor,MF-1K0,1k,1,0.25,50,50,0.02,,,,,,,,,\n"
                    "transistor,QN-A,,,,,20,0.05,NPN,100,300,40,0.1,0.5,0.6,0.7,10n\n")
    return path


def _check(shelf: Path, **kw: str):
    return analyze(parse_job(_job(**kw)), VALUES, "QN-A", read_inventory(shelf), samples=0)


def test_constant_vbe_states_its_tempco_and_no_gummel_poon_default(shelf: Path) -> None:
    said = _check(shelf).assumptions
    assert "VBE falls 2 mV/°C at constant IC (common practice)" in said
    for card in ("BR 1", "NF 1", "NR 1", "XTI 3", "EG 1.11", "no IS", "no VAF"):
        assert not any(a.startswith(card) for a in said), card
    assert "ICBO doubles every 10 °C (common practice)" in said   # the row gives 10 nA


def test_exponential_model_states_its_card_defaults_and_no_vbe_tempco(shelf: Path) -> None:
    said = _check(shelf, model="exponential").assumptions
    assert not any("2 mV/°C" in a for a in said)
    for card in ("BR 1", "NF 1", "NR 1", "XTI 3", "EG 1.11", "no IS", "no VAF"):
        assert any(a.startswith(card) for a in said), card


@pytest.mark.parametrize(("section", "expected"), [
    ("", "gain and input resistance with RE taken as bypassed, no load (small_signal not "
         "given in the job)"),
    ('[small_signal]\nload = "10k"', "gain and input resistance with RE taken as bypassed "
                                     "(small_signal in the job gives no re_bypassed)"),
    ("[small_signal]\nre_bypassed = false", "gain and input resistance with no load "
                                            "(small_signal in the job gives no load)"),
    ('[small_signal]\nre_bypassed = true\nload = "10k"', None),
])
def test_small_signal_conditions_taken_by_default_are_said(shelf: Path, section: str,
                                                          expected: str | None) -> None:
    said = _check(shelf, small_signal=section).assumptions
    gains = [a for a in said if a.startswith("gain and input resistance with")]
    assert gains == ([] if expected is None else [expected])


def test_a_missing_tempco_is_named_and_taken_by_tolerance_class(shelf: Path) -> None:
    said = _check(shelf).assumptions
    wide = [a for a in said if a.startswith("no tempco given for CF-47K, CF-10K:")]
    fine = [a for a in said if a.startswith("no tempco given for MF-3K3:")]
    assert len(wide) == 1 and "±1000 ppm/°C" in wide[0]
    assert len(fine) == 1 and "±100 ppm/°C" in fine[0]
    assert not any("MF-1K0" in a for a in said)   # its row states 50 ppm/°C
    # the stated tempco's rule is still said
    assert "resistor tempco taken as ± its magnitude over the ambient range" in said


@pytest.mark.parametrize(("tol", "ppm"), [(0.1, 100.0), (1.0, 100.0), (2.0, 1000.0),
                                          (5.0, 1000.0), (20.0, 1000.0)])
def test_assumed_tempco_classes(tol: float, ppm: float) -> None:
    # the rule: 1 % and better ±100 ppm/°C (metal/thin film), wider ±1000 (carbon film)
    assert assumed_tempco_ppm(tol)[0] == ppm


def test_the_analysis_uses_the_tempco_the_text_states(shelf: Path, tmp_path: Path) -> None:
    """A row without tempco analyses exactly as one that states the assumed figure."""
    inv = read_inventory(shelf)
    r = resolve_resistor("R1", "CF-47K", inv, 5.0, ambient=(0.0, 50.0))
    lo, hi = r.band(0.0, 50.0)
    # hand calculation: 47 kΩ, 5 %, ±1000 ppm/°C, largest |T − 25 °C| = 25 °C
    assert lo == pytest.approx(47e3 * 0.95 * (1 - 1000e-6 * 25), rel=1e-12)
    assert hi == pytest.approx(47e3 * 1.05 * (1 + 1000e-6 * 25), rel=1e-12)
    stated = tmp_path / "stated.csv"
    text = shelf.read_text().replace("CF-47K,47k,5,0.25,,", "CF-47K,47k,5,0.25,1000,") \
        .replace("CF-10K,10k,5,0.25,,", "CF-10K,10k,5,0.25,1000,") \
        .replace("MF-3K3,3k3,1,0.25,,", "MF-3K3,3k3,1,0.25,100,")
    stated.write_text(text)
    a = _check(shelf)
    b = analyze(parse_job(_job()), VALUES, "QN-A", read_inventory(stated), samples=0)
    for q in ("ic", "vce", "pd"):
        assert a.worst.bounds[q].min == pytest.approx(b.worst.bounds[q].min, rel=1e-12)
        assert a.worst.bounds[q].max == pytest.approx(b.worst.bounds[q].max, rel=1e-12)


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_terminal_json_and_report_say_the_same_assumptions(shelf: Path, tmp_path: Path
                                                          ) -> None:
    job = tmp_path / "job.toml"
    job.write_text(_job())
    values = ",".join(f"{k}={v}" for k, v in VALUES.items())
    base = ["check", str(job), "-i", str(shelf), "-v", values, "-t", "QN-A", "--samples", "0"]
    js = runner.invoke(app, [*base, "--json"])
    assert js.exit_code in (0, 1), js.output
    said = json.loads(js.stdout)["assumptions"]
    assert len(said) == len(set(said))             # each said once
    assert any("small_signal not given" in a for a in said)
    assert any("no tempco given for CF-47K" in a for a in said)
    report = tmp_path / "r.html"
    text = runner.invoke(app, [*base, "--report", str(report)], env={"COLUMNS": "120"})
    screen = _flat(text.stdout)
    page = report.read_text(encoding="utf-8")
    for a in said:
        assert _flat(a) in screen, a
        assert f"<li>{html.escape(a, quote=True)}</li>" in page, a


def test_design_says_the_small_signal_conditions_once(shelf: Path, tmp_path: Path) -> None:
    job = tmp_path / "job.toml"
    job.write_text(_job().replace('vce_min = "3 V"', 'vce_min = "3 V"\ngain_min = 2'))
    report = tmp_path / "designs.html"
    out = runner.invoke(app, ["design", str(job), "-i", str(shelf), "--json", "--report",
                              str(report)])
    payload = json.loads(out.stdout)
    gains = [a for a in payload["assumptions"]
             if a.startswith("gain and input resistance with")]
    assert gains == ["gain and input resistance with RE taken as bypassed, no load "
                     "(small_signal not given in the job)"]
    page = report.read_text(encoding="utf-8")
    search = page.split("Assumptions of the search", 1)[1]   # the search's own list
    for a in payload["assumptions"]:
        assert f"<li>{html.escape(a, quote=True)}</li>" in search, a


# --- a PNP stage, end to end ------------------------------------------------------------

@pytest.fixture()
def pnp_shelf(tmp_path: Path) -> Path:
    """1 % E12 resistors 1 kΩ…82 kΩ and one PNP transistor (no NPN on this shelf)."""
    rows = [HEADER]
    for decade in (1e3, 1e4):
        for v in E12:
            rows.append(f"resistor,MF-{round(v * decade)},{v * decade:g},1,0.25,50,100,0.01"
                        ",,,,,,,,,")
    rows.append("transistor,QP-A,,,,,50,0.05,PNP,150,300,40,0.1,0.5,0.6,0.7,0")
    path = tmp_path / "pnp_shelf.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def test_a_pnp_stage_is_designed_and_checked(pnp_shelf: Path, tmp_path: Path) -> None:
    job = tmp_path / "pnp_job.toml"
    job.write_text(_job())
    out = runner.invoke(app, ["design", str(job), "-i", str(pnp_shelf), "--json"])
    assert out.exit_code == 0, out.output
    best = json.loads(out.stdout)["designs"][0]
    assert best["transistor"]["part_id"] == "QP-A"
    assert best["transistor"]["polarity"] == "PNP"
    values = {role: p["part_id"] for role, p in best["parts"].items()}
    arg = ",".join(f"{k}={v}" for k, v in values.items())
    chk = runner.invoke(app, ["check", str(job), "-i", str(pnp_shelf), "-v", arg, "-t",
                              "QP-A", "--samples", "500", "--json"])
    assert chk.exit_code == 0, chk.output            # the design passes its own check
    res = json.loads(chk.stdout)
    assert res["transistor"]["polarity"] == "PNP"
    r = {role: p["value_ohm"] for role, p in res["parts"].items()}
    # hand calculation, the mirror of the NPN divider: R2 ties the base to the emitter-side
    # rail (+12 V), R1 to ground; VBB below the rail = 12·R2/(R1+R2), β = √(150·300),
    # VBE = 0.65 V, no leakage; IE = (VBB − VBE)/(RE + R1‖R2/(β+1)), IC = α·IE
    beta = math.sqrt(150 * 300)
    vbb = 12.0 * r["R2"] / (r["R1"] + r["R2"])
    rbb = r["R1"] * r["R2"] / (r["R1"] + r["R2"])
    ie = (vbb - 0.65) / (r["RE"] + rbb / (beta + 1))
    ic = beta / (beta + 1) * ie
    nom = res["nominal"]
    assert nom["ic"] == pytest.approx(ic, rel=1e-9)
    assert nom["ve"] == pytest.approx(12.0 - ie * r["RE"], rel=1e-9)  # emitter near +12 V
    assert nom["vc"] == pytest.approx(ic * r["RC"], rel=1e-9)          # collector above 0 V
    assert nom["vb"] == pytest.approx(nom["ve"] - 0.65, rel=1e-9)
    assert nom["vce"] == pytest.approx(nom["ve"] - nom["vc"], rel=1e-9)  # a magnitude
    assert 0.75e-3 <= res["worst_case"]["ic"]["min"] <= res["worst_case"]["ic"]["max"] <= 1.25e-3
