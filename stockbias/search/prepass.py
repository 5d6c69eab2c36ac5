"""Vectorised worst-case pre-pass: which partial and full assignments can possibly work.

Soundness rule
    Every rejection made here is *exact at a vertex*: a candidate is dropped only
    when the stage, evaluated at one named vertex of the tolerance box (a point that
    :func:`stockbias.analysis.worst_case.worst_case` also evaluates), either leaves
    the active region or breaks a limit there.  The closed-form constant-VBE active
    solution is used at that vertex; where it says IC is out of the window, the
    real solution there is either that active point (the window fails) or not active
    (the active-region limit fails).  So no feasible design is ever rejected, whether
    or not the monotonicity below holds for a given part; monotonicity only decides
    *which* vertices to look at, i.e. how much is pruned.

Monotonicity used to pick the vertices (constant VBE, active region; tested in
``tests/test_search_prepass.py`` by sampling the box)
    For all four networks IE = N/(D0 + X) with X the interval role (divider RE,
    collector_feedback RC, dual_supply RE, fixed_base RE) and IC = α·IE + ICBO, so IC
    falls with X.  IC rises with β (α and IE both rise when N > 0), with ICBO, with
    the ambient (β rises with XTB ≥ 0, VBE falls, ICBO rises) and falls with VBE.  It
    rises with VCC (divider, collector_feedback, fixed_base; dual_supply: with |VEE|,
    not VCC).  Divider: IC falls with R1 and rises with R2 (DESIGN §2);
    collector_feedback: falls with RE; RB of collector_feedback, dual_supply and
    fixed_base has a sign that depends on ICBO·(β+1)·(series R) against the drive
    voltage, so both of its ends are evaluated.  VCE = VRAIL_C − IC·RC − VE falls with
    RC; its direction in VCC and in X is ambiguous, so both ends are evaluated.

Exponential model
    The same plan and the same vertices; the thresholds A and B come from the
    Gummel–Poon state at the window edge with the collector side pinned at what a
    passing design allows (closed form per row, :mod:`.exp_cut`), and the collector
    currents at the two vertices from a vectorised bracketed Newton solve.  Every
    rejection stays exact at a vertex.

Interval of the last role
    For each assignment of the enumerated roles and each transistor, IC ≤ ic_max at
    the IC-max vertex gives X_low ≥ A = N/IE_hi − D0, and IC ≥ ic_min at the IC-min
    vertex gives X_high ≤ B; the candidates with nominal values in the superset
    [A / max(low/value), B / min(high/value)] are cut by ``searchsorted`` from the
    sorted table and then filtered exactly.  The full cross product of the roles is
    never formed.
"""

from __future__ import annotations

import math
import warnings
import weakref
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..analysis import device
from ..analysis.constraints import evaluate_limits, stage_limits
from ..analysis.ratings import allowed_resistor_power
from ..analysis.stage import (
    DeviceSpec,
    ResistorSpec,
    StagePoint,
    StageSpec,
    evaluate,
    self_heated_temperature,
)
from ..job import Job, Stage
from ..parts import Transistor
from ..topologies import get_network
from .candidates import RoleCandidates

if TYPE_CHECKING:
    from .exp_cut import ExpRows
from .purpose_bounds import (
    dead_rows,
    gain_max_conductance,
    gain_min_conductance,
    rc_from_conductance,
)

__all__ = [
    "PLANS",
    "ROW_BUDGET",
    "Corners",
    "Plan",
    "Rows",
    "corners",
    "design_spec",
    "enumerate_cores",
    "free_role_bounds",
    "free_role_keep",
    "free_role_range",
    "ie_terms",
    "materialise",
    "nominal_check",
    "row_cuts",
    "row_slices",
    "vertex_check",
]

_REL = 1e-12  # relative slack in the keeping direction (never reject on rounding)
#: Most rows of the enumerated roles built at once (each temporary array holds this many).
ROW_BUDGET = 1 << 18


@dataclass(frozen=True)
class Plan:
    """How the pre-pass walks a network: enumerated roles, interval role, free role.

    ``ic_dir``: sign of ∂IC/∂R for each enumerated role (+1, −1, or 0: evaluate both ends).
    """

    enumerated: tuple[str, ...]
    interval: str
    free: str | None
    ic_dir: dict[str, int]


PLANS = {
    "divider": Plan(("R1", "R2"), "RE", "RC", {"R1": -1, "R2": +1}),
    "collector_feedback": Plan(("RB", "RE"), "RC", None, {"RB": 0, "RE": -1}),
    "dual_supply": Plan(("RB",), "RE", "RC", {"RB": 0}),
    "fixed_base": Plan(("RB",), "RE", "RC", {"RB": 0}),
}


@dataclass(frozen=True)
class Corners:
    """Device and supply values at the IC-max ("hi") and IC-min ("lo") vertices, NPN frame.

    vcc, vee : V (vee a magnitude, 0 for single supply); beta, vbe (V), icbo (A); temp_c.
    """

    vcc_hi: float
    vcc_lo: float
    vee_hi: float
    vee_lo: float
    beta_hi: float
    beta_lo: float
    vbe_hi: float
    vbe_lo: float
    icbo_hi: float
    icbo_lo: float
    vce_sat: float


def corners(job: Job, q: Transistor, network: str = "divider") -> Corners:
    """The two IC-extreme vertices of a transistor's box (constant-VBE model).

    ``vcc`` is the collector-side rail and ``vee`` the emitter-side rail magnitude in the
    NPN frame: for a PNP ``dual_supply`` stage the emitter sits on +VCC and the collector
    on VEE, so the two swap.
    """
    env, s = job.environment, job.supply
    hot, cold = env.ambient_max_c, env.ambient_min_c
    tk = device.CELSIUS_TO_KELVIN
    dual = network == "dual_supply"
    vee = abs(s.negative_volts) if (dual and s.negative_volts is not None) else 0.0
    tv = s.vee_tolerance_pct / 100
    tc = s.tolerance_pct / 100
    rail_c = (s.volts * (1 + tc), s.volts * (1 - tc))
    rail_e = (vee * (1 + tv), vee * (1 - tv))
    if dual and q.polarity == "PNP":
        rail_c, rail_e = rail_e, rail_c
    return Corners(
        vcc_hi=rail_c[0], vcc_lo=rail_c[1], vee_hi=rail_e[0], vee_lo=rail_e[1],
        beta_hi=float(device.beta_at(q.hfe_max, hot + tk, xtb=q.xtb)),
        beta_lo=float(device.beta_at(q.hfe_min, cold + tk, xtb=q.xtb)),
        vbe_hi=float(device.vbe_at(q.vbe_min, hot)), vbe_lo=float(device.vbe_at(q.vbe_max, cold)),
        icbo_hi=float(device.icbo_at(q.icbo_a, hot)), icbo_lo=0.0, vce_sat=q.vce_sat)


def ie_terms(network: str, r: dict[str, np.ndarray], vcc, vee, beta, vbe, icbo
             ) -> tuple[np.ndarray, np.ndarray]:
    """(N, D0) with IE = N / (D0 + X) in the active region, constant VBE, NPN frame.

    ``r`` holds the enumerated roles (ohm, 0 = absent); X is the plan's interval role.
    vcc, vee : V (vee a magnitude); beta; vbe : V; icbo : A.
    """
    b1 = beta + 1.0
    if network == "divider":
        r1, r2 = r["R1"], r["R2"]
        vbb, rbb = vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2)
        return vbb - vbe + rbb * icbo, rbb / b1
    if network == "collector_feedback":
        rb = r["RB"]
        return vcc - vbe + rb * icbo, r["RE"] + rb / b1
    if network == "dual_supply":
        rb = r["RB"]
        return vee - vbe + rb * icbo, rb / b1
    if network == "fixed_base":
        rb = r["RB"]
        return vcc - vbe + rb * icbo, rb / b1
    raise KeyError(network)


@dataclass(frozen=True)
class Cores:
    """Assignments of the IC-setting roles that survive the window, for one transistor.

    ``idx``: role → candidate index arrays (enumerated roles and the interval role);
    ``ic_hi``/``ic_lo``: IC at the IC-max / IC-min vertices (A; the true worst case is at
    least as wide, so the margin from them is an upper bound on the true margin).
    """

    idx: dict[str, np.ndarray]
    ic_hi: np.ndarray
    ic_lo: np.ndarray
    examined: int
    row: np.ndarray | None = None


def _ends(plan: Plan, cands: dict[str, RoleCandidates], grid: dict[str, np.ndarray],
          up: bool) -> list[dict[str, np.ndarray]]:
    """Resistance settings of the enumerated roles at the IC-max (up) or IC-min vertex."""
    settings: list[dict[str, np.ndarray]] = [{}]
    for role in plan.enumerated:
        c = cands[role]
        lo, hi = c.low[grid[role]], c.high[grid[role]]
        d = plan.ic_dir[role]
        if d == 0:
            settings = [{**s, role: v} for s in settings for v in (lo, hi)]
        else:
            pick = hi if (d > 0) == up else lo
            settings = [{**s, role: pick} for s in settings]
    return settings


@dataclass(frozen=True)
class Rows:
    """Assignments of the enumerated roles (one transistor) with the interval role's cut.

    ``grid``: role → candidate index per row; ``a_thr``/``b_thr``: X_low ≥ A and X_high ≤ B
    (ohm); ``i0``/``i1``: the superset index range in the sorted interval-role table.
    """

    grid: dict[str, np.ndarray]
    a_thr: np.ndarray
    b_thr: np.ndarray
    i0: np.ndarray
    i1: np.ndarray
    hi_terms: list[tuple[np.ndarray, np.ndarray]]
    lo_terms: list[tuple[np.ndarray, np.ndarray]]
    alpha_hi: float
    alpha_lo: float
    icbo_hi: float
    icbo_lo: float
    exp: ExpRows | None = None      # the exponential model's loop terms (else closed form)

    @property
    def size(self) -> int:
        return int(self.a_thr.size)

    def take(self, sel: np.ndarray) -> Rows:
        """The rows ``sel`` only (e.g. those whose cut is not empty), renumbered 0…n−1."""
        return Rows({r: g[sel] for r, g in self.grid.items()}, self.a_thr[sel],
                    self.b_thr[sel], self.i0[sel], self.i1[sel],
                    [(n_[sel], d0[sel]) for n_, d0 in self.hi_terms],
                    [(n_[sel], d0[sel]) for n_, d0 in self.lo_terms], self.alpha_hi,
                    self.alpha_lo, self.icbo_hi, self.icbo_lo,
                    None if self.exp is None else self.exp.take(sel))

    def ic_hi_at(self, row: np.ndarray, x: np.ndarray) -> np.ndarray:
        """IC at the IC-max vertex for rows ``row`` with the interval role at ``x`` (ohm):
        at most the worst-case maximum of any design of that row that passes, A."""
        if self.exp is not None:
            return self.exp.ic_hi(row, x)
        ic = np.full(np.shape(x), -np.inf)
        for n_, d0 in self.hi_terms:
            ic = np.maximum(ic, self.alpha_hi * n_[row] / (d0[row] + x) + self.icbo_hi)
        return ic

    def ic_lo_at(self, row: np.ndarray, x: np.ndarray) -> np.ndarray:
        """IC at the IC-min vertex (see :meth:`ic_hi_at`): at least the worst-case minimum
        of any design of that row that passes, A."""
        if self.exp is not None:
            return self.exp.ic_lo(row, x)
        ic = np.full(np.shape(x), np.inf)
        for n_, d0 in self.lo_terms:
            ic = np.minimum(ic, self.alpha_lo * n_[row] / (d0[row] + x) + self.icbo_lo)
        return ic


def row_slices(network: str, cands: dict[str, RoleCandidates], budget: int = ROW_BUDGET
               ) -> list[tuple[int, int]]:
    """Ranges [a, z) of the first enumerated role's candidates whose rows (a range crossed
    with every candidate of the other enumerated roles) number at most ``budget`` each
    (one candidate per range at least), covering every row in order."""
    plan = PLANS[network]
    n_first = len(cands[plan.enumerated[0]])
    rest = int(np.prod([len(cands[r]) for r in plan.enumerated[1:]], dtype=np.int64))
    step = max(1, int(budget) // max(rest, 1))
    return [(a, min(a + step, n_first)) for a in range(0, n_first, step)]


def row_cuts(job: Job, stage: Stage, network: str, q: Transistor,
             cands: dict[str, RoleCandidates], cache: dict | None = None,
             first: tuple[int, int] | None = None) -> Rows:
    """The interval of the last IC-setting role for every row of the enumerated roles.

    ``first`` (optional): only the rows whose first enumerated role (R1, RB) has a
    candidate index in [a, z) (see :func:`row_slices`); every row by default.
    ``cache`` (optional, a dict the caller keeps): the row grid and the resistance
    settings at the two IC-extreme vertices do not depend on the transistor, so they
    are built once per network, candidate tables and range (the caller drops old ranges).
    """
    plan = PLANS[network]
    cn = corners(job, q, network)
    t = stage.target
    sizes = [len(cands[r]) for r in plan.enumerated]
    a, z = (0, sizes[0]) if first is None else first
    key = ("row_grid", network, a, z, *(id(cands[r]) for r in plan.enumerated))
    if cache is not None and key in cache:
        grid, ends_up, ends_lo = cache[key]
    else:
        mesh = np.meshgrid(np.arange(a, z), *[np.arange(n) for n in sizes[1:]],
                           indexing="ij")
        grid = {r: m.reshape(-1) for r, m in zip(plan.enumerated, mesh, strict=True)}
        ends_up = _ends(plan, cands, grid, up=True)
        ends_lo = _ends(plan, cands, grid, up=False)
        if cache is not None:
            for k in [k for k in cache if k[:2] == ("row_grid", network)]:
                del cache[k]
            cache[key] = (grid, ends_up, ends_lo)
    m = grid[plan.enumerated[0]].size
    alpha_hi = cn.beta_hi / (cn.beta_hi + 1)
    alpha_lo = cn.beta_lo / (cn.beta_lo + 1)
    hi_terms: list[tuple[np.ndarray, np.ndarray]] = []
    lo_terms: list[tuple[np.ndarray, np.ndarray]] = []
    exp = None
    beta_scale = 1.0
    if job.search.model == "exponential":
        from .exp_cut import exp_thresholds, ratio_beta_scale

        a_thr, b_thr, exp = exp_thresholds(job, stage, network, q, ends_up, ends_lo, m)
        beta_scale = ratio_beta_scale(job, stage, q, network)
    else:
        a_thr, b_thr = _closed_form_thresholds(t, cn, network, ends_up, ends_lo, m, hi_terms,
                                               lo_terms)
    xc = cands[plan.interval]
    present = xc.value > 0
    f_lo = float(np.max(xc.low[present] / xc.value[present])) if present.any() else 1.0
    f_hi = float(np.min(xc.high[present] / xc.value[present])) if present.any() else 1.0
    with np.errstate(invalid="ignore"):
        i0 = np.searchsorted(xc.value, np.where(np.isfinite(a_thr), a_thr / f_lo, a_thr)
                             * (1 - _REL), "left")
        i1 = np.searchsorted(xc.value, np.where(np.isfinite(b_thr), b_thr / f_hi, b_thr)
                             * (1 + _REL), "right")
    # rows a purpose limit rules out at some vertex (rin, divider ratio, supply): empty cut
    dead = dead_rows(job, stage, network, q,
                     {r: cands[r].low[grid[r]] for r in plan.enumerated},
                     {r: cands[r].high[grid[r]] for r in plan.enumerated}, beta_scale)
    i1 = np.where(dead, i0, np.maximum(i1, i0))
    return Rows(grid, a_thr, b_thr, i0, i1, hi_terms, lo_terms, alpha_hi,
                alpha_lo, cn.icbo_hi, cn.icbo_lo, exp)


def _closed_form_thresholds(t, cn: Corners, network: str, ends_up, ends_lo, m: int,
                            hi_terms: list, lo_terms: list) -> tuple[np.ndarray, np.ndarray]:
    """Constant VBE: (A, B) per row from IE = N/(D0 + X) at the two IC-extreme vertices;
    the (N, D0) of each setting are appended to ``hi_terms``/``lo_terms``."""
    alpha_hi = cn.beta_hi / (cn.beta_hi + 1)
    alpha_lo = cn.beta_lo / (cn.beta_lo + 1)
    ie_max = (t.ic_max - cn.icbo_hi) / alpha_hi          # largest IE allowed at IC-max vertex
    ie_min = (t.ic_min - cn.icbo_lo) / alpha_lo          # smallest IE needed at IC-min vertex
    a_thr = np.full(m, -np.inf)
    for s in ends_up:
        n_, d0 = ie_terms(network, s, cn.vcc_hi, cn.vee_hi, cn.beta_hi, cn.vbe_hi, cn.icbo_hi)
        hi_terms.append((n_, d0))
        with np.errstate(divide="ignore", invalid="ignore"):
            thr = np.where(n_ > 0, n_ / ie_max - d0, np.inf) if ie_max > 0 else np.full(m, np.inf)
        a_thr = np.maximum(a_thr, thr)
    b_thr = np.full(m, np.inf)
    for s in ends_lo:
        n_, d0 = ie_terms(network, s, cn.vcc_lo, cn.vee_lo, cn.beta_lo, cn.vbe_lo, cn.icbo_lo)
        lo_terms.append((n_, d0))
        with np.errstate(divide="ignore", invalid="ignore"):
            thr = np.where(n_ > 0, n_ / ie_min - d0 if ie_min > 0 else np.inf, -np.inf)
        b_thr = np.minimum(b_thr, thr)
    return a_thr, b_thr


def attribute_levels(attr: np.ndarray, most: int = 64) -> list[tuple[int, np.ndarray]] | None:
    """A candidate table's indices grouped by the value of one integer attribute (cost,
    part count), levels ascending, each group's indices ascending (so sorted by
    resistance); None when the attribute takes more than ``most`` values."""
    lv = np.unique(attr)
    if lv.size > most:
        return None
    return [(int(v), np.flatnonzero(attr == v)) for v in lv]


def _runs(starts: np.ndarray, counts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(owner, position): for each k, ``counts[k]`` consecutive positions from
    ``starts[k]``, owner k."""
    total = int(counts.sum())
    owner = np.repeat(np.arange(counts.size), counts)
    offs = np.arange(total) - np.repeat(np.cumsum(counts) - counts, counts)
    return owner, np.repeat(starts, counts) + offs


def materialise(network: str, q: Transistor, cands: dict[str, RoleCandidates], rows: Rows,
                sel: np.ndarray | None = None, x_attr: np.ndarray | None = None,
                x_limit: np.ndarray | None = None,
                x_levels: list[tuple[int, np.ndarray]] | None = None) -> Cores:
    """Cores of the selected rows: each row × each interval-role candidate that passes.

    ``x_attr``/``x_limit`` (optional): also drop candidates whose attribute exceeds the
    row's limit (the caller's proven objective bound, e.g. the cost left for this role).
    ``x_levels`` (optional, :func:`attribute_levels` of ``x_attr``): the candidates of
    each row's cut are then drawn level by level, only from the levels within the row's
    limit, so the dearer candidates of a wide cut (pairs) are never listed at all.
    """
    plan = PLANS[network]
    sel = np.arange(rows.size) if sel is None else np.asarray(sel)
    xc = cands[plan.interval]
    i0, i1 = rows.i0[sel], rows.i1[sel]
    if x_levels is not None and x_attr is not None and x_limit is not None:
        owners, picks = [], []
        for level, ind in x_levels:
            live = np.flatnonzero(level <= x_limit)
            if live.size == 0:
                break                                  # levels ascend
            p0 = np.searchsorted(ind, i0[live], "left")
            p1 = np.searchsorted(ind, i1[live], "left")
            own, pos = _runs(p0, np.maximum(p1 - p0, 0))
            owners.append(live[own])
            picks.append(ind[pos])
        rloc = np.concatenate(owners) if owners else np.zeros(0, dtype=np.int64)
        xi = np.concatenate(picks) if picks else np.zeros(0, dtype=np.int64)
        order = np.lexsort((xi, rloc))                 # the order of the unlevelled listing
        rloc, xi = rloc[order], xi[order]
    else:
        rloc, xi = _runs(i0, i1 - i0)
    row = sel[rloc]
    x_lo, x_hi = xc.low[xi], xc.high[xi]
    keep = (x_lo >= rows.a_thr[row] * (1 - _REL) - 1e-300) & \
        (x_hi <= rows.b_thr[row] * (1 + _REL))
    if x_attr is not None:
        keep &= x_attr[xi] <= x_limit[rloc]
    row, xi, x_lo, x_hi = row[keep], xi[keep], x_lo[keep], x_hi[keep]
    ic_hi = rows.ic_hi_at(row, x_lo)
    ic_lo = rows.ic_lo_at(row, x_hi)
    ok = ic_hi <= q.ic_max * (1 + _REL)                   # IC rating at the IC-max vertex
    idx = {r: rows.grid[r][row[ok]] for r in plan.enumerated}
    idx[plan.interval] = xi[ok]
    return Cores(idx=idx, ic_hi=ic_hi[ok], ic_lo=ic_lo[ok], examined=int(sel.size),
                 row=row[ok])


def enumerate_cores(job: Job, stage: Stage, network: str, q: Transistor,
                    cands: dict[str, RoleCandidates]) -> Cores:
    """Every (enumerated roles × interval role) assignment whose IC can stay in the window.

    The enumerated roles are crossed (they are few); the interval role is cut per row
    by ``searchsorted`` and then filtered exactly (see the module notes).
    """
    return materialise(network, q, cands, row_cuts(job, stage, network, q, cands))


def free_role_bounds(job: Job, stage: Stage, network: str, q: Transistor,
                     cands: dict[str, RoleCandidates], idx: dict[str, np.ndarray]
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For each core: the largest RC high end and the smallest RC low end a vertex allows.

    H: at every checked vertex (IC-max device corner, both VCC ends, both ends of the
    interval role and of ambiguous roles) VCE = VRAIL_C − VE − IC·RC must stay at or above
    max(VCE(sat), vce_min, VCE(sat) + swing), and |gain| ≤ gain_max there; L: IC·(RC‖RL)
    ≥ swing and |gain| ≥ gain_min at the IC-min vertex (the gain bounds are the closed
    forms of :mod:`.purpose_bounds`).
    Also returns IC at the IC-max vertex with the interval role at its low end (A), for the
    RC dissipation check.
    """
    if job.search.model == "exponential":
        from .exp_cut import exp_free_role_bounds

        return exp_free_role_bounds(job, stage, network, q, cands, idx)
    plan = PLANS[network]
    cn = corners(job, q, network)
    t = stage.target
    hot, cold = job.environment.ambient_max_c, job.environment.ambient_min_c
    load = job.small_signal.load
    unbypassed = 0.0 if job.small_signal.re_bypassed else 1.0
    need = max(cn.vce_sat, t.vce_min, cn.vce_sat + (t.swing_pk or 0.0))
    n = idx[plan.interval].size
    h = np.full(n, np.inf)
    ic_top = np.zeros(n)
    xc = cands[plan.interval]
    settings = _ends(plan, cands, idx, up=True)
    alpha = cn.beta_hi / (cn.beta_hi + 1)
    for s in settings:
        for vcc in (cn.vcc_hi, cn.vcc_lo):
            n_, d0 = ie_terms(network, s, vcc, cn.vee_hi, cn.beta_hi, cn.vbe_hi, cn.icbo_hi)
            for x in (xc.low[idx[plan.interval]], xc.high[idx[plan.interval]]):
                with np.errstate(divide="ignore", invalid="ignore"):
                    ie = n_ / (d0 + x)
                    ic = alpha * ie + cn.icbo_hi
                    ve = ie * x - cn.vee_hi                 # NPN frame, RAIL_E = −|VEE| or 0
                    hh = np.where(ic > 0, (vcc - ve - need) / ic, -np.inf)
                h = np.minimum(h, hh)
                ic_top = np.maximum(ic_top, ic)
                if t.gain_max is not None:       # |gain| ≤ gain_max at this vertex
                    g = gain_max_conductance(ic, hot, cn.beta_hi, x * unbypassed, q.vaf_v,
                                             t.gain_max)
                    h = np.minimum(h, rc_from_conductance(g, load))
    low_need = np.zeros(n)
    gain_low = t.gain_min is not None and t.gain_min >= 1.0
    if t.swing_pk or gain_low:
        ic_min = np.full(n, np.inf)
        lo_s = [{}]
        for role in plan.enumerated:
            c = cands[role]
            lo, hi = c.low[idx[role]], c.high[idx[role]]
            d = plan.ic_dir[role]
            lo_s = [{**s, role: v} for s in lo_s
                    for v in ((lo, hi) if d == 0 else ((lo,) if d > 0 else (hi,)))]
        for s in lo_s:
            n_, d0 = ie_terms(network, s, cn.vcc_lo, cn.vee_lo, cn.beta_lo, cn.vbe_lo, 0.0)
            x_hi = xc.high[idx[plan.interval]]
            ic_v = cn.beta_lo / (cn.beta_lo + 1) * n_ / (d0 + x_hi)
            ic_min = np.minimum(ic_min, ic_v)
            if gain_low:                         # |gain| ≥ gain_min at this vertex
                g_max = gain_min_conductance(ic_v, cold, cn.beta_lo, x_hi * unbypassed,
                                             t.gain_min)
                low_need = np.maximum(low_need, rc_from_conductance(g_max, load))
        if t.swing_pk:
            g = ic_min / t.swing_pk - 1.0 / job.small_signal.load
            with np.errstate(divide="ignore"):
                low_need = np.maximum(low_need, np.where(g > 0, 1.0 / g, np.inf))
    return h, low_need, ic_top


#: the band factors of recent free-role tables (a table with pairs holds 10^5 candidates
#: and is asked once per chunk of cores): id → (weak reference to the table, factors)
_FACTORS: dict[int, tuple[weakref.ref, float, float]] = {}


def _band_factors(fc: RoleCandidates) -> tuple[float, float]:
    """(largest low/value, smallest high/value) over the table's present candidates."""
    got = _FACTORS.get(id(fc))
    if got is None or got[0]() is not fc:
        present = fc.value > 0
        f_hi = float(np.min(fc.high[present] / fc.value[present])) if present.any() else 1.0
        f_lo = float(np.max(fc.low[present] / fc.value[present])) if present.any() else 1.0
        if len(_FACTORS) >= 64:
            _FACTORS.clear()
        _FACTORS[id(fc)] = got = (weakref.ref(fc), f_lo, f_hi)
    return got[1], got[2]


def free_role_range(fc: RoleCandidates, h: np.ndarray, low_need: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Per core, the superset [j0, j1) of the free role's sorted table whose nominal values
    can meet the high-end bound ``h`` and the low-end need ``low_need`` (ohm) of
    :func:`free_role_bounds`; :func:`free_role_keep` then filters exactly."""
    f_lo, f_hi = _band_factors(fc)
    with np.errstate(invalid="ignore", divide="ignore"):
        j1 = np.searchsorted(fc.value, np.where(np.isfinite(h), h / f_hi, h) * (1 + _REL),
                             "right")
        j0 = np.searchsorted(fc.value, low_need / f_lo * (1 - _REL), "left")
    return j0, j1


def free_role_keep(job: Job, stage: Stage, fc: RoleCandidates, row: np.ndarray,
                   fj: np.ndarray, h: np.ndarray, low_need: np.ndarray,
                   ic_top: np.ndarray) -> np.ndarray:
    """Which (core ``row``, free candidate ``fj``) pairs meet the headroom, swing and
    dissipation bounds of :func:`free_role_bounds` (each exact at a vertex)."""
    allowed = rc_allowed_power(job, stage, fc.rating[fj])
    return ((fc.high[fj] <= h[row] * (1 + _REL)) & (fc.low[fj] >= low_need[row] * (1 - _REL))
            & (ic_top[row] ** 2 * fc.high[fj] <= allowed * (1 + 1e-9)))


def rc_allowed_power(job: Job, stage: Stage, rating: np.ndarray) -> np.ndarray:
    """Allowed dissipation of a resistor of this rating at the hottest ambient, W."""
    lim = stage.limits
    return allowed_resistor_power(rating, job.environment.ambient_max_c, lim.resistor_derating,
                                  lim.derating_knee_c, lim.derating_zero_c)


def design_spec(job: Job, network: str, dev: DeviceSpec,
                roles: dict[str, tuple[RoleCandidates, np.ndarray]], sl: slice
                ) -> tuple[StageSpec, dict[str, np.ndarray]]:
    """The :class:`StageSpec` of the designs ``sl`` of ``roles`` (role → (candidate table,
    index array)), and each role's power rating at 70 °C (W)."""
    res, ratings = {}, {}
    for role, (c, ix) in roles.items():
        i = ix[sl]
        res[role] = ResistorSpec(c.value[i], c.tol[i], c.drift[i], band=(c.low[i], c.high[i]))
        ratings[role] = c.rating[i]
    spec = StageSpec(network=get_network(network), resistors=res, device=dev,
                     vcc=job.supply.volts, vcc_tol=job.supply.tolerance_pct / 100,
                     vee=job.supply.negative_volts, vee_tol=job.supply.vee_tolerance_pct / 100,
                     ambient_min_c=job.environment.ambient_min_c,
                     ambient_max_c=job.environment.ambient_max_c, model=job.search.model,
                     load=job.small_signal.load, re_bypassed=job.small_signal.re_bypassed)
    return spec, ratings


def nominal_check(job: Job, stage: Stage, network: str, q: Transistor,
                  roles: dict[str, tuple[RoleCandidates, np.ndarray]],
                  chunk: int = 2048) -> np.ndarray:
    """The limits set at the nominal point (``gain_nominal_min``/``max``) for arrays of full
    designs: the same limits, figures and margins :func:`vertex_check` evaluates, at one point
    instead of every vertex.  False proves the design fails (``vertex_check`` fails it too)."""
    n = next(iter(roles.values()))[1].size
    ok = np.ones(n, dtype=bool)
    dev = DeviceSpec.from_transistor(q)
    for s0 in range(0, n, chunk):
        sl = slice(s0, min(n, s0 + chunk))
        spec, ratings = design_spec(job, network, dev, roles, sl)
        limits = [lim for lim in stage_limits(job, stage, spec, ratings)
                  if lim.figure is not None]
        for mg in evaluate_limits(limits, {}, {}).values():
            ok[sl] &= mg >= 0
    return ok


_NETWORK_AXES = ("vcc", "vee")


def _vertex_grid(spec: StageSpec) -> StagePoint:
    """Every vertex of the box, on two new last axes: the supplies' and resistors'
    vertices (what the network's linear response depends on), then the device's and the
    ambient's.  The same vertices as :func:`stockbias.analysis.worst_case.vertex_points`;
    the split lets the operating-point solve work out the network once per resistor
    vertex, not once per vertex."""
    axes = spec.axes()
    net_axes = [a for a in axes if a in _NETWORK_AXES or a.startswith("R:")]
    dev_axes = [a for a in axes if a not in net_axes]
    values = {}
    for group, last in ((net_axes, False), (dev_axes, True)):
        k = len(group)
        bits = ((np.arange(2 ** k)[:, None] >> np.arange(k)[None, :]) & 1).astype(float)
        for j, axis in enumerate(group):
            lo, hi = spec.axis_range(axis)
            lo = np.asarray(lo, dtype=float)[..., None, None]
            hi = np.asarray(hi, dtype=float)[..., None, None]
            b = bits[:, j][None, :] if last else bits[:, j][:, None]
            values[axis] = lo + b * (hi - lo)
    base = spec.nominal_point()

    def grown(v):
        return np.asarray(v)[..., None, None]

    base = StagePoint(
        vcc=grown(base.vcc), vee=None if base.vee is None else grown(base.vee),
        r={k_: grown(v) for k_, v in base.r.items()}, hfe=grown(base.hfe),
        vbe=grown(base.vbe), icbo=grown(base.icbo), ambient_c=grown(base.ambient_c))
    return spec.point_from(values, base)


def vertex_check(job: Job, stage: Stage, network: str, q: Transistor,
                 roles: dict[str, tuple[RoleCandidates, np.ndarray]],
                 chunk: int = 2048) -> dict[str, np.ndarray]:
    """Every limit of :func:`stage_limits` at every vertex, for arrays of full designs.

    ``roles``: role → (candidate table, index array), all index arrays the same length.
    Returns ``ok`` (bool), ``ic_min``/``ic_max`` (vertex bounds, A), ``vce_min`` (V), and the
    margins of every limit (``m_<name>``).  Vertex bounds of the dissipations are lower
    bounds of the refined bounds that ``check`` reports, so ``ok`` False is a proof of
    failure, and ``ok`` True is confirmed by re-verification.
    """
    n = next(iter(roles.values()))[1].size
    out: dict[str, list[np.ndarray]] = {}
    dev = DeviceSpec.from_transistor(q)
    for s0 in range(0, n, chunk):
        sl = slice(s0, min(n, s0 + chunk))
        spec, ratings = design_spec(job, network, dev, roles, sl)
        point = _vertex_grid(spec)
        evs = [evaluate(spec, point)]
        if not math.isnan(float(np.asarray(dev.theta_ja, dtype=float))):
            # as check does: the device also at its self-heated junction temperature
            evs.append(evaluate(spec, point,
                                device_temp_c=self_heated_temperature(spec, point,
                                                                      evs[0].op)))
        low: dict[str, np.ndarray] = {}
        high: dict[str, np.ndarray] = {}
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            for name in evs[0].quantities:
                parts = [np.broadcast_to(np.asarray(e.quantities[name], dtype=float),
                                         e.op.shape) for e in evs]
                if parts[0].ndim == 0:
                    continue
                parts = [x.reshape((*x.shape[:-2], -1)) for x in parts]
                a = np.concatenate(parts, axis=-1)
                low[name] = np.nanmin(a, axis=-1)
                high[name] = np.nanmax(a, axis=-1)
        nonactive = sum(np.sum(np.asarray(e.op.region) != 0, axis=(-2, -1)) for e in evs)
        nonactive = np.asarray(nonactive, dtype=float)
        low["non_active_corners"] = high["non_active_corners"] = nonactive
        low["vceo_needed"] = high["vceo_needed"] = np.full(nonactive.shape,
                                                           job.supply.max_ce_voltage)
        limits = stage_limits(job, stage, spec, ratings)
        margins = evaluate_limits(limits, low, high)
        ok = np.ones(nonactive.shape, dtype=bool)
        for name, mg in margins.items():
            ok &= mg >= 0
            out.setdefault(f"m_{name}", []).append(mg)
        out.setdefault("ok", []).append(ok)
        out.setdefault("ic_min", []).append(low["ic"])
        out.setdefault("ic_max", []).append(high["ic"])
        out.setdefault("vce_min", []).append(low["vce"])
    return {k: np.concatenate(v) if v else np.zeros(0) for k, v in out.items()}

