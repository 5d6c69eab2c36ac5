"""The vectorised screen of `substitute`'s reworks: every change of k roles to a stock line,
judged at every vertex of the tolerance box at once (exact for the monotone quantities, and
never stricter than the full check, which also refines products inside the box and adds the
self-heated junction).  Used by the worst-case rules (:mod:`.substitute`) and, on the job's
box and its sub-boxes, by the yield rule (:mod:`.yield_substitute`).
"""

from __future__ import annotations

import itertools
import math
import time

import numpy as np

from ..analysis.check import build_spec
from ..analysis.constraints import evaluate_limits, ic_margin, stage_limits
from ..analysis.stage import SMALL_SIGNAL_QUANTITIES, ResistorSpec, StageSpec, evaluate
from ..analysis.worst_case import vertex_points
from ..assign import ResolvedResistor
from ..job import Job
from ..parts import Inventory, Resistor, Transistor
from ..resistor_band import piece_band
from .candidates import micro

__all__ = ["screen_changes"]

_POINTS_PER_CHUNK = 2_000_000
_PREFILTER_CHUNK = 200_000


class _Screen:
    """Vectorised screen of role combinations over every vertex of the tolerance box."""

    def __init__(self, job: Job, base: dict[str, ResolvedResistor], q: Transistor) -> None:
        self.job = job
        self.base = base
        self.q = q
        self.spec0 = build_spec(job, job.stage, base, q)
        self.ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
        ratings = {role: p.rating for role, p in base.items()}
        limits = stage_limits(job, job.stage, self.spec0, ratings)
        self.quantities = {lim.quantity for lim in limits}
        self.small_signal = bool(self.quantities & SMALL_SIGNAL_QUANTITIES)
        self.tables: dict[str, np.ndarray] = {}

    def arrays(self, roles: tuple[str, ...], cand: dict[str, list[Resistor]],
               idx: np.ndarray) -> dict[str, tuple[np.ndarray, np.ndarray]]:
        """Each role's exact band (low, high) over tolerance and tempco drift, per combination
        (a kept pair's asymmetric band; a signed tempco drifting one way)."""
        bands = {}
        for role, p in self.base.items():
            lo, hi = p.band(*self.ambient)
            bands[role] = (np.full(len(idx), lo), np.full(len(idx), hi))
        for j, role in enumerate(roles):
            table = self.tables.get(role)
            if table is None:
                rows = cand[role]
                r_lo, r_hi = piece_band([r.value_ohm for r in rows],
                                        [r.tolerance_pct / 100 for r in rows],
                                        [r.tempco_used_ppm for r in rows],
                                        [r.tempco_signed for r in rows], *self.ambient)
                table = np.stack([r_lo, r_hi], axis=1)
                self.tables[role] = table
            bands[role] = (table[idx[:, j], 0], table[idx[:, j], 1])
        return bands

    def prefilter(self, roles: tuple[str, ...], cand: dict[str, list[Resistor]],
                  idx: np.ndarray) -> np.ndarray:
        """Combinations whose IC window and headroom can hold (divider, constant VBE only).

        The few-corner bounds of :mod:`stockbias.analysis.fast_bounds` equal the vertex
        bounds for IC and VCE while the stage is active, and a stage that is not active at
        some vertex fails the check anyway, so this drops nothing the check would pass.
        """
        if self.spec0.network.name != "divider" or self.spec0.model != "constant_vbe":
            return np.ones(len(idx), dtype=bool)
        from ..analysis.fast_bounds import divider_bounds

        d = self.spec0.device
        fb = divider_bounds(self.arrays(roles, cand, idx), vcc=self.spec0.vcc,
                            vcc_tol=self.spec0.vcc_tol, hfe_min=d.hfe_min, hfe_max=d.hfe_max,
                            vbe_min=d.vbe_min, vbe_max=d.vbe_max, vce_sat=d.vce_sat,
                            icbo25=d.icbo_a, xtb=d.xtb, ambient_min_c=self.spec0.ambient_min_c,
                            ambient_max_c=self.spec0.ambient_max_c)
        t = self.job.stage.target
        slack = 1e-9
        return (fb.active & (fb.ic_min >= t.ic_min * (1 - slack))
                & (fb.ic_max <= t.ic_max * (1 + slack))
                & (fb.vce_min >= t.vce_min - slack))

    def margins(self, roles: tuple[str, ...], cand: dict[str, list[Resistor]],
                idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(smallest normalised margin over all limits, IC margin as a fraction of target).

        Both are upper bounds of what the full check finds for the same parts: the screen
        sees the vertices only (the check adds interior maxima of products and the
        self-heated junction, which can only tighten).
        """
        resistors: dict[str, ResistorSpec] = {}
        ratings: dict[str, float | np.ndarray] = {}
        bands = self.arrays(roles, cand, idx)
        for role, p in self.base.items():
            resistors[role] = p.spec(*self.ambient)
            ratings[role] = p.rating
        for j, role in enumerate(roles):
            rows = [cand[role][i] for i in idx[:, j]]
            resistors[role] = ResistorSpec(
                np.array([r.value_ohm for r in rows]),
                np.array([r.tolerance_pct / 100 for r in rows]), band=bands[role])
            ratings[role] = np.array([r.power_w for r in rows])
        spec = StageSpec(self.spec0.network, resistors, self.spec0.device, self.spec0.vcc,
                         self.spec0.vcc_tol, self.spec0.vee, self.spec0.vee_tol,
                         self.spec0.ambient_min_c, self.spec0.ambient_max_c, self.spec0.model,
                         self.spec0.load, self.spec0.re_bypassed)
        point, _bits = vertex_points(spec)
        ev = evaluate(spec, point, small_signal=self.small_signal)
        q = ev.quantities
        low = {k: np.nanmin(v, axis=-1) for k, v in q.items() if k in self.quantities}
        high = {k: np.nanmax(v, axis=-1) for k, v in q.items() if k in self.quantities}
        bad = np.count_nonzero(ev.op.region != 0, axis=-1).astype(float)
        low["non_active_corners"] = high["non_active_corners"] = bad
        need = np.full(len(idx), self.job.supply.max_ce_voltage)
        low["vceo_needed"] = high["vceo_needed"] = need
        limits = stage_limits(self.job, self.job.stage, spec, ratings)
        margins = evaluate_limits(limits, low, high)
        worst = np.full(len(idx), np.inf)
        for lim in limits:
            scale = np.maximum(np.abs(np.asarray(lim.limit, dtype=float)), 1e-12)
            if lim.quantity == "non_active_corners":
                scale = np.asarray(1.0)
            worst = np.minimum(worst, margins[lim.name] / scale)
        t = self.job.stage.target
        icm = np.asarray(ic_margin(low["ic"], high["ic"], t.ic_min, t.ic_max, t.ic))
        return worst, icm


def screen_changes(job: Job, base: dict[str, ResolvedResistor], q: Transistor,
                   inventory: Inventory, deadline: float, k: int
                   ) -> tuple[list[tuple[int, float, tuple[str, ...], tuple[int, ...]]],
                              dict[tuple[str, ...], dict[str, list[Resistor]]], bool]:
    """Every change of exactly ``k`` roles to a stock line holding a build's worth that the
    vertex screen passes: ``(scored, candidates, timed_out)``, each scored entry ``(added
    cost in micro-units, screened IC margin, roles, line index per role)`` into
    ``candidates[roles][role]``.  The screen is never stricter than the full check."""
    build = job.build.quantity
    lines = [r for r in inventory.bias_resistors if r.qty >= build]
    screen = _Screen(job, base, q)
    n_vertex = 2 ** len(screen.spec0.axes())
    chunk = max(1, _POINTS_PER_CHUNK // n_vertex)
    scored: list[tuple[int, float, tuple[str, ...], tuple[int, ...]]] = []
    cands: dict[tuple[str, ...], dict[str, list[Resistor]]] = {}
    timed_out = False
    for roles in itertools.combinations(tuple(base), k):
        cand = {role: [r for r in lines if [r.part_id] != base[role].part_ids]
                for role in roles}
        cands[roles] = cand
        sizes = [len(cand[r]) for r in roles]
        total = math.prod(sizes)
        screen.tables = {}
        for start in range(0, total, _PREFILTER_CHUNK):
            flat = np.arange(start, min(start + _PREFILTER_CHUNK, total))
            idx_all = np.stack(np.unravel_index(flat, sizes), axis=1)
            idx_all = idx_all[screen.prefilter(roles, cand, idx_all)]
            for sub in range(0, len(idx_all), chunk):
                if time.monotonic() > deadline:
                    timed_out = True
                    break
                idx = idx_all[sub:sub + chunk]
                worst, icm = screen.margins(roles, cand, idx)
                ok = worst >= -1e-9
                for row, m in zip(idx[ok], icm[ok], strict=True):
                    cost = sum(micro(cand[r][i].unit_cost) for r, i in
                               zip(roles, row, strict=True))
                    scored.append((cost, float(m), roles, tuple(int(i) for i in row)))
            if timed_out:
                break
        if timed_out:
            break
    scored.sort(key=lambda e: (e[0], -e[1], e[2], e[3]))
    return scored, cands, timed_out
