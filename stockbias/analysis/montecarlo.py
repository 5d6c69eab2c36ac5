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
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from .constraints import Limit, evaluate_limits
from .stage import (
    SMALL_SIGNAL_QUANTITIES,
    ResistorPiece,
    ResistorSpec,
    StagePoint,
    StageSpec,
    evaluate,
)
from .statistics import YieldResult, draw_resistor_factors, draw_uniform, yield_estimate

__all__ = ["MonteCarloResult", "monte_carlo"]


@dataclass(frozen=True)
class MonteCarloResult:
    """Yield and the drawn boards' spread.  ``ic`` holds every board × corner value, A."""

    yield_: YieldResult
    ic: np.ndarray
    vce: np.ndarray
    failing: dict[str, int]
    seed: int

    def to_dict(self) -> dict[str, object]:
        d: dict[str, object] = dict(self.yield_.to_dict())
        d["seed"] = self.seed
        d["failures_by_constraint"] = dict(self.failing)
        return d


def _environment_corners(spec: StageSpec) -> list[dict[str, float | None]]:
    """Both supply extremes (and negative-supply extremes) × both ambient extremes."""
    vcc = sorted({spec.vcc * (1 - spec.vcc_tol), spec.vcc * (1 + spec.vcc_tol)})
    amb = sorted({spec.ambient_min_c, spec.ambient_max_c})
    vee: list[float | None] = [None]
    if spec.network.supply == "dual" and spec.vee is not None:
        vee = [*sorted({spec.vee * (1 - spec.vee_tol), spec.vee * (1 + spec.vee_tol)})]
    return [{"vcc": a, "vee": b, "ambient": c} for a, b, c in itertools.product(vcc, vee, amb)]


def monte_carlo(spec: StageSpec, limits: list[Limit], samples: int,
                rng: np.random.Generator, *, seed: int = 0,
                tempco_ppm: dict[str, float] | None = None,
                chunk: int = 250_000) -> MonteCarloResult:
    """Draw ``samples`` boards and test each at every environment corner.

    Parameters
    ----------
    spec : StageSpec
        One stage (scalar).
    limits : list of Limit
        The constraints (``non_active_corners`` and ``vceo_needed`` are handled here).
    samples : int
        Number of boards.
    rng : numpy.random.Generator
    tempco_ppm : dict, optional
        role → |tempco| in ppm/°C (drawn uniform in ±) for roles whose spec names no
        ``pieces``; a role with pieces draws each piece's own tempco (signed or not).
    chunk : int
        Boards evaluated at once (bounds memory).  Results are reproducible for the
        same seed, samples and chunk.
    """
    n = int(samples)
    d = spec.device
    roles = list(spec.resistors)
    corners = _environment_corners(spec)
    vcc = np.array([c["vcc"] for c in corners])[None, :]
    amb = np.array([c["ambient"] for c in corners], dtype=float)[None, :]
    vee = None if corners[0]["vee"] is None else np.array([c["vee"] for c in corners])[None, :]
    checked = [lim for lim in limits if lim.name != "vceo"]
    needed = {lim.quantity for lim in checked} | {"ic", "vce"}
    small_signal = bool(needed & SMALL_SIGNAL_QUANTITIES)
    nan_known = ({lim.quantity for lim in checked if lim.outside_active is not None}
                 - {lim.quantity for lim in checked if lim.outside_active is None})
    ok = np.empty(n, dtype=bool)
    ic_all = np.empty((n, len(corners)))
    vce_all = np.empty((n, len(corners)))
    failing: dict[str, int] = {}
    for start in range(0, n, chunk):
        size = min(chunk, n - start)
        r = {role: _draw_role(rng, spec.resistors[role], (tempco_ppm or {}).get(role, 0.0),
                              size, amb) for role in roles}
        hfe = draw_uniform(rng, float(d.hfe_min), float(d.hfe_max), size)
        vbe = draw_uniform(rng, float(d.vbe_min), float(d.vbe_max), size)
        icbo = draw_uniform(rng, 0.0, float(d.icbo_a), size)
        point = StagePoint(vcc=vcc, vee=vee, r=r, hfe=hfe[:, None], vbe=vbe[:, None],
                           icbo=icbo[:, None], ambient_c=amb)
        ev = evaluate(spec, point, small_signal=small_signal)
        q = {k: v for k, v in ev.quantities.items() if k in needed}
        q["non_active_corners"] = (ev.op.region != 0).astype(float)
        # A quantity undefined outside the active region (NaN there) whose every limit says
        # what it is worth there is reduced over the active corners only; evaluate_limits then
        # folds in that value.  Every other NaN propagates and fails its limit.
        low = {k: _columns(np.fmin if k in nan_known else np.minimum, v) for k, v in q.items()}
        high = {k: _columns(np.fmax if k in nan_known else np.maximum, v) for k, v in q.items()}
        good = np.ones(size, dtype=bool)
        for name, marg in evaluate_limits(checked, low, high).items():
            bad = marg < 0
            failing[name] = failing.get(name, 0) + int(np.count_nonzero(bad))
            good &= ~bad
        ok[start:start + size] = good
        ic_all[start:start + size] = q["ic"]
        vce_all[start:start + size] = q["vce"]
    failing = {k: v for k, v in failing.items() if v}
    return MonteCarloResult(yield_=yield_estimate(ok), ic=ic_all, vce=vce_all, failing=failing,
                            seed=seed)


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


def _columns(op: np.ufunc, values: np.ndarray) -> np.ndarray:
    """Reduce over the (few) environment corners column by column (faster than axis=1)."""
    values = np.asarray(values, dtype=float)
    if values.ndim == 1:
        return values
    out = values[:, 0].copy()
    for j in range(1, values.shape[1]):
        op(out, values[:, j], out=out)
    return out
