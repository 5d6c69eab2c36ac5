"""Monte Carlo of many candidate designs on the same boards (common random numbers),
vectorised over candidates × boards × environment corners.

Candidates that share the network, the transistor and the piece structure of every role
(how many parts, whether each tempco is signed) draw the very same uniform numbers in the
same order as :func:`.montecarlo.monte_carlo` draws them for one design, so each
candidate's count equals, bit for bit, what a run of its own with the same seed and stream
gives; the difference between two candidates is then the designs', not the dice's.  The
grid of streams is the same (:data:`.montecarlo.STREAM_BLOCK` boards per stream).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from .constraints import Limit, evaluate_limits
from .montecarlo import STREAM_BLOCK, _environment_corners, block_rng
from .stage import SMALL_SIGNAL_QUANTITIES, ResistorPiece, StagePoint, StageSpec, evaluate
from .statistics import TRUNCATION_SIGMAS, draw_uniform

__all__ = ["group_key", "passing_counts"]


def _pieces(spec: StageSpec, role: str, tempco_ppm: float) -> tuple[ResistorPiece, ...]:
    rs = spec.resistors[role]
    return rs.pieces or (ResistorPiece(float(rs.value), float(rs.tol), abs(tempco_ppm), False),)


def group_key(spec: StageSpec, limits: Sequence[Limit], tempco_ppm: Mapping[str, float]
              ) -> tuple[object, ...] | None:
    """Candidates with equal keys can be sampled together; None: sample it alone."""
    if any(lim.figure is not None for lim in limits):
        return None
    roles = []
    for role in sorted(spec.resistors):
        ps = _pieces(spec, role, tempco_ppm.get(role, 0.0))
        roles.append((role, spec.resistors[role].arrangement, tuple(p.signed for p in ps)))
    return (spec.network.name, spec.device, spec.vcc, spec.vcc_tol, spec.vee, spec.vee_tol,
            spec.ambient_min_c, spec.ambient_max_c, spec.model, spec.load, spec.re_bypassed,
            tuple(roles), tuple(lim.name for lim in limits if lim.name != "vceo"))


def passing_counts(specs: Sequence[StageSpec], limits: Sequence[Sequence[Limit]],
                   tempcos: Sequence[Mapping[str, float]], samples: int, seed: int,
                   stream: int) -> list[int]:
    """Boards passing every limit at every corner, per candidate (one group: equal
    :func:`group_key`), drawn on the common boards of (seed, stream)."""
    from scipy import special

    base = specs[0]
    c = len(specs)
    corners = _environment_corners(base)
    vcc = np.array([k["vcc"] for k in corners])[None, None, :]
    amb = np.array([k["ambient"] for k in corners], dtype=float)[None, None, :]
    vee = None if corners[0]["vee"] is None else \
        np.array([k["vee"] for k in corners])[None, None, :]
    checked = [[lim for lim in ls if lim.name != "vceo"] for ls in limits]
    stacked = []
    for j, lim in enumerate(checked[0]):
        vals = np.array([np.asarray(ls[j].limit, dtype=float) for ls in checked])
        stacked.append(replace(lim, limit=vals.reshape(c, 1)))
    needed = {lim.quantity for lim in stacked} | {"ic", "vce"}
    small_signal = bool(needed & SMALL_SIGNAL_QUANTITIES)
    nan_known = ({lim.quantity for lim in stacked if lim.outside_active is not None}
                 - {lim.quantity for lim in stacked if lim.outside_active is None})
    pieces = {role: [_pieces(s, role, t.get(role, 0.0)) for s, t in zip(specs, tempcos,
                                                                          strict=True)]
              for role in base.resistors}
    edge = special.ndtr(-TRUNCATION_SIGMAS)
    d = base.device
    passed = np.zeros(c, dtype=np.int64)
    for block in range(math.ceil(samples / STREAM_BLOCK)):
        size = min(STREAM_BLOCK, samples - block * STREAM_BLOCK)
        rng = block_rng(seed, stream, block)
        r = {}
        for role in base.resistors:   # the draw order of montecarlo._draw_role
            values = []
            for j in range(len(pieces[role][0])):
                ps = [pl[j] for pl in pieces[role]]
                tol_pct = np.array([100 * p.tol for p in ps])[:, None]
                z = special.ndtri(edge + rng.random(size) * (1.0 - 2.0 * edge))
                z = np.clip(z, -TRUNCATION_SIGMAS, TRUNCATION_SIGMAS)
                factor = 1.0 + (tol_pct / 100.0) * (z / TRUNCATION_SIGMAS)[None, :]
                if ps[0].signed:
                    tc = np.array([p.tempco_ppm * 1e-6 for p in ps])[:, None] * \
                        np.ones((1, size))
                else:
                    u = rng.random(size)
                    lo = np.array([-abs(p.tempco_ppm) for p in ps])[:, None]
                    hi = np.array([abs(p.tempco_ppm) for p in ps])[:, None]
                    tc = (lo + u[None, :] * (hi - lo)) * 1e-6
                value = np.array([p.value for p in ps])[:, None, None]
                values.append(value * factor[:, :, None] * (1 + tc[:, :, None] * (amb - 25.0)))
            if len(values) == 1:
                r[role] = values[0]
            elif base.resistors[role].arrangement == "series":
                r[role] = values[0] + values[1]
            else:
                r[role] = values[0] * values[1] / (values[0] + values[1])
        hfe = draw_uniform(rng, float(d.hfe_min), float(d.hfe_max), size)
        vbe = draw_uniform(rng, float(d.vbe_min), float(d.vbe_max), size)
        icbo = draw_uniform(rng, 0.0, float(d.icbo_a), size)
        point = StagePoint(vcc=vcc, vee=vee, r=r, hfe=hfe[None, :, None],
                           vbe=vbe[None, :, None], icbo=icbo[None, :, None], ambient_c=amb)
        ev = evaluate(base, point, small_signal=small_signal)
        q = {k: np.broadcast_to(v, (c, size, len(corners)))
             for k, v in ev.quantities.items() if k in needed}
        q["non_active_corners"] = np.broadcast_to(
            (ev.op.region != 0).astype(float), (c, size, len(corners)))
        low = {k: (np.fmin if k in nan_known else np.minimum).reduce(v, axis=-1)
               for k, v in q.items()}
        high = {k: (np.fmax if k in nan_known else np.maximum).reduce(v, axis=-1)
                for k, v in q.items()}
        good = np.ones((c, size), dtype=bool)
        for marg in evaluate_limits(stacked, low, high).values():
            good &= ~(np.broadcast_to(marg, (c, size)) < 0)
        passed += good.sum(axis=1)
    return [int(x) for x in passed]
