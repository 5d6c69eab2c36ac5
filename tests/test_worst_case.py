"""Extreme value analysis, RSS and Monte Carlo against sampling of the tolerance box.

Sources: the bounds are checked against dense uniform sampling of the box's
interior (a property of the method, DESIGN §2); the divider's monotonicity is
DESIGN §2's claim, checked numerically; the stability factors against the
closed forms recalled from standard texts (REFERENCES.md) as implemented in
stockbias.analysis.stability.
"""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.analysis.constraints import Limit
from stockbias.analysis.montecarlo import monte_carlo
from stockbias.analysis.stability import s_icbo, s_vbe
from stockbias.analysis.stage import (
    DeviceSpec,
    ResistorSpec,
    StageSpec,
    evaluate,
)
from stockbias.analysis.worst_case import point_at_unit, rss, vertex_points, worst_case

NETWORK_VALUES = {
    "divider": {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3},
    "collector_feedback": {"RC": 4.7e3, "RB": 220e3, "RE": 470.0},
    "dual_supply": {"RB": 10e3, "RE": 4.7e3, "RC": 4.7e3},
    "fixed_base": {"RB": 1.5e6, "RC": 1.5e3, "RE": 330.0},
}


def make_spec(network: str, polarity: str = "NPN", *, tol: float = 0.05, drift: float = 0.01,
              model: str = "constant_vbe", icbo: float = 50e-9, theta_ja: float = 200.0,
              **overrides) -> StageSpec:
    values = dict(NETWORK_VALUES[network])
    if network == "dual_supply" and polarity == "PNP":
        # the PNP's emitter goes to +12 V and its collector to -6 V (DESIGN §2 rails)
        values.update(RE=10e3, RC=2.2e3)
    values.update(overrides)
    resistors = {role: ResistorSpec(v, tol, drift) for role, v in values.items()}
    return StageSpec(network, resistors,
                     DeviceSpec(polarity, 100, 300, 0.6, 0.72, 0.2, icbo, pd_max_w=0.625,
                                theta_ja=theta_ja),
                     vcc=12.0, vcc_tol=0.05, vee=-6.0 if network == "dual_supply" else None,
                     vee_tol=0.05, ambient_min_c=-20, ambient_max_c=70, model=model,
                     load=10e3)


CASES = [(n, p) for n in NETWORK_VALUES for p in ("NPN", "PNP")]
QUANTITIES = ("ic", "ib", "ie", "vb", "vc", "ve", "vce", "pd", "supply_power", "tj")


@pytest.mark.parametrize(("network", "polarity"), CASES)
def test_interior_samples_stay_inside_the_bounds(network: str, polarity: str) -> None:
    # Property of the method (DESIGN §2): vertices bound monotone quantities; products are
    # refined inside the box. 20 000 uniform interior points must not escape the bounds.
    spec = make_spec(network, polarity)
    wc = worst_case(spec)
    assert wc.non_active_corners == 0
    rng = np.random.default_rng(7)
    u = rng.uniform(size=(20000, len(wc.axes)))
    ev = evaluate(spec, point_at_unit(spec, wc.axes, u))
    for q in (*QUANTITIES, *(f"p_{r}" for r in spec.resistors)):
        values = np.asarray(ev.quantities[q])
        b = wc.bounds[q]
        span = max(abs(b.max - b.min), 1e-15)
        assert values.min() >= b.min - 1e-9 * span, q
        assert values.max() <= b.max + 1e-9 * span, q


def test_collector_feedback_rc_power_peaks_inside_the_box() -> None:
    # DESIGN §2: RC's dissipation in collector feedback, P = V²·RC/(RC + X)² with
    # V = VCC − VBE and X = RE + RB/(β+1) (no leakage), peaks at RC = X at V²/(4X).  Over
    # the box the largest is at V max, X min: VCC +5 %, VBE(70 °C) = 0.6 − 2 mV/°C·45 °C,
    # β(70 °C) = 300·(343.15/298.15)^1.5, RB −20 %; X = 323 Ω lies inside RC's 330 Ω ±20 %
    # band, so no vertex reaches it (hand calculation from the closed form).  No θJA:
    # self-heating is off and cannot mask a missed interior point.
    spec = make_spec("collector_feedback", tol=0.2, drift=0.0, icbo=0.0, theta_ja=float("nan"),
                     RC=330.0, RB=150e3, RE=0.0)
    wc = worst_case(spec)
    v = 12.6 - (0.6 - 2e-3 * 45.0)
    beta = 300.0 * (343.15 / 298.15) ** 1.5
    x = 150e3 * 0.8 / (beta + 1.0)
    assert 330.0 * 0.8 < x < 330.0 * 1.2
    expected = v * v / (4.0 * x)
    b = wc.bounds["p_RC"]
    vertex_max = float(np.nanmax(wc.vertex_eval.quantities["p_RC"]))
    assert vertex_max < expected * (1 - 1e-4)        # the vertices miss the peak
    assert b.max == pytest.approx(expected, rel=1e-6)
    assert b.corner_max["RC"]["setting"] == "interior"
    assert b.corner_max["RC"]["value"] == pytest.approx(x, rel=1e-2)
    rng = np.random.default_rng(3)
    u = rng.uniform(size=(50000, len(wc.axes)))
    sampled = float(np.max(evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["p_RC"]))
    assert sampled <= b.max * (1 + 1e-12)


def _box_samples(spec: StageSpec, axes: tuple[str, ...], n: int, seed: int) -> np.ndarray:
    """n points of the unit box: uniform, with half of the coordinates snapped to a face."""
    rng = np.random.default_rng(seed)
    u = rng.uniform(size=(n, len(axes)))
    return np.where(rng.uniform(size=u.shape) < 0.5, np.round(u), u)


def _pd_peak_spec(network: str, polarity: str) -> StageSpec:
    """A stage whose transistor dissipation peaks inside the box, found by sampling.

    PD = IC·(V − IC·RC) peaks at IC = V/(2·RC) (V: the voltage across RC and the
    transistor).  RC is tried at several multiples of V/(2·IC max); the one kept is the
    design, active at every vertex, where dense sampling of the box beats the best
    vertex by the widest margin.  No θJA: self-heating is off.
    """
    base = make_spec(network, polarity, theta_ja=float("nan"))
    op = evaluate(base, base.nominal_point()).op
    key = "ie" if network == "collector_feedback" else "ic"
    rc0 = base.resistors["RC"].value
    current = float(np.asarray(getattr(op, key)))
    v = float(np.asarray(op.vce)) + current * rc0
    peak = worst_case(base, refine=False).bounds[key].max
    best, best_gain = base, -np.inf
    for factor in np.linspace(0.8, 2.0, 25):
        spec = make_spec(network, polarity, theta_ja=float("nan"), RC=factor * v / (2 * peak))
        wc = worst_case(spec, refine=False)
        if wc.non_active_corners:
            continue
        u = _box_samples(spec, wc.axes, 3000, 1)
        sampled = np.max(evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["pd"])
        gain = sampled / wc.bounds["pd"].max
        if gain > best_gain:
            best, best_gain = spec, gain
    return best


@pytest.mark.parametrize(("network", "polarity"), CASES)
def test_transistor_dissipation_peak_inside_beats_every_vertex(network: str,
                                                                polarity: str) -> None:
    # PD = IC·VCE peaks where VCE is near half the available voltage (DESIGN §2).  Without
    # θJA nothing else widens the bound: the interior search alone must find the peak, and
    # 30 000 samples of the box (uniform and on its faces) must not exceed it.
    spec = _pd_peak_spec(network, polarity)
    wc = worst_case(spec)
    assert wc.non_active_corners == 0
    vertex_max = float(np.max(wc.vertex_eval.quantities["pd"]))
    b = wc.bounds["pd"]
    assert b.max > vertex_max * (1 + 1e-6)
    assert any(v["setting"] == "interior" for v in b.corner_max.values())
    assert worst_case(spec, refine=False).bounds["pd"].max == pytest.approx(vertex_max,
                                                                             rel=1e-15)
    u = _box_samples(spec, wc.axes, 30000, 5)
    sampled = np.asarray(evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["pd"])
    assert sampled.max() <= b.max * (1 + 1e-12)
    assert sampled.max() > vertex_max        # the samples see the interior peak too


@pytest.mark.parametrize(("role", "direction"),
                         [("R1", -1), ("R2", +1), ("RE", -1), ("RC", 0)])
def test_divider_ic_monotone_in_each_resistor(role: str, direction: int) -> None:
    # DESIGN §2: with constant VBE, divider IC falls with R1 and RE, rises with R2, and does
    # not depend on RC in the active region. Checked over random other parameters.
    spec = make_spec("divider", tol=0.1)
    axes = spec.axes()
    j = axes.index(f"R:{role}")
    rng = np.random.default_rng(11)
    u = rng.uniform(size=(5000, len(axes)))
    lo, hi = u.copy(), u.copy()
    lo[:, j], hi[:, j] = 0.2, 0.8
    d_ic = (evaluate(spec, point_at_unit(spec, axes, hi)).quantities["ic"]
            - evaluate(spec, point_at_unit(spec, axes, lo)).quantities["ic"])
    if direction == 0:
        assert np.max(np.abs(d_ic)) < 1e-15
    else:
        assert np.all(np.sign(d_ic) == direction)


def test_rss_lies_within_the_extreme_values() -> None:
    spec = make_spec("divider")
    wc = worst_case(spec)
    nominal, low, high = rss(spec, "ic")
    assert wc.bounds["ic"].min < low < nominal < high < wc.bounds["ic"].max


def test_stability_factors_match_closed_forms() -> None:
    # Numerical derivatives of IC (analysis.check._stability) against the closed forms
    # S_ICBO = (1+β)/(1 + β·RE/(RT+RE)), S_VBE = −β/(RT + (1+β)·RE) (REFERENCES.md, recalled).
    from stockbias.analysis.check import _stability

    spec = make_spec("divider", icbo=20e-9)
    st = _stability(spec, "active")
    beta = np.sqrt(100 * 300)
    rt = 47e3 * 10e3 / 57e3
    assert st["s_icbo"] == pytest.approx(float(s_icbo(beta, rt, 1e3)), rel=1e-4)
    assert st["s_vbe"] == pytest.approx(float(s_vbe(beta, rt, 1e3)), rel=1e-4)


@pytest.mark.parametrize(("network", "polarity"), CASES)
def test_monte_carlo_boards_stay_inside_the_extreme_values(network: str,
                                                            polarity: str) -> None:
    # Every drawn board at every environment corner is a point of the tolerance box, so it
    # must lie within the EVA bounds (DESIGN §2 property).
    spec = make_spec(network, polarity)
    wc = worst_case(spec)
    limits = [Limit("ic_min", "ic", "min", 0.0, "A", "")]
    mc = monte_carlo(spec, limits, 5000, 5)
    span = wc.bounds["ic"].max - wc.bounds["ic"].min
    assert mc.ic.min >= wc.bounds["ic"].min - 1e-9 * span    # exact extremes seen
    assert mc.ic.max <= wc.bounds["ic"].max + 1e-9 * span
    assert mc.vce.min >= wc.bounds["vce"].min - 1e-9
    assert mc.ic.below == mc.ic.above == mc.ic.undefined == 0
    assert mc.yield_.yield_ == 1.0


def test_monte_carlo_is_reproducible_and_its_interval_covers_it() -> None:
    spec = make_spec("divider")
    limits = [Limit("ic_max", "ic", "max", 1.45e-3, "A", "")]
    a = monte_carlo(spec, limits, 4000, 1)
    b = monte_carlo(spec, limits, 4000, 1)
    assert a.yield_.yield_ == b.yield_.yield_
    assert 0.0 < a.yield_.yield_ < 1.0
    assert a.yield_.low <= a.yield_.yield_ <= a.yield_.high


def test_exponential_model_bounds_also_hold_inside() -> None:
    spec = make_spec("divider", model="exponential")
    wc = worst_case(spec)
    rng = np.random.default_rng(2)
    u = rng.uniform(size=(4000, len(wc.axes)))
    ic = evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["ic"]
    assert ic.min() >= wc.bounds["ic"].min * (1 - 1e-9)
    assert ic.max() <= wc.bounds["ic"].max * (1 + 1e-9)


def test_saturated_corners_are_counted_and_flagged() -> None:
    # RC far too large: the stage saturates at the high-current corners.
    spec = make_spec("divider", RC=8.2e3)
    wc = worst_case(spec)
    assert wc.non_active_corners > 0
    assert "saturated" in wc.regions_seen
    assert wc.bounds["vce"].min == pytest.approx(0.2, abs=1e-12)   # VCE(sat) of the spec


def test_self_heated_junction_widens_the_bounds() -> None:
    # DESIGN §2: where θJA is known the device is also evaluated at TJ = TA + θJA·PD(TJ).
    # IC rises with temperature (β up, VBE down), so the self-heated IC max is higher.
    spec = make_spec("divider")
    heated = worst_case(spec)
    ambient_only = worst_case(spec, self_heating=False)
    assert heated.bounds["ic"].max > ambient_only.bounds["ic"].max
    corner = heated.bounds["ic"].corner_max
    assert corner["junction_c"]["setting"] == "self_heated"
    tj = corner["junction_c"]["value"]
    # the fixed point: TJ − TA = θJA·PD at that corner (θJA 200 °C/W in make_spec)
    assert tj > corner["ambient_c"]["value"]
    assert heated.bounds["ic"].min == pytest.approx(ambient_only.bounds["ic"].min, rel=1e-12)


def _straddling_spec(network: str, polarity: str, model: str) -> StageSpec:
    """RC raised from its nominal value until 20–50 % of the vertices saturate.

    The saturation boundary then runs through the box.  No θJA: self-heating is off.
    """
    base = make_spec(network, polarity, model=model, theta_ja=float("nan"))
    rc0 = base.resistors["RC"].value
    for factor in np.linspace(1.0, 4.0, 61):
        spec = make_spec(network, polarity, model=model, theta_ja=float("nan"), RC=rc0 * factor)
        point, _ = vertex_points(spec)
        share = float(np.mean(np.asarray(evaluate(spec, point, small_signal=False).op.region)
                              != 0))
        if 0.2 <= share <= 0.5:
            return spec
    raise AssertionError("no RC puts the saturation boundary inside the box")


# collector feedback is left out: with constant VBE its VCB = IB·RB > 0, it never saturates
STRADDLING = [("divider", "NPN", "constant_vbe"), ("divider", "PNP", "exponential"),
              ("fixed_base", "PNP", "constant_vbe"), ("fixed_base", "NPN", "exponential"),
              ("dual_supply", "NPN", "constant_vbe"), ("dual_supply", "PNP", "exponential")]


@pytest.mark.parametrize(("network", "polarity", "model"), STRADDLING)
def test_bounds_hold_where_saturation_begins_inside_the_box(network: str, polarity: str,
                                                            model: str) -> None:
    # Currents and node voltages are monotone inside a region but not across its boundary:
    # every bound must still contain 30 000 samples of the box (uniform, half on faces).
    spec = _straddling_spec(network, polarity, model)
    wc = worst_case(spec)
    assert 0 < wc.non_active_corners < wc.n_vertices
    u = _box_samples(spec, wc.axes, 30000, 11)
    ev = evaluate(spec, point_at_unit(spec, wc.axes, u))
    for q in ("ic", "ib", "ie", "vb", "vc", "ve", "vce"):
        values = np.asarray(ev.quantities[q])
        b = wc.bounds[q]
        span = max(abs(b.max - b.min), 1e-15)
        assert values.max() <= b.max + 1e-12 * span, q
        assert values.min() >= b.min - 1e-12 * span, q


def test_vertices_alone_miss_ic_max_where_saturation_begins_inside() -> None:
    # Past the saturation edge more base drive lowers IC (IB rises, so does VE): the IC
    # maximum sits on the edge inside the box.  The vertices miss it by about 6e-4; the
    # boundary search finds it (and dense sampling confirms nothing lies above it).
    spec = make_spec("divider", theta_ja=float("nan"), RC=6.8e3)
    wc = worst_case(spec)
    vertex_max = float(np.nanmax(wc.vertex_eval.quantities["ic"]))
    assert worst_case(spec, refine=False).bounds["ic"].max == vertex_max
    u = _box_samples(spec, wc.axes, 30000, 13)
    sampled = float(np.max(evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["ic"]))
    assert sampled > vertex_max * (1 + 1e-4)
    assert wc.bounds["ic"].max >= sampled
    assert any(v["setting"] == "interior" for v in wc.bounds["ic"].corner_max.values())


def test_worst_case_tj_is_the_thermal_summary_figure() -> None:
    # One figure for the hottest junction: the worst-case TJ is the self-heated fixed
    # point TJ = TA + θJA·PD(TJ) at its corner, the same number the thermal summary
    # gives, and no self-heated vertex is hotter.
    from stockbias.analysis.check import _thermal
    from stockbias.analysis.stage import self_heated_temperature

    spec = _pd_peak_spec("divider", "NPN")
    spec = make_spec("divider", RC=spec.resistors["RC"].value)     # θJA 200 °C/W
    wc = worst_case(spec)
    b = wc.bounds["tj"]
    assert b.corner_max["junction_c"]["setting"] == "self_heated"
    assert b.max == b.corner_max["junction_c"]["value"]
    assert _thermal(spec, wc)["tj_self_heated_c"] == b.max
    point = point_at_unit(spec, wc.axes, b.u_max)
    at_tj = evaluate(spec, point, device_temp_c=np.asarray(b.max))
    ta = float(np.asarray(point.ambient_c))
    assert b.max == pytest.approx(ta + 200.0 * float(np.asarray(at_tj.op.pd)), abs=1e-6)
    vertices, _ = vertex_points(spec)
    assert np.max(self_heated_temperature(spec, vertices)) <= b.max + 1e-4


def test_bounds_of_a_few_quantities_alone() -> None:
    # Asking for IC and VCE only (no products to refine) gives the same IC and VCE bounds,
    # saturation inside the box included.
    spec = make_spec("divider", theta_ja=float("nan"), RC=6.8e3)
    few = worst_case(spec, quantities=["ic", "vce"])
    full = worst_case(spec)
    assert set(few.bounds) == {"ic", "vce"}
    for q in ("ic", "vce"):
        assert few.bounds[q].max == pytest.approx(full.bounds[q].max, rel=1e-9)
        assert few.bounds[q].min == pytest.approx(full.bounds[q].min, rel=1e-9)
