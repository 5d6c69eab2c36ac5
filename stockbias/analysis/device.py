"""Device equations of the bipolar transistor: thermal voltage, temperature laws.

Two kinds of data meet here.  Model-card parameters (IS, BF, BR, …) follow the
SPICE Gummel–Poon temperature equations, as ngspice-39 implements them
(``bjttemp.c``, TLEV = 0), with the nominal temperature TNOM (27 °C default)::

    IS(T) = IS · (T/TNOM)^XTI · exp[(T/TNOM − 1) · EG / VT(T)]
    BF(T) = BF · (T/TNOM)^XTB,   BR(T) = BR · (T/TNOM)^XTB   (same factor)

Stock data (hFE range, VBE range, leakage) are specified at 25 °C, so the
same power law is applied with a 25 °C reference, and VBE and ICBO get the
trade's rules of thumb (−2 mV/°C, doubling every 10 °C).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "CELSIUS_TO_KELVIN",
    "STOCK_REFERENCE_C",
    "TNOM_DEFAULT_C",
    "VBE_TEMPCO_DEFAULT",
    "XTB_DEFAULT",
    "GummelPoon",
    "beta_at",
    "gummel_poon_at",
    "icbo_at",
    "saturation_current_at",
    "saturation_current_from_vbe",
    "thermal_voltage",
    "vbe_at",
]

# Exact by the definition of the SI units (2019 revision, the values CODATA 2018 and
# scipy.constants carry); written out so that importing the device laws needs no scipy.
BOLTZMANN = 1.380649e-23  # J/K
ELEMENTARY_CHARGE = 1.602176634e-19  # C
CELSIUS_TO_KELVIN = 273.15  # K at 0 °C
TNOM_DEFAULT_C = 27.0  # SPICE nominal temperature of model-card parameters
STOCK_REFERENCE_C = 25.0  # stock data (hFE, VBE, ICBO) are specified here
VBE_TEMPCO_DEFAULT = -2.0e-3  # V/°C at constant IC, common practice
XTB_DEFAULT = 1.5  # typical of device model cards (recalled); ngspice's own default is 0
_K_OVER_Q = BOLTZMANN / ELEMENTARY_CHARGE  # V/K


def thermal_voltage(temp_k):
    """Thermal voltage kT/q.

    Parameters
    ----------
    temp_k : float or ndarray
        Absolute temperature, kelvin.

    Returns
    -------
    ndarray
        VT in volt (about 25.85 mV at 300 K).
    """
    return _K_OVER_Q * np.asarray(temp_k, dtype=float)


def saturation_current_at(is_a, temp_k, tnom_k, xti=3.0, eg_ev=1.11):
    """Gummel–Poon saturation current at temperature.

    Parameters
    ----------
    is_a : float or ndarray
        IS at ``tnom_k``, ampere.
    temp_k, tnom_k : float or ndarray
        Device and nominal temperatures, kelvin.
    xti : float or ndarray
        Saturation-current temperature exponent (3 for silicon junctions).
    eg_ev : float or ndarray
        Energy gap, electron-volt (1.11 for silicon).

    Returns
    -------
    ndarray
        IS(T), ampere.
    """
    t = np.asarray(temp_k, dtype=float)
    ratio = t / np.asarray(tnom_k, dtype=float)
    factlog = (ratio - 1.0) * np.asarray(eg_ev, dtype=float) / thermal_voltage(t) + (
        np.asarray(xti, dtype=float) * np.log(ratio)
    )
    return np.asarray(is_a, dtype=float) * np.exp(factlog)


def beta_at(beta, temp_k, ref_temp_k=STOCK_REFERENCE_C + CELSIUS_TO_KELVIN, xtb=XTB_DEFAULT):
    """Current gain at temperature, β(T) = β · (T/Tref)^XTB.

    Parameters
    ----------
    beta : float or ndarray
        Gain at ``ref_temp_k`` (hFE from stock data, or BF/BR of a model card).
    temp_k : float or ndarray
        Temperature, kelvin.
    ref_temp_k : float or ndarray
        Temperature ``beta`` is given at, kelvin: 298.15 K (25 °C) for stock
        data, TNOM (300.15 K by default) for model-card parameters.
    xtb : float or ndarray
        Beta temperature exponent (1.5 default, see :data:`XTB_DEFAULT`).

    Returns
    -------
    ndarray
        β at ``temp_k``.
    """
    ratio = np.asarray(temp_k, dtype=float) / np.asarray(ref_temp_k, dtype=float)
    return np.asarray(beta, dtype=float) * ratio ** np.asarray(xtb, dtype=float)


def saturation_current_from_vbe(vbe, ic, nf, temp_k):
    """IS that gives collector current ``ic`` at base–emitter voltage ``vbe``.

    IS = IC / (exp(VBE / (NF·VT)) − 1), the forward-active transport equation.

    Parameters
    ----------
    vbe : float or ndarray
        Base–emitter voltage at the test current, volt (magnitude for PNP).
    ic : float or ndarray
        Test collector current, ampere.
    nf : float or ndarray
        Forward emission coefficient.
    temp_k : float or ndarray
        Temperature of the measurement, kelvin (298.15 K for stock data).

    Returns
    -------
    ndarray
        IS in ampere, at ``temp_k``.
    """
    x = np.asarray(vbe, dtype=float) / (np.asarray(nf, dtype=float) * thermal_voltage(temp_k))
    return np.asarray(ic, dtype=float) / np.expm1(x)


def vbe_at(vbe25, temp_c, tempco=VBE_TEMPCO_DEFAULT):
    """Constant-VBE model at temperature: VBE(T) = VBE25 + tempco · (T − 25 °C).

    Parameters
    ----------
    vbe25 : float or ndarray
        VBE at 25 °C, volt.
    temp_c : float or ndarray
        Temperature, °C.
    tempco : float or ndarray
        Temperature coefficient, V/°C (−2 mV/°C, common practice).

    Returns
    -------
    ndarray
        VBE, volt.
    """
    dt = np.asarray(temp_c, dtype=float) - STOCK_REFERENCE_C
    return np.asarray(vbe25, dtype=float) + np.asarray(tempco, dtype=float) * dt


def icbo_at(icbo25, temp_c, doubling_c=10.0):
    """Collector–base leakage at temperature: ICBO25 · 2^((T − 25 °C)/doubling).

    Parameters
    ----------
    icbo25 : float or ndarray
        Leakage at 25 °C, ampere.
    temp_c : float or ndarray
        Temperature, °C.
    doubling_c : float or ndarray
        Temperature step that doubles the leakage, °C (10, common practice;
        8–10 in practice).

    Returns
    -------
    ndarray
        ICBO, ampere.
    """
    dt = np.asarray(temp_c, dtype=float) - STOCK_REFERENCE_C
    return np.asarray(icbo25, dtype=float) * np.exp2(dt / np.asarray(doubling_c, dtype=float))


@dataclass(frozen=True)
class GummelPoon:
    """DC Gummel–Poon parameters already at the device temperature.

    By default no high-injection (IKF, IKR), recombination (ISE, ISC) or
    parasitic-resistance terms and VAR infinite; a model card's row sets them
    (:func:`stockbias.analysis.stage.gummel_poon_of`).  Fields may be arrays that
    broadcast with the circuit arrays.

    Attributes
    ----------
    is_a : float or ndarray
        Transport saturation current IS, ampere.
    bf, br : float or ndarray
        Ideal forward and reverse current gains.
    nf, nr : float or ndarray
        Forward and reverse emission coefficients.
    vaf : float or ndarray
        Forward Early voltage, volt (``inf`` for none).
    """

    is_a: float | np.ndarray
    bf: float | np.ndarray
    br: float | np.ndarray
    nf: float | np.ndarray = 1.0
    nr: float | np.ndarray = 1.0
    vaf: float | np.ndarray = np.inf
    #: The terms of a full model card (:mod:`stockbias.analysis.gp_dc`), already at the
    #: device temperature: recombination currents ISE, ISC (A) and their emission
    #: coefficients, knee currents IKF, IKR (A), reverse Early voltage VAR (V), series
    #: resistances RB, RE, RC (ohm).  The defaults drop every one of them.
    ise: float | np.ndarray = 0.0
    ne: float | np.ndarray = 1.5
    isc: float | np.ndarray = 0.0
    nc: float | np.ndarray = 2.0
    ikf: float | np.ndarray = np.inf
    ikr: float | np.ndarray = np.inf
    var: float | np.ndarray = np.inf
    rb: float = 0.0
    re: float = 0.0
    rc: float = 0.0

    def __post_init__(self) -> None:
        for name in ("is_a", "bf", "br", "nf", "nr", "vaf", "ne", "nc", "ikf", "ikr", "var"):
            value = np.asarray(getattr(self, name), dtype=float)
            if not (value > 0).all():
                raise ValueError(f"Gummel-Poon parameter {name} must be positive, got {value}")

    @property
    def full(self) -> bool:
        """True when a term beyond the simple transport model is present."""
        return bool((np.asarray(self.ise) > 0).any() or (np.asarray(self.isc) > 0).any()
                    or np.isfinite(self.ikf).any() or np.isfinite(self.ikr).any()
                    or np.isfinite(self.var).any() or self.rb > 0 or self.re > 0
                    or self.rc > 0)

    def extras(self) -> tuple:
        """(ISE, NE, ISC, NC, 1/IKF, 1/IKR, 1/VAR) for the full current equations."""
        return (self.ise, self.ne, self.isc, self.nc, 1.0 / np.asarray(self.ikf, dtype=float),
                1.0 / np.asarray(self.ikr, dtype=float), 1.0 / np.asarray(self.var, dtype=float))


def gummel_poon_at(is_a, bf, br, nf, nr, vaf, xti, eg_ev, xtb, tnom_c, temp_c) -> GummelPoon:
    """Model-card parameters moved to the device temperature.

    Parameters
    ----------
    is_a : float or ndarray
        IS at TNOM, ampere.
    bf, br : float or ndarray
        BF and BR at TNOM.
    nf, nr : float or ndarray
        Emission coefficients (temperature independent).
    vaf : float or ndarray
        Forward Early voltage, volt (``inf`` for none).
    xti, eg_ev, xtb : float or ndarray
        IS temperature exponent, energy gap (eV), beta temperature exponent.
    tnom_c : float or ndarray
        Nominal temperature of the card, °C (27 in SPICE).
    temp_c : float or ndarray
        Device temperature, °C.

    Returns
    -------
    GummelPoon
        IS(T), BF(T), BR(T) with the ngspice-39 (TLEV = 0) equations.
    """
    t = np.asarray(temp_c, dtype=float) + CELSIUS_TO_KELVIN
    tnom = np.asarray(tnom_c, dtype=float) + CELSIUS_TO_KELVIN
    return GummelPoon(
        is_a=saturation_current_at(is_a, t, tnom, xti, eg_ev),
        bf=beta_at(bf, t, tnom, xtb),
        br=beta_at(br, t, tnom, xtb),
        nf=np.asarray(nf, dtype=float),
        nr=np.asarray(nr, dtype=float),
        vaf=np.asarray(vaf, dtype=float),
    )
