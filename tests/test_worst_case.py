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
from stockbias.analysis.worst_case import point_at_unit, rss, worst_case

NETWORK_VALUES = {
    "divider": {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3},
    "collector_feedback": {"RC": 4.7e3, "RB": 220e3, "RE": 470.0},
    "dual_supply": {"RB": 10e3, "RE": 4.7e3, "RC": 4.7e3},
    "fixed_base": {"RB": 1.5e6, "RC": 1.5e3, "RE": 330.0},
}


def make_spec(network: str, polarity: str = "NPN", *, tol: float = 0.05, drift: float = 0.01,
              model: str = "constant_vbe", icbo: float = 50e-9, **overrides) -> StageSpec:
    values = {**NETWORK_VALUES[network], **overrides}
    if network == "dual_supply" and polarity == "PNP":
        # the PNP's emitter goes to +12 V and its collector to -6 V (DESIGN §2 rails)
        values.update(RE=10e3, RC=2.2e3)
    resistors = {role: ResistorSpec(v, tol, drift) for role, v in values.items()}
    return StageSpec(network, resistors,
                     DeviceSpec(polarity, 100, 300, 0.6, 0.72, 0.2, icbo, pd_max_w=0.625,
                                theta_ja=200.0),
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
    # DESIGN §2: RC's dissipation in collector feedback peaks where RC = RE + RB/(β+1).
    # With RC = 2.2 k, RB = 220 k, RE = 0, β ≈ 100..300 the peak lies inside RC's ±20 % band.
    spec = make_spec("collector_feedback", tol=0.2, drift=0.0, RC=1.0e3, RB=150e3, RE=0.0)
    wc = worst_case(spec)
    vertex_max = float(np.nanmax(wc.vertex_eval.quantities["p_RC"]))
    b = wc.bounds["p_RC"]
    assert b.max >= vertex_max
    assert b.corner_max["RC"]["setting"] in ("interior", "min", "max")
    rng = np.random.default_rng(3)
    u = rng.uniform(size=(50000, len(wc.axes)))
    sampled = float(np.max(evaluate(spec, point_at_unit(spec, wc.axes, u)).quantities["p_RC"]))
    assert sampled <= b.max * (1 + 1e-9)


def test_transistor_dissipation_peak_is_found_inside() -> None:
    # PD = IC·VCE is largest where VCE is near half the available voltage (DESIGN §2): choose
    # a stage whose tolerance box straddles that point, so the maximum is not at a vertex.
    spec = make_spec("divider", tol=0.1, drift=0.0, R1=39e3, R2=10e3, RC=2.7e3, RE=1e3)
    wc = worst_case(spec)
    vertex_max = float(np.max(wc.vertex_eval.quantities["pd"]))
    assert wc.bounds["pd"].max > vertex_max * (1 + 1e-6)
    assert any(v["setting"] == "interior" for v in wc.bounds["pd"].corner_max.values())


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
    st = _stability(spec)
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
    mc = monte_carlo(spec, limits, 5000, np.random.default_rng(5))
    span = wc.bounds["ic"].max - wc.bounds["ic"].min
    assert mc.ic.min() >= wc.bounds["ic"].min - 1e-9 * span
    assert mc.ic.max() <= wc.bounds["ic"].max + 1e-9 * span
    assert mc.vce.min() >= wc.bounds["vce"].min - 1e-9
    assert mc.yield_.yield_ == 1.0


def test_monte_carlo_is_reproducible_and_its_interval_covers_it() -> None:
    spec = make_spec("divider")
    limits = [Limit("ic_max", "ic", "max", 1.45e-3, "A", "")]
    a = monte_carlo(spec, limits, 4000, np.random.default_rng(1))
    b = monte_carlo(spec, limits, 4000, np.random.default_rng(1))
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
