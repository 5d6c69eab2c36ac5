"""Datasheet points: reading the curve file and fitting Gummel–Poon DC parameters.

Points are generated from invented cards with :mod:`stockbias.analysis.gp_dc` (whose
equations are checked against ngspice-39 in ``tests/test_gp_dc.py``), so the true
parameters are known; the last test runs the fitted card in ngspice itself.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np
import pytest

from stockbias.analysis.gp_dc import CARD_DEFAULTS, bias_at_current, device_at
from stockbias.analysis.spice import run_ngspice
from stockbias.device_curves import CurvePoints, fit_curves, read_curve_points
from stockbias.errors import InputError

CARD = {"is": 8e-15, "bf": 300.0, "vaf": 70.0, "ikf": 0.08, "ise": 6e-14, "ne": 1.6,
        "xtb": 1.5, "xti": 3.0}


def _points(card, temps=(-40.0, 25.0, 125.0), n=6, *, noise=0.0, seed=1,
            with_vbe=True) -> CurvePoints:
    t = np.repeat(np.asarray(temps, dtype=float), n)
    ic = np.tile(np.geomspace(10e-6, 100e-3, n), len(temps))
    vce = np.full(t.shape, 5.0)
    vbe, ib = bias_at_current(ic, vce, device_at(card, t))
    hfe = ic / ib
    rng = np.random.default_rng(seed)
    hfe = hfe * (1 + noise * rng.uniform(-1, 1, hfe.shape))
    vbe = vbe + 0.1 * noise * rng.uniform(-1, 1, vbe.shape)
    if not with_vbe:
        vbe = np.full(t.shape, np.nan)
    return CurvePoints(t, ic, hfe, vbe, vce, tuple(range(2, 2 + t.size)), "pts.csv")


def test_exact_points_give_back_the_card() -> None:
    fit = fit_curves(_points(CARD), held={"vaf": 70.0})
    assert set(fit.fitted) == {"is", "bf", "ise", "ne", "ikf", "xtb", "xti"}
    for name, value in CARD.items():
        assert fit.params[name] == pytest.approx(value, rel=1e-5), name
    assert fit.worst_hfe_error < 1e-6
    assert fit.worst_vbe_error_v < 1e-6


def test_noisy_points_fit_within_tolerance_and_follow_the_true_curve() -> None:
    fit = fit_curves(_points(CARD, noise=0.03, seed=4), held={"vaf": 70.0})
    assert fit.worst_hfe_error <= 0.04
    assert fit.worst_vbe_error_v <= 0.004
    ic = np.geomspace(10e-6, 100e-3, 30)
    for temp in (-40.0, 25.0, 125.0):
        _, ib_true = bias_at_current(ic, 5.0, device_at(CARD, temp))
        _, ib_fit = bias_at_current(ic, 5.0, device_at(fit.params, temp))
        np.testing.assert_allclose(ic / ib_fit, ic / ib_true, rtol=0.05)


def test_one_temperature_holds_the_temperature_exponents() -> None:
    fit = fit_curves(_points(CARD, temps=(25.0,)), held={"vaf": 70.0})
    assert "xtb" not in fit.fitted and "xti" not in fit.fitted
    assert fit.params["xtb"] == 1.5 and "1.5 assumed" in fit.held["xtb"]
    assert fit.worst_hfe_error < 1e-4


def test_without_vbe_is_must_be_given() -> None:
    points = _points(CARD, with_vbe=False)
    with pytest.raises(InputError, match="IS cannot be fitted"):
        fit_curves(points, held={"vaf": 70.0})
    fit = fit_curves(points, held={"vaf": 70.0, "is": 8e-15})
    assert "is" not in fit.fitted and fit.held["is"] == "no point gives VBE"
    assert fit.worst_hfe_error < 1e-4


def test_a_point_that_does_not_fit_is_refused_by_line() -> None:
    points = _points(CARD)
    hfe = points.hfe.copy()
    hfe[7] *= 2.0
    bad = CurvePoints(points.temp_c, points.ic, hfe, points.vbe, points.vce, points.lines,
                      points.file)
    with pytest.raises(InputError) as info:
        fit_curves(bad, held={"vaf": 70.0})
    message = info.value.one_line()
    assert message.startswith("pts.csv:")
    assert "column 'hfe'" in message and "misses this point" in message


GOOD_FILE = """\
# invented datasheet points for a general-purpose NPN
temp_c,ic,hfe,vbe,vce
25,10u,160,0.52,5
25,100uA,230,0.58,5
25,1 mA,270,0.64,
25,10m,250,0.70,5
25,100m,130,,5
"""


def test_read_curve_file(tmp_path: Path) -> None:
    path = tmp_path / "q.csv"
    path.write_text(GOOD_FILE)
    points = read_curve_points(path)
    np.testing.assert_allclose(points.ic, [10e-6, 100e-6, 1e-3, 10e-3, 100e-3])
    assert points.vce[2] == 5.0  # absent: the default test condition
    assert np.isnan(points.vbe[4])
    assert points.lines == (3, 4, 5, 6, 7)


@pytest.mark.parametrize(("text", "words"), [
    ("temp_c,ic\n25,1m\n", r"q\.csv:1: the curve file needs a column 'hfe'"),
    ("temp_c,ic,hfe\n25,1m,200\n25,2m,abc\n25,3m,200\n", r"q\.csv:3: column 'hfe'.*text 'abc'"),
    ("temp_c,ic,hfe\n25,1m,200\n25,2 kV,200\n25,3m,200\n", r"q\.csv:3: column 'ic'"),
    ("temp_c,ic,hfe\n25,1m,200\n", "at least 3 points"),
    ("temp_c,ic,hfe\n25,1m,200\n900,2m,200\n25,3m,200\n", r"q\.csv:3: column 'temp_c'"),
    ("temp_c,ic,hfe\n25,1m\n", r"q\.csv:2: 2 fields where the header has 3"),
])
def test_curve_file_errors(tmp_path: Path, text: str, words: str) -> None:
    path = tmp_path / "q.csv"
    path.write_text(text)
    with pytest.raises(InputError) as info:
        read_curve_points(path)
    message = info.value.one_line()
    assert "\n" not in message
    assert re.search(words, message.replace(str(tmp_path) + "/", "")), message


@pytest.mark.spice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed")
def test_fitted_card_in_ngspice_meets_the_points() -> None:
    """The fitted card, written out and run in ngspice-39, reproduces each point's hFE
    within the fit tolerance."""
    points = _points(CARD, noise=0.03, seed=9)
    fit = fit_curves(points, held={"vaf": 70.0})
    full = {**CARD_DEFAULTS, **fit.params}
    card = " ".join(f"{k}={v:.15g}" for k, v in full.items())
    for temp in np.unique(points.temp_c):
        rows = np.flatnonzero(points.temp_c == temp)
        _, ib = bias_at_current(points.ic[rows], 5.0, device_at(fit.params, temp))
        lines = ["* fitted card", f".model qf npn ({card})", f".temp {temp:g}",
                 ".options reltol=1e-9 abstol=1e-18 gmin=1e-20"]
        for k, i in enumerate(ib):
            lines += [f"IB{k} 0 b{k} {i:.15g}", f"VC{k} c{k} 0 5", f"Q{k} c{k} b{k} 0 qf"]
        result = run_ngspice("\n".join([*lines, ".op", ".end"]) + "\n")
        ic = np.array([-result[f"i(vc{k})"] for k in range(len(rows))])
        hfe_spice = ic / ib
        np.testing.assert_allclose(hfe_spice, points.hfe[rows], rtol=0.10)
