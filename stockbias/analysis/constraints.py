"""The constraints a stage must meet at every corner, and their margins (DESIGN §2).

One list of :class:`Limit` serves ``check`` (worst case of one design), the
Monte Carlo yield (per drawn board) and the search (arrays over candidates).
A limit names the quantity it bounds, whether that quantity must stay at or
above (``"min"``) or at or below (``"max"``) the limit, and the limit itself
in the quantity's unit.  The margin is positive when the constraint passes.

The IC margin that ranks and reports designs has one definition, :func:`ic_margin`
(DESIGN §2, objective ``ic_margin``): the smallest distance of the worst-case IC to the
window, as a fraction of the target current (shown in % of the target).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..job import Job, Stage
from .ratings import allowed_resistor_power, transistor_pd_allowed
from .stage import StageSpec, evaluate

__all__ = ["IC_MARGIN_DEFINITION", "ConstraintResult", "Limit", "evaluate_limits", "ic_margin",
           "nominal_gain_abs", "stage_limits"]

#: The IC margin as arithmetic, printed once wherever the margin is shown.
IC_MARGIN_DEFINITION = ("IC margin = min(IC worst-case min − IC min, IC max − IC worst-case max)"
                        " / IC target, in % of the target")


def ic_margin(ic_low: float | np.ndarray, ic_high: float | np.ndarray, ic_min: float,
              ic_max: float, ic_target: float) -> float | np.ndarray:
    """The smallest distance of the worst-case IC to the window, as a fraction of the target.

    Parameters
    ----------
    ic_low, ic_high : float or ndarray
        Worst-case lowest and highest collector current, A.
    ic_min, ic_max : float
        The target window, A.
    ic_target : float
        The target current, A (``Target.ic``: the job's ``ic``, or the window's centre).

    Returns
    -------
    float or ndarray
        ``min(ic_low − ic_min, ic_max − ic_high) / ic_target``, dimensionless (negative: the
        worst case leaves the window).
    """
    m = np.minimum(np.asarray(ic_low, dtype=float) - ic_min,
                   ic_max - np.asarray(ic_high, dtype=float)) / ic_target
    return float(m) if m.ndim == 0 else m


@dataclass(frozen=True)
class Limit:
    """One constraint.  ``kind`` "min": quantity ≥ limit; "max": quantity ≤ limit.

    ``outside_active``: the value the quantity takes for this limit where the transistor is
    saturated or cut off and the quantity itself is undefined (NaN); None: undefined, so the
    limit fails there.

    ``figure``: a limit that holds at the nominal point (not over the corners) carries the
    design's nominal figure here, a scalar or an array over candidate designs (NaN where the
    nominal point is not active); :func:`evaluate_limits` compares it instead of the corner
    bounds.  None: the limit holds at every corner.
    """

    name: str
    quantity: str
    kind: str
    limit: float | np.ndarray
    unit: str
    description: str
    outside_active: float | None = None
    figure: float | np.ndarray | None = None


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
    kind: str = ""  # "min": worst ≥ limit passes; "max": worst ≤ limit passes (Limit.kind)

    @property
    def sign(self) -> str:
        """The limit's comparison as shown beside it: ``≥`` or ``≤``."""
        return "≥" if self.kind == "min" else "≤"

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
                         "peak swing before cut-off (IC·(RC‖RL); 0 where saturated or cut "
                         "off)", outside_active=0.0))
    # A saturated or cut-off transistor does not amplify: its small-signal gain is taken as
    # 0 there.  So such a corner fails gain_min (0 < gain_min, which job.py keeps positive),
    # and it cannot exceed gain_max; the gain_max bound is the largest gain of the active
    # corners (the active_region limit fails such a design on its own).
    if t.gain_min is not None:
        out.append(Limit("gain_min", "gain_abs", "min", t.gain_min, "V/V",
                         "|voltage gain| (0 where saturated or cut off)", outside_active=0.0))
    if t.gain_max is not None:
        out.append(Limit("gain_max", "gain_abs", "max", t.gain_max, "V/V",
                         "|voltage gain| (0 where saturated or cut off)", outside_active=0.0))
    if t.gain_nominal_min is not None or t.gain_nominal_max is not None:
        g = nominal_gain_abs(spec)
        for key, kind in (("gain_nominal_min", "min"), ("gain_nominal_max", "max")):
            value = getattr(t, key)
            if value is not None:
                out.append(Limit(key, "gain_abs_nominal", kind, value, "V/V",
                                 "|voltage gain| at the nominal point (0 where saturated or "
                                 "cut off there)", outside_active=0.0, figure=g))
    if t.rin_min is not None:
        out.append(Limit("rin_min", "rin", "min", t.rin_min, "ohm",
                         "input resistance with the bias network, as the source sees it"))
    if t.divider_ratio_min and spec.network.name == "divider":
        out.append(Limit("divider_ratio_min", "divider_ratio", "min", t.divider_ratio_min, "",
                         "divider current I(R2) as a multiple of the base current"))
    if lim.supply_power_max is not None:
        out.append(Limit("supply_power", "supply_power", "max", lim.supply_power_max, "W",
                         "power drawn from the supplies"))
    if lim.supply_current_max is not None:
        out.append(Limit("supply_current_max", "supply_current", "max", lim.supply_current_max,
                         "A", "current drawn from the supply"))
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


def nominal_gain_abs(spec: StageSpec) -> np.ndarray:
    """|voltage gain| at the nominal point (DESIGN §3), V/V; NaN where it is not active.

    Vectorised over the candidate arrays of ``spec`` (one figure per design).
    """
    with np.errstate(all="ignore"):
        return np.asarray(evaluate(spec, spec.nominal_point()).quantities["gain_abs"],
                          dtype=float)


def evaluate_limits(limits: list[Limit], low: dict[str, np.ndarray],
                    high: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Margins of every limit given the lower and upper bounds of each quantity.

    A NaN bound (the quantity is undefined at some corner: not active there) counts as
    failing, unless the limit gives the quantity's value outside the active region
    (``Limit.outside_active``).  Then, where ``high["non_active_corners"]`` shows a corner
    that is not active, that value joins the bounds (the lower bound of a "min" limit is
    at most it, the upper bound of a "max" limit at least it), and it stands in for a NaN
    bound.  Callers that reduce over corners with ``nanmin``/``nanmax`` and callers whose
    reduction propagates NaN get the same verdict for "min" limits.

    Returns name → margin array (positive passes).
    """
    out = {}
    not_active = high.get("non_active_corners")
    for lim in limits:
        side = low if lim.kind == "min" else high
        if lim.figure is not None:      # a nominal-point limit: the design's own figure
            q = np.asarray(lim.figure, dtype=float)
            if "ic" in side:
                q = np.broadcast_to(q, np.broadcast_shapes(np.shape(side["ic"]), q.shape))
            if lim.outside_active is not None:
                q = np.where(np.isnan(q), lim.outside_active, q)
            m = q - lim.limit if lim.kind == "min" else lim.limit - q
            out[lim.name] = np.where(np.isnan(m), -math.inf, m)
            continue
        q = np.asarray(side[lim.quantity], dtype=float)
        if lim.outside_active is not None:
            v = lim.outside_active
            if not_active is not None:
                some = np.asarray(not_active, dtype=float) > 0
                q = np.where(some, (np.fmin if lim.kind == "min" else np.fmax)(q, v), q)
            q = np.where(np.isnan(q), v, q)
        m = q - lim.limit if lim.kind == "min" else lim.limit - q
        out[lim.name] = np.where(np.isnan(m), -math.inf, m)
    return out
