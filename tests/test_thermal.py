"""Tests of stockbias.analysis.thermal: junction temperature, self-heating, runaway."""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.analysis.thermal import (
    junction_temperature,
    runaway_margin,
    self_heated_point,
)
from stockbias.errors import InputError


def test_junction_temperature_to92_example() -> None:
    # REFERENCES.md: TO-92 rated 625 mW with θJA 200 °C/W reaches 150 °C at 25 °C ambient
    assert junction_temperature(25.0, 0.625, 200.0) == pytest.approx(150.0, abs=1e-12)
    got = junction_temperature(np.array([25.0, 85.0]), np.array([0.1, 0.05]), 200.0)
    np.testing.assert_allclose(got, [45.0, 95.0], rtol=1e-12)  # hand calculation


@pytest.mark.parametrize(
    ("ta", "theta", "a", "b"),
    [
        (25.0, 200.0, 0.05, 1e-4),
        (85.0, 200.0, 0.20, 2e-3),  # θ·b = 0.4
        (-40.0, 150.0, 0.30, 6e-3),  # θ·b = 0.9: slow for a plain fixed-point iteration
        (25.0, 300.0, -0.07, 3.2e-3),  # θ·b = 0.96
        (0.0, 200.0, 0.30, -5e-4),  # dissipation falling with temperature
        (25.0, 0.0, 0.30, 1e-3),  # no thermal resistance: TJ = TA
        (25.0, 200.0, 0.0, 0.0),  # no dissipation
    ],
)
def test_fixed_point_of_linear_dissipation(ta: float, theta: float, a: float, b: float) -> None:
    # PD(TJ) = a + b·TJ has the fixed point TJ = (TA + θ·a)/(1 − θ·b) (algebra)
    res = self_heated_point(lambda tj: a + b * tj, ta, theta)
    expected = (ta + theta * a) / (1.0 - theta * b)
    assert bool(res.converged) and not bool(res.runaway)
    assert float(res.tj_c) == pytest.approx(expected, abs=1e-6)
    assert float(res.pd_w) == pytest.approx(a + b * expected, abs=1e-8)


def test_fixed_point_vectorised_with_runaway_flags() -> None:
    theta = np.array([100.0, 200.0, 500.0, 600.0, 250.0])
    b = 2e-3  # θ·b = 0.2, 0.4, 1.0, 1.2, 0.5
    a = np.array([0.1, 0.1, 0.1, 0.1, 0.05])
    res = self_heated_point(lambda tj: a + b * tj, 25.0, theta)
    assert res.tj_c.shape == (5,)
    np.testing.assert_array_equal(res.runaway, [False, False, True, True, False])
    np.testing.assert_array_equal(res.converged, [True, True, False, False, True])
    ok = ~res.runaway
    expected = (25.0 + theta[ok] * a[ok]) / (1.0 - theta[ok] * b)  # algebra, as above
    np.testing.assert_allclose(res.tj_c[ok], expected, atol=1e-6)
    np.testing.assert_array_equal(res.tj_c[res.runaway], 400.0)  # capped at the search ceiling


def test_runaway_when_fixed_point_lies_beyond_cap() -> None:
    # θ·b = 0.95 and a large offset: the fixed point (25 + 60)/0.05 = 1700 °C is above the cap
    res = self_heated_point(lambda tj: 0.3 + 4.75e-3 * tj, 25.0, 200.0, tj_cap_c=400.0)
    assert bool(res.runaway) and not bool(res.converged)


def test_exponential_dissipation_finds_lowest_fixed_point() -> None:
    # PD = p0·exp((TJ − 25)/τ) crosses TJ = TA + θ·PD twice when θ·p0 is small: the lower,
    # stable root is the physical one.  Check it by the residual and the slope criterion.
    p0, tau, theta, ta = 0.03, 25.0, 200.0, 25.0

    def pd(tj: np.ndarray) -> np.ndarray:
        return p0 * np.exp((tj - 25.0) / tau)

    res = self_heated_point(pd, ta, theta)
    tj = float(res.tj_c)
    assert bool(res.converged)
    assert tj - ta - theta * pd(np.array(tj)) == pytest.approx(0.0, abs=1e-5)
    # stable root: θ·∂PD/∂TJ = θ·PD/τ < 1 (derivative of the exponential)
    margin = float(runaway_margin(pd, tj, theta))
    assert margin == pytest.approx(theta * pd(np.array(tj)) / tau, rel=1e-6)
    assert margin < 1.0
    # a hotter part (θ·p0·e/τ above 1 at every T) runs away
    hot = self_heated_point(pd, ta, 600.0)
    assert bool(hot.runaway)


def test_nan_dissipation_is_flagged_not_looped() -> None:
    res = self_heated_point(lambda tj: np.where(tj > 30.0, np.nan, 0.1), np.array([25.0]),
                            200.0)
    assert not res.converged[0] and not res.runaway[0]
    assert np.isnan(res.tj_c[0])


def test_iteration_budget_is_respected() -> None:
    calls = []

    def pd(tj: np.ndarray) -> np.ndarray:
        calls.append(1)
        return 0.03 * np.exp((tj - 25.0) / 25.0)

    res = self_heated_point(pd, 25.0, 200.0, tol=1e-12, max_iter=3)
    assert len(calls) <= 3 + 2  # initial and final evaluations plus the budget
    assert not bool(res.converged)


def test_runaway_margin_of_linear_dissipation() -> None:
    # θ·b for PD = a + b·TJ, exactly (calculus)
    got = runaway_margin(lambda tj: 0.1 + 2e-3 * tj, np.array([25.0, 100.0]), 200.0)
    np.testing.assert_allclose(got, [0.4, 0.4], rtol=1e-9)


def test_bad_arguments() -> None:
    with pytest.raises(InputError):
        self_heated_point(lambda tj: tj, 25.0, -1.0)
    with pytest.raises(InputError):
        self_heated_point(lambda tj: tj, 500.0, 100.0)
    with pytest.raises(InputError):
        runaway_margin(lambda tj: tj, 25.0, 100.0, step=0.0)


def test_fixed_point_random_linear_cases() -> None:
    # generated cases: ambient, θJA and a linear PD(TJ) with θ·b in [0, 0.98); the analytic
    # fixed point (TA + θ·a)/(1 − θ·b) is the reference (algebra); beyond the cap: runaway
    rng = np.random.default_rng(314)
    n = 2000
    ta = rng.uniform(-40.0, 85.0, n)
    theta = rng.uniform(50.0, 400.0, n)
    b = rng.uniform(0.0, 0.98, n) / theta
    a = rng.uniform(0.0, 0.5, n) - b * ta  # PD(TA) ≥ 0
    res = self_heated_point(lambda tj: a + b * tj, ta, theta)
    expected = (ta + theta * a) / (1.0 - theta * b)
    inside = expected < 400.0
    np.testing.assert_array_equal(res.runaway, ~inside)
    assert res.converged[inside].all()
    np.testing.assert_allclose(res.tj_c[inside], expected[inside], atol=2e-6)


def test_shape_set_by_dissipation_callable() -> None:
    # scalar ambient and θJA, dissipation over three candidates: the result takes their shape
    a = np.array([0.05, 0.10, 0.20])
    res = self_heated_point(lambda tj: a + 1e-3 * tj, 40.0, 200.0)
    assert res.tj_c.shape == (3,)
    np.testing.assert_allclose(res.tj_c, (40.0 + 200.0 * a) / 0.8, atol=1e-6)  # algebra


def _lowest_root(g, lo: float, hi: float) -> float:
    """The first sign change of ``g`` above ``lo`` on a 0.01 K grid, refined by scipy's
    brentq to 1e-12 K (an independent reference for the fixed point)."""
    from scipy.optimize import brentq

    t = np.arange(lo, hi, 0.01)
    v = g(t)
    i = int(np.flatnonzero(v > 0.0)[0])
    return float(brentq(g, t[i - 1], t[i], xtol=1e-12))


def test_fixed_point_random_curved_cases_against_brentq() -> None:
    # generated cases: PD(TJ) = a + c·exp((TJ − TA)/τ), loop gains θ·∂PD/∂TJ at the
    # ambient from −0.6 to 0.25 (rising and falling dissipation), self-heating up to about
    # 45 K; the reference is the lowest root of TJ − TA − θ·PD(TJ) found by a grid scan
    # and scipy.optimize.brentq
    rng = np.random.default_rng(2718)
    n = 300
    ta = rng.uniform(-40.0, 85.0, n)
    theta = rng.uniform(50.0, 250.0, n)
    tau = rng.uniform(40.0, 80.0, n)
    gain = rng.uniform(-0.6, 0.25, n)      # θ·c/τ: the loop gain of the curved term
    c = gain * tau / theta
    a = rng.uniform(0.0, 0.1, n) + np.maximum(-c, 0.0)   # PD ≥ 0 near the ambient
    res = self_heated_point(lambda tj: a + c * np.exp((tj - ta) / tau), ta, theta)
    for i in range(n):
        def g(t: np.ndarray, i: int = i) -> np.ndarray:
            return t - ta[i] - theta[i] * (a[i] + c[i] * np.exp((t - ta[i]) / tau[i]))
        try:
            ref = _lowest_root(g, ta[i], 400.0)
        except IndexError:          # no sign change below the cap: runaway
            assert res.runaway[i]
            continue
        assert res.converged[i] and not res.runaway[i]
        assert res.tj_c[i] == pytest.approx(ref, abs=1e-6)
    ok = res.converged
    np.testing.assert_allclose(res.pd_w[ok], (a + c * np.exp((res.tj_c - ta) / tau))[ok],
                               rtol=1e-12)


def test_dissipation_at_root_only_on_read_and_few_evaluations() -> None:
    # a weakly coupled stage (θ·b = 0.02) settles within five evaluations of PD: the
    # ambient, the first fixed-point iterate, the trial past the secant's root and at most
    # two closing steps; PD at the root is evaluated once, when first read
    calls = []

    def pd(tj: np.ndarray) -> np.ndarray:
        calls.append(np.array(tj, dtype=float))
        return 0.2 + 1e-4 * np.asarray(tj)

    res = self_heated_point(pd, 25.0, 200.0)
    assert len(calls) <= 5
    assert float(res.tj_c) == pytest.approx((25.0 + 200.0 * 0.2) / (1.0 - 0.02), abs=1e-6)
    n = len(calls)
    assert float(res.pd_w) == pytest.approx(0.2 + 1e-4 * float(res.tj_c), abs=1e-12)
    assert float(res.pd_w) == pytest.approx(0.2 + 1e-4 * float(res.tj_c), abs=1e-12)
    assert len(calls) == n + 1
