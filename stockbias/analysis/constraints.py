"""The constraints a stage must meet at every corner, and their margins (DESIGN §2).

One list of :class:`Limit` serves ``check`` (worst case of one design), the
Monte Carlo yield (per drawn board) and the search (arrays over candidates).
A limit names the quantity it bounds, whether that quantity must stay at or
above (``"min"``) or at or below (``"max"``) the limit, and the limit itself
in the quantity's unit.  The margin is positive when the constraint passes.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..job import Job, Stage
from .ratings import allowed_resistor_power, transistor_pd_allowed
from .stage import StageSpec

__all__ = ["ConstraintResult", "Limit", "evaluate_limits", "stage_limits"]


@dataclass(frozen=True)
class Limit:
    """One constraint.  ``kind`` "min": quantity ≥ limit; "max": quantity ≤ limit."""

    name: str
    quantity: str
    kind: str
    limit: float | np.ndarray
    unit: str
    description: str


@dataclass(frozen=True)
class ConstraintResult:
    """A limit with its worst value and margin (same unit as the limit; positive passes)."""

    name: str
    limit: float
    worst: float
    margin: float
    ok: bool
    unit: str
    description: str
    corner: dict | None = None

    def to_dict(self) -> dict[str, object]:
        return {"name": self.name, "limit": self.limit, "worst": self.worst,
                "margin": self.margin, "ok": self.ok, "unit": self.unit,
                "description": self.description, "corner": self.corner}


def stage_limits(job: Job, stage: Stage, spec: StageSpec,
                 resistor_ratings: Mapping[str, float | np.ndarray]) -> list[Limit]:
    """Every constraint of one stage.

    Parameters
    ----------
    job, stage : the job and the stage being checked.
    spec : StageSpec of the stage (the device data and network).
    resistor_ratings : role → power rating at 70 °C, W.
    """
    t, lim, d = stage.target, stage.limits, spec.device
    hot = job.environment.ambient_max_c
    out = [
        Limit("ic_min", "ic", "min", t.ic_min, "A", "collector current at or above the window"),
        Limit("ic_max", "ic", "max", t.ic_max, "A", "collector current at or below the window"),
        Limit("active_region", "non_active_corners", "max", 0.0, "corners",
              "transistor active (neither saturated nor cut off) at every corner"),
    ]
    if t.vce_min > 0:
        out.append(Limit("vce_min", "vce", "min", t.vce_min, "V", "VCE headroom"))
    if t.swing_pk is not None:
        out.append(Limit("swing_saturation", "swing_to_saturation", "min", t.swing_pk, "V",
                         "peak swing before saturation (VCE − VCE(sat))"))
        out.append(Limit("swing_cutoff", "swing_to_cutoff", "min", t.swing_pk, "V",
                         "peak swing before cut-off (IC·(RC‖RL))"))
    if t.gain_min is not None:
        out.append(Limit("gain_min", "gain_abs", "min", t.gain_min, "V/V", "|voltage gain|"))
    if t.gain_max is not None:
        out.append(Limit("gain_max", "gain_abs", "max", t.gain_max, "V/V", "|voltage gain|"))
    if lim.supply_power_max is not None:
        out.append(Limit("supply_power", "supply_power", "max", lim.supply_power_max, "W",
                         "power drawn from the supplies"))
    for role, rating in resistor_ratings.items():
        allowed = allowed_resistor_power(rating, hot, lim.resistor_derating,
                                         lim.derating_knee_c, lim.derating_zero_c)
        out.append(Limit(f"p_{role}", f"p_{role}", "max", allowed, "W",
                         f"{role} dissipation within {lim.resistor_derating:g} × rating "
                         f"derated to {hot:g} °C"))
    tj_max = np.asarray(d.tj_max if lim.tj_max is None else lim.tj_max, dtype=float)
    out.append(Limit("pd", "pd", "max",
                     transistor_pd_allowed(d.pd_max_w, d.theta_ja, hot, tj_max), "W",
                     f"transistor dissipation within its rating derated to {hot:g} °C"))
    out.append(Limit("tj", "tj", "max", tj_max, "°C", "junction temperature"))
    out.append(Limit("ic_rating", "ic", "max", np.asarray(d.ic_max, dtype=float), "A",
                     "collector current within the transistor's IC max"))
    out.append(Limit("vceo", "vceo_needed", "max", np.asarray(d.vceo_max, dtype=float), "V",
                     "VCEO above the largest voltage the supplies can impose"))
    return out


def evaluate_limits(limits: list[Limit], low: dict[str, np.ndarray],
                    high: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Margins of every limit given the lower and upper bounds of each quantity.

    Returns name → margin array (positive passes; NaN bounds count as failing).
    """
    out = {}
    for lim in limits:
        if lim.kind == "min":
            m = np.asarray(low[lim.quantity], dtype=float) - lim.limit
        else:
            m = lim.limit - np.asarray(high[lim.quantity], dtype=float)
        out[lim.name] = np.where(np.isnan(m), -math.inf, m)
    return out
