"""Fixed-edge histograms that streamed Monte Carlo chunks add together exactly.

The edges are decided before any board is drawn (from the worst-case bounds, which
contain every drawn board), so two chunks' counts add bin by bin and the sum does
not depend on how the samples were split.  Values outside the edges are counted
apart (``below``, ``above``) and the exact smallest and largest finite values are
kept, so nothing is lost silently.  Percentiles are read from the counts by linear
interpolation inside a bin: they are exact to one bin width (``resolution``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Histogram", "Histogram2D"]


@dataclass(frozen=True)
class Histogram:
    """Counts of one quantity on fixed, equal-width bins.

    Attributes
    ----------
    lo, hi : float
        The outer edges, in the quantity's unit.
    counts : ndarray of int64
        One count per bin.
    below, above, undefined : int
        Values under ``lo``, over ``hi``, and NaN.
    min, max : float
        Smallest and largest finite value seen (``inf``/``-inf`` when none).
    """

    lo: float
    hi: float
    counts: np.ndarray
    below: int = 0
    above: int = 0
    undefined: int = 0
    min: float = math.inf
    max: float = -math.inf

    @classmethod
    def empty(cls, lo: float, hi: float, bins: int) -> Histogram:
        """No counts yet on ``bins`` bins between ``lo`` and ``hi``."""
        if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
            lo, hi = (lo - 1.0, lo + 1.0) if math.isfinite(lo) else (-1.0, 1.0)
        return cls(float(lo), float(hi), np.zeros(int(bins), dtype=np.int64))

    @property
    def edges(self) -> np.ndarray:
        """The bin edges, ``len(counts) + 1`` of them."""
        return np.linspace(self.lo, self.hi, self.counts.size + 1)

    @property
    def resolution(self) -> float:
        """One bin width, in the quantity's unit: the accuracy of a percentile."""
        return (self.hi - self.lo) / self.counts.size

    @property
    def total(self) -> int:
        """Every value counted, NaN included."""
        return int(self.counts.sum()) + self.below + self.above + self.undefined

    def add(self, values: np.ndarray) -> Histogram:
        """These counts plus ``values`` (any shape)."""
        v = np.asarray(values, dtype=float).reshape(-1)
        finite = v[np.isfinite(v)]
        n = self.counts.size
        idx = np.floor((finite - self.lo) / (self.hi - self.lo) * n)
        inside = (finite >= self.lo) & (finite <= self.hi)
        idx = np.clip(idx[inside], 0, n - 1).astype(np.int64)
        counts = self.counts + np.bincount(idx, minlength=n)
        return Histogram(self.lo, self.hi, counts,
                         self.below + int(np.count_nonzero(finite < self.lo)),
                         self.above + int(np.count_nonzero(finite > self.hi)),
                         self.undefined + int(v.size - finite.size),
                         min(self.min, float(finite.min())) if finite.size else self.min,
                         max(self.max, float(finite.max())) if finite.size else self.max)

    def merge(self, other: Histogram) -> Histogram:
        """The sum of two histograms on the same edges (order does not matter)."""
        if (other.lo, other.hi, other.counts.size) != (self.lo, self.hi, self.counts.size):
            raise ValueError("histograms on different edges cannot be added")
        return Histogram(self.lo, self.hi, self.counts + other.counts, self.below + other.below,
                         self.above + other.above, self.undefined + other.undefined,
                         min(self.min, other.min), max(self.max, other.max))

    def percentile(self, q: float) -> float:
        """The ``q``-th percentile (0…100) of the finite values, to one bin width.

        Values outside the edges are placed at the exact extremes seen, so a percentile
        that falls among them is the extreme itself.
        """
        finite = int(self.counts.sum()) + self.below + self.above
        if finite == 0:
            return math.nan
        rank = q / 100.0 * finite
        if rank <= self.below:
            return self.min
        cum = self.below + np.cumsum(self.counts)
        if rank > cum[-1]:
            return self.max
        i = int(np.searchsorted(cum, rank))
        before = cum[i] - self.counts[i]
        frac = (rank - before) / self.counts[i] if self.counts[i] else 0.0
        x = self.lo + (i + frac) * self.resolution
        return float(min(max(x, self.min), self.max))

    def rebinned(self, bins: int) -> tuple[np.ndarray, np.ndarray]:
        """(edges, counts) on at most ``bins`` wider bins (whole groups of the fine ones)."""
        group = max(1, math.ceil(self.counts.size / bins))
        n = self.counts.size // group * group
        counts = self.counts[:n].reshape(-1, group).sum(axis=1)
        counts[-1] += self.counts[n:].sum()
        edges = self.edges[: n + 1: group].copy()
        edges[-1] = self.hi
        return edges, counts


@dataclass(frozen=True)
class Histogram2D:
    """Joint counts of two quantities (x, y) on fixed bins; values outside are dropped
    from the grid but counted in ``outside``."""

    x_lo: float
    x_hi: float
    y_lo: float
    y_hi: float
    counts: np.ndarray
    outside: int = 0

    @classmethod
    def empty(cls, x: tuple[float, float], y: tuple[float, float], bins: int) -> Histogram2D:
        """No counts yet, ``bins`` × ``bins`` cells over the ranges ``x`` and ``y``."""
        hx, hy = Histogram.empty(*x, 1), Histogram.empty(*y, 1)
        return cls(hx.lo, hx.hi, hy.lo, hy.hi, np.zeros((bins, bins), dtype=np.int64))

    def add(self, x: np.ndarray, y: np.ndarray) -> Histogram2D:
        """These counts plus the pairs (x, y), any matching shape."""
        xv = np.asarray(x, dtype=float).reshape(-1)
        yv = np.asarray(y, dtype=float).reshape(-1)
        nx, ny = self.counts.shape
        inside = ((xv >= self.x_lo) & (xv <= self.x_hi) & (yv >= self.y_lo) & (yv <= self.y_hi))
        ix = np.clip(np.floor((xv[inside] - self.x_lo) / (self.x_hi - self.x_lo) * nx), 0,
                     nx - 1).astype(np.int64)
        iy = np.clip(np.floor((yv[inside] - self.y_lo) / (self.y_hi - self.y_lo) * ny), 0,
                     ny - 1).astype(np.int64)
        grid = np.bincount(ix * ny + iy, minlength=nx * ny).reshape(nx, ny)
        return Histogram2D(self.x_lo, self.x_hi, self.y_lo, self.y_hi, self.counts + grid,
                           self.outside + int(xv.size - np.count_nonzero(inside)))

    def merge(self, other: Histogram2D) -> Histogram2D:
        """The sum of two grids on the same edges."""
        return Histogram2D(self.x_lo, self.x_hi, self.y_lo, self.y_hi,
                           self.counts + other.counts, self.outside + other.outside)

    def centres(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(x, y, count) of every occupied cell's centre."""
        nx, ny = self.counts.shape
        ix, iy = np.nonzero(self.counts)
        x = self.x_lo + (ix + 0.5) * (self.x_hi - self.x_lo) / nx
        y = self.y_lo + (iy + 0.5) * (self.y_hi - self.y_lo) / ny
        return x, y, self.counts[ix, iy]
