"""Why nothing on the shelf meets the job, how close it gets, and one change that helps.

Everything here is computed: the search is run again on a job with one requirement
relaxed, the best design it finds is analysed against the *original* job with the
path ``check`` uses (the binding constraint, its worst value, the corner), and the
relaxation is tightened by bisection to the smallest change that still admits a
design.  Relaxations tried, in order: a wider IC window, a lower VCE headroom, a
higher supply-power limit, more stock (build quantity one), and, when no transistor
qualifies, the ratings a transistor to buy must have.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace

from ..errors import StockbiasError
from ..job import Job
from ..parts import Inventory
from ..units import format_quantity

__all__ = ["Explanation", "explain"]


@dataclass(frozen=True)
class Explanation:
    """What binds, by how much the closest design misses, and one relaxation that helps."""

    binding: str
    message: str
    closest: dict[str, object] | None = None
    misses: list[dict[str, object]] = field(default_factory=list)
    relaxation: dict[str, object] | None = None

    def to_dict(self) -> dict[str, object]:
        return {"binding": self.binding, "message": self.message, "closest": self.closest,
                "misses": self.misses, "relaxation": self.relaxation}


def _with_stage(job: Job, **target_or_limits) -> Job:
    st = job.stage
    t = {k: v for k, v in target_or_limits.items() if k in st.target.__dataclass_fields__}
    lim = {k: v for k, v in target_or_limits.items() if k in st.limits.__dataclass_fields__}
    stage = replace(st, target=replace(st.target, **t), limits=replace(st.limits, **lim))
    return replace(job, stages=(stage,))


def _try(job: Job, inventory: Inventory, seconds: float):
    from .design import design

    job = replace(job, search=replace(job.search, top=1))
    try:
        r = design(job, inventory, top=1, time_limit_s=max(seconds, 0.5), _explain=False)
    except StockbiasError:  # a relaxed job that cannot be searched helps nobody
        return None
    return r.designs[0] if r.designs else None


def _closest(job: Job, found) -> tuple[dict[str, object], list[dict[str, object]]]:
    """The found design analysed against the original job."""
    from ..analysis.check import analyze_stage

    res = analyze_stage(job, job.stage, found.check.parts, found.transistor, samples=0,
                        seed=job.search.seed, topology=found.topology)
    misses = [c.to_dict() for c in res.constraints if not c.ok]
    closest = {"topology": found.topology, "transistor": found.transistor.part_id,
               "parts": {role: {"part_id": p.part_ids[0] if len(p.parts) == 1 else p.part_ids,
                                "value_ohm": p.value} for role, p in res.parts.items()}}
    return closest, misses


def explain(job: Job, inventory: Inventory, search, status: str, budget_s: float = 20.0):
    """An :class:`Explanation` for a job the search found no design for."""
    t0 = time.monotonic()
    if status == "unknown":
        return Explanation("time_limit", "the time limit ran out before any design was found "
                           "or ruled out; raise --time-limit")
    st = job.stage
    if not search.transistors:
        reasons = "; ".join(f"{q.part_id}: {why}" for q, why in search.excluded) or \
            "the stock file has no transistors"
        need = job.supply.max_ce_voltage
        return Explanation(
            "transistor_ratings", f"no transistor on the shelf can be used ({reasons})",
            relaxation={"kind": "buy_transistor",
                        "text": f"buy an NPN or PNP small-signal transistor with VCEO above "
                                f"{need:.3g} V, IC max above {st.target.ic_max * 1e3:.3g} mA "
                                f"and at least {job.build.quantity} pieces",
                        "vceo_min_v": need, "ic_max_min_a": st.target.ic_max})
    if not search.shelf.lines:
        return Explanation("stock", f"no resistor line holds {job.build.quantity} pieces (one "
                           "build's worth)",
                           relaxation={"kind": "more_stock", "text": "restock resistors or "
                                       "lower [build] quantity"})

    def left() -> float:
        return max(budget_s - (time.monotonic() - t0), 0.5)

    t = st.target
    # 1. the IC window: the smallest symmetric widening that admits a design
    wide = _with_stage(job, ic_min=t.ic_min / 4, ic_max=t.ic_max * 4)
    found = _try(wide, inventory, left() / 4)
    if found is not None and not _ok_under(job, found):
        lo, hi = 0.0, math.log(4.0)
        best = found
        for _ in range(7):
            mid = 0.5 * (lo + hi)
            f = math.exp(mid)
            got = _try(_with_stage(job, ic_min=t.ic_min / f, ic_max=t.ic_max * f), inventory,
                       left() / 10)
            if got is not None:
                hi, best = mid, got
            else:
                lo = mid
        f = math.exp(hi)
        closest, misses = _closest(job, best)
        binding = misses[0]["name"] if misses else "ic_window"
        return Explanation(
            binding, _miss_text(misses), closest, misses,
            {"kind": "wider_window", "ic_min_a": t.ic_min / f, "ic_max_a": t.ic_max * f,
             "text": f"widen the IC window to {t.ic_min / f * 1e3:.4g}–{t.ic_max * f * 1e3:.4g} "
                     "mA"})
    # 2. headroom, 3. supply power, 4. stock
    relaxations = []
    if t.vce_min > 0 or t.swing_pk:
        relaxations.append(("lower_headroom", {"vce_min": 0.0, "swing_pk": None}))
    if st.limits.supply_power_max is not None:
        relaxations.append(("higher_supply_power", {"supply_power_max": None}))
    if t.gain_min is not None or t.gain_max is not None:
        relaxations.append(("gain_window", {"gain_min": None, "gain_max": None}))
    for kind, change in relaxations:
        found = _try(_with_stage(job, **change), inventory, left() / 3)
        if found is None:
            continue
        closest, misses = _closest(job, found)
        worst = {c["name"]: c for c in misses}
        if kind == "lower_headroom":
            v = worst.get("vce_min", worst.get("swing_saturation", {})).get("worst")
            text = (f"lower the VCE headroom to {math.floor(v * 100) / 100:.3g} V"
                    if isinstance(v, float) and v > 0 else "lower the VCE headroom")
            rel = {"kind": kind, "vce_min_v": v, "text": text}
        elif kind == "higher_supply_power":
            v = worst.get("supply_power", {}).get("worst")
            rel = {"kind": kind, "supply_power_max_w": v,
                   "text": f"allow {v * 1e3:.3g} mW from the supplies"
                   if isinstance(v, float) else "raise the supply-power limit"}
        else:
            rel = {"kind": kind, "text": "widen the gain window"}
        return Explanation(misses[0]["name"] if misses else kind, _miss_text(misses), closest,
                           misses, rel)
    if job.build.quantity > 1:
        found = _try(replace(job, build=replace(job.build, quantity=1)), inventory, left() / 3)
        if found is not None:
            need = {}
            for p in found.check.parts.values():
                for part in p.parts:
                    need[part.part_id] = need.get(part.part_id, 0) + job.build.quantity
            short = {pid: n - inventory.find_resistor(pid).qty for pid, n in need.items()
                     if n > inventory.find_resistor(pid).qty}
            text = ", ".join(f"{n} more {pid}" for pid, n in short.items()) or \
                "restock the lines short of the build"
            return Explanation("stock", "a design exists, but the shelf does not hold enough "
                               f"pieces for {job.build.quantity} boards",
                               {"topology": found.topology,
                                "transistor": found.transistor.part_id},
                               [], {"kind": "more_stock", "text": f"buy {text}",
                                    "short": short})
    return Explanation("all", "no combination on the shelf meets the job even with one "
                       "requirement relaxed; widen the IC window, lower the headroom, or stock "
                       "more values")


def _ok_under(job: Job, found) -> bool:
    _closest_design, misses = _closest(job, found)
    return not misses


def _miss_text(misses: list[dict[str, object]]) -> str:
    if not misses:
        return "the closest design passes the original limits"
    out = []
    for c in misses[:3]:
        corner = c.get("corner") or {}
        where = ", ".join(f"{k} {v['setting']}" for k, v in corner.items()
                          if isinstance(v, dict) and v.get("setting") != "interior") \
            if isinstance(corner, dict) else ""
        unit = str(c.get("unit", "") or "")
        out.append(f"{c['name']} misses by {_q(abs(float(c['margin'])), unit)} "
                   f"(worst {_q(float(c['worst']), unit)} against {_q(float(c['limit']), unit)}"
                   + (f" at {where}" if where else "") + ")")
    return "; ".join(out)


def _q(value: float, unit: str) -> str:
    """A quantity in engineering notation when its unit is known, else plain."""
    try:
        return format_quantity(value, unit, digits=4)
    except ValueError:
        return f"{value:.4g} {unit}".rstrip()
