"""Resistor tempco sign: ``-350``/``+100`` are signed coefficients, ``350``/``±350`` either sign.

Expected values: hand calculation with R(T) = R·(1 + δ)·(1 + tc·(T − 25 °C)), |δ| ≤ tol,
and dense evaluations of the DESIGN §2 divider closed form written here (no engine code).
The shelf rows are invented for these tests.
"""

from __future__ import annotations

import itertools
import json
from dataclasses import replace
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import build_spec
from stockbias.analysis.montecarlo import board_values
from stockbias.analysis.worst_case import worst_case
from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
STOCK_SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "stock_check.schema.json")
                          .read_text())
runner = CliRunner()

CSV = """kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty
resistor,CF-NEG,4k7,5,0.25,-350,10
resistor,MF-POS,4k7,1,0.25,+100,10
resistor,CF-EITHER,4k7,5,0.25,±350,10
resistor,CF-BARE,4k7,5,0.25,350,10
resistor,MF-PM,4k7,1,0.25,+/-50,10
resistor,MF-NONE,4k7,1,0.25,,10
"""

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1 mA"
ic_window_pct = 20
vce_min = "2 V"
[environment]
ambient_min_c = 0
ambient_max_c = 70
[search]
topology = "divider"
"""

# (id, tempco as written) → (coefficient taken, signed), hand reading of the rule
READ = {"CF-NEG": (-350.0, True), "MF-POS": (100.0, True), "CF-EITHER": (350.0, False),
        "CF-BARE": (350.0, False), "MF-PM": (50.0, False), "MF-NONE": (None, False)}


@pytest.fixture()
def shelf(tmp_path: Path) -> Path:
    path = tmp_path / "tempco_shelf.csv"
    path.write_text(CSV)
    return path


def test_stock_reader_keeps_the_sign_only_where_written(shelf: Path) -> None:
    inv = read_inventory(shelf)
    got = {r.part_id: (r.tempco_ppm, r.tempco_signed) for r in inv.resistors}
    assert got == READ


@pytest.mark.parametrize("text", ["±-350", "+/-+100", "±abc"])
def test_a_plus_minus_tempco_with_a_second_sign_is_an_error(tmp_path: Path, text: str) -> None:
    path = tmp_path / "bad.csv"
    path.write_text(f"kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty\n"
                    f"resistor,X,4k7,5,0.25,{text},10\n")
    result = runner.invoke(app, ["stock", "check", str(path)])
    assert result.exit_code == 2
    assert "tempco_ppm" in result.output and text in result.output


def test_stock_check_shows_what_it_took(shelf: Path) -> None:
    result = runner.invoke(app, ["stock", "check", str(shelf)])
    assert result.exit_code == 0, result.output
    out = result.output
    assert "−350 ppm/°C" in out and "+100 ppm/°C" in out and "±350 ppm/°C" in out
    assert "±50 ppm/°C" in out
    payload = json.loads(runner.invoke(app, ["stock", "check", "--json", str(shelf)]).stdout)
    jsonschema.validate(payload, STOCK_SCHEMA)
    got = {p["part_id"]: (p["tempco_ppm"], p["tempco_signed"]) for p in payload["parts"]}
    assert got == READ


def test_band_over_the_ambient_range_hand_calculation(shelf: Path) -> None:
    inv = read_inventory(shelf)
    amb = (0.0, 70.0)
    r = 4700.0

    def band(pid: str) -> tuple[float, float]:
        return resolve_resistor("RE", pid, inv, 5.0).band(*amb)

    # −350 ppm/°C: +0.875 % at 0 °C, −1.575 % at 70 °C (one direction each end)
    assert band("CF-NEG") == pytest.approx((r * 0.95 * (1 - 350e-6 * 45),
                                            r * 1.05 * (1 + 350e-6 * 25)), rel=1e-14)
    # +100 ppm/°C: −0.25 % at 0 °C, +0.45 % at 70 °C
    assert band("MF-POS") == pytest.approx((r * 0.99 * (1 - 100e-6 * 25),
                                            r * 1.01 * (1 + 100e-6 * 45)), rel=1e-14)
    # ±350 either sign: ±350e-6 × max|T − 25| = ±1.575 % on both sides
    for pid in ("CF-EITHER", "CF-BARE"):
        assert band(pid) == pytest.approx((r * 0.95 * (1 - 350e-6 * 45),
                                           r * 1.05 * (1 + 350e-6 * 45)), rel=1e-14)
    # a range on one side of 25 °C: a signed drift never crosses zero there
    lo, hi = resolve_resistor("RE", "CF-NEG", inv, 5.0).band(40.0, 70.0)
    assert (lo, hi) == pytest.approx((r * 0.95 * (1 - 350e-6 * 45),
                                      r * 1.05 * (1 - 350e-6 * 15)), rel=1e-14)


def _stage_parts(re_tempco: float | None, signed: bool):
    """Divider: R1 47 k, R2 10 k, RC 3.3 k (1 %, tempco stated as 0, so that only RE
    drifts; a row without a tempco would take the assumed ±100 ppm/°C), RE 1 k ±5 % with
    the tempco."""
    rows = (
        Resistor("R1", 47e3, 1.0, 0.25, tempco_ppm=0.0, qty=10, line=2),
        Resistor("R2", 10e3, 1.0, 0.25, tempco_ppm=0.0, qty=10, line=3),
        Resistor("RC", 3.3e3, 1.0, 0.25, tempco_ppm=0.0, qty=10, line=4),
        Resistor("RE", 1e3, 5.0, 0.25, tempco_ppm=re_tempco, tempco_signed=signed, qty=10,
                 line=5),
    )
    q = Transistor("Q", "NPN", 100, 300, 40, 0.2, 0.5, vbe_min=0.6, vbe_max=0.7, qty=10,
                   line=6)
    inv = Inventory("<tempco stage>", rows, (q,))
    job = parse_job(JOB, "<tempco job>")
    amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    parts = {r.part_id: resolve_resistor(r.part_id, r.part_id, inv, 5.0, ambient=amb)
             for r in rows}
    return job, parts, q


def _temperature_free_spec(re_tempco: float | None, signed: bool):
    """The stage with a device that does not move with temperature (XTB 0, VBE tempco 0,
    no leakage), so only RE's tempco couples to the ambient."""
    job, parts, q = _stage_parts(re_tempco, signed)
    spec = build_spec(job, job.stage, parts, q)
    return replace(spec, device=replace(spec.device, xtb=0.0, vbe_tempco=0.0, icbo_a=0.0))


def _dense_ic(re_tempco: float, signed_values: list[float]) -> tuple[float, float]:
    """IC over a dense grid of the physical model (DESIGN §2 divider closed form):
    R1, R2 at ±1 %; RE = 1 k·(1 + δ)·(1 + tc·(T − 25)), δ ∈ ±5 %, T ∈ 0…70 °C, tc each of
    ``signed_values``; VCC 12 V ±5 %, β 100…300, VBE 0.6…0.7 V."""
    grid = np.linspace(-1.0, 1.0, 5)
    temps = np.linspace(0.0, 70.0, 15)
    ics = []
    for d1, d2, de, vcc_f, beta, vbe in itertools.product(
            grid, grid, grid, (-1.0, 0.0, 1.0), (100.0, 173.2, 300.0), (0.6, 0.65, 0.7)):
        r1, r2 = 47e3 * (1 + 0.01 * d1), 10e3 * (1 + 0.01 * d2)
        vcc = 12 * (1 + 0.05 * vcc_f)
        for tc in signed_values:
            re = 1e3 * (1 + 0.05 * de) * (1 + tc * 1e-6 * (temps - 25.0))
            vbb, rbb = vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2)
            ie = (vbb - vbe) / (re + rbb / (beta + 1))
            ics.append(beta / (beta + 1) * ie)
    allv = np.concatenate(ics)
    return float(allv.min()), float(allv.max())


@pytest.mark.parametrize(("tc", "signed", "coefficients"), [
    (-350.0, True, [-350.0]),
    (100.0, True, [100.0]),
    (350.0, False, [-350.0, 0.0, 350.0]),   # either sign: the coefficient itself unknown
])
def test_worst_case_bounds_equal_a_dense_evaluation(tc, signed, coefficients) -> None:
    spec = _temperature_free_spec(tc, signed)
    b = worst_case(spec).bounds["ic"]
    lo, hi = _dense_ic(tc, coefficients)
    # source: the dense grid above (it holds every corner, so equality to rounding)
    assert float(b.min) == pytest.approx(lo, rel=1e-12)
    assert float(b.max) == pytest.approx(hi, rel=1e-12)


def test_the_sign_moves_the_bound_the_right_way() -> None:
    # RE(T) = RE·(1 + tc·(T − 25)): a negative tc makes RE smallest when hot (IC largest),
    # largest when cold by only 25 °C worth; a positive tc the other way round.  Either sign
    # takes the worse of both on each side (hand calculation).
    def bounds(tc, signed):
        job, parts, q = _stage_parts(tc, signed)
        b = worst_case(build_spec(job, job.stage, parts, q)).bounds["ic"]
        return float(b.min), float(b.max)

    neg, pos, either = bounds(-350.0, True), bounds(350.0, True), bounds(350.0, False)
    assert neg[1] == pytest.approx(either[1], rel=1e-12)      # same RE minimum: 1 − 1.575 %
    assert pos[0] == pytest.approx(either[0], rel=1e-12)      # same RE maximum: 1 + 1.575 %
    assert neg[0] > either[0] and pos[1] < either[1]           # narrower on the other side
    assert neg[1] > pos[1] and neg[0] > pos[0]                 # −tc moves IC up, +tc down


def _mc_ic_at(tc: float, signed: bool, samples: int = 4000) -> np.ndarray:
    """Monte Carlo IC of boards whose only spread is RE's tempco: tolerances near zero,
    the other tempcos stated as 0, one hFE, one VBE, T-free device; returns IC (boards ×
    environment corners)."""
    rows = (
        Resistor("R1", 47e3, 1e-6, 0.25, tempco_ppm=0.0),
        Resistor("R2", 10e3, 1e-6, 0.25, tempco_ppm=0.0),
        Resistor("RC", 3.3e3, 1e-6, 0.25, tempco_ppm=0.0),
        Resistor("RE", 1e3, 1e-6, 0.25, tempco_ppm=tc, tempco_signed=signed),
    )
    q = Transistor("Q", "NPN", 200, 200, 40, 0.2, 0.5, vbe_min=0.65, vbe_max=0.65)
    inv = Inventory("<mc stage>", rows, (q,))
    job = parse_job(JOB.replace("tolerance_pct = 5", "tolerance_pct = 0"), "<mc job>")
    parts = {r.part_id: resolve_resistor(r.part_id, r.part_id, inv, 5.0, ambient=(0, 70))
             for r in rows}
    spec = build_spec(job, job.stage, parts, q)
    spec = replace(spec, device=replace(spec.device, xtb=0.0, vbe_tempco=0.0, icbo_a=0.0))
    q, _ = board_values(spec, [], samples, 7)
    return q["ic"]


def _ic_closed_form(re: float) -> float:
    vbb, rbb = 12 * 10 / 57, 47e3 * 10e3 / 57e3
    return 200 / 201 * (vbb - 0.65) / (re + rbb / 201)


def test_monte_carlo_takes_a_signed_tempco_exactly() -> None:
    ic = _mc_ic_at(-350.0, True)
    # environment corners: (VCC at 0 %) × (0 °C, 70 °C); RE = 1 k·(1 − 350e-6·(T − 25))
    hot = _ic_closed_form(1e3 * (1 - 350e-6 * 45))
    cold = _ic_closed_form(1e3 * (1 + 350e-6 * 25))
    assert np.allclose(ic[:, 0], cold, rtol=1e-6) and np.allclose(ic[:, 1], hot, rtol=1e-6)


def test_monte_carlo_draws_an_unsigned_tempco_uniform_in_plus_minus() -> None:
    ic = _mc_ic_at(350.0, False)
    hot_lo = _ic_closed_form(1e3 * (1 + 350e-6 * 45))
    hot_hi = _ic_closed_form(1e3 * (1 - 350e-6 * 45))
    hot = ic[:, 1]
    assert hot.min() >= hot_lo * (1 - 1e-6) and hot.max() <= hot_hi * (1 + 1e-6)
    # uniform in ±350 ppm/°C: RE at 70 °C uniform in 1 k·(1 ± 1.575 %); its median is 1 k
    # and half of the boards lie beyond ±0.7875 % (hand calculation; 4000 boards:
    # binomial standard error 0.7 %, tolerance 3 %)
    re_hot = (200 / 201 * (12 * 10 / 57 - 0.65) / hot) - (47e3 * 10e3 / 57e3) / 201
    dev = re_hot / 1e3 - 1
    assert np.median(dev) == pytest.approx(0.0, abs=0.001)
    assert np.mean(np.abs(dev) > 0.007875) == pytest.approx(0.5, abs=0.03)
    # the same boards at 0 °C drift with the same coefficient, −25/45 as far
    re_cold = (200 / 201 * (12 * 10 / 57 - 0.65) / ic[:, 0]) - (47e3 * 10e3 / 57e3) / 201
    assert np.allclose(re_cold / 1e3 - 1, -dev * 25 / 45, atol=1e-6)
