"""Tests of stockbias.analysis.stability: closed-form stability factors vs derivatives."""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.analysis.stability import s_beta, s_icbo, s_vbe
from stockbias.analysis.statistics import numeric_sensitivities


def divider_ic(vbb: np.ndarray, vbe: np.ndarray, beta: np.ndarray, r_th: np.ndarray,
               r_e: np.ndarray, icbo: np.ndarray) -> np.ndarray:
    """IC of a base fed from VBB through RT, emitter resistor RE, leakage ICBO.

    Derived from VBB = IB·RT + VBE + IE·RE, IC = β·IB + (β+1)·ICBO, IE = (β+1)·(IB + ICBO):
    IB = (VBB − VBE − (β+1)·ICBO·RE)/(RT + (β+1)·RE), hence
    IC = [β·(VBB − VBE) + (β+1)·ICBO·(RT + RE)]/(RT + (β+1)·RE).
    """
    d = r_th + (beta + 1.0) * r_e
    return beta * (vbb - vbe) / d + (beta + 1.0) * icbo * (r_th + r_e) / d


def _cases(n: int = 400, seed: int = 1234) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    return {
        "vbb": rng.uniform(1.0, 6.0, n),
        "vbe": rng.uniform(0.55, 0.75, n),
        "beta": rng.uniform(20.0, 800.0, n),
        "r_th": rng.uniform(100.0, 200e3, n),
        "r_e": rng.uniform(10.0, 5e3, n),
        "icbo": rng.uniform(0.0, 1e-6, n),
    }


def test_leakage_term_solves_the_loop_equations() -> None:
    # check the derivation itself: the IC formula satisfies the three loop relations
    p = _cases()
    ic = divider_ic(**p)
    ib = (ic - (p["beta"] + 1.0) * p["icbo"]) / p["beta"]
    ie = (p["beta"] + 1.0) * (ib + p["icbo"])
    np.testing.assert_allclose(ie, ib + ic, rtol=1e-12)
    kvl = ib * p["r_th"] + p["vbe"] + ie * p["r_e"]
    np.testing.assert_allclose(kvl, p["vbb"], rtol=1e-11)


def test_closed_forms_match_numeric_derivatives() -> None:
    # reference: central differences of the divider IC formula written in this test;
    # closed forms recalled from standard texts (REFERENCES.md) and derived for S_β
    p = _cases()
    # IC is linear in ICBO: an absolute step of 1 nA is exact and keeps rounding small
    d = numeric_sensitivities(divider_ic, p, abs_step={"icbo": 1e-9})
    np.testing.assert_allclose(d["icbo"], s_icbo(p["beta"], p["r_th"], p["r_e"]), rtol=1e-6)
    np.testing.assert_allclose(d["vbe"], s_vbe(p["beta"], p["r_th"], p["r_e"]), rtol=1e-6)
    # S_β is the derivative of the leakage-free IC
    q = {**p, "icbo": np.zeros_like(p["icbo"])}
    d0 = numeric_sensitivities(divider_ic, q, abs_step={"icbo": 1e-9})
    ic0 = divider_ic(**q)
    np.testing.assert_allclose(d0["beta"], s_beta(ic0, q["beta"], q["r_th"], q["r_e"]),
                               rtol=1e-6)


def test_s_icbo_is_the_recalled_textbook_form() -> None:
    # REFERENCES.md (recalled): S_ICBO = (1+β)/(1 + β·RE/(RT+RE)); ours is written as
    # (β+1)(RT+RE)/(RT+(β+1)RE): the same by algebra, checked on generated values
    p = _cases(seed=99)
    b, rt, re = p["beta"], p["r_th"], p["r_e"]
    np.testing.assert_allclose(s_icbo(b, rt, re), (1.0 + b) / (1.0 + b * re / (rt + re)),
                               rtol=1e-12)


@pytest.mark.parametrize(
    ("beta", "r_th", "r_e", "expected"),
    [
        (100.0, 0.0, 1e3, 1.0),  # stiff base: S_ICBO → 1
        (100.0, 10e3, 0.0, 101.0),  # no emitter resistor: S_ICBO → β+1
        # hand calculation: 101·(3.55 k + 1.5 k)/(3.55 k + 101·1.5 k) = 510050/155050
        (100.0, 3.55e3, 1.5e3, 3.289584),
    ],
)
def test_s_icbo_limits_and_hand_value(beta: float, r_th: float, r_e: float,
                                      expected: float) -> None:
    assert s_icbo(beta, r_th, r_e) == pytest.approx(expected, rel=1e-6)


def test_s_vbe_and_s_beta_hand_values() -> None:
    # hand calculation: −100/(3.55 k + 101·1.5 k) = −100/155 050 Ω = −0.6449532 mA/V
    assert s_vbe(100.0, 3.55e3, 1.5e3) == pytest.approx(-6.449532e-4, rel=1e-6)
    # hand calculation: 1 mA·(5.05 k)/(100·155.05 k) = 0.325701 µA per unit β
    assert s_beta(1e-3, 100.0, 3.55e3, 1.5e3) == pytest.approx(3.25701e-7, rel=1e-5)


def test_s_vbe_is_the_slope_of_the_solved_operating_point() -> None:
    # The operating-point solver (stockbias.analysis.stage, nodal solution of the divider)
    # differentiated numerically in VBE equals the closed form: R1‖R2 = 3.55 kΩ
    # (R2 = 5 kΩ, R1 = 1/(1/3.55 k − 1/5 k)), RE = 1.5 kΩ, β = 100 at 25 °C, no leakage.
    from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec, evaluate

    r1 = 1.0 / (1.0 / 3.55e3 - 1.0 / 5e3)
    spec = StageSpec("divider", {"R1": ResistorSpec(r1, 0.0), "R2": ResistorSpec(5e3, 0.0),
                                 "RC": ResistorSpec(2e3, 0.0), "RE": ResistorSpec(1.5e3, 0.0)},
                     DeviceSpec("NPN", 100.0, 100.0, 0.65, 0.65), vcc=10.0)
    p0 = spec.nominal_point()
    h = 1e-4

    def ic(vbe: float) -> float:
        return float(evaluate(spec, spec.point_from({"vbe": np.asarray(vbe)}, p0))
                     .quantities["ic"])

    slope = (ic(0.65 + h) - ic(0.65 - h)) / (2 * h)
    assert slope == pytest.approx(-6.449532e-4, rel=1e-6)
