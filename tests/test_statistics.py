"""Tests of stockbias.analysis.statistics: draws, yield intervals, RSS, sensitivities."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from stockbias.analysis.statistics import (
    YieldResult,
    clopper_pearson,
    draw_resistor_factors,
    draw_uniform,
    numeric_sensitivities,
    rss_bounds,
    yield_estimate,
)
from stockbias.errors import InputError

# ---------------------------------------------------------------- Clopper–Pearson


@pytest.mark.parametrize(
    ("k", "n", "conf"),
    [(0, 10, 0.95), (10, 10, 0.95), (1, 10, 0.95), (5, 10, 0.95), (37, 40, 0.95),
     (990, 1000, 0.95), (3, 2000, 0.99), (7, 9, 0.90), (0, 1, 0.95), (1, 1, 0.95)],
)
def test_clopper_pearson_matches_scipy_binomtest(k: int, n: int, conf: float) -> None:
    low, high = clopper_pearson(k, n, conf)
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=conf, method="exact")
    # outside reference: scipy.stats.binomtest(...).proportion_ci(method="exact")
    assert low == pytest.approx(ref.low, rel=1e-9, abs=1e-12)
    assert high == pytest.approx(ref.high, rel=1e-9, abs=1e-12)


def test_clopper_pearson_edges_are_exact() -> None:
    # zero successes: lower bound exactly 0 and upper 1 − (α/2)^(1/n) (closed form of the
    # exact interval at k = 0, derived from the beta quantile)
    low, high = clopper_pearson(0, 50)
    assert low == 0.0
    assert high == pytest.approx(1.0 - 0.025 ** (1.0 / 50.0), rel=1e-12)
    low, high = clopper_pearson(50, 50)
    assert high == 1.0
    assert low == pytest.approx(0.025 ** (1.0 / 50.0), rel=1e-12)


@pytest.mark.parametrize(
    ("k", "n", "conf"), [(-1, 10, 0.95), (11, 10, 0.95), (0, 0, 0.95), (1, 10, 1.0),
                         (1, 10, 0.0), (1.5, 10, 0.95)],
)
def test_clopper_pearson_rejects_bad_input(k: float, n: int, conf: float) -> None:
    with pytest.raises(InputError):
        clopper_pearson(k, n, conf)  # type: ignore[arg-type]


def test_clopper_pearson_covers_at_least_nominal() -> None:
    # Exact coverage of the interval for p = 0.9, n = 60, summed over the binomial pmf:
    # the Clopper–Pearson interval is conservative, coverage ≥ 95 % (its defining property).
    n, p = 60, 0.9
    coverage = 0.0
    for k in range(n + 1):
        low, high = clopper_pearson(k, n)
        if low <= p <= high:
            coverage += stats.binom.pmf(k, n, p)
    assert coverage >= 0.95


# ---------------------------------------------------------------- resistor draws


@pytest.mark.parametrize("tol_pct", [0.1, 1.0, 5.0, 10.0, 20.0])
def test_resistor_factors_stay_within_tolerance(tol_pct: float) -> None:
    rng = np.random.default_rng(20240611)
    f = draw_resistor_factors(rng, tol_pct, 200_000)
    assert f.shape == (200_000,)
    assert f.min() >= 1.0 - tol_pct / 100.0
    assert f.max() <= 1.0 + tol_pct / 100.0


@pytest.mark.parametrize("tol_pct", [1.0, 5.0, 10.0])
def test_resistor_factors_match_truncated_normal(tol_pct: float) -> None:
    rng = np.random.default_rng(7)
    n = 400_000
    f = draw_resistor_factors(rng, tol_pct, n)
    sigma = tol_pct / 100.0 / 3.0
    ref = stats.truncnorm(-3.0, 3.0, loc=1.0, scale=sigma)
    # reference: scipy.stats.truncnorm std and mean; sampling error of the std is
    # about std/sqrt(2n) ≈ 0.1 %, so 1 % relative is a wide but failing-capable band
    assert f.std() == pytest.approx(ref.std(), rel=0.01)
    assert f.mean() == pytest.approx(1.0, abs=5.0 * ref.std() / np.sqrt(n))
    # the truncated σ is below the untruncated one (about 0.9866 σ at ±3σ)
    assert ref.std() < sigma
    # Kolmogorov–Smirnov against the reference distribution
    assert stats.kstest(f[:20_000], ref.cdf).pvalue > 1e-3


def test_resistor_factors_broadcast_per_role_and_reproduce() -> None:
    tol = np.array([1.0, 5.0, 0.0])
    a = draw_resistor_factors(np.random.default_rng(99), tol, (1000, 3))
    b = draw_resistor_factors(np.random.default_rng(99), tol, (1000, 3))
    np.testing.assert_array_equal(a, b)  # seeded reproducibility
    assert a.shape == (1000, 3)
    np.testing.assert_array_equal(a[:, 2], 1.0)  # 0 % tolerance is exact
    assert np.all(np.abs(a[:, 0] - 1.0) <= 0.01)
    assert np.abs(a[:, 1] - 1.0).max() > 0.01  # the 5 % column does spread wider
    c = draw_resistor_factors(np.random.default_rng(100), tol, (1000, 3))
    assert not np.array_equal(a, c)


def test_resistor_factors_default_size_and_errors() -> None:
    rng = np.random.default_rng(1)
    assert draw_resistor_factors(rng, np.full((4, 2), 5.0)).shape == (4, 2)
    with pytest.raises(InputError):
        draw_resistor_factors(rng, np.array([1.0, 5.0]), (10, 3))
    with pytest.raises(InputError):
        draw_resistor_factors(rng, -1.0, 10)
    with pytest.raises(InputError):
        draw_resistor_factors(rng, 100.0, 10)


# ---------------------------------------------------------------- uniform draws


def test_uniform_draws_cover_range_and_reproduce() -> None:
    low = np.array([100.0, 0.60])
    high = np.array([300.0, 0.70])
    a = draw_uniform(np.random.default_rng(5), low, high, (100_000, 2))
    b = draw_uniform(np.random.default_rng(5), low, high, (100_000, 2))
    np.testing.assert_array_equal(a, b)
    assert np.all(a >= low) and np.all(a <= high)
    # uniform mean (lo+hi)/2 and std (hi−lo)/sqrt(12) (property of the uniform law)
    np.testing.assert_allclose(a.mean(axis=0), (low + high) / 2.0, rtol=2e-3)
    np.testing.assert_allclose(a.std(axis=0), (high - low) / np.sqrt(12.0), rtol=1e-2)
    fixed = draw_uniform(np.random.default_rng(5), 0.65, 0.65, 10)
    np.testing.assert_array_equal(fixed, 0.65)
    with pytest.raises(InputError):
        draw_uniform(np.random.default_rng(5), 2.0, 1.0, 3)


# ---------------------------------------------------------------- yield


def test_yield_estimate_counts_and_interval() -> None:
    flags = np.zeros((20, 50), dtype=bool)
    flags.flat[:950] = True
    y = yield_estimate(flags)
    assert isinstance(y, YieldResult)
    assert (y.samples, y.passed) == (1000, 950)
    assert y.yield_ == pytest.approx(0.95, abs=1e-15)
    ref = stats.binomtest(950, 1000).proportion_ci(method="exact")
    # outside reference: scipy.stats.binomtest exact interval
    assert y.low == pytest.approx(ref.low, rel=1e-9)
    assert y.high == pytest.approx(ref.high, rel=1e-9)
    d = y.to_dict()
    assert set(d) == {"samples", "yield", "yield_low", "yield_high"}
    assert d["yield"] == y.yield_ and d["yield_low"] == y.low and d["yield_high"] == y.high


def test_yield_estimate_rejects_non_bool_and_empty() -> None:
    with pytest.raises(InputError):
        yield_estimate(np.array([1, 0, 1]))
    with pytest.raises(InputError):
        yield_estimate(np.array([], dtype=bool))
    with pytest.raises(InputError):
        YieldResult(samples=10, passed=11, yield_=1.1, low=0.0, high=1.0)


def test_yield_all_pass_upper_bound_is_one() -> None:
    y = yield_estimate(np.ones(300, dtype=bool))
    assert y.yield_ == 1.0 and y.high == 1.0
    # the "rule of three": lower bound ≈ 1 − 3.7/n for the two-sided 95 % exact interval
    # (1 − 0.025^(1/n), closed form at k = n)
    assert y.low == pytest.approx(0.025 ** (1.0 / 300.0), rel=1e-12)


# ---------------------------------------------------------------- RSS and sensitivities


def test_rss_bounds_hand_calculation() -> None:
    # hand calculation: f = 10, terms 3·0.1 = 0.3 and −4·0.1 = −0.4 → spread 0.5
    low, high = rss_bounds(10.0, {"a": 3.0, "b": -4.0}, {"a": 0.1, "b": 0.1})
    assert low == pytest.approx(9.5, abs=1e-12)
    assert high == pytest.approx(10.5, abs=1e-12)


def test_rss_bounds_vectorised_and_checked() -> None:
    nominal = np.array([1.0, 2.0, 3.0])
    sens = {"x": np.array([1.0, 0.0, 2.0]), "y": 1.0}
    half = {"x": 0.5, "y": np.array([0.0, 0.2, 0.0])}
    low, high = rss_bounds(nominal, sens, half)
    np.testing.assert_allclose(high - nominal, [0.5, 0.2, 1.0], rtol=1e-12)  # hand calculation
    np.testing.assert_allclose(nominal - low, [0.5, 0.2, 1.0], rtol=1e-12)
    with pytest.raises(InputError):
        rss_bounds(1.0, {"x": 1.0}, {"x": 1.0, "y": 2.0})


def test_numeric_sensitivities_of_known_function() -> None:
    # f = a²·b + exp(c): ∂f/∂a = 2ab, ∂f/∂b = a², ∂f/∂c = exp(c) (calculus)
    a = np.array([1.0, 2.0, -3.0])
    b = np.array([0.5, 4.0, 1e-3])
    c = np.array([0.0, 1.0, -2.0])

    def f(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
        return a * a * b + np.exp(c)

    d = numeric_sensitivities(f, {"a": a, "b": b, "c": c})
    np.testing.assert_allclose(d["a"], 2 * a * b, rtol=1e-7)
    np.testing.assert_allclose(d["b"], a * a, rtol=1e-7)
    np.testing.assert_allclose(d["c"], np.exp(c), rtol=1e-7)  # c = 0 uses the absolute step


def test_numeric_sensitivities_abs_step_for_small_zero_parameter() -> None:
    # At x = 0 a relative step is meaningless; the absolute step decides the accuracy.
    # For f = x³ + 1e-9·x the central difference with step h is 1e-9 + h² (calculus).
    def f(x: np.ndarray) -> np.ndarray:
        return x**3 + 1e-9 * x

    coarse = numeric_sensitivities(f, {"x": 0.0}, rel_step=1e-2)
    fine = numeric_sensitivities(f, {"x": 0.0}, rel_step=1e-2, abs_step={"x": 1e-7})
    assert coarse["x"] == pytest.approx(1e-9 + 1e-4, rel=1e-6)
    assert fine["x"] == pytest.approx(1e-9, rel=1e-4)
