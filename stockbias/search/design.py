"""`design`: ranked designs from stock that meet every worst-case limit (DESIGN §2).

Data flow
    stock + job → candidate tables per role (:mod:`.candidates`) → for every network
    and transistor, the IC-setting roles that can keep IC in the window
    (:func:`.prepass.enumerate_cores`, ``searchsorted`` intervals, never the full cross
    product) → best-first over those *cores* in the order of a lexicographic lower
    bound of the objectives: the free role's admissible set (:func:`.prepass.
    free_role_bounds`), exact objective keys, every limit at every vertex
    (:func:`.prepass.vertex_check`), re-verification of the best designs with
    :func:`stockbias.analysis.check.analyze_stage` (the path ``check`` uses) → an
    upper bound κ on the K-th best key → stop when the next core's lower bound exceeds κ
    (proof that no unseen design ranks in the top K) → CP-SAT (:mod:`.model`,
    :mod:`.solve`) picks the lexicographic top K from what is left, with the stock and
    BOM constraints → every pick re-verified before it is shown.

Bounded memory
    The rows of the enumerated roles (R1 × R2, RB × RE, RB) are never built whole: a
    *unit* is one network, one range of the first enumerated role's candidates (at most
    ``row_budget`` rows, :func:`.prepass.row_slices`) and one transistor.  Units are
    built in that order and only their rows with a non-empty cut and a lower-bound key
    ≤ κ are kept; the kept rows are searched best-first in *groups* of at most
    ``GROUP_FACTOR × row_budget`` rows, then dropped.  κ only falls, so a row skipped
    against the κ of its moment could never rank in the top K: any budget gives the
    same designs (tested).

Time limit
    One :class:`.deadline.Deadline` covers the command.  The row scan and the
    best-first search stop at 90 % of it (checked between units, chunks and batches);
    CP-SAT ranks and re-verifies what was found in the rest.  A run stopped early is
    ``feasible`` (designs found) or ``unknown`` (none), never ``optimal`` or
    ``infeasible``, and ``stats["prepass_cut"]`` (also in ``assumptions``) says which
    part of the row order was searched (:mod:`.scan_coverage`).

What is proven
    Rejections are exact at a vertex (see :mod:`.prepass`); lower bounds are
    componentwise lower bounds of the objective vector (so lexicographic lower bounds);
    κ comes from re-verified, stock-feasible designs only; hence ``optimal`` means no
    design the search did not return ranks above the returned ones.

Alternatives, not variants
    The top K are K distinct bias networks (:mod:`.alternatives`): κ is the key at which
    the K-th distinct network is first met, CP-SAT ranks one design per network (the
    network's best variant that passes the full check), and each ranked network gives
    the range of the values of its free role (RC) that work with it (every such value
    with ``verify_variants``; :mod:`.alternatives`).  ``optimal`` then means: no
    network the search did not return has a variant that ranks above the best variant
    of a returned one.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable

import numpy as np

from ..analysis.check import CheckResult, collect_assumptions
from ..job import Job
from ..parts import Inventory
from ..topologies import get_network
from .alternatives import design_variants, rank_networks
from .candidates import (
    SINGLE,
    Shelf,
    build_shelf,
    micro,
    stage_networks,
    usable_transistors,
)
from .deadline import Deadline
from .design_pool import PoolChecks, _Pool
from .design_result import Design, DesignResult
from .model import ModelDesign
from .prepass import (
    PLANS,
    ROW_BUDGET,
    attribute_levels,
    corners,
    free_role_bounds,
    free_role_keep,
    free_role_range,
    ie_terms,
    rc_allowed_power,
)
from .ranking import BIG as _BIG
from .ranking import count_distinct as _count_distinct
from .ranking import lex_le as _lex_le
from .ranking import margin_ppm, objective_key
from .ranking import range_query as _range
from .ranking import sparse_table as _sparse
from .row_scan import GROUP_FACTOR, RowScan
from .row_scan import Block as _Block
from .scan_coverage import Coverage

__all__ = ["Design", "DesignResult", "design", "objective_key"]

_REL = 1e-12

Progress = Callable[[str, float], None]


class _Search(PoolChecks, RowScan):
    def __init__(self, job: Job, inventory: Inventory, top: int, deadline: Deadline,
                 progress: Progress | None, row_budget: int = ROW_BUDGET,
                 shelf: Shelf | None = None, pairs: bool | None = None,
                 checks: dict[tuple, CheckResult] | None = None):
        self.job, self.inv, self.top, self.deadline = job, inventory, top, deadline
        #: rows built at once (one unit), and rows held at once (one group)
        self.row_budget, self.group_rows = int(row_budget), GROUP_FACTOR * int(row_budget)
        self.progress = progress
        self.stage = job.stage
        self.objectives = tuple(job.search.objectives)
        self.shelf: Shelf = build_shelf(job, inventory) if shelf is None else shelf
        self.pairs = (job.build.allow_pairs if pairs is None else pairs) \
            and self.shelf.with_pairs is not None
        self.transistors, self.excluded = usable_transistors(job, inventory)
        topo = self.stage.topology
        self.networks = stage_networks(job, topo)
        self.blocks: list[_Block] = []
        self.pool = _Pool()
        self.verified: dict[tuple, CheckResult | None] = {}
        #: full checks by (network, transistor, each role's arrangement and lines), shared
        #: with another search over the same shelf
        self.checks: dict[tuple, CheckResult] = {} if checks is None else checks
        self.rejected_on_verification = 0
        self._cache: dict[tuple, object] = {}
        self._qty: dict[str, int] | None = None
        #: per pool design (a pool entry never changes): its network and whether the stock
        #: holds a build of it, worked out once
        self._network_of: dict[int, tuple] = {}
        self._stock_ok: dict[int, bool] = {}
        self.pair_roles_limited: list[str] = []
        #: the complete search over single parts that seeded this one (pairs on)
        self.single_search: _Search | None = None
        self.timed_out = False
        self.coverage = Coverage(len(self.transistors))
        #: the longest full check so far, s (a cut run starts no check it cannot finish)
        self.verify_s = 0.0
        #: the longest vertex check per design so far, s (batches sized to the time left)
        self.vertex_s = 0.0
        #: networks a cut run left unchecked for want of time (after the search)
        self.unverified_networks = 0
        self._seen = self._mark = 0.0     # fractions of the row order loaded / searched
        self.stats: dict[str, int] = {"cores": 0, "designs_vertex_checked": 0,
                                      "designs_kept": 0, "verified": 0, "row_units": 0,
                                      "row_groups": 0}

    def row_bounds(self, b: _Block) -> tuple[np.ndarray, np.ndarray]:
        """(row ids with any core, LB key per row): a componentwise lower bound of every
        design the row can lead to (so a lexicographic lower bound)."""
        t = self.stage.target
        if b.exact:
            sel = np.arange(b.n_rows)
            return sel, self._keys(b, b.idx, b.core_roles, b.ic_lo, b.ic_hi, lower=True)
        rows = b.rows
        plan = PLANS[b.network]
        sel = np.flatnonzero(rows.i1 > rows.i0)
        i0, i1 = rows.i0[sel], rows.i1[sel]
        xc = b.cands[plan.interval]
        tabs = self._tables(b, int(np.max(i1 - i0)) if sel.size else 1)
        cost = np.full(sel.size, micro(b.transistor.unit_cost), dtype=np.int64)
        parts = np.ones(sel.size, dtype=np.int64)
        vals, lines = [], []
        for r in plan.enumerated:
            c, i = b.cands[r], rows.grid[r][sel]
            cost += c.cost[i]
            parts += c.parts[i]
            vals += [c.value_a[i], c.value_b[i]]
            lines += [c.line_a[i], c.line_b[i]]
        cost += _range(tabs["cost"], i0, i1, np.minimum, 0)
        parts += _range(tabs["parts"], i0, i1, np.minimum, 0)
        if b.free is not None:
            fc = b.cands[b.free]
            cost += int(fc.cost.min())
            parts += int(fc.parts.min())
        distinct = _count_distinct(vals)
        if not self.pairs:
            # the design adds a value unless the interval role (or the free role) can repeat
            # one; the interval role can only repeat one in its cut, which we test exactly
            match = np.zeros(sel.size, dtype=bool)
            pos0 = np.searchsorted(xc.value, self.shelf.values, "left")
            pos1 = np.searchsorted(xc.value, self.shelf.values, "right")
            for v in vals[::2]:
                has = v >= 0
                vv = np.where(has, v, 0)
                match |= has & (np.maximum(i0, pos0[vv]) < np.minimum(i1, pos1[vv]))
            absent = xc.arrangement[i0] < 0
            distinct = distinct + (~match & ~absent)
        bom = _count_distinct(lines) + 1
        hi_x = _range(tabs["low_max"], i0, i1, np.maximum, 0.0)
        lo_x = _range(tabs["high_min"], i0, i1, np.minimum, np.inf)
        ic_hi = rows.ic_hi_at(sel, hi_x)
        ic_lo = rows.ic_lo_at(sel, lo_x)
        mppm = margin_ppm(ic_lo, ic_hi, t.ic_min, t.ic_max, t.ic)
        return sel, objective_key(self.objectives, cost, parts, distinct, bom, mppm)

    def _tables(self, b: _Block, longest: int) -> dict[str, np.ndarray]:
        """Range-min/max tables of the interval role's columns, with the levels that
        ranges of up to ``longest`` candidates need (rebuilt deeper when a later unit
        asks for longer ranges; with pairs the table has 10^5 candidates and the ranges a
        few thousand, so the upper levels are never built)."""
        key = (b.network, "tables")
        got = self._cache.get(key)
        if got is None or got[0] < longest:
            xc = b.cands[PLANS[b.network].interval]
            depth = 1 << max(int(longest) - 1, 1).bit_length()   # a power of two ≥ longest
            self._cache[key] = got = (depth, {
                "cost": _sparse(xc.cost, np.minimum, depth),
                "parts": _sparse(xc.parts, np.minimum, depth),
                "low_max": _sparse(xc.low, np.maximum, depth),
                "high_min": _sparse(xc.high, np.minimum, depth)})
        return got[1]

    def _keys(self, b: _Block, idx: dict[str, np.ndarray], roles: tuple[str, ...],
              ic_lo: np.ndarray, ic_hi: np.ndarray, lower: bool = False) -> np.ndarray:
        t = self.stage.target
        n = ic_lo.size
        cost = np.full(n, micro(b.transistor.unit_cost), dtype=np.int64)
        parts = np.ones(n, dtype=np.int64)
        vals, lines = [], []
        for r in roles:
            c, i = b.cands[r], idx[r]
            cost += c.cost[i]
            parts += c.parts[i]
            vals += [c.value_a[i], c.value_b[i]]
            lines += [c.line_a[i], c.line_b[i]]
        mppm = margin_ppm(ic_lo, ic_hi, t.ic_min, t.ic_max, t.ic)
        return objective_key(self.objectives, cost, parts, _count_distinct(vals),
                             _count_distinct(lines) + 1, mppm)

    # --- expansion of a chunk of cores into full designs ---------------------------
    def expand(self, b: _Block, sel: np.ndarray, kappa: np.ndarray) -> None:
        """Rows → cores → full designs with exact keys ≤ κ that pass every vertex."""
        x_attr = x_limit = x_levels = None
        first = self.objectives[0]
        if not b.exact and first in ("cost", "part_count") and kappa[0] < _BIG:
            # the first objective is a sum over roles: what is left of κ for the interval role
            col = "cost" if first == "cost" else "parts"
            plan = PLANS[b.network]
            fixed = np.full(sel.size, micro(b.transistor.unit_cost) if col == "cost" else 1,
                            dtype=np.int64)
            for r in plan.enumerated:
                fixed += getattr(b.cands[r], col)[b.rows.grid[r][sel]]
            if b.free is not None:
                fixed += int(getattr(b.cands[b.free], col).min())
            x_attr = getattr(b.cands[plan.interval], col)
            x_limit = kappa[0] - fixed
            key = (b.network, "interval_levels", col, id(b.cands[plan.interval]))
            if key not in self._cache:
                self._cache[key] = attribute_levels(x_attr)
            x_levels = self._cache[key]
        idx, ic_hi, ic_lo = b.cores(sel, x_attr, x_limit, x_levels)
        self.stats["cores"] += int(ic_hi.size)
        if ic_hi.size == 0:
            return
        if b.network == "divider" and not b.exact and self.job.search.model == "constant_vbe":
            ok = self._divider_power_ok(b, idx)
            idx = {r: v[ok] for r, v in idx.items()}
            ic_hi, ic_lo = ic_hi[ok], ic_lo[ok]
        if not b.exact:
            lb = self._keys(b, idx, b.core_roles, ic_lo, ic_hi)
            if b.free is not None:
                fc = b.cands[b.free]
                j = [self.objectives.index(o) for o in ("cost", "part_count")
                     if o in self.objectives]
                add = {"cost": int(fc.cost.min()), "part_count": int(fc.parts.min())}
                for o, col in zip([o for o in ("cost", "part_count") if o in self.objectives],
                                  j, strict=True):
                    lb[:, col] += add[o]
            ok = _lex_le(lb, kappa)
            idx = {r: v[ok] for r, v in idx.items()}
            ic_hi, ic_lo = ic_hi[ok], ic_lo[ok]
        if b.free is None:
            self._finish(b, idx, ic_hi, ic_lo, kappa, None)
            return
        fc = b.cands[b.free]
        h, low_need, ic_top = free_role_bounds(self.job, self.stage, b.network,
                                               b.transistor, b.cands, idx)
        j0, j1 = free_role_range(fc, h, low_need)
        first_col = {"cost": "cost", "part_count": "parts"}.get(first)
        levels = self._free_levels(b, first_col) if first_col is not None else None
        if levels is None:
            levels = [(None, None)]
            core_attr = None
        else:
            core_attr = np.full(ic_hi.size, micro(b.transistor.unit_cost)
                                if first_col == "cost" else 1, dtype=np.int64)
            for r in b.core_roles:
                core_attr += getattr(b.cands[r], first_col)[idx[r]]
        # free-role candidates level by level of the first objective (cheapest first), so
        # a bound found on a cheap level cuts the dearer ones before they are expanded
        for level, ind in levels:
            if ind is None:
                p0, counts = j0, np.maximum(j1 - j0, 0)
            else:
                p0 = np.searchsorted(ind, j0, "left")
                counts = np.maximum(np.searchsorted(ind, j1, "left") - p0, 0)
                if kappa[0] < _BIG:
                    counts = np.where(core_attr + level <= kappa[0], counts, 0)
            if not counts.any():
                continue
            # bounded memory: slices of cores with at most ~1M free-role candidates in all
            edges = np.searchsorted(np.cumsum(counts),
                                    np.arange(1, 1 + int(counts.sum()) // 1_000_000) * 1_000_000)
            start = 0
            for stop in [*edges.tolist(), counts.size]:
                stop = max(stop, start + 1)
                sl = slice(start, min(stop, counts.size))
                if sl.start >= counts.size:
                    break
                if self.deadline.expired():
                    self.timed_out = True       # this chunk of rows is not finished
                    return
                c = counts[sl]
                total = int(c.sum())
                start = sl.stop
                if total == 0:
                    continue
                row = np.repeat(np.arange(c.size), c)
                pos = np.repeat(p0[sl], c) + np.arange(total) - np.repeat(np.cumsum(c) - c, c)
                fj = pos if ind is None else ind[pos]
                self._finish(b, {r: v[sl] for r, v in idx.items()}, ic_hi[sl], ic_lo[sl],
                             kappa, (h[sl], low_need[sl], ic_top[sl], row, fj))
            if ind is not None:
                kappa = self._tighter(kappa)

    def _tighter(self, kappa: np.ndarray) -> np.ndarray:
        """κ after the designs pooled so far (never looser than the one passed)."""
        new = self.kappa()
        return new if _lex_le(new[None, :], kappa)[0] else kappa

    def _free_levels(self, b: _Block, col: str) -> list[tuple[int, np.ndarray]] | None:
        """The free role's candidates grouped by their first-objective value (ascending),
        each group's indices ascending (so sorted by value); None when there are many."""
        key = (b.network, "free_levels", col)
        if key not in self._cache:
            self._cache[key] = attribute_levels(getattr(b.cands[b.free], col))
        return self._cache[key]

    def _divider_power_ok(self, b: _Block, idx: dict[str, np.ndarray]) -> np.ndarray:
        """R1 and R2 dissipation at one vertex (VCC max, R1 low, R2 high, RE low, the
        IC-max device corner), active closed form: exceeding the allowed power there is a
        proof of failure (or the vertex is not active, which fails too)."""
        cn = corners(self.job, b.transistor, "divider")
        c = b.cands
        r1, r2 = c["R1"].low[idx["R1"]], c["R2"].high[idx["R2"]]
        re = c["RE"].low[idx["RE"]]
        n_, d0 = ie_terms("divider", {"R1": r1, "R2": r2}, cn.vcc_hi, 0.0, cn.beta_hi,
                          cn.vbe_hi, cn.icbo_hi)
        vb = n_ / (d0 + re) * re + cn.vbe_hi
        p1 = (cn.vcc_hi - vb) ** 2 / r1
        p2 = vb ** 2 / r2
        a1 = rc_allowed_power(self.job, self.stage, c["R1"].rating[idx["R1"]])
        a2 = rc_allowed_power(self.job, self.stage, c["R2"].rating[idx["R2"]])
        return (p1 <= a1 * (1 + 1e-9)) & (p2 <= a2 * (1 + 1e-9))

    def _finish(self, b: _Block, idx, ic_hi, ic_lo, kappa, free) -> None:
        """Cores (with the free role's cut) → designs with exact keys ≤ κ into the pool."""
        t = self.stage.target
        if free is not None:
            fc = b.cands[b.free]
            h, low_need, ic_top, row, fj = free
            keep = free_role_keep(self.job, self.stage, fc, row, fj, h, low_need, ic_top)
            row, fj = row[keep], fj[keep]
            idx = {r: v[row] for r, v in idx.items()}
            idx[b.free] = fj
            ic_hi, ic_lo = ic_hi[row], ic_lo[row]
        roles = (*b.core_roles, *((b.free,) if b.free else ()))
        n = ic_hi.size
        if n == 0:
            return
        cost = np.full(n, micro(b.transistor.unit_cost), dtype=np.int64)
        parts = np.ones(n, dtype=np.int64)
        vals, lines = [], []
        for r in roles:
            c, i = b.cands[r], idx[r]
            cost += c.cost[i]
            parts += c.parts[i]
            vals += [c.value_a[i], c.value_b[i]]
            lines += [c.line_a[i], c.line_b[i]]
        distinct = _count_distinct(vals)
        bom = _count_distinct(lines) + 1
        mppm = margin_ppm(ic_lo, ic_hi, t.ic_min, t.ic_max, t.ic)
        key = objective_key(self.objectives, cost, parts, distinct, bom, mppm)
        keep = _lex_le(key, kappa)
        k_block = b.k
        picks = np.flatnonzero(keep)
        if picks.size > 256 and not np.all(kappa < _BIG):
            # no bound yet: pool the best few in growing batches, bound from them
            # (re-verified), and filter the rest as soon as a bound exists
            order = picks[np.lexsort(key[picks].T[::-1])]
            step, pos = 64, 0
            while pos < order.size and not np.all(kappa < _BIG):
                self._pool_add(b, k_block, roles, idx, key, mppm, order[pos:pos + step])
                pos += step
                step *= 4
                kappa = self.kappa()
                if self.deadline.expired():
                    self.timed_out = True
                    return
            rest = order[pos:]
            picks = rest[_lex_le(key[rest], kappa)]
        self._pool_add(b, k_block, roles, idx, key, mppm, picks)

    def _pool_add(self, b, k_block, roles, idx, key, mppm, picks) -> None:
        for i in picks:
            self.pool.block.append(k_block)
            self.pool.roles.append({r: int(idx[r][i]) for r in roles})
            self.pool.keys.append(key[i].copy())
            self.pool.margin.append(float(mppm[i]) / 1e6)
            self.pool.status.append(1 if b.exact else 0)
        self.stats["designs_kept"] += len(picks)


def design(job: Job, inventory: Inventory, *, top: int | None = None,
           time_limit_s: float | None = None, progress: Progress | None = None,
           _explain: bool = True, deadline: Deadline | None = None,
           row_budget: int = ROW_BUDGET, verify_variants: bool = False) -> DesignResult:
    """Ranked designs for a one-stage job from the stock (DESIGN §2, §3).

    Parameters
    ----------
    job : Job
        One stage; its topology (or ``"any"``), model, objectives, build quantity.
    inventory : Inventory
    top : int, optional
        How many designs (default: the job's ``top``).
    time_limit_s : float, optional
        Wall-clock limit for the whole search, s (default: the job's): candidate tables,
        pre-pass, dominance, CP-SAT and re-verification.  A run it cuts short returns
        the designs verified so far as ``feasible`` (``unknown`` when there are none)
        and says in ``assumptions`` and ``stats["prepass_cut"]`` what was left unsearched.
    progress : callable(stage: str, fraction: float), optional
    deadline : Deadline, optional
        Use this deadline instead of one made from ``time_limit_s`` (a caller searching
        several jobs under one limit, or a test with an injected clock).
    row_budget : int, optional
        Most rows of the enumerated roles built at once, and held at once; any value
        gives the same designs (memory and speed change).
    verify_variants : bool, optional
        Re-verify every variant of each ranked network with the full check (by default
        only the network's representative is; the others pass at every vertex).

    Returns
    -------
    DesignResult
    """
    if job.is_board:
        from .board import design_board

        return design_board(job, inventory, top=top, time_limit_s=time_limit_s,
                            progress=progress, deadline=deadline)  # type: ignore[return-value]
    t0 = time.monotonic()
    top = job.search.top if top is None else int(top)
    if deadline is None:
        limit = job.search.time_limit_s if time_limit_s is None else float(time_limit_s)
        deadline = Deadline(limit)
    # the search leaves a tenth of the limit to rank, re-verify and explain what it found
    s = _Search(job, inventory, top, deadline.share(0.9), progress, row_budget)
    seed = _single_part_bound(s, inventory, top, deadline, row_budget)
    floor = _pair_floor(s) if seed is not None and s.single_search is not None else None
    pair_search, free_tables = s, None
    if floor is not None and floor > int(seed[0]):
        # no design holding a pair can rank: the single-part search is the whole answer
        # (its free role still listed with pairs)
        s = s.single_search
        s.deadline = pair_search.deadline      # the ranking's share, not the seed's
        done, bound = "complete", {}
        free_tables = {n: pair_search.shelf.candidates(
            get_network(n).role(PLANS[n].free).optional, True)
            for n in s.networks if PLANS[n].free is not None}
    else:
        floor = None
        done, bound = s.run(seed)
    pool_keys = np.stack(s.pool.keys) if s.pool.keys else np.zeros((0, len(s.objectives)))
    kappa = s.kappa()
    if len(pool_keys):
        # designs strictly better than κ must all be offered; of those tied with κ, the
        # re-verified ones already make up the top K (ties rank in any fixed order)
        # (per network only its best design that passes the full check can rank: the
        # others are variants, listed with it)
        below = _lex_le(pool_keys, kappa) & ~np.all(pool_keys == kappa, axis=1)
        tied = np.all(pool_keys == kappa, axis=1) & np.array(
            [s.verified.get((s.pool.block[k], tuple(sorted(s.pool.roles[k].items()))))
             is not None for k in range(len(s.pool.keys))])
        if not np.all(kappa < _BIG):
            tied = _lex_le(pool_keys, kappa)
        # a search that ended with κ not yet bounded (fewer than K networks found, or
        # the time limit) has no bound on how many networks its pool holds: their checks
        # keep to the command's deadline and stop at K
        proven_kappa = done == "complete" and bool(np.all(kappa < _BIG))
        keep = s.representatives(np.flatnonzero(below | tied), kappa,
                                 None if proven_kappa else deadline)
    else:
        keep = np.zeros(0, dtype=np.int64)
    mdesigns: list[ModelDesign] = []
    cand_ids: dict[tuple[str, tuple], int] = {}
    topo_ids = {n: i for i, n in enumerate(s.networks)}
    for k in keep:
        b = s.blocks[s.pool.block[k]]
        roles, pieces, values, rcost = {}, {}, {}, {}
        for role, i in s.pool.roles[k].items():
            c = b.cands[role]
            if c.arrangement[i] < 0:
                continue
            ident = (int(c.arrangement[i]), int(c.line_a[i]), int(c.line_b[i]))
            cid = cand_ids.setdefault((role, ident), 1 + sum(1 for x in cand_ids if x[0] == role))
            roles[role] = cid
            pieces[role] = tuple(x for x in (int(c.line_a[i]), int(c.line_b[i])) if x >= 0)
            values[role] = tuple(x for x in (int(c.value_a[i]), int(c.value_b[i])) if x >= 0)
            rcost[role] = int(c.cost[i])
        mdesigns.append(ModelDesign(topo_ids[b.network], b.q_index, roles, pieces, values,
                                    round(s.pool.margin[k] * 1e6),
                                    micro(b.transistor.unit_cost), rcost))
    line_qty = [r.qty for r in s.shelf.lines]

    def accept(i: int) -> bool:
        return s.verify(int(keep[i])) is not None

    # CP-SAT gets what is left of the limit (half a second at least, to rank what was found)
    # one design per network: accepting a design forbids its network's other variants
    groups = [s.network(int(k)) for k in keep]
    ranked, status, _rej = rank_networks(mdesigns, groups, s.objectives, line_qty,
                                         job.build.quantity, top, job.search.seed,
                                         max(deadline.monotonic_at(), time.monotonic() + 0.5),
                                         accept)
    if (done != "complete" or s.unverified_networks) and status == "optimal":
        status = "feasible"
    if done != "complete" and status == "infeasible":
        status = "unknown"
    designs: list[Design] = []
    for rank, r in enumerate(ranked, start=1):
        k = int(keep[r.design])
        res = s.verify(k)
        assert res is not None
        b = s.blocks[s.pool.block[k]]
        parts = res.parts
        vals = {part.value_ohm for p in parts.values() for part in p.parts}
        lines = {part.part_id for p in parts.values() for part in p.parts}
        cost = b.transistor.unit_cost + sum(p.unit_cost for p in parts.values())
        free_role, variants, at_most = design_variants(
            s, k, verify_variants, deadline,
            None if free_tables is None else free_tables.get(b.network))
        designs.append(Design(
            rank=rank, topology=b.network, transistor=b.transistor, check=res,
            free_role=free_role, variants=variants, variants_at_most=at_most,
            cost=cost, cost_micro=micro(b.transistor.unit_cost)
            + sum(micro(part.unit_cost) for p in parts.values() for part in p.parts),
            part_count=1 + sum(len(p.parts) for p in parts.values()),
            distinct_values=len(vals), bom_lines=len(lines) + 1, ic_margin=s.pool.margin[k]))
    elapsed = time.monotonic() - t0
    stats = dict(s.stats)
    if floor is not None:
        stats["single_part_bound"] = 1
    stats.update({"networks": s.networks, "transistors": [q.part_id for q in s.transistors],
                  "resistor_lines": len(s.shelf.lines),
                  "candidates_per_role": len(s.shelf.with_pairs if pair_search.pairs
                                             else s.shelf.single),
                  "model_designs": len(mdesigns),
                  "rejected_on_verification": s.rejected_on_verification})
    result = DesignResult(status=status, solve_seconds=elapsed, designs=designs,
                          objectives=s.objectives, bound=bound, stats=stats,
                          excluded_transistors=[{"part_id": q.part_id, "reason": why}
                                                for q, why in s.excluded])
    result.assumptions = _assumptions(job, designs)
    stats["pairs_ruled_out_by_bound"] = floor is not None
    if floor is not None:
        first = s.objectives[0]
        unit = (lambda x: f"{x / 1e6:g} per board") if first == "cost" else (
            lambda x: f"{x} parts")
        k = s.top
        nth = f"{k}{'th' if 10 <= k % 100 <= 20 else {1: 'st', 2: 'nd', 3: 'rd'}.get(k % 10, 'th')}"
        result.assumptions.append(
            f"pairs: every design with a series or parallel pair has {first} at least "
            f"{unit(floor)}, above the {nth} best single-part network's "
            f"{unit(int(seed[0]))}, so none can rank: the ranking is that of single parts "
            f"(the free role's ranges include pairs) and the status holds for every design "
            "with pairs")
    for net_name in s.pair_roles_limited:
        plan = PLANS[net_name]
        result.assumptions.append(
            f"{net_name}: the shelf is too large to cross pairs in {', '.join(plan.enumerated)}; "
            f"pairs were searched for {', '.join(r for r in (plan.interval, plan.free) if r)} "
            "only, and the status holds for that set of designs")
    if designs and deadline.hit and any(d.free_role for d in designs):
        result.assumptions.append(
            "the time limit cut the listing of the free role's working values: each "
            "network's range covers the values checked before it, in value order")
    stats["pairs_limited_to_cut_roles"] = s.pair_roles_limited
    stats["prepass_cut"] = None
    if done != "complete":
        stats["prepass_cut"] = s.coverage.message(s.networks)
        result.assumptions.append(stats["prepass_cut"])
    if s.unverified_networks:
        result.assumptions.append(
            f"the time limit ended the full checks after the search: "
            f"{s.unverified_networks:,} more networks that pass at every vertex were "
            "not checked, so fewer designs are shown than asked for")
    stats["unverified_networks"] = s.unverified_networks
    if not designs and _explain:
        from .explain import explain

        # an infeasible verdict is explained within what is left of the time limit
        result.explanation = explain(job, inventory, s, status,
                                     budget_s=deadline.remaining())
        result.solve_seconds = time.monotonic() - t0
    return result


def _single_part_bound(s: _Search, inventory: Inventory, top: int, deadline: Deadline,
                       row_budget: int) -> np.ndarray | None:
    """With pairs on, κ of the same search over single parts: the key of its K-th best
    re-verified, stock-feasible network (``None`` without pairs or when it found fewer
    than K networks).

    Every single-part design is also a design of the search with pairs (a single line
    is one of its candidates), so this κ bounds the K-th best network of the larger set
    from above: the search with pairs may start from it instead of from ∞.  It is what
    keeps pairs cheap: with a finite κ on cost or part count, the interval role (RE) is
    cut to the candidates κ leaves room for before any core is built, where the search
    from ∞ first expands millions of (R1, R2, RE-pair) cores of the rows whose lower
    bounds come first.  The single-part search gets at most 40 % of the limit.
    """
    if not s.pairs:
        return None
    first = _Search(s.job, inventory, top, deadline.share(0.4), None, row_budget,
                    shelf=s.shelf, pairs=False, checks=s.checks)
    first_done, _ = first.run()
    kappa = first.kappa()
    # kept for the caller: a complete search over single parts can be the whole answer
    s.single_search = first if first_done == "complete" else None
    for name in ("cores", "designs_vertex_checked", "verified"):
        s.stats[name] += first.stats[name]           # the work of both searches
    found = bool(np.all(kappa < _BIG))
    s.stats["single_part_bound"] = int(found)      # 1: the search with pairs started from it
    return kappa if found else None


def _pair_floor(s: _Search) -> int | None:
    """With cost or part count as the first objective, a lower bound on it over every
    design that holds a series or parallel pair in any role (None otherwise).

    A design is a transistor and one candidate per role; its cost (part count) is the
    sum of theirs.  With m_r the least over role r's single parts (0 for an optional
    role, which may be absent) and p the least over every pair, a design with a pair in
    role j has at least q + Σ m_r + (p − m_j), q the least over the usable transistors
    (1 part each).  Proven for every network of the stage; the caller compares it with
    the first component of κ from the single parts: above it (strictly), no design with
    a pair can rank in the top K, whatever the roles the search with pairs would cross.
    """
    col = {"cost": "cost", "part_count": "parts"}.get(s.objectives[0])
    wp = s.shelf.with_pairs
    if col is None or wp is None or not s.transistors or not len(s.shelf.single):
        return None
    paired = getattr(wp, col)[wp.arrangement > SINGLE]
    if paired.size == 0:
        return None
    m, p = int(getattr(s.shelf.single, col).min()), int(paired.min())
    q = min(micro(t.unit_cost) for t in s.transistors) if col == "cost" else 1
    floors = []
    for net in s.networks:
        mins = [0 if r.optional else m for r in get_network(net).roles]
        floors.append(q + sum(mins) + min(p - x for x in mins))
    return min(floors)


def _assumptions(job: Job, designs: list[Design]) -> list[str]:
    out = collect_assumptions(d.check for d in designs)
    if job.stage.target.yield_min is not None:
        out.append("the search requires every worst-case corner to pass, which implies the "
                   "yield target; designs that meet the yield only statistically are not "
                   "searched")
    out.append("ic_margin is compared in steps of 1 ppm of the target current")
    return out


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None
