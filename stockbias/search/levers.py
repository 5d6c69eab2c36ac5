"""The levers an engineer pulls when nothing on the shelf meets a job, each computed.

Every lever is found by running the search on a changed shelf or job and keeping what
it returns (a design that passed the full check), so each piece of advice comes with
the design that proves it:

* ``buy_value`` — one value to buy: the shelf plus every E24 value from 10 Ω to 10 MΩ
  not on it (at the job's ``default_tolerance_pct``, 0.25 W, 100 ppm/°C: common
  practice for leaded film parts), each bought piece priced far above any shelf part,
  so the cheapest design buys the fewest pieces; the value, the role and the pieces
  for the build (uses × build quantity) are reported;
* ``hfe_bin`` — a narrower hFE bin of a shelf transistor: its hFE range split in
  geometric halves and thirds, the wider bins priced lower, so the widest bin that
  works is found;
* ``one_percent`` — 1 % parts: a 1 % copy of every shelf value, priced high, so the
  fewest roles take one; the roles that need it are named;
* ``other_network`` — another bias network (topology "any");
* ``build_quantity`` — the largest build the stock covers (bisection);
* ``headroom`` — a lower VCE headroom, never below :func:`headroom_floor`;
* ``wider_window`` — a wider IC window (bisection on a symmetric factor);
* ``supply_power`` — a higher supply-power limit.

No lever lowers the gain, the swing or the input resistance the job asks for: those
are what the stage is for.
"""

from __future__ import annotations

import math
import time
from dataclasses import replace

from ..errors import StockbiasError
from ..eseries import series_values
from ..job import Job
from ..parts import Inventory, Resistor, Transistor
from ..units import format_quantity

__all__ = ["HEADROOM_ABOVE_SAT", "HEADROOM_MIN", "headroom_floor", "probe"]

#: A stage is kept this far above VCE(sat), V: the base–collector junction of small-signal
#: silicon starts to conduct when VCE falls to about VBE − 0.4…0.5 V, and hFE collapses
#: well before the datasheet VCE(sat) (given at IC/IB = 10) is reached (common practice).
HEADROOM_ABOVE_SAT = 0.5
#: ... and never below 1 V, so a stage keeps some signal room at its worst corner
#: (common practice for small-signal amplifier stages).
HEADROOM_MIN = 1.0
#: price of a piece that is not on the shelf, per unit (far above any shelf part)
_BUY_COST = 1000.0
_PROBE_OBJECTIVES = ("cost", "part_count", "distinct_values", "ic_margin")


def headroom_floor(vce_sat: float) -> float:
    """The lowest VCE headroom advice may propose, V: max(1 V, VCE(sat) + 0.5 V)."""
    return max(HEADROOM_MIN, vce_sat + HEADROOM_ABOVE_SAT)


def _q(x: float, unit: str) -> str:
    return format_quantity(x, unit)


def probe(job: Job, inventory: Inventory, seconds: float):
    """The best design for a changed job or shelf, or None (none, or not searchable)."""
    from .design import design

    job = replace(job, search=replace(job.search, top=1))
    try:
        r = design(job, inventory, top=1, time_limit_s=max(seconds, 0.5), _explain=False)
    except StockbiasError:
        return None
    return r.designs[0] if r.designs else None


def _cost_first(job: Job) -> Job:
    return replace(job, search=replace(job.search, objectives=_PROBE_OBJECTIVES))


def _uses(found) -> dict[str, tuple[int, list[str]]]:
    """part id → (pieces per board, roles)."""
    out: dict[str, tuple[int, list[str]]] = {}
    for role, p in found.check.parts.items():
        for part in p.parts:
            n, roles = out.get(part.part_id, (0, []))
            out[part.part_id] = (n + 1, [*roles, role])
    return out


def _design_text(found) -> str:
    parts = ", ".join(f"{r} {_q(p.value, 'ohm')}" for r, p in found.check.parts.items())
    return f"{found.topology}, {found.transistor.part_id}, {parts}"


def buy_value(job: Job, inv: Inventory, seconds: float) -> dict[str, object] | None:
    """The one value (or fewest values) to buy, with pieces for the build."""
    if job.search.model != "constant_vbe":
        return None
    have = {r.value_ohm for r in inv.resistors}
    tol = job.build.default_tolerance_pct
    need = job.build.quantity
    extra = []
    for k, v in enumerate(series_values("E24", 10.0, 10e6)):
        if any(math.isclose(v, h, rel_tol=1e-9) for h in have):
            continue
        extra.append(Resistor(part_id=f"BUY {_q(v, 'ohm')}", value_ohm=float(v),
                              tolerance_pct=tol, power_w=0.25, tempco_ppm=100.0,
                              qty=4 * need, unit_cost=_BUY_COST, line=-(k + 1)))
    trial = replace(inv, resistors=inv.resistors + tuple(extra))
    found = probe(_cost_first(job), trial, seconds)
    if found is None:
        return None
    bought = {pid: u for pid, u in _uses(found).items() if pid.startswith("BUY ")}
    if not bought:
        return None
    values = {pid: next(r for r in extra if r.part_id == pid) for pid in bought}
    items = [{"value_ohm": values[pid].value_ohm, "tolerance_pct": tol, "power_w": 0.25,
              "tempco_ppm": 100.0, "pieces": n * need, "roles": roles}
             for pid, (n, roles) in bought.items()]
    shelf = [r.value_ohm for r in inv.bias_resistors]
    words = []
    for pid, (n, roles) in bought.items():
        v = values[pid].value_ohm
        where = ""
        if shelf and v > max(shelf):
            where = f"; the shelf's largest is {_q(max(shelf), 'ohm')}"
        elif shelf and v < min(shelf):
            where = f"; the shelf's smallest is {_q(min(shelf), 'ohm')}"
        words.append(f"{n * need} pieces of {_q(v, 'ohm')} ±{tol:g} % for "
                     f"{' and '.join(roles)}{where}")
    head = "buy one value: " if len(items) == 1 else f"buy {len(items)} values: "
    return {"kind": "buy_value", "text": head + "; ".join(words) + f" (design: "
            f"{_design_text(found)})", "buy": items, "design": _design_text(found)}


def _bins(q: Transistor) -> list[tuple[float, float, str]]:
    lo, hi = q.hfe_min, q.hfe_max
    r = hi / lo
    if r < 1.2:
        return []
    half = lo * math.sqrt(r)
    third = [lo * r ** (k / 3) for k in range(4)]
    return [(lo, half, "lower half"), (half, hi, "upper half"),
            (third[0], third[1], "lower third"), (third[1], third[2], "middle third"),
            (third[2], third[3], "upper third")]


def hfe_bin(job: Job, inv: Inventory, transistors, seconds: float) -> dict[str, object] | None:
    """A narrower hFE bin of a shelf transistor that makes the job work (widest first)."""
    copies, what = [], {}
    for q in transistors:
        for k, (a, b, name) in enumerate(_bins(q)):
            pid = f"{q.part_id} hFE {a:.0f}-{b:.0f}"
            copies.append(replace(q, part_id=pid, hfe_min=a, hfe_max=b,
                                  unit_cost=q.unit_cost + _BUY_COST * (1 + (k >= 2))))
            what[pid] = (q, a, b, name)
    if not copies:
        return None
    found = probe(_cost_first(job), replace(inv, transistors=tuple(copies)), seconds)
    if found is None:
        return None
    q, a, b, name = what[found.transistor.part_id]
    return {"kind": "hfe_bin", "transistor": q.part_id, "hfe_min": a, "hfe_max": b,
            "pieces": job.build.quantity,
            "text": f"a narrower hFE bin: {q.part_id} selected to hFE {a:.0f}–{b:.0f} (the "
                    f"{name} of its {q.hfe_min:.0f}–{q.hfe_max:.0f}), "
                    f"{job.build.quantity} pieces (design: {_design_text(found)})",
            "design": _design_text(found)}


def one_percent(job: Job, inv: Inventory, seconds: float) -> dict[str, object] | None:
    """1 % parts on the roles that bind: the fewest roles given a 1 % copy of a shelf value."""
    need = job.build.quantity
    copies = []
    for k, r in enumerate(inv.bias_resistors):
        if r.tolerance_pct <= 1.0:
            continue
        copies.append(replace(r, part_id=f"1% {r.part_id}", tolerance_pct=1.0,
                              tempco_ppm=min(abs(r.tempco_ppm or 0.0), 100.0) or None,
                              tempco_signed=False, qty=4 * need,
                              unit_cost=r.unit_cost + _BUY_COST, line=-(k + 1)))
    if not copies:
        return None
    found = probe(_cost_first(job), replace(inv, resistors=inv.resistors + tuple(copies)),
                  seconds)
    if found is None:
        return None
    used = {pid: u for pid, u in _uses(found).items() if pid.startswith("1% ")}
    if not used:
        return None
    by_id = {c.part_id: c for c in copies}
    was = {f"1% {r.part_id}": r.tolerance_pct for r in inv.bias_resistors}
    items = [{"part_id": pid[3:], "value_ohm": by_id[pid].value_ohm, "tolerance_pct": 1.0,
              "tempco_ppm": by_id[pid].tempco_ppm, "roles": roles, "pieces": n * need}
             for pid, (n, roles) in used.items()]
    words = "; ".join(
        f"{' and '.join(roles)}: {_q(by_id[pid].value_ohm, 'ohm')} at 1 % instead of "
        f"{pid[3:]} (±{was[pid]:g} %), {n * need} pieces"
        for pid, (n, roles) in used.items())
    return {"kind": "one_percent", "text": f"1 % parts on the role that binds — {words} "
            f"(design: {_design_text(found)})", "parts": items, "design": _design_text(found)}


def other_network(job: Job, inv: Inventory, seconds: float) -> dict[str, object] | None:
    """Another bias network from the same shelf."""
    if job.stage.topology == "any":
        return None
    found = probe(job.with_topology("any"), inv, seconds)
    if found is None or found.topology == job.stage.topology:
        return None
    return {"kind": "other_network", "topology": found.topology,
            "text": f"another network: {_design_text(found)}", "design": _design_text(found)}


def build_quantity(job: Job, inv: Inventory, seconds: float) -> dict[str, object] | None:
    """The largest build quantity below the job's that the stock covers."""
    n = job.build.quantity
    if n <= 1:
        return None
    t0 = time.monotonic()

    def works(k: int):
        left = max(seconds - (time.monotonic() - t0), 0.5)
        return probe(replace(job, build=replace(job.build, quantity=k)), inv, left / 4)

    best = works(1)
    if best is None:
        return None
    lo, hi = 1, n          # works(lo), not works(hi)
    while hi - lo > 1 and time.monotonic() - t0 < seconds:
        mid = (lo + hi) // 2
        got = works(mid)
        if got is not None:
            lo, best = mid, got
        else:
            hi = mid
    return {"kind": "build_quantity", "quantity": lo,
            "text": f"the stock covers {lo} of the {n} boards (design: {_design_text(best)})",
            "design": _design_text(best)}


def headroom(job: Job, inv: Inventory, vce_sat: float, seconds: float
             ) -> dict[str, object] | None:
    """The highest VCE headroom (not below :func:`headroom_floor`) that admits a design."""
    t = job.stage.target
    floor = headroom_floor(vce_sat)
    if t.vce_min <= floor:
        return None
    t0 = time.monotonic()

    def at(v: float):
        st = job.stage
        stage = replace(st, target=replace(st.target, vce_min=v))
        left = max(seconds - (time.monotonic() - t0), 0.5)
        return probe(replace(job, stages=(stage,)), inv, left / 3)

    best = at(floor)
    if best is None:
        return None
    lo, hi = floor, t.vce_min
    for _ in range(5):
        if time.monotonic() - t0 > seconds:
            break
        mid = 0.5 * (lo + hi)
        got = at(mid)
        if got is not None:
            lo, best = mid, got
        else:
            hi = mid
    v = math.floor(lo * 100) / 100
    return {"kind": "lower_headroom", "vce_min_v": v, "floor_v": floor,
            "text": f"lower the VCE headroom to {v:.3g} V (never below {floor:.3g} V: "
                    f"VCE(sat) {vce_sat:.3g} V + {HEADROOM_ABOVE_SAT:g} V, at least "
                    f"{HEADROOM_MIN:g} V) (design: {_design_text(best)})",
            "design": _design_text(best)}


def wider_window(job: Job, inv: Inventory, seconds: float) -> tuple[dict | None, object]:
    """(the smallest symmetric widening of the IC window that admits a design, its design)."""
    t = job.stage.target
    t0 = time.monotonic()

    def at(f: float):
        st = job.stage
        stage = replace(st, target=replace(st.target, ic_min=t.ic_min / f,
                                           ic_max=t.ic_max * f))
        left = max(seconds - (time.monotonic() - t0), 0.5)
        return probe(replace(job, stages=(stage,)), inv, left / 2)

    # the smallest widening first (a wide window makes a large search): the first factor
    # that admits a design bounds the answer, bisection narrows it
    lo, hi, best = 0.0, None, None
    for f in (1.25, 1.6, 2.5, 4.0):
        if time.monotonic() - t0 > seconds:
            break
        best = at(f)
        if best is not None:
            hi = math.log(f)
            break
        lo = math.log(f)
    if best is None or hi is None:
        return None, None
    for _ in range(5):
        if time.monotonic() - t0 > seconds:
            break
        mid = 0.5 * (lo + hi)
        got = at(math.exp(mid))
        if got is not None:
            hi, best = mid, got
        else:
            lo = mid
    f = math.exp(hi)
    return ({"kind": "wider_window", "ic_min_a": t.ic_min / f, "ic_max_a": t.ic_max * f,
             "text": f"widen the IC window to {t.ic_min / f * 1e3:.4g}–"
                     f"{t.ic_max * f * 1e3:.4g} mA (design: {_design_text(best)})",
             "design": _design_text(best)}, best)


def supply_power(job: Job, inv: Inventory, seconds: float) -> tuple[dict | None, object]:
    """A higher supply-power limit: the worst-case power of the design found without one."""
    st = job.stage
    if st.limits.supply_power_max is None:
        return None, None
    stage = replace(st, limits=replace(st.limits, supply_power_max=None))
    found = probe(replace(job, stages=(stage,)), inv, seconds)
    if found is None:
        return None, None
    v = found.check.worst.bounds["supply_power"].max \
        if "supply_power" in found.check.worst.bounds else None
    if v is None:
        return None, None
    return ({"kind": "higher_supply_power", "supply_power_max_w": v,
             "text": f"allow {v * 1e3:.3g} mW from the supplies (design: "
                     f"{_design_text(found)})", "design": _design_text(found)}, found)
