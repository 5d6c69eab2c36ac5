"""Monte Carlo yield: draw boards as manufacturing varies them, test each over the environment.

Each drawn board gets its own resistor values (each physical part: ±tol as a 3σ
normal truncated at ±tol, DESIGN §2; a pair's two parts drawn apart and combined
in series or parallel), its own resistor tempcos (a signed coefficient exactly
as stated; an unsigned one uniform within ±|tempco|, drawn once per part and
board), its own hFE and VBE (uniform in the stock ranges) and leakage at 25 °C
(uniform 0…ICBO, then doubling every 10 °C with the ambient).  Each board is then
evaluated at every environment corner: both supply extremes (and both
negative-supply extremes for a dual supply) × both ambient extremes, each part
at R·(1 + δ)·(1 + tc·(T − 25 °C)).  A board passes when every limit holds at
every one of its corners.

Streaming and reproducible: board ``i`` belongs to block ``i // STREAM_BLOCK`` of a fixed
grid, and each block draws from its own random stream, ``SeedSequence(seed,
spawn_key=(stream, block))``.  A run is split into chunks of whole blocks; a chunk returns
counts (passing boards, failures per limit) and fixed-edge histograms, never per-board
arrays, and the chunks' tallies add exactly.  So a result depends on the seed, the stream
and the sample count alone — not on the chunk size, the number of workers or the machine —
and memory is bounded by one chunk per worker whatever the sample count.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from .constraints import Limit, evaluate_limits
from .histogram import Histogram, Histogram2D
from .stage import (
    SMALL_SIGNAL_QUANTITIES,
    ResistorPiece,
    ResistorSpec,
    StagePoint,
    StageSpec,
    evaluate,
)
from .statistics import YieldResult, draw_resistor_factors, draw_uniform, yield_from_counts

__all__ = [
    "HISTOGRAM_BINS",
    "STREAM_BLOCK",
    "MonteCarloResult",
    "block_rng",
    "board_values",
    "monte_carlo",
]

#: Boards per random stream: the fixed grid a result is reproducible on.  Changing it
#: changes every result; it is part of what a seed means.
STREAM_BLOCK = 1024
#: Fine bins of the IC and VCE histograms (percentiles are exact to one bin).
HISTOGRAM_BINS = 4000
#: Cells per axis of the joint (VCE, IC) histogram the Q-point plot draws.
QPOINT_BINS = 160
#: Boards a chunk evaluates at once by default (rounded up to whole blocks).
DEFAULT_CHUNK = 32 * STREAM_BLOCK
#: The limits that make the target IC window (``constraints.stage_limits``).
IC_WINDOW = ("ic_min", "ic_max")


def block_rng(seed: int, stream: int, block: int) -> np.random.Generator:
    """The random stream of one block of boards: a child of ``SeedSequence(seed)`` keyed
    by (stream, block)."""
    return np.random.Generator(np.random.PCG64(
        np.random.SeedSequence(int(seed), spawn_key=(int(stream), int(block)))))


def _environment_corners(spec: StageSpec) -> list[dict[str, float | None]]:
    """Both supply extremes (and negative-supply extremes) × both ambient extremes."""
    vcc = sorted({spec.vcc * (1 - spec.vcc_tol), spec.vcc * (1 + spec.vcc_tol)})
    amb = sorted({spec.ambient_min_c, spec.ambient_max_c})
    vee: list[float | None] = [None]
    if spec.network.supply == "dual" and spec.vee is not None:
        vee = [*sorted({spec.vee * (1 - spec.vee_tol), spec.vee * (1 + spec.vee_tol)})]
    return [{"vcc": a, "vee": b, "ambient": c} for a, b, c in itertools.product(vcc, vee, amb)]


@dataclass(frozen=True)
class _Run:
    """What every chunk of one run needs (picklable: it travels to worker processes)."""

    spec: StageSpec
    limits: tuple[Limit, ...]
    tempco_ppm: Mapping[str, float]
    seed: int
    stream: int
    samples: int
    ic_range: tuple[float, float]
    vce_range: tuple[float, float]


@dataclass(frozen=True)
class _Tally:
    """What a chunk returns: counts and histograms, added exactly across chunks."""

    boards: int
    passed: int
    ic_window: int
    failing: dict[str, int]
    ic: Histogram
    vce: Histogram
    qpoint: Histogram2D

    def merge(self, other: _Tally) -> _Tally:
        failing = dict(self.failing)
        for k, v in other.failing.items():
            failing[k] = failing.get(k, 0) + v
        return _Tally(self.boards + other.boards, self.passed + other.passed,
                      self.ic_window + other.ic_window, failing, self.ic.merge(other.ic),
                      self.vce.merge(other.vce), self.qpoint.merge(other.qpoint))


@dataclass(frozen=True)
class MonteCarloResult:
    """Yield, failures by limit and the drawn boards' spread as histograms.

    ``ic`` and ``vce`` count every board × environment corner value (A, V); ``qpoint`` is
    their joint histogram; ``ic_window_boards`` counts the boards whose IC stays inside the
    target window at every corner.
    """

    yield_: YieldResult
    failing: dict[str, int]
    seed: int
    ic: Histogram
    vce: Histogram
    qpoint: Histogram2D
    ic_window_boards: int
    corners: int
    stream: int = 0
    block: int = STREAM_BLOCK
    percentiles: tuple[float, ...] = field(default=(0.135, 50.0, 99.865))

    def to_dict(self) -> dict[str, object]:
        d: dict[str, object] = dict(self.yield_.to_dict())
        d["seed"] = self.seed
        d["failures_by_constraint"] = dict(self.failing)
        d["ic_percentiles_a"] = {f"{p:g}": self.ic.percentile(p) for p in self.percentiles}
        d["ic_resolution_a"] = self.ic.resolution
        d["ic_observed_a"] = {"min": self.ic.min, "max": self.ic.max}
        return d


def _draw_role(rng: np.random.Generator, rs: ResistorSpec, tempco_ppm: float, size: int,
               amb: np.ndarray) -> np.ndarray:
    """One role's value on each drawn board at each environment corner, ohm (size × corners).

    Each piece: nominal·(1 + δ)·(1 + tc·(T − 25 °C)), δ a 3σ normal truncated at ±tol; tc
    the stated coefficient when signed, else uniform in ±|tc|.  Pieces combine as the
    role's arrangement says.  A spec without pieces is one part at ±tol with an unsigned
    ``tempco_ppm``.
    """
    pieces = rs.pieces or (ResistorPiece(float(rs.value), float(rs.tol), abs(tempco_ppm),
                                         False),)
    values = []
    for p in pieces:
        factor = draw_resistor_factors(rng, 100 * p.tol, size)
        if p.signed:
            tc = np.full(size, p.tempco_ppm * 1e-6)
        else:
            tc = draw_uniform(rng, -abs(p.tempco_ppm), abs(p.tempco_ppm), size) * 1e-6
        values.append(p.value * factor[:, None] * (1 + tc[:, None] * (amb - 25.0)))
    if len(values) == 1:
        return values[0]
    a, b = values
    if rs.arrangement == "series":
        return a + b
    return a * b / (a + b)


def _evaluate_blocks(run: _Run, first: int, stop: int) -> tuple[dict[str, np.ndarray],
                                                                 np.ndarray, dict[str, int],
                                                                 np.ndarray]:
    """Boards of blocks [first, stop): each quantity (boards × corners), pass flags, failures
    per limit, and the flags of IC inside the window at every corner."""
    spec, d = run.spec, run.spec.device
    corners = _environment_corners(spec)
    vcc = np.array([c["vcc"] for c in corners])[None, :]
    amb = np.array([c["ambient"] for c in corners], dtype=float)[None, :]
    vee = None if corners[0]["vee"] is None else np.array([c["vee"] for c in corners])[None, :]
    draws: dict[str, list[np.ndarray]] = {}
    for block in range(first, stop):
        size = min(STREAM_BLOCK, run.samples - block * STREAM_BLOCK)
        rng = block_rng(run.seed, run.stream, block)
        for role in spec.resistors:
            draws.setdefault(role, []).append(
                _draw_role(rng, spec.resistors[role], run.tempco_ppm.get(role, 0.0), size, amb))
        draws.setdefault("hfe", []).append(draw_uniform(rng, float(d.hfe_min),
                                                        float(d.hfe_max), size))
        draws.setdefault("vbe", []).append(draw_uniform(rng, float(d.vbe_min),
                                                        float(d.vbe_max), size))
        draws.setdefault("icbo", []).append(draw_uniform(rng, 0.0, float(d.icbo_a), size))
    cat = {k: np.concatenate(v) for k, v in draws.items()}
    checked = list(run.limits)
    needed = {lim.quantity for lim in checked} | {"ic", "vce"}
    small_signal = bool(needed & SMALL_SIGNAL_QUANTITIES)
    nan_known = ({lim.quantity for lim in checked if lim.outside_active is not None}
                 - {lim.quantity for lim in checked if lim.outside_active is None})
    point = StagePoint(vcc=vcc, vee=vee, r={role: cat[role] for role in spec.resistors},
                       hfe=cat["hfe"][:, None], vbe=cat["vbe"][:, None],
                       icbo=cat["icbo"][:, None], ambient_c=amb)
    ev = evaluate(spec, point, small_signal=small_signal)
    q = {k: v for k, v in ev.quantities.items() if k in needed}
    q["non_active_corners"] = (ev.op.region != 0).astype(float)
    size = cat["hfe"].size
    # A quantity undefined outside the active region (NaN there) whose every limit says
    # what it is worth there is reduced over the active corners only; evaluate_limits then
    # folds in that value.  Every other NaN propagates and fails its limit.
    low = {k: _columns(np.fmin if k in nan_known else np.minimum, v) for k, v in q.items()}
    high = {k: _columns(np.fmax if k in nan_known else np.maximum, v) for k, v in q.items()}
    good = np.ones(size, dtype=bool)
    window = np.ones(size, dtype=bool)
    failing: dict[str, int] = {}
    margins = evaluate_limits(checked, low, high)
    for lim in checked:
        bad = np.broadcast_to(margins[lim.name] < 0, (size,))
        failing[lim.name] = int(np.count_nonzero(bad))
        good &= ~bad
        if lim.name in IC_WINDOW:
            window &= ~bad
    return q, good, failing, window


def _run_chunk(task: tuple[_Run, int, int]) -> _Tally:
    """One chunk: blocks [first, stop) of the run, reduced to counts and histograms."""
    run, first, stop = task
    q, good, failing, window = _evaluate_blocks(run, first, stop)
    ic = Histogram.empty(*run.ic_range, HISTOGRAM_BINS).add(q["ic"])
    vce = Histogram.empty(*run.vce_range, HISTOGRAM_BINS).add(q["vce"])
    qp = Histogram2D.empty(run.vce_range, run.ic_range, QPOINT_BINS).add(q["vce"], q["ic"])
    return _Tally(int(good.size), int(np.count_nonzero(good)), int(np.count_nonzero(window)),
                  failing, ic, vce, qp)


def _ranges(spec: StageSpec, limits: list[Limit],
            ranges: Mapping[str, tuple[float, float]] | None) -> dict[str, tuple[float, float]]:
    """Histogram edges for IC and VCE, decided before sampling: the given ranges (check
    passes the worst-case bounds, which contain every drawn board) or the worst-case
    bounds computed here, widened to the IC window and padded by 5 %."""
    out = dict(ranges or {})
    if "ic" not in out or "vce" not in out:
        from .worst_case import worst_case

        wc = worst_case(spec, quantities=["ic", "vce"])
        for k in ("ic", "vce"):
            out.setdefault(k, (float(wc.bounds[k].min), float(wc.bounds[k].max)))
    lo, hi = out["ic"]
    for lim in limits:
        if lim.name in IC_WINDOW and math.isfinite(float(lim.limit)):
            lo, hi = min(lo, float(lim.limit)), max(hi, float(lim.limit))
    out["ic"] = (lo, hi)
    padded = {}
    for k, (a, b) in out.items():
        pad = 0.05 * (b - a) if b > a else 0.05 * max(abs(a), 1e-12)
        padded[k] = (a - pad, b + pad)
    return padded


def monte_carlo(spec: StageSpec, limits: list[Limit], samples: int, seed: int = 0, *,
                tempco_ppm: Mapping[str, float] | None = None,
                chunk: int = DEFAULT_CHUNK, stream: int = 0,
                ranges: Mapping[str, tuple[float, float]] | None = None,
                executor: object | None = None,
                progress: Callable[[int], None] | None = None) -> MonteCarloResult:
    """Draw ``samples`` boards and test each at every environment corner.

    Parameters
    ----------
    spec : StageSpec
        One stage (scalar).
    limits : list of Limit
        The constraints (``vceo`` is a rating checked once, not per board).
    samples : int
        Number of boards.
    seed : int
        Root of every block's random stream.
    tempco_ppm : dict, optional
        role → |tempco| in ppm/°C (drawn uniform in ±) for roles whose spec names no
        ``pieces``; a role with pieces draws each piece's own tempco (signed or not).
    chunk : int
        Boards evaluated at once, rounded up to whole blocks of :data:`STREAM_BLOCK`
        (bounds memory; the result does not depend on it).
    stream : int
        Which family of streams: a different ``stream`` with the same seed gives boards
        independent of these (an independent re-check).
    ranges : mapping, optional
        "ic" → (A, A), "vce" → (V, V): the span the histograms cover (default: the
        worst-case bounds).
    executor : stockbias.executor.Executor, optional
        Where the chunks run (default: this process).
    progress : callable, optional
        Called with the number of boards done after each chunk.
    """
    from ..executor import InProcess

    n = int(samples)
    if n <= 0:
        raise ValueError("Monte Carlo needs at least one sample")
    checked = tuple(lim for lim in limits if lim.name != "vceo")
    edges = _ranges(spec, list(checked), ranges)
    run = _Run(spec, checked, dict(tempco_ppm or {}), int(seed), int(stream), n,
               edges["ic"], edges["vce"])
    blocks = math.ceil(n / STREAM_BLOCK)
    per = max(1, math.ceil(int(chunk) / STREAM_BLOCK))
    tasks = [(run, b, min(b + per, blocks)) for b in range(0, blocks, per)]
    ex = executor if executor is not None else InProcess()
    # tallies are merged as they arrive (integer counts and extremes: exact in any order),
    # so memory holds the chunks in flight, not one tally per chunk
    total: _Tally | None = None
    done = 0
    for (_, first, stop), tally in zip(tasks, ex.imap(_run_chunk, tasks),  # type: ignore[attr-defined]
                                       strict=True):
        total = tally if total is None else total.merge(tally)
        done += min(stop * STREAM_BLOCK, n) - first * STREAM_BLOCK
        if progress is not None:
            progress(done)
    assert total is not None
    failing = {lim.name: total.failing.get(lim.name, 0) for lim in checked}
    return MonteCarloResult(
        yield_=yield_from_counts(total.passed, total.boards),
        failing={k: v for k, v in failing.items() if v}, seed=int(seed), ic=total.ic,
        vce=total.vce, qpoint=total.qpoint, ic_window_boards=total.ic_window,
        corners=len(_environment_corners(spec)), stream=int(stream))


def board_values(spec: StageSpec, limits: list[Limit], samples: int, seed: int = 0, *,
                 tempco_ppm: Mapping[str, float] | None = None, stream: int = 0,
                 first_board: int = 0) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """The boards ``monte_carlo`` draws, one by one (for inspection and tests; memory grows
    with ``samples``): each quantity (boards × corners) and each board's pass flag.

    Boards ``first_board`` … ``first_board + samples − 1`` of the run with this seed and
    stream (``first_board`` a multiple of :data:`STREAM_BLOCK`).
    """
    if first_board % STREAM_BLOCK:
        raise ValueError("first_board must be a multiple of STREAM_BLOCK")
    checked = tuple(lim for lim in limits if lim.name != "vceo")
    total = first_board + int(samples)
    run = _Run(spec, checked, dict(tempco_ppm or {}), int(seed), int(stream), total,
               (0.0, 1.0), (0.0, 1.0))
    q, good, _, _ = _evaluate_blocks(run, first_board // STREAM_BLOCK,
                                     math.ceil(total / STREAM_BLOCK))
    return q, good


def _columns(op: np.ufunc, values: np.ndarray) -> np.ndarray:
    """Reduce over the (few) environment corners column by column (faster than axis=1)."""
    values = np.asarray(values, dtype=float)
    if values.ndim == 1:
        return values
    out = values[:, 0].copy()
    for j in range(1, values.shape[1]):
        op(out, values[:, j], out=out)
    return out
