"""Exact resistance bands of one resistor or a two-part pair, and a pair's worst power split.

One piece of nominal value R, tolerance ±tol and temperature coefficient tc
(ppm/°C) takes, at ambient T, the value R·(1 + δ)·(1 + tc·(T − 25 °C)) with
|δ| ≤ tol.  Over an ambient range [T_min, T_max] its drift factor
1 + tc·(T − 25 °C) spans:

* a *signed* coefficient (the stock file wrote ``-350`` or ``+100``): from
  1 + min(tc·(T_min − 25), tc·(T_max − 25)) to 1 + max(...), one side only when
  the range lies on one side of 25 °C or the sign is known;
* an *unsigned* one (``350`` or ``±350``: either sign): 1 ± |tc|·max|T − 25|.

A series pair (R_a + R_b) and a parallel pair (R_a·R_b/(R_a + R_b)) are
increasing in each part, so the pair's exact band runs from both parts at their
lowest to both at their highest: it is asymmetric about the nominal whenever
the parts differ in tolerance or value ratio (1 % ‖ 10 % with 31.8 % of the
conductance in the 10 % part: −4.05 %/+3.69 %).

Power: each part carries a share of the pair's dissipation, series R_a/(R_a + R_b),
parallel R_b/(R_a + R_b).  The share is largest at the split the pair's own
tolerances (and drifts, both parts at the same ambient) allow: series a high and
b low; parallel a low and b high.  The pair's allowed total is the smallest
rating_i / largest share_i, so every part is within its rating at the worst
split of any total the analysis bounds.

Everything here broadcasts over numpy arrays (the search builds whole candidate
tables at once).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "band_at",
    "drift_factors",
    "pair_band",
    "pair_rating",
    "pair_tempco",
    "pair_value",
    "piece_band",
    "worst_shares",
]

Array = NDArray[np.float64]

#: Reference temperature of a resistor's marked value and tempco, °C.
REFERENCE_C = 25.0


def drift_factors(tempco_ppm: ArrayLike, signed: ArrayLike, ambient_min_c: float,
                  ambient_max_c: float) -> tuple[Array, Array]:
    """Lowest and highest drift factor 1 + tc·(T − 25 °C) over the ambient range.

    Parameters
    ----------
    tempco_ppm : float or ndarray
        Temperature coefficient, ppm/°C (signed where ``signed``; its magnitude otherwise).
    signed : bool or ndarray of bool
        True: the coefficient has that sign; False: either sign.
    ambient_min_c, ambient_max_c : float
        Ambient range, °C.

    Returns
    -------
    (ndarray, ndarray)
        Multiplicative factors (dimensionless), low ≤ high.
    """
    tc = np.asarray(tempco_ppm, dtype=float) * 1e-6
    sgn = np.asarray(signed, dtype=bool)
    d_lo = tc * (ambient_min_c - REFERENCE_C)
    d_hi = tc * (ambient_max_c - REFERENCE_C)
    span = max(abs(ambient_min_c - REFERENCE_C), abs(ambient_max_c - REFERENCE_C))
    mag = np.abs(tc) * span
    low = np.where(sgn, np.minimum(d_lo, d_hi), -mag)
    high = np.where(sgn, np.maximum(d_lo, d_hi), mag)
    return 1.0 + low, 1.0 + high


def piece_band(value: ArrayLike, tol: ArrayLike, tempco_ppm: ArrayLike, signed: ArrayLike,
               ambient_min_c: float, ambient_max_c: float) -> tuple[Array, Array]:
    """(low, high) of one piece over its tolerance and drift, ohm.

    value : ohm; tol : fraction (0.05 = ±5 %); tempco_ppm, signed : see :func:`drift_factors`.
    """
    v = np.asarray(value, dtype=float)
    t = np.asarray(tol, dtype=float)
    f_lo, f_hi = drift_factors(tempco_ppm, signed, ambient_min_c, ambient_max_c)
    return v * (1 - t) * f_lo, v * (1 + t) * f_hi


def pair_value(ra: ArrayLike, rb: ArrayLike, series: bool) -> Array:
    """Resistance of two parts in series (True) or in parallel (False), ohm."""
    a, b = np.asarray(ra, dtype=float), np.asarray(rb, dtype=float)
    return a + b if series else a * b / (a + b)


def pair_band(a_low: ArrayLike, a_high: ArrayLike, b_low: ArrayLike, b_high: ArrayLike,
              series: bool) -> tuple[Array, Array]:
    """Exact (low, high) of a pair from its parts' bands, ohm (monotone in each part)."""
    return pair_value(a_low, b_low, series), pair_value(a_high, b_high, series)


def worst_shares(a_low: ArrayLike, a_high: ArrayLike, b_low: ArrayLike, b_high: ArrayLike,
                 series: bool) -> tuple[Array, Array]:
    """Largest fraction of the pair's dissipation each part can carry (dimensionless).

    Series: part a carries R_a/(R_a + R_b), largest with a high and b low.  Parallel:
    part a carries R_b/(R_a + R_b), largest with a low and b high.  Parts' bands in ohm.
    """
    al, ah = np.asarray(a_low, dtype=float), np.asarray(a_high, dtype=float)
    bl, bh = np.asarray(b_low, dtype=float), np.asarray(b_high, dtype=float)
    if series:
        return ah / (ah + bl), bh / (bh + al)
    return bh / (al + bh), ah / (ah + bl)


def band_at(value: ArrayLike, tol: ArrayLike, tempco_ppm: ArrayLike, signed: ArrayLike,
            temp_c: float) -> tuple[Array, Array]:
    """(low, high) of one piece at one ambient temperature, ohm.

    A signed tempco moves both ends by 1 + tc·(T − 25); an unsigned one widens the band
    to 1 ± |tc|·|T − 25|.
    """
    v = np.asarray(value, dtype=float)
    t = np.asarray(tol, dtype=float)
    tc = np.asarray(tempco_ppm, dtype=float) * 1e-6
    x = temp_c - REFERENCE_C
    sgn = np.asarray(signed, dtype=bool)
    f_lo = np.where(sgn, 1.0 + tc * x, 1.0 - np.abs(tc * x))
    f_hi = np.where(sgn, 1.0 + tc * x, 1.0 + np.abs(tc * x))
    return v * (1 - t) * f_lo, v * (1 + t) * f_hi


Piece = tuple[ArrayLike, ArrayLike, ArrayLike, ArrayLike]


def pair_rating(power_a: ArrayLike, power_b: ArrayLike, a: Piece, b: Piece, series: bool,
                ambient_min_c: float, ambient_max_c: float) -> Array:
    """The pair's allowed total dissipation, W: min over parts of rating_i / worst share_i.

    ``a``, ``b``: each part's (value ohm, tol fraction, tempco ppm/°C, signed).  Both parts
    sit at the same ambient, so the worst split is taken at each end of the ambient range
    (the share is monotone in the temperature between them) with each part's tolerance
    at its worst end and an unsigned tempco drifting the worse way.
    """
    out = None
    for temp in sorted({ambient_min_c, ambient_max_c}):
        sa, sb = worst_shares(*band_at(*a, temp_c=temp), *band_at(*b, temp_c=temp),
                              series=series)
        r = np.minimum(np.asarray(power_a, dtype=float) / sa,
                       np.asarray(power_b, dtype=float) / sb)
        out = r if out is None else np.minimum(out, r)
    assert out is not None
    return out


def pair_tempco(ra: ArrayLike, rb: ArrayLike, tca_ppm: ArrayLike, tcb_ppm: ArrayLike,
                series: bool) -> Array:
    """The pair's temperature coefficient to first order, ppm/°C (for display).

    Series: (R_a·tc_a + R_b·tc_b)/(R_a + R_b); parallel: (R_b·tc_a + R_a·tc_b)/(R_a + R_b)
    (conductance-weighted).  The bands above are exact; this is only the summary figure.
    """
    a, b = np.asarray(ra, dtype=float), np.asarray(rb, dtype=float)
    ta, tb = np.asarray(tca_ppm, dtype=float), np.asarray(tcb_ppm, dtype=float)
    if series:
        return (a * ta + b * tb) / (a + b)
    return (b * ta + a * tb) / (a + b)
