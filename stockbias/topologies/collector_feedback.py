"""Collector-feedback bias: RB from collector to base, RC carries the emitter current."""

from __future__ import annotations

from stockbias.topologies.base import Network, Role

__all__ = ["COLLECTOR_FEEDBACK", "active_constant_vbe"]


def active_constant_vbe(r, v_rail_c, v_rail_e, beta, vbe, icbo):
    """Active-region Q-point with constant VBE (NPN frame).

    IE = (VRAIL_C − VRAIL_E − VBE + RB·ICBO) / (RC + RE + RB/(β+1)); RE = 0
    when absent.  Arguments as in :func:`stockbias.topologies.divider.active_constant_vbe`
    (``r`` holds ``RC, RB, RE`` in ohm).
    """
    re = r["RE"]
    ie = (v_rail_c - v_rail_e - vbe + r["RB"] * icbo) / (
        r["RC"] + re + r["RB"] / (beta + 1.0)
    )
    ib = ie / (beta + 1.0) - icbo
    ic = ie - ib
    vc = v_rail_c - ie * r["RC"]
    vb = vc - ib * r["RB"]
    ve = v_rail_e + ie * re
    return ib, ic, vb, vc, ve


COLLECTOR_FEEDBACK = Network(
    name="collector_feedback",
    roles=(
        Role("RC", "RAIL_C", "C", description="collector load, carries the emitter current"),
        Role("RB", "C", "B", description="feedback resistor, collector to base"),
        Role("RE", "E", "RAIL_E", optional=True, description="emitter resistor (optional)"),
    ),
    description="base fed from the collector through RB, optional emitter resistor",
    supply="single",
    active_closed_form=active_constant_vbe,
)
