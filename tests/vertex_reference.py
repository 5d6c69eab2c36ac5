"""The exhaustive tests' reference screen: every limit at every vertex of the tolerance box.

Written with the analysis engine only (no search code): evaluate the stage at all
vertices, take each quantity's extremes, apply the job's limits.  A design it
rejects fails ``analyze_stage`` too (whose bounds are at least as wide), so the
exhaustive references confirm their best candidates with ``analyze_stage``.
"""

from __future__ import annotations

import warnings

import numpy as np

from stockbias.analysis.constraints import evaluate_limits, stage_limits
from stockbias.analysis.stage import StageSpec, evaluate
from stockbias.analysis.worst_case import vertex_points
from stockbias.job import Job, Stage


def vertex_screen(job: Job, stage: Stage, spec: StageSpec, ratings: dict[str, np.ndarray]
                  ) -> tuple[np.ndarray, dict[str, np.ndarray], dict[str, np.ndarray]]:
    """(ok, low, high): ``ok`` True for each design of ``spec`` (arrays over designs) that
    passes every limit at every vertex; ``low``/``high`` each quantity's vertex extremes."""
    point, _ = vertex_points(spec)
    ev = evaluate(spec, point)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        low = {k: np.nanmin(np.broadcast_to(v, ev.op.shape), -1)
               for k, v in ev.quantities.items() if np.ndim(v)}
        high = {k: np.nanmax(np.broadcast_to(v, ev.op.shape), -1)
                for k, v in ev.quantities.items() if np.ndim(v)}
    na = np.sum(ev.op.region != 0, axis=-1).astype(float)
    low["non_active_corners"] = high["non_active_corners"] = na
    low["vceo_needed"] = high["vceo_needed"] = np.full(na.shape, job.supply.max_ce_voltage)
    margins = evaluate_limits(stage_limits(job, stage, spec, ratings), low, high)
    return np.all(np.stack([m >= 0 for m in margins.values()]), axis=0), low, high
