"""Operating-point physics: networks, device laws, both solvers, both polarities."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import constants

from stockbias.analysis.device import (
    GummelPoon,
    beta_at,
    gummel_poon_at,
    icbo_at,
    saturation_current_at,
    saturation_current_from_vbe,
    thermal_voltage,
    vbe_at,
)
from stockbias.analysis.operating_point import (
    ACTIVE,
    CUTOFF,
    SATURATED,
    OperatingPoint,
    region_names,
    solve_constant_vbe,
    solve_exponential,
)
from stockbias.topologies import NETWORKS, get_network, rail_voltages

NETWORK_NAMES = sorted(NETWORKS)
T25_K = 298.15


def _log_uniform(rng, lo, hi, size):
    return np.exp(rng.uniform(np.log(lo), np.log(hi), size))


def random_stage(rng, network, n):
    """Random resistances and supplies, wide enough to reach every region."""
    net = get_network(network)
    r = {}
    for role in net.roles:
        values = _log_uniform(rng, 100.0, 1e6, n)
        if role.optional:
            values[rng.random(n) < 0.3] = 0.0
        r[role.name] = values
    if net.supply == "dual":  # either rail may feed the emitter (NPN: VEE, PNP: VCC)
        vcc = rng.uniform(0.3, 30.0, n)
        vee = rng.uniform(-15.0, -0.3, n)
    else:
        vcc = rng.uniform(3.0, 30.0, n)
        vee = None
    return r, vcc, vee


def random_device(rng, n):
    return {
        "beta": rng.uniform(30.0, 500.0, n),
        "vbe": rng.uniform(0.55, 0.75, n),
        "vce_sat": rng.uniform(0.05, 0.3, n),
        "icbo": np.where(rng.random(n) < 0.5, 0.0, _log_uniform(rng, 1e-10, 1e-7, n)),
    }


def random_gummel_poon(rng, n):
    vaf = np.where(rng.random(n) < 0.5, np.inf, rng.uniform(20.0, 150.0, n))
    return GummelPoon(
        is_a=_log_uniform(rng, 1e-16, 1e-12, n),
        bf=rng.uniform(30.0, 500.0, n),
        br=rng.uniform(0.5, 10.0, n),
        nf=rng.uniform(1.0, 1.05, n),
        nr=rng.uniform(1.0, 1.1, n),
        vaf=vaf,
    )


def mirrored_supplies(network, vcc, vee):
    """Supplies of the PNP stage that is the exact mirror of the NPN one."""
    if get_network(network).supply == "dual":
        return -vee, -vcc  # PNP: RAIL_C = VEE' = -VCC, RAIL_E = VCC' = -VEE
    return vcc, vee


def mirrored_voltage(network, v_npn, vcc):
    """Node voltage of the mirrored PNP stage (single supply: shifted by VCC)."""
    if get_network(network).supply == "dual":
        return -v_npn
    return vcc - v_npn


def kcl_kvl_residuals(op: OperatingPoint, network, rails):
    """Largest KCL residual (ampere) and KVL residual (volt) of a solution."""
    net = get_network(network)
    sign = 1.0 if op.polarity == "NPN" else -1.0
    v = {"B": op.vb, "C": op.vc, "E": op.ve, **{k: np.broadcast_to(x, op.shape)
                                               for k, x in rails.items()}}
    device_out = {"B": op.ib, "C": op.ic, "E": -op.ie}
    kcl = 0.0
    for node in ("B", "C", "E"):
        total = device_out[node].copy()
        for role in net.roles:
            if role.node_a == node:
                total += op.resistor_current(role.name)
            elif role.node_b == node:
                total -= op.resistor_current(role.name)
        kcl = max(kcl, float(np.max(np.abs(total))))
    kvl = 0.0
    for role in net.roles:
        drop = sign * (v[role.node_a] - v[role.node_b])
        res = op.resistances[role.name]
        kvl = max(kvl, float(np.max(np.abs(drop - op.resistor_current(role.name) * res))))
    return kcl, kvl


# --------------------------------------------------------------------------- networks


def test_registry_names_and_roles():
    # DESIGN §3 role contract
    assert NETWORK_NAMES == ["collector_feedback", "divider", "dual_supply", "fixed_base"]
    assert get_network("divider").role_names == ("R1", "R2", "RC", "RE")
    assert get_network("collector_feedback").optional_roles == ("RE",)
    assert get_network("fixed_base").optional_roles == ("RE",)
    assert get_network("dual_supply").optional_roles == ()


def test_unknown_network_lists_valid_names():
    with pytest.raises(ValueError, match=r"divider.*dual_supply.*fixed_base"):
        get_network("emitter_follower")


@pytest.mark.parametrize(
    ("network", "polarity", "expected"),
    [
        ("divider", "NPN", (12.0, 0.0)),
        ("divider", "PNP", (0.0, 12.0)),
        ("dual_supply", "NPN", (12.0, -5.0)),
        ("dual_supply", "PNP", (-5.0, 12.0)),
    ],
)
def test_rail_voltages(network, polarity, expected):
    # DESIGN §2 rail convention
    rails = rail_voltages(get_network(network), polarity, 12.0, -5.0)
    assert (float(rails["RAIL_C"]), float(rails["RAIL_E"])) == expected
    assert float(rails["GND"]) == 0.0


def test_bad_inputs_are_rejected():
    with pytest.raises(ValueError, match="R2 is required"):
        solve_constant_vbe("divider", {"R1": 1e4, "RC": 1e3, "RE": 1e3}, "NPN", 12, None,
                           100, 0.65, 0.2)
    with pytest.raises(ValueError, match="no role"):
        solve_constant_vbe("fixed_base", {"RB": 1e5, "RC": 1e3, "R9": 1.0}, "NPN", 12, None,
                           100, 0.65, 0.2)
    with pytest.raises(ValueError, match="NPN' or 'PNP"):
        solve_constant_vbe("fixed_base", {"RB": 1e5, "RC": 1e3}, "FET", 12, None,
                           100, 0.65, 0.2)
    with pytest.raises(ValueError, match="negative"):
        solve_constant_vbe("dual_supply", {"RB": 1e4, "RE": 1e3, "RC": 1e3}, "NPN", 12, 5.0,
                           100, 0.65, 0.2)


# --------------------------------------------------------------------------- device laws


def test_thermal_voltage_from_scipy_constants():
    # source: scipy.constants (CODATA): k·T/q ≈ 25.852 mV at 300 K
    assert float(thermal_voltage(300.0)) == pytest.approx(
        constants.k * 300.0 / constants.e, rel=1e-15)
    assert float(thermal_voltage(300.0)) == pytest.approx(25.85e-3, abs=0.01e-3)


def test_saturation_current_from_vbe_round_trip():
    vbe = np.array([0.60, 0.65, 0.70])
    is_a = saturation_current_from_vbe(vbe, 1e-3, 1.02, T25_K)
    vt = thermal_voltage(T25_K)
    ic = is_a * np.expm1(vbe / (1.02 * vt))
    np.testing.assert_allclose(ic, 1e-3, rtol=1e-12)  # algebraic identity
    assert np.all(np.diff(is_a) < 0)


def test_saturation_current_temperature_hand_value():
    # SPICE Gummel–Poon IS(T) (REFERENCES.md), evaluated by hand with math
    t, tnom = 358.15, 300.15
    vt = constants.k * t / constants.e
    hand = 1e-14 * (t / tnom) ** 3 * math.exp((t / tnom - 1.0) * 1.11 / vt)
    assert float(saturation_current_at(1e-14, t, tnom, 3.0, 1.11)) == pytest.approx(hand, rel=1e-12)
    assert float(saturation_current_at(1e-14, tnom, tnom)) == pytest.approx(1e-14, rel=1e-15)


def test_vbe_tempco_from_gummel_poon_near_minus_1_8_mv():
    # REFERENCES.md: the SPICE equations give about −1.8 mV/K at 1 mA, 27 °C
    vbe = []
    for t in (300.15, 301.15):
        is_t = saturation_current_at(1e-14, t, 300.15)
        vbe.append(float(thermal_voltage(t) * np.log1p(1e-3 / is_t)))
    assert vbe[1] - vbe[0] == pytest.approx(-1.8e-3, abs=0.15e-3)


def test_beta_temperature_law():
    # REFERENCES.md: XTB ≈ 1.5 multiplies β by about 1.4 from 25 to 100 °C (recalled)
    assert float(beta_at(100.0, 373.15, T25_K, 1.5)) == pytest.approx(140.0, rel=0.01)
    # hand value (T/T0)^XTB
    assert float(beta_at(200.0, 233.15, T25_K, 1.5)) == pytest.approx(
        200.0 * (233.15 / T25_K) ** 1.5, rel=1e-14)


def test_gummel_poon_at_scales_br_like_bf():
    # ngspice-39 bjttemp.c: BF and BR share the factor (T/TNOM)^XTB
    gp = gummel_poon_at(1e-14, 200.0, 4.0, 1.0, 1.0, 80.0, 3.0, 1.11, 1.5, 27.0, 85.0)
    factor = (358.15 / 300.15) ** 1.5
    assert float(gp.bf) == pytest.approx(200.0 * factor, rel=1e-14)
    assert float(gp.br) == pytest.approx(4.0 * factor, rel=1e-14)
    assert float(gp.vaf) == 80.0


def test_constant_vbe_and_leakage_rules():
    # common practice: −2 mV/°C; ICBO doubles every 10 °C
    assert float(vbe_at(0.65, 85.0)) == pytest.approx(0.53, abs=1e-12)
    assert float(vbe_at(0.65, -40.0)) == pytest.approx(0.78, abs=1e-12)
    assert float(icbo_at(10e-9, 45.0)) == pytest.approx(40e-9, rel=1e-12)
    assert float(icbo_at(10e-9, 15.0)) == pytest.approx(5e-9, rel=1e-12)


# --------------------------------------------------------------------------- constant VBE


@pytest.mark.parametrize("polarity", ["NPN", "PNP"])
@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_closed_form_agrees_with_nodal(rng, network, polarity):
    n = 3000
    r, vcc, vee = random_stage(rng, network, n)
    dev = random_device(rng, n)
    a = solve_constant_vbe(network, r, polarity, vcc, vee, **dev, method="closed_form")
    b = solve_constant_vbe(network, r, polarity, vcc, vee, **dev, method="nodal")
    np.testing.assert_array_equal(a.region, b.region)
    for q in ("ic", "ib", "ie"):  # rounding only
        np.testing.assert_allclose(getattr(a, q), getattr(b, q), rtol=1e-9, atol=1e-15)
    for q in ("vb", "vc", "ve", "vce", "supply_power", "pd"):
        np.testing.assert_allclose(getattr(a, q), getattr(b, q), rtol=1e-9, atol=1e-9)
    assert np.any(a.region == ACTIVE)
    if network in ("divider", "fixed_base", "dual_supply"):
        assert np.any(a.region == SATURATED)
    if network in ("divider", "dual_supply"):
        assert np.any(a.region == CUTOFF)


@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_design_table_closed_forms(network):
    # DESIGN §2 table (constant-VBE relations, no leakage)
    vcc, vee, beta, vbe = 12.0, -6.0, 150.0, 0.65
    values = {
        "divider": {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3},
        "collector_feedback": {"RC": 3.3e3, "RB": 220e3, "RE": 470.0},
        "dual_supply": {"RB": 10e3, "RE": 4.7e3, "RC": 3.3e3},
        "fixed_base": {"RB": 680e3, "RC": 3.3e3, "RE": 470.0},
    }[network]
    op = solve_constant_vbe(network, values, "NPN", vcc, vee, beta, vbe, 0.2)
    v = values
    if network == "divider":
        vbb = vcc * v["R2"] / (v["R1"] + v["R2"])
        rbb = v["R1"] * v["R2"] / (v["R1"] + v["R2"])
        ie = (vbb - vbe) / (v["RE"] + rbb / (beta + 1))
    elif network == "collector_feedback":
        ie = (vcc - vbe) / (v["RC"] + v["RE"] + v["RB"] / (beta + 1))
    elif network == "dual_supply":
        ie = (abs(vee) - vbe) / (v["RE"] + v["RB"] / (beta + 1))
    else:
        ie = (beta + 1) * (vcc - vbe) / (v["RB"] + (beta + 1) * v["RE"])
    assert op.region == ACTIVE
    assert float(op.ie) == pytest.approx(ie, rel=1e-12)
    assert float(op.ic) == pytest.approx(ie * beta / (beta + 1), rel=1e-12)


def test_leakage_in_active_region():
    # DESIGN §2: IC = β·IB + (β+1)·ICBO; divider IE = (VBB − VBE + RBB·ICBO)/(RE + RBB/(β+1))
    r = {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3}
    beta, icbo = 120.0, 50e-9
    op = solve_constant_vbe("divider", r, "NPN", 12.0, None, beta, 0.65, 0.2, icbo)
    vbb, rbb = 12.0 * 10 / 57, 47e3 * 10e3 / 57e3
    ie = (vbb - 0.65 + rbb * icbo) / (1e3 + rbb / (beta + 1))
    assert float(op.ie) == pytest.approx(ie, rel=1e-12)
    assert float(op.ic) == pytest.approx(beta * float(op.ib) + (beta + 1) * icbo, rel=1e-12)


@pytest.mark.parametrize("polarity", ["NPN", "PNP"])
def test_saturated_point_is_real(polarity):
    r = {"R1": 47e3, "R2": 10e3, "RC": 47e3, "RE": 1e3}  # RC far too large
    beta, vbe, vce_sat = 150.0, 0.65, 0.15
    op = solve_constant_vbe("divider", r, polarity, 12.0, None, beta, vbe, vce_sat)
    assert op.region == SATURATED
    assert region_names(op.region) == "saturated"
    assert float(op.vce) == pytest.approx(vce_sat, abs=1e-12)
    assert float(op.vbe) == pytest.approx(vbe, abs=1e-12)
    assert float(op.ic) < beta * float(op.ib)
    # real voltages: the collector current is what RC can pass
    assert float(op.ic) == pytest.approx(float(abs(op.resistor_current("RC"))), rel=1e-12)
    vc_npn = 12.0 - float(op.ic) * 47e3
    expected_vc = vc_npn if polarity == "NPN" else 12.0 - vc_npn
    assert float(op.vc) == pytest.approx(expected_vc, abs=1e-9)


@pytest.mark.parametrize("icbo", [0.0, 20e-9])
def test_cutoff_point_is_real(icbo):
    r = {"R1": 100e3, "R2": 3.3e3, "RC": 3.3e3, "RE": 1e3}  # VBB ≈ 0.38 V < VBE
    op = solve_constant_vbe("divider", r, "NPN", 12.0, None, 150.0, 0.65, 0.2, icbo)
    assert op.region == CUTOFF
    assert float(op.ie) == pytest.approx(0.0, abs=1e-18)
    assert float(op.ib) == pytest.approx(-icbo, abs=1e-18)
    assert float(op.ic) == pytest.approx(icbo, abs=1e-18)
    vbb, rbb = 12.0 * 3.3 / 103.3, 100e3 * 3.3e3 / 103.3e3
    assert float(op.vb) == pytest.approx(vbb + rbb * icbo, abs=1e-9)  # divider, no IE
    assert float(op.vc) == pytest.approx(12.0 - icbo * 3.3e3, abs=1e-9)
    assert float(op.ve) == pytest.approx(0.0, abs=1e-12)


def test_absent_role_is_an_exact_short():
    r = {"RB": 470e3, "RC": 2.2e3}
    op = solve_constant_vbe("fixed_base", r, "NPN", 9.0, None, 100.0, 0.65, 0.2)
    assert float(op.ve) == 0.0
    assert float(op.resistor_power("RE")) == 0.0
    assert float(op.resistor_current("RE")) == pytest.approx(float(op.ie), rel=1e-12)
    same = solve_constant_vbe("fixed_base", {**r, "RE": 0.0}, "NPN", 9.0, None, 100.0, 0.65, 0.2)
    assert float(same.ic) == float(op.ic)


@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_pnp_is_the_exact_mirror_constant_vbe(rng, network):
    n = 500
    r, vcc, vee = random_stage(rng, network, n)
    dev = random_device(rng, n)
    npn = solve_constant_vbe(network, r, "NPN", vcc, vee, **dev)
    vcc_p, vee_p = mirrored_supplies(network, vcc, vee)
    pnp = solve_constant_vbe(network, r, "PNP", vcc_p, vee_p, **dev)
    _assert_mirror(network, npn, pnp, vcc)


@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_pnp_is_the_exact_mirror_exponential(rng, network):
    n = 300
    r, vcc, vee = random_stage(rng, network, n)
    gp = random_gummel_poon(rng, n)
    t = rng.uniform(233.15, 358.15, n)
    npn = solve_exponential(network, r, "NPN", vcc, vee, gp, t)
    vcc_p, vee_p = mirrored_supplies(network, vcc, vee)
    pnp = solve_exponential(network, r, "PNP", vcc_p, vee_p, gp, t)
    _assert_mirror(network, npn, pnp, vcc)


def _assert_mirror(network, npn, pnp, vcc):
    np.testing.assert_array_equal(npn.region, pnp.region)
    # the same circuit solved twice: equal up to rounding and Newton's last step
    for q in ("ic", "ib", "ie"):
        np.testing.assert_allclose(getattr(pnp, q), getattr(npn, q), rtol=1e-9, atol=1e-15)
    # voltages: a current rounding of ~1e-15 A through the largest generated resistors
    # (~1 MΩ, deep saturation) moves a node by ~1e-9 V, so that is the absolute floor
    for q in ("vce", "vbe"):
        np.testing.assert_allclose(getattr(pnp, q), getattr(npn, q), rtol=1e-9, atol=2e-9)
    for q in ("pd", "supply_power"):
        np.testing.assert_allclose(getattr(pnp, q), getattr(npn, q), rtol=1e-9, atol=1e-12)
    for q in ("vb", "vc", "ve"):
        np.testing.assert_allclose(
            getattr(pnp, q), mirrored_voltage(network, getattr(npn, q), vcc), rtol=0, atol=1e-9)
    for role in npn.resistances:
        np.testing.assert_allclose(
            pnp.resistor_current(role), npn.resistor_current(role), rtol=1e-9, atol=1e-15)


# --------------------------------------------------------------------------- both models


@pytest.mark.parametrize("polarity", ["NPN", "PNP"])
@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_kcl_kvl_and_energy_both_models(rng, network, polarity):
    n = 1000
    r, vcc, vee = random_stage(rng, network, n)
    rails = rail_voltages(get_network(network), polarity, vcc, vee)
    dev = random_device(rng, n)
    gp = random_gummel_poon(rng, n)
    t = rng.uniform(233.15, 358.15, n)
    for op in (
        solve_constant_vbe(network, r, polarity, vcc, vee, **dev),
        solve_exponential(network, r, polarity, vcc, vee, gp, t, dev["icbo"]),
    ):
        kcl, kvl = kcl_kvl_residuals(op, network, rails)
        assert kcl < 1e-15  # ampere; exact up to rounding
        assert kvl < 1e-9  # volt
        dissipated = op.pd + sum(op.resistor_powers.values())
        np.testing.assert_allclose(op.supply_power, dissipated, rtol=1e-9, atol=1e-15)


@pytest.mark.parametrize("network", NETWORK_NAMES)
def test_exponential_satisfies_device_equations(rng, network):
    n = 2000
    r, vcc, vee = random_stage(rng, network, n)
    gp = random_gummel_poon(rng, n)
    t = rng.uniform(233.15, 358.15, n)
    op = solve_exponential(network, r, "NPN", vcc, vee, gp, t)
    vt = thermal_voltage(t)
    vbc = op.vbe - op.vce
    i_f = gp.is_a * np.expm1(op.vbe / (gp.nf * vt))
    i_r = gp.is_a * np.expm1(vbc / (gp.nr * vt))
    # DESIGN §2 Gummel–Poon DC equations (VAR infinite), as ngspice-39 applies VAF
    ic = (i_f - i_r) * (1.0 - vbc / gp.vaf) - i_r / gp.br
    ib = i_f / gp.bf + i_r / gp.br
    active = op.region == ACTIVE
    np.testing.assert_allclose(op.ic[active], ic[active], rtol=1e-9, atol=1e-18)
    np.testing.assert_allclose(op.ib[active], ib[active], rtol=1e-9, atol=1e-18)
    # In deep saturation If and Ir nearly cancel, IC is ill-conditioned in the
    # junction voltages, and the node voltages close KVL only to about one ulp
    # times R·g (nanovolts through megohm loads): there the equations must hold
    # within 10 nV of junction voltage.
    slack = (np.abs(i_f) / gp.nf + np.abs(i_r) / gp.nr) / vt * 1e-8
    assert np.all(np.abs(op.ic - ic) <= 1e-9 * np.abs(ic) + slack)
    assert np.all(np.abs(op.ib - ib) <= 1e-9 * np.abs(ib) + slack)
    assert np.all(np.isfinite(op.ic))
    assert ACTIVE in op.region
    if network != "collector_feedback":  # VCB = IB·RB > 0: it cannot saturate
        assert SATURATED in op.region


def test_exponential_regions():
    gp = gummel_poon_at(1e-14, 200.0, 3.0, 1.0, 1.0, 80.0, 3.0, 1.11, 1.5, 27.0, 25.0)
    r_active = {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3}
    r_sat = {**r_active, "RC": 47e3}
    r_cut = {**r_active, "R1": 1e6, "R2": 3.3e3}  # VBB ≈ 40 mV
    ops = [solve_exponential("divider", r, "NPN", 12.0, None, gp, T25_K)
           for r in (r_active, r_sat, r_cut)]
    assert [int(op.region) for op in ops] == [ACTIVE, SATURATED, CUTOFF]
    sat, cut = ops[1], ops[2]
    assert float(sat.ic) < float(gp.bf) * float(sat.ib)
    assert float(sat.vce) < 0.18  # BC junction injects ≥ 0.1 % of the forward current
    assert abs(float(cut.ib)) < 1e-12 and abs(float(cut.ic)) < 1e-12


def test_exponential_matches_constant_vbe_at_its_own_vbe():
    # consistency of the two models: same VBE and β = BF, no Early effect, no BC injection
    gp = GummelPoon(is_a=2e-14, bf=180.0, br=2.0)
    r = {"R1": 56e3, "R2": 12e3, "RC": 2.7e3, "RE": 1.2e3}
    exp_op = solve_exponential("divider", r, "NPN", 15.0, None, gp, T25_K)
    const_op = solve_constant_vbe("divider", r, "NPN", 15.0, None, 180.0, exp_op.vbe, 0.2)
    assert float(const_op.ic) == pytest.approx(float(exp_op.ic), rel=1e-6)


def test_vectorised_over_a_broadcast_shape(rng):
    n, m = 7, 5
    r = {"R1": _log_uniform(rng, 10e3, 200e3, (n, 1)), "R2": 10e3, "RC": 2.2e3, "RE": 1e3}
    beta = rng.uniform(80.0, 300.0, (1, m))
    vbe = rng.uniform(0.6, 0.7, (1, m))
    op = solve_constant_vbe("divider", r, "PNP", 12.0, None, beta, vbe, 0.2)
    gp = GummelPoon(is_a=1e-14, bf=beta, br=2.0, vaf=60.0)
    op_e = solve_exponential("divider", r, "PNP", 12.0, None, gp, T25_K)
    assert op.ic.shape == op.vc.shape == op.region.shape == (n, m)
    assert op_e.ic.shape == op_e.resistor_current("R1").shape == (n, m)
    for i in range(n):
        for j in range(m):
            ri = {**r, "R1": float(r["R1"][i, 0])}
            one = solve_constant_vbe("divider", ri, "PNP", 12.0, None, beta[0, j], vbe[0, j], 0.2)
            assert float(one.ic) == pytest.approx(op.ic[i, j], rel=1e-12)
            gp1 = GummelPoon(is_a=1e-14, bf=beta[0, j], br=2.0, vaf=60.0)
            one_e = solve_exponential("divider", ri, "PNP", 12.0, None, gp1, T25_K)
            assert float(one_e.ic) == pytest.approx(op_e.ic[i, j], rel=1e-9)
