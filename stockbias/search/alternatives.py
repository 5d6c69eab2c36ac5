"""Alternatives, not variants: the ranked designs are distinct bias networks.

A *network* is the transistor and the resistors that set the collector current: every
role except the free one of :data:`.prepass.PLANS` (divider: R1, R2, RE; dual_supply and
fixed_base: RB, RE; collector_feedback has no free role, since RC carries IE there and
sets IC, so every role belongs to its network).  The values the free role (RC) can take
under one network are its *variants*: the network's row lists them as a range, the best
variant (by the job's objectives) stands for the network.

What is proven
    The top K are the K networks whose best variant ranks highest by the lexicographic
    objective; a network's rank is that of its best variant that passes the full check
    (``analyze_stage``) and fits the stock.  The search bound κ is the key of the design
    at which the K-th distinct network is first met in key order, so a row whose lower
    bound exceeds κ can hold no network ranked in the top K (its every variant is worse
    than K networks already verified).  A variant of a network is a free-role candidate
    on the shelf that, with that network, passes every limit at every vertex of the
    tolerance box and fits the stock.  With ``verify`` (``--variants``) every variant is
    listed and re-checked by ``analyze_stage`` (which adds the interior maxima of the
    dissipations); without it every variant is listed when the screened list is short
    (:data:`FULL_LIST`), and otherwise the representative and the two ends of the range:
    the smallest and the largest working value are exact (found by checking in value order
    from each end), the count between them is bounded by the screened candidates there.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from ..analysis.check import analyze_stage as _analyze
from .candidates import micro
from .design_result import VERIFY_SAMPLES, DesignVariant
from .model import ModelDesign
from .prepass import PLANS, free_role_bounds, free_role_keep, free_role_range, vertex_check
from .ranking import count_distinct, margin_ppm, objective_key
from .solve import RankedSolve, fits_stock, pick_one, solve_one

__all__ = ["FULL_LIST", "Variant", "VariantList", "design_variants", "network_key",
           "network_roles", "rank_networks", "variants_of"]


def network_roles(network: str, roles: tuple[str, ...] | list[str]) -> tuple[str, ...]:
    """The roles of ``roles`` that belong to the network (all but the free role)."""
    free = PLANS[network].free
    return tuple(r for r in roles if r != free)


def network_key(network: str, q_index: int, cands, roles: dict[str, int]) -> tuple:
    """Identity of a design's network: its topology, transistor and the stock line(s) of
    every role that sets IC (an absent optional role counts as a choice)."""
    ident = []
    for r in sorted(network_roles(network, list(roles))):
        c, i = cands[r], roles[r]
        ident.append((r, int(c.arrangement[i]), int(c.line_a[i]), int(c.line_b[i])))
    return (network, int(q_index), tuple(ident))


def rank_networks(designs: list[ModelDesign], groups: list[tuple], objectives: tuple[str, ...],
                  line_qty: list[int], build_qty: int, top: int, seed: int, deadline: float,
                  accept) -> tuple[list[RankedSolve], str, int]:
    """Up to ``top`` designs of distinct networks, in lexicographic order.

    CP-SAT picks the best design not forbidden (directly, without the solver, when every
    design fits the stock on its own: :func:`.solve.pick_one`); ``accept(index)``
    re-verifies it.  A
    rejected design is forbidden alone (another variant of its network may still pass); an
    accepted one forbids its whole network, so the next solve picks the best variant of
    another network.  Returns (ranked, status, rejected count); status is ``optimal``,
    ``feasible``, ``infeasible`` or ``unknown``.
    """
    members: dict[tuple, list[int]] = {}
    for i, g in enumerate(groups):
        members.setdefault(g, []).append(i)
    ranked: list[RankedSolve] = []
    forbidden: set[int] = set()
    rejected = 0
    proven = True
    if not designs:
        return [], "infeasible", 0
    # every design fitting the stock on its own, no stock quantity can bind: the best
    # design is a lexicographic minimum over the list, taken without a solver
    direct = all(fits_stock(x, line_qty, build_qty) for x in designs)
    while len(ranked) < top and len(forbidden) < len(designs):
        got = (pick_one(designs, objectives, line_qty, build_qty, forbidden) if direct else
               solve_one(designs, objectives, line_qty, build_qty, forbidden, seed, deadline))
        if got == "infeasible":
            break
        if got == "unknown":
            proven = False
            break
        assert isinstance(got, RankedSolve)
        if accept is not None and not accept(got.design):
            forbidden.add(got.design)
            rejected += 1
            continue
        forbidden.update(members[groups[got.design]])
        ranked.append(got)
        proven &= got.proven
        if time.monotonic() > deadline:
            proven = proven and len(ranked) >= top
            break
    if not ranked:
        return [], ("infeasible" if proven else "unknown"), rejected
    return ranked, ("optimal" if proven else "feasible"), rejected


@dataclass(frozen=True)
class Variant:
    """One value of the free role that works with a network.

    ``index``: candidate index in the free role's table; ``key``: the design's objective
    key; ``vce_min``: worst-case VCE over the vertices, V; ``ic_margin``: fraction of the
    target; ``cost_micro``: the whole design's cost per board, integer micro-units.
    """

    index: int
    key: tuple[int, ...]
    vce_min: float
    ic_margin: float
    cost_micro: int


#: a network's screened free-role list is checked whole when it holds at most this many
#: candidates; a longer one (pairs on a large shelf: thousands) is scanned from both ends in
#: value order for the range, unless every variant is asked for (``every``)
FULL_LIST = 64


@dataclass(frozen=True)
class VariantList:
    """What :func:`variants_of` found for one network.

    ``variants``: the variants found, best key first; ``complete``: False when only the
    ends of the range were sought and some candidates between them were not checked (a
    listing cut by the deadline stays True: the caller says so from ``deadline.hit``);
    ``screened``: the nominal values of the
    candidates the necessary-condition screen leaves, ascending (every variant is one of
    them, so those between the range ends bound the count from above).
    """

    role: str | None
    variants: list[Variant]
    complete: bool = True
    screened: np.ndarray = field(default_factory=lambda: np.zeros(0))


def _screened(job, stage, network: str, transistor, cands, core: dict[str, int]) -> np.ndarray:
    """The free role's candidates, ascending, that meet the exact-at-a-vertex bounds of the
    search (:func:`.prepass.free_role_bounds`, either model) with core roles ``core``."""
    fc = cands[PLANS[network].free]
    idx1 = {r: np.array([i], dtype=np.int64) for r, i in core.items()}
    h, low_need, ic_top = free_role_bounds(job, stage, network, transistor, cands, idx1)
    j0, j1 = free_role_range(fc, h, low_need)
    fj = np.arange(int(j0[0]), int(max(j1[0], j0[0])), dtype=np.int64)
    return fj[free_role_keep(job, stage, fc, np.zeros(fj.size, dtype=np.int64), fj, h,
                             low_need, ic_top)]


def _fits(job, shelf, cands, core: dict[str, int], fc, fj: np.ndarray) -> np.ndarray:
    """Which free-role candidates ``fj`` fit the stock with the core: every line's uses over
    the design's roles × the build quantity ≤ its quantity (vectorised)."""
    need = job.build.quantity
    qty = np.array([r.qty for r in shelf.lines], dtype=np.int64)
    uses = np.zeros(qty.size, dtype=np.int64)
    for r, i in core.items():
        for line in (int(cands[r].line_a[i]), int(cands[r].line_b[i])):
            if line >= 0:
                uses[line] += 1
    if np.any(qty < uses * need):
        return np.zeros(fj.size, dtype=bool)   # more uses of a line can only make it worse
    la, lb = fc.line_a[fj], fc.line_b[fj]
    has_a, has_b = la >= 0, lb >= 0
    la0, lb0 = np.where(has_a, la, 0), np.where(has_b, lb, 0)
    same = (has_a & has_b & (la == lb)).astype(np.int64)
    ok = ~has_a | (qty[la0] >= (uses[la0] + 1 + same) * need)
    ok &= ~has_b | (qty[lb0] >= (uses[lb0] + 1 + same) * need)
    return ok


def variants_of(job, stage, shelf, network: str, transistor, cands, core: dict[str, int],
                objectives: tuple[str, ...], deadline=None, every: bool = True) -> VariantList:
    """The free role's variants of the network with core roles ``core``, best key first.

    Every candidate of the free role is screened with the same exact-at-a-vertex bounds the
    search uses (:func:`_screened`) and then checked at every vertex with
    :func:`.prepass.vertex_check`; those that pass and fit the stock (each line's uses ×
    build quantity ≤ its quantity) are the variants.

    ``every`` False and more than :data:`FULL_LIST` screened candidates: only the ends of
    the range are sought, by checking blocks in value order from the low end until one
    holds a variant and then from the high end likewise (exact: every candidate before the
    first variant of each end was checked and failed); ``complete`` is then False unless
    the two scans met.

    ``deadline`` (optional, a :class:`.deadline.Deadline`; none is checked once it has
    expired): the vertex checks run in
    blocks of 512 candidates in value order, and the blocks after the first stop once it
    has expired (only a long list, such as pairs on a large shelf, is ever cut); the
    variants are then those of the blocks checked (``deadline.hit`` tells the caller).
    """
    free = PLANS[network].free
    if free is None or free not in cands:
        return VariantList(None, [])
    fc = cands[free]
    fj = _screened(job, stage, network, transistor, cands, core)
    screened = fc.value[fj]
    if fj.size == 0:
        return VariantList(free, [], True, screened)

    def check(sub: np.ndarray) -> dict[str, np.ndarray]:
        arr = {r: (cands[r], np.full(sub.size, i, dtype=np.int64)) for r, i in core.items()}
        arr[free] = (fc, sub)
        chk = vertex_check(job, stage, network, transistor, arr)
        ok = np.asarray(chk["ok"], dtype=bool) & _fits(job, shelf, cands, core, fc, sub)
        return {"fj": sub[ok], "vce": np.asarray(chk["vce_min"])[ok],
                "lo": np.asarray(chk["ic_min"])[ok], "hi": np.asarray(chk["ic_max"])[ok]}

    def cut() -> bool:
        return deadline is not None and deadline.expired()

    parts: list[dict[str, np.ndarray]] = []
    complete = True
    if every or fj.size <= FULL_LIST:
        block = 512 if deadline is not None else max(fj.size, 1)
        for a in range(0, fj.size, block):
            if cut():
                break       # past the limit, not even the first block: the caller lists
                            # the verified representative alone
            parts.append(check(fj[a:a + block]))
    else:
        # the ends of the range: blocks growing from each end until one holds a variant
        # (none past the limit: a listing the deadline cut is reported by the caller, as
        # the full listing's is, and its count is of the values listed)
        lo_at, hi_at, size, stopped = 0, fj.size, 16, False
        while lo_at < hi_at and not (stopped := cut()):
            got = check(fj[lo_at:min(lo_at + size, hi_at)])
            lo_at = min(lo_at + size, hi_at)
            size *= 2
            if got["fj"].size:
                parts.append(got)
                break
        size = 16
        while parts and lo_at < hi_at and not (stopped := cut()):
            got = check(fj[max(hi_at - size, lo_at):hi_at])
            hi_at = max(hi_at - size, lo_at)
            size *= 2
            if got["fj"].size:
                parts.append(got)
                break
        complete = lo_at >= hi_at or stopped    # the scans met: every candidate checked
    fj = np.concatenate([p["fj"] for p in parts]) if parts else np.zeros(0, dtype=np.int64)
    if fj.size == 0:
        return VariantList(free, [], complete, screened)
    vce = np.concatenate([p["vce"] for p in parts])
    ic_lo = np.concatenate([p["lo"] for p in parts])
    ic_hi = np.concatenate([p["hi"] for p in parts])
    n = fj.size
    cost = np.full(n, micro(transistor.unit_cost), dtype=np.int64) + fc.cost[fj]
    count = np.ones(n, dtype=np.int64) + fc.parts[fj]
    vals = [fc.value_a[fj], fc.value_b[fj]]
    lines = [fc.line_a[fj], fc.line_b[fj]]
    for r, i in core.items():
        c = cands[r]
        cost += c.cost[i]
        count += c.parts[i]
        vals += [np.full(n, c.value_a[i]), np.full(n, c.value_b[i])]
        lines += [np.full(n, c.line_a[i]), np.full(n, c.line_b[i])]
    t = stage.target
    mppm = margin_ppm(ic_lo, ic_hi, t.ic_min, t.ic_max, t.ic)
    key = objective_key(objectives, cost, count, count_distinct(vals),
                        count_distinct(lines) + 1, mppm)
    order = np.lexsort((fc.value[fj], *key.T[::-1]))
    return VariantList(free, [Variant(int(fj[k]), tuple(int(x) for x in key[k]),
                                      float(vce[k]), float(mppm[k]) / 1e6, int(cost[k]))
                              for k in order], complete, screened)


def design_variants(s, k: int, verify: bool, deadline=None, free_table=None
                    ) -> tuple[str | None, tuple[DesignVariant, ...], int | None]:
    """The free role's variants of the network of the search ``s``'s pool design ``k``:
    (free role, variants, ``None`` when the variants are every one, else an upper bound
    on their count) for :class:`.design_result.Design`.

    With ``verify`` every variant is listed and re-checked by ``analyze_stage`` (one that
    fails is left out); without it a long list gives the representative and the two ends
    of the range only (:func:`variants_of` with ``every`` False), and the bound counts
    the screened candidates between the ends.  ``deadline``: see :func:`variants_of` (the
    representative is listed whatever the deadline).  ``free_table`` (optional): the free
    role's candidates to list instead of the search's own (the table with pairs, when the
    ranking came from the search over single parts)."""
    b = s.blocks[s.pool.block[k]]
    roles = s.pool.roles[k]
    free_name = PLANS[b.network].free
    core = {r: i for r, i in roles.items() if r != free_name}
    cands = b.cands
    rep = roles.get(free_name) if free_name is not None else None
    if free_table is not None and free_name is not None and free_name in cands:
        cands = {**b.cands, free_name: free_table}
        if rep is not None:
            # the representative's place in the other table: the same line(s), arrangement
            c0 = b.cands[free_name]
            hit = np.flatnonzero((free_table.arrangement == c0.arrangement[rep])
                                 & (free_table.line_a == c0.line_a[rep])
                                 & (free_table.line_b == c0.line_b[rep]))
            rep = int(hit[0]) if hit.size else None
    listing = variants_of(s.job, s.stage, s.shelf, b.network, b.transistor, cands, core,
                          s.objectives, deadline, every=verify)
    free, found = listing.role, listing.variants
    if free is None:
        return None, (), None
    out = []
    for v in found:
        part = s.shelf.resolved(free, cands[free], v.index)
        if part is None:
            continue
        verified: bool | None = None
        if v.index == rep:
            verified = True
        elif verify:
            if deadline is not None and deadline.expired():
                continue    # no full check past the limit (the listing says it was cut)
            trial = {r: p for r, p in s.resolved(k)[1].items() if r != free}
            trial[free] = part
            samples = VERIFY_SAMPLES if s.stage.target.yield_min is not None else 0
            res = _analyze(s.job, s.stage, trial, b.transistor, samples=samples,
                           seed=s.job.search.seed, topology=b.network)
            verified = bool(res.ok)
            if not verified:
                continue
        out.append(DesignVariant(part=part, representative=v.index == rep, verified=verified,
                                 cost_micro=v.cost_micro, vce_min=v.vce_min,
                                 ic_margin=v.ic_margin))
    if not any(v.representative for v in out) and roles.get(free) is not None:
        # the verified representative always heads its own list (a screen above that is
        # stricter than the full check in some corner case must not hide it)
        res = s.verify(k)
        part = s.shelf.resolved(free, b.cands[free], roles[free])
        if res is not None and part is not None:
            bound = res.worst.bounds.get("vce")
            vce = bound.min if bound is not None else 0.0
            cost = micro(b.transistor.unit_cost) + sum(
                micro(x.unit_cost) for p in res.parts.values() for x in p.parts)
            out.append(DesignVariant(part=part, representative=True, verified=True,
                                     cost_micro=cost, vce_min=float(vce),
                                     ic_margin=s.pool.margin[k]))
    # the representative first (it is a best variant; those tied with it follow in order)
    out.sort(key=lambda v: not v.representative)
    at_most = None
    if not listing.complete and out:
        vals = [v.part.value for v in out]
        lo, hi = min(vals), max(vals)
        scr = listing.screened
        at_most = max(int(np.count_nonzero((scr >= lo * (1 - 1e-12)) & (scr <= hi * (1 + 1e-12)))),
                      len(out))
    return free, tuple(out), at_most
