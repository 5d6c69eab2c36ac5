"""Necessary conditions of a stage's purpose limits, each exact at a named vertex.

The search drops a row of the enumerated roles, or narrows the free role's range, only
where one vertex of the tolerance box (a point :func:`stockbias.analysis.worst_case.
worst_case` evaluates, with the device at the ambient) is proven to break a limit.  A
design that passes ``check`` is active at every vertex with IC in the window there, so
the closed forms below (constant VBE, NPN frame, magnitudes) hold at every vertex used.

Input resistance (``rin_min``)
    rin = 1/(gπ·(1 − v_e/v_b) + 1/R_bias) with R_bias = R1‖R2 (divider) or RB
    (dual_supply, fixed_base).  Solving the emitter and collector nodes of
    :func:`stockbias.analysis.small_signal.stage_response` (no feedback resistor) gives
    u = 1 − v_e/v_b = (G + gₒ + gₒ·G·R_E) / ((1 + gπ·R_E)(G + gₒ) + (gm + gₒ)·G·R_E),
    with G = 1/(RC‖RL); every term is ≥ 0, so 0 ≤ u ≤ 1 and rin ≤ R_bias.  At the vertex
    with the bias resistors at their low ends, rin_min ≤ R_bias,low is necessary.

Divider ratio (``divider_ratio_min`` = k)
    At the vertex with ICBO = 0 (the low end of the ICBO axis), hFE at its low end and
    the ambient giving the smaller β, VCC low, R1 and R2 high: IB = IC/β ≥ ic_min/β > 0,
    so VB = VBB − IB·RBB ≤ VBB and I(R2) = VB/R2 ≤ VCC/(R1 + R2).  I(R2) ≥ k·IB there
    then needs VCC_low/(R1_high + R2_high) ≥ k·ic_min/β.

Supply current and power (divider)
    At the vertex with ICBO = 0, VCC high, R1 and R2 low: IB > 0 as above, so
    I(R1) = (VCC − VB)/R1 ≥ (VCC − VBB)/R1 = VCC/(R1 + R2), and the current out of the
    supply is I(R1) + IC ≥ VCC_high/(R1_low + R2_low) + ic_min; the power is VCC times it.

Gain (free role RC)
    The same node solution gives v_c/v_b = (gₒ·gπ·R_E − gm)/D with
    D = G·(1 + (gπ + gm + gₒ)·R_E) + gₒ·(1 + gπ·R_E), R_E the unbypassed RE.
    Upper bound: where gm ≥ gₒ·gπ·R_E, |gain| ≤ gm/(G·(1 + (gπ + gm)·R_E)) (drop gₒ in
    D); elsewhere |gain| < gₒ·gπ·R_E/(gₒ·(1 + gπ·R_E)) < 1.  So for gain_min ≥ 1 a vertex
    needs G ≤ gm/(gain_min·(1 + (gπ + gm)·R_E)): a lower bound on RC.
    Lower bound: 0 ≤ gₒ ≤ IC/VAF (rₒ = (VAF + VCB)/IC, VCB ≥ 0), so with gₒ,max = IC/VAF
    and N = gm − gₒ,max·gπ·R_E > 0, |gain| ≥ N/(G·A + B) with A = 1 + (gπ + gm + gₒ,max)·R_E,
    B = gₒ,max·(1 + gπ·R_E).  gain_max then needs G ≥ (N/gain_max − B)/A: an upper bound
    on RC.  gm = IC/VT and gπ = gm/β at the vertex's ambient (the constant-VBE model).
"""

from __future__ import annotations

import math

import numpy as np

from ..analysis import device
from ..job import Job, Stage
from ..parts import Transistor

__all__ = ["dead_rows", "gain_max_conductance", "gain_min_conductance", "rc_from_conductance"]

_REL = 1e-12  # relative slack in the keeping direction (never reject on rounding)


def _beta_min(job: Job, q: Transistor) -> float:
    """Smallest β over the two ambient ends with hFE at its low end."""
    tk = device.CELSIUS_TO_KELVIN
    env = job.environment
    return float(min(device.beta_at(q.hfe_min, t + tk, xtb=q.xtb)
                     for t in (env.ambient_min_c, env.ambient_max_c)))


def dead_rows(job: Job, stage: Stage, network: str, q: Transistor,
              low: dict[str, np.ndarray], high: dict[str, np.ndarray],
              beta_scale: float = 1.0) -> np.ndarray:
    """Rows of the enumerated roles that break a purpose limit at some vertex (bool).

    ``low``/``high``: role → band ends of the enumerated roles per row (ohm, 0 = absent).
    ``beta_scale``: the largest IC/IB at that vertex as a multiple of β (1 for the
    constant-VBE model; see :func:`.exp_cut.ratio_beta_scale`; inf: no ratio condition).
    See the module notes for the vertex and the proof of each condition.
    """
    t, lim = stage.target, stage.limits
    n = next(iter(low.values())).size
    dead = np.zeros(n, dtype=bool)
    s = job.supply
    vcc_lo, vcc_hi = s.volts * (1 - s.tolerance_pct / 100), s.volts * (1 + s.tolerance_pct / 100)
    with np.errstate(divide="ignore", invalid="ignore"):
        if t.rin_min is not None:
            if network == "divider":
                r1, r2 = low["R1"], low["R2"]
                r_bias = np.where((r1 > 0) & (r2 > 0), r1 * r2 / (r1 + r2), 0.0)
            elif network in ("dual_supply", "fixed_base"):
                r_bias = low["RB"]
            else:
                r_bias = np.full(n, np.inf)
            dead |= r_bias < t.rin_min * (1 - _REL)
        if network != "divider":
            return dead
        if t.divider_ratio_min and t.ic_min > 0 and math.isfinite(beta_scale):
            i2_max = vcc_lo / (high["R1"] + high["R2"])
            dead |= i2_max < (t.divider_ratio_min * t.ic_min
                                / (_beta_min(job, q) * beta_scale) * (1 - _REL))
        if t.ic_min > 0:
            i_sup = vcc_hi / (low["R1"] + low["R2"]) + t.ic_min
            if lim.supply_current_max is not None:
                dead |= i_sup > lim.supply_current_max * (1 + _REL)
            if lim.supply_power_max is not None:
                dead |= vcc_hi * i_sup > lim.supply_power_max * (1 + _REL)
    return dead


def _small_signal(ic: np.ndarray, temp_c: float, beta: float) -> tuple[np.ndarray, np.ndarray]:
    """(gm, gπ) of the constant-VBE model at IC (A) and the device temperature (°C), S."""
    gm = np.maximum(ic, 0.0) / float(device.thermal_voltage(temp_c + device.CELSIUS_TO_KELVIN))
    return gm, gm / beta


def gain_min_conductance(ic: np.ndarray, temp_c: float, beta: float, re: np.ndarray,
                         gain_min: float) -> np.ndarray:
    """Largest G = 1/(RC‖RL) (S) at which |gain| can reach ``gain_min`` (≥ 1) at a vertex
    with this IC (A), device temperature (°C), β and unbypassed RE (ohm)."""
    gm, gpi = _small_signal(ic, temp_c, beta)
    return gm / (gain_min * (1.0 + (gpi + gm) * re)) * (1 + _REL)


def gain_max_conductance(ic: np.ndarray, temp_c: float, beta: float, re: np.ndarray,
                         vaf: float, gain_max: float) -> np.ndarray:
    """Smallest G = 1/(RC‖RL) (S) at which |gain| can stay at or below ``gain_max`` at a
    vertex with this IC (A), device temperature (°C), β, unbypassed RE (ohm) and VAF (V);
    0 where no bound follows."""
    gm, gpi = _small_signal(ic, temp_c, beta)
    go = np.maximum(ic, 0.0) / vaf if np.isfinite(vaf) else np.zeros_like(gm)
    n = gm - go * gpi * re
    a = 1.0 + (gpi + gm + go) * re
    b = go * (1.0 + gpi * re)
    p = (n / gain_max - b) / a
    return np.where(n > 0, np.maximum(p, 0.0) * (1 - _REL), 0.0)


def rc_from_conductance(g: np.ndarray, load: float) -> np.ndarray:
    """RC (ohm) with RC‖load = 1/g: inf where g ≤ 1/load (no finite RC reaches it)."""
    d = g - 1.0 / load
    with np.errstate(divide="ignore"):
        return np.where(d > 0, 1.0 / np.where(d > 0, d, 1.0), np.inf)
