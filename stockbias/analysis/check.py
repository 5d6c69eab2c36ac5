"""`check`: the whole analysis of one stage with given parts (DESIGN §2, §3 "Results").

Nominal operating point, extreme-value bounds with their corners, root-sum-
square spread, Monte Carlo yield, stability factors, small-signal figures,
thermal figures (self-heated junction, runaway criterion) and a margin for
every constraint.  The search re-verifies every design it returns with
:func:`analyze_stage`, the same code path.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from ..assign import ResolvedResistor, resolve_resistor
from ..errors import InputError
from ..job import Job, Stage
from ..parts import Inventory, Transistor
from ..topologies import get_network
from . import device
from .constraints import ConstraintResult, Limit, evaluate_limits, stage_limits
from .montecarlo import MonteCarloResult, monte_carlo
from .stage import DeviceSpec, ResistorSpec, StageSpec, evaluate, solve_point
from .thermal import self_heated_point
from .worst_case import REPORTED, WorstCase, point_at_unit, rss, worst_case

__all__ = ["CheckResult", "analyze", "analyze_stage", "build_spec", "check_roles"]

NOMINAL_KEYS = ("ic", "ib", "ie", "vb", "vc", "ve", "vce", "supply_power", "pd")
ACTIVE_ONLY = ("gm", "gain", "rin")


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
    rss: dict[str, dict[str, float]]
    monte_carlo: MonteCarloResult | None
    constraints: list[ConstraintResult]
    stability: dict[str, float]
    thermal: dict[str, object]
    assumptions: list[str]
    warnings: list[str]
    cautions: list[str]
    axes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def ok(self) -> bool:
        return all(c.ok for c in self.constraints)

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
            "stability": self.stability,
            "thermal": self.thermal,
            "assumptions": self.assumptions, "warnings": self.warnings,
            "cautions": self.cautions,
        }


def build_spec(job: Job, stage: Stage, parts: Mapping[str, ResolvedResistor],
               transistor: Transistor, topology: str | None = None) -> StageSpec:
    """The :class:`StageSpec` of a stage with resolved parts."""
    env = job.environment
    span = max(abs(env.ambient_min_c - 25.0), abs(env.ambient_max_c - 25.0))
    resistors = {role: ResistorSpec(p.value, p.tol, abs(p.tempco_ppm) * 1e-6 * span)
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
    out["beta"] = _scalar(ev.beta)
    out["temperature_c"] = spec.nominal_ambient_c
    for k in ACTIVE_ONLY:  # never active-region figures for a saturated or cut-off point
        out[k] = _scalar(ev.quantities[k]) if region == "active" else None
    return out


def _stability(spec: StageSpec) -> dict[str, float]:
    """S_ICBO, S_VBE, S_β as numerical derivatives of IC at the nominal point."""
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
                  topology: str | None = None) -> CheckResult:
    """Analyse one stage with resolved parts (the path `check` and the search share)."""
    spec = build_spec(job, stage, parts, transistor, topology)
    network = spec.network
    ratings = {role: p.rating for role, p in parts.items()}
    limits = stage_limits(job, stage, spec, ratings)
    # bound every quantity a limit reads (swing and |gain| are not in the default report)
    extra_q = [lim.quantity for lim in limits if lim.quantity not in REPORTED
               and lim.quantity not in ("non_active_corners", "vceo_needed")]
    wc = worst_case(spec, quantities=[*REPORTED, *(f"p_{r}" for r in spec.resistors),
                                      *dict.fromkeys(extra_q)])
    low = {q: np.asarray(b.min) for q, b in wc.bounds.items()}
    high = {q: np.asarray(b.max) for q, b in wc.bounds.items()}
    low["non_active_corners"] = high["non_active_corners"] = np.asarray(
        float(wc.non_active_corners))
    needed = job.supply.max_ce_voltage
    low["vceo_needed"] = high["vceo_needed"] = np.asarray(needed)
    thermal = _thermal(spec, wc)
    extra: list[Limit] = []
    if thermal.get("theta_ja_from_data") and "runaway_factor" in thermal:
        extra.append(Limit("thermal_runaway", "runaway_factor", "max", 1.0, "",
                           "∂PD/∂TJ·θJA below 1 at the hottest corner"))
        low["runaway_factor"] = high["runaway_factor"] = np.asarray(thermal["runaway_factor"])
    # Quantities that are only defined in the active region are NaN at a saturated corner:
    # their limits fail there (evaluate_limits counts NaN as failing).
    margins = evaluate_limits([*limits, *extra], low, high)
    results: list[ConstraintResult] = []
    for lim in [*limits, *extra]:
        m = _scalar(margins[lim.name])
        b = wc.bounds.get(lim.quantity)
        if lim.quantity in ("non_active_corners", "vceo_needed", "runaway_factor"):
            worst = _scalar(low[lim.quantity])
            corner = wc.non_active_example if lim.quantity == "non_active_corners" else None
        elif b is None:
            worst, corner = math.nan, None
        else:
            worst = b.min if lim.kind == "min" else b.max
            corner = b.corner_min if lim.kind == "min" else b.corner_max
        results.append(ConstraintResult(lim.name, _scalar(lim.limit), worst, m, m >= 0,
                                        lim.unit, lim.description, corner))
    mc = None
    yield_limit = stage.target.yield_min
    if samples > 0:
        tempcos = {role: p.tempco_ppm for role, p in parts.items()}
        mc = monte_carlo(spec, limits, samples, np.random.default_rng(seed), seed=seed,
                         tempco_ppm=tempcos)
        if yield_limit is not None:
            y = mc.yield_.yield_
            results.append(ConstraintResult("yield_min", yield_limit, y, y - yield_limit,
                                            y >= yield_limit, "",
                                            "Monte Carlo yield at least the target"))
    elif yield_limit is not None:
        raise InputError("the job sets yield_min, so the check needs Monte Carlo samples "
                         "(--samples more than 0)", column="--samples", text=str(samples))
    rss_out = {}
    for q in ("ic", "vce"):
        nom, lo, hi = rss(spec, q)
        rss_out[q] = {"nominal": nom, "min": lo, "max": hi}
    warnings = [w for p in parts.values() for w in p.warnings]
    nominal = _nominal(spec)
    ic_nom = float(nominal["ic"])  # type: ignore[arg-type]
    if ic_nom > 0 and (ic_nom > 10 * transistor.hfe_test_ic or
                       ic_nom < transistor.hfe_test_ic / 10):
        warnings.append(f"IC ({ic_nom * 1e3:.3g} mA) is more than a decade from the current the "
                        f"hFE range is specified at ({transistor.hfe_test_ic * 1e3:.3g} mA): "
                        "hFE falls off at low and high currents")
    assumptions = transistor.assumptions()
    if job.search.model == "constant_vbe":
        assumptions = [a for a in assumptions if "Gummel" not in a and not a.startswith(
            ("BR ", "NF ", "NR ", "XTI ", "EG ", "no IS", "no VAF"))]
    assumptions.append("VBE falls 2 mV/°C at constant IC (common practice)")
    if transistor.icbo_a > 0:
        assumptions.append("ICBO doubles every 10 °C (common practice)")
    if not thermal.get("theta_ja_from_data"):
        assumptions.append(f"θJA {thermal['theta_ja']:.3g} °C/W derived from the PD rating "
                           "(linear derating to TJ max)")
    assumptions.append("resistor tempco taken as ± its magnitude over the ambient range")
    return CheckResult(
        stage=stage.name, topology=network.name, model=job.search.model,
        transistor=transistor, parts=dict(parts), nominal=nominal, worst=wc, rss=rss_out,
        monte_carlo=mc, constraints=results, stability=_stability(spec), thermal=thermal,
        assumptions=assumptions, warnings=warnings,
        cautions=cautions(job, results, thermal), axes=wc.axes)


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


def analyze(job: Job, values: Mapping[str, str], transistor: str,
            inventory: Inventory | None, *, samples: int = 20000, seed: int = 0,
            tolerance_pct: float | None = None, stage_name: str | None = None) -> CheckResult:
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
    parts = {role: resolve_resistor(role, text, inventory, tol)
             for role, text in values.items()}
    return analyze_stage(job, stage, parts, t, samples=samples, seed=seed)
