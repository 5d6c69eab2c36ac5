"""Small-signal figures of a common-emitter stage at its DC point.

The transistor is the hybrid-π equivalent: rπ from base to emitter, a current
gm·vπ from collector to emitter, and rₒ from collector to emitter.  The stage
has an AC collector load RC‖RL to AC ground, the unbypassed part RE_u of the
emitter resistor from emitter to ground, and (collector feedback only) the
feedback resistor RB from collector to base.  Coupling and bypass capacitors
are short circuits (mid-band).

Gains are solved exactly: with the base driven at v_b, the emitter and
collector nodes give a 2×2 linear system in v_e and v_c, solved in closed
form (Cramer's rule), vectorised.  Without rₒ and feedback this reduces to the
familiar Av = −β·(RC‖RL)/(rπ + (β+1)·RE_u) = −gm·(RC‖RL)/(1 + gm·RE_u·(β+1)/β).

Units: ampere, volt, ohm, siemens; gains are dimensionless (volt/volt).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "ce_voltage_gain",
    "collector_feedback_gain",
    "collector_feedback_input_resistance",
    "input_resistance",
    "parallel",
    "r_o",
    "r_pi",
    "stage_response",
    "transconductance",
]

_Array = NDArray[np.float64]


def _f(x: ArrayLike) -> _Array:
    return np.asarray(x, dtype=float)


def _conductance(r: ArrayLike) -> _Array:
    """1/r with 1/0 = inf and 1/inf = 0, without a warning."""
    with np.errstate(divide="ignore"):
        return np.asarray(1.0 / _f(r), dtype=float)


def parallel(*resistances: ArrayLike) -> _Array:
    """Parallel combination of resistances, ohm (inf is an open, 0 a short).

    Parameters
    ----------
    *resistances : float or ndarray
        Resistances, ohm, ≥ 0.

    Returns
    -------
    ndarray of float
        The combination, ohm.
    """
    total = np.zeros(())
    for r in resistances:
        total = total + _conductance(r)
    return _conductance(total)


def transconductance(ic: ArrayLike, vt: ArrayLike) -> _Array:
    """Transconductance gm = IC/VT.

    Parameters
    ----------
    ic : float or ndarray
        Collector current, ampere (magnitude; PNP mirrors NPN).
    vt : float or ndarray
        Thermal voltage kT/q (times the emission coefficient NF where the
        model has one), volt.

    Returns
    -------
    ndarray of float
        gm, siemens.
    """
    return np.abs(_f(ic)) / _f(vt)


def r_pi(beta: ArrayLike, gm: ArrayLike) -> _Array:
    """Base–emitter small-signal resistance rπ = β/gm.

    Parameters
    ----------
    beta : float or ndarray
        Small-signal current gain (taken equal to DC β), dimensionless.
    gm : float or ndarray
        Transconductance, siemens.

    Returns
    -------
    ndarray of float
        rπ, ohm (inf where gm = 0).
    """
    with np.errstate(divide="ignore"):
        return np.asarray(_f(beta) / _f(gm), dtype=float)


def r_o(ic: ArrayLike, vaf: ArrayLike, vcb: ArrayLike = 0.0) -> _Array:
    """Output resistance rₒ = (VAF + VCB)/IC from the Early effect.

    With the Early factor (1 + VCB/VAF) of the device model, ∂IC/∂VCE at fixed
    VBE is IC/(VAF + VCB); ``vcb = 0`` gives the common VAF/IC.

    Parameters
    ----------
    ic : float or ndarray
        Collector current, ampere (magnitude).
    vaf : float or ndarray
        Forward Early voltage, volt; inf for none.
    vcb : float or ndarray, optional
        Collector–base reverse voltage at the DC point, volt (default 0).

    Returns
    -------
    ndarray of float
        rₒ, ohm (inf where VAF is inf or IC = 0).
    """
    with np.errstate(divide="ignore"):
        return np.asarray((_f(vaf) + _f(vcb)) / np.abs(_f(ic)), dtype=float)


def _node_ratios(
    gm: ArrayLike,
    beta: ArrayLike,
    r_ac_load: ArrayLike,
    re_unbypassed: ArrayLike,
    r_out: ArrayLike,
    r_feedback: ArrayLike,
) -> tuple[_Array, _Array]:
    """Emitter and collector voltages per volt at the base, (v_e/v_b, v_c/v_b).

    KCL with the base forced to v_b (gπ = gm/β, gₒ = 1/rₒ, G = 1/(RC‖RL),
    g_F = 1/RB, R_E = RE_u), the emitter equation multiplied by R_E so that
    R_E = 0 stays finite:

        emitter:   −(1 + (gπ + gm + gₒ)·R_E)·v_e + gₒ·R_E·v_c = −(gπ + gm)·R_E·v_b
        collector: −(gm + gₒ)·v_e + (G + gₒ + g_F)·v_c       = (g_F − gm)·v_b
    """
    g_m = _f(gm)
    g_pi = g_m / _f(beta)
    g_o = _conductance(r_out)
    g_load = _conductance(r_ac_load)
    g_f = _conductance(r_feedback)
    r_e = _f(re_unbypassed)
    a11 = -(1.0 + (g_pi + g_m + g_o) * r_e)
    a12 = g_o * r_e
    b1 = -(g_pi + g_m) * r_e
    a21 = -(g_m + g_o)
    a22 = g_load + g_o + g_f
    b2 = g_f - g_m
    det = a11 * a22 - a12 * a21
    with np.errstate(divide="ignore", invalid="ignore"):
        v_e = (b1 * a22 - a12 * b2) / det
        v_c = (a11 * b2 - a21 * b1) / det
    return np.asarray(v_e, dtype=float), np.asarray(v_c, dtype=float)


def stage_response(
    gm: ArrayLike,
    g_pi: ArrayLike,
    r_ac_load: ArrayLike,
    re_unbypassed: ArrayLike = 0.0,
    r_out: ArrayLike = np.inf,
    r_feedback: ArrayLike = np.inf,
    r_bias: ArrayLike = np.inf,
) -> tuple[_Array, _Array]:
    """Voltage gain v_c/v_b and input resistance of a stage, exact hybrid-π with rₒ.

    The emitter and collector nodes are solved together (module notes); the
    current drawn from the base drive is then gπ·(v_b − v_e) into the base,
    (v_b − v_c)/RB into the feedback resistor and v_b/R_bias into the bias
    network, all exact with rₒ and RE_u present.

    Parameters
    ----------
    gm : float or ndarray
        Transconductance ∂IC/∂VBE at fixed VCE, siemens.
    g_pi : float or ndarray
        Base conductance ∂IB/∂VBE, siemens (1/rπ).
    r_ac_load : float or ndarray
        AC collector load to AC ground (RC‖RL), ohm.
    re_unbypassed : float or ndarray, optional
        Unbypassed emitter resistance, ohm (default 0).
    r_out : float or ndarray, optional
        Transistor output resistance rₒ, ohm (default inf).
    r_feedback : float or ndarray, optional
        Collector–base feedback resistor, ohm (default inf: none).
    r_bias : float or ndarray, optional
        Bias network from base to AC ground, ohm (default inf: none).

    Returns
    -------
    (ndarray, ndarray)
        Gain, V/V (negative: the stage inverts), and input resistance, ohm.
    """
    g_m = _f(gm)
    g_p = _f(g_pi)
    with np.errstate(divide="ignore", invalid="ignore"):
        beta = g_m / g_p
    v_e, v_c = _node_ratios(g_m, beta, r_ac_load, re_unbypassed, r_out, r_feedback)
    i_in = g_p * (1.0 - v_e) + _conductance(r_feedback) * (1.0 - v_c) + _conductance(r_bias)
    return v_c, _conductance(i_in)


def ce_voltage_gain(
    gm: ArrayLike,
    beta: ArrayLike,
    rc: ArrayLike,
    r_load: ArrayLike = np.inf,
    re_unbypassed: ArrayLike = 0.0,
    r_o: ArrayLike = np.inf,
) -> _Array:
    """Voltage gain v_c/v_b of a common-emitter stage, exact hybrid-π.

    Solves the emitter and collector nodes exactly, rₒ included for any RE_u.
    With rₒ = inf it equals −β·(RC‖RL)/(rπ + (β+1)·RE_u); with RE_u = 0 it
    equals −gm·(RC‖RL‖rₒ).  The gain is from the base terminal: the source
    resistance and the bias network's loading of the source are not in it.

    Parameters
    ----------
    gm : float or ndarray
        Transconductance, siemens.
    beta : float or ndarray
        Current gain, dimensionless (rπ = β/gm).
    rc : float or ndarray
        Collector resistor, ohm.
    r_load : float or ndarray, optional
        AC load on the collector, ohm (default inf: none).
    re_unbypassed : float or ndarray, optional
        Unbypassed emitter resistance, ohm (default 0: fully bypassed).
    r_o : float or ndarray, optional
        Transistor output resistance, ohm (default inf).

    Returns
    -------
    ndarray of float
        Voltage gain, V/V (negative: the stage inverts).
    """
    _, av = _node_ratios(gm, beta, parallel(rc, r_load), re_unbypassed, r_o, np.inf)
    return av


def input_resistance(
    r_bias: ArrayLike,
    beta: ArrayLike,
    r_pi: ArrayLike,
    re_unbypassed: ArrayLike = 0.0,
) -> _Array:
    """Input resistance of a common-emitter stage: R_bias ‖ (rπ + (β+1)·RE_u).

    Exact for rₒ = inf (the base current is then set by the emitter loop
    alone).  R_bias is the AC resistance of the base-bias network: R1‖R2 for
    the divider, RB for fixed base and dual supply.  For collector feedback
    use :func:`collector_feedback_input_resistance`.

    Parameters
    ----------
    r_bias : float or ndarray
        AC resistance of the bias network from base to AC ground, ohm (inf
        for none).
    beta : float or ndarray
        Current gain, dimensionless.
    r_pi : float or ndarray
        rπ, ohm.
    re_unbypassed : float or ndarray, optional
        Unbypassed emitter resistance, ohm (default 0).

    Returns
    -------
    ndarray of float
        Input resistance, ohm.
    """
    r_base = _f(r_pi) + (_f(beta) + 1.0) * _f(re_unbypassed)
    return parallel(r_bias, r_base)


def collector_feedback_gain(
    gm: ArrayLike,
    beta: ArrayLike,
    rc: ArrayLike,
    rb: ArrayLike,
    r_load: ArrayLike = np.inf,
    re_unbypassed: ArrayLike = 0.0,
    r_o: ArrayLike = np.inf,
) -> _Array:
    """Voltage gain v_c/v_b of a collector-feedback stage, exact hybrid-π.

    RB joins collector and base, so it both feeds current back to the base
    and loads the collector: the collector node carries G + gₒ + 1/RB and
    receives (1/RB − gm)·v_b.  With RE_u = 0 the exact result is
    Av = −(gm − 1/RB)·(RC‖RL‖rₒ‖RB); in general the emitter and collector
    nodes are solved together (see module notes).

    Parameters
    ----------
    gm : float or ndarray
        Transconductance, siemens.
    beta : float or ndarray
        Current gain, dimensionless.
    rc : float or ndarray
        Collector resistor (carries IE and the feedback current), ohm.
    rb : float or ndarray
        Feedback resistor, collector to base, ohm.
    r_load : float or ndarray, optional
        AC load on the collector, ohm (default inf).
    re_unbypassed : float or ndarray, optional
        Unbypassed emitter resistance, ohm (default 0).
    r_o : float or ndarray, optional
        Transistor output resistance, ohm (default inf).

    Returns
    -------
    ndarray of float
        Voltage gain, V/V.
    """
    _, av = _node_ratios(gm, beta, parallel(rc, r_load), re_unbypassed, r_o, rb)
    return av


def collector_feedback_input_resistance(
    rb: ArrayLike,
    av: ArrayLike,
    r_pi: ArrayLike,
    beta: ArrayLike,
    re_u: ArrayLike = 0.0,
) -> _Array:
    """Input resistance of a collector-feedback stage: (RB/(1 − Av)) ‖ (rπ + (β+1)·RE_u).

    The current into RB is (v_b − v_c)/RB = v_b·(1 − Av)/RB, so RB appears at the
    base as RB/(1 − Av) (the Miller reduction).  Exact when ``av`` is the
    exact gain (:func:`collector_feedback_gain`) and rₒ = inf.

    Parameters
    ----------
    rb : float or ndarray
        Feedback resistor, ohm.
    av : float or ndarray
        Voltage gain v_c/v_b of the stage, V/V (negative).
    r_pi : float or ndarray
        rπ, ohm.
    beta : float or ndarray
        Current gain, dimensionless.
    re_u : float or ndarray, optional
        Unbypassed emitter resistance, ohm (default 0).

    Returns
    -------
    ndarray of float
        Input resistance, ohm.
    """
    with np.errstate(divide="ignore"):
        miller = _f(rb) / (1.0 - _f(av))
    return parallel(miller, _f(r_pi) + (_f(beta) + 1.0) * _f(re_u))
