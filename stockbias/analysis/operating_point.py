"""Exact DC operating point of a bias network, two device models, both polarities.

Both solvers broadcast over any shape of inputs (candidates × corners ×
samples) and return an :class:`OperatingPoint` of arrays of that shape.

How a stage is solved
---------------------
A PNP stage is solved as the NPN stage with every voltage negated (the *NPN
frame*: rails and node voltages multiplied by −1, currents unchanged), and
the node voltages are negated back, so it is the exact mirror.

The resistor network is linear.  It is solved by nodal analysis of the three
terminal nodes; an absent optional role (a zero resistance) is an ideal short,
stated exactly as V_n = V_rail (the node is eliminated), not a tiny
resistor.  With the transistor replaced by the currents it draws (IB into the
base, IC into the collector, IE = IB + IC out of the emitter), every node
voltage is affine in (IB, IC); the device equations then close the system.

Constant-VBE model (:func:`solve_constant_vbe`)
    Active: VBE = vbe and IC = β·IB + (β+1)·ICBO (IC = α·IE + leakage).
    Cut off when the active solution has IE ≤ 0 (no forward base current
    would flow); then IE = 0, IC = ICBO, IB = −ICBO (leakage only; with no
    leakage IB = IC = 0) and the node voltages are the real ones.
    Saturated when the active solution has VCE < vce_sat; then VBE = vbe and
    VCE = vce_sat, and the linear network gives the real currents (IC < β·IB).
    The active region has closed forms per network (the fast path) and the
    nodal solution (``method="nodal"``); they agree to rounding.

Exponential model (:func:`solve_exponential`)
    Gummel–Poon DC equations without high injection, leakage diodes or
    parasitic resistances, VAR infinite, exactly as ngspice-39 evaluates them
    (``bjtload.c``: base charge qb = q1 = 1/(1 − VBC/VAF), IC = (If − Ir)/qb − Ir/BR)::

        If = IS·(exp(VBE/(NF·VT)) − 1),   Ir = IS·(exp(VBC/(NR·VT)) − 1)
        IC = (If − Ir)·(1 − VBC/VAF) − Ir/BR + ICBO
        IB = If/BF + Ir/BR − ICBO

    (ICBO, optional, is a collector-to-base leakage source outside the
    intrinsic device; ngspice has none.)  The two junction voltages are found
    by a vectorised Newton iteration with SPICE junction-voltage limiting,
    converged to 1e-12 V and then polished
    by two more Newton steps (IC to about 1e-11 relative in the active region).  ngspice adds GMIN
    (1e-12 S) across each junction; we do not, which matters only for
    picoampere currents in cut-off.

    Region rule, consistent with the constant-VBE rule:

    * cut off when the base–emitter junction is not conducting,
      VBE < 5·NF·VT (about 0.13 V at 25 °C): the forward injection is then
      below e⁵ ≈ 150 × IS, picoamperes for small-signal parts;
    * saturated when the base–collector junction is forward biased enough to
      inject at least 0.1 % of the forward current, exp(VBC/(NR·VT)) ≥
      1e-3 · exp(VBE/(NF·VT)); for NF = NR that is VCE ≤ VT·ln 1000 ≈ 0.18 V at
      25 °C, next to the constant-VBE rule VCE < VCE(sat) ≈ 0.2 V;
    * active otherwise.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

import numpy as np

from stockbias.analysis.device import GummelPoon, thermal_voltage
from stockbias.topologies import (
    FIXED_NODES,
    TERMINAL_NODES,
    Network,
    get_network,
    polarity_sign,
    rail_voltages,
)

__all__ = [
    "ACTIVE",
    "CUTOFF",
    "CUTOFF_VBE_VT",
    "REGION_NAMES",
    "SATURATED",
    "SATURATION_INJECTION_RATIO",
    "OperatingPoint",
    "classify_exponential",
    "region_names",
    "solve_constant_vbe",
    "solve_exponential",
]

ACTIVE = np.int8(0)
SATURATED = np.int8(1)
CUTOFF = np.int8(2)
REGION_NAMES = ("active", "saturated", "cutoff")

CUTOFF_VBE_VT = 5.0  # exponential model: cut off below VBE = 5·NF·VT
SATURATION_INJECTION_RATIO = 1e-3  # exponential model: BC injection / BE injection

_NEWTON_TOL_V = 1e-12
_NEWTON_MAX_ITER = 200
_NEWTON_POLISH = 2
_POLISH_BELOW_LOG = -30.0  # no polish where ln(Ir/If) is below this
_START_STEPS = 3  # fixed-point steps on the Newton start
_EXP_ARG_MAX = 300.0
_NODE_INDEX = {"B": 0, "C": 1, "E": 2}


def region_names(region) -> np.ndarray:
    """Region codes to names ``"active"``, ``"saturated"``, ``"cutoff"`` (array of str)."""
    return np.asarray(REGION_NAMES)[np.asarray(region, dtype=np.intp)]


@dataclass(frozen=True)
class OperatingPoint:
    """DC operating point of a stage; every field an array of the broadcast shape.

    Currents and the junction voltages are oriented so that they are positive
    in normal operation for either polarity: ``ic`` into the collector of an
    NPN (out of the collector of a PNP), ``vce`` = VCE for NPN and VEC for PNP,
    ``vbe`` = VBE or VEB.  Node voltages are signed against ground.

    Attributes
    ----------
    network : str
        Network name.
    polarity : str
        ``"NPN"`` or ``"PNP"``.
    ic, ib, ie : ndarray
        Collector, base and emitter currents, ampere (ie = ib + ic).
    vb, vc, ve : ndarray
        Node voltages, volt.
    vce, vbe : ndarray
        Collector–emitter and base–emitter voltages (polarity oriented), volt.
    region : ndarray of int8
        :data:`ACTIVE`, :data:`SATURATED` or :data:`CUTOFF`.
    resistances : Mapping[str, ndarray]
        Resistance of each role, ohm (0 = absent, a short).
    resistor_currents : Mapping[str, ndarray]
        Current in each role, ampere, oriented like the role (node_a → node_b
        for NPN, node_b → node_a for PNP); for an absent role, the current in
        the short.
    supply_power : ndarray
        Total power delivered by all supplies, watt.
    pd : ndarray
        Transistor dissipation VCE·IC + VBE·IB, watt.
    """

    network: str
    polarity: str
    ic: np.ndarray
    ib: np.ndarray
    ie: np.ndarray
    vb: np.ndarray
    vc: np.ndarray
    ve: np.ndarray
    vce: np.ndarray
    vbe: np.ndarray
    region: np.ndarray
    resistances: Mapping[str, np.ndarray]
    resistor_currents: Mapping[str, np.ndarray]
    supply_power: np.ndarray
    pd: np.ndarray

    @property
    def shape(self) -> tuple[int, ...]:
        """Broadcast shape of every array."""
        return self.ic.shape

    @property
    def region_name(self) -> np.ndarray:
        """Region names as an array of str."""
        return region_names(self.region)

    def resistor_current(self, role: str) -> np.ndarray:
        """Current in ``role``, ampere (see :attr:`resistor_currents`)."""
        try:
            return self.resistor_currents[role]
        except KeyError:
            raise ValueError(
                f"network {self.network} has no role {role!r}; roles: {tuple(self.resistances)}"
            ) from None

    def resistor_power(self, role: str) -> np.ndarray:
        """Dissipation of ``role``, I²·R in watt (0 for an absent role)."""
        i = self.resistor_current(role)
        return i * i * self.resistances[role]

    @property
    def resistor_powers(self) -> dict[str, np.ndarray]:
        """``{"p_<role>": watt}`` for every role."""
        return {f"p_{role}": self.resistor_power(role) for role in self.resistances}


# --------------------------------------------------------------------------- inputs


def _resistances(network: Network, resistances: Mapping[str, object]) -> dict[str, np.ndarray]:
    unknown = set(resistances) - set(network.role_names)
    if unknown:
        raise ValueError(
            f"network {network.name} has no role(s) {sorted(unknown)}; roles: {network.role_names}"
        )
    out: dict[str, np.ndarray] = {}
    for role in network.roles:
        if role.name not in resistances or resistances[role.name] is None:
            if not role.optional:
                raise ValueError(f"network {network.name}: role {role.name} is required")
            out[role.name] = np.zeros(())
            continue
        value = np.asarray(resistances[role.name], dtype=float)
        if (~np.isfinite(value)).any() or (value < 0).any():
            raise ValueError(f"role {role.name}: resistance must be finite and >= 0 (ohm)")
        if not role.optional and (value == 0).any():
            raise ValueError(f"role {role.name} is required and cannot be 0 ohm (a short)")
        out[role.name] = value
    return out


@dataclass(frozen=True)
class _Stage:
    """A batch of stages flattened to 1-D, in the NPN frame."""

    network: Network
    polarity: str
    sign: float
    shape: tuple[int, ...]
    r: dict[str, np.ndarray]
    rails: dict[str, np.ndarray]  # NPN-frame voltages of the fixed nodes
    extra: tuple[np.ndarray, ...]


def _stage(network, resistances, polarity, vcc, vee, *extra) -> _Stage:
    net = get_network(network)
    sign = polarity_sign(polarity)
    r = _resistances(net, resistances)
    rails = rail_voltages(net, polarity, vcc, vee)
    extra_a = [np.asarray(x, dtype=float) for x in extra]
    arrays = [*r.values(), rails["RAIL_C"], rails["RAIL_E"], *extra_a]
    shape = np.broadcast_shapes(*(a.shape for a in arrays))

    def flat(a):
        if a.shape == shape and a.dtype == np.float64:
            return a.ravel()  # a view when contiguous; callers never write into inputs
        return np.broadcast_to(a, shape).ravel().astype(float, copy=True)

    return _Stage(
        network=net,
        polarity="NPN" if sign > 0 else "PNP",
        sign=sign,
        shape=shape,
        r={k: flat(v) for k, v in r.items()},
        rails={k: sign * flat(v) for k, v in rails.items()},
        extra=tuple(flat(x) for x in extra_a),
    )


# --------------------------------------------------------------------------- linear network


@dataclass(frozen=True)
class _Response:
    """Node voltages (B, C, E) affine in the device currents: V = v0 + dv_ib·IB + dv_ic·IC."""

    v0: np.ndarray  # (N, 3)
    dv_ib: np.ndarray  # (N, 3)
    dv_ic: np.ndarray  # (N, 3)

    def voltages(self, ib, ic) -> np.ndarray:
        return self.v0 + self.dv_ib * ib[:, None] + self.dv_ic * ic[:, None]

    def junction(self, a: int, b: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Coefficients of V_a − V_b = k0 + k_ib·IB + k_ic·IC."""
        return (
            self.v0[:, a] - self.v0[:, b],
            self.dv_ib[:, a] - self.dv_ib[:, b],
            self.dv_ic[:, a] - self.dv_ic[:, b],
        )


def _linear_response(network: Network, r: dict[str, np.ndarray], rails: dict[str, np.ndarray]):
    """Nodal analysis of the resistor network (B, C, E unknown), three right-hand sides.

    Present roles are stamped as conductances.  An absent role is an ideal
    short: the KCL row of its terminal node is replaced by V_n = V_fixed (or,
    for a short between two terminal nodes, merged into a supernode row and
    replaced by V_n1 − V_n2 = 0).  The 3×3 systems are solved by cofactors,
    elementwise over the batch, with one step of iterative refinement.
    """
    n_batch = next(iter(rails.values())).shape[0]
    zero = np.zeros(n_batch)
    a = [[zero.copy() for _ in range(3)] for _ in range(3)]
    # right-hand side columns: fixed sources, unit IB, unit IC
    rhs = [[zero.copy() for _ in range(3)] for _ in range(3)]
    for role in network.roles:
        res = r[role.name]
        g = np.where(res == 0.0, 0.0, 1.0 / np.where(res == 0.0, 1.0, res))
        for here, there in ((role.node_a, role.node_b), (role.node_b, role.node_a)):
            if here not in _NODE_INDEX:
                continue
            i = _NODE_INDEX[here]
            a[i][i] = a[i][i] + g
            if there in _NODE_INDEX:
                a[i][_NODE_INDEX[there]] = a[i][_NODE_INDEX[there]] - g
            else:
                rhs[i][0] = rhs[i][0] + g * rails[there]
    # The device draws IB from B and IC from C and returns IE = IB + IC into E.
    rhs[0][1] = rhs[0][1] - 1.0
    rhs[2][1] = rhs[2][1] + 1.0
    rhs[1][2] = rhs[1][2] - 1.0
    rhs[2][2] = rhs[2][2] + 1.0
    for role in network.roles:
        short = r[role.name] == 0.0
        if not role.optional or not np.any(short):
            continue
        ends = [n for n in (role.node_a, role.node_b) if n in _NODE_INDEX]
        i = _NODE_INDEX[ends[0]]
        row_a = [np.where(short, 0.0, x) for x in a[i]]
        row_b = [np.where(short, 0.0, x) for x in rhs[i]]
        if len(ends) == 1:
            fixed = role.node_b if role.node_a == ends[0] else role.node_a
            row_a[i] = np.where(short, 1.0, row_a[i])
            row_b[0] = np.where(short, rails[fixed], row_b[0])
        else:
            k = _NODE_INDEX[ends[1]]
            a[k] = [np.where(short, x + y, x) for x, y in zip(a[k], a[i], strict=True)]
            rhs[k] = [np.where(short, x + y, x) for x, y in zip(rhs[k], rhs[i], strict=True)]
            row_a[i] = np.where(short, 1.0, row_a[i])
            row_a[k] = np.where(short, -1.0, row_a[k])
        a[i], rhs[i] = row_a, row_b
    # cofactor solve
    c00 = a[1][1] * a[2][2] - a[1][2] * a[2][1]
    c01 = a[1][2] * a[2][0] - a[1][0] * a[2][2]
    c02 = a[1][0] * a[2][1] - a[1][1] * a[2][0]
    c10 = a[0][2] * a[2][1] - a[0][1] * a[2][2]
    c11 = a[0][0] * a[2][2] - a[0][2] * a[2][0]
    c12 = a[0][1] * a[2][0] - a[0][0] * a[2][1]
    c20 = a[0][1] * a[1][2] - a[0][2] * a[1][1]
    c21 = a[0][2] * a[1][0] - a[0][0] * a[1][2]
    c22 = a[0][0] * a[1][1] - a[0][1] * a[1][0]
    det = a[0][0] * c00 + a[0][1] * c01 + a[0][2] * c02
    inv = [[c00, c10, c20], [c01, c11, c21], [c02, c12, c22]]

    def apply_inverse(b):
        return [(inv[i][0] * b[0] + inv[i][1] * b[1] + inv[i][2] * b[2]) / det for i in range(3)]

    cols = []
    for c in range(3):
        b = [rhs[0][c], rhs[1][c], rhs[2][c]]
        x = apply_inverse(b)
        # one step of iterative refinement: resistances spanning decades make
        # the cofactor solution lose a few digits, the residual recovers them
        resid = [b[i] - (a[i][0] * x[0] + a[i][1] * x[1] + a[i][2] * x[2]) for i in range(3)]
        dx = apply_inverse(resid)
        cols.append(np.stack([x[i] + dx[i] for i in range(3)], axis=1))
    return _Response(v0=cols[0], dv_ib=cols[1], dv_ic=cols[2])


_RESPONSES: dict[tuple, tuple[tuple, _Response]] = {}
_RESPONSES_BYTES = 64 * 2**20   # the most the remembered responses hold


def _remembered_response(st: _Stage, resistances, vcc, vee) -> _Response:
    """:func:`_stage_response`, remembered for the same resistor and supply arrays (the
    same objects, kept here so their ids stay theirs): the self-heating and interior
    searches solve one stage at many device temperatures."""
    items = tuple(sorted(resistances.items()))
    key = (st.network.name, st.polarity, st.shape, tuple((k, id(v)) for k, v in items),
           id(vcc), id(vee))
    got = _RESPONSES.get(key)
    refs = (tuple(v for _k, v in items), vcc, vee)
    if got is not None and all(a is b for a, b in zip(got[0][0], refs[0], strict=True)) \
            and got[0][1] is vcc and got[0][2] is vee:
        return got[1]
    resp = _stage_response(st, resistances, vcc, vee)
    size = resp.v0.nbytes * 3
    if size > _RESPONSES_BYTES:
        return resp                 # too large to keep
    held = sum(r.v0.nbytes * 3 for _refs, r in _RESPONSES.values())
    if len(_RESPONSES) >= 16 or held + size > _RESPONSES_BYTES:
        _RESPONSES.clear()
    _RESPONSES[key] = (refs, resp)
    return resp


def _stage_response(st: _Stage, resistances, vcc, vee) -> _Response:
    """:func:`_linear_response` of a stage, solved once per distinct resistor and rail
    set: the device arrays (β, IS, temperature …) often add axes the network does not
    depend on, and the response is then broadcast along them (the same numbers)."""
    n_full = int(np.prod(st.shape, dtype=np.int64))
    if n_full < 2048:
        return _linear_response(st.network, st.r, st.rails)
    r = _resistances(st.network, resistances)
    rails = rail_voltages(st.network, st.polarity, vcc, vee)
    arrays = [*r.values(), *(np.asarray(v, dtype=float) for v in rails.values())]
    small = np.broadcast_shapes(*(a.shape for a in arrays))
    n_small = int(np.prod(small, dtype=np.int64))
    if len(small) > len(st.shape) or 2 * n_small > n_full:
        return _linear_response(st.network, st.r, st.rails)

    def flat(a):
        return np.broadcast_to(np.asarray(a, dtype=float), small).ravel().astype(float)

    resp = _linear_response(st.network, {k: flat(v) for k, v in r.items()},
                            {k: st.sign * flat(v) for k, v in rails.items()})

    def grow(a):
        return np.broadcast_to(a.reshape((*small, 3)), (*st.shape, 3)).reshape(-1, 3)

    return _Response(v0=grow(resp.v0), dv_ib=grow(resp.dv_ib), dv_ic=grow(resp.dv_ic))


def _saturated_currents(resp: _Response, vbe, vbc):
    """IB, IC that hold VBE = vbe and VBC = vbc (two linear equations)."""
    p0, p1, p2 = resp.junction(0, 2)
    q0, q1, q2 = resp.junction(0, 1)
    det = p1 * q2 - p2 * q1
    rb = vbe - p0
    rc = vbc - q0
    ib = (rb * q2 - p2 * rc) / det
    ic = (p1 * rc - q1 * rb) / det
    return ib, ic


# --------------------------------------------------------------------------- assembly


def _assemble(st: _Stage, ib, ic, vb, vc, ve, region) -> OperatingPoint:
    net = st.network
    v = {"B": vb, "C": vc, "E": ve, **st.rails}
    ie = ib + ic
    device_out = {"B": ib, "C": ic, "E": -ie}  # current leaving each node into the device
    currents: dict[str, np.ndarray] = {}
    shorts = {}
    for role in net.roles:
        res = st.r[role.name]
        short = res == 0.0
        shorts[role.name] = bool(short.any())
        if shorts[role.name]:
            currents[role.name] = np.where(
                short, 0.0, (v[role.node_a] - v[role.node_b]) / np.where(short, 1.0, res)
            )
        else:
            currents[role.name] = (v[role.node_a] - v[role.node_b]) / res
    for role in net.roles:
        if not role.optional or not shorts[role.name]:
            continue
        short = st.r[role.name] == 0.0
        node = role.node_a if role.node_a in TERMINAL_NODES else role.node_b
        s_self = 1.0 if role.node_a == node else -1.0
        leaving = device_out[node].copy()
        for other in net.roles:
            if other is role or node not in (other.node_a, other.node_b):
                continue
            leaving += (1.0 if other.node_a == node else -1.0) * currents[other.name]
        currents[role.name] = np.where(short, -leaving / s_self, currents[role.name])
    supply_power = np.zeros_like(ib)
    for rail in FIXED_NODES:
        out_of_rail = np.zeros_like(ib)
        for role in net.roles:
            if role.node_a == rail:
                out_of_rail += currents[role.name]
            elif role.node_b == rail:
                out_of_rail -= currents[role.name]
        supply_power += st.rails[rail] * out_of_rail
    vce = vc - ve
    vbe = vb - ve
    pd = vce * ic + vbe * ib

    def shaped(x):
        return x.reshape(st.shape) if isinstance(x, np.ndarray) else np.reshape(x, st.shape)

    return OperatingPoint(
        network=net.name,
        polarity=st.polarity,
        ic=shaped(ic),
        ib=shaped(ib),
        ie=shaped(ie),
        vb=shaped(st.sign * vb),
        vc=shaped(st.sign * vc),
        ve=shaped(st.sign * ve),
        vce=shaped(vce),
        vbe=shaped(vbe),
        region=shaped(np.asarray(region, dtype=np.int8)),
        resistances={k: shaped(x) for k, x in st.r.items()},
        resistor_currents={k: shaped(x) for k, x in currents.items()},
        supply_power=shaped(supply_power),
        pd=shaped(pd),
    )


# --------------------------------------------------------------------------- constant VBE


def solve_constant_vbe(
    network: Network | str,
    resistances: Mapping[str, object],
    polarity: str,
    vcc,
    vee,
    beta,
    vbe,
    vce_sat,
    icbo=0.0,
    *,
    method: Literal["closed_form", "nodal"] = "closed_form",
) -> OperatingPoint:
    """Operating point with the constant-VBE device model.

    Parameters
    ----------
    network : Network or str
        The bias network or its registry name.
    resistances : Mapping[str, float or ndarray]
        Resistance of each role, ohm; an optional role missing or 0 is absent (a short).
    polarity : {"NPN", "PNP"}
        Transistor polarity.
    vcc : float or ndarray
        Positive supply, volt.
    vee : float or ndarray or None
        Negative supply, volt, signed (< 0); used by ``dual_supply`` only.
    beta : float or ndarray
        Current gain β (hFE) at the temperature of interest.
    vbe : float or ndarray
        Base–emitter voltage magnitude in conduction, volt.
    vce_sat : float or ndarray
        Collector–emitter saturation voltage magnitude, volt.
    icbo : float or ndarray
        Collector–base leakage, ampere.
    method : {"closed_form", "nodal"}
        Active region from the network's closed form (fast) or from the nodal
        solution; saturated and cut-off points always come from the nodal one.

    Returns
    -------
    OperatingPoint
        Arrays of the broadcast shape of all inputs.
    """
    st = _stage(network, resistances, polarity, vcc, vee, beta, vbe, vce_sat, icbo)
    beta_f, vbe_f, vce_sat_f, icbo_f = st.extra
    if (~(beta_f > 0)).any():
        raise ValueError("beta must be positive")
    if (~(vce_sat_f >= 0)).any():
        raise ValueError("vce_sat must be >= 0 (volt)")
    if method == "closed_form":
        r = {name: st.r[name] for name in st.network.role_names}
        ib, ic, vb, vc, ve = st.network.active_closed_form(
            r, st.rails["RAIL_C"], st.rails["RAIL_E"], beta_f, vbe_f, icbo_f
        )
        ib, ic = np.asarray(ib, dtype=float), np.asarray(ic, dtype=float)
        vb, vc, ve = (np.asarray(x, dtype=float) for x in (vb, vc, ve))
        resp = None
    elif method == "nodal":
        resp = _linear_response(st.network, st.r, st.rails)
        p0, p1, p2 = resp.junction(0, 2)
        ib = (vbe_f - p0 - p2 * (beta_f + 1.0) * icbo_f) / (p1 + p2 * beta_f)
        ic = beta_f * ib + (beta_f + 1.0) * icbo_f
        vb, vc, ve = resp.voltages(ib, ic).T
    else:
        raise ValueError(f"method must be 'closed_form' or 'nodal', got {method!r}")

    region = np.full(ib.shape, ACTIVE, dtype=np.int8)
    cut = (ib + ic) <= 0.0
    sat = ~cut & ((vc - ve) < vce_sat_f)
    region[cut] = CUTOFF
    region[sat] = SATURATED
    other = cut | sat
    if np.any(other):
        ib, ic, vb, vc, ve = (np.array(x, dtype=float) for x in (ib, ic, vb, vc, ve))
        if resp is None:
            sub = {k: x[other] for k, x in st.r.items()}
            rails = {k: x[other] for k, x in st.rails.items()}
            resp_o = _linear_response(st.network, sub, rails)
        else:
            resp_o = _Response(resp.v0[other], resp.dv_ib[other], resp.dv_ic[other])
        cut_o = cut[other]
        ib_o = -icbo_f[other]
        ic_o = icbo_f[other].copy()
        if np.any(~cut_o):
            ib_s, ic_s = _saturated_currents(
                resp_o, vbe_f[other], vbe_f[other] - vce_sat_f[other]
            )
            ib_o = np.where(cut_o, ib_o, ib_s)
            ic_o = np.where(cut_o, ic_o, ic_s)
        ib[other], ic[other] = ib_o, ic_o
        vb[other], vc[other], ve[other] = resp_o.voltages(ib_o, ic_o).T
    return _assemble(st, ib, ic, vb, vc, ve, region)


# --------------------------------------------------------------------------- exponential


def _pnjlim(v_new, v_old, vt, v_crit):
    """SPICE junction-voltage limiting, vectorised (keeps Newton off the exponential wall)."""
    limit = (v_new > v_crit) & (np.abs(v_new - v_old) > 2.0 * vt)
    if not limit.any():
        return v_new, limit             # the usual case once Newton is close
    arg = 1.0 + (v_new - v_old) / vt
    from_positive = np.where(
        arg > 0, v_old + vt * np.log(np.where(arg > 0, arg, 1.0)), v_crit
    )
    from_negative = vt * np.log(np.where(v_new > 0, v_new, vt) / vt)
    limited = np.where(v_old > 0, from_positive, from_negative)
    return np.where(limit, limited, v_new), limit


def _gp_currents(vbe, vbc, is_a, bf, br, nf, nr, inv_vaf, vt, icbo, extra=None):
    """Terminal currents IB, IC and their derivatives in (VBE, VBC).

    ``extra`` = (ISE, NE, ISC, NC, 1/IKF, 1/IKR, 1/VAR) adds a model card's
    recombination, high-injection and reverse-Early terms
    (:func:`stockbias.analysis.gp_dc.junction_currents`); None: the transport model.
    """
    if extra is not None:
        from .gp_dc import GPDevice, junction_currents

        ise, ne, isc, nc, inv_ikf, inv_ikr, inv_var = extra
        dev = GPDevice(is_a=is_a, bf=bf, br=br, nf=nf, nr=nr, ise=ise, ne=ne, isc=isc, nc=nc,
                       inv_vaf=inv_vaf, inv_var=inv_var, inv_ikf=inv_ikf, inv_ikr=inv_ikr,
                       rb=0.0, re=0.0, rc=0.0, vt=vt)
        return junction_currents(vbe, vbc, dev, icbo)
    vtf, vtr = nf * vt, nr * vt
    ef = np.exp(np.minimum(vbe / vtf, _EXP_ARG_MAX))
    er = np.exp(np.minimum(vbc / vtr, _EXP_ARG_MAX))
    i_f = is_a * (ef - 1.0)
    i_r = is_a * (er - 1.0)
    g_f = is_a * ef / vtf
    g_r = is_a * er / vtr
    early = 1.0 - vbc * inv_vaf
    ic = (i_f - i_r) * early - i_r / br + icbo
    ib = i_f / bf + i_r / br - icbo
    dic = (g_f * early, -g_r * early - (i_f - i_r) * inv_vaf - g_r / br)
    dib = (g_f / bf, g_r / br)
    return ib, ic, dib, dic


def classify_exponential(
    vbe,
    vbc,
    nf,
    nr,
    temp_k,
    *,
    cutoff_vbe_vt: float = CUTOFF_VBE_VT,
    saturation_ratio: float = SATURATION_INJECTION_RATIO,
) -> np.ndarray:
    """Region of an exponential-model point from its junction voltages (NPN frame).

    Parameters
    ----------
    vbe, vbc : float or ndarray
        Base–emitter and base–collector voltages, volt (polarity oriented).
    nf, nr : float or ndarray
        Emission coefficients.
    temp_k : float or ndarray
        Device temperature, kelvin.
    cutoff_vbe_vt : float
        Cut off when VBE < cutoff_vbe_vt · NF · VT.
    saturation_ratio : float
        Saturated when exp(VBC/(NR·VT)) ≥ saturation_ratio · exp(VBE/(NF·VT)).

    Returns
    -------
    ndarray of int8
        Region codes.
    """
    vt = thermal_voltage(temp_k)
    vbe = np.asarray(vbe, dtype=float)
    vbc = np.asarray(vbc, dtype=float)
    cut = vbe < cutoff_vbe_vt * nf * vt
    sat = (vbc / (nr * vt) - vbe / (nf * vt)) >= np.log(saturation_ratio)
    region = np.where(cut, CUTOFF, np.where(sat, SATURATED, ACTIVE))
    return np.asarray(region, dtype=np.int8)


def solve_exponential(
    network: Network | str,
    resistances: Mapping[str, object],
    polarity: str,
    vcc,
    vee,
    gp: GummelPoon,
    temp_k,
    icbo=0.0,
    *,
    cutoff_vbe_vt: float = CUTOFF_VBE_VT,
    saturation_ratio: float = SATURATION_INJECTION_RATIO,
) -> OperatingPoint:
    """Operating point with the Gummel–Poon DC equations (see the module notes).

    Parameters
    ----------
    network, resistances, polarity, vcc, vee
        As in :func:`solve_constant_vbe`.
    gp : GummelPoon
        Device parameters at the device temperature (see
        :func:`stockbias.analysis.device.gummel_poon_at`); fields broadcast.
    temp_k : float or ndarray
        Device temperature, kelvin (sets VT).
    icbo : float or ndarray
        Extra collector–base leakage, ampere (0 for a pure Gummel–Poon device).
    cutoff_vbe_vt, saturation_ratio : float
        Region thresholds, see :func:`classify_exponential`.

    Returns
    -------
    OperatingPoint
        Arrays of the broadcast shape of all inputs.

    Raises
    ------
    ArithmeticError
        If the Newton iteration does not converge (not seen in practice).
    """
    inv_vaf = 1.0 / np.asarray(gp.vaf, dtype=float)
    full = gp.full
    # a card's terms that are zero everywhere (no ISC, IKR, VAR …) stay scalar zeros, so
    # the current equations skip them rather than compute them at every point
    card = gp.extras() if full else ()
    kept = [i for i, x in enumerate(card) if np.any(np.asarray(x) != 0)]
    st = _stage(
        network, resistances, polarity, vcc, vee,
        gp.is_a, gp.bf, gp.br, gp.nf, gp.nr, inv_vaf, temp_k, icbo,
        *(card[i] for i in kept),
    )
    is_a, bf, br, nf, nr, inv_vaf_f, temp_f, icbo_f = st.extra[:8]
    extra = None
    if full:
        got = dict(zip(kept, st.extra[8:], strict=True))
        extra = tuple(got.get(i, 0.0) for i in range(len(card)))
    vt = thermal_voltage(temp_f)
    resp = _remembered_response(st, resistances, vcc, vee)
    p0, p1, p2 = resp.junction(0, 2)
    q0, q1, q2 = resp.junction(0, 1)
    if full:  # the card's series resistances: the junctions sit inside RB, RE, RC
        p1, p2 = p1 - gp.rb - gp.re, p2 - gp.re
        q1, q2 = q1 - gp.rb, q2 + gp.rc

    # Start from the constant-VBE point with VBE at 1 mA and β = BF, then move VBE by
    # fixed-point steps: the network's IC at this VBE (β the model's IC/IB there) gives
    # the VBE that carries it (IS·exp(VBE/(NF·VT)) = IC·q1·(1 + IC·q1/IKF), the base
    # charge solved in closed form).  The start is then within millivolts wherever the
    # point is active, and Newton needs few steps.
    vbe_1ma = nf * vt * np.log(1e-3 / is_a)
    vbe_start = vbe_1ma
    beta = bf
    if extra is not None:
        ise, ne, _isc, _nc, inv_ikf, _inv_ikr, inv_var = extra
    for _step in range(_START_STEPS):
        ib0 = (vbe_start - p0 - p2 * (beta + 1.0) * icbo_f) / (p1 + p2 * beta)
        ic0 = beta * ib0 + (beta + 1.0) * icbo_f
        i_t = ic0 - icbo_f
        vbc0 = np.minimum(q0 + q1 * ib0 + q2 * ic0, vbe_start - 0.1)
        q1b = 1.0 / (1.0 - inv_vaf_f * vbc0)
        if extra is not None:
            q1b = 1.0 / (1.0 / q1b - inv_var * vbe_start)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            i_f = i_t * q1b
            if extra is not None:
                i_f = i_f * (1.0 + i_t * q1b * inv_ikf)
            vbe_2 = nf * vt * np.log(np.maximum(i_f, 1e-3 * is_a) / is_a)
        vbe_start = np.where(i_t > 1e-9, np.clip(vbe_2, vbe_1ma - 0.2, vbe_1ma + 0.25),
                             vbe_start)
        if extra is not None:
            # β of the full equations at this VBE: IC/IB with the base charge and the
            # recombination current
            with np.errstate(over="ignore"):
                e_f = np.exp(np.minimum(vbe_start / (nf * vt), _EXP_ARG_MAX))
                i_f = is_a * (e_f - 1.0)
                qb = q1b * (1.0 + np.sqrt(1.0 + 4.0 * inv_ikf * i_f)) / 2.0
                i_le = 0.0 if type(ise) is float and ise == 0.0 else ise * (
                    np.exp(np.minimum(vbe_start / (ne * vt), _EXP_ARG_MAX)) - 1.0)
                ib_m = i_f / bf + i_le
                beta = np.where(ib_m > 0, (i_f / qb) / np.where(ib_m > 0, ib_m, 1.0), bf)
    ib0 = (vbe_start - p0 - p2 * (beta + 1.0) * icbo_f) / (p1 + p2 * beta)
    ic0 = beta * ib0 + (beta + 1.0) * icbo_f
    cut0 = (ib0 + ic0) <= 0
    ib0 = np.where(cut0, 0.0, ib0)
    ic0 = np.where(cut0, 0.0, ic0)
    vbe = p0 + p1 * ib0 + p2 * ic0
    vbc = np.minimum(q0 + q1 * ib0 + q2 * ic0, vbe - 0.1)

    vcrit_f = nf * vt * np.log(nf * vt / (np.sqrt(2.0) * is_a))
    vcrit_r = nr * vt * np.log(nr * vt / (np.sqrt(2.0) * is_a))
    per_point = (p0, p1, p2, q0, q1, q2, is_a, bf, br, nf, nr, inv_vaf_f, vt, icbo_f, vcrit_f,
                 vcrit_r)

    def newton_step(vbe, vbc, a, ext):
        p0, p1, p2, q0, q1, q2, is_a, bf, br, nf, nr, inv_vaf_f, vt, icbo_f, vcrit_f, \
            vcrit_r = a
        ib, ic, dib, dic = _gp_currents(vbe, vbc, is_a, bf, br, nf, nr, inv_vaf_f, vt, icbo_f,
                                        ext)
        f1 = p0 + p1 * ib + p2 * ic - vbe
        f2 = q0 + q1 * ib + q2 * ic - vbc
        j11 = p1 * dib[0] + p2 * dic[0] - 1.0
        j12 = p1 * dib[1] + p2 * dic[1]
        j21 = q1 * dib[0] + q2 * dic[0]
        j22 = q1 * dib[1] + q2 * dic[1] - 1.0
        det = j11 * j22 - j12 * j21
        d_vbe = (-f1 * j22 + f2 * j12) / det
        d_vbc = (-f2 * j11 + f1 * j21) / det
        vbe_new, lim_f = _pnjlim(vbe + d_vbe, vbe, nf * vt, vcrit_f)
        vbc_new, lim_r = _pnjlim(vbc + d_vbc, vbc, nr * vt, vcrit_r)
        step = np.maximum(np.abs(vbe_new - vbe), np.abs(vbc_new - vbc))
        return vbe_new, vbc_new, (step < _NEWTON_TOL_V) & ~lim_f & ~lim_r

    converged = False
    for _ in range(_NEWTON_MAX_ITER):
        vbe, vbc, done = newton_step(vbe, vbc, per_point, extra)
        if np.all(done):
            converged = True
            break
    if not converged:
        raise ArithmeticError("exponential operating point: Newton iteration did not converge")
    # Quadratic convergence: a few more steps take the KVL residual to rounding, which
    # matters where the collector junction injects (saturation: If and Ir cancel); where
    # its injection is below 1e-13 of the emitter's the last step already moved less
    # than 1e-12 V and those points are left as they are.
    with np.errstate(over="ignore", invalid="ignore"):
        polish = np.flatnonzero(~(vbc / (nr * vt) - vbe / (nf * vt) < _POLISH_BELOW_LOG))
    if polish.size:
        def take(x):
            return x[polish] if np.ndim(x) else x

        a = tuple(take(x) for x in per_point)
        ext = None if extra is None else tuple(take(x) for x in extra)
        vbe_p, vbc_p = vbe[polish], vbc[polish]
        for _ in range(_NEWTON_POLISH):
            vbe_p, vbc_p, _done = newton_step(vbe_p, vbc_p, a, ext)
        vbe, vbc = vbe.copy(), vbc.copy()
        vbe[polish], vbc[polish] = vbe_p, vbc_p

    ib, ic, _, _ = _gp_currents(vbe, vbc, is_a, bf, br, nf, nr, inv_vaf_f, vt, icbo_f, extra)
    vb, vc, ve = resp.voltages(ib, ic).T
    region = classify_exponential(
        vbe if full else vb - ve, vbc if full else vb - vc, nf, nr, temp_f,
        cutoff_vbe_vt=cutoff_vbe_vt, saturation_ratio=saturation_ratio,
    )
    return _assemble(st, ib, ic, vb, vc, ve, region)
