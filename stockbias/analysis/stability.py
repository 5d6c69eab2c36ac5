"""Bias stability factors in closed form, for a base fed from a Thévenin source.

The model is a base fed from VBB through RT and an emitter resistor RE to the
emitter-side rail, with leakage ICBO:

    IC = [β·(VBB − VBE) + (β+1)·ICBO·(RT + RE)] / (RT + (β+1)·RE)

(from VBB = IB·RT + VBE + IE·RE, IC = β·IB + (β+1)·ICBO, IE = (β+1)·(IB + ICBO)).
It covers the divider (RT = R1‖R2, VBB = VCC·R2/(R1+R2)), fixed base with an
emitter resistor (RT = RB, VBB = VCC) and the dual-supply stage (RT = RB,
VBB − VBE measured from VEE: |VEE| − VBE).  It does not cover collector
feedback, whose base is fed from the collector.

The closed forms of S_ICBO and S_VBE are the ones recalled from standard texts
(see REFERENCES.md); S_β is derived from the same IC expression without
leakage.  The operating-point code computes the same factors numerically;
these forms are the check.

Units: ampere, volt, ohm.  S_ICBO and S_β·β/IC are dimensionless; S_VBE is in
A/V (siemens); S_β in ampere per unit β.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["s_beta", "s_icbo", "s_vbe"]


def _f(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def s_icbo(beta: ArrayLike, r_th: ArrayLike, r_e: ArrayLike) -> NDArray[np.float64]:
    """Leakage stability factor S_ICBO = ∂IC/∂ICBO = (1+β)/(1 + β·RE/(RT+RE)).

    Equal to (β+1)·(RT+RE)/(RT + (β+1)·RE): 1 for RT → 0 (a stiff base), β+1 for
    RE → 0 (fixed base, no feedback).

    Parameters
    ----------
    beta : float or ndarray
        DC current gain, dimensionless.
    r_th : float or ndarray
        Thévenin resistance of the base feed, ohm.
    r_e : float or ndarray
        Emitter resistor, ohm.

    Returns
    -------
    ndarray of float
        S_ICBO, dimensionless.
    """
    b, rt, re = _f(beta), _f(r_th), _f(r_e)
    return (1.0 + b) * (rt + re) / (rt + (1.0 + b) * re)


def s_vbe(beta: ArrayLike, r_th: ArrayLike, r_e: ArrayLike) -> NDArray[np.float64]:
    """Base–emitter voltage stability factor S_VBE = ∂IC/∂VBE = −β/(RT + (1+β)·RE).

    Parameters
    ----------
    beta : float or ndarray
        DC current gain, dimensionless.
    r_th : float or ndarray
        Thévenin resistance of the base feed, ohm.
    r_e : float or ndarray
        Emitter resistor, ohm.

    Returns
    -------
    ndarray of float
        S_VBE, A/V (negative: IC falls as VBE rises).
    """
    b = _f(beta)
    return -b / (_f(r_th) + (1.0 + b) * _f(r_e))


def s_beta(
    ic: ArrayLike, beta: ArrayLike, r_th: ArrayLike, r_e: ArrayLike
) -> NDArray[np.float64]:
    """Current-gain stability factor S_β = ∂IC/∂β = IC·(RT+RE)/(β·(RT + (1+β)·RE)).

    Derived from IC = β·(VBB − VBE)/D with D = RT + (β+1)·RE (leakage
    neglected): ∂IC/∂β = (VBB − VBE)·(D − β·RE)/D² = (VBB − VBE)·(RT + RE)/D², and
    (VBB − VBE)/D = IC/β.

    Parameters
    ----------
    ic : float or ndarray
        Collector current at the point, ampere.
    beta : float or ndarray
        DC current gain, dimensionless.
    r_th : float or ndarray
        Thévenin resistance of the base feed, ohm.
    r_e : float or ndarray
        Emitter resistor, ohm.

    Returns
    -------
    ndarray of float
        S_β, ampere per unit of β.
    """
    b, rt, re = _f(beta), _f(r_th), _f(r_e)
    return _f(ic) * (rt + re) / (b * (rt + (1.0 + b) * re))
