"""The pool of a single-stage search and its checks: designs that passed the pre-pass,
checked at every vertex in key order, then in full by :func:`stockbias.analysis.check.
analyze_stage` (the path ``check`` uses), with the bound κ that proves the top K (the K-th
distinct network's key) and the one design per network that can rank.

:class:`PoolChecks` is a mixin of :class:`stockbias.search.design._Search`; it reads the
search's ``job``, ``stage``, ``inv``, ``top``, ``objectives``, ``deadline``, ``blocks``,
``shelf``, ``pool``, ``stats`` and the caches the search's constructor sets up.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..analysis.check import CheckResult, analyze_stage
from ..parts import id_key
from .alternatives import network_key
from .deadline import Deadline
from .design_result import VERIFY_SAMPLES
from .prepass import vertex_check
from .ranking import BIG as _BIG
from .ranking import lex_le as _lex_le
from .ranking import margin_ppm

__all__ = ["PoolChecks"]

_VERTEX_BATCH = 64   # designs per vertex check, at least, while unchecked ones remain


@dataclass
class _Pool:
    """Designs that passed every vertex, with exact keys."""

    block: list[int] = field(default_factory=list)
    roles: list[dict[str, int]] = field(default_factory=list)
    keys: list[np.ndarray] = field(default_factory=list)
    margin: list[float] = field(default_factory=list)
    status: list[int] = field(default_factory=list)  # 0 unchecked, 1 every vertex ok, 2 fails


class PoolChecks:
    """Vertex checks, full checks, κ and the representatives of a search's pool."""

    def vertex_verify(self, ks: list[int], keys: np.ndarray | None = None) -> None:
        """Check pool designs at every vertex; exact margins replace the corner bounds."""
        t = self.stage.target
        todo = [k for k in ks if self.pool.status[k] == 0]
        by_block: dict[int, list[int]] = {}
        for k in todo:
            by_block.setdefault(self.pool.block[k], []).append(k)
        col = self.objectives.index("ic_margin") if "ic_margin" in self.objectives else None
        for bi, group in by_block.items():
            b = self.blocks[bi]
            roles = tuple(self.pool.roles[group[0]])
            arr = {r: (b.cands[r], np.array([self.pool.roles[k][r] for k in group]))
                   for r in roles}
            chk = vertex_check(self.job, self.stage, b.network, b.transistor, arr)
            self.stats["designs_vertex_checked"] += len(group)
            mppm = margin_ppm(chk["ic_min"], chk["ic_max"], t.ic_min, t.ic_max, t.ic)
            for j, k in enumerate(group):
                self.pool.status[k] = 1 if chk["ok"][j] else 2
                self.pool.margin[k] = float(mppm[j]) / 1e6
                if col is not None:
                    self.pool.keys[k][col] = -mppm[j]
                    if keys is not None:
                        keys[k, col] = -mppm[j]

    # --- verification ---------------------------------------------------------------
    def resolved(self, k: int):
        b = self.blocks[self.pool.block[k]]
        parts = {}
        for role, i in self.pool.roles[k].items():
            p = self.shelf.resolved(role, b.cands[role], i)
            if p is not None:
                parts[role] = p
        return b, parts

    def stock_ok(self, k: int) -> bool:
        got = self._stock_ok.get(k)
        if got is None:
            _b, parts = self.resolved(k)
            count: dict[str, int] = {}
            for p in parts.values():
                for part in p.parts:
                    count[part.part_id] = count.get(part.part_id, 0) + 1
            need = self.job.build.quantity
            if self._qty is None:
                # the stock quantity of each part id, as Inventory.find_resistor finds it
                self._qty = {}
                for r in self.inv.resistors:
                    self._qty.setdefault(id_key(r.part_id), r.qty)
            got = all(self._qty[id_key(pid)] >= c * need for pid, c in count.items())
            self._stock_ok[k] = got
        return got

    def verify(self, k: int) -> CheckResult | None:
        ck = (self.pool.block[k], tuple(sorted(self.pool.roles[k].items())))
        if ck not in self.verified:
            b, parts = self.resolved(k)
            # the same parts checked by an earlier search over this shelf (the single-part
            # search before the one with pairs) are not checked again
            pk = (b.network, b.transistor.part_id, tuple(sorted(
                (r, int(b.cands[r].arrangement[i]), int(b.cands[r].line_a[i]),
                 int(b.cands[r].line_b[i])) for r, i in self.pool.roles[k].items())))
            res = self.checks.get(pk)
            if res is None:
                samples = VERIFY_SAMPLES if self.stage.target.yield_min is not None else 0
                t0 = self.deadline.clock()
                res = analyze_stage(self.job, self.stage, parts, b.transistor,
                                    samples=samples, seed=self.job.search.seed,
                                    topology=b.network)
                self.checks[pk] = res
                self.stats["verified"] += 1
                self.verify_s = max(self.verify_s, self.deadline.clock() - t0)
            if not res.ok:
                self.rejected_on_verification += 1
            self.verified[ck] = res if res.ok else None
        return self.verified[ck]

    def network(self, k: int) -> tuple:
        """The bias network of pool design ``k`` (:func:`.alternatives.network_key`)."""
        got = self._network_of.get(k)
        if got is None:
            b = self.blocks[self.pool.block[k]]
            got = network_key(b.network, b.q_index, b.cands, self.pool.roles[k])
            self._network_of[k] = got
        return got

    def kappa(self) -> np.ndarray:
        """Key at which the K-th distinct network is first met among the re-verified,
        stock-feasible designs of the pool, in key order (∞ if fewer networks).

        Designs are checked lazily in key order: at every vertex first (which can only
        raise a key, the margin being exact afterwards), then by ``analyze_stage``.
        """
        inf = np.full(len(self.objectives), _BIG, dtype=np.int64)
        if not self.pool.keys:
            return inf
        limit = 4 * self.top + 16
        batch_size = limit
        keys = np.stack(self.pool.keys)
        while True:
            status = np.asarray(self.pool.status)
            live = np.flatnonzero(status != 2)
            order = live[np.lexsort(keys[live].T[::-1])]
            head = [int(k) for k in order[:limit]]
            # check the next unchecked designs in key order, in growing batches; a design
            # behind a vertex-checked one of its own network (not yet failed) waits: it
            # cannot add a network
            todo: list[int] = []
            ahead: set[tuple] = set()
            for k in head:
                net = self.network(k)
                if net in ahead:
                    continue
                if status[k] == 0:
                    todo.append(k)
                elif not self.failed(k):
                    ahead.add(net)
            if todo:
                if len(todo) < _VERTEX_BATCH:
                    # the next unchecked designs in key order come along: a check of one
                    # design costs little beside the fixed cost of a check
                    rest = order[limit:]
                    todo += [int(k) for k in rest[status[rest] == 0][:_VERTEX_BATCH - len(todo)]]
                # a batch the time left can hold (by the slowest design so far)
                n = batch_size
                if self.vertex_s > 0:
                    n = max(1, min(n, int(self.deadline.remaining() / self.vertex_s)))
                t_batch = self.deadline.clock()
                self.vertex_verify(todo[:n], keys)
                self.vertex_s = max(self.vertex_s, (self.deadline.clock() - t_batch)
                                    / len(todo[:n]))
                batch_size = min(batch_size * 2, 65536)
                if self.deadline.expired():
                    return inf
                continue
            nets: set[tuple] = set()
            restart = False
            for k in head:
                # the bound counts networks: a variant of a network already counted is
                # not verified here (it cannot add a network)
                net = self.network(k)
                if net in nets:
                    continue
                if status[k] == 0:
                    restart = True      # the design ahead of it in its network just failed
                    break
                if not self._can_verify(k):
                    # the longest check so far would end past the limit: the search ends
                    # here, as if the deadline had passed (it has, for this check)
                    self.deadline.hit = True
                    return inf
                if not self.stock_ok(k) or self.verify(k) is None:
                    continue
                nets.add(net)
                if len(nets) >= self.top:
                    return keys[k]
                if self.deadline.expired():
                    return inf
            if restart:
                continue
            if limit >= order.size:
                return inf
            limit *= 4

    def failed(self, k: int) -> bool:
        """Pool design ``k`` is known not to rank: it fails a vertex, the stock or the
        full check (a design not yet verified is not known to fail)."""
        if self.pool.status[k] == 2:
            return True
        ck = (self.pool.block[k], tuple(sorted(self.pool.roles[k].items())))
        return (ck in self.verified and self.verified[ck] is None) or not self.stock_ok(k)

    def representatives(self, ids: np.ndarray, kappa: np.ndarray,
                        cut: Deadline | None = None) -> np.ndarray:
        """Of the pool designs ``ids``, per network the best (in key order, key ≤ κ) that
        passes every vertex, fits the stock and passes the full check: the only design of
        its network that can rank (a single stage's stock holds for each design alone).

        ``cut``: the command's deadline, given when the time limit cut the search (κ is
        then not a proof and the pool may hold thousands of networks): only the best
        ``top`` networks are looked for, and no full check starts that the time left
        (by the longest check so far) cannot finish; the networks left unchecked are
        counted in ``unverified_networks``."""
        ids_l = [int(k) for k in ids]
        while True:
            keys = np.stack(self.pool.keys)
            ids_l = [k for k in ids_l if self.pool.status[k] != 2
                     and bool(_lex_le(keys[k][None, :], kappa)[0])]
            ids_l.sort(key=lambda k: (tuple(keys[k].tolist()), k))
            todo: list[int] = []
            out: list[int] = []
            settled: set[tuple] = set()
            pending: dict[tuple, int] = {}
            for k in ids_l:
                net = self.network(k)
                if net in settled:
                    continue
                if self.pool.status[k] == 0:
                    if pending.get(net, 0) < 4:
                        todo.append(k)
                        pending[net] = pending.get(net, 0) + 1
                    continue
                if net in pending:
                    continue            # an unchecked design ahead of it is checked first
                if cut is not None and (len(out) >= self.top or not self._time_to_verify(k, cut)):
                    return self._cut_short(out, ids_l, settled)
                if self.stock_ok(k) and self.verify(k) is not None:
                    out.append(k)
                    settled.add(net)
            if cut is not None and cut.expired():
                return self._cut_short(out, ids_l, settled)
            if not todo or self.deadline.expired():
                return np.asarray(out, dtype=np.int64)
            self.vertex_verify(todo if cut is None else todo[:16])

    def _cut_short(self, out: list[int], ids: list[int], settled: set[tuple]) -> np.ndarray:
        """The representatives found when the time limit stops their checks; the networks
        of ``ids`` neither settled nor known to fail are counted as left unchecked."""
        if len(out) < self.top:
            self.unverified_networks = len({self.network(j) for j in ids
                                            if not self.failed(j)} - settled)
        return np.asarray(out, dtype=np.int64)

    def _can_verify(self, k: int) -> bool:
        """Design ``k``'s full check is done already, or the search's time left holds one
        (by the longest check so far; never a deadline counted in checks)."""
        ck = (self.pool.block[k], tuple(sorted(self.pool.roles[k].items())))
        if ck in self.verified:
            return True
        return not self.deadline.hit and self.deadline.remaining() > self.verify_s

    def _time_to_verify(self, k: int, cut: Deadline) -> bool:
        """Design ``k``'s full check is done already, or the time left can hold one."""
        ck = (self.pool.block[k], tuple(sorted(self.pool.roles[k].items())))
        if ck in self.verified:
            return True
        return not cut.expired() and cut.remaining() > self.verify_s
