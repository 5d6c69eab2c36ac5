"""Searches inside a stage's tolerance box for the extremes vertices miss.

The worst-case analysis (:mod:`stockbias.analysis.worst_case`) evaluates every vertex;
these functions find the points that can lie beyond them, all in unit coordinates
(0 = an axis's low end, 1 = its high end):

* :func:`boundary_points`: where a region boundary (the onset of saturation or
  cut-off) crosses an edge of the box, by bisection on the region; currents and
  voltages are monotone inside a region but not across its boundary;
* :func:`edge_grid` and :func:`edge_maxima`: a grid along every edge, then a
  golden-section search along the most promising edges (an interior extreme with
  every other parameter at an end of its range lies on an edge);
* :func:`refine_extremes`: a pattern search (axis grids and pattern moves, widths
  halving on failure) from given starts, for extremes with several interior
  coordinates and ridges;
* :func:`self_heated_tj`: the self-heated junction temperature at one point.
"""

from __future__ import annotations

import numpy as np

from .stage import SMALL_SIGNAL_QUANTITIES, StagePoint, StageSpec, evaluate

__all__ = [
    "boundary_points",
    "edge_grid",
    "edge_maxima",
    "golden_maximum",
    "nan_low",
    "point_at_unit",
    "refine_extremes",
    "self_heated_tj",
]


_LARGEST = float(np.finfo(np.float64).max)


def nan_low(x: np.ndarray) -> np.ndarray:
    """``np.nan_to_num(x, nan=-np.inf)`` for a float array, without its overhead (the
    searches call it thousands of times on small arrays): NaN → −∞, ±∞ → ± the largest
    float."""
    x = np.asarray(x, dtype=float)
    return np.where(np.isnan(x), -np.inf, np.minimum(np.maximum(x, -_LARGEST), _LARGEST))


def point_at_unit(spec: StageSpec, axes: tuple[str, ...], u: np.ndarray) -> StagePoint:
    values = {}
    for j, axis in enumerate(axes):
        lo, hi = (np.asarray(v, dtype=float) for v in spec.axis_range(axis))
        values[axis] = lo + u[..., j] * (hi - lo)
    return spec.point_from(values)


def refine_extremes(spec: StageSpec, axes: tuple[str, ...],
                     starts: dict[tuple[str, int], np.ndarray], rounds: int = 30,
                     grid: int = 9, tol: float = 1e-5) -> list[np.ndarray]:
    """Points inside the unit box that push each quantity to its extreme (pattern search).

    ``starts`` maps (quantity, sign) to start points, shape ``(s, k)``; sign +1 seeks
    the maximum, −1 the minimum.  Each round, for every target and start at once (one
    batched evaluation), tries a grid of ``grid`` values along each axis around the
    current point within its step width, and the pattern moves x + m·(x − x_prev)
    (m = 1, 2, 4) along the last successful step; the best trial is taken if it
    improves, else the width halves.  It stops when every width is below ``tol`` (unit
    box) or after ``rounds``.  Smooth quantities converge to the interior stationary
    point (or a face or vertex) the start leads to, ridges included; across a region
    boundary the search follows the kink.  Returns the final point of every start.
    """
    k = len(axes)
    keys = list(starts)
    counts = [starts[key].shape[0] for key in keys]
    signs = np.concatenate([np.full(c, key[1], dtype=float) for key, c in zip(keys, counts,
                                                                             strict=True)])
    owner = np.concatenate([np.full(c, i) for i, c in enumerate(counts)])
    x = np.concatenate([starts[key] for key in keys]).astype(float)   # (S, k)
    n_s = x.shape[0]
    prev = x.copy()
    width = np.full(n_s, 0.5)
    offsets = np.linspace(-1.0, 1.0, grid)

    small = any(key[0] in SMALL_SIGNAL_QUANTITIES for key in keys)

    def values(u: np.ndarray, rows: np.ndarray) -> np.ndarray:
        ev = evaluate(spec, point_at_unit(spec, axes, u), small_signal=small)
        out = np.full(u.shape[0], -np.inf)
        for i, key in enumerate(keys):
            sel = owner[rows] == i
            if np.any(sel):
                q = np.asarray(ev.quantities[key[0]], dtype=float).reshape(-1)[sel]
                out[sel] = nan_low(key[1] * q)
        return out

    best = values(x, np.arange(n_s))
    del signs
    for _ in range(rounds):
        live = width > tol
        if not np.any(live):
            break
        rows = np.flatnonzero(live)
        m = rows.size
        trial = np.repeat(x[rows][:, None, None, :], k, axis=1).repeat(grid, axis=2)
        for j in range(k):
            trial[:, j, :, j] = x[rows, j, None] + width[rows, None] * offsets
        trial = trial.reshape(m, k * grid, k)
        step = x[rows] - prev[rows]
        pattern = x[rows][:, None, :] + np.array([1.0, 2.0, 4.0])[None, :, None] * step[:, None]
        trial = np.clip(np.concatenate([trial, pattern], axis=1), 0.0, 1.0)
        n_t = trial.shape[1]
        vals = values(trial.reshape(-1, k), np.repeat(rows, n_t)).reshape(m, n_t)
        pick = np.argmax(vals, axis=1)
        gain = vals[np.arange(m), pick] > best[rows]
        moved = rows[gain]
        prev[moved] = x[moved]
        x[moved] = trial[np.flatnonzero(gain), pick[gain]]
        best[moved] = vals[np.flatnonzero(gain), pick[gain]]
        stuck = rows[~gain]
        width[stuck] *= 0.5
        prev[stuck] = x[stuck]
    out, pos = [], 0
    for c in counts:
        out.append(x[pos:pos + c])
        pos += c
    return out


def boundary_points(spec: StageSpec, axes: tuple[str, ...], bits: np.ndarray,
                     region: np.ndarray, iterations: int = 34) -> np.ndarray:
    """Points on both sides of every region boundary that crosses an edge of the box.

    Along an edge whose two vertices lie in different regions (active against
    saturated or cut off), the crossing is bracketed by bisection on the region
    (``iterations`` halvings, 2^-34 of the axis range); both ends of the final
    bracket are returned, shape ``(2·m, k)`` in unit coordinates.  Currents and
    voltages are monotone inside each region but not across its boundary, so an
    extreme can sit where the boundary meets an edge.
    """
    n, k = bits.shape
    idx = np.arange(n)
    starts, axis = [], []
    for j in range(k):
        a = idx[bits[:, j] == 0]
        b = a | (1 << j)
        cross = region[a] != region[b]
        starts.append(a[cross])
        axis.append(np.full(int(cross.sum()), j))
    first = np.concatenate(starts)
    if first.size == 0:
        return np.empty((0, k))
    j_of = np.concatenate(axis)
    rows = np.arange(first.size)
    u0 = bits[first].astype(float)
    region0 = region[first]
    lo, hi = np.zeros(first.size), np.ones(first.size)
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        u = u0.copy()
        u[rows, j_of] = mid
        r = np.asarray(evaluate(spec, point_at_unit(spec, axes, u), small_signal=False)
                       .op.region).reshape(-1)
        same = r == region0
        lo = np.where(same, mid, lo)
        hi = np.where(same, hi, mid)
    u_lo, u_hi = u0.copy(), u0.copy()
    u_lo[rows, j_of] = lo
    u_hi[rows, j_of] = hi
    return np.vstack([u_lo, u_hi])


_EDGE_POINTS = 7


def edge_grid(bits: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Interior points along every edge of the unit box, 7 per edge.

    Returns the points, shape ``(edges·7, k)`` (edge by edge), and the axis each edge runs
    along, shape ``(edges,)``.
    """
    n, k = bits.shape
    idx = np.arange(n)
    t = np.arange(1, _EDGE_POINTS + 1) / (_EDGE_POINTS + 1)
    out, axis = [], []
    for j in range(k):
        base = bits[idx[bits[:, j] == 0]]
        u = np.repeat(base[:, None, :], _EDGE_POINTS, axis=1)
        u[:, :, j] = t
        out.append(u.reshape(-1, k))
        axis.append(np.full(base.shape[0], j))
    if not out:
        return np.empty((0, k)), np.empty(0, dtype=int)
    return np.concatenate(out), np.concatenate(axis)


def edge_maxima(spec: StageSpec, axes: tuple[str, ...], edge_u: np.ndarray,
                 edge_axis: np.ndarray, edge_vals: dict[tuple[str, int], np.ndarray],
                 best_edges: int = 12, iterations: int = 16) -> np.ndarray:
    """The extreme of each target along its most promising edges (golden-section search).

    For each target (quantity, sign), the ``best_edges`` edges whose grid points reach
    furthest are searched between the grid neighbours of their best point; the points
    found are returned, shape ``(m, k)``.  An interior extreme with every other
    parameter at an end of its range lies on such an edge.
    """
    k = len(axes)
    n_edges = edge_axis.size
    if n_edges == 0 or not edge_vals:
        return np.empty((0, k))
    grid = np.arange(1, _EDGE_POINTS + 1) / (_EDGE_POINTS + 1)
    base_u, axis_of, lo, hi, owner = [], [], [], [], []
    keys = list(edge_vals)
    for i, key in enumerate(keys):
        vals = edge_vals[key].reshape(n_edges, _EDGE_POINTS)
        peak = vals.max(axis=1)
        top = np.argsort(-peak)[:best_edges]
        top = top[np.isfinite(peak[top])]
        at = np.argmax(vals[top], axis=1)
        base_u.append(edge_u.reshape(n_edges, _EDGE_POINTS, k)[top, 0])
        axis_of.append(edge_axis[top])
        lo.append(np.maximum(grid[at] - 1.0 / (_EDGE_POINTS + 1), 0.0))
        hi.append(np.minimum(grid[at] + 1.0 / (_EDGE_POINTS + 1), 1.0))
        owner.append(np.full(top.size, i))
    u0 = np.concatenate(base_u)
    if u0.shape[0] == 0:
        return np.empty((0, k))
    j_of, a, b = np.concatenate(axis_of), np.concatenate(lo), np.concatenate(hi)
    who = np.concatenate(owner)
    rows = np.arange(u0.shape[0])
    signs = np.array([key[1] for key in keys], dtype=float)[who]

    small = any(key[0] in SMALL_SIGNAL_QUANTITIES for key in keys)

    def f(t: np.ndarray) -> np.ndarray:
        u = u0.copy()
        u[rows, j_of] = t
        ev = evaluate(spec, point_at_unit(spec, axes, u), small_signal=small)
        out = np.full(t.shape, -np.inf)
        for i, key in enumerate(keys):
            sel = who == i
            q = np.asarray(ev.quantities[key[0]], dtype=float).reshape(-1)[sel]
            out[sel] = nan_low(signs[sel] * q)
        return out

    u = u0.copy()
    u[rows, j_of] = golden_maximum(f, a, b, iterations)
    return u


def golden_maximum(f, a: np.ndarray, b: np.ndarray, iterations: int = 16) -> np.ndarray:
    """Golden-section search for the maximum of ``f`` on each interval [a, b] at once.

    ``f`` maps an array of points (one per interval) to their values.  Each iteration
    keeps the probe on the side of the larger value and evaluates one new probe per
    interval; returns the middle of each final bracket (width (a − b)·0.618^iterations)."""
    ratio = (np.sqrt(5.0) - 1.0) / 2.0
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    fc, fd = f(c), f(d)
    for _ in range(iterations):
        left = fc >= fd      # the maximum lies in [a, d]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        c_new = np.where(left, b - ratio * (b - a), d)
        d_new = np.where(left, c, a + ratio * (b - a))
        f_new = f(np.where(left, c_new, d_new))
        # left: the new d is the old c (its value kept), the new c is evaluated; right: the
        # new c is the old d, the new d is evaluated
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
        c, d = c_new, d_new
    return 0.5 * (a + b)


def self_heated_tj(spec: StageSpec, axes: tuple[str, ...], u: np.ndarray) -> np.ndarray:
    """Self-heated junction temperature TJ = TA + θJA·PD(TJ) at points of the box, °C.

    ``u`` has shape ``(m, k)``; the result ``(m,)``.  Each point is solved on its own
    terms (the fixed-point search is elementwise), so one point gives the same figure
    alone or in a batch.
    """
    from .stage import solve_point
    from .thermal import self_heated_point

    u = np.atleast_2d(np.asarray(u, dtype=float))
    point = point_at_unit(spec, axes, u) if axes else spec.nominal_point()

    def pd_of_tj(tj: np.ndarray) -> np.ndarray:
        op, _ = solve_point(spec, point, np.asarray(tj))
        return np.asarray(op.pd, dtype=float)

    sh = self_heated_point(pd_of_tj, np.asarray(point.ambient_c, dtype=float),
                           np.asarray(spec.device.theta_ja_effective, dtype=float))
    return np.broadcast_to(np.asarray(sh.tj_c, dtype=float), (u.shape[0],)).copy()
