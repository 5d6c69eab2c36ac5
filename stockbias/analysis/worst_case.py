"""Extreme value analysis (EVA) and root-sum-square over a stage's tolerance box.

Vertices
    Every quantity is evaluated at all 2^k vertices of the box (k axes that
    vary, see :mod:`stockbias.analysis.stage`).  For a quantity that is
    monotone in each parameter separately, the bounds sit at vertices and
    this is exact.  That holds for the currents and node voltages of the four
    networks in the active region (proved for the divider in DESIGN §2 and
    checked for all four by interior sampling in the tests).

Region boundaries
    Across the onset of saturation or cut-off a current or voltage can turn
    back (past the saturation edge more base drive lowers IC), so where the
    vertices do not all share one region, the points where the boundary
    crosses an edge of the box are found by bisection, and every current and
    node voltage is pushed to both extremes along the boundary by a pattern
    search (:mod:`stockbias.analysis.box_search`).

Interior points
    Products peak inside the box: transistor dissipation IC·VCE is largest
    where VCE is near half the available voltage, RC's dissipation in
    collector feedback where RC = RE + RB/(β+1).  For every dissipation, the
    supply power and TJ, the maximum is searched along the most promising
    edges (golden section) and then inside the box (pattern search) from the
    best points found.  Every point found is also evaluated self-heated where
    θJA is known; the bound is the largest value at any point evaluated.  The
    largest TJ is the self-heated fixed point TJ = TA + θJA·PD(TJ) at the
    hottest candidates, the figure the thermal summary gives.  The tests
    sample the box densely to check every bound.

Root-sum-square
    nominal ± sqrt(Σ (∂f/∂p · Δp)²) with Δp the half range of each axis and
    the derivatives taken numerically at the nominal point.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from .box_search import (
    boundary_points,
    edge_grid,
    edge_maxima,
    nan_low,
    point_at_unit,
    refine_extremes,
    self_heated_tj,
)
from .stage import (
    SMALL_SIGNAL_QUANTITIES,
    Evaluation,
    StagePoint,
    StageSpec,
    evaluate,
    self_heated_temperature,
)

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

#: Currents and node voltages: monotone inside a region, refined where a region
#: boundary runs through the box.
BOUNDARY_REFINED = ("ic", "ib", "ie", "vb", "vc", "ve", "vce")

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
    #: region name → how many of the ``n_vertices`` corners are in it (a corner counts as
    #: saturated or cut off when its ambient or its self-heated solution is)
    corner_regions: dict[str, int] = field(default_factory=dict)

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


def worst_case(spec: StageSpec, *, refine: bool = True, self_heating: bool = True,
               quantities: Iterable[str] | None = None) -> WorstCase:
    """Extreme value analysis of one stage (scalar spec).

    The bounds are taken over: every vertex; where θJA is known, every vertex again
    with the device at its self-heated junction temperature; with ``refine``, the
    points where a region boundary (the onset of saturation or cut-off) crosses an
    edge of the box, and the interior maxima of the products (powers, TJ) found by
    a pattern search, each also self-heated where θJA is known.  The largest
    junction temperature is always the self-heated one (TJ = TA + θJA·PD(TJ), θJA
    from the row or derived from the PD rating), solved at the hottest candidates:
    the same figure the thermal summary gives for that corner.

    Parameters
    ----------
    spec : StageSpec
        A single stage (no candidate arrays).
    refine : bool
        Also search region boundaries on the edges and the interior maxima of
        products (see above).
    self_heating : bool
        Where θJA is known, also evaluate every point with the device at its
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
    heat = self_heating and not np.all(np.isnan(np.asarray(spec.device.theta_ja, dtype=float)))
    names = list(quantities) if quantities is not None else \
        [*REPORTED, *(f"p_{r}" for r in spec.resistors)]
    names = [n for n in dict.fromkeys(names) if n in ev.quantities]
    k = len(axes)
    # Rows of the table: unit point, device temperature (NaN: the ambient), values.
    row_u: list[np.ndarray] = []
    row_tj: list[np.ndarray] = []
    row_q: dict[str, list[np.ndarray]] = {n: [] for n in names}

    def add(u: np.ndarray, e: Evaluation, tj: np.ndarray | None) -> None:
        row_u.append(u.reshape(-1, k))
        m = row_u[-1].shape[0]
        row_tj.append(np.full(m, np.nan) if tj is None else np.asarray(tj, dtype=float)
                      .reshape(-1))
        for n in names:
            row_q[n].append(np.broadcast_to(np.asarray(e.quantities[n], dtype=float)
                                            .reshape(-1), (m,)))

    def add_points(u: np.ndarray) -> None:
        pts = point_at_unit(spec, axes, u)
        cold = evaluate(spec, pts)
        add(u, cold, None)
        if heat:
            tj = self_heated_temperature(spec, pts, cold.op)
            add(u, evaluate(spec, pts, device_temp_c=tj), tj)

    add(bits, ev, None)
    region = np.asarray(ev.op.region).reshape(-1)
    heated = None
    if heat:
        # DESIGN §2: where θJA is known, the device is also evaluated at its self-heated
        # junction temperature; every bound covers both.
        tj_v = self_heated_temperature(spec, point, ev.op)
        heated = evaluate(spec, point, device_temp_c=tj_v)
        add(bits, heated, tj_v)
        region = np.concatenate([region, np.asarray(heated.op.region).reshape(-1)])
    if refine and k:
        vertex_region = np.asarray(ev.op.region).reshape(-1)
        edge_u = boundary_points(spec, axes, bits, vertex_region)
        if edge_u.size:
            add_points(edge_u)
        # Maxima of products inside the box; where the region changes inside the box,
        # both extremes of every quantity along the region boundary.
        targets = [(n, 1) for n in names if n in refined_quantities(spec)]
        if np.any(vertex_region != vertex_region[0]):
            targets += [(n, sign) for n in names if n in BOUNDARY_REFINED
                        for sign in (1, -1) if (n, sign) not in targets]
        # Starts: the best rows so far, the centre, and the best points of a grid along
        # every edge (an interior extreme is usually reached from an edge with the other
        # axes at their favourable ends).
        if targets:
            edge_u, edge_axis = edge_grid(bits)
            edge_ev = evaluate(spec, point_at_unit(spec, axes, edge_u), small_signal=any(
                t[0] in SMALL_SIGNAL_QUANTITIES for t in targets))
            edge_vals = {t: nan_low(t[1] * np.asarray(edge_ev.quantities[t[0]],
                                                      dtype=float).reshape(-1))
                         for t in targets}
            line_u = edge_maxima(spec, axes, edge_u, edge_axis, edge_vals)
            if line_u.size:
                add_points(line_u)
        all_u = np.concatenate(row_u)
        starts = {}
        for name, sign in targets:
            vals = nan_low(sign * np.concatenate(row_q[name]))
            if np.all(np.isinf(vals)):
                continue
            order = np.argsort(-vals)[:3]
            starts[(name, sign)] = np.vstack([all_u[order], np.full((1, k), 0.5)])
        if starts:
            add_points(np.vstack(refine_extremes(spec, axes, starts)))
    all_u = np.concatenate(row_u) if k else np.zeros((len(row_u), 0))
    all_tj = np.concatenate(row_tj)
    table = {n: np.concatenate(v) for n, v in row_q.items()}
    table = {n: v for n, v in table.items() if not np.all(np.isnan(v))}

    described: dict[int, dict[str, dict[str, object]]] = {}

    def corner_of(i: int) -> dict[str, dict[str, object]]:
        # many quantities share their extreme rows: each row is described once (a copy
        # per bound, so no two bounds share a dict)
        if i not in described:
            tj = None if np.isnan(all_tj[i]) else float(all_tj[i])
            described[i] = corner_setting(spec, dict(zip(axes, all_u[i], strict=True)), tj)
        return {axis: dict(v) for axis, v in described[i].items()}

    bounds: dict[str, Bound] = {}
    for name, values in table.items():
        i_min, i_max = int(np.nanargmin(values)), int(np.nanargmax(values))
        v_max, c_max, u_max = float(values[i_max]), corner_of(i_max), all_u[i_max]
        if name == "tj":
            # the hottest junction is the self-heated one, solved at the hottest candidates
            order = np.argsort(-nan_low(values))
            seen: list[np.ndarray] = []
            for i in order:
                if len(seen) == 4:
                    break
                if not any(np.allclose(all_u[i], u) for u in seen):
                    seen.append(all_u[i])
            u_max = seen[int(np.argmax(self_heated_tj(spec, axes, np.vstack(seen))))]
            best = float(self_heated_tj(spec, axes, u_max[None, :])[0])
            v_max = best
            c_max = corner_setting(spec, dict(zip(axes, u_max, strict=True)), v_max)
        bounds[name] = Bound(float(values[i_min]), v_max, corner_of(i_min), c_max,
                             all_u[i_min], np.asarray(u_max))
    bad = np.flatnonzero(region != 0)
    from .operating_point import region_names

    seen_regions = tuple(sorted(set(region_names(region).tolist())))
    n_vertex = len(bits)
    example = None
    if bad.size:
        i = int(bad[0])
        tj_ex = None if i < n_vertex else float(all_tj[i])
        example = corner_setting(spec, dict(zip(axes, bits[i % n_vertex], strict=True)), tj_ex)
    # a corner counts once, whether it leaves the active region at the ambient, self-heated,
    # or both (the self-heated rows repeat the vertices in order)
    n_bad = int(np.unique(bad % n_vertex).size) if n_vertex else int(bad.size)
    per_corner = region[:n_vertex]
    if region.size >= 2 * n_vertex:  # the self-heated solutions of the same vertices
        per_corner = np.where(per_corner != 0, per_corner, region[n_vertex:2 * n_vertex])
    names_at = region_names(per_corner).tolist()
    corner_regions = {name: names_at.count(name) for name in sorted(set(names_at))}
    return WorstCase(axes=axes, bounds=bounds, n_vertices=n_vertex, vertex_eval=ev,
                     regions_seen=seen_regions, non_active_corners=n_bad,
                     non_active_example=example, corner_regions=corner_regions)


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
