"""Junction temperature, self-heating and the thermal-runaway criterion.

Temperatures are in °C at this interface (differences in kelvin), power in
watt, θJA in K/W.  The dissipation of a stage as a function of its junction
temperature, ``pd_of_tj``, is supplied by the caller as a vectorised callable
(°C in, watt out) so that this module knows nothing of networks or devices.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stockbias.errors import InputError

__all__ = [
    "DEFAULT_TJ_CAP_C",
    "SelfHeatedPoint",
    "junction_temperature",
    "runaway_margin",
    "self_heated_point",
]

#: Search ceiling for the junction temperature, °C.  No silicon part survives
#: it; a stage with no fixed point below it is reported as running away.
DEFAULT_TJ_CAP_C = 400.0

PowerOfTj = Callable[[NDArray[np.float64]], ArrayLike]


def junction_temperature(
    ambient_c: ArrayLike, pd_w: ArrayLike, theta_ja: ArrayLike
) -> NDArray[np.float64]:
    """Junction temperature in still air: TJ = TA + θJA·PD.

    Parameters
    ----------
    ambient_c : float or ndarray
        Ambient temperature, °C.
    pd_w : float or ndarray
        Transistor dissipation, watt.
    theta_ja : float or ndarray
        Junction-to-ambient thermal resistance, K/W.

    Returns
    -------
    ndarray of float
        Junction temperature, °C.
    """
    return np.asarray(ambient_c, dtype=float) + np.asarray(theta_ja, dtype=float) * np.asarray(
        pd_w, dtype=float
    )


@dataclass(frozen=True)
class SelfHeatedPoint:
    """The self-consistent junction temperature of a stage.

    Attributes
    ----------
    tj_c : ndarray of float
        Junction temperature, °C: the lowest fixed point of TJ = TA + θJA·PD(TJ)
        above the ambient; the cap where the stage runs away; NaN where the
        dissipation could not be evaluated (NaN, or negative at the ambient).
    pd_w : ndarray of float
        Dissipation at ``tj_c``, watt, evaluated when first read.
    converged : ndarray of bool
        True where the fixed point was found to within the tolerance.
    runaway : ndarray of bool
        True where no fixed point exists below the cap: heating from the
        ambient never settles (thermal runaway).
    """

    tj_c: NDArray[np.float64]
    converged: NDArray[np.bool_]
    runaway: NDArray[np.bool_]
    dissipation: Callable[[], NDArray[np.float64]] = field(repr=False, compare=False)

    @cached_property
    def pd_w(self) -> NDArray[np.float64]:
        """Dissipation at ``tj_c``, watt (NaN where ``tj_c`` is); one more call of the
        dissipation, made on first use only (most callers want the temperature alone)."""
        return self.dissipation()


def self_heated_point(
    pd_of_tj: PowerOfTj,
    ambient_c: ArrayLike,
    theta_ja: ArrayLike,
    tol: float = 1e-6,
    max_iter: int = 100,
    tj_cap_c: float = DEFAULT_TJ_CAP_C,
) -> SelfHeatedPoint:
    """Solve TJ = TA + θJA·PD(TJ) for the junction temperature, vectorised.

    The residual g(TJ) = TJ − TA − θJA·PD(TJ) is negative at the ambient (PD ≥ 0).
    The search marches upward from TA in doubling steps until g turns positive,
    which brackets the lowest root, the one that heating from the ambient
    reaches; the root is then refined by the Illinois variant of false
    position, which never leaves the bracket.  If g stays ≤ 0 up to the cap
    there is no fixed point: the point is flagged as runaway and TJ is set to
    the cap.  The number of dissipation evaluations is bounded by
    ``max_iter + 1``; the loop never runs forever.

    Parameters
    ----------
    pd_of_tj : callable
        Vectorised dissipation, watt, of the junction temperature, °C.  It is
        called with an array of the broadcast shape of its own output,
        ``ambient_c`` and ``theta_ja``, and must return that shape.
    ambient_c : float or ndarray
        Ambient temperature, °C.
    theta_ja : float or ndarray
        Junction-to-ambient thermal resistance, K/W (≥ 0, finite).
    tol : float, optional
        Width of the final bracket on TJ, kelvin (default 1e-6).
    max_iter : int, optional
        Largest number of march and refinement steps (default 100).
    tj_cap_c : float, optional
        Highest junction temperature searched, °C (default 400).

    Returns
    -------
    SelfHeatedPoint
    """
    if not tol > 0.0 or max_iter < 1:
        raise InputError("the tolerance must be positive and max_iter at least 1",
                         text=f"tol={tol}, max_iter={max_iter}")
    ta0 = np.asarray(ambient_c, dtype=float)
    theta0 = np.asarray(theta_ja, dtype=float)
    if np.any(theta0 < 0.0) or np.any(~np.isfinite(theta0)):
        raise InputError("θJA must be finite and not negative", text=str(theta_ja))
    if np.any(ta0 >= tj_cap_c):
        raise InputError("the ambient must lie below the temperature cap",
                         text=f"{tj_cap_c} °C")

    def power(t: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.asarray(pd_of_tj(t), dtype=float)

    base = np.broadcast_arrays(ta0, theta0)[0]
    p_ambient = power(np.array(base, dtype=float))
    shape = np.broadcast_shapes(ta0.shape, theta0.shape, p_ambient.shape)
    ta = np.broadcast_to(ta0, shape).astype(float)
    theta = np.broadcast_to(theta0, shape).astype(float)
    p_ambient = np.broadcast_to(p_ambient, shape)

    def residual(t: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        p = np.broadcast_to(power(t), shape)
        return t - ta - theta * p, p

    lo = ta.copy()
    g_lo = -theta * p_ambient
    bad = np.isnan(g_lo) | (g_lo > 0.0)
    done = bad | (g_lo == 0.0)  # θ = 0 or PD = 0: TJ = TA exactly
    runaway = np.zeros(shape, dtype=bool)
    hi = np.full(shape, np.nan)
    g_hi = np.full(shape, np.nan)
    bracketed = np.zeros(shape, dtype=bool)
    guessed = np.zeros(shape, dtype=bool)  # the secant trial used once
    on_guess = np.zeros(shape, dtype=bool)  # the next trial is the secant's
    fallback = np.full(shape, np.nan)        # the march's point after it

    # March: first step the size of the first fixed-point increment (at least
    # 0.5 K), doubling while g stays ≤ 0; each such point raises the low end.
    step = np.maximum(np.where(done, 1.0, -g_lo), 0.5)
    trial = np.minimum(lo + step, tj_cap_c)
    iterations = 0
    while iterations < max_iter:
        active = ~(done | bracketed | runaway)
        if not active.any():
            break
        iterations += 1
        g_trial, _ = residual(np.where(active, trial, lo))
        newly_bad = active & np.isnan(g_trial)
        bad |= newly_bad
        done |= newly_bad
        rising = active & (g_trial > 0.0)
        hi = np.where(rising, trial, hi)
        g_hi = np.where(rising, g_trial, g_hi)
        bracketed |= rising
        exact = active & (g_trial == 0.0)
        lo = np.where(exact, trial, lo)
        g_lo = np.where(exact, 0.0, g_lo)
        done |= exact
        still = active & ~newly_bad & (g_trial < 0.0)
        # The secant through the old and new low ends predicts the root; where it
        # lies ahead within the doubled step, try once just past it (a quarter of the
        # tolerance, or a tenth of the distance), so that a stage whose first
        # fixed-point iterate already lands close is bracketed tightly.  If that trial
        # falls short, the march resumes at the point it would have tried: the
        # doubling march's points are all still visited, one trial added before them.
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            guess = trial - g_trial * (trial - lo) / (g_trial - g_lo)
        guess = guess + np.maximum(0.25 * tol, 0.1 * (guess - trial))
        use = still & ~guessed & np.isfinite(guess) & (guess > trial) \
            & (guess < trial + 2.0 * step)
        lo = np.where(still, trial, lo)
        g_lo = np.where(still, g_trial, g_lo)
        runaway |= still & (trial >= tj_cap_c)
        step = np.where(still & ~on_guess, 2.0 * step, step)
        march = np.where(still & on_guess, fallback, np.minimum(lo + step, tj_cap_c))
        fallback = np.where(use, march, fallback)
        trial = np.where(still, np.where(use, np.minimum(guess, tj_cap_c), march), trial)
        on_guess = use
        guessed |= still

    # Refine inside [lo, hi] by Illinois false position.
    side = np.zeros(shape, dtype=np.int8)  # which end moved last: -1 low, +1 high
    refining = bracketed & ~done
    converged = done & ~bad
    converged |= refining & (hi - lo <= tol)
    while iterations < max_iter:
        active = refining & ~converged
        if not active.any():
            break
        iterations += 1
        with np.errstate(invalid="ignore", divide="ignore"):
            x = (lo * g_hi - hi * g_lo) / (g_hi - g_lo)
        x = np.where(np.isfinite(x) & (x > lo) & (x < hi), x, 0.5 * (lo + hi))
        # False position converges from one side; a trial a quarter tolerance past
        # the estimate, toward the farther end, lands on the root's other side once
        # the estimate is that good, and closes the bracket in one step.
        push = np.where(hi - x > x - lo, 0.25 * tol, -0.25 * tol)
        x = np.where((x + push > lo) & (x + push < hi), x + push, x)
        g_x, _ = residual(np.where(active, x, lo))
        newly_bad = active & np.isnan(g_x)
        bad |= newly_bad
        active &= ~newly_bad
        refining &= ~newly_bad
        hit = active & (g_x == 0.0)
        lo = np.where(hit, x, lo)
        hi = np.where(hit, x, hi)
        below = active & (g_x < 0.0)
        above = active & (g_x > 0.0)
        # Illinois: halve the stale end's residual when the same end moves twice.
        g_hi = np.where(below & (side == -1), 0.5 * g_hi, g_hi)
        g_lo = np.where(above & (side == 1), 0.5 * g_lo, g_lo)
        lo = np.where(below, x, lo)
        g_lo = np.where(below, g_x, g_lo)
        hi = np.where(above, x, hi)
        g_hi = np.where(above, g_x, g_hi)
        side = np.where(below, -1, np.where(above, 1, side)).astype(np.int8)
        converged |= active & (hi - lo <= tol)

    tj = np.where(bracketed, 0.5 * (lo + hi), lo)
    tj = np.where(done & ~bad, lo, tj)
    tj = np.where(runaway, tj_cap_c, tj)
    tj = np.where(bad, np.nan, tj)
    converged &= ~runaway & ~bad

    def dissipation() -> NDArray[np.float64]:
        return np.where(bad, np.nan, np.broadcast_to(power(np.where(bad, ta, tj)), shape))

    return SelfHeatedPoint(tj_c=tj, converged=converged, runaway=runaway,
                           dissipation=dissipation)


def runaway_margin(
    pd_of_tj: PowerOfTj,
    tj: ArrayLike,
    theta_ja: ArrayLike,
    step: float = 0.01,
) -> NDArray[np.float64]:
    """The thermal-runaway criterion θJA·∂PD/∂TJ at a junction temperature.

    The point is thermally stable when this is below 1: a small rise of TJ
    raises the dissipation by less than it takes to sustain that rise.

    Parameters
    ----------
    pd_of_tj : callable
        Vectorised dissipation, watt, of the junction temperature, °C.
    tj : float or ndarray
        Junction temperature at which to evaluate, °C.
    theta_ja : float or ndarray
        Junction-to-ambient thermal resistance, K/W.
    step : float, optional
        Half-width of the central difference, kelvin (default 0.01).

    Returns
    -------
    ndarray of float
        θJA·∂PD/∂TJ, dimensionless.
    """
    if not step > 0.0:
        raise InputError("the difference step must be positive", text=str(step))
    t = np.asarray(tj, dtype=float)
    up = np.asarray(pd_of_tj(t + step), dtype=float)
    down = np.asarray(pd_of_tj(t - step), dtype=float)
    return np.asarray(theta_ja, dtype=float) * (up - down) / (2.0 * step)
