"""Objective keys and the small array tools the ranked search orders them with.

Keys are integer columns, all minimised, in the job's objective order; a *lower bound*
key is componentwise at most the key of every design it stands for, hence also a
lexicographic lower bound.
"""

from __future__ import annotations

import numpy as np

from ..analysis.constraints import ic_margin

__all__ = ["BIG", "bound_in_units", "composite", "count_distinct", "lex_le", "margin_ppm",
           "objective_key", "range_query", "sparse_table"]

#: "No bound yet" in a key column.
BIG = np.iinfo(np.int64).max // 4


def objective_key(objectives: tuple[str, ...], cost: np.ndarray, parts: np.ndarray,
                  distinct: np.ndarray, bom: np.ndarray, margin_ppm: np.ndarray) -> np.ndarray:
    """Integer key columns (all minimised) in the job's objective order."""
    cols = {"cost": cost, "part_count": parts, "distinct_values": distinct, "bom_lines": bom,
            "ic_margin": -margin_ppm, "changes": np.zeros_like(cost)}
    return np.stack([np.asarray(cols[o], dtype=np.int64) for o in objectives], axis=-1) \
        if len(cost) else np.zeros((0, len(objectives)), dtype=np.int64)


def bound_in_units(name: str, key_bound: float) -> float:
    """A lower bound on an objective's key column, in the objective's own units: ``cost``
    per board in currency (the key is micro-units), ``ic_margin`` as the largest margin
    any unseen design can have, a fraction of the target (the key is −ppm, minimised), the
    counts as they are."""
    if name == "cost":
        return key_bound / 1e6
    if name == "ic_margin":
        return -key_bound / 1e6
    return key_bound


def margin_ppm(ic_lo: np.ndarray, ic_hi: np.ndarray, ic_min: float, ic_max: float,
               target: float) -> np.ndarray:
    """ic_margin in ppm of the target (floor(x·1e6) is monotone, so bounds stay bounds)."""
    m = np.asarray(ic_margin(ic_lo, ic_hi, ic_min, ic_max, target))
    return np.floor(np.nan_to_num(m, nan=-1e3) * 1e6 + 1e-6).astype(np.int64)


def lex_le(keys: np.ndarray, kappa: np.ndarray) -> np.ndarray:
    """Rows of ``keys`` lexicographically ≤ ``kappa``."""
    res = np.zeros(keys.shape[0], dtype=bool)
    eq = np.ones(keys.shape[0], dtype=bool)
    for j in range(keys.shape[1]):
        res |= eq & (keys[:, j] < kappa[j])
        eq &= keys[:, j] == kappa[j]
    return res | eq


def count_distinct(cols: list[np.ndarray]) -> np.ndarray:
    """Distinct non-negative ids per row across columns (−1 = none)."""
    if not cols:
        return np.zeros(0, dtype=np.int64)
    total = np.zeros(cols[0].shape, dtype=np.int64)
    for i, x in enumerate(cols):
        new = x >= 0
        for y in cols[:i]:
            new &= x != y
        total += new
    return total


def sparse_table(a: np.ndarray, fn, longest: int | None = None) -> np.ndarray:
    """Sparse table (levels × n, padded) for O(1) range min/max queries; with ``longest``
    only the levels that ranges of at most that many elements use."""
    levels = [a]
    k = 1
    top = a.size if longest is None else min(a.size, int(longest))
    while 2 * k <= top:
        prev = levels[-1]
        levels.append(fn(prev[:-k], prev[k:]))
        k *= 2
    out = np.empty((len(levels), a.size), dtype=a.dtype)
    for i, lev in enumerate(levels):
        out[i, :lev.size] = lev
        out[i, lev.size:] = lev[-1] if lev.size else 0
    return out


def range_query(table: np.ndarray, i0: np.ndarray, i1: np.ndarray, fn, empty) -> np.ndarray:
    """fn over a[i0:i1] for each row (``empty`` where the range is empty)."""
    n = i1 - i0
    ok = n > 0
    lev = np.zeros(n.shape, dtype=np.int64)
    lev[ok] = np.floor(np.log2(n[ok])).astype(np.int64)
    right = np.where(ok, i1 - (1 << lev), i0)
    left = np.minimum(i0, table.shape[1] - 1)
    right = np.clip(right, 0, table.shape[1] - 1)
    out = fn(table[lev, left], table[lev, right])
    return np.where(ok, out, empty)


def composite(key: np.ndarray) -> np.ndarray:
    """One sortable number per row in the lexicographic order of ``key`` (float64 ties are
    broken afterwards by a stable sort on the row id; an order only, never a proof)."""
    if key.size == 0:
        return np.zeros(key.shape[0])
    comp = np.zeros(key.shape[0])
    for j in range(key.shape[1]):
        col = key[:, j].astype(float)
        lo, hi = col.min(), col.max()
        span = hi - lo + 1.0
        comp = comp * span + (col - lo)
    return comp
