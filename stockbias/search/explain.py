"""Why nothing on the shelf meets the job, how close it gets, and the levers that help.

Everything here is computed: the search is run again on a changed job or shelf, the
best design it finds is analysed against the *original* job with the path ``check``
uses (every limit it misses, its worst value, the corner), and each lever of
:mod:`.levers` (a value to buy, an hFE bin, 1 % parts, another network, a build the
stock covers, a lower headroom down to the stage's floor, a wider window, more supply
power) comes with its numbers and the design that proves it.  Advice never lowers the
gain, the swing or the input resistance the job asks for, and never puts the VCE
headroom within 0.5 V of VCE(sat) or below 1 V.  When no transistor qualifies, the
ratings a transistor to buy must have.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

from ..job import Job
from ..parts import Inventory
from ..units import format_quantity
from .design_result import VERIFY_SAMPLES

__all__ = ["Explanation", "explain"]


@dataclass(frozen=True)
class Explanation:
    """What binds, by how much the closest design misses, and one relaxation that helps."""

    binding: str
    message: str
    closest: dict[str, object] | None = None
    misses: list[dict[str, object]] = field(default_factory=list)
    relaxation: dict[str, object] | None = None
    #: every lever found to work, each with its numbers and the design that proves it
    levers: list[dict[str, object]] = field(default_factory=list)

    def to_dict(self) -> dict[str, object]:
        return {"binding": self.binding, "message": self.message, "closest": self.closest,
                "misses": self.misses, "relaxation": self.relaxation,
                "levers": self.levers}


def _closest(job: Job, found) -> tuple[dict[str, object], list[dict[str, object]]]:
    """The found design analysed against the original job (a job with a yield target is
    judged with the Monte Carlo boards the search verifies its designs with)."""
    from ..analysis.check import analyze_stage

    samples = VERIFY_SAMPLES if job.stage.target.yield_min is not None else 0
    res = analyze_stage(job, job.stage, found.check.parts, found.transistor, samples=samples,
                        seed=job.search.seed, topology=found.topology)
    misses = [c.to_dict() for c in res.constraints if not c.ok]
    closest = {"topology": found.topology, "transistor": found.transistor.part_id,
               "parts": {role: {"part_id": p.part_ids[0] if len(p.parts) == 1 else p.part_ids,
                                "value_ohm": p.value} for role, p in res.parts.items()}}
    return closest, misses


#: the least time a relaxed search is given, s (below it the levers are skipped and said so)
_LEAST_BUDGET_S = 0.05


def explain(job: Job, inventory: Inventory, search, status: str, budget_s: float = 20.0):
    """An :class:`Explanation` for a job the search found no design for.

    The closest design (from a relaxed IC window, or else a higher supply-power limit or
    the VCE headroom floor) is analysed against the original job and every limit it
    misses is named.  Then each lever of :mod:`.levers` is computed in turn within the
    budget; the first that works is ``relaxation``, all that work are ``levers``.  No
    lever lowers the gain, the swing or the input resistance the job asks for, or puts
    the VCE headroom below :func:`.levers.headroom_floor`.
    """
    t0 = time.monotonic()
    if status == "unknown":
        return Explanation("time_limit", "the time limit ran out before any design was found "
                           f"or ruled out, {_time_spent_on(search)}; raise --time-limit")
    from . import levers as lv  # the relaxed searches (loaded only when they can run)

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
        fewer = lv.build_quantity(job, inventory, max(budget_s, 0.5))
        return Explanation("stock", f"no resistor line holds {job.build.quantity} pieces (one "
                           "build's worth)",
                           relaxation=fewer or {"kind": "more_stock", "text": "restock "
                                                "resistors or lower [build] quantity"},
                           levers=[fewer] if fewer else [])

    budget = _budget_cause(job)
    if budget is not None:
        name, text, lever = budget
        return Explanation(name, text, relaxation=lever, levers=[lever])

    if budget_s < _LEAST_BUDGET_S:
        return Explanation(
            "time_limit", "no design from this stock meets every limit (the search was "
            "complete); the time limit left no time to search for what misses and which "
            "change would help, so that search was skipped; raise --time-limit to have it")

    def left(share: float) -> float:
        return max((budget_s - (time.monotonic() - t0)) * share, _LEAST_BUDGET_S)

    def over() -> bool:
        return time.monotonic() - t0 > budget_s

    found_levers: list[dict[str, object]] = []
    # the closest design: what a relaxed window (or power limit) admits, judged by the job
    window, closest_design = lv.wider_window(job, inventory, left(0.25))
    power, power_design = (None, None)
    if (closest_design is None or _ok_under(job, closest_design)) and not over():
        power, power_design = lv.supply_power(job, inventory, left(0.15))
        closest_design = closest_design or power_design
    if closest_design is None and not over():
        # diagnosis only (never advice): without the headroom, swing and gain limits, the
        # design the shelf comes closest with, so every limit it misses can be named
        loose = replace(st, target=replace(st.target, vce_min=0.0, swing_pk=None,
                                           gain_min=None, gain_max=None))
        closest_design = lv.probe(replace(job, stages=(loose,)), inventory, left(0.15))
    closest, misses = (_closest(job, closest_design) if closest_design is not None
                       else (None, []))
    vce_sat = min((q.vce_sat for q in search.transistors), default=0.2)
    steps = [
        lambda: lv.buy_value(job, inventory, left(0.3)),
        lambda: lv.hfe_bin(job, inventory, search.transistors, left(0.3)),
        lambda: lv.one_percent(job, inventory, left(0.3)),
        lambda: lv.other_network(job, inventory, left(0.3)),
        lambda: lv.build_quantity(job, inventory, left(0.4)),
        lambda: lv.headroom(job, inventory, vce_sat, left(0.5)),
    ]
    for step in steps:
        if time.monotonic() - t0 > budget_s:
            break
        got = step()
        if got is not None:
            found_levers.append(got)
    if window is not None:
        found_levers.append(window)
    if power is not None:
        found_levers.append(power)
    cause = _cause(job, search, found_levers)
    binding = str(misses[0]["name"]) if misses else ("stock" if any(
        x["kind"] == "build_quantity" for x in found_levers) else "all")
    message = _miss_text(misses) if misses else "no relaxed search found a closest design"
    if cause:
        message = f"{cause}; {message}"
    if not found_levers:
        message += ("; no lever tried within the time budget (a value to buy, an hFE bin, 1 % "
                    "parts, another network, a smaller build, a lower headroom down to the "
                    "stage's floor, a wider window) makes the stage work")
    return Explanation(binding, message, closest, misses,
                       found_levers[0] if found_levers else None, found_levers)


def _cause(job: Job, search, found_levers: list[dict[str, object]]) -> str:
    """The physical cause where one can be computed: collector feedback's RB need."""
    st = job.stage
    nets = getattr(search, "networks", [st.topology])
    if "collector_feedback" not in nets or not search.transistors:
        return ""
    from .prepass import corners

    t = st.target
    need_v = max(t.vce_min, max(q.vce_sat for q in search.transistors) + (t.swing_pk or 0.0))
    # VCE = VBE + IB·RB in collector feedback: at the largest hFE (hot) and the window's top
    # current, IB = IC/β is smallest, so RB ≥ (VCE need − VBE)·β / IC max
    rb = []
    for q in search.transistors:
        cn = corners(job, q, "collector_feedback")
        rb.append(((need_v - cn.vbe_hi) * cn.beta_hi / t.ic_max, q, cn.beta_hi))
    rb_need, q, beta = min(rb, key=lambda x: x[0])
    largest = max((r.value_ohm for r in search.shelf.lines), default=0.0)
    if rb_need <= largest:
        return ""
    return (f"RB would need about {format_quantity(rb_need, 'ohm')} (VCE = VBE + IB·RB ≥ "
            f"{need_v:.3g} V with {q.part_id}'s hFE up to {q.hfe_max:.0f}, {beta:.0f} at "
            f"{job.environment.ambient_max_c:g} °C, at IC "
            f"{format_quantity(t.ic_max, 'A')}); the shelf's largest value is "
            f"{format_quantity(largest, 'ohm')}")


def _budget_cause(job: Job) -> tuple[str, str, dict[str, object]] | None:
    """A supply budget no design can meet, from the window alone (a necessary condition).

    Every design must hold IC ≥ IC min at every corner, and the collector current is drawn
    from the supply: at the highest positive rail the supply current is at least IC min and
    the supply power at least VCC max · IC min (for either polarity: the current through the
    collector and emitter flows between the rails).  A limit below that cannot be met by
    any shelf; say so with the numbers rather than search for a closest design.
    """
    st = job.stage
    t, lim = st.target, st.limits
    vcc_max = job.supply.volts * (1 + job.supply.tolerance_pct / 100)
    if lim.supply_current_max is not None and lim.supply_current_max < t.ic_min:
        text = (f"supply_current_max {_q(lim.supply_current_max, 'A')} is below the IC window's "
                f"minimum {_q(t.ic_min, 'A')}: the collector current alone exceeds it in every "
                "design")
        return "supply_current_max", text, {
            "kind": "supply_current", "text": f"raise supply_current_max above "
            f"{_q(t.ic_min, 'A')} (the IC window's minimum; the divider and base currents come "
            "on top), or lower the IC window", "supply_current_max_min_a": t.ic_min}
    need = vcc_max * t.ic_min
    if lim.supply_power_max is not None and lim.supply_power_max < need:
        text = (f"supply_power_max {_q(lim.supply_power_max, 'W')} cannot be met: the collector "
                f"current alone, at the window's minimum {_q(t.ic_min, 'A')} from the highest "
                f"supply {vcc_max:.4g} V, draws {_q(need, 'W')}")
        return "supply_power_max", text, {
            "kind": "supply_power", "text": f"raise supply_power_max above {_q(need, 'W')} "
            "(the divider and base currents come on top), or lower the IC window below "
            f"{_q(lim.supply_power_max / vcc_max, 'A')}", "supply_power_max_min_w": need}
    return None


def _ok_under(job: Job, found) -> bool:
    _closest_design, misses = _closest(job, found)
    return not misses


def _miss_text(misses: list[dict[str, object]]) -> str:
    if not misses:
        return "the closest design passes the original limits"
    out = []
    for c in misses:
        from ..render.corners import corner_text

        corner = c.get("corner")
        where = corner_text(corner) if isinstance(corner, dict) else ""
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


def _time_spent_on(search) -> str:
    """Where a cut search spent its time, in the user's terms (the real cause)."""
    size = (f"{len(search.shelf.lines)} resistor lines and {len(search.transistors)} usable "
            "transistors")
    if getattr(search, "pairs", False) and search.shelf.with_pairs is not None:
        size += f", pairs making {len(search.shelf.with_pairs):,} candidates per role"
    if search.coverage.scan_complete:
        return (f"while building designs from the rows that could hold the best one ({size}; "
                "every row was scanned)")
    return f"while scanning the rows of the IC-setting resistors ({size})"
