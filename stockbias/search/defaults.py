"""Engineering defaults for a new design: a bias network that does not waste power.

``design`` searches for the cheapest network that meets the job; without more, the
cheapest divider can be a stiff one drawing many times the collector current (two low
values), with an input resistance of a few hundred ohms.  Two defaults, each stated in
the output and each overridable in the job, keep such a network out of a new design:

Divider stiffness (``[target] divider_ratio_min``, default 10)
    The current in the lower divider leg is at least 10 × the base current at every
    corner (I(R2)/IB ≥ 10), the trade's rule of thumb (common practice) for a base
    voltage the base current hardly moves.  ``divider_ratio_min = 0`` drops it.

Supply current (``[limits] supply_current_max``, default 1.5 × IC max)
    The stage draws at most 1.5 × the largest collector current of its window from the
    supply at the worst corner: the bias network may draw up to half the collector's
    largest current.  The rule above asks the divider for 10·IB = 10·IC/β, at most half
    of IC for any β ≥ 20, so the two defaults leave room for each other for every
    small-signal transistor (with hFE around 100 the divider may still be five times
    stiffer than the rule asks), and the wasteful divider drawing several times IC is
    refused.  Collector feedback, fixed base and split-supply networks draw IC + IB and
    meet it.  Not applied when the job states ``supply_current_max`` or
    ``supply_power_max`` (the job's own power budget stands).

``check`` of an existing stage applies neither unless the job sets the key.
"""

from __future__ import annotations

from dataclasses import replace

from ..analysis.check import small_signal_assumption
from ..job import Job
from ..units import format_quantity

__all__ = ["DIVIDER_RATIO_DEFAULT", "SUPPLY_CURRENT_FACTOR", "with_design_defaults"]

#: I(R2)/IB at every corner: the rule of thumb for a stiff divider (common practice).
DIVIDER_RATIO_DEFAULT = 10.0
#: supply current ≤ this × IC max by default (see the module notes).
SUPPLY_CURRENT_FACTOR = 1.5


def with_design_defaults(job: Job) -> tuple[Job, list[str]]:
    """The job with the new-design defaults filled in, and what was assumed, in words.

    Parameters
    ----------
    job : Job
        As read from the file (one stage or a board).

    Returns
    -------
    (Job, list of str)
        The job ``design`` searches with, and one sentence per default taken (prefixed
        with the stage name on a board).
    """
    stages, notes = [], []
    taken = small_signal_assumption(job)
    if taken and any(s.target.gain_min is not None or s.target.gain_max is not None
                     or s.target.rin_min is not None for s in job.stages):
        notes.append(taken)
    for stage in job.stages:
        t, lim = stage.target, stage.limits
        who = f"stage '{stage.name}': " if job.is_board else ""
        # the key as the job's error messages name it (no brackets: the terminal markup
        # would take them for a style)
        sec = "stage.target" if job.is_board else "target"
        if t.divider_ratio_min is None and stage.topology in ("divider", "any"):
            t = replace(t, divider_ratio_min=DIVIDER_RATIO_DEFAULT)
            notes.append(f"{who}divider current ≥ {DIVIDER_RATIO_DEFAULT:g} × IB at every "
                         f"corner (I(R2)/IB, rule of thumb, common practice); "
                         f"{sec}.divider_ratio_min = 0 in the job drops it")
        if lim.supply_current_max is None and lim.supply_power_max is None:
            cap = SUPPLY_CURRENT_FACTOR * t.ic_max
            lim = replace(lim, supply_current_max=cap)
            notes.append(f"{who}supply current ≤ {SUPPLY_CURRENT_FACTOR:g} × IC max = "
                         f"{format_quantity(cap, 'A')} at the worst corner (the bias network "
                         "draws at most half the collector's largest current); "
                         f"{sec.replace('target', 'limits')}.supply_current_max in the job "
                         "changes it")
        if t.swing_pk is None and t.gain_min is None:
            notes.append(f"{who}the job states no {sec}.swing_pk or {sec}.gain_min: the "
                         "designs are ranked by their objectives alone and may leave little "
                         "output swing or gain; state what the stage must do")
        stages.append(replace(stage, target=t, limits=lim))
    return replace(job, stages=tuple(stages)), notes
