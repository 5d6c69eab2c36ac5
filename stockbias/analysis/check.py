"""`check`: the whole analysis of one stage with given parts (DESIGN §2, §3 "Results").

Nominal operating point, extreme-value bounds with their corners, root-sum-
square spread, Monte Carlo yield, stability factors, small-signal figures,
thermal figures (self-heated junction, runaway criterion) and a margin for
every constraint.  The search re-verifies every design it returns with
:func:`analyze_stage`, the same code path.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import partial
from typing import TYPE_CHECKING

import numpy as np

from ..assign import ResolvedResistor, resolve_resistor, tempco_assumption
from ..errors import InputError
from ..job import Job, Stage
from ..parts import Inventory, Transistor
from ..topologies import get_network
from . import device
from .constraints import ConstraintResult, Limit, evaluate_limits, ic_margin, stage_limits
from .purpose import PURPOSE_QUANTITIES, Purpose, stage_purpose
from .stage import DeviceSpec, StageSpec, evaluate, solve_point
from .thermal import self_heated_point
from .worst_case import REPORTED, WorstCase, point_at_unit, rss, worst_case

if TYPE_CHECKING:   # Monte Carlo is loaded by the checks that draw boards
    from .montecarlo import MonteCarloResult

__all__ = ["CheckResult", "analyze", "analyze_stage", "build_spec", "check_roles",
           "collect_assumptions", "not_active_reason", "small_signal_assumption",
           "stage_assumptions"]

NOMINAL_KEYS = ("ic", "ib", "ie", "vb", "vc", "ve", "vce", "supply_power", "pd",
                "supply_current")
#: Nominal figures that only mean something in the active region (β is IC/IB there; in
#: saturation IC/IB is a forced ratio, not the device's current gain).
ACTIVE_ONLY = ("beta", "gm", "gain", "rin", "swing_pk")
STABILITY_KEYS = ("s_icbo", "s_vbe", "s_beta")
RSS_KEYS = ("ic", "vce")


def not_active_reason(region: str) -> str | None:
    """Why the active-region figures are withheld at the nominal point (None when active)."""
    if region == "active":
        return None
    state = "cut off" if region == "cutoff" else region
    return f"{state} at the nominal point: active-region figures do not apply"


@dataclass(frozen=True)
class CheckResult:
    """Everything `check` reports about one stage."""

    stage: str
    topology: str
    model: str
    transistor: Transistor
    parts: dict[str, ResolvedResistor]
    nominal: dict[str, object]
    worst: WorstCase
    monte_carlo: MonteCarloResult | None
    constraints: list[ConstraintResult]
    thermal: dict[str, object]
    assumptions: list[str]
    warnings: list[str]
    cautions: list[str]
    axes: tuple[str, ...] = field(default_factory=tuple)
    ic_target: float = math.nan  # A: the target current the IC margin is a fraction of
    purpose: Purpose | None = None  # gain, input resistance, swing, supply current
    #: () → (rss, stability): the spreads, worked out when first read (:attr:`rss`)
    spreads: Callable[[], tuple[dict[str, object], dict[str, float | str | None]]] | None = \
        field(default=None, repr=False, compare=False)
    _spread_cache: list = field(default_factory=list, init=False, repr=False, compare=False)

    @property
    def rss(self) -> dict[str, object]:
        """RSS spreads of IC and VCE: {"ic", "vce": {nominal, min, max} or None, "reason"}.

        Worked out when first read: the search re-verifies designs whose spreads no output
        of ``design`` shows."""
        return self._spread_figures()[0]

    @property
    def stability(self) -> dict[str, float | str | None]:
        """S_ICBO, S_VBE, S_β at the nominal point and "reason" (worked out when first read,
        as :attr:`rss`)."""
        return self._spread_figures()[1]

    def _spread_figures(self) -> tuple[dict[str, object], dict[str, float | str | None]]:
        if not self._spread_cache:
            assert self.spreads is not None
            self._spread_cache.append(self.spreads())
        return self._spread_cache[0]

    @property
    def ok(self) -> bool:
        return all(c.ok for c in self.constraints)

    @property
    def ic_margin(self) -> float:
        """Smallest distance of the worst-case IC to the window, as a fraction of the target
        (:func:`stockbias.analysis.constraints.ic_margin`)."""
        by = {c.name: c for c in self.constraints}
        lo, hi = by["ic_min"], by["ic_max"]
        return float(ic_margin(lo.worst, hi.worst, lo.limit, hi.limit, self.ic_target))

    @property
    def failing(self) -> list[ConstraintResult]:
        return [c for c in self.constraints if not c.ok]

    def to_dict(self) -> dict[str, object]:
        return {
            "ok": self.ok, "stage": self.stage, "topology": self.topology, "model": self.model,
            "transistor": {"part_id": self.transistor.part_id,
                           "polarity": self.transistor.polarity},
            "parts": {role: p.to_dict() for role, p in self.parts.items()},
            "nominal": self.nominal,
            "worst_case": self.worst.to_dict(),
            "worst_case_vertices": self.worst.n_vertices,
            "rss": self.rss,
            "monte_carlo": None if self.monte_carlo is None else self.monte_carlo.to_dict(),
            "constraints": [c.to_dict() for c in self.constraints],
            "ic_margin": self.ic_margin, "ic_target": self.ic_target,
            "stability": self.stability,
            "thermal": self.thermal,
            "assumptions": self.assumptions, "warnings": self.warnings,
            "cautions": self.cautions,
            "purpose": None if self.purpose is None else self.purpose.to_dict(),
        }


def build_spec(job: Job, stage: Stage, parts: Mapping[str, ResolvedResistor],
               transistor: Transistor, topology: str | None = None) -> StageSpec:
    """The :class:`StageSpec` of a stage with resolved parts."""
    env = job.environment
    resistors = {role: p.spec(env.ambient_min_c, env.ambient_max_c)
                 for role, p in parts.items()}
    return StageSpec(
        network=get_network(topology or stage.topology), resistors=resistors,
        device=DeviceSpec.from_transistor(transistor), vcc=job.supply.volts,
        vcc_tol=job.supply.tolerance_pct / 100, vee=job.supply.negative_volts,
        vee_tol=job.supply.vee_tolerance_pct / 100, ambient_min_c=env.ambient_min_c,
        ambient_max_c=env.ambient_max_c, model=job.search.model, load=job.small_signal.load,
        re_bypassed=job.small_signal.re_bypassed)


def _scalar(x: object) -> float:
    return float(np.asarray(x).reshape(-1)[0])


def _nominal(spec: StageSpec) -> dict[str, object]:
    ev = evaluate(spec, spec.nominal_point())
    region = str(ev.op.region_name.reshape(-1)[0])
    out: dict[str, object] = {k: _scalar(ev.quantities[k]) for k in NOMINAL_KEYS}
    for role in spec.resistors:
        out[f"p_{role}"] = _scalar(ev.quantities[f"p_{role}"])
    out["region"] = region
    out["temperature_c"] = spec.nominal_ambient_c
    q = ev.quantities
    values = {"beta": ev.beta, "swing_pk": np.minimum(q["swing_to_saturation"],
                                                      q["swing_to_cutoff"]),
              **{k: q[k] for k in ACTIVE_ONLY if k not in ("beta", "swing_pk")}}
    for k in ACTIVE_ONLY:  # never active-region figures for a saturated or cut-off point
        out[k] = _scalar(values[k]) if region == "active" else None
    out["not_active_reason"] = not_active_reason(region)
    return out


def _stability(spec: StageSpec, region: str) -> dict[str, float | str | None]:
    """S_ICBO, S_VBE, S_β as numerical derivatives of IC at the nominal point.

    They describe how the active-region IC moves; at a saturated or cut-off nominal point
    they are None with the reason.
    """
    reason = not_active_reason(region)
    if reason is not None:
        return {**dict.fromkeys(STABILITY_KEYS), "reason": reason}
    p0 = spec.nominal_point()
    t = spec.nominal_ambient_c
    scale = _scalar(device.beta_at(1.0, t + device.CELSIUS_TO_KELVIN,
                                   xtb=np.asarray(spec.device.xtb, dtype=float)))
    leak = _scalar(device.icbo_at(1.0, t))

    def ic_at(**kw: float) -> float:
        return _scalar(evaluate(spec, spec.point_from({k: np.asarray(v) for k, v in kw.items()},
                                                      p0)).quantities["ic"])

    h_i, h_v = 1e-9, 1e-4
    h_b = 1e-3 * _scalar(p0.hfe)
    icbo0, vbe0, hfe0 = _scalar(p0.icbo), _scalar(p0.vbe), _scalar(p0.hfe)
    return {
        "s_icbo": (ic_at(icbo=icbo0 + h_i) - ic_at(icbo=max(icbo0 - h_i, 0.0)))
        / ((icbo0 + h_i - max(icbo0 - h_i, 0.0)) * leak),
        "s_vbe": (ic_at(vbe=vbe0 + h_v) - ic_at(vbe=vbe0 - h_v)) / (2 * h_v),
        "s_beta": (ic_at(hfe=hfe0 + h_b) - ic_at(hfe=hfe0 - h_b)) / (2 * h_b * scale),
        "reason": None,
    }


def _thermal(spec: StageSpec, wc: WorstCase) -> dict[str, object]:
    """Self-heated junction temperature and the runaway criterion at the hottest corner."""
    d = spec.device
    theta_known = not math.isnan(_scalar(np.asarray(d.theta_ja, dtype=float)))
    theta = _scalar(d.theta_ja_effective)
    hot = wc.bounds.get("tj")  # the corner with the hottest junction
    pd_bound = wc.bounds.get("pd")
    if hot is None or pd_bound is None or hot.u_max is None:
        return {"theta_ja": theta, "theta_ja_from_data": theta_known}
    point = point_at_unit(spec, wc.axes, hot.u_max) if wc.axes else spec.nominal_point()
    ta = _scalar(point.ambient_c)

    def pd_of_tj(tj: np.ndarray) -> np.ndarray:
        op, _ = solve_point(spec, point, np.asarray(tj))
        return np.asarray(op.pd, dtype=float)

    sh = self_heated_point(pd_of_tj, np.asarray(ta), np.asarray(theta))
    tj = _scalar(sh.tj_c)
    h = 0.5
    slope = (_scalar(pd_of_tj(np.asarray(tj + h))) - _scalar(pd_of_tj(np.asarray(tj - h)))) \
        / (2 * h)
    return {
        "theta_ja": theta, "theta_ja_from_data": theta_known,
        "ambient_at_hottest_corner_c": ta, "pd_max_w": pd_bound.max,
        "tj_self_heated_c": tj, "pd_self_heated_w": _scalar(sh.pd_w),
        "runaway": bool(np.asarray(sh.runaway).reshape(-1)[0]),
        "runaway_factor": slope * theta,
    }


def analyze_stage(job: Job, stage: Stage, parts: Mapping[str, ResolvedResistor],
                  transistor: Transistor, *, samples: int = 20000, seed: int = 0,
                  topology: str | None = None, executor: object | None = None,
                  progress: Callable[[int], None] | None = None,
                  stream: int = 0) -> CheckResult:
    """Analyse one stage with resolved parts (the path `check` and the search share).

    ``stream`` picks the Monte Carlo's family of random streams (0 for ``check``; the yield
    search re-checks its designs on a stream it never sampled them on)."""
    spec = build_spec(job, stage, parts, transistor, topology)
    network = spec.network
    ratings = {role: p.rating for role, p in parts.items()}
    limits = stage_limits(job, stage, spec, ratings)
    # bound every quantity a limit reads (swing and |gain| are not in the default report)
    extra_q = [lim.quantity for lim in limits if lim.quantity not in REPORTED
               and lim.quantity not in ("non_active_corners", "vceo_needed")]
    wc = worst_case(spec, quantities=[*REPORTED, *(f"p_{r}" for r in spec.resistors),
                                      *dict.fromkeys([*extra_q, *PURPOSE_QUANTITIES])])
    low = {q: np.asarray(b.min) for q, b in wc.bounds.items()}
    high = {q: np.asarray(b.max) for q, b in wc.bounds.items()}
    low["non_active_corners"] = high["non_active_corners"] = np.asarray(
        float(wc.non_active_corners))
    for lim in limits:  # a quantity undefined at every corner has no bound: NaN
        low.setdefault(lim.quantity, np.asarray(math.nan))
        high.setdefault(lim.quantity, np.asarray(math.nan))
    needed = job.supply.max_ce_voltage
    low["vceo_needed"] = high["vceo_needed"] = np.asarray(needed)
    thermal = _thermal(spec, wc)
    extra: list[Limit] = []
    if thermal.get("theta_ja_from_data") and "runaway_factor" in thermal:
        extra.append(Limit("thermal_runaway", "runaway_factor", "max", 1.0, "",
                           "∂PD/∂TJ·θJA below 1 at the hottest corner"))
        low["runaway_factor"] = high["runaway_factor"] = np.asarray(thermal["runaway_factor"])
    # Quantities that are only defined in the active region (gain, swing to cut-off) are
    # NaN at a saturated or cut-off corner, and the vertex bounds above skip those corners.
    # Their limits state the value such a corner takes (Limit.outside_active: 0, the stage
    # does not amplify or swing there), and evaluate_limits folds it in: such a corner fails
    # gain_min and swing_cutoff and is named as their worst corner below; it never exceeds
    # gain_max.
    margins = evaluate_limits([*limits, *extra], low, high)
    results: list[ConstraintResult] = []
    for lim in [*limits, *extra]:
        m = _scalar(margins[lim.name])
        b = wc.bounds.get(lim.quantity)
        if lim.figure is not None:  # a nominal-point limit: the nominal figure, no corner
            worst, corner = lim.limit - m if lim.kind == "max" else lim.limit + m, None
            worst = _scalar(worst) if math.isfinite(m) else math.nan
        elif lim.quantity in ("non_active_corners", "vceo_needed", "runaway_factor"):
            worst = _scalar(low[lim.quantity])
            corner = wc.non_active_example if lim.quantity == "non_active_corners" else None
        elif b is None:
            worst, corner = math.nan, None
        else:
            worst = b.min if lim.kind == "min" else b.max
            corner = b.corner_min if lim.kind == "min" else b.corner_max
        if lim.outside_active is not None and wc.non_active_corners and lim.figure is None:
            v = lim.outside_active
            if math.isnan(worst) or (v < worst if lim.kind == "min" else v > worst):
                worst, corner = v, wc.non_active_example
        results.append(ConstraintResult(lim.name, _scalar(lim.limit), worst, m, m >= 0,
                                        lim.unit, lim.description, corner, lim.kind))
    mc = None
    yield_limit = stage.target.yield_min
    if samples > 0:
        tempcos = {role: p.tempco_ppm for role, p in parts.items()}
        # histogram edges from the worst-case bounds: every drawn board lies inside them
        spans = {k: (float(wc.bounds[k].min), float(wc.bounds[k].max))
                 for k in ("ic", "vce") if k in wc.bounds}
        from .montecarlo import monte_carlo

        mc = monte_carlo(spec, limits, samples, seed, tempco_ppm=tempcos, ranges=spans,
                         executor=executor, progress=progress, stream=stream)
        if yield_limit is not None:
            y = mc.yield_.yield_
            results.append(ConstraintResult("yield_min", yield_limit, y, y - yield_limit,
                                            y >= yield_limit, "",
                                            "Monte Carlo yield at least the target",
                                            kind="min"))
    elif yield_limit is not None:
        raise InputError("the job sets yield_min, so the check needs Monte Carlo samples "
                         "(--samples more than 0)", column="--samples", text=str(samples))
    warnings = [w for p in parts.values() for w in p.warnings]
    nominal = _nominal(spec)
    region = str(nominal["region"])
    ic_nom = float(nominal["ic"])  # type: ignore[arg-type]
    if ic_nom > 0 and (ic_nom > 10 * transistor.hfe_test_ic or
                       ic_nom < transistor.hfe_test_ic / 10):
        warnings.append(f"IC ({ic_nom * 1e3:.3g} mA) is more than a decade from the current the "
                        f"hFE range is specified at ({transistor.hfe_test_ic * 1e3:.3g} mA): "
                        "hFE falls off at low and high currents")
    purpose = stage_purpose(job, nominal, wc)
    assumptions = stage_assumptions(job, transistor, parts, thermal, purpose)
    return CheckResult(
        stage=stage.name, topology=network.name, model=job.search.model,
        transistor=transistor, parts=dict(parts), nominal=nominal, worst=wc,
        monte_carlo=mc, constraints=results, thermal=thermal, assumptions=assumptions,
        warnings=warnings, cautions=cautions(job, results, thermal), axes=wc.axes,
        ic_target=stage.target.ic, purpose=purpose, spreads=partial(_spreads, spec, region))


def _spreads(spec: StageSpec, region: str
             ) -> tuple[dict[str, object], dict[str, float | str | None]]:
    """(RSS spreads of IC and VCE, stability factors) at the nominal point; both are
    first-order sensitivities of the active-region point, None with the reason elsewhere."""
    reason = not_active_reason(region)
    rss_out: dict[str, object] = {**dict.fromkeys(RSS_KEYS), "reason": reason}
    if reason is None:
        for q in RSS_KEYS:
            nom, lo, hi = rss(spec, q)
            rss_out[q] = {"nominal": nom, "min": lo, "max": hi}
    return rss_out, _stability(spec, region)


def stage_assumptions(job: Job, transistor: Transistor,
                      parts: Mapping[str, ResolvedResistor], thermal: Mapping[str, object],
                      purpose: Purpose | None) -> list[str]:
    """Everything the analysis of one stage assumed, in words (check, JSON and report).

    Only what the chosen device model uses: the constant-VBE model states its VBE
    tempco and none of the Gummel–Poon parameters; the exponential model states the
    Gummel–Poon defaults it filled and no VBE tempco (its VBE follows IS(T)).
    """
    from ..parts import MODEL_CARD_FIELDS, TRANSISTOR_DEFAULTS

    exponential = job.search.model == "exponential"
    # θJA: said below with the figure derived from the PD rating
    out = [why for name, (_value, why) in TRANSISTOR_DEFAULTS.items()
           if name in transistor.assumed and name != "theta_ja"
           and (exponential or name not in MODEL_CARD_FIELDS)]
    if not exponential:
        out.append(f"VBE falls {-device.VBE_TEMPCO_DEFAULT * 1e3:g} mV/°C at constant IC "
                   "(common practice)")
    if transistor.icbo_a > 0:
        out.append("ICBO doubles every 10 °C (common practice)")
    if not thermal.get("theta_ja_from_data"):
        out.append(f"θJA {thermal['theta_ja']:.3g} °C/W derived from the PD rating "
                   "(linear derating to TJ max)")
    out += tempco_assumption(parts)
    taken = small_signal_assumption(job)
    if purpose is not None and taken:
        out.append(taken)
    return out


def small_signal_assumption(job: Job) -> str:
    """The sentence naming the small-signal conditions taken by default ("" when the job
    states both ``re_bypassed`` and ``load`` in ``[small_signal]``)."""
    stated = job.small_signal.stated
    words = {"re_bypassed": "RE taken as bypassed", "load": "no load"}
    keys = [k for k in words if k not in stated]
    if not keys:
        return ""
    where = ("small_signal not given in the job" if not stated
             else f"small_signal in the job gives no {' or '.join(keys)}")
    return f"gain and input resistance with {', '.join(words[k] for k in keys)} ({where})"


def cautions(job: Job, results: list[ConstraintResult], thermal: dict[str, object]) -> list[str]:
    """The usual cautions where power, heat or high voltage are involved."""
    out = []
    total_v = job.supply.max_ce_voltage
    if total_v > 60:
        out.append(f"The supplies reach {total_v:.3g} V, above the usual 60 V DC extra-low-"
                   "voltage limit: shock hazard; follow local electrical codes and licensed "
                   "practice.")
    if job.supply.mains_derived:
        out.append("The supply is derived from the mains: the primary side carries hazardous "
                   "voltage; build and test it to local electrical codes, with isolation and "
                   "protection as licensed practice requires.")
    by_name = {c.name: c for c in results}
    pd = by_name.get("pd")
    if pd is not None and pd.limit > 0 and pd.worst > 0.5 * pd.limit:
        out.append(f"The transistor dissipates up to {pd.worst * 1e3:.3g} mW, over half its "
                   "derated rating: it runs hot; check heat sinking and airflow in the real "
                   "enclosure.")
    for c in results:
        if c.name.startswith("p_") and c.limit > 0 and c.worst > 0.8 * c.limit:
            out.append(f"{c.name[2:]} runs close to its derated power ({c.worst * 1e3:.3g} of "
                       f"{c.limit * 1e3:.3g} mW): it will be hot to the touch.")
    tj = thermal.get("tj_self_heated_c")
    if isinstance(tj, float) and tj > 100:
        out.append(f"Junction temperature reaches about {tj:.0f} °C: hot part.")
    return out


def check_roles(topology: str, values: Mapping[str, str]) -> None:
    """InputError unless ``values`` names only the network's roles and all its required ones."""
    network = get_network(topology)
    unknown = sorted(set(values) - set(network.role_names))
    if unknown:
        raise InputError(f"{topology} has no role {unknown[0]}; its roles are "
                         f"{', '.join(network.role_names)}", column="--values", text=unknown[0])
    missing = [r for r in network.required_roles if r not in values]
    if missing:
        raise InputError(f"{topology} needs a value for {', '.join(missing)}",
                         column="--values", text=",".join(f"{k}={v}" for k, v in values.items()))


def collect_assumptions(checks: object) -> list[str]:
    """The assumptions of several checks (an iterable of :class:`CheckResult`), each once,
    in the order first met."""
    seen: list[str] = []
    for c in checks:  # type: ignore[attr-defined]
        seen += [a for a in c.assumptions if a not in seen]
    return seen


def analyze(job: Job, values: Mapping[str, str], transistor: str,
            inventory: Inventory | None, *, samples: int = 20000, seed: int = 0,
            tolerance_pct: float | None = None, stage_name: str | None = None,
            executor: object | None = None,
            progress: Callable[[int], None] | None = None) -> CheckResult:
    """Check a stage with given values and transistor (DESIGN §3 Python API).

    Parameters
    ----------
    job : Job
    values : Mapping[str, str]
        role → part id, value, ``A+B`` or ``A|B``.
    transistor : str
        Stock part id of the transistor.
    inventory : Inventory or None
    samples, seed : Monte Carlo boards and seed.
    executor : stockbias.executor.Executor, optional
        Where the Monte Carlo chunks run (default: this process).
    progress : callable, optional
        Called with the Monte Carlo boards done so far.
    tolerance_pct : float, optional
        Tolerance for values that are not stock parts (default: the job's).
    stage_name : str, optional
        Which stage of a board (default: the first).
    """
    stage = job.stages[0]
    if stage_name is not None:
        found = [s for s in job.stages if s.name == stage_name]
        if not found:
            raise InputError(f"no stage named '{stage_name}' in the job; stages: "
                             f"{', '.join(s.name for s in job.stages)}", column="--stage",
                             text=stage_name)
        stage = found[0]
    topology = stage.topology
    if topology == "any":
        raise InputError("check needs one topology: set [search] topology or --topology",
                         column="topology", text="any")
    check_roles(topology, values)
    if inventory is None:
        raise InputError("check needs --inventory FILE for the transistor's data",
                         column="--inventory")
    t = inventory.find_transistor(transistor)
    if t is None:
        ids = ", ".join(x.part_id for x in inventory.transistors) or "none"
        raise InputError(f"no transistor with that part id in {inventory.path}; transistors: "
                         f"{ids}", column="--transistor", text=transistor)
    tol = job.build.default_tolerance_pct if tolerance_pct is None else tolerance_pct
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    parts = {role: resolve_resistor(role, text, inventory, tol, ambient=ambient)
             for role, text in values.items()}
    return analyze_stage(job, stage, parts, t, samples=samples, seed=seed, executor=executor,
                         progress=progress)
