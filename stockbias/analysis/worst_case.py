"""Extreme value analysis (EVA) and root-sum-square over a stage's tolerance box.

Vertices
    Every quantity is evaluated at all 2^k vertices of the box (k axes that
    vary, see :mod:`stockbias.analysis.stage`).  For a quantity that is
    monotone in each parameter separately, the bounds sit at vertices and
    this is exact.  That holds for the currents and node voltages of the four
    networks in the active region (proved for the divider in DESIGN §2 and
    checked for all four by interior sampling in the tests).

Interior points
    Products peak inside the box: transistor dissipation IC·VCE is largest
    where VCE is near half the available voltage, RC's dissipation in
    collector feedback where RC = RE + RB/(β+1).  For every dissipation and
    the supply power, the maximum is refined by a bounded quasi-Newton
    search (L-BFGS-B on the unit box) started from the best vertices and the
    centre; the reported bound is the largest value found at a vertex or at an
    interior stationary point.  The tests sample the interior to check it.

Root-sum-square
    nominal ± sqrt(Σ (∂f/∂p · Δp)²) with Δp the half range of each axis and
    the derivatives taken numerically at the nominal point.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

from .stage import Evaluation, StagePoint, StageSpec, evaluate, self_heated_temperature

__all__ = [
    "Bound",
    "WorstCase",
    "corner_setting",
    "point_at_unit",
    "refined_quantities",
    "rss",
    "vertex_points",
    "worst_case",
]

REPORTED = ("ic", "ib", "ie", "vb", "vc", "ve", "vce", "supply_power", "pd", "tj", "gain", "rin")


def refined_quantities(spec: StageSpec) -> tuple[str, ...]:
    """Quantities whose maximum is refined inside the box (products: powers, TJ)."""
    return ("supply_power", "pd", "tj", *(f"p_{r}" for r in spec.resistors))


@dataclass(frozen=True)
class Bound:
    """Bounds of one quantity with the corners that produce them.

    ``corner_min``/``corner_max`` map each axis to ``{"setting", "value"}`` where
    setting is ``"min"``, ``"max"`` or ``"interior"`` and value is physical (SI, °C).
    """

    min: float
    max: float
    corner_min: dict[str, dict[str, object]]
    corner_max: dict[str, dict[str, object]]
    u_min: np.ndarray | None = None
    u_max: np.ndarray | None = None

    def to_dict(self) -> dict[str, object]:
        return {"min": self.min, "max": self.max, "corner_min": self.corner_min,
                "corner_max": self.corner_max}


@dataclass(frozen=True)
class WorstCase:
    """EVA result: bounds per quantity, the axes, and the vertex evaluation itself."""

    axes: tuple[str, ...]
    bounds: dict[str, Bound]
    n_vertices: int
    vertex_eval: Evaluation
    regions_seen: tuple[str, ...]
    non_active_corners: int
    non_active_example: dict[str, dict[str, object]] | None

    def to_dict(self) -> dict[str, object]:
        return {q: b.to_dict() for q, b in self.bounds.items()}


def _axis_value_name(axis: str) -> str:
    return {"ambient": "ambient_c"}.get(axis, axis[2:] if axis.startswith("R:") else axis)


def _used_values(spec: StageSpec, values: dict[str, float],
                 device_temp_c: float | None) -> dict[str, dict[str, float]]:
    """What the solve uses for each device axis at a point: hFE(T), VBE(T), ICBO(T).

    ``values`` maps axes to their physical 25 °C setting; the device sits at
    ``device_temp_c`` (default: the point's ambient).  Returns, per axis name, the
    extra keys of its corner entry (``used``; ``is_a`` for the exponential model).
    """
    from . import device
    from .stage import gummel_poon_of

    point = spec.point_from({a: np.asarray(v) for a, v in values.items()})
    temp = float(np.asarray(point.ambient_c)) if device_temp_c is None else device_temp_c
    t_k = temp + device.CELSIUS_TO_KELVIN
    d = spec.device
    out: dict[str, dict[str, float]] = {}
    beta = device.beta_at(point.hfe, t_k, xtb=np.asarray(d.xtb, dtype=float))
    out["hfe"] = {"used": float(np.asarray(beta).reshape(-1)[0])}
    out["icbo"] = {"used": float(np.asarray(device.icbo_at(point.icbo, temp)).reshape(-1)[0])}
    if spec.model == "constant_vbe":
        vbe = device.vbe_at(point.vbe, temp, d.vbe_tempco)
        out["vbe"] = {"used": float(np.asarray(vbe).reshape(-1)[0])}
    else:  # the VBE setting is an IS; its VBE at the hFE test current, at temperature
        gp = gummel_poon_of(spec, point, np.asarray(temp))
        is_t = float(np.asarray(gp.is_a).reshape(-1)[0])
        vt = float(device.thermal_voltage(t_k)) * float(np.asarray(gp.nf).reshape(-1)[0])
        i_test = float(np.asarray(d.hfe_test_ic).reshape(-1)[0])
        out["vbe"] = {"used": vt * float(np.log1p(i_test / is_t)), "is_a": is_t}
    return out


def corner_setting(spec: StageSpec, u: dict[str, float],
                   device_temp_c: float | None = None) -> dict[str, dict[str, object]]:
    """Describe a point given by unit coordinates (0 = low end, 1 = high end) per axis.

    Each axis gets ``setting`` (``min``, ``max`` or ``interior``), ``value`` (its
    physical setting: supplies and resistors as used, hFE, VBE and ICBO as the
    25 °C stock data) and ``used``, the value the solve used: supplies and each
    resistor with its tolerance and drift applied (the same at any ambient), hFE
    as β(T) = hFE·(T/298.15 K)^XTB, VBE as VBE + tempco·(T − 25 °C) (exponential
    model: the VBE at the hFE test current from IS(T), with ``is_a`` = IS(T)), ICBO
    doubled every 10 °C, all at the device temperature (the ambient, or the
    ``junction_c`` entry when self-heated).  Rails are named by magnitude: for the
    negative rail ``vee`` (value signed) ``max`` is the largest |VEE|.
    """
    out: dict[str, dict[str, object]] = {}
    values: dict[str, float] = {}
    for axis, x in u.items():
        lo, hi = (float(np.asarray(v).reshape(-1)[0]) for v in spec.axis_range(axis))
        x = float(x)
        value = lo + x * (hi - lo)
        values[axis] = value
        # vee is signed negative and its range runs from the smaller magnitude (min)
        setting = "min" if x <= 1e-9 else ("max" if x >= 1 - 1e-9 else "interior")
        out[_axis_value_name(axis)] = {"setting": setting, "value": value, "used": value}
    extra = _used_values(spec, values, device_temp_c)
    for axis in ("hfe", "vbe", "icbo"):
        if axis in out:
            out[axis].update(extra[axis])
    if device_temp_c is not None:
        out["junction_c"] = {"setting": "self_heated", "value": device_temp_c,
                             "used": device_temp_c}
    return out


def vertex_points(spec: StageSpec, axes: Iterable[str] | None = None,
                  extra_dims: int = 0) -> tuple[StagePoint, np.ndarray]:
    """All vertices of the box as one point array on a new last axis.

    Returns the point (arrays of shape ``candidate_shape + (2^k,)``) and the 0/1
    unit-coordinate table of shape ``(2^k, k)``.
    """
    axes = tuple(spec.axes() if axes is None else axes)
    k = len(axes)
    bits = ((np.arange(2 ** k)[:, None] >> np.arange(k)[None, :]) & 1).astype(float)
    values = {}
    for j, axis in enumerate(axes):
        lo, hi = spec.axis_range(axis)
        lo = np.asarray(lo, dtype=float)[..., None]
        hi = np.asarray(hi, dtype=float)[..., None]
        values[axis] = lo + bits[:, j] * (hi - lo)
    base = spec.nominal_point()
    base = StagePoint(
        vcc=np.asarray(base.vcc)[..., None], vee=None if base.vee is None
        else np.asarray(base.vee)[..., None],
        r={k_: np.asarray(v)[..., None] for k_, v in base.r.items()},
        hfe=np.asarray(base.hfe)[..., None], vbe=np.asarray(base.vbe)[..., None],
        icbo=np.asarray(base.icbo)[..., None], ambient_c=np.asarray(base.ambient_c)[..., None])
    return spec.point_from(values, base), bits


def point_at_unit(spec: StageSpec, axes: tuple[str, ...], u: np.ndarray) -> StagePoint:
    values = {}
    for j, axis in enumerate(axes):
        lo, hi = (np.asarray(v, dtype=float) for v in spec.axis_range(axis))
        values[axis] = lo + u[..., j] * (hi - lo)
    return spec.point_from(values)


def _refine_max(spec: StageSpec, axes: tuple[str, ...], names: list[str],
                starts: dict[str, np.ndarray], rounds: int = 7,
                grid: int = 17) -> dict[str, tuple[float, np.ndarray]]:
    """Largest value of each quantity inside the unit box (vectorised pattern search).

    For every quantity and every start, each round tries, for each axis in
    turn, a grid of values around the current point with the other axes held,
    all in one batched evaluation; the grid shrinks by half each round.  The
    quantities are smooth in the parameters, so this converges to the interior
    stationary point (or a face or vertex) that the start leads to.
    """
    k = len(axes)
    cur = {q: starts[q].copy() for q in names}          # (n_starts, k)
    offsets = np.linspace(-1.0, 1.0, grid)
    width = 0.5
    for _ in range(rounds):
        cands = []
        for q in names:
            u = cur[q]                                  # (s, k)
            trial = np.repeat(u[:, None, None, :], k, axis=1).repeat(grid, axis=2)
            for j in range(k):
                trial[:, j, :, j] = np.clip(u[:, j, None] + width * offsets, 0.0, 1.0)
            cands.append(trial.reshape(-1, k))
        flat = np.concatenate(cands, axis=0)
        ev = evaluate(spec, point_at_unit(spec, axes, flat))
        pos = 0
        for q in names:
            s_count = cur[q].shape[0]
            n = s_count * k * grid
            vals = np.asarray(ev.quantities[q], dtype=float).reshape(-1)[pos:pos + n]
            vals = np.nan_to_num(vals, nan=-np.inf).reshape(s_count, k * grid)
            pts = flat[pos:pos + n].reshape(s_count, k * grid, k)
            best = np.argmax(vals, axis=1)
            cur[q] = pts[np.arange(s_count), best]
            pos += n
        width *= 0.5
    final = evaluate(spec, point_at_unit(spec, axes, np.concatenate([cur[q] for q in names])))
    out: dict[str, tuple[float, np.ndarray]] = {}
    pos = 0
    for q in names:
        s_count = cur[q].shape[0]
        vals = np.nan_to_num(np.asarray(final.quantities[q], dtype=float).reshape(-1)
                             [pos:pos + s_count], nan=-np.inf)
        i = int(np.argmax(vals))
        out[q] = (float(vals[i]), cur[q][i])
        pos += s_count
    return out


def worst_case(spec: StageSpec, *, refine: bool = True, self_heating: bool = True,
               quantities: Iterable[str] | None = None) -> WorstCase:
    """Extreme value analysis of one stage (scalar spec).

    Parameters
    ----------
    spec : StageSpec
        A single stage (no candidate arrays).
    refine : bool
        Refine the maxima of products inside the box (see module notes).
    self_heating : bool
        Where θJA is known, also evaluate every vertex with the device at its
        self-heated junction temperature (the bounds cover both).
    quantities : iterable of str, optional
        Which to report (default: currents, node voltages, VCE, powers, TJ, gain, rin).

    Returns
    -------
    WorstCase
    """
    axes = spec.axes()
    point, bits = vertex_points(spec, axes)
    ev = evaluate(spec, point)
    heated = None
    if self_heating and not np.all(np.isnan(np.asarray(spec.device.theta_ja, dtype=float))):
        # DESIGN §2: where θJA is known, the device is also evaluated at its self-heated
        # junction temperature; every bound covers both.
        heated = evaluate(spec, point, device_temp_c=self_heated_temperature(spec, point))
    names = list(quantities) if quantities is not None else \
        [*REPORTED, *(f"p_{r}" for r in spec.resistors)]
    refined = set(refined_quantities(spec)) if refine else set()
    bounds: dict[str, Bound] = {}
    table = {n: np.asarray(ev.quantities[n], dtype=float).reshape(-1) for n in names
             if n in ev.quantities and not np.all(np.isnan(ev.quantities[n]))}
    n_vertex = len(bits)
    if heated is not None:   # rows n_vertex.. are the same vertices, self-heated
        table = {n: np.concatenate([v, np.asarray(heated.quantities[n], dtype=float).reshape(-1)])
                 for n, v in table.items()}
        tj_heated = np.asarray(heated.temp_c, dtype=float).reshape(-1)
    to_refine = [n for n in table if n in refined] if axes else []
    starts = {}
    for n in to_refine:
        order = np.argsort(-np.nan_to_num(table[n], nan=-np.inf))[:4]
        starts[n] = np.vstack([bits[order % len(bits)], np.full((1, len(axes)), 0.5)])
    refined_max = _refine_max(spec, axes, to_refine, starts) if to_refine else {}
    def corner_of(i: int, u: np.ndarray) -> dict[str, dict[str, object]]:
        tj = float(tj_heated[i - n_vertex]) if i >= n_vertex else None
        return corner_setting(spec, dict(zip(axes, u, strict=True)), tj)

    for name, values in table.items():
        i_min, i_max = int(np.nanargmin(values)), int(np.nanargmax(values))
        v_min, v_max = float(values[i_min]), float(values[i_max])
        u_min, u_max = bits[i_min % n_vertex], bits[i_max % n_vertex]
        c_max = corner_of(i_max, u_max)
        if name in refined_max and refined_max[name][0] > v_max * (1 + 1e-12):
            v_max, u_max = refined_max[name]
            c_max = corner_of(0, u_max)
        bounds[name] = Bound(v_min, v_max, corner_of(i_min, u_min), c_max, u_min,
                             np.asarray(u_max))
    region = np.asarray(ev.op.region).reshape(-1)
    if heated is not None:
        region = np.concatenate([region, np.asarray(heated.op.region).reshape(-1)])
    bad = np.flatnonzero(region != 0)
    from .operating_point import region_names

    seen = tuple(sorted(set(region_names(region).tolist())))
    example = corner_of(int(bad[0]), bits[bad[0] % n_vertex]) if bad.size else None
    return WorstCase(axes=axes, bounds=bounds, n_vertices=len(bits), vertex_eval=ev,
                     regions_seen=seen, non_active_corners=int(bad.size),
                     non_active_example=example)


def rss(spec: StageSpec, quantity: str, rel_step: float = 1e-4) -> tuple[float, float, float]:
    """Root-sum-square spread of a quantity: (nominal, low, high).

    Derivatives are central differences at the nominal point over each axis,
    scaled by the axis half range.
    """
    nominal_point = spec.nominal_point()
    nominal = float(np.asarray(evaluate(spec, nominal_point).quantities[quantity]))
    total = 0.0
    for axis in spec.axes():
        lo, hi = (float(np.asarray(v)) for v in spec.axis_range(axis))
        mid = _mid_of(spec, nominal_point, axis)
        half = 0.5 * (hi - lo)
        h = max(abs(mid) * rel_step, half * rel_step, 1e-15)
        up = spec.point_from({axis: np.asarray(mid + h)}, nominal_point)
        dn = spec.point_from({axis: np.asarray(mid - h)}, nominal_point)
        f_up = float(np.asarray(evaluate(spec, up).quantities[quantity]))
        f_dn = float(np.asarray(evaluate(spec, dn).quantities[quantity]))
        slope = (f_up - f_dn) / (2 * h)
        total += (slope * half) ** 2
    spread = float(np.sqrt(total))
    return nominal, nominal - spread, nominal + spread


def _mid_of(spec: StageSpec, p: StagePoint, axis: str) -> float:
    if axis.startswith("R:"):
        return float(np.asarray(p.r[axis[2:]]))
    attr = {"ambient": "ambient_c"}.get(axis, axis)
    return float(np.asarray(getattr(p, attr)))
