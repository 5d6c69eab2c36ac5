"""What a stage does: voltage gain, input resistance, output swing and supply current.

Each figure is given at the nominal point and at the worst corner of the tolerance box
(the same extreme-value bounds ``check`` reports for every other quantity):

gain
    Mid-band voltage gain vC/vB with the RE bypass and the load the job states
    ([small_signal]; without it RE is taken as bypassed and the collector unloaded).
    Nominal: signed, V/V.  Worst case: the range of |gain|; a corner where the transistor
    is saturated or cut off does not amplify and counts as 0.
rin
    Input resistance as the source sees it, the bias network included (R1‖R2‖r_in(base),
    RB‖…, or the Miller-reduced collector-feedback input), ohm.  Worst: the smallest.
swing_pk
    Peak symmetric output swing: min(VCE − VCE(sat), IC·(RC‖RL)), the distance to
    saturation and to cut-off along the AC load line (the definition of the ``swing_pk``
    limits).  Worst: the smallest over the corners (0 where a corner is not active).
supply_current
    Current drawn from the supply (:mod:`stockbias.analysis.rail_current`), A.
    Worst: the largest.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..job import Job
from .worst_case import WorstCase

__all__ = ["FIGURES", "PURPOSE_QUANTITIES", "Figure", "Purpose", "conditions", "stage_purpose"]

#: The quantities a stage's figures are bounded from (beyond the default report).
PURPOSE_QUANTITIES = ("gain_abs", "rin", "swing_to_saturation", "swing_to_cutoff",
                      "supply_current")
#: name → (label, unit, the side that is worst: "min" or "max")
FIGURES = {
    "gain": ("voltage gain", "V/V", "min"),
    "rin": ("input resistance", "ohm", "min"),
    "swing_pk": ("output swing (peak)", "V", "min"),
    "supply_current": ("supply current", "A", "max"),
}


@dataclass(frozen=True)
class Figure:
    """One figure of a stage.

    Attributes
    ----------
    name : str
        ``gain``, ``rin``, ``swing_pk`` or ``supply_current``.
    nominal : float or None
        At the nominal point (None where the nominal point is not active and the figure
        is a small-signal one); the gain signed.
    low, high : float
        Worst-case range (for the gain: of |gain|), in the figure's unit; NaN when no
        corner defines it (and the swing's upper end, which no limit reads).
    worst : float
        The side that matters (``low`` for gain, rin and swing; ``high`` for current).
    corner : dict or None
        The corner of ``worst``.
    """

    name: str
    nominal: float | None
    low: float
    high: float
    worst: float
    corner: dict | None = None

    @property
    def label(self) -> str:
        return FIGURES[self.name][0]

    @property
    def unit(self) -> str:
        return FIGURES[self.name][1]

    def to_dict(self) -> dict[str, object]:
        def num(x: float | None) -> float | None:
            return None if x is None or math.isnan(x) else float(x)

        return {"nominal": num(self.nominal), "min": num(self.low), "max": num(self.high),
                "worst": num(self.worst), "unit": self.unit, "corner": self.corner}


@dataclass(frozen=True)
class Purpose:
    """The four figures of a stage and the small-signal conditions they hold under."""

    figures: dict[str, Figure]
    conditions: str
    defaults: list[str] = field(default_factory=list)

    def __getitem__(self, name: str) -> Figure:
        return self.figures[name]

    def to_dict(self) -> dict[str, object]:
        return {**{k: f.to_dict() for k, f in self.figures.items()},
                "conditions": self.conditions, "defaults": self.defaults}


def conditions(job: Job) -> tuple[str, list[str]]:
    """The small-signal conditions in words and the ones taken by default.

    Returns
    -------
    (str, list of str)
        E.g. ``("RE bypassed, load 10 kΩ", [])`` or ``("RE bypassed, no load",
        ["RE taken as bypassed", "no load"])``.
    """
    from ..units import format_quantity

    ss = job.small_signal
    words, taken = [], []
    words.append("RE bypassed" if ss.re_bypassed else "RE not bypassed")
    if "re_bypassed" not in ss.stated:
        taken.append("RE taken as bypassed")
    load = "no load" if math.isinf(ss.load) else f"load {format_quantity(ss.load, 'ohm')}"
    words.append(load)
    if "load" not in ss.stated:
        taken.append("no load")
    return ", ".join(words), taken


def _scalar(x: object) -> float:
    return float(np.asarray(x, dtype=float).reshape(-1)[0])


def stage_purpose(job: Job, nominal: dict[str, object], wc: WorstCase) -> Purpose:
    """The stage's figures from its nominal evaluation and its worst case.

    Parameters
    ----------
    job : Job
    nominal : dict
        Nominal quantities (``gain``, ``rin``, ``swing_pk``, ``supply_current``; the
        small-signal ones None where the nominal point is not active).
    wc : WorstCase
        Bounds including :data:`PURPOSE_QUANTITIES`.
    """
    b = wc.bounds
    idle = wc.non_active_corners > 0  # such a corner neither amplifies nor swings

    def bound(q: str) -> tuple[float, float, dict | None, dict | None]:
        if q not in b:
            return math.nan, math.nan, None, None
        return b[q].min, b[q].max, b[q].corner_min, b[q].corner_max

    def nominal_of(key: str) -> float | None:
        v = nominal.get(key)
        return None if v is None else _scalar(v)

    g_lo, g_hi, g_clo, _ = bound("gain_abs")
    if idle and not g_lo <= 0:
        g_lo, g_clo = 0.0, wc.non_active_example
    if math.isnan(g_hi) and idle:
        g_hi = 0.0
    r_lo, r_hi, r_clo, _ = bound("rin")
    s_lo, _, s_clo, _ = bound("swing_to_saturation")
    c_lo, _, c_clo, _ = bound("swing_to_cutoff")
    if math.isnan(c_lo) or c_lo < s_lo or math.isnan(s_lo):
        sw_lo, sw_corner = c_lo, c_clo
    else:
        sw_lo, sw_corner = s_lo, s_clo
    if idle and not sw_lo <= 0:
        sw_lo, sw_corner = 0.0, wc.non_active_example
    sw_hi = math.nan  # the largest swing is no limit's concern: not bounded
    i_lo, i_hi, _, i_chi = bound("supply_current")
    text, taken = conditions(job)
    figures = {
        "gain": Figure("gain", nominal_of("gain"), g_lo, g_hi, g_lo, g_clo),
        "rin": Figure("rin", nominal_of("rin"), r_lo, r_hi, r_lo, r_clo),
        "swing_pk": Figure("swing_pk", nominal_of("swing_pk"), sw_lo, sw_hi, sw_lo, sw_corner),
        "supply_current": Figure("supply_current", nominal_of("supply_current"), i_lo, i_hi,
                                 i_hi, i_chi),
    }
    return Purpose(figures, text, taken)
