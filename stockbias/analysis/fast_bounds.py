"""Worst-case bounds of many divider stages at once, from the corners that can be extreme.

For the divider with the constant-VBE model in the active region, IC and VCE
are monotone in every parameter separately (DESIGN §2), so their bounds sit at
a few known corners instead of all 2^k vertices.  With
IE = N/D, N = VBB − VBE + RBB·ICBO, D = RE + RBB/(β+1):

* IC rises with VCC, R2, β, ICBO and the ambient (β up, VBE down, ICBO up)
  and falls with RE and VBE, always.  For R2: the sign of ∂IE/∂R2 is that of
  VCC·RE + ICBO·R1·RE + VBE·R1/(β+1) > 0 (derived in the test).  IC does not
  depend on RC.
* IC falls with R1 when ICBO·R2 < VCC (then ∂N/∂R1 < 0 and ∂D/∂R1 > 0); a
  candidate where leakage could break that has both R1 ends evaluated.
* VCE = VCC − IC·RC − IE·RE moves against IC in R1, R2, β, VBE, ICBO and the
  ambient, and falls with RC.  Its direction in VCC and in RE depends on the
  stage (sign of 1 − k·(αRC + RE)/D and of αRC − RBB/(β+1)), so both ends of
  those two axes are evaluated: four corners per bound.
* Transistor dissipation IC·VCE is a product that can peak inside the box.
  It is bounded above, soundly, by max over IC in [IC_min, IC_max] of
  IC·(VCC_max + ICBO_max·RE_max − IC·(RC_min + RE_min)) (because IE ≥ IC − ICBO,
  so VCE ≤ VCC + ICBO·RE − IC·(RC+RE)), plus VBE_max·IB_max.  That bound may
  exceed the true maximum; it is used to accept, and a candidate it would
  reject is re-checked exactly.

Every bound here equals the full vertex enumeration of
:func:`stockbias.analysis.worst_case.worst_case` for IC and VCE (tested), as
long as the stage stays active, which the returned ``active`` flag says.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..topologies.divider import active_constant_vbe
from . import device

__all__ = ["DividerBounds", "divider_bounds"]


@dataclass(frozen=True)
class DividerBounds:
    """Bounds over the tolerance box, arrays over candidates (A, V, W)."""

    ic_min: np.ndarray
    ic_max: np.ndarray
    vce_min: np.ndarray
    vce_max: np.ndarray
    pd_upper: np.ndarray
    active: np.ndarray   # every corner in the active region (VCE ≥ VCE(sat), IE > 0)


def divider_bounds(bands: dict[str, tuple[np.ndarray, np.ndarray]], *, vcc: float,
                   vcc_tol: float, hfe_min, hfe_max, vbe_min, vbe_max, vce_sat, icbo25, xtb,
                   ambient_min_c: float, ambient_max_c: float,
                   vbe_tempco: float = device.VBE_TEMPCO_DEFAULT) -> DividerBounds:
    """IC and VCE bounds (and a PD upper bound) of divider stages, vectorised.

    Parameters
    ----------
    bands : dict
        ``{"R1": (low, high), "R2": ..., "RC": ..., "RE": ...}``: each resistor's band
        over tolerance and tempco drift, ohm, arrays over candidates.
    vcc : float
        Supply, V.  vcc_tol : fraction.
    hfe_min, hfe_max, vbe_min, vbe_max, vce_sat, icbo25, xtb : float or ndarray
        Transistor data at 25 °C (V, A), scalars or arrays over candidates.
    ambient_min_c, ambient_max_c : float
        Ambient range, °C.
    """
    (r1_lo, r1_hi), (r2_lo, r2_hi) = bands["R1"], bands["R2"]
    (rc_lo, rc_hi), (re_lo, re_hi) = bands["RC"], bands["RE"]
    vcc_lo, vcc_hi = vcc * (1 - vcc_tol), vcc * (1 + vcc_tol)
    hot, cold = ambient_max_c, ambient_min_c
    t_k = device.CELSIUS_TO_KELVIN
    xtb = np.asarray(xtb, dtype=float)
    beta_hi = device.beta_at(np.asarray(hfe_max, dtype=float), hot + t_k, xtb=xtb)
    beta_lo = device.beta_at(np.asarray(hfe_min, dtype=float), cold + t_k, xtb=xtb)
    vbe_hot = device.vbe_at(np.asarray(vbe_min, dtype=float), hot, vbe_tempco)
    vbe_cold = device.vbe_at(np.asarray(vbe_max, dtype=float), cold, vbe_tempco)
    icbo_hot = device.icbo_at(np.asarray(icbo25, dtype=float), hot)
    zero = np.zeros_like(icbo_hot)

    def solve(r1_, r2_, rc_, re_, vcc_, beta, vbe, icbo):
        ib, ic, _vb, vc, ve = active_constant_vbe(
            {"R1": r1_, "R2": r2_, "RC": rc_, "RE": re_}, vcc_, 0.0, beta, vbe, icbo)
        return ic, ic + ib, vc - ve

    # R1's direction is proven only where leakage cannot outweigh the supply (ICBO·R2 < VCC).
    r1_sure = icbo_hot * r2_hi < vcc_lo
    hi_state = (vcc_hi, beta_hi, vbe_hot, icbo_hot)     # every "current up" setting
    lo_state = (vcc_lo, beta_lo, vbe_cold, zero)
    ic_hi, ie_hi, _ = solve(r1_lo, r2_hi, rc_lo, re_lo, *hi_state)
    ic_lo, _, _ = solve(r1_hi, r2_lo, rc_lo, re_hi, *lo_state)
    if not np.all(r1_sure):
        ic_hi2, ie_hi2, _ = solve(r1_hi, r2_hi, rc_lo, re_lo, *hi_state)
        ic_lo2, _, _ = solve(r1_lo, r2_lo, rc_lo, re_hi, *lo_state)
        ic_hi = np.where(r1_sure, ic_hi, np.maximum(ic_hi, ic_hi2))
        ie_hi = np.where(r1_sure, ie_hi, np.maximum(ie_hi, ie_hi2))
        ic_lo = np.where(r1_sure, ic_lo, np.minimum(ic_lo, ic_lo2))

    vce_min = np.full(np.broadcast(ic_hi, ic_lo).shape, np.inf)
    vce_max = np.full_like(vce_min, -np.inf)
    r1_choices_min = [r1_lo] if np.all(r1_sure) else [r1_lo, r1_hi]
    r1_choices_max = [r1_hi] if np.all(r1_sure) else [r1_lo, r1_hi]
    for vcc_ in (vcc_lo, vcc_hi):
        for re_ in (re_lo, re_hi):
            for r1_ in r1_choices_min:   # VCE low: currents up, RC high
                _, _, v = solve(r1_, r2_hi, rc_hi, re_, vcc_, beta_hi, vbe_hot, icbo_hot)
                vce_min = np.minimum(vce_min, v)
            for r1_ in r1_choices_max:   # VCE high: currents down, RC low
                _, _, v = solve(r1_, r2_lo, rc_lo, re_, vcc_, beta_lo, vbe_cold, zero)
                vce_max = np.maximum(vce_max, v)

    # PD upper bound: concave quadratic in IC with VCC high and the series resistance low.
    # IE = IC + IB ≥ IC − ICBO (IB ≥ −ICBO), so VCE ≤ VCC + ICBO·RE − IC·(RC + RE).
    r_series = rc_lo + re_lo
    v_top = vcc_hi + icbo_hot * re_hi
    ic_peak = np.clip(v_top / (2 * r_series), ic_lo, ic_hi)
    ib_hi = np.maximum(ie_hi / (beta_lo + 1), 0.0)
    pd_upper = ic_peak * (v_top - ic_peak * r_series) + np.asarray(vbe_max) * ib_hi
    active = (vce_min >= np.asarray(vce_sat, dtype=float)) & (ic_lo > 0)
    return DividerBounds(ic_lo, ic_hi, vce_min, vce_max, pd_upper, active)
