"""The full Gummel–Poon DC equations of a bipolar transistor, from a model card.

The transport model with base charge (ngspice manual, BJT model; Gummel and Poon
1970; Getreu 1976; Antognetti and Massobrio 1993), NPN frame, junction voltages
VBE and VBC across the intrinsic junctions::

    If  = IS·(exp(VBE/(NF·VT)) − 1)          Ir  = IS·(exp(VBC/(NR·VT)) − 1)
    Ile = ISE·(exp(VBE/(NE·VT)) − 1)         Ilc = ISC·(exp(VBC/(NC·VT)) − 1)
    q1  = 1 / (1 − VBC/VAF − VBE/VAR)        q2  = If/IKF + Ir/IKR
    qb  = q1·(1 + sqrt(1 + 4·q2)) / 2
    IC  = (If − Ir)/qb − Ir/BR − Ilc
    IB  = If/BF + Ile + Ir/BR + Ilc

β falls at low current through the ISE term (NE typically 1.5–2) and at high current
through qb (IKF).  An infinite VAF, VAR, IKF or IKR (0 on a card, as in SPICE) drops
its term.  Temperature (ngspice-39, TLEV = 0; recalled from its ``bjttemp.c`` and
checked against ngspice ``.op`` in ``tests/test_gp_dc.py``)::

    L      = (T/TNOM − 1)·EG/VT(T) + XTI·ln(T/TNOM)
    IS(T)  = IS·exp(L)                    BF(T), BR(T) = BF, BR·(T/TNOM)^XTB
    ISE(T) = ISE·exp(L/NE)/(T/TNOM)^XTB   ISC(T) = ISC·exp(L/NC)/(T/TNOM)^XTB

A card's missing parameters take ngspice's defaults (IS 1e-16 A, BF 100, NE 1.5,
NC 2, XTB 0, XTI 3, EG 1.11 eV, TNOM 27 °C): a model card is a complete device
description, so the stock defaults (XTB 1.5) do not apply to it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from stockbias.analysis.device import CELSIUS_TO_KELVIN, thermal_voltage

__all__ = [
    "CARD_DEFAULTS",
    "GPDevice",
    "as_gummel_poon",
    "bias_at_current",
    "device_at",
    "junction_currents",
]

#: ngspice-39's defaults for the DC parameters of a BJT card (0 means infinite for
#: VAF, VAR, IKF, IKR).
CARD_DEFAULTS: Mapping[str, float] = {
    "is": 1e-16, "bf": 100.0, "nf": 1.0, "vaf": 0.0, "ikf": 0.0, "ise": 0.0, "ne": 1.5,
    "br": 1.0, "nr": 1.0, "var": 0.0, "ikr": 0.0, "isc": 0.0, "nc": 2.0,
    "rb": 0.0, "re": 0.0, "rc": 0.0, "xtb": 0.0, "xti": 3.0, "eg": 1.11, "tnom": 27.0,
}

_EXP_ARG_MAX = 80.0


def _inverse(value: float) -> float:
    """1/value, with 0 (SPICE's "infinite") and inf giving 0."""
    return 0.0 if value == 0.0 or np.isinf(value) else 1.0 / value


@dataclass(frozen=True)
class GPDevice:
    """DC Gummel–Poon parameters at one device temperature (NPN frame).

    Attributes
    ----------
    is_a, ise, isc : float or ndarray
        Saturation currents IS, ISE, ISC at temperature, ampere.
    bf, br : float or ndarray
        Ideal forward and reverse β at temperature.
    nf, nr, ne, nc : float or ndarray
        Emission coefficients.
    inv_vaf, inv_var : float or ndarray
        1/VAF and 1/VAR, 1/volt (0 for none).
    inv_ikf, inv_ikr : float or ndarray
        1/IKF and 1/IKR, 1/ampere (0 for none).
    rb, re, rc : float
        Series base, emitter and collector resistances, ohm.
    vt : float or ndarray
        Thermal voltage at the device temperature, volt.
    """

    is_a: float | np.ndarray
    bf: float | np.ndarray
    br: float | np.ndarray
    nf: float | np.ndarray
    nr: float | np.ndarray
    ise: float | np.ndarray
    ne: float | np.ndarray
    isc: float | np.ndarray
    nc: float | np.ndarray
    inv_vaf: float | np.ndarray
    inv_var: float | np.ndarray
    inv_ikf: float | np.ndarray
    inv_ikr: float | np.ndarray
    rb: float
    re: float
    rc: float
    vt: float | np.ndarray


def device_at(params: Mapping[str, float], temp_c) -> GPDevice:
    """A card's DC parameters moved to the device temperature.

    Parameters
    ----------
    params : Mapping[str, float]
        Card parameters, lower-case SPICE names (``is``, ``bf``, ``ikf`` …) in SI
        units; missing ones take :data:`CARD_DEFAULTS`.
    temp_c : float or ndarray
        Device temperature, °C.

    Returns
    -------
    GPDevice
    """
    p = {**CARD_DEFAULTS, **{k: float(v) for k, v in params.items()}}
    t = np.asarray(temp_c, dtype=float) + CELSIUS_TO_KELVIN
    tnom = p["tnom"] + CELSIUS_TO_KELVIN
    vt = thermal_voltage(t)
    ratio = t / tnom
    factlog = (ratio - 1.0) * p["eg"] / vt + p["xti"] * np.log(ratio)
    bfactor = ratio ** p["xtb"]
    return GPDevice(
        is_a=p["is"] * np.exp(factlog),
        bf=p["bf"] * bfactor,
        br=p["br"] * bfactor,
        nf=p["nf"], nr=p["nr"],
        ise=p["ise"] * np.exp(factlog / p["ne"]) / bfactor,
        ne=p["ne"],
        isc=p["isc"] * np.exp(factlog / p["nc"]) / bfactor,
        nc=p["nc"],
        inv_vaf=_inverse(p["vaf"]), inv_var=_inverse(p["var"]),
        inv_ikf=_inverse(p["ikf"]), inv_ikr=_inverse(p["ikr"]),
        rb=p["rb"], re=p["re"], rc=p["rc"],
        vt=vt,
    )


def _inverse_or_inf(x) -> np.ndarray:
    x = np.asarray(x, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(x > 0, 1.0 / np.where(x > 0, x, 1.0), np.inf)


def as_gummel_poon(dev: GPDevice, *, is_scale=1.0, bf_scale=1.0):
    """The device as :class:`stockbias.analysis.device.GummelPoon`, the form the circuit
    solve (:func:`stockbias.analysis.operating_point.solve_exponential`) takes; IS and BF
    optionally scaled (arrays broadcast: the production spread around a card)."""
    from .device import GummelPoon

    return GummelPoon(
        is_a=np.asarray(dev.is_a) * is_scale, bf=np.asarray(dev.bf) * bf_scale, br=dev.br,
        nf=dev.nf, nr=dev.nr, vaf=_inverse_or_inf(dev.inv_vaf), ise=dev.ise, ne=dev.ne,
        isc=dev.isc, nc=dev.nc, ikf=_inverse_or_inf(dev.inv_ikf),
        ikr=_inverse_or_inf(dev.inv_ikr), var=_inverse_or_inf(dev.inv_var),
        rb=float(dev.rb), re=float(dev.re), rc=float(dev.rc))


def _diode(v, i_s, n_vt):
    e = np.exp(np.minimum(v / n_vt, _EXP_ARG_MAX))
    return i_s * (e - 1.0), i_s * e / n_vt


def _zero(x) -> bool:
    """True for a scalar exactly zero (a term the card leaves out)."""
    return (type(x) is float or np.ndim(x) == 0) and float(x) == 0.0


def junction_currents(vbe, vbc, dev: GPDevice, icbo=0.0):
    """Base and collector currents of the intrinsic transistor, and their slopes.

    Parameters
    ----------
    vbe, vbc : float or ndarray
        Intrinsic junction voltages, volt (NPN frame).
    dev : GPDevice
        Parameters at the device temperature.
    icbo : float or ndarray
        Extra collector–base leakage, ampere (0 for a pure model card).

    Returns
    -------
    ib, ic : ndarray
        Base and collector currents, ampere.
    dib, dic : tuple of ndarray
        (∂/∂VBE, ∂/∂VBC) of each, siemens.
    """
    vt = dev.vt
    # A parameter that is a scalar zero drops its term (skipped, not computed: adding
    # or multiplying by an exact zero changes no bit of the result).
    cbe, gbe = _diode(vbe, dev.is_a, dev.nf * vt)
    cbc, gbc = _diode(vbc, dev.is_a, dev.nr * vt)
    cben, gben = (0.0, 0.0) if _zero(dev.ise) else _diode(vbe, dev.ise, dev.ne * vt)
    cbcn, gbcn = (0.0, 0.0) if _zero(dev.isc) else _diode(vbc, dev.isc, dev.nc * vt)
    inv_var, inv_ikf, inv_ikr = dev.inv_var, dev.inv_ikf, dev.inv_ikr
    base_w = 1.0 - dev.inv_vaf * vbc
    q1 = 1.0 / (base_w if _zero(inv_var) else base_w - inv_var * vbe)
    if _zero(inv_ikf) and _zero(inv_ikr):
        qb = q1
        dqb_dve = q1 * (qb * inv_var)
        dqb_dvc = q1 * (qb * dev.inv_vaf)
    else:
        q2 = inv_ikf * cbe if _zero(inv_ikr) else inv_ikf * cbe + inv_ikr * cbc
        sq = np.sqrt(np.maximum(1.0 + 4.0 * q2, 0.0))
        sq_safe = np.where(sq > 0, sq, 1.0)
        qb = q1 * (1.0 + sq) / 2.0
        k_e = inv_ikf * gbe / sq_safe
        dqb_dve = q1 * (k_e if _zero(inv_var) else qb * inv_var + k_e)
        dqb_dvc = q1 * (qb * dev.inv_vaf if _zero(inv_ikr)
                        else qb * dev.inv_vaf + inv_ikr * gbc / sq_safe)
    transfer = (cbe - cbc) / qb
    ic = transfer - cbc / dev.br - cbcn + icbo
    ib = cbe / dev.bf + cben + cbc / dev.br + cbcn - icbo
    dic = (gbe / qb - transfer * dqb_dve / qb,
           -gbc / qb - transfer * dqb_dvc / qb - gbc / dev.br - gbcn)
    dib = (gbe / dev.bf + gben, gbc / dev.br + gbcn)
    return ib, ic, dib, dic


def bias_at_current(ic, vce, dev: GPDevice, *, iterations: int = 100):
    """The junction bias that carries collector current ``ic`` at terminal ``vce``.

    Parameters
    ----------
    ic : float or ndarray
        Collector current, ampere (positive, forward active).
    vce : float or ndarray
        Terminal collector–emitter voltage, volt.
    dev : GPDevice
        Parameters at the device temperature.
    iterations : int
        Bisection steps on the intrinsic VBE (100 reach the float resolution).

    Returns
    -------
    vbe_terminal, ib : ndarray
        Terminal base–emitter voltage (series RB and RE included), volt, and the
        base current, ampere; β = ic/ib.
    """
    ic = np.asarray(ic, dtype=float)
    vce = np.asarray(vce, dtype=float)
    ic, vce = np.broadcast_arrays(ic, vce)
    ib = ic / 100.0
    # The series resistances move the intrinsic VCE by the (known) collector current
    # and the (unknown, small) base current: a few outer passes settle it.
    for _ in range(4 if dev.re or dev.rc else 1):
        vce_int = vce - dev.re * (ic + ib) - dev.rc * ic
        lo = np.full(ic.shape, -0.5)
        hi = np.full(ic.shape, 1.5)
        for _ in range(iterations):
            mid = 0.5 * (lo + hi)
            _, c, _, _ = junction_currents(mid, mid - vce_int, dev)
            low = c < ic
            lo = np.where(low, mid, lo)
            hi = np.where(low, hi, mid)
        vbe_int = 0.5 * (lo + hi)
        ib, _, _, _ = junction_currents(vbe_int, vbe_int - vce_int, dev)
    return vbe_int + dev.rb * ib + dev.re * (ib + ic), ib
