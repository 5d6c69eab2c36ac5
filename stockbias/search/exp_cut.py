"""The exponential (Gummel–Poon) model searched with the interval cut of the constant-VBE one.

The search pre-pass (:mod:`.prepass`) cuts the interval role X (divider, dual_supply and
fixed_base: RE; collector_feedback: RC) per row of the enumerated roles by two thresholds,
X_low ≥ A from the IC-max vertex and X_high ≤ B from the IC-min vertex.  This module gives
A, B and the collector current at those vertices for the exponential model of
:func:`stockbias.analysis.operating_point.solve_exponential`, NPN frame, active region.

The circuit (every supported network)
    With the transistor drawing IB into the base and IE = IB + IC out of the emitter, the
    base–emitter loop of each network reads ``V_d − VBE = R_b·IB + (X + R_x)·IE``:
    divider V_d = VCC·R2/(R1+R2), R_b = R1‖R2, R_x = 0; dual_supply V_d = |VEE|, R_b = RB;
    fixed_base V_d = VCC, R_b = RB; collector_feedback V_d = VCC, R_b = RB, R_x = RE, X = RC
    (RC carries IE).  The device: IC = (If − Ir)(1 − VBC/VAF) − Ir/BR + ICBO,
    IB = If/BF + Ir/BR − ICBO with If, Ir the junction injections.  The only other unknown
    is VBC, which the collector side sets.

Pinning VBC (the collector side bounded, not solved)
    The collector side enters only through VBC.  Replace it by a *pinned* relation
    VBC = a·VBE + b; the loop is then one equation in VBE.  Along a pinned relation, IB and
    IE rise with VBE (dIB/dVBE = gf/BF + a·gr/BR > 0; dIE/dVBE ≥ gf·(early + 1/BF) − If/VAF
    − a·gr·early > 0 in the active region, where gr ≤ 10⁻³·gf and VAF ≫ NF·VT), so the loop
    has one root, and IC there falls with X (X·IE grows with VBE).  Lowering VBC at fixed
    V_d raises IC: writing VCE = w for VBC = VBE − w, dIC/dw = c·(1 − gF·X'/D) + R_b-terms
    > 0 with c = −∂IC/∂VBC > 0, gF = dIC/dVBE, D = 1 + R_b·dIB/dVBE + X'·dIE/dVBE > X'·gF.
    So, at one vertex:

    * IC-max vertex: a design that passes has VCE ≥ w_need there (``vce_min``,
      ``VCE(sat) + swing_pk``, and, NF = NR, the active-region rule VCE > NR·VT·ln 1000;
      collector_feedback: VBC = −RB·IB ≤ 0).  Its IC is at least the pinned IC with
      VCE = w_need (VBC = 0 for collector_feedback): that pinned IC above ``ic_max`` proves
      the design fails, whatever RC is.
    * IC-min vertex: VCE ≤ VRAIL_C − VRAIL_E (VBC ≥ −VCC for collector_feedback), so the
      pinned IC with VCE at that largest value is at least the design's IC: below ``ic_min``
      proves the design fails.

    With VAF infinite the two pinned relations move IC only through the reverse injection
    (parts per million), so the cut is as tight as the constant-VBE one.

Thresholds in closed form
    At IC = ic_max on the pinned relation, VBE* (and IB*, IE*) is one scalar per transistor
    and vertex (bisection on the diode law), and the loop gives
    A = (V_d − VBE* − R_b·IB*)/IE* − R_x for every row at once; B likewise with ic_min.
    IC falls with X, so IC ≤ ic_max ⇔ X ≥ A and IC ≥ ic_min ⇔ X ≤ B.

Which vertex (monotonicity; tested in ``tests/test_search_expcut.py`` by sampling)
    The pinned IC rises with V_d, falls with R_b's share and X, rises with BF (less base
    current at a given VBE), with IS (the VBE end of the stock row at its low end gives the
    largest IS), with ICBO, and with temperature while VBE/NF < EG + XTI·VT (true for
    silicon at these currents).  Divider: it rises with R2 and falls with R1 (KCL at the
    base: ∂/∂R2 = VB/R2² > 0, ∂/∂R1 = −(VCC − VB)/R1² < 0).  The RB of the single-resistor
    networks and of collector_feedback are ambiguous with leakage, so both ends are taken,
    as in the constant-VBE plan; both ambient ends are taken for the thresholds.  Every
    threshold is exact at one vertex of the box, so a wrong guess of direction only
    prunes less; it never drops a design that passes.  The collector currents returned for
    ranking keys are pinned values at one named vertex: a lower bound of the worst-case
    maximum and an upper bound of the worst-case minimum for every design that passes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from types import SimpleNamespace

import numpy as np

from ..analysis import device
from ..analysis.operating_point import SATURATION_INJECTION_RATIO, _gp_currents
from ..analysis.stage import DeviceSpec, gummel_poon_of
from ..job import Job, Stage
from ..parts import Transistor

__all__ = [
    "ExpCorner",
    "ExpRows",
    "drive_terms",
    "exp_corner",
    "exp_free_role_bounds",
    "exp_thresholds",
    "pinned_ic",
    "ratio_beta_scale",
]

_ACTIVE_VT = -math.log(SATURATION_INJECTION_RATIO)  # ln 1000: the active-region rule
_TOL_V = 1e-13
_MAX_ITER = 100
_SLACK = 1e-9  # relative: pinned currents moved in the sound direction by this much


@dataclass(frozen=True)
class ExpCorner:
    """The device at one vertex (scalars, NPN frame) with its pinned VBC = a·VBE + b.

    vcc, vee : V (rail magnitudes at the vertex); temp_c : °C; icbo : A.
    """

    is_a: float
    bf: float
    br: float
    nf: float
    nr: float
    inv_vaf: float
    vt: float
    icbo: float
    a: float
    b: float
    vcc: float
    vee: float
    temp_c: float
    #: A model card's further terms (ISE, NE, ISC, NC, 1/IKF, 1/IKR, 1/VAR) or None, and
    #: its series resistances RB, RE, RC (ohm), which join the loop's R_b and X.
    extra: tuple | None = None
    rb: float = 0.0
    re: float = 0.0
    rc: float = 0.0

    @property
    def full(self) -> bool:
        """A model card with terms beyond the transport model: the gain bounds, which
        rest on the transport model, are not used (only the pinned currents)."""
        return self.extra is not None

    def currents(self, vbe):
        """IB, IC, IE and their derivatives along the pinned relation, A and A/V."""
        vbc = self.a * vbe + self.b
        ib, ic, dib, dic = _gp_currents(vbe, vbc, self.is_a, self.bf, self.br, self.nf,
                                        self.nr, self.inv_vaf, self.vt, self.icbo, self.extra)
        d_ib = dib[0] + self.a * dib[1]
        d_ic = dic[0] + self.a * dic[1]
        return ib, ic, ib + ic, d_ib, d_ic

    def active(self, vbe) -> np.ndarray:
        """Reverse injection below the active-region rule's share of the forward one."""
        vbc = self.a * vbe + self.b
        return (vbc / (self.nr * self.vt) - vbe / (self.nf * self.vt)) < -_ACTIVE_VT

    def state_at_ic(self, ic_target: float) -> tuple[float, float, float] | None:
        """(VBE, IB, IE) where the pinned IC equals ``ic_target`` (A); None when that is
        not an active point on a rising stretch of the pinned IC (no cut is derived)."""
        if not ic_target > self.icbo:
            return None
        vtf = self.nf * self.vt
        lo = vtf * math.log1p(max(ic_target - self.icbo, 1e-30) * 1e-3 / self.is_a)
        hi = vtf * math.log1p((ic_target + 1.0) * 1e3 / self.is_a)
        if not (float(self.currents(lo)[1]) < ic_target < float(self.currents(hi)[1])):
            return None
        for _ in range(200):
            mid = 0.5 * (lo + hi)
            if float(self.currents(mid)[1]) < ic_target:
                lo = mid
            else:
                hi = mid
            if hi - lo < _TOL_V:
                break
        vbe = 0.5 * (lo + hi)
        ib, _ic, ie, _dib, d_ic = (float(x) for x in self.currents(vbe))
        if not (bool(self.active(vbe)) and d_ic > 0 and ie > 0):
            return None
        return vbe, ib, ie


def _tv(job: Job) -> tuple[float, float]:
    return job.environment.ambient_min_c, job.environment.ambient_max_c


def exp_corner(job: Job, stage: Stage, q: Transistor, network: str, up: bool,
               temp_c: float, vcc: float | None = None) -> ExpCorner:
    """The IC-max (``up``) or IC-min vertex of a transistor at ambient ``temp_c`` (°C).

    ``vcc`` (optional) overrides the collector-side rail (the other VCC end of the same
    device corner, for the headroom bound).  The pinned relation is the one of the module
    notes: at the IC-max vertex the highest VBC a passing design can have, at the IC-min
    vertex the lowest.
    """
    from .prepass import corners

    cn = corners(job, q, network)
    dev = DeviceSpec.from_transistor(q)
    point = SimpleNamespace(vbe=np.asarray(q.vbe_min if up else q.vbe_max, dtype=float),
                            hfe=np.asarray(q.hfe_max if up else q.hfe_min, dtype=float))
    gp = gummel_poon_of(SimpleNamespace(device=dev), point, np.asarray(temp_c))  # type: ignore[arg-type]
    vt = float(device.thermal_voltage(temp_c + device.CELSIUS_TO_KELVIN))
    nf, nr = float(np.asarray(gp.nf)), float(np.asarray(gp.nr))
    rail_c = (cn.vcc_hi if up else cn.vcc_lo) if vcc is None else vcc
    rail_e = cn.vee_hi if up else cn.vee_lo
    if up:
        if network == "collector_feedback":
            a, b = 0.0, 0.0                          # VBC = −RB·IB ≤ 0
        else:
            w = need_vce(stage, q)
            if nf == nr:
                w = max(w, nr * vt * _ACTIVE_VT)
                a, b = 1.0, -w
            elif w > 0:
                a, b = 1.0, -w
            else:
                a, b = nr / nf, -nr * vt * _ACTIVE_VT
    elif network == "collector_feedback":
        a, b = 0.0, -cn.vcc_hi                       # VCB ≤ VC ≤ VCC
    else:
        a, b = 1.0, -(cn.vcc_hi + cn.vee_hi)         # VCE ≤ VRAIL_C − VRAIL_E
    icbo = float(device.icbo_at(q.icbo_a, temp_c)) if up else 0.0
    extra = None
    if gp.full:
        extra = tuple(float(np.asarray(x)) for x in gp.extras())
        # The pinned relation holds for the terminals; the junctions sit inside RB, RE, RC.
        # IC-max vertex: the internal VCE is lower by RE·IE + RC·IC, at most (2·RE + RC)·
        # ic_max for a passing design (IC ≤ ic_max there, IB ≤ IC); collector_feedback:
        # VBC rises by at most RC·ic_max.  IC-min vertex, collector_feedback: the drop on
        # RB is less than the supply span plus a volt.  Each moves the pinned relation the
        # sound way (a higher VBC at the IC-max vertex, a lower one at the IC-min vertex).
        ic_max = stage.target.ic_max
        if up:
            b += (2.0 * gp.re + gp.rc) * ic_max if network != "collector_feedback" \
                else gp.rc * ic_max
        elif network == "collector_feedback":
            b -= cn.vcc_hi + cn.vee_hi + 1.0
    return ExpCorner(is_a=float(np.asarray(gp.is_a)), bf=float(np.asarray(gp.bf)),
                     br=float(np.asarray(gp.br)), nf=nf, nr=nr,
                     inv_vaf=float(1.0 / np.asarray(gp.vaf)), vt=vt, icbo=icbo, a=a, b=b,
                     vcc=rail_c, vee=rail_e, temp_c=temp_c, extra=extra,
                     rb=float(gp.rb), re=float(gp.re), rc=float(gp.rc))


def need_vce(stage: Stage, q: Transistor) -> float:
    """The VCE a passing design keeps at every vertex by the job's limits, V (0: none)."""
    t = stage.target
    w = t.vce_min if t.vce_min > 0 else 0.0
    if t.swing_pk is not None:
        w = max(w, q.vce_sat + t.swing_pk)
    return w


def drive_terms(network: str, r: dict[str, np.ndarray], vcc: float, vee: float
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(V_d, R_b, R_x) of the base–emitter loop V_d − VBE = R_b·IB + (X + R_x)·IE, V, ohm."""
    if network == "divider":
        r1, r2 = r["R1"], r["R2"]
        return vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2), np.zeros_like(r1)
    if network == "collector_feedback":
        return np.full_like(r["RB"], vcc), r["RB"], r["RE"]
    if network == "dual_supply":
        return np.full_like(r["RB"], vee), r["RB"], np.zeros_like(r["RB"])
    if network == "fixed_base":
        return np.full_like(r["RB"], vcc), r["RB"], np.zeros_like(r["RB"])
    raise KeyError(network)


def pinned_ic(cn: ExpCorner, v_d: np.ndarray, r_b: np.ndarray, x_total: np.ndarray,
              vbe0: float | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(IC, IE, converged) of the loop on the pinned relation, vectorised, A.

    Safeguarded Newton on VBE in a bracket where the loop residual changes sign: low end
    min(V_d, 0) − 1 V (no forward current), high end where the forward injection alone is
    twice what the loop can carry (else V_d + 2 V).  Rises are limited as SPICE limits
    junction voltages (Δ → NF·VT·ln(1 + Δ/(NF·VT))); a step leaving the bracket is a
    bisection.  Converged points leave the iteration.  ``x_total`` = X + R_x,
    ohm.
    """
    v_d, r_b, x_total = np.broadcast_arrays(np.asarray(v_d, dtype=float),
                                            np.asarray(r_b, dtype=float) + cn.rb,
                                            np.asarray(x_total, dtype=float) + cn.re)
    vtf = cn.nf * cn.vt

    def resid(v, k):
        ib, ic, ie, d_ib, d_ic = cn.currents(v)
        return (v_d[k] - v - r_b[k] * ib - x_total[k] * ie,
                -1.0 - r_b[k] * d_ib - x_total[k] * (d_ib + d_ic), ic, ie)

    shape, n = v_d.shape, v_d.size
    v_d, r_b, x_total = v_d.ravel(), r_b.ravel(), x_total.ravel()
    every = np.arange(n)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        lo = np.minimum(v_d, 0.0) - 1.0
        carry = np.abs(v_d) / np.maximum(r_b / (cn.bf + 1.0) + x_total, 1e-300)
        hi = vtf * np.log1p((2.0 * carry + 1e-3 + 2.0 * cn.icbo) / cn.is_a)
        hi = np.where(np.isfinite(hi) & (hi > lo) & (resid(hi, every)[0] < 0), hi,
                      np.maximum(v_d, 0.0) + 2.0)
        # start: the constant-VBE current at VBE0, then the diode law's VBE for it
        v0 = 0.65 if vbe0 is None else vbe0
        ie0 = np.maximum(v_d - v0, 1e-3) / np.maximum(r_b / (cn.bf + 1.0) + x_total, 1e-300)
        v = vtf * np.log1p(ie0 * cn.bf / (cn.bf + 1.0) / cn.is_a)
        v = np.where(np.isfinite(v), v, v0)
        v = np.clip(v, lo + 0.01 * (hi - lo), hi - 0.01 * (hi - lo))
        done = np.zeros(n, dtype=bool)
        k = every                                   # the points still iterating
        for _ in range(_MAX_ITER):
            vk, lk, hk = v[k], lo[k], hi[k]
            f, df, _ic, _ie = resid(vk, k)
            lk = np.where(f > 0, vk, lk)
            hk = np.where(f <= 0, vk, hk)
            step = -f / df
            step = np.where(step > 0, vtf * np.log1p(np.maximum(step, 0.0) / vtf), step)
            nxt = vk + step
            fin = (np.abs(step) < _TOL_V) | (hk - lk < _TOL_V)
            bad = ~fin & (~np.isfinite(nxt) | (nxt <= lk) | (nxt >= hk))
            nxt = np.where(bad, 0.5 * (lk + hk), nxt)
            v[k], lo[k], hi[k] = nxt, lk, hk
            done[k[fin]] = True
            k = k[~fin]
            if k.size == 0:
                break
        _f, _df, ic, ie = resid(v, every)
    return ic.reshape(shape), ie.reshape(shape), done.reshape(shape)


@dataclass(frozen=True)
class ExpRows:
    """Per row: the loop terms at the named IC-max (hot) and IC-min (cold) vertices, one
    entry per setting of the ambiguous roles; the corners and their boundary VBE."""

    hi: list[tuple[np.ndarray, np.ndarray, np.ndarray]]
    lo: list[tuple[np.ndarray, np.ndarray, np.ndarray]]
    cn_hi: ExpCorner
    cn_lo: ExpCorner
    vbe_hi: float | None
    vbe_lo: float | None

    def take(self, sel: np.ndarray) -> ExpRows:
        return replace(self, hi=[tuple(t[sel] for t in s) for s in self.hi],  # type: ignore[misc]
                       lo=[tuple(t[sel] for t in s) for s in self.lo])

    def ic_hi(self, row: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Pinned IC at the IC-max vertex with X = ``x`` (ohm): at most the design's IC
        there whenever the design passes (a lower bound of its worst-case maximum), A."""
        out = np.full(np.shape(x), -np.inf)
        for v_d, r_b, r_x in self.hi:
            ic, _ie, ok = pinned_ic(self.cn_hi, v_d[row], r_b[row], x + r_x[row], self.vbe_hi)
            out = np.maximum(out, np.where(ok & np.isfinite(ic), ic * (1 - _SLACK), -np.inf))
        return np.where(np.isfinite(out), out, 0.0)

    def ic_lo(self, row: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Pinned IC at the IC-min vertex with X = ``x`` (ohm): at least the design's IC
        there whenever the design passes (an upper bound of its worst-case minimum), A."""
        out = np.full(np.shape(x), np.inf)
        for v_d, r_b, r_x in self.lo:
            ic, _ie, ok = pinned_ic(self.cn_lo, v_d[row], r_b[row], x + r_x[row], self.vbe_lo)
            out = np.minimum(out, np.where(ok & np.isfinite(ic), ic * (1 + _SLACK), np.inf))
        return out


def exp_thresholds(job: Job, stage: Stage, network: str, q: Transistor,
                   ends_up: list[dict[str, np.ndarray]], ends_lo: list[dict[str, np.ndarray]],
                   m: int) -> tuple[np.ndarray, np.ndarray, ExpRows]:
    """(A, B, loop terms) for ``m`` rows; ``ends_up``/``ends_lo`` are the enumerated roles'
    resistances at the IC-max / IC-min vertices (one dict per setting of ambiguous roles).

    A = −inf (B = +inf) where no threshold is derived at a vertex (no cut from it).
    """
    t = stage.target
    cold, hot = _tv(job)
    a_thr = np.full(m, -np.inf)
    b_thr = np.full(m, np.inf)
    hi_terms: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    lo_terms: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    named: dict[bool, tuple[ExpCorner, float | None]] = {}
    for up, ends, target in ((True, ends_up, t.ic_max), (False, ends_lo, t.ic_min)):
        for temp in ((hot, cold) if up else (cold, hot)):
            cn = exp_corner(job, stage, q, network, up, temp)
            state = cn.state_at_ic(target) if target > 0 else None
            if up not in named:
                named[up] = (cn, None if state is None else state[0])
            for s in ends:
                v_d, r_b, r_x = drive_terms(network, s, cn.vcc, cn.vee)
                if temp == (hot if up else cold):
                    (hi_terms if up else lo_terms).append((v_d, r_b, r_x))
                if state is None:
                    if up and not target > cn.icbo:
                        a_thr = np.full(m, np.inf)       # leakage alone exceeds ic_max
                    continue
                vbe, ib, ie = state
                with np.errstate(divide="ignore", invalid="ignore"):
                    x = (v_d - vbe - (r_b + cn.rb) * ib) / ie - r_x - cn.re
                if up:
                    a_thr = np.maximum(a_thr, x)
                else:
                    b_thr = np.minimum(b_thr, x)
    (cn_hi, vbe_hi), (cn_lo, vbe_lo) = named[True], named[False]
    return a_thr, b_thr, ExpRows(hi_terms, lo_terms, cn_hi, cn_lo, vbe_hi, vbe_lo)


def _early_range(cn: ExpCorner) -> tuple[float, float]:
    """(smallest, largest) Early factor 1 − VBC/VAF at an active point with VBC < 1.5 V and
    VCB ≤ VCC + |VEE|."""
    if cn.inv_vaf == 0.0:
        return 1.0, 1.0
    return max(1.0 - 1.5 * cn.inv_vaf, 0.0), 1.0 + (cn.vcc + cn.vee) * cn.inv_vaf


def _forward_bounds(cn: ExpCorner, ic_lb: np.ndarray, ic_ub: np.ndarray
                    ) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Bounds on F = If + IS (A) at an active point whose IC is within [ic_lb, ic_ub].

    Active: Ir < 10⁻³·F, and Ir ≥ −IS.  IC = (If − Ir)·early − Ir/BR + ICBO gives
    F·early·(1 − 10⁻³·(1 + 1/(BR·early))) ≤ IC + IS·early and F·early ≥ IC − ICBO − IS/BR.
    """
    e_min, e_max = _early_range(cn)
    shrink = 1.0 - SATURATION_INJECTION_RATIO * (1.0 + 1.0 / (cn.br * max(e_min, 1e-9)))
    f_ub = (ic_ub + cn.is_a * e_max) / (max(shrink, 1e-9) * max(e_min, 1e-9))
    f_lb = np.maximum(ic_lb - cn.icbo - cn.is_a / cn.br, 0.0) / e_max
    return f_lb, f_ub, e_min, e_max


def _gain_bounds(cn: ExpCorner, ic_lb: np.ndarray, ic_ub: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(gm lower, gm upper, gπ upper, gₒ upper), S, of the Gummel–Poon small-signal figures
    of :func:`stockbias.analysis.stage.evaluate` at an active point with IC in
    [ic_lb, ic_ub]: gm = gf·early − gₒ with gf = F/(NF·VT), gπ = F/(NF·VT·BF),
    gₒ = gr·(early + 1/BR) + (If − Ir)/VAF with gr < 10⁻³·F/(NR·VT)."""
    f_lb, f_ub, e_min, e_max = _forward_bounds(cn, ic_lb, ic_ub)
    vtf, vtr = cn.nf * cn.vt, cn.nr * cn.vt
    go_ub = SATURATION_INJECTION_RATIO * f_ub * (e_max + 1.0 / cn.br) / vtr + f_ub * cn.inv_vaf
    gm_lb = np.maximum(f_lb * e_min / vtf - go_ub, 0.0)
    return gm_lb, f_ub * e_max / vtf, f_ub / (vtf * cn.bf), go_ub


def exp_free_role_bounds(job: Job, stage: Stage, network: str, q: Transistor, cands,
                         idx: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The free role's bounds of :func:`.prepass.free_role_bounds` for the exponential model.

    H: at the IC-max device vertex (hot), both VCC ends and X at its low end (where IC,
    and with it the headroom used and the gain, is largest; any vertex is sound), a passing
    design keeps VCE ≥ w_need, and its IC and VE are at least the pinned ones with VCE =
    w_need (module notes), so RC·IC ≤ VRAIL_C − VE − w_need gives
    RC_high ≤ (VRAIL_C − VE_p − w_need)/IC_p; and |gain| ≤ gain_max there, with IC between
    the pinned IC and ic_max, bounds G = 1/(RC‖RL) from below by the closed form of
    :mod:`.purpose_bounds` fed with bounds of gm, gπ, gₒ (:func:`_gain_bounds`).
    L: at the IC-min vertex (cold, X at its high end) IC is at most the pinned IC; then
    IC·(RC‖RL) ≥ swing, and |gain| ≤ gm/(G·(1 + gm·R_E)) ≥ gain_min (gain_min ≥ 1) bound
    RC_low from below.  Also returns the largest pinned IC (a lower bound of the design's
    IC at that vertex) for the RC dissipation check.
    """
    from .prepass import PLANS, _ends, corners
    from .purpose_bounds import rc_from_conductance

    plan = PLANS[network]
    cn0 = corners(job, q, network)
    cold, hot = _tv(job)
    t = stage.target
    load = job.small_signal.load
    unbypassed = 0.0 if job.small_signal.re_bypassed else 1.0
    xc = cands[plan.interval]
    n = idx[plan.interval].size
    h = np.full(n, np.inf)
    ic_top = np.zeros(n)
    x_lo, x_hi = xc.low[idx[plan.interval]], xc.high[idx[plan.interval]]
    for vcc in (cn0.vcc_hi, cn0.vcc_lo):
        cn = exp_corner(job, stage, q, network, True, hot, vcc=vcc)
        w = -cn.b if cn.a == 1.0 else 0.0
        for s in _ends(plan, cands, idx, up=True):
            v_d, r_b, r_x = drive_terms(network, s, cn.vcc, cn.vee)
            ic, ie, ok = pinned_ic(cn, v_d, r_b, x_lo + r_x)
            ic = np.where(ok & np.isfinite(ic), ic * (1 - _SLACK), 0.0)
            ie = np.where(ok & np.isfinite(ie), ie * (1 - _SLACK), 0.0)
            ic_top = np.maximum(ic_top, ic)
            with np.errstate(divide="ignore", invalid="ignore"):
                if w > 0:
                    ve = ie * x_lo - cn.vee
                    h = np.minimum(h, np.where(ic > 0, (cn.vcc - ve - w) / ic, np.inf))
                if t.gain_max is not None and not cn.full:
                    gm_lb, gm_ub, gpi, go = _gain_bounds(cn, ic, np.full(n, t.ic_max))
                    re = x_lo * unbypassed
                    num = gm_lb - go * gpi * re
                    a = 1.0 + (gpi + gm_ub + go) * re
                    b = go * (1.0 + gpi * re)
                    g = np.where(num > 0, np.maximum((num / t.gain_max - b) / a, 0.0)
                                 * (1 - _SLACK), 0.0)
                    h = np.minimum(h, rc_from_conductance(g, load))
    low_need = np.zeros(n)
    gain_low = t.gain_min is not None and t.gain_min >= 1.0
    if t.swing_pk or gain_low:
        cn = exp_corner(job, stage, q, network, False, cold)
        gain_low = gain_low and not cn.full
        for s in _ends(plan, cands, idx, up=False):
            v_d, r_b, r_x = drive_terms(network, s, cn.vcc, cn.vee)
            ic, _ie, ok = pinned_ic(cn, v_d, r_b, x_hi + r_x)
            ic_ub = np.where(ok & np.isfinite(ic), ic * (1 + _SLACK), np.inf)
            with np.errstate(divide="ignore", invalid="ignore"):
                if gain_low:
                    _gm_lb, gm_ub, _gpi, _go = _gain_bounds(cn, np.zeros(n), ic_ub)
                    re = x_hi * unbypassed
                    g_max = gm_ub / (t.gain_min * (1.0 + gm_ub * re)) * (1 + _SLACK)
                    g_max = np.where(np.isfinite(g_max), g_max, np.inf)
                    low_need = np.maximum(low_need, rc_from_conductance(g_max, load))
                if t.swing_pk:
                    g = ic_ub / t.swing_pk - 1.0 / load
                    low_need = np.maximum(low_need, np.where(
                        g > 0, 1.0 / g, np.where(np.isfinite(g), np.inf, 0.0)))
    return h, low_need, ic_top


def ratio_beta_scale(job: Job, stage: Stage, q: Transistor, network: str) -> float:
    """Factor on β that keeps the divider-ratio condition of :mod:`.purpose_bounds`
    (IB ≥ ic_min/β at a vertex with ICBO = 0) true for the exponential model.

    There IC/IB ≤ BF·early·(1 + δ): the Early factor is at most 1 + (VCC + |VEE|)/VAF, and
    δ bounds the reverse-injection and IS terms against If, which is at least
    ic_min/(2·early) at a vertex where IC ≥ ic_min.  Returns inf (no condition) when δ is
    not small.
    """
    ic_min = stage.target.ic_min
    if not ic_min > 0:
        return math.inf
    s = job.supply
    vmax = s.volts * (1 + s.tolerance_pct / 100) + abs(s.negative_volts or 0.0) * (
        1 + s.vee_tolerance_pct / 100)
    early = 1.0 + vmax / q.vaf_v if math.isfinite(q.vaf_v) else 1.0
    up = exp_corner(job, stage, q, network, True, job.environment.ambient_max_c)
    i_f = ic_min / early / 2.0
    delta = up.is_a * up.bf * (2.0 + 1.0 / up.br) * early / i_f
    if delta > 1e-2:
        return math.inf
    return early * (1.0 + 4.0 * delta)
