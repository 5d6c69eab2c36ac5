"""Voltage-divider bias: R1 and R2 set the base, RE sets the emitter current."""

from __future__ import annotations

import numpy as np

from stockbias.topologies.base import Network, Role

__all__ = ["DIVIDER", "active_constant_vbe", "thevenin"]


def thevenin(
    r1: np.ndarray, r2: np.ndarray, v_rail_c: np.ndarray, v_rail_e: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Thevenin equivalent of the base divider.

    Parameters
    ----------
    r1, r2 : ndarray
        Base-to-collector-rail and base-to-emitter-rail resistors, ohm.
    v_rail_c, v_rail_e : ndarray
        Rail voltages, volt.

    Returns
    -------
    vbb : ndarray
        Open-circuit base voltage, volt.
    rbb : ndarray
        Source resistance R1‖R2, ohm.
    """
    r1 = np.asarray(r1, dtype=float)
    r2 = np.asarray(r2, dtype=float)
    vbb = (v_rail_c * r2 + v_rail_e * r1) / (r1 + r2)
    rbb = r1 * r2 / (r1 + r2)
    return vbb, rbb


def active_constant_vbe(r, v_rail_c, v_rail_e, beta, vbe, icbo):
    """Active-region Q-point with constant VBE (NPN frame).

    IE = (VBB − VRAIL_E − VBE + RBB·ICBO) / (RE + RBB/(β+1)).

    Parameters
    ----------
    r : Mapping[str, ndarray]
        ``R1, R2, RC, RE`` in ohm.
    v_rail_c, v_rail_e : ndarray
        Rail voltages, volt.
    beta, vbe, icbo : ndarray
        Current gain, base–emitter voltage (volt), leakage ICBO (ampere).

    Returns
    -------
    tuple of ndarray
        ``(ib, ic, vb, vc, ve)`` in ampere and volt.
    """
    vbb, rbb = thevenin(r["R1"], r["R2"], v_rail_c, v_rail_e)
    ie = (vbb - v_rail_e - vbe + rbb * icbo) / (r["RE"] + rbb / (beta + 1.0))
    ib = ie / (beta + 1.0) - icbo
    ic = ie - ib
    ve = v_rail_e + ie * r["RE"]
    vb = ve + vbe
    vc = v_rail_c - ic * r["RC"]
    return ib, ic, vb, vc, ve


DIVIDER = Network(
    name="divider",
    roles=(
        Role("R1", "RAIL_C", "B", description="upper divider leg, base to collector-side rail"),
        Role("R2", "B", "RAIL_E", description="base to the emitter-side rail (lower divider leg)"),
        Role("RC", "RAIL_C", "C", description="collector load"),
        Role("RE", "E", "RAIL_E", description="emitter resistor (DC feedback)"),
    ),
    description="base divider R1/R2, emitter degeneration RE, collector load RC",
    supply="single",
    active_closed_form=active_constant_vbe,
)
