"""Tests of stockbias.analysis.ratings: derating curves, PD allowance, VCEO need."""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.analysis.ratings import (
    allowed_resistor_power,
    derating_factor,
    transistor_pd_allowed,
    vceo_required,
)
from stockbias.errors import InputError


@pytest.mark.parametrize(
    ("ambient_c", "factor"),
    [(-40.0, 1.0), (25.0, 1.0), (70.0, 1.0), (112.5, 0.5), (155.0, 0.0), (200.0, 0.0),
     (91.25, 0.75)],
)
def test_default_derating_curve_points(ambient_c: float, factor: float) -> None:
    # REFERENCES.md, common practice: full rating to 70 °C, linear to zero at 155 °C
    assert derating_factor(ambient_c) == pytest.approx(factor, abs=1e-12)


def test_derating_curve_vectorised_and_configurable() -> None:
    ta = np.array([[20.0, 85.0], [120.0, 155.0]])
    # manufacturer's curve with the knee at 85 °C (REFERENCES.md, curves differ):
    # at 120 °C the factor is (155 − 120)/(155 − 85) = 0.5 (hand calculation)
    np.testing.assert_allclose(derating_factor(ta, knee_c=85.0), [[1.0, 1.0], [0.5, 0.0]],
                               atol=1e-12)
    # monotone non-increasing in temperature (the shape of every published curve)
    grid = np.linspace(-55.0, 200.0, 1001)
    assert np.all(np.diff(derating_factor(grid)) <= 0.0)
    with pytest.raises(InputError):
        derating_factor(25.0, knee_c=155.0, zero_c=70.0)


def test_allowed_resistor_power() -> None:
    # 0.25 W part, hottest ambient 112.5 °C, design fraction 0.5 → 0.25·0.5·0.5
    # (REFERENCES.md derating curve and 2× margin, common practice; hand calculation)
    assert allowed_resistor_power(0.25, 112.5) == pytest.approx(0.0625, rel=1e-12)
    got = allowed_resistor_power(np.array([0.125, 0.6]), 50.0, design_fraction=1.0)
    np.testing.assert_allclose(got, [0.125, 0.6], rtol=1e-12)
    with pytest.raises(InputError):
        allowed_resistor_power(0.25, 50.0, design_fraction=0.0)
    with pytest.raises(InputError):
        allowed_resistor_power(0.25, 50.0, design_fraction=1.5)


@pytest.mark.parametrize(
    ("ambient_c", "theta", "pd_w"),
    [
        (25.0, 200.0, 0.625),  # the rating itself: (150 − 25)/200 = 0.625 W
        (0.0, 200.0, 0.625),  # below 25 °C no more than the rating
        (50.0, 200.0, 0.500),  # (150 − 50)/200
        (85.0, 200.0, 0.325),  # (150 − 85)/200
        (150.0, 200.0, 0.0),
        (170.0, 200.0, 0.0),  # above TJ max nothing is allowed
        (85.0, np.nan, 0.325),  # θJA unknown: derived (150 − 25)/0.625 = 200 K/W
    ],
)
def test_to92_dissipation_derating(ambient_c: float, theta: float, pd_w: float) -> None:
    # REFERENCES.md: TO-92, 625 mW at 25 °C, θJA 200 °C/W, derating by 1/θJA above 25 °C
    assert transistor_pd_allowed(0.625, theta, ambient_c) == pytest.approx(pd_w, abs=1e-12)


def test_transistor_pd_vectorised_mixed_known_unknown_theta() -> None:
    pd_max = np.array([0.625, 1.25, 0.625])
    theta = np.array([250.0, np.nan, np.nan])
    got = transistor_pd_allowed(pd_max, theta, 60.0, tj_max=np.array([150.0, 150.0, 125.0]))
    # hand calculation: 90/250; 1.25·(150−60)/(150−25); 0.625·(125−60)/(125−25)
    np.testing.assert_allclose(got, [0.36, 0.9, 0.40625], rtol=1e-12)
    with pytest.raises(InputError):
        transistor_pd_allowed(0.0, 200.0, 25.0)
    with pytest.raises(InputError):
        transistor_pd_allowed(0.625, -1.0, 25.0)


@pytest.mark.parametrize(
    ("vcc", "tol", "vee", "vee_tol", "need"),
    [
        (12.0, 5.0, 0.0, None, 12.6),  # single supply at +5 %
        (12.0, 5.0, -6.0, None, 18.9),  # dual supply: 12.6 + 6.3
        (15.0, 10.0, -15.0, 2.0, 31.8),  # 16.5 + 15.3
        (-9.0, 0.0, 0.0, None, 9.0),  # a negative rail counts by magnitude
    ],
)
def test_vceo_required(vcc: float, tol: float, vee: float, vee_tol: float | None,
                       need: float) -> None:
    # hand calculation of the supply span at upper tolerance (DESIGN §2)
    assert vceo_required(vcc, tol, vee, vee_tol) == pytest.approx(need, rel=1e-12)
