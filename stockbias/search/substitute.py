"""`substitute`: can another stock transistor take this stage, and with how little rework?

For an existing stage (its values and its specified transistor) every stock
transistor is judged:

1. ruled out by a rating that no resistor change can mend (polarity, VCEO
   against the largest voltage the supplies can impose, IC max against the
   window, the dissipation it may take at the hottest ambient against
   IC min × VCE min), with the rating named;
2. otherwise checked as a drop-in with exactly the `check` analysis;
3. if it fails, the least rework from stock: fewest resistors changed first,
   then the cost of the new parts, then the IC margin.  For k = 1, 2, … changed
   roles, every subset of k roles is searched over every stock line that holds a
   build's worth, with the other roles held at their current parts.

The search screens all combinations at once over every vertex of the
tolerance box (vectorised; exact for the monotone quantities, and never
stricter than the full check, which also refines products inside the box and
adds the self-heated junction), then re-verifies the screened combinations in
rank order with :func:`stockbias.analysis.check.analyze_stage` until one
passes.  Because the screen never rejects a combination the full check would
pass, the first verified combination of the smallest k is the least rework:
the answer is proven unless the time limit cut the search short (then it is
marked ``proven: false``).

The stage keeps its purpose (:mod:`.keep_purpose`): the stage as it stands, with the
specified transistor, is the reference, and every verdict (drop-in and rework alike)
holds by default the nominal gain within ±10 %, the worst-case input resistance at or
above 80 %, the worst-case swing at or above 90 % and the worst-case supply current at
or below 125 % of today's.  They are limits of the stage (the screen and the check
both apply them), settable in ``[keep_purpose]`` and by ``keep_purpose=``.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace

from ..analysis.check import CheckResult, analyze_stage, check_roles
from ..analysis.ratings import transistor_pd_allowed
from ..assign import ResolvedResistor, resolve_resistor
from ..errors import InputError
from ..job import Job
from ..parts import Inventory, Resistor, Transistor
from ..topologies import get_network
from .keep_purpose import (
    HeldPurpose,
    KeepPurpose,
    defaults_text,
    effective_keep,
    figures_of,
    hold_purpose,
)
from .rework_screen import screen_changes

__all__ = ["Prepared", "SubstituteCandidate", "SubstituteResult", "no_fix_note", "prepare",
           "substitute"]



@dataclass(frozen=True)
class SubstituteCandidate:
    """One stock transistor's verdict.

    ``changes`` is the least rework (role → new part), empty for a drop-in; ``check`` is the
    analysis with the current values (or, when there is a rework, with the reworked ones).
    """

    transistor: Transistor
    drop_in: bool
    ruled_out: str | None
    changes: dict[str, ResolvedResistor] = field(default_factory=dict)
    check: CheckResult | None = None
    drop_in_check: CheckResult | None = None
    added_cost: float = 0.0
    proven: bool = True
    note: str = ""
    #: with a yield target: the evidence for the verdict's parts and for the drop-in as it
    #: stands (:class:`.yield_substitute.YieldEvidence`)
    yield_evidence: object | None = None
    drop_in_yield: object | None = None
    #: with a yield target: the worst-case rules' verdict for this transistor (drop-in,
    #: rework with its changes and added cost, none, not searched)
    worst_case: dict[str, object] | None = None

    @property
    def fixed(self) -> bool:
        return self.ruled_out is None and (self.drop_in or bool(self.changes))

    def sort_key(self) -> tuple:
        icm = _ic_margin(self.check) if self.check is not None else -math.inf
        if self.drop_in:
            return (0, 0, 0.0, -icm, self.transistor.part_id)
        if self.changes:
            return (1, len(self.changes), self.added_cost, -icm, self.transistor.part_id)
        if self.ruled_out is None:
            return (2, 0, 0.0, 0.0, self.transistor.part_id)
        return (3, 0, 0.0, 0.0, self.transistor.part_id)

    def to_dict(self) -> dict[str, object]:
        margins = None
        if self.check is not None:
            margins = [c.to_dict() for c in self.check.constraints]
        drop_in_failures = None
        if self.drop_in_check is not None and not self.drop_in:
            drop_in_failures = [c.to_dict() for c in self.drop_in_check.failing]
        return {
            "part_id": self.transistor.part_id, "polarity": self.transistor.polarity,
            "drop_in": self.drop_in, "ruled_out": self.ruled_out,
            "changes": [{"role": role, "part_id": _ids(p), "value_ohm": p.value,
                         "tolerance_pct": 100 * p.tol} for role, p in self.changes.items()],
            "added_cost": self.added_cost, "proven": self.proven, "note": self.note,
            "constraints": margins, "drop_in_failures": drop_in_failures,
            "ic_margin": None if self.check is None else _ic_margin(self.check),
            "purpose_after": None if self.check is None or not self.fixed
            else figures_of(self.check),
            "yield": None if self.yield_evidence is None
            else self.yield_evidence.to_dict(),  # type: ignore[attr-defined]
            "drop_in_yield": None if self.drop_in_yield is None
            else self.drop_in_yield.to_dict(),  # type: ignore[attr-defined]
            "worst_case_verdict": self.worst_case,
        }


@dataclass(frozen=True)
class SubstituteResult:
    """All stock transistors ranked: drop-ins, then by rework, then unfixable, then ruled out."""

    stage: str
    topology: str
    current: Transistor
    values: dict[str, ResolvedResistor]
    candidates: list[SubstituteCandidate]
    solve_seconds: float
    purpose: HeldPurpose | None = None
    purpose_rule: str = ""
    #: with a yield target: the target, the confidence, the samples and what was screened
    yield_search: dict[str, object] | None = None

    def to_dict(self) -> dict[str, object]:
        return {"stage": self.stage, "topology": self.topology,
                "mode": "worst_case" if self.yield_search is None else "yield",
                "yield_search": self.yield_search,
                "current": {"part_id": self.current.part_id},
                "values": {role: p.to_dict() for role, p in self.values.items()},
                "solve_seconds": self.solve_seconds,
                "candidates": [c.to_dict() for c in self.candidates],
                "purpose_rule": self.purpose_rule,
                "purpose": None if self.purpose is None else self.purpose.to_dict()}


def _ids(p: ResolvedResistor) -> object:
    ids = p.part_ids
    if not ids:
        return None
    return ids[0] if len(ids) == 1 else ids


def _ic_margin(res: CheckResult) -> float:
    """Smallest distance of worst-case IC to the window, as a fraction of the target."""
    return res.ic_margin


def _ruled_out(job: Job, q: Transistor, polarity: str) -> str | None:
    """A rating no resistor change can mend, named; None when there is none."""
    stage = job.stage
    t = stage.target
    need_v = job.supply.max_ce_voltage
    if q.polarity != polarity:
        return f"polarity {q.polarity}: the stage is built for {polarity}"
    if q.vceo_max <= need_v:
        return f"VCEO {q.vceo_max:g} V below the {need_v:.3g} V supply maximum"
    if q.ic_max < t.ic_min:
        return f"IC max {q.ic_max * 1e3:.3g} mA below the {t.ic_min * 1e3:.3g} mA window floor"
    theta = math.nan if q.theta_ja is None else q.theta_ja
    tj = q.tj_max if stage.limits.tj_max is None else stage.limits.tj_max
    hot = job.environment.ambient_max_c
    allowed = float(transistor_pd_allowed(q.pd_max_w, theta, hot, tj))
    if allowed < t.ic_min * t.vce_min:
        return (f"PD {allowed * 1e3:.3g} mW allowed at {hot:g} °C, below IC min × VCE min "
                f"({t.ic_min * t.vce_min * 1e3:.3g} mW)")
    if q.qty < job.build.quantity:
        return f"only {q.qty} in stock for a build of {job.build.quantity}"
    return None


def _line_uses(parts: Mapping[str, ResolvedResistor]) -> dict[str, int]:
    uses: dict[str, int] = {}
    for p in parts.values():
        for part in p.parts:
            uses[part.part_id] = uses.get(part.part_id, 0) + 1
    return uses


def _stock_ok(parts: Mapping[str, ResolvedResistor], inventory: Inventory, build: int) -> bool:
    for pid, n in _line_uses(parts).items():
        row = inventory.find_resistor(pid)
        if row is None or row.qty < n * build:
            return False
    return True


def _as_resolved(role: str, r: Resistor) -> ResolvedResistor:
    return ResolvedResistor.of_part(role, r)


def _least_rework(job: Job, base: dict[str, ResolvedResistor], q: Transistor,
                  inventory: Inventory, deadline: float, max_changes: int,
                  samples: int, seed: int) -> tuple[dict[str, ResolvedResistor],
                                                   CheckResult | None, float, bool]:
    """Fewest changes, then added cost, then IC margin; (changes, check, cost, proven)."""
    build = job.build.quantity
    for k in range(1, min(max_changes, len(base)) + 1):
        # 1. screen every subset of k roles over every stock line, all at once per chunk
        scored, cands, timed_out = screen_changes(job, base, q, inventory, deadline, k)
        # 2. verify in rank order; a screened margin bounds the verified one from above, so
        #    once the best verified design beats every remaining screen value, it is minimal
        best: tuple[int, float, dict[str, ResolvedResistor], CheckResult] | None = None
        for cost, m_screen, roles, row in scored:
            if best is not None and (cost > best[0] or m_screen <= best[1]):
                break
            if time.monotonic() > deadline:
                timed_out = True
                break
            parts = dict(base)
            for r, i in zip(roles, row, strict=True):
                parts[r] = _as_resolved(r, cands[roles][r][i])
            if not _stock_ok(parts, inventory, build):
                continue
            res = analyze_stage(job, job.stage, parts, q, samples=0)
            if res.ok:
                m = _ic_margin(res)
                if best is None or m > best[1]:
                    best = (cost, m, {r: parts[r] for r in roles}, res)
        if best is not None:
            cost, _m, changes, res = best
            # the rework passes every worst-case limit already; its Monte Carlo figures
            # are left out when the time limit has passed
            if samples > 0 and time.monotonic() < deadline:
                res = analyze_stage(job, job.stage, {**base, **changes}, q, samples=samples,
                                    seed=seed)
            return changes, res, cost / 1e6, not timed_out
        if timed_out:
            return {}, None, 0.0, False
    return {}, None, 0.0, True


@dataclass(frozen=True)
class Prepared:
    """An existing stage made ready for judging: the job with the stage's purpose held, the
    current parts resolved, the specified transistor."""

    job: Job
    values: dict[str, str]
    base: dict[str, ResolvedResistor]
    current: Transistor
    held: HeldPurpose
    keep: KeepPurpose | None
    network: str
    tolerance_pct: float


def prepare(job: Job, values: Mapping[str, str], current: str, inventory: Inventory, *,
            tolerance_pct: float | None = None,
            keep_purpose: dict[str, float | None] | None = None,
            purpose: bool = True) -> Prepared:
    """Check the input, resolve today's parts and hold the stage's purpose (today's figures
    from the worst-case analysis of the stage as it stands)."""
    from .yield_evidence import plain_job

    if job.is_board:
        raise InputError("substitute takes a one-stage job", file=job.path, column="stage")
    stage = job.stage
    if stage.topology == "any":
        raise InputError("substitute needs the stage's topology, not 'any'", file=job.path,
                         column="search.topology", text="any")
    network = get_network(stage.topology)
    check_roles(network.name, values)
    cur = inventory.find_transistor(current)
    if cur is None:
        raise InputError(f"no transistor with that part id in {inventory.path}",
                         column="--transistor", text=current)
    tol = job.build.default_tolerance_pct if tolerance_pct is None else tolerance_pct
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    base = {role: resolve_resistor(role, text, inventory, tol, ambient=ambient)
            for role, text in values.items()}
    keep = effective_keep(stage, keep_purpose, not purpose)
    # today's figures are worst-case and nominal ones: no Monte Carlo (nor a yield target)
    today = plain_job(job)
    ref = analyze_stage(today, today.stage, base, cur, samples=0, seed=job.search.seed)
    stage, held = hold_purpose(stage, ref, keep)
    held.after = None
    return Prepared(replace(job, stages=(stage,)), dict(values), base, cur, held, keep,
                    network.name, tol)


def substitute(job: Job, values: Mapping[str, str], current: str, inventory: Inventory, *,
               max_changes: int | None = None, time_limit_s: float | None = None,
               samples: int | None = None, seed: int = 0,
               tolerance_pct: float | None = None,
               keep_purpose: dict[str, float | None] | None = None,
               purpose: bool = True, executor: object | None = None,
               progress: Callable[[str, float], None] | None = None) -> SubstituteResult:
    """Judge every stock transistor for an existing stage (DESIGN §1, §3).

    A job with ``[target] yield_min`` is judged by its Monte Carlo yield instead of its worst
    corner (:func:`.yield_substitute.yield_substitute`).

    Parameters
    ----------
    job : Job
        One stage with one topology.
    values : Mapping[str, str]
        The stage's current parts, role → part id, value, ``A+B`` or ``A|B``.
    current : str
        Part id of the specified transistor.
    inventory : Inventory
    max_changes : int, optional
        Most resistors a rework may change (default: every role).
    time_limit_s : float, optional
        Wall-clock limit for the whole command (default: the job's).
    samples : int, optional
        Monte Carlo boards of the reported checks (default 2000), or with a yield target of
        each judged candidate and each final check (default
        :data:`.yield_evidence.YIELD_SAMPLES`).
    seed : int
        Monte Carlo seed.
    tolerance_pct : float, optional
        Tolerance for current values that are not stock parts.
    keep_purpose : dict, optional
        Tolerances (``KeepPurpose`` field → % or None) over the job's ``[keep_purpose]``.
    purpose : bool
        False: the stage's purpose is not held (only the job's limits).
    executor : stockbias.executor.Executor, optional
        Where a yield target's Monte Carlo runs (default: this process).
    progress : callable, optional
        ``(text, fraction done)`` while a yield target is judged.
    """
    if samples != 0:
        # the Monte Carlo's statistics load before the clock starts (start-up, not search)
        from scipy import special, stats  # noqa: F401
    t0 = time.monotonic()
    prep = prepare(job, values, current, inventory, tolerance_pct=tolerance_pct,
                   keep_purpose=keep_purpose, purpose=purpose)
    limit = job.search.time_limit_s if time_limit_s is None else time_limit_s
    deadline = t0 + limit       # one limit for the whole command, shared by every transistor
    if job.stage.target.yield_min is not None:
        from .yield_substitute import yield_substitute

        return yield_substitute(prep, inventory, deadline=deadline, max_changes=max_changes,
                                samples=samples, seed=seed, executor=executor,
                                progress=progress, started=t0)
    samples = 2000 if samples is None else samples
    job, base, cur, held, stage = prep.job, prep.base, prep.current, prep.held, prep.job.stage
    out: list[SubstituteCandidate] = []
    check_s = 0.0               # the longest drop-in check so far, s
    for q in inventory.transistors:
        reason = _ruled_out(job, q, cur.polarity)
        if reason is not None:
            out.append(SubstituteCandidate(q, False, reason))
            continue
        if time.monotonic() + check_s > deadline:
            # no check starts that the time left cannot finish
            out.append(SubstituteCandidate(q, False, None, proven=False, note=(
                "not judged: the time limit ran out before its drop-in check")))
            continue
        t_check = time.monotonic()
        res = analyze_stage(job, stage, base, q, samples=samples, seed=seed)
        check_s = max(check_s, time.monotonic() - t_check)
        if res.ok:
            out.append(SubstituteCandidate(q, True, None, check=res, drop_in_check=res))
            continue
        changes, fixed, cost, proven = _least_rework(
            job, base, q, inventory, deadline, max_changes or len(base), samples, seed)
        note = "" if changes else no_fix_note(held, proven)
        out.append(SubstituteCandidate(q, False, None, changes=changes, check=fixed or res,
                                       drop_in_check=res, added_cost=cost, proven=proven,
                                       note=note))
    out.sort(key=lambda c: c.sort_key())
    return SubstituteResult(stage=stage.name, topology=prep.network, current=cur, values=base,
                            candidates=out, solve_seconds=time.monotonic() - t0,
                            purpose=held, purpose_rule=defaults_text(prep.keep))


def no_fix_note(held: HeldPurpose, proven: bool) -> str:
    """Why a transistor has no rework: none exists from stock, or the time ran out."""
    kept = " with the stage's purpose kept (--keep-purpose loosens it)" if held.limits else ""
    return (f"no rework from stock meets every limit{kept}" if proven
            else "time limit reached before a rework was found")
