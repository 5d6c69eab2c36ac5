"""The divider's few-corner bounds equal the full vertex enumeration (DESIGN §2 monotonicity)."""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.analysis.fast_bounds import divider_bounds
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.analysis.worst_case import worst_case


def random_stage(rng: np.random.Generator, icbo: float) -> StageSpec:
    r1, r2 = rng.uniform(10e3, 200e3), rng.uniform(2e3, 50e3)
    re = rng.uniform(100, 3e3)
    rc = rng.uniform(0.5, 3.0) * re
    tol = rng.choice([0.01, 0.02, 0.05, 0.1])
    drift = rng.choice([0.0, 0.005, 0.02])
    hfe_min = rng.uniform(40, 200)
    dev = DeviceSpec("NPN", hfe_min, hfe_min * rng.uniform(1.2, 3.5), 0.58, 0.72,
                     0.2, icbo, xtb=1.5)
    return StageSpec("divider", {k: ResistorSpec(v, tol, drift) for k, v in
                                 {"R1": r1, "R2": r2, "RC": rc, "RE": re}.items()}, dev,
                     vcc=rng.uniform(5, 30), vcc_tol=rng.choice([0.0, 0.05, 0.1]),
                     ambient_min_c=rng.uniform(-40, 25), ambient_max_c=rng.uniform(25, 85))


@pytest.mark.parametrize("icbo", [0.0, 50e-9, 20e-6])
def test_few_corner_bounds_equal_vertex_enumeration(icbo: float) -> None:
    # 20 µA of leakage exercises the branch where R1's direction is not proven (ICBO·R2 ≥ VCC
    # can happen at 85 °C): both R1 ends are then evaluated.
    rng = np.random.default_rng(2024)
    checked = 0
    for _ in range(60):
        spec = random_stage(rng, icbo)
        d = spec.device
        fast = divider_bounds(
            {role: (s.low, s.high) for role, s in spec.resistors.items()},
            vcc=spec.vcc, vcc_tol=spec.vcc_tol, hfe_min=d.hfe_min, hfe_max=d.hfe_max,
            vbe_min=d.vbe_min, vbe_max=d.vbe_max, vce_sat=d.vce_sat, icbo25=d.icbo_a,
            xtb=d.xtb, ambient_min_c=spec.ambient_min_c, ambient_max_c=spec.ambient_max_c)
        wc = worst_case(spec, refine=False)
        if not bool(fast.active) or wc.non_active_corners:
            assert not bool(fast.active) and wc.non_active_corners > 0
            continue
        checked += 1
        assert float(fast.ic_min) == pytest.approx(wc.bounds["ic"].min, rel=1e-12)
        assert float(fast.ic_max) == pytest.approx(wc.bounds["ic"].max, rel=1e-12)
        assert float(fast.vce_min) == pytest.approx(wc.bounds["vce"].min, rel=1e-12, abs=1e-12)
        assert float(fast.vce_max) == pytest.approx(wc.bounds["vce"].max, rel=1e-12, abs=1e-12)
        # the PD bound is an upper bound of the refined maximum (proven, possibly loose)
        assert float(fast.pd_upper) >= worst_case(spec).bounds["pd"].max * (1 - 1e-9)
    assert checked >= 10   # enough active stages compared (hot leaky ones saturate)


def test_r2_direction_derivation() -> None:
    # DESIGN §2: the sign of ∂IE/∂R2 is that of VCC·RE + ICBO·R1·RE + VBE·R1/(β+1) > 0.
    # Check the closed form of the derivative numerically on random stages.
    rng = np.random.default_rng(9)
    r1, r2, re = rng.uniform(1e3, 1e6, 500), rng.uniform(1e3, 1e6, 500), rng.uniform(10, 1e4, 500)
    vcc, vbe, beta, icbo = rng.uniform(3, 40, 500), 0.65, rng.uniform(20, 900, 500), 1e-6

    def ie(r2_):
        vbb, rbb = vcc * r2_ / (r1 + r2_), r1 * r2_ / (r1 + r2_)
        return (vbb - vbe + rbb * icbo) / (re + rbb / (beta + 1))

    h = r2 * 1e-6
    assert np.all((ie(r2 + h) - ie(r2 - h)) > 0)
