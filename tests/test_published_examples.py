"""Constant-VBE operating points against published worked examples.

The texts round intermediate values and some use IC ≈ β·IB where we solve
exactly with IE = (β+1)·IB, so the tolerance is 2 % (REFERENCES.md).
"""

from __future__ import annotations

import pytest

from stockbias.analysis.operating_point import ACTIVE, solve_constant_vbe
from stockbias.topologies.divider import thevenin

BOOK = "Boylestad, Electronic Devices and Circuit Theory"
RTOL = 0.02  # texts round; REFERENCES.md allows 1–2 %

EXAMPLES = [
    pytest.param(
        "fixed_base", 12.0, {"RB": 240e3, "RC": 2.2e3}, 50.0,
        {"ib": 47.08e-6, "ic": 2.35e-3, "vce": 6.83},
        id=f"{BOOK}, fixed-bias example (recalled)",
    ),
    pytest.param(
        "fixed_base", 20.0, {"RB": 430e3, "RC": 2e3, "RE": 1e3}, 50.0,
        {"ib": 40.1e-6, "ic": 2.01e-3, "vce": 13.97},
        id=f"{BOOK}, emitter-stabilised example (recalled)",
    ),
    pytest.param(
        "divider", 22.0, {"R1": 39e3, "R2": 3.9e3, "RC": 10e3, "RE": 1.5e3}, 140.0,
        {"ib": 6.05e-6, "ic": 0.85e-3, "vce": 12.22},
        id=f"{BOOK}, divider exact analysis (recalled)",
    ),
    pytest.param(
        "collector_feedback", 10.0, {"RB": 250e3, "RC": 4.7e3, "RE": 1.2e3}, 90.0,
        {"ib": 11.91e-6, "ic": 1.07e-3, "vce": 3.69},
        id=f"{BOOK}, collector feedback with RE (recalled)",
    ),
]


@pytest.mark.parametrize(("network", "vcc", "values", "beta", "published"), EXAMPLES)
def test_published_operating_point(network, vcc, values, beta, published):
    op = solve_constant_vbe(network, values, "NPN", vcc, None, beta, 0.7, 0.2)
    assert op.region == ACTIVE
    for quantity, expected in published.items():
        # source: the worked example named in this case's id (recalled), ±2 %
        assert float(getattr(op, quantity)) == pytest.approx(expected, rel=RTOL), quantity


def test_divider_thevenin_equivalent():
    vbb, rbb = thevenin(39e3, 3.9e3, 22.0, 0.0)
    # Boylestad, Electronic Devices and Circuit Theory, divider exact analysis (recalled)
    assert float(rbb) == pytest.approx(3.55e3, rel=RTOL)
    assert float(vbb) == pytest.approx(2.0, rel=RTOL)
