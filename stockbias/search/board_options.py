"""Every design one stage of a board may take, as compact *options* for the board model.

An option is one (network, transistor, assignment of the IC-setting roles) — a *core*
of :mod:`.prepass` — together with a run of consecutive candidates of the free role
(``lo..hi`` in the sorted candidate table).  The options of a stage cover every
design that the pre-pass cannot prove to fail at some vertex of the tolerance box
(the same soundness rule as :mod:`.prepass`: each rejection is exact at a named
vertex), so a board optimum over the options, once every chosen stage passes the
full check, is an optimum over all designs.

Screens, in order, each exact at a vertex:

* the IC window at the IC-max and IC-min vertices and the transistor's IC rating
  (:func:`.prepass.materialise`);
* divider only: R1, R2 and RE dissipation and the supply power at the vertex with
  VCC high, R1 low, R2 high, RE low and the IC-max device corner;
* the free role's headroom, swing and dissipation window
  (:func:`.prepass.free_role_bounds`);
* networks without a free role (``collector_feedback``): every option is a whole design
  and is checked at every vertex (:func:`.prepass.vertex_check`).

What is not screened here (transistor dissipation, junction temperature, gain, the
interior peaks of products) is left to the full check of each chosen stage; a stage
design that fails it is forbidden in the model and the board is solved again.

The exponential model takes the same cuts (:func:`.prepass.row_cuts` and
:func:`.prepass.free_role_bounds` dispatch to :mod:`.exp_cut`; the divider's one-vertex
power screen is a constant-VBE closed form and is skipped), so no assignment limit
applies; its options are then screened at every vertex (:func:`screen_every_vertex`),
as the vertex check is exact for either model, when they hold at most ``EXP_SCREEN_MAX``
designs.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..job import Job, Stage
from ..parts import Transistor
from ..topologies import get_network
from .candidates import RoleCandidates
from .deadline import Deadline
from .prepass import (
    PLANS,
    ROW_BUDGET,
    corners,
    free_role_bounds,
    free_role_keep,
    free_role_range,
    ie_terms,
    materialise,
    nominal_check,
    rc_allowed_power,
    row_cuts,
    row_slices,
    vertex_check,
)

__all__ = ["StageOptions", "screen_every_vertex", "stage_options"]

_REL = 1e-12
#: Options without a free role are screened at every vertex when there are at most this many.
VERTEX_SCREEN_MAX = 200_000
#: The exponential model's designs are screened at every vertex when they are at most this
#: many (a design costs about 0.2 ms, 5 ms where θJA adds the self-heated solution; beyond
#: it the verify-and-forbid loop of the board search does the rest).
EXP_SCREEN_MAX = 5_000


@dataclass
class StageOptions:
    """The options of one (stage, network, transistor).

    ``core``: role → candidate index per option (every role but the free one);
    ``lo``/``hi``: the free role's run, inclusive candidate indices (−1 without a free role).
    """

    stage: int
    network: str
    transistor: Transistor
    cands: dict[str, RoleCandidates]
    core_roles: tuple[str, ...]
    free: str | None
    core: dict[str, np.ndarray]
    lo: np.ndarray
    hi: np.ndarray
    #: False when the time limit stopped the row scan: ``rows_done`` of ``rows_total``
    #: candidates of the first enumerated role were scanned, the options stop there
    complete: bool = True
    rows_done: int = 0
    rows_total: int = 0

    @property
    def size(self) -> int:
        return int(self.lo.size)

    def designs(self, k: int) -> list[dict[str, int]]:
        """Every design (role → candidate index) of option ``k``."""
        base = {r: int(v[k]) for r, v in self.core.items()}
        if self.free is None:
            return [base]
        return [{**base, self.free: j} for j in range(int(self.lo[k]), int(self.hi[k]) + 1)]


def _core_power_ok(job: Job, stage: Stage, network: str, q: Transistor,
                   cands: dict[str, RoleCandidates], idx: dict[str, np.ndarray]) -> np.ndarray:
    """Divider: R1, R2, RE, supply power and supply current at one vertex (active closed
    form of the constant-VBE model; every option passes for the exponential model)."""
    if network != "divider" or job.search.model != "constant_vbe":
        return np.ones(idx[PLANS[network].interval].size, dtype=bool)
    cn = corners(job, q, "divider")
    c = cands
    r1, r2 = c["R1"].low[idx["R1"]], c["R2"].high[idx["R2"]]
    re = c["RE"].low[idx["RE"]]
    n_, d0 = ie_terms("divider", {"R1": r1, "R2": r2}, cn.vcc_hi, 0.0, cn.beta_hi, cn.vbe_hi,
                      cn.icbo_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        ie = n_ / (d0 + re)
        vb = ie * re + cn.vbe_hi
        ic = cn.beta_hi / (cn.beta_hi + 1) * ie + cn.icbo_hi
        p1 = (cn.vcc_hi - vb) ** 2 / r1
        p2 = vb ** 2 / r2
        pe = ie ** 2 * re
        ps = cn.vcc_hi * ((cn.vcc_hi - vb) / r1 + ic)
    ok = ((p1 <= rc_allowed_power(job, stage, c["R1"].rating[idx["R1"]]) * (1 + 1e-9))
          & (p2 <= rc_allowed_power(job, stage, c["R2"].rating[idx["R2"]]) * (1 + 1e-9))
          & (pe <= rc_allowed_power(job, stage, c["RE"].rating[idx["RE"]]) * (1 + 1e-9)))
    lim = stage.limits.supply_power_max
    if lim is not None:
        ok &= ps <= lim * (1 + 1e-9)
    cap = stage.limits.supply_current_max
    if cap is not None:  # the current out of VCC at the same vertex: R1's and RC's
        ok &= ps / cn.vcc_hi <= cap * (1 + 1e-9)
    return ok


def _runs(core_row: np.ndarray, fj: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximal runs of consecutive ``fj`` within the same ``core_row`` (input sorted)."""
    if core_row.size == 0:
        z = np.zeros(0, dtype=np.int64)
        return z, z, z
    brk = np.ones(core_row.size, dtype=bool)
    brk[1:] = (core_row[1:] != core_row[:-1]) | (fj[1:] != fj[:-1] + 1)
    starts = np.flatnonzero(brk)
    ends = np.append(starts[1:], core_row.size) - 1
    return core_row[starts], fj[starts], fj[ends]


def stage_options(job: Job, stage: Stage, stage_index: int, network: str, q: Transistor,
                  cands: dict[str, RoleCandidates], deadline: Deadline | None = None,
                  row_budget: int = ROW_BUDGET) -> StageOptions:
    """The options of one stage for one network and transistor.

    ``job`` is the one-stage job of ``stage`` (its supply, environment, build and search).
    The rows of the enumerated roles are built ``row_budget`` at a time (ranges of the
    first enumerated role, in order, so the options are the same for any budget);
    ``deadline`` (optional) is checked between ranges, and a scan it stops returns the
    options of the ranges done with ``complete`` False.
    """
    net = get_network(network)
    plan = PLANS[network]
    spans = row_slices(network, cands, row_budget)
    pieces: list[dict[str, np.ndarray]] = []
    done = 0
    for span in spans:
        if deadline is not None and deadline.expired():
            break
        rows = row_cuts(job, stage, network, q, cands, first=span)
        part = materialise(network, q, cands, rows.take(np.flatnonzero(rows.i1 > rows.i0)))
        ok = _core_power_ok(job, stage, network, q, cands, part.idx)
        pieces.append({r: v[ok] for r, v in part.idx.items()})
        done = span[1]
    n_first = len(cands[plan.enumerated[0]])
    scan: dict[str, Any] = {"complete": done >= n_first, "rows_done": done,
                            "rows_total": n_first}
    idx = {r: np.concatenate([p[r] for p in pieces]) if pieces else np.zeros(0, dtype=np.int64)
           for r in (*plan.enumerated, plan.interval)}
    core_roles = (*plan.enumerated, plan.interval)
    if plan.free is None:
        # every role is in the core: the options are whole designs, so screen them at every
        # vertex now (the headroom and dissipation limits have no closed-form cut here)
        n = idx[plan.interval].size
        if 0 < n <= (EXP_SCREEN_MAX if job.search.model == "exponential"
                     else VERTEX_SCREEN_MAX):
            chk = vertex_check(job, stage, network, q, {r: (cands[r], idx[r]) for r in idx})
            idx = {r: v[chk["ok"]] for r, v in idx.items()}
            n = idx[plan.interval].size
        empty = np.full(n, -1, dtype=np.int64)
        return StageOptions(stage_index, network, q, cands, core_roles, None, idx, empty, empty,
                            **scan)
    fc = cands[plan.free]
    h, low_need, ic_top = free_role_bounds(job, stage, network, q, cands, idx)
    j0, j1 = free_role_range(fc, h, low_need)
    counts = np.maximum(j1 - j0, 0)
    total = int(counts.sum())
    row = np.repeat(np.arange(counts.size), counts)
    fj = np.repeat(j0, counts) + np.arange(total) - np.repeat(np.cumsum(counts) - counts, counts)
    keep = free_role_keep(job, stage, fc, row, fj, h, low_need, ic_top)
    if not net.role(plan.free).optional:
        keep &= fc.arrangement[fj] >= 0
    row, fj = row[keep], fj[keep]
    crow, lo, hi = _runs(row, fj)
    core = {r: v[crow] for r, v in idx.items()}
    opts = StageOptions(stage_index, network, q, cands, core_roles, plan.free, core,
                        lo.astype(np.int64), hi.astype(np.int64), **scan)
    if job.search.model == "exponential" and 0 < row.size <= EXP_SCREEN_MAX:
        # the exponential cuts keep more than the constant-VBE ones (their bounds are not
        # closed forms at one vertex): the vertex check spares the board loop the rest
        opts = screen_every_vertex(job, stage, opts)
    return opts


def screen_every_vertex(job: Job, stage: Stage, g: StageOptions) -> StageOptions:
    """Only the designs of ``g`` that pass every limit at every vertex (exact for either
    model: :func:`.prepass.vertex_check` fails a design only at a vertex where it fails).

    The limits set at the nominal point (a gain band) are taken first, at one point per
    design (:func:`.prepass.nominal_check`, the same figures and margins), and only the
    designs that meet them go to every vertex.
    """
    if g.size == 0:
        return g
    if g.free is None:
        ok = _passes(job, stage, g, {r: (g.cands[r], g.core[r]) for r in g.core_roles})
        return replace(g, core={r: v[ok] for r, v in g.core.items()}, lo=g.lo[ok],
                       hi=g.hi[ok])
    counts = g.hi - g.lo + 1
    total = int(counts.sum())
    opt = np.repeat(np.arange(g.size), counts)
    fj = np.repeat(g.lo, counts) + np.arange(total) - np.repeat(np.cumsum(counts) - counts,
                                                                counts)
    roles = {r: (g.cands[r], v[opt]) for r, v in g.core.items()}
    roles[g.free] = (g.cands[g.free], fj)
    ok = _passes(job, stage, g, roles)
    crow, lo, hi = _runs(opt[ok], fj[ok])
    return replace(g, core={r: v[crow] for r, v in g.core.items()},
                   lo=lo.astype(np.int64), hi=hi.astype(np.int64))


def _passes(job: Job, stage: Stage, g: StageOptions,
            roles: dict[str, tuple[RoleCandidates, np.ndarray]]) -> np.ndarray:
    """``vertex_check``'s verdict on every design of ``roles``, the nominal-point limits
    first (most designs of a run miss an existing stage's gain band)."""
    pre = np.flatnonzero(nominal_check(job, stage, g.network, g.transistor, roles))
    ok = np.zeros(next(iter(roles.values()))[1].size, dtype=bool)
    if pre.size:
        ok[pre] = vertex_check(job, stage, g.network, g.transistor,
                               {r: (c, ix[pre]) for r, (c, ix) in roles.items()})["ok"]
    return ok

