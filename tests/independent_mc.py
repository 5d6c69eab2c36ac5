"""A Monte Carlo of one divider stage written apart from the engine, for the yield tests.

scipy's truncated normal for each resistor (σ = tol/3, cut at ±tol), uniform hFE and VBE, the
divider's closed-form active-region solution (DESIGN §2: constant VBE, no leakage, 25 °C) at
both supply extremes; a board passes when IC stays in the window and VCE stays at or above the
headroom at both.  It shares no code with :mod:`stockbias.analysis`.
"""

from __future__ import annotations

import numpy as np
from scipy import stats


def divider_passes(values: dict[str, tuple[float, float]], *, hfe: tuple[float, float],
                   vbe: tuple[float, float], vcc: float, vcc_tol: float,
                   ic_window: tuple[float, float], vce_min: float, n: int,
                   rng: np.random.Generator) -> np.ndarray:
    """Which of ``n`` drawn boards pass: ``values`` maps R1, R2, RC, RE to (ohm, tolerance as
    a fraction); ``vcc_tol`` a fraction; currents in ampere, voltages in volt."""
    r = {role: v * (1 + tol / 3 * stats.truncnorm.rvs(-3, 3, size=n, random_state=rng))
         for role, (v, tol) in values.items()}
    beta = rng.uniform(*hfe, n)
    vbe_drawn = rng.uniform(*vbe, n)
    ok = np.ones(n, dtype=bool)
    for supply in (vcc * (1 - vcc_tol), vcc * (1 + vcc_tol)):
        vbb = supply * r["R2"] / (r["R1"] + r["R2"])
        rbb = r["R1"] * r["R2"] / (r["R1"] + r["R2"])
        ie = (vbb - vbe_drawn) / (r["RE"] + rbb / (beta + 1))
        ic = beta / (beta + 1) * ie
        vce = supply - ic * r["RC"] - ie * r["RE"]
        ok &= (ic >= ic_window[0]) & (ic <= ic_window[1]) & (vce >= vce_min)
    return ok
