"""Statistical tools for bias analysis: Monte Carlo draws, yield, root-sum-square.

Manufacturing spread is drawn here, in the trade's usual shapes: a resistor
marked ±tol is a normal distribution with σ = tol/3 truncated at ±tol; β and
VBE are uniform between the limits of the stock row.  The yield of a batch is
the fraction of drawn boards that pass, with an exact (Clopper–Pearson)
confidence interval.

Everything is vectorised numpy and takes an ``rng: numpy.random.Generator``
for reproducibility.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stockbias.errors import InputError

__all__ = [
    "TRUNCATION_SIGMAS",
    "YieldResult",
    "clopper_pearson",
    "draw_resistor_factors",
    "draw_uniform",
    "numeric_sensitivities",
    "one_sided_bounds",
    "rss_bounds",
    "yield_estimate",
    "yield_from_counts",
]

#: A resistor's marked tolerance is taken as this many standard deviations,
#: and the distribution is truncated there (common practice).
TRUNCATION_SIGMAS = 3.0


def clopper_pearson(
    successes: int, trials: int, confidence: float = 0.95
) -> tuple[float, float]:
    """Exact (Clopper–Pearson) confidence interval of a binomial proportion.

    Parameters
    ----------
    successes : int
        Number of passing samples, 0 ≤ successes ≤ trials.
    trials : int
        Number of samples, > 0.
    confidence : float, optional
        Two-sided confidence level, 0 < confidence < 1 (default 0.95).

    Returns
    -------
    (low, high) : tuple of float
        Bounds of the proportion, fractions in [0, 1].  ``low`` is exactly 0
        when there are no successes and ``high`` exactly 1 when every trial
        succeeded.
    """
    k = int(successes)
    n = int(trials)
    if k != successes or n != trials:
        raise InputError("successes and trials must be whole numbers",
                         text=f"{successes}/{trials}")
    if n <= 0:
        raise InputError("the number of trials must be positive", text=str(trials))
    if not 0 <= k <= n:
        raise InputError("successes must lie between 0 and the number of trials",
                         text=f"{successes}/{trials}")
    if not 0.0 < confidence < 1.0:
        raise InputError("confidence must lie strictly between 0 and 1", text=str(confidence))
    from scipy import stats  # loaded on first use: the command line starts without scipy

    alpha = 1.0 - confidence
    low = 0.0 if k == 0 else float(stats.beta.ppf(alpha / 2.0, k, n - k + 1))
    high = 1.0 if k == n else float(stats.beta.ppf(1.0 - alpha / 2.0, k + 1, n - k))
    return low, high


def one_sided_bounds(successes: int, trials: int, confidence: float) -> tuple[float, float]:
    """One-sided Clopper–Pearson bounds of a binomial proportion.

    ``low`` is the lower bound and ``high`` the upper bound, each holding alone at
    ``confidence`` (0.5 ≤ confidence < 1): P(p ≥ low) ≥ confidence and P(p ≤ high) ≥
    confidence.  Each is the matching end of the two-sided interval at ``2·confidence − 1``.
    """
    if not 0.5 <= confidence < 1.0:
        raise InputError("a one-sided confidence must lie in [0.5, 1)", text=str(confidence))
    if confidence == 0.5:  # the two-sided interval at 0: both bounds are the median estimate
        from scipy import stats

        k, n = int(successes), int(trials)
        low = 0.0 if k == 0 else float(stats.beta.ppf(0.5, k, n - k + 1))
        high = 1.0 if k == n else float(stats.beta.ppf(0.5, k + 1, n - k))
        return low, high
    return clopper_pearson(successes, trials, 2.0 * confidence - 1.0)


def draw_resistor_factors(
    rng: np.random.Generator,
    tolerance_pct: ArrayLike,
    size: int | tuple[int, ...] | None = None,
) -> NDArray[np.float64]:
    """Draw manufacturing factors of resistors marked ±tol.

    The relative deviation δ is normal with σ = tol/3, truncated at ±tol, drawn
    exactly by inverting the truncated normal CDF.  The resistor's value is
    ``nominal * factor`` with ``factor = 1 + δ``.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of randomness.
    tolerance_pct : float or ndarray
        Marked tolerance of each resistor, percent (0 ≤ tol < 100).  Must
        broadcast to ``size``; typically shape ``(n_roles,)`` with ``size =
        (n_samples, n_roles)``.
    size : int or tuple of int, optional
        Shape of the draw; default the shape of ``tolerance_pct``.

    Returns
    -------
    ndarray of float
        Multiplicative factors, dimensionless, shape ``size``; every factor
        lies in [1 − tol/100, 1 + tol/100].
    """
    tol = np.asarray(tolerance_pct, dtype=float)
    if not np.all(np.isfinite(tol)) or np.any(tol < 0.0) or np.any(tol >= 100.0):
        raise InputError("resistor tolerance must be finite, at least 0 % and below 100 %",
                         text=str(tolerance_pct))
    shape = tol.shape if size is None else tuple(np.atleast_1d(size).astype(int))
    try:
        fits = np.broadcast_shapes(tol.shape, shape) == shape
    except ValueError:
        fits = False
    if not fits:
        raise InputError(f"tolerances of shape {tol.shape} do not broadcast to size {shape}")
    from scipy import special  # loaded on first use: the command line starts without scipy

    edge = special.ndtr(-TRUNCATION_SIGMAS)
    u = rng.random(shape)
    # Inverse CDF of the standard normal truncated at ±TRUNCATION_SIGMAS.
    z = special.ndtri(edge + u * (1.0 - 2.0 * edge))
    z = np.clip(z, -TRUNCATION_SIGMAS, TRUNCATION_SIGMAS)
    return 1.0 + (tol / 100.0) * (z / TRUNCATION_SIGMAS)


def draw_uniform(
    rng: np.random.Generator,
    low: ArrayLike,
    high: ArrayLike,
    size: int | tuple[int, ...] | None = None,
) -> NDArray[np.float64]:
    """Draw values uniformly between limits (β, VBE of a stock row).

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of randomness.
    low, high : float or ndarray
        Limits in the parameter's own unit (dimensionless for β, volt for
        VBE); ``high ≥ low``.  Equal limits give that value exactly.
    size : int or tuple of int, optional
        Shape of the draw; ``low`` and ``high`` must broadcast to it.

    Returns
    -------
    ndarray of float
        Drawn values in [low, high].
    """
    lo = np.asarray(low, dtype=float)
    hi = np.asarray(high, dtype=float)
    if not (np.all(np.isfinite(lo)) and np.all(np.isfinite(hi))) or np.any(hi < lo):
        raise InputError("uniform limits must be finite with high ≥ low",
                         text=f"{low!s}..{high!s}")
    shape = np.broadcast_shapes(lo.shape, hi.shape) if size is None else size
    u = rng.random(shape)
    return np.asarray(lo + u * (hi - lo), dtype=float)


@dataclass(frozen=True)
class YieldResult:
    """Passing fraction of a Monte Carlo batch with its confidence interval.

    Attributes
    ----------
    samples : int
        Number of drawn boards.
    passed : int
        Number that passed everywhere.
    yield_ : float
        ``passed / samples``, a fraction.
    low, high : float
        Clopper–Pearson bounds of the yield, fractions.
    confidence : float
        Confidence level of the interval.
    """

    samples: int
    passed: int
    yield_: float
    low: float
    high: float
    confidence: float = 0.95

    def __post_init__(self) -> None:
        if self.samples <= 0 or not 0 <= self.passed <= self.samples:
            raise InputError("a yield needs samples > 0 and 0 ≤ passed ≤ samples",
                             text=f"{self.passed}/{self.samples}")
        if not self.low <= self.yield_ <= self.high:
            raise InputError("the yield must lie inside its interval",
                             text=f"{self.low} ≤ {self.yield_} ≤ {self.high}")

    def to_dict(self) -> dict[str, float | int]:
        """The result as JSON-ready values (fractions, not percent)."""
        return {"samples": self.samples, "yield": self.yield_,
                "yield_low": self.low, "yield_high": self.high}


def yield_estimate(passed: ArrayLike, confidence: float = 0.95) -> YieldResult:
    """Yield of a batch from each board's pass/fail flag.

    Parameters
    ----------
    passed : ndarray of bool
        One flag per drawn board (any shape; all entries count).
    confidence : float, optional
        Two-sided confidence level of the interval (default 0.95).

    Returns
    -------
    YieldResult
    """
    flags = np.asarray(passed)
    if flags.dtype != np.bool_:
        raise InputError(f"pass flags must be booleans, got dtype {flags.dtype}")
    return yield_from_counts(int(np.count_nonzero(flags)), int(flags.size), confidence)


def yield_from_counts(passed: int, samples: int, confidence: float = 0.95) -> YieldResult:
    """Yield of a batch from its counts (what streamed Monte Carlo chunks add up).

    Parameters
    ----------
    passed : int
        Boards that passed everywhere.
    samples : int
        Boards drawn, > 0.
    confidence : float, optional
        Two-sided confidence level of the interval (default 0.95).
    """
    n, k = int(samples), int(passed)
    if n == 0:
        raise InputError("a yield needs at least one sample")
    low, high = clopper_pearson(k, n, confidence)
    return YieldResult(samples=n, passed=k, yield_=k / n, low=low, high=high,
                       confidence=confidence)


def rss_bounds(
    nominal: ArrayLike,
    sensitivities: Mapping[str, ArrayLike],
    half_ranges: Mapping[str, ArrayLike],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Root-sum-square bounds: nominal ± sqrt(Σ (∂f/∂p · Δp)²).

    Parameters
    ----------
    nominal : float or ndarray
        The quantity at the nominal point, in its own unit.
    sensitivities : mapping of str to float or ndarray
        ∂f/∂p for each parameter p, unit of f per unit of p (for example the
        output of :func:`numeric_sensitivities`).
    half_ranges : mapping of str to float or ndarray
        Δp, the half-width of each parameter's range, unit of p.  Must hold
        every key of ``sensitivities``; extra keys are an error too, so that a
        forgotten sensitivity cannot pass silently.

    Returns
    -------
    (low, high) : tuple of ndarray
        The RSS bounds, unit of f, broadcast over all inputs.
    """
    if set(sensitivities) != set(half_ranges):
        missing = sorted(set(sensitivities) ^ set(half_ranges))
        raise InputError("sensitivities and half ranges must name the same parameters",
                         text=", ".join(missing))
    nom = np.asarray(nominal, dtype=float)
    total = np.zeros_like(nom)
    for name, slope in sensitivities.items():
        term = np.asarray(slope, dtype=float) * np.abs(np.asarray(half_ranges[name], dtype=float))
        total = total + term * term
    spread = np.sqrt(total)
    return nom - spread, nom + spread


def numeric_sensitivities(
    func: Callable[..., ArrayLike],
    params: Mapping[str, ArrayLike],
    rel_step: float = 1e-6,
    abs_step: Mapping[str, float] | None = None,
) -> dict[str, NDArray[np.float64]]:
    """Partial derivatives of a vectorised function by central differences.

    Parameters
    ----------
    func : callable
        Called as ``func(**params)``; returns an array broadcast over the
        parameter arrays.
    params : mapping of str to float or ndarray
        The point at which to differentiate, each in its SI unit.
    rel_step : float, optional
        Step relative to each parameter's magnitude (default 1e-6).
    abs_step : mapping of str to float, optional
        Absolute step, in the parameter's unit, for the parameters it names;
        used instead of the relative step everywhere for that parameter.  Use
        it for parameters whose effect is a small additive term (a leakage
        current: a step of 1e-6 of a nanoampere drowns in rounding) and for
        parameters that may be exactly 0.  Parameters not named take
        ``rel_step·|p|``, or ``rel_step`` in the parameter's unit where p = 0.

    Returns
    -------
    dict of str to ndarray
        ∂func/∂p for every parameter p, unit of func per unit of p.
    """
    if not rel_step > 0.0:
        raise InputError("the relative step must be positive", text=str(rel_step))
    point = {name: np.asarray(value, dtype=float) for name, value in params.items()}
    out: dict[str, NDArray[np.float64]] = {}
    for name, value in point.items():
        if abs_step is not None and name in abs_step:
            h = np.full(value.shape, float(abs_step[name]))
            if not np.all(h > 0.0):
                raise InputError("an absolute step must be positive", column=name,
                                 text=str(abs_step[name]))
        else:
            h = np.where(value == 0.0, rel_step, rel_step * np.abs(value))
        up = value + h
        down = value - h
        f_up = np.asarray(func(**{**point, name: up}), dtype=float)
        f_down = np.asarray(func(**{**point, name: down}), dtype=float)
        # Divide by the step actually represented in floating point.
        out[name] = (f_up - f_down) / (up - down)
    return out
