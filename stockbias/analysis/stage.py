"""A bias stage as the analysis sees it, and its evaluation at points of the tolerance box.

A :class:`StageSpec` holds everything that sets the operating point: the
network, the device data (25 °C stock data), each resistor's nominal value
with its tolerance and tempco drift, the supply rails with their tolerances,
the ambient range and the device model.  Fields may be arrays over
*candidates* (the search evaluates thousands of stages at once).

A *point* of the tolerance box is a :class:`StagePoint`: physical values of
every varied parameter (supply, each resistor, hFE and VBE at 25 °C, ICBO at
25 °C, ambient).  :func:`evaluate` solves the stage at any broadcast array of
points and returns an :class:`Evaluation` with the operating point and what
follows from it (dissipations, junction temperature, small-signal figures).

Axes of the tolerance box (DESIGN §2, "Extreme value analysis"):

=============  ==========================================================
``vcc``        VCC·(1 ± tol)
``vee``        VEE·(1 ± tol), ``dual_supply`` only
``R:<role>``   the part's band over tolerance and tempco drift across the
               ambient range, independent of the ambient axis:
               R·(1 ± tol)·(1 + tc·(T − 25 °C)) at its lowest and highest
               (a signed tc drifts one way; an unsigned one either way,
               ±|tc|·max|T − 25 °C|); a pair's exact band from its parts
               (:mod:`stockbias.resistor_band`)
``hfe``        hFE min … max at 25 °C, moved to temperature with
               (T/298.15 K)^XTB
``vbe``        VBE min … max at 25 °C, moved with the VBE tempco
               (−2 mV/°C, common practice); for the exponential model the
               VBE range becomes an IS range at the hFE test current
``icbo``       0 … ICBO(25 °C), doubling every 10 °C
``ambient``    ambient min … max, °C
=============  ==========================================================
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from ..topologies import Network, get_network
from . import device
from .operating_point import ACTIVE, OperatingPoint, solve_constant_vbe, solve_exponential
from .rail_current import divider_ratio, supply_current
from .small_signal import parallel, r_o, r_pi, stage_response, transconductance

__all__ = [
    "AXIS_NOMINAL_RULE",
    "SMALL_SIGNAL_QUANTITIES",
    "DeviceSpec",
    "Evaluation",
    "ResistorPiece",
    "ResistorSpec",
    "StagePoint",
    "StageSpec",
    "evaluate",
    "gummel_poon_of",
    "self_heated_temperature",
]

#: How the nominal point is chosen (DESIGN §3 "Results").
AXIS_NOMINAL_RULE = {
    "vcc": "nominal supply",
    "vee": "nominal supply",
    "R": "nominal value",
    "hfe": "geometric mean of the hFE range",
    "vbe": "middle of the VBE range",
    "icbo": "half the 25 °C leakage",
    "ambient": "25 °C, or the middle of the ambient range when it excludes 25 °C",
}


@dataclass(frozen=True)
class ResistorPiece:
    """One physical part of a role, as Monte Carlo draws it.

    value : ohm; tol : fraction; tempco_ppm : ppm/°C; signed : the coefficient has that sign
    (False: either sign, drawn uniform in ±|tempco_ppm|).
    """

    value: float
    tol: float
    tempco_ppm: float = 0.0
    signed: bool = False


@dataclass(frozen=True)
class ResistorSpec:
    """One resistor role.  value : ohm; tol, drift : fractions (0.05 = ±5 %).

    The band is R·(1 ± tol)·(1 ± drift) unless ``band`` gives its exact (low, high) in ohm
    (an asymmetric band: a signed tempco, a pair of unequal parts).  ``pieces`` and
    ``arrangement`` (``single``, ``series``, ``parallel``) say what the role is built from,
    so Monte Carlo can draw each part (empty: one part at ±tol, ±drift).
    """

    value: float | np.ndarray
    tol: float | np.ndarray
    drift: float | np.ndarray = 0.0
    band: tuple[float | np.ndarray, float | np.ndarray] | None = None
    pieces: tuple[ResistorPiece, ...] = ()
    arrangement: str = "single"

    @property
    def low(self) -> np.ndarray:
        if self.band is not None:
            return np.asarray(self.band[0], dtype=float)
        return np.asarray(self.value) * (1 - np.asarray(self.tol)) * (1 - np.asarray(self.drift))

    @property
    def high(self) -> np.ndarray:
        if self.band is not None:
            return np.asarray(self.band[1], dtype=float)
        return np.asarray(self.value) * (1 + np.asarray(self.tol)) * (1 + np.asarray(self.drift))


@dataclass(frozen=True)
class DeviceSpec:
    """Transistor data at 25 °C (see :class:`stockbias.parts.Transistor`), arrays allowed."""

    polarity: str
    hfe_min: float | np.ndarray
    hfe_max: float | np.ndarray
    vbe_min: float | np.ndarray = 0.60
    vbe_max: float | np.ndarray = 0.75
    vce_sat: float | np.ndarray = 0.2
    icbo_a: float | np.ndarray = 0.0
    hfe_test_ic: float | np.ndarray = 1e-3
    xtb: float | np.ndarray = 1.5
    vbe_tempco: float = device.VBE_TEMPCO_DEFAULT
    is_a: float | np.ndarray | None = None
    br: float | np.ndarray = 1.0
    nf: float | np.ndarray = 1.0
    nr: float | np.ndarray = 1.0
    vaf_v: float | np.ndarray = math.inf
    xti: float | np.ndarray = 3.0
    eg_ev: float | np.ndarray = 1.11
    theta_ja: float | np.ndarray = math.nan  # °C/W; NaN: derived from the PD rating
    tj_max: float | np.ndarray = 150.0
    pd_max_w: float | np.ndarray = math.inf
    ic_max: float | np.ndarray = math.inf
    vceo_max: float | np.ndarray = math.inf
    #: A model card's DC parameters (lower-case SPICE names, SI) when the stock row names
    #: one (or datasheet points fitted to one); the exponential model then follows it.
    card: Mapping[str, float] | None = field(default=None, compare=False)

    @classmethod
    def from_transistor(cls, t: object) -> DeviceSpec:
        """Build from a :class:`stockbias.parts.Transistor` row."""
        names = [f.name for f in cls.__dataclass_fields__.values()
                 if f.name not in ("vbe_tempco", "card")]
        values = {n: getattr(t, n) for n in names}
        if values["theta_ja"] is None:
            values["theta_ja"] = math.nan
        card = getattr(t, "card", None)
        return cls(**values, card=None if card is None else dict(card.params))

    @property
    def theta_ja_effective(self) -> np.ndarray:
        """θJA, °C/W; where unknown, (TJ max − 25 °C)/PD max (linear derating assumed)."""
        theta = np.asarray(self.theta_ja, dtype=float)
        derived = (np.asarray(self.tj_max, dtype=float) - 25.0) / np.asarray(self.pd_max_w)
        return np.where(np.isnan(theta), derived, theta)


@dataclass(frozen=True)
class StagePoint:
    """Physical values of the varied parameters (arrays broadcast together).

    vcc, vee : V; r : role → ohm; hfe, vbe, icbo : at 25 °C (–, V, A); ambient_c : °C.
    """

    vcc: np.ndarray
    vee: np.ndarray | None
    r: Mapping[str, np.ndarray]
    hfe: np.ndarray
    vbe: np.ndarray
    icbo: np.ndarray
    ambient_c: np.ndarray


@dataclass(frozen=True)
class StageSpec:
    """Everything that sets a stage's operating point (arrays over candidates allowed).

    Attributes
    ----------
    network : Network
    resistors : Mapping[str, ResistorSpec]
        Present roles only; a missing optional role is absent (a short).
    device : DeviceSpec
    vcc : float
        Positive supply, V.  vcc_tol : fraction.
    vee : float or None
        Negative supply, V (signed), ``dual_supply`` only.  vee_tol : fraction.
    ambient_min_c, ambient_max_c : float
        Ambient range, °C.
    model : {"constant_vbe", "exponential"}
    load : float
        AC load on the collector, ohm (inf: none).
    re_bypassed : bool
        RE fully bypassed for AC.
    """

    network: Network
    resistors: Mapping[str, ResistorSpec]
    device: DeviceSpec
    vcc: float
    vcc_tol: float = 0.0
    vee: float | None = None
    vee_tol: float = 0.0
    ambient_min_c: float = 25.0
    ambient_max_c: float = 25.0
    model: str = "constant_vbe"
    load: float = math.inf
    re_bypassed: bool = True
    names: Mapping[str, str] = field(default_factory=dict)

    def __post_init__(self) -> None:
        object.__setattr__(self, "network", get_network(self.network))
        missing = set(self.network.required_roles) - set(self.resistors)
        if missing:
            raise ValueError(f"network {self.network.name} needs roles {sorted(missing)}")
        if self.network.supply == "dual" and self.vee is None:
            raise ValueError("dual_supply needs a negative supply")
        if self.model not in ("constant_vbe", "exponential"):
            raise ValueError(f"unknown model {self.model!r}")

    @property
    def polarity(self) -> str:
        return self.device.polarity

    @property
    def nominal_ambient_c(self) -> float:
        if self.ambient_min_c <= 25.0 <= self.ambient_max_c:
            return 25.0
        return 0.5 * (self.ambient_min_c + self.ambient_max_c)

    def axes(self) -> tuple[str, ...]:
        """Names of the axes that actually vary for this stage."""
        out = ["vcc"] if np.any(np.asarray(self.vcc_tol) > 0) else []
        if self.network.supply == "dual" and np.any(np.asarray(self.vee_tol) > 0):
            out.append("vee")
        out += [f"R:{role}" for role, spec in self.resistors.items()
                if np.any(spec.high > spec.low)]
        if np.any(np.asarray(self.device.hfe_max) > np.asarray(self.device.hfe_min)):
            out.append("hfe")
        if np.any(np.asarray(self.device.vbe_max) > np.asarray(self.device.vbe_min)):
            out.append("vbe")
        if np.any(np.asarray(self.device.icbo_a) > 0):
            out.append("icbo")
        if self.ambient_max_c > self.ambient_min_c:
            out.append("ambient")
        return tuple(out)

    def axis_range(self, axis: str) -> tuple[np.ndarray, np.ndarray]:
        """(low, high) physical values of an axis."""
        d = self.device
        if axis == "vcc":
            v = np.asarray(self.vcc, dtype=float)
            return v * (1 - np.asarray(self.vcc_tol)), v * (1 + np.asarray(self.vcc_tol))
        if axis == "vee":  # signed negative: "low" is the smaller magnitude
            v = np.asarray(self.vee, dtype=float)
            return v * (1 - np.asarray(self.vee_tol)), v * (1 + np.asarray(self.vee_tol))
        if axis.startswith("R:"):
            spec = self.resistors[axis[2:]]
            return spec.low, spec.high
        if axis == "hfe":
            return np.asarray(d.hfe_min, dtype=float), np.asarray(d.hfe_max, dtype=float)
        if axis == "vbe":
            return np.asarray(d.vbe_min, dtype=float), np.asarray(d.vbe_max, dtype=float)
        if axis == "icbo":
            return np.zeros_like(np.asarray(d.icbo_a, dtype=float)), np.asarray(d.icbo_a,
                                                                                 dtype=float)
        if axis == "ambient":
            return np.asarray(self.ambient_min_c, dtype=float), np.asarray(self.ambient_max_c,
                                                                           dtype=float)
        raise KeyError(axis)

    def nominal_point(self) -> StagePoint:
        """The nominal point of DESIGN §3 (worked out once per spec; each call returns its
        own point and role mapping)."""
        p = self.__dict__.get("_nominal")
        if p is None:
            d = self.device
            p = StagePoint(
                vcc=np.asarray(self.vcc, dtype=float),
                vee=None if self.vee is None else np.asarray(self.vee, dtype=float),
                r={role: np.asarray(s.value, dtype=float) for role, s in self.resistors.items()},
                hfe=np.sqrt(np.asarray(d.hfe_min, dtype=float) * np.asarray(d.hfe_max)),
                vbe=0.5 * (np.asarray(d.vbe_min, dtype=float) + np.asarray(d.vbe_max)),
                icbo=0.5 * np.asarray(d.icbo_a, dtype=float),
                ambient_c=np.asarray(self.nominal_ambient_c, dtype=float),
            )
            object.__setattr__(self, "_nominal", p)   # a cache, not a field
        return replace(p, r=dict(p.r))

    def point_from(self, values: Mapping[str, np.ndarray],
                   base: StagePoint | None = None) -> StagePoint:
        """A point with the given axes set (physical values), the rest from ``base`` or nominal."""
        p = base or self.nominal_point()
        r = dict(p.r)
        kw: dict[str, object] = {}
        for axis, v in values.items():
            if axis.startswith("R:"):
                r[axis[2:]] = np.asarray(v, dtype=float)
            elif axis == "ambient":
                kw["ambient_c"] = np.asarray(v, dtype=float)
            else:
                kw[axis] = np.asarray(v, dtype=float)
        return replace(p, r=r, **kw)  # type: ignore[arg-type]


@dataclass(frozen=True)
class Evaluation:
    """A stage solved at an array of points.

    Attributes
    ----------
    op : OperatingPoint
        Currents (A), node voltages (V), region, dissipations (W).
    quantities : dict
        ``ic, ib, ie, vb, vc, ve, vce, supply_power, pd, p_<role>, tj`` (SI, °C for tj),
        and, NaN outside the active region, ``gain`` (V/V, signed), ``rin`` (ohm), ``gm``.
    beta, temp_c : ndarray
        Current gain and device temperature at each point.
    """

    op: OperatingPoint
    quantities: dict[str, np.ndarray]
    beta: np.ndarray
    temp_c: np.ndarray

    @property
    def region(self) -> np.ndarray:
        return self.op.region

    @property
    def active(self) -> np.ndarray:
        return self.op.region == ACTIVE


def _device_temperature_terms(spec: StageSpec, point: StagePoint, temp_c: np.ndarray):
    d = spec.device
    t_k = temp_c + device.CELSIUS_TO_KELVIN
    beta = device.beta_at(point.hfe, t_k, xtb=np.asarray(d.xtb, dtype=float))
    icbo = device.icbo_at(point.icbo, temp_c)
    return beta, icbo, t_k


def solve_point(spec: StageSpec, point: StagePoint,
                temp_c: np.ndarray | None = None) -> tuple[OperatingPoint, np.ndarray]:
    """Solve the operating point; the device at ``temp_c`` (default: the point's ambient)."""
    d = spec.device
    temp = np.asarray(point.ambient_c if temp_c is None else temp_c, dtype=float)
    beta, icbo, t_k = _device_temperature_terms(spec, point, temp)
    r = dict(point.r)
    if spec.model == "constant_vbe":
        vbe = device.vbe_at(point.vbe, temp, spec.device.vbe_tempco)
        op = solve_constant_vbe(spec.network, r, d.polarity, point.vcc, point.vee, beta, vbe,
                                d.vce_sat, icbo)
        return op, beta
    gp = gummel_poon_of(spec, point, temp)
    op = solve_exponential(spec.network, r, d.polarity, point.vcc, point.vee, gp, t_k, icbo)
    beta_dc = np.where(op.ib > 0, op.ic / np.where(op.ib > 0, op.ib, 1.0), np.asarray(gp.bf))
    return op, np.asarray(beta_dc, dtype=float)


def gummel_poon_of(spec: StageSpec, point: StagePoint, temp_c: np.ndarray) -> device.GummelPoon:
    """Gummel–Poon parameters of the exponential model at a point, device at ``temp_c`` (°C).

    IS at 25 °C comes from the row's IS (moved from TNOM) shifted by the point's VBE
    within its range, or, without IS, from the point's VBE at the hFE test current;
    BF is the point's hFE at 25 °C; both then move to ``temp_c``.
    """
    d = spec.device
    if d.card is not None:
        return _card_gummel_poon(d, point, temp_c)
    parts = [_array_key(x) for x in (temp_c, point.vbe, point.hfe, d.nf, d.br, d.nr, d.vaf_v,
                                     d.xti, d.eg_ev, d.xtb, d.hfe_test_ic, d.vbe_min,
                                     d.vbe_max, 0.0 if d.is_a is None else d.is_a)]
    if any(k is None for k in parts):
        return _row_gummel_poon(d, point, temp_c)
    return _remembered(("row", d.is_a is None, *parts),
                       lambda: _row_gummel_poon(d, point, temp_c))


def _row_gummel_poon(d: DeviceSpec, point: StagePoint, temp_c: np.ndarray
                     ) -> device.GummelPoon:
    """:func:`gummel_poon_of` for a row without a model card (not remembered)."""
    t25 = device.STOCK_REFERENCE_C + device.CELSIUS_TO_KELVIN
    nf = np.asarray(d.nf, dtype=float)
    if d.is_a is None:
        is25 = device.saturation_current_from_vbe(point.vbe, d.hfe_test_ic, nf, t25)
    else:
        is_nom = device.saturation_current_at(d.is_a, t25, device.TNOM_DEFAULT_C
                                              + device.CELSIUS_TO_KELVIN, d.xti, d.eg_ev)
        vbe_mid = 0.5 * (np.asarray(d.vbe_min) + np.asarray(d.vbe_max))
        is25 = is_nom * np.exp((vbe_mid - point.vbe) / (nf * device.thermal_voltage(t25)))
    return device.gummel_poon_at(is25, point.hfe, d.br, d.nf, d.nr, d.vaf_v, d.xti, d.eg_ev,
                                 d.xtb, device.STOCK_REFERENCE_C, temp_c)


_CARD_GP: dict[tuple, device.GummelPoon] = {}
_CARD_GP_SMALL = 1024  # arrays up to this size (the vertex axes) take part in the cache key


def _remembered(key: tuple, build: Callable[[], device.GummelPoon]) -> device.GummelPoon:
    """The device under ``key`` in :data:`_CARD_GP`, built once (at most 64 kept)."""
    got = _CARD_GP.get(key)
    if got is None:
        if len(_CARD_GP) >= 64:
            _CARD_GP.clear()
        got = _CARD_GP[key] = build()
    return got


def _array_key(x) -> tuple | None:
    a = np.asarray(x, dtype=float)
    return (a.shape, a.tobytes()) if a.size <= _CARD_GP_SMALL else None


def _card_gummel_poon(d: DeviceSpec, point: StagePoint, temp_c: np.ndarray
                      ) -> device.GummelPoon:
    """:func:`_card_device` remembered for small arrays (the same card at the same vertex
    temperatures, VBE and hFE spread is asked for by every check of a transistor)."""
    assert d.card is not None
    parts = [_array_key(x) for x in (temp_c, point.vbe, point.hfe, d.br, d.nf, d.nr, d.xtb,
                                     d.xti, d.eg_ev, d.vaf_v, d.vbe_min, d.vbe_max, d.hfe_min,
                                     d.hfe_max, 0.0 if d.is_a is None else d.is_a)]
    if any(k is None for k in parts):
        return _card_device(d, point, temp_c)
    return _remembered((d.is_a is None, tuple(sorted(d.card.items())), *parts),
                       lambda: _card_device(d, point, temp_c))


def _card_device(d: DeviceSpec, point: StagePoint, temp_c: np.ndarray
                 ) -> device.GummelPoon:
    """A model card's device at a point: the card as given at the nominal point, the hFE
    bin's and VBE range's spread applied around it.

    BF is the card's × hFE/hFE_nominal (the bin's geometric mean) and IS the card's ×
    exp((VBE_mid − VBE)/(NF·VT at 25 °C)), so the nominal point is the card itself and the
    corners keep the bin's relative spread; the row's own Gummel–Poon columns (the card
    fills those the row leaves empty) and the card's other terms follow the card's
    temperature laws (:func:`stockbias.analysis.gp_dc.device_at`).
    """
    from .gp_dc import as_gummel_poon, device_at

    assert d.card is not None
    t25 = device.STOCK_REFERENCE_C + device.CELSIUS_TO_KELVIN
    nf = float(np.asarray(d.nf))
    vbe_mid = 0.5 * (np.asarray(d.vbe_min, dtype=float) + np.asarray(d.vbe_max, dtype=float))
    hfe_nom = np.sqrt(np.asarray(d.hfe_min, dtype=float) * np.asarray(d.hfe_max, dtype=float))
    params = {**d.card, "br": d.br, "nf": d.nf, "nr": d.nr, "xtb": d.xtb, "xti": d.xti,
              "eg": d.eg_ev, "vaf": 0.0 if math.isinf(float(np.asarray(d.vaf_v))) else d.vaf_v}
    if d.is_a is not None:
        params["is"] = d.is_a
    is_scale = np.exp((vbe_mid - np.asarray(point.vbe, dtype=float))
                      / (nf * device.thermal_voltage(t25)))
    return as_gummel_poon(device_at(params, temp_c), is_scale=is_scale,
                          bf_scale=np.asarray(point.hfe, dtype=float) / hfe_nom)


def _exponential_small_signal(spec: StageSpec, point: StagePoint, op: OperatingPoint,
                              temp_c: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """gm, gπ and rₒ of the Gummel–Poon equations at the solved point (S, S, ohm).

    The derivatives of IC and IB in (VBE, VBC) are taken exactly and moved to
    (VBE, VCE): gm = ∂IC/∂VBE + ∂IC/∂VBC (= IC/(NF·VT) − 1/rₒ in the active region),
    1/rₒ = −∂IC/∂VBC, gπ = ∂IB/∂VBE.  The leakage source (ICBO) has no derivative;
    ∂IB/∂VBC (the reverse-biased collector diode, at most IS/(BR·NR·VT)) is left out.
    """
    gp = gummel_poon_of(spec, point, temp_c)
    vt = device.thermal_voltage(np.asarray(temp_c, dtype=float) + device.CELSIUS_TO_KELVIN)
    vbe = np.asarray(op.vbe, dtype=float)
    vbc = vbe - np.asarray(op.vce, dtype=float)
    if gp.full:  # a model card's full equations; the small series resistances left out
        from .operating_point import _gp_currents

        _, _, dib, dic = _gp_currents(vbe, vbc, gp.is_a, gp.bf, gp.br, gp.nf, gp.nr,
                                      1.0 / np.asarray(gp.vaf, dtype=float), vt, 0.0,
                                      gp.extras())
        g_o = -np.asarray(dic[1], dtype=float)
        with np.errstate(divide="ignore", over="ignore"):
            ro = np.asarray(1.0 / g_o, dtype=float)
        return np.asarray(dic[0] + dic[1], dtype=float), np.asarray(dib[0], dtype=float), ro
    is_a, bf, br = (np.asarray(x, dtype=float) for x in (gp.is_a, gp.bf, gp.br))
    vtf, vtr = np.asarray(gp.nf) * vt, np.asarray(gp.nr) * vt
    with np.errstate(over="ignore"):
        ef = np.exp(np.minimum(vbe / vtf, 700.0))
        er = np.exp(np.minimum(vbc / vtr, 700.0))
    inv_vaf = 1.0 / np.asarray(gp.vaf, dtype=float)
    early = 1.0 - vbc * inv_vaf
    i_f, i_r = is_a * (ef - 1.0), is_a * (er - 1.0)
    dic_dvbe = is_a * ef / vtf * early
    dic_dvbc = -is_a * er / vtr * early - (i_f - i_r) * inv_vaf - is_a * er / vtr / br
    g_o = -dic_dvbc
    with np.errstate(divide="ignore", over="ignore"):   # gₒ subnormal in cut-off: rₒ = inf
        ro = np.asarray(1.0 / g_o, dtype=float)
    return dic_dvbe + dic_dvbc, is_a * ef / vtf / bf, ro


SMALL_SIGNAL_QUANTITIES = frozenset({"gm", "gain", "gain_abs", "rin", "swing_to_cutoff"})


def self_heated_temperature(spec: StageSpec, point: StagePoint,
                            ambient_op: OperatingPoint | None = None) -> np.ndarray:
    """Junction temperature TJ = TA + θJA·PD(TJ) at each point (fixed point), °C.

    The device is evaluated at TJ, the resistors at the ambient.  Where no fixed
    point exists below 400 °C (thermal runaway) TJ is the cap.  ``ambient_op``, the
    operating point already solved at ``point`` with the device at the ambient (the
    ``op`` of :func:`evaluate` there), spares that solve.
    """
    from .thermal import self_heated_point

    ambient = np.asarray(point.ambient_c, dtype=float)
    theta = spec.device.theta_ja_effective

    op0 = solve_point(spec, point)[0] if ambient_op is None else ambient_op
    shape = op0.shape
    at_ambient = np.broadcast_to(ambient, shape)

    def pd_of_tj(tj: np.ndarray) -> np.ndarray:
        if np.shape(tj) == shape and np.array_equal(tj, at_ambient):
            op = op0        # the device at the ambient: solved above
        else:
            op, _ = solve_point(spec, point, tj)
        return np.maximum(np.asarray(op.pd, dtype=float), 0.0)

    sh = self_heated_point(pd_of_tj, np.broadcast_to(ambient, shape),
                           np.broadcast_to(theta, shape), tol=1e-4)
    return np.asarray(sh.tj_c, dtype=float)


def evaluate(spec: StageSpec, point: StagePoint, *, small_signal: bool = True,
             device_temp_c: np.ndarray | None = None) -> Evaluation:
    """Solve the stage at ``point`` and derive every reported quantity.

    Parameters
    ----------
    spec : StageSpec
    point : StagePoint
        Arrays broadcast together (and with the spec's candidate arrays).
    small_signal : bool
        Also derive the small-signal figures (:data:`SMALL_SIGNAL_QUANTITIES`).
    device_temp_c : ndarray, optional
        Evaluate the transistor at this temperature (°C) instead of the ambient, e.g.
        the self-heated junction temperature; resistors stay at the ambient.

    Returns
    -------
    Evaluation
    """
    op, beta = solve_point(spec, point, device_temp_c)
    ambient = np.broadcast_to(np.asarray(point.ambient_c, dtype=float), op.shape)
    temp_c = ambient if device_temp_c is None else np.broadcast_to(
        np.asarray(device_temp_c, dtype=float), op.shape)
    d = spec.device
    q: dict[str, np.ndarray] = {
        "ic": op.ic, "ib": op.ib, "ie": op.ie, "vb": op.vb, "vc": op.vc, "ve": op.ve,
        "vce": op.vce, "supply_power": op.supply_power, "pd": op.pd,
    }
    for role in spec.resistors:
        q[f"p_{role}"] = op.resistor_power(role)
    q["tj"] = ambient + spec.device.theta_ja_effective * op.pd
    q["supply_current"] = supply_current(spec.network, op)
    if spec.network.name == "divider":
        q["divider_ratio"] = divider_ratio(op)
    q["swing_to_saturation"] = op.vce - np.asarray(d.vce_sat, dtype=float)
    if not small_signal:
        return Evaluation(op=op, quantities=q, beta=np.asarray(beta), temp_c=temp_c)

    # Small-signal figures, only where the transistor is active.  Constant VBE: the
    # hand model gm = IC/VT, rπ = β/gm.  Exponential: the exact derivatives of the
    # Gummel–Poon equations (gm = IC/(NF·VT) − 1/rₒ, gπ = IB/(NF·VT)).
    active = op.region == ACTIVE
    ic_pos = np.where(active, op.ic, np.nan)
    if spec.model == "exponential":
        gm_x, g_pi, ro = _exponential_small_signal(spec, point, op, temp_c)
        gm = np.where(active, gm_x, np.nan)
        g_pi = np.where(active, g_pi, np.nan)
    else:
        vt = device.thermal_voltage(temp_c + device.CELSIUS_TO_KELVIN)
        gm = transconductance(ic_pos, vt)
        g_pi = 1.0 / r_pi(beta, gm)
        vcb = np.maximum(op.vce - op.vbe, 0.0)
        ro = r_o(ic_pos, np.asarray(d.vaf_v, dtype=float), vcb)
    re_u: float | np.ndarray = 0.0
    if not spec.re_bypassed and "RE" in point.r:
        re_u = point.r["RE"]
    rc = point.r["RC"]
    r_fb: float | np.ndarray
    r_bias: float | np.ndarray
    if spec.network.name == "collector_feedback":
        r_fb, r_bias = point.r["RB"], np.inf
    elif spec.network.name == "divider":
        r_fb, r_bias = np.inf, parallel(point.r["R1"], point.r["R2"])
    else:
        r_fb, r_bias = np.inf, point.r["RB"]
    gain, rin = stage_response(gm, g_pi, parallel(rc, spec.load), re_u, ro, r_fb, r_bias)
    q["gm"] = gm
    q["gain"] = np.where(active, gain, np.nan)
    q["gain_abs"] = np.abs(q["gain"])
    q["rin"] = np.where(active, rin, np.nan)
    # Symmetric swing towards cut-off: IC·(RC‖RL) (towards saturation: VCE − VCE(sat)).
    q["swing_to_cutoff"] = np.where(active, op.ic * parallel(rc, spec.load), np.nan)
    return Evaluation(op=op, quantities=q, beta=np.asarray(beta) * np.ones(op.shape),
                      temp_c=temp_c)
