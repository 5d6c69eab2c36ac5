"""Fixed base-current bias: RB from the collector-side rail, optional RE."""

from __future__ import annotations

from stockbias.topologies.base import Network, Role

__all__ = ["FIXED_BASE", "active_constant_vbe"]


def active_constant_vbe(r, v_rail_c, v_rail_e, beta, vbe, icbo):
    """Active-region Q-point with constant VBE (NPN frame).

    IE = (VRAIL_C − VRAIL_E − VBE + RB·ICBO) / (RE + RB/(β+1)), which without
    leakage is IB = (VCC − VBE) / (RB + (β+1)·RE); RE = 0 when absent.
    Arguments as in :func:`stockbias.topologies.divider.active_constant_vbe`
    (``r`` holds ``RB, RC, RE`` in ohm).
    """
    re = r["RE"]
    ie = (v_rail_c - v_rail_e - vbe + r["RB"] * icbo) / (re + r["RB"] / (beta + 1.0))
    ib = ie / (beta + 1.0) - icbo
    ic = ie - ib
    ve = v_rail_e + ie * re
    vb = ve + vbe
    vc = v_rail_c - ic * r["RC"]
    return ib, ic, vb, vc, ve


FIXED_BASE = Network(
    name="fixed_base",
    roles=(
        Role("RB", "RAIL_C", "B", description="base feed from the collector-side rail"),
        Role("RC", "RAIL_C", "C", description="collector load"),
        Role("RE", "E", "RAIL_E", optional=True, description="emitter resistor (optional)"),
    ),
    description="base current set by RB from the supply, optional emitter resistor",
    supply="single",
    active_closed_form=active_constant_vbe,
)
