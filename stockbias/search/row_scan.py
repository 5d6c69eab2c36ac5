"""The design search's row order: units built under a row budget, searched in groups.

A *unit* is one network, one range of its first enumerated role's candidates
(:func:`.prepass.row_slices`) and one transistor; its rows are the assignments of the
enumerated roles with their interval-role cut (:func:`.prepass.row_cuts`).  Units are
built in order; the rows worth keeping (a non-empty cut, a lower-bound key ≤ κ) are
searched best-first in groups of at most ``GROUP_FACTOR × row_budget`` rows, then
dropped, so memory stays bounded on any shelf.  κ (the K-th best re-verified key) only
falls, so a row skipped against the κ of its moment never holds a top-K design: the
grouping changes memory and speed, not the designs.

:class:`RowScan` is the part of the search object that walks this order; the search
itself (:class:`stockbias.search.design._Search`) supplies the lower bounds
(``row_bounds``), the expansion of rows into designs (``expand``) and κ (``kappa``).
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass

import numpy as np

from ..parts import Transistor
from ..topologies import get_network
from .candidates import RoleCandidates
from .prepass import PLANS, Rows, materialise, row_cuts, row_slices
from .ranking import BIG as _BIG
from .ranking import bound_in_units
from .ranking import composite as _composite
from .ranking import lex_le as _lex_le

__all__ = ["GROUP_FACTOR", "PAIR_ROW_LIMIT", "Block", "RowScan"]

#: A group (rows searched best-first together) holds at most this many times the row budget.
GROUP_FACTOR = 4
#: With pairs on, the enumerated roles take pairs only while rows × transistors stay below this.
PAIR_ROW_LIMIT = 20_000_000


@dataclass(eq=False)
class Block:
    """One (network, transistor): candidate tables and the rows of the enumerated roles.

    ``rows`` holds the interval cuts (either model, :func:`.prepass.row_cuts`); cores are
    made per chunk of rows.  ``exact`` blocks (``idx``/``ic_hi``/``ic_lo``: full designs
    already checked at every vertex, one per row) are no longer built by the row scan.
    """

    network: str
    q_index: int
    transistor: Transistor
    cands: dict[str, RoleCandidates]
    core_roles: tuple[str, ...]
    free: str | None
    rows: Rows | None = None
    idx: dict[str, np.ndarray] | None = None
    ic_hi: np.ndarray | None = None
    ic_lo: np.ndarray | None = None
    exact: bool = False
    lb: np.ndarray | None = None
    k: int = -1                      # its index in the search's block list

    def release(self) -> None:
        """Drop the row arrays once the block's group is searched (designs in the pool
        keep only candidate indices)."""
        self.rows = self.idx = self.ic_hi = self.ic_lo = self.lb = None

    @property
    def n_rows(self) -> int:
        return self.rows.size if self.rows is not None else int(self.ic_hi.size)

    def cores(self, sel: np.ndarray, x_attr: np.ndarray | None = None,
              x_limit: np.ndarray | None = None,
              x_levels: list[tuple[int, np.ndarray]] | None = None
              ) -> tuple[dict[str, np.ndarray], np.ndarray, np.ndarray]:
        if self.exact:
            return {r: v[sel] for r, v in self.idx.items()}, self.ic_hi[sel], self.ic_lo[sel]
        c = materialise(self.network, self.transistor, self.cands, self.rows, sel, x_attr,
                        x_limit, x_levels)
        return c.idx, c.ic_hi, c.ic_lo


class RowScan(ABC):
    """The row order of the design search (a base of the search object)."""

    # supplied by the search object
    @abstractmethod
    def row_bounds(self, b: Block) -> tuple[np.ndarray, np.ndarray]:
        """Lower bounds of the objective key of each row of ``b``."""

    @abstractmethod
    def expand(self, b: Block, sel: np.ndarray, kappa: np.ndarray) -> None:
        """Expand the rows ``sel`` of ``b`` into designs, pruned by ``kappa``."""

    @abstractmethod
    def kappa(self) -> np.ndarray:
        """The key of the K-th best verified network so far (the pruning bound)."""

    # --- candidate generation -------------------------------------------------------
    def network_cands(self, net_name: str) -> dict[str, RoleCandidates]:
        """The candidate table of every role of a network (pairs limited on big shelves)."""
        net = get_network(net_name)
        plan = PLANS[net_name]
        cands = {r.name: self.shelf.candidates(r.optional, self.pairs) for r in net.roles}
        if self.pairs:
            rows = int(np.prod([len(cands[r]) for r in plan.enumerated], dtype=np.int64))
            if rows * max(len(self.transistors), 1) > PAIR_ROW_LIMIT:
                # too many rows to cross: pairs only where a role is cut per core
                for r in plan.enumerated:
                    cands[r] = self.shelf.candidates(net.role(r).optional, False)
                self.pair_roles_limited.append(net_name)
        return cands

    def units(self):
        """The row order: (network, candidates, range of the first enumerated role,
        transistor index, transistor), network by network, range by range (each at most
        ``row_budget`` rows), transistor by transistor."""
        nets = [(n, self.network_cands(n)) for n in self.networks]
        per = [len(row_slices(n, c, self.row_budget)) for n, c in nets]
        total = max(1, sum(per) * len(self.transistors))
        for net_name, cands in nets:
            first = PLANS[net_name].enumerated[0]
            self.coverage.start(net_name, first, cands[first].value.tolist())
            spans = row_slices(net_name, cands, self.row_budget)
            for span in spans:
                for qi, q in enumerate(self.transistors):
                    yield net_name, cands, span, qi, q
                    self._seen += 1 / total

    def load(self, net_name: str, cands: dict[str, RoleCandidates], span: tuple[int, int],
             qi: int, q: Transistor, kappa: np.ndarray) -> Block | None:
        """One (network, range, transistor) unit: its rows with a lower-bound key ≤ κ
        (None when there are none).  Rows with an empty cut or a key above κ cannot lead
        to a design ranked in the top K (κ only falls), so they are not kept."""
        self.stats["row_units"] += 1
        plan = PLANS[net_name]
        rows = row_cuts(self.job, self.stage, net_name, q, cands, self._cache, span)
        self.stats["rows"] = self.stats.get("rows", 0) + rows.size
        rows = rows.take(np.flatnonzero(rows.i1 > rows.i0))
        roles = (*plan.enumerated, plan.interval)
        b = Block(net_name, qi, q, cands, roles, plan.free, rows=rows)
        sel, key = self.row_bounds(b)
        keep = np.flatnonzero(_lex_le(key, kappa))
        if keep.size == 0:
            return None
        b.rows, b.lb = rows.take(sel[keep]), key[keep]
        return b

    # --- the whole search ------------------------------------------------------------
    def run(self, kappa: np.ndarray | None = None) -> tuple[str, dict[str, float]]:
        """Scan the rows unit by unit and search them in groups of at most ``group_rows``
        kept rows, best-first inside a group, κ carried from group to group.

        ``kappa``, when given, is a key the K-th best network is known not to exceed
        (the K-th best of a subset of the designs, re-verified); the search starts from
        it instead of from ∞ and never loosens it.

        Exactness: a row is skipped only when its lower-bound key exceeds the κ of that
        moment, and κ (the K-th best re-verified key) never rises, so a skipped row can
        hold no design ranked above the final top K, whatever the grouping.
        """
        m = len(self.objectives)
        if kappa is None:
            kappa = np.full(m, _BIG, dtype=np.int64)
        group: list[int] = []
        held = 0
        for net_name, cands, span, qi, q in self.units():
            if self.deadline.expired():
                return self._cut(group)
            b = self.load(net_name, cands, span, qi, q, kappa)
            if b is not None:
                b.k = len(self.blocks)
                self.blocks.append(b)
                group.append(len(self.blocks) - 1)
                held += b.n_rows
            # a group is searched when it is full, or at once when half the time is gone
            # (a run the limit will cut then returns designs from what it scanned)
            if held >= self.group_rows or (group and self.deadline.past(0.5)):
                done, bound, kappa = self.search_group(group, kappa)
                if not done:
                    return "timeout", bound if self.coverage.scan_complete else {}
                group, held = [], 0
            if not group:
                self.coverage.searched(net_name, span, qi)
        self.coverage.scan_complete = True
        done, bound, kappa = self.search_group(group, kappa)
        return ("complete" if done else "timeout"), bound

    def _cut(self, group: list[int]) -> tuple[str, dict[str, float]]:
        """The deadline passed while scanning: the loaded group is left unsearched."""
        for k in group:
            self.blocks[k].release()
        return "timeout", {}

    def search_group(self, group: list[int], kappa: np.ndarray
                     ) -> tuple[bool, dict[str, float], np.ndarray]:
        """Best-first over the rows of the loaded blocks ``group`` in the order of their
        lower-bound keys; (finished, bound on the first objective when not, κ)."""
        self.stats["row_groups"] += 1
        bids, rids, keys, weights = [], [], [], []
        for k in group:
            b = self.blocks[k]
            assert b.lb is not None and (b.exact or b.rows is not None)
            bids.append(np.full(b.n_rows, k))
            rids.append(np.arange(b.n_rows))
            keys.append(b.lb)
            weights.append(np.ones(b.n_rows, dtype=np.int64) if b.rows is None
                           else (b.rows.i1 - b.rows.i0))
        m = len(self.objectives)
        bid = np.concatenate(bids) if bids else np.zeros(0, dtype=np.int64)
        rid = np.concatenate(rids) if rids else np.zeros(0, dtype=np.int64)
        key = np.concatenate(keys) if keys else np.zeros((0, m), dtype=np.int64)
        weight = np.concatenate(weights) if weights else np.zeros(0, dtype=np.int64)
        del bids, rids, keys, weights
        comp = _composite(key)
        done = np.zeros(bid.size, dtype=bool)
        batch = 4096
        complete = True
        bound: dict[str, float] = {}
        while True:
            ids = np.flatnonzero(~done & _lex_le(key, kappa))
            if ids.size == 0:
                break
            finite = bool(np.all(kappa < _BIG))
            if not finite and ids.size > batch:
                ids = ids[np.argpartition(comp[ids], batch)[:batch]]
            ids = ids[np.lexsort((ids, comp[ids]))]
            chunk, pos, restart = (256 if finite else 8), 0, False
            while pos < ids.size:
                if self.deadline.expired():
                    complete = False
                    break
                part = ids[pos:pos + chunk]
                w = np.cumsum(weight[part])
                cut = max(1, int(np.searchsorted(w, 2_000_000, "right")))
                if cut < part.size:
                    part, chunk = part[:cut], cut
                part = part[_lex_le(key[part], kappa)]
                if part.size == 0:
                    break
                for k in np.unique(bid[part]):
                    self.expand(self.blocks[int(k)], rid[part[bid[part] == k]], kappa)
                if self.timed_out:
                    complete = False
                    break
                done[ids[pos:pos + chunk]] = True
                pos += chunk
                chunk = min(chunk * 2, 65536)
                new = self.kappa()
                if self.progress is not None:
                    share = float(done.mean()) if done.size else 1.0
                    # the groups searched before, and this group's share of the row order
                    self.progress("searching", min(1.0, self._mark
                                                   + share * (self._seen - self._mark)))
                if not finite and np.all(new < _BIG):
                    kappa, restart = new, True
                    break
                if _lex_le(new[None, :], kappa)[0]:
                    kappa = new             # κ only falls (a seeded κ is kept until beaten)
            if not complete:
                rest = ~done & _lex_le(key, kappa)
                if rest.any():
                    bound[self.objectives[0]] = bound_in_units(self.objectives[0],
                                                               float(key[rest, 0].min()))
                break
            if not restart:
                done[ids] = True
                batch *= 4
        for k in group:
            self.blocks[k].release()
        self._mark = self._seen
        return complete, bound, kappa
