"""Dual-supply emitter bias: base to ground through RB, emitter to the negative rail."""

from __future__ import annotations

from stockbias.topologies.base import Network, Role

__all__ = ["DUAL_SUPPLY", "active_constant_vbe"]


def active_constant_vbe(r, v_rail_c, v_rail_e, beta, vbe, icbo):
    """Active-region Q-point with constant VBE (NPN frame).

    IE = (−VRAIL_E − VBE + RB·ICBO) / (RE + RB/(β+1)), i.e. (|VEE| − VBE)/… for
    the NPN stage.  Arguments as in :func:`stockbias.topologies.divider.active_constant_vbe`
    (``r`` holds ``RB, RE, RC`` in ohm).
    """
    ie = (-v_rail_e - vbe + r["RB"] * icbo) / (r["RE"] + r["RB"] / (beta + 1.0))
    ib = ie / (beta + 1.0) - icbo
    ic = ie - ib
    vb = -ib * r["RB"]
    ve = v_rail_e + ie * r["RE"]
    vc = v_rail_c - ic * r["RC"]
    return ib, ic, vb, vc, ve


DUAL_SUPPLY = Network(
    name="dual_supply",
    roles=(
        Role("RB", "GND", "B", description="base return to ground"),
        Role("RE", "E", "RAIL_E", description="emitter resistor to the negative rail"),
        Role("RC", "RAIL_C", "C", description="collector load"),
    ),
    description="base grounded through RB, emitter fed from the negative rail through RE",
    supply="dual",
    active_closed_form=active_constant_vbe,
)
