"""Ratings: resistor power derating, transistor dissipation derating, VCEO need.

Temperatures are in °C at this interface; powers in watt, voltages in volt.
All functions are vectorised and broadcast over their arguments.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stockbias.errors import InputError

__all__ = [
    "DEFAULT_DESIGN_FRACTION",
    "DEFAULT_KNEE_C",
    "DEFAULT_TJ_MAX_C",
    "DEFAULT_ZERO_C",
    "RATING_REFERENCE_C",
    "allowed_resistor_power",
    "derating_factor",
    "transistor_pd_allowed",
    "vceo_required",
]

#: Resistor derating curve: full rating up to this ambient, °C (common practice).
DEFAULT_KNEE_C = 70.0
#: Resistor derating curve: zero rating at this ambient, °C (common practice).
DEFAULT_ZERO_C = 155.0
#: Fraction of the derated rating a design may use, a 2× margin (common practice).
DEFAULT_DESIGN_FRACTION = 0.5
#: Junction limit of small-signal silicon, °C (common practice).
DEFAULT_TJ_MAX_C = 150.0
#: Case/ambient temperature at which a transistor's PD rating is stated, °C.
RATING_REFERENCE_C = 25.0


def derating_factor(
    ambient_c: ArrayLike,
    knee_c: float = DEFAULT_KNEE_C,
    zero_c: float = DEFAULT_ZERO_C,
) -> NDArray[np.float64]:
    """Fraction of a resistor's power rating usable at an ambient temperature.

    1 up to the knee, falling linearly to 0 at ``zero_c``, 0 beyond.

    Parameters
    ----------
    ambient_c : float or ndarray
        Ambient temperature, °C.
    knee_c : float, optional
        End of the flat part of the curve, °C (default 70).
    zero_c : float, optional
        Temperature at which the rating reaches zero, °C (default 155);
        must exceed ``knee_c``.

    Returns
    -------
    ndarray of float
        Derating factor in [0, 1], dimensionless.
    """
    if not zero_c > knee_c:
        raise InputError("the zero-rating temperature must lie above the knee",
                         text=f"knee {knee_c} °C, zero {zero_c} °C")
    ta = np.asarray(ambient_c, dtype=float)
    return np.clip((zero_c - ta) / (zero_c - knee_c), 0.0, 1.0)


def allowed_resistor_power(
    rating_w: ArrayLike,
    ambient_max_c: ArrayLike,
    design_fraction: float = DEFAULT_DESIGN_FRACTION,
    knee_c: float = DEFAULT_KNEE_C,
    zero_c: float = DEFAULT_ZERO_C,
) -> NDArray[np.float64]:
    """Largest dissipation a design may put in a resistor.

    ``rating × derating_factor(hottest ambient) × design_fraction``.

    Parameters
    ----------
    rating_w : float or ndarray
        Power rating at or below the knee, watt.
    ambient_max_c : float or ndarray
        Hottest ambient the product must survive, °C.
    design_fraction : float, optional
        Fraction of the derated rating allowed, 0 < f ≤ 1 (default 0.5).
    knee_c, zero_c : float, optional
        The derating curve, °C (see :func:`derating_factor`).

    Returns
    -------
    ndarray of float
        Allowed dissipation, watt.
    """
    if not 0.0 < design_fraction <= 1.0:
        raise InputError("the design derating fraction must lie in (0, 1]",
                         text=str(design_fraction))
    rating = np.asarray(rating_w, dtype=float)
    return rating * derating_factor(ambient_max_c, knee_c, zero_c) * design_fraction


def transistor_pd_allowed(
    pd_max_w_25c: ArrayLike,
    theta_ja: ArrayLike,
    ambient_c: ArrayLike,
    tj_max: ArrayLike = DEFAULT_TJ_MAX_C,
) -> NDArray[np.float64]:
    """Allowed transistor dissipation at an ambient temperature.

    ``min(PD_max, (TJ_max − TA)/θJA)``, and 0 once TA reaches TJ_max.

    Where θJA is unknown (NaN) it is derived as ``θJA = (TJ_max − 25 °C)/PD_max``.
    This assumes the usual linear derating from the 25 °C rating to zero at
    TJ_max; it is an assumption, not data, and callers should say so when it
    is used.

    Parameters
    ----------
    pd_max_w_25c : float or ndarray
        Rated dissipation at 25 °C, watt (> 0).
    theta_ja : float or ndarray
        Junction-to-ambient thermal resistance, K/W; NaN where unknown.
    ambient_c : float or ndarray
        Ambient temperature, °C.
    tj_max : float or ndarray, optional
        Maximum junction temperature, °C (default 150).

    Returns
    -------
    ndarray of float
        Allowed dissipation, watt.
    """
    pd_max = np.asarray(pd_max_w_25c, dtype=float)
    theta = np.asarray(theta_ja, dtype=float)
    tj = np.asarray(tj_max, dtype=float)
    if np.any(~(pd_max > 0.0)):
        raise InputError("the transistor's rated dissipation must be positive",
                         text=str(pd_max_w_25c))
    if np.any(theta <= 0.0) or np.any(np.isinf(theta)):
        raise InputError("θJA must be positive and finite (NaN where unknown)",
                         text=str(theta_ja))
    if np.any(~(tj > RATING_REFERENCE_C)):
        raise InputError("TJ max must lie above 25 °C", text=str(tj_max))
    theta = np.where(np.isnan(theta), (tj - RATING_REFERENCE_C) / pd_max, theta)
    headroom = np.maximum(tj - np.asarray(ambient_c, dtype=float), 0.0)
    return np.minimum(pd_max, headroom / theta)


def vceo_required(
    vcc: ArrayLike,
    vcc_tol_pct: ArrayLike,
    vee: ArrayLike = 0.0,
    vee_tol_pct: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Largest collector–emitter voltage the supplies can impose.

    ``|VCC|·(1 + tol/100) + |VEE|·(1 + tol_ee/100)``: with the transistor cut
    off, the whole supply span appears across it.  A part's VCEO must exceed
    this.

    Parameters
    ----------
    vcc : float or ndarray
        Collector-side supply, volt (sign ignored: PNP mirrors NPN).
    vcc_tol_pct : float or ndarray
        Its tolerance, percent.
    vee : float or ndarray, optional
        Emitter-side supply of a dual-supply stage, volt, signed or not
        (default 0: single supply).
    vee_tol_pct : float or ndarray, optional
        Its tolerance, percent; default the same as ``vcc_tol_pct``.

    Returns
    -------
    ndarray of float
        Required VCEO, volt.
    """
    tol_cc = np.asarray(vcc_tol_pct, dtype=float)
    tol_ee = tol_cc if vee_tol_pct is None else np.asarray(vee_tol_pct, dtype=float)
    if np.any(tol_cc < 0.0) or np.any(tol_ee < 0.0):
        raise InputError("supply tolerance must not be negative")
    span_cc = np.abs(np.asarray(vcc, dtype=float)) * (1.0 + tol_cc / 100.0)
    span_ee = np.abs(np.asarray(vee, dtype=float)) * (1.0 + tol_ee / 100.0)
    return span_cc + span_ee
