"""`substitute` to a yield target: every stock transistor judged for an existing stage by
the Monte Carlo yield of the stage with it, not by its worst corner.

For each transistor that no rating rules out, the stage is judged with 0, 1, 2, … changed
resistors (the ``substitute`` order: a drop-in first, then the fewest changes, then the least
added cost); the first change count with a qualifying set of parts is the verdict.

Candidates of one change count
    The drop-in itself (no change), or every change of that many roles to a stock line that
    the vertex screen of :func:`.rework_screen.screen_changes` passes on the job's tolerance box
    or on one of the yield search's sub-boxes (:data:`.yield_search.LEVELS`: resistor
    tolerances × k, hFE and VBE ranges narrowed to a fraction f); the
    :data:`PER_CHANGE_COUNT` cheapest are judged.  Change sets outside these families are not
    judged, so a yield verdict is the cheapest among these candidates, not a proof over the
    shelf (the worst-case ``substitute`` keeps its proof).

Evidence, as in the yield design (:mod:`.yield_evidence`)
    * Sound screens first: parts that pass the full worst-case check have yield 1; parts
      that pass the full check on a sub-box have yield at least that sub-box's probability
      (:func:`.yield_search.box_mass`), which qualifies them when it meets the target.
    * Every candidate is sampled on ``SCREEN_SAMPLES`` common boards (stream 1); one whose
      one-sided upper bound at confidence 1 − α/m (Bonferroni over the m candidates of that
      transistor and change count) is below the target is out.
    * The rest, in rank order, on fresh boards (stream 2): qualifies when the one-sided lower
      bound at ``yield_confidence`` meets the target.
    * The chosen parts are checked again by the path ``check`` uses on an independent
      stream (3); parts whose lower bound there falls below the target are dropped and the
      next candidate is judged.
    The worst-case verdict of the same parts is kept beside the yield verdict.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

from ..analysis.check import CheckResult, analyze_stage
from ..analysis.statistics import YieldResult
from ..assign import ResolvedResistor, resolve_resistor
from ..errors import InputError
from ..parts import Inventory, Transistor
from .rework_screen import screen_changes
from .substitute import (
    Prepared,
    SubstituteCandidate,
    SubstituteResult,
    _as_resolved,
    _least_rework,
    _ruled_out,
    _stock_ok,
    no_fix_note,
)
from .yield_evidence import (
    SCREEN_SAMPLES,
    STREAM_CHECK,
    YIELD_SAMPLES,
    Trial,
    final_check,
    judge,
    plain_job,
    screen_counts,
    upper_screen,
    yield_result,
)
from .yield_search import LEVELS, box_mass, shrunk_inventory

__all__ = ["PER_CHANGE_COUNT", "YieldEvidence", "yield_substitute"]

#: The cheapest change sets judged per transistor and number of changed resistors.
PER_CHANGE_COUNT = 40

#: Evidence kinds that qualify a set of parts.
QUALIFYING = ("worst case", "sub-box", "sampled")


@dataclass(frozen=True)
class YieldEvidence:
    """What one set of parts (a drop-in or a rework) was shown to yield, and how.

    ``kind``: ``worst case`` (passes every corner: yield 1), ``sub-box`` (passes the full
    check on a sub-box: yield ≥ ``box_mass``), ``sampled`` (judged on fresh boards) — these
    qualify — or ``screened out`` (upper bound below the target), ``below target`` (judged
    lower bound below it), ``failed final check``, ``not judged`` (time limit)."""

    kind: str
    box: tuple[float, float] = (1.0, 1.0)
    box_mass: float = 1.0
    screen: YieldResult | None = None
    screen_high: float | None = None
    screen_confidence: float | None = None
    screened_with: int = 0
    judged: YieldResult | None = None
    judged_low: float | None = None
    final: YieldResult | None = None
    final_low: float | None = None
    worst_case_failing: tuple[str, ...] = ()

    @property
    def qualifies(self) -> bool:
        return self.kind in QUALIFYING

    def to_dict(self) -> dict[str, object]:
        return {
            "kind": self.kind, "qualifies": self.qualifies,
            "box_resistor_factor": self.box[0], "box_range_fraction": self.box[1],
            "box_mass": self.box_mass,
            "screen": None if self.screen is None else {
                **self.screen.to_dict(), "yield_high_one_sided": self.screen_high,
                "confidence_each": self.screen_confidence, "candidates": self.screened_with},
            "judged": None if self.judged is None else {
                **self.judged.to_dict(), "yield_low_one_sided": self.judged_low},
            "final_check": None if self.final is None else {
                **self.final.to_dict(), "yield_low_one_sided": self.final_low,
                "stream": STREAM_CHECK},
            "worst_case_ok": not self.worst_case_failing,
            "worst_case_failing": list(self.worst_case_failing),
        }


@dataclass
class _Entry:
    """One candidate set of changes for one transistor."""

    changes: dict[str, ResolvedResistor]      # on the real shelf
    shrunk: dict[str, ResolvedResistor]       # the same lines on its box's shelf
    cost: int                                  # added cost, micro-units
    margin: float                              # screened IC margin
    level: int                                 # the widest box whose screen it passes
    mass: float = 0.0


@dataclass
class _Boxes:
    """The job's box and its sub-boxes: shelf, today's parts and transistors on each."""

    levels: tuple[tuple[float, float], ...]
    shelves: list[Inventory]
    bases: list[dict[str, ResolvedResistor]]


def _boxes(prep: Prepared, inventory: Inventory,
           levels: tuple[tuple[float, float], ...]) -> _Boxes:
    job = prep.job
    amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    shelves, bases = [], []
    for i, (k, f) in enumerate(levels):
        shelf = shrunk_inventory(inventory, k, f)
        shelves.append(shelf)
        bases.append(prep.base if i == 0 else {
            role: resolve_resistor(role, text, shelf, prep.tolerance_pct * k, ambient=amb)
            for role, text in prep.values.items()})
    return _Boxes(levels, shelves, bases)


def _pieces(parts: dict[str, ResolvedResistor]) -> int:
    return sum(max(1, len(p.pieces)) for p in parts.values())


def _entries(prep: Prepared, boxes: _Boxes, inventory: Inventory, q: Transistor, k: int,
             deadline: float) -> tuple[list[_Entry], bool]:
    """The cheapest change sets of ``k`` roles that some box's vertex screen passes;
    (entries, cut by the time limit)."""
    plain = plain_job(prep.job)
    found: dict[tuple[object, ...], _Entry] = {}
    timed_out = False
    for lvl, shelf in enumerate(boxes.shelves):
        q_l = shelf.find_transistor(q.part_id)
        assert q_l is not None
        scored, cands, timed_out = screen_changes(plain, boxes.bases[lvl], q_l, shelf,
                                                  deadline, k)
        for cost, margin, roles, row in scored:
            rows = {r: cands[roles][r][i] for r, i in zip(roles, row, strict=True)}
            key = tuple(sorted((r, x.part_id) for r, x in rows.items()))
            if key in found:
                continue        # found on a wider box already: that evidence is stronger
            real = {}
            for r, x in rows.items():
                line = inventory.find_resistor(x.part_id)
                assert line is not None
                real[r] = _as_resolved(r, line)
            if not _stock_ok({**prep.base, **real}, inventory, prep.job.build.quantity):
                continue
            found[key] = _Entry(real, {r: _as_resolved(r, x) for r, x in rows.items()},
                                cost, margin, lvl)
        if timed_out:
            break
    order = sorted(found.values(), key=lambda e: (e.cost, -e.margin, e.level))
    return order[:PER_CHANGE_COUNT], timed_out


def _drop_in_entry(prep: Prepared, boxes: _Boxes, q: Transistor, wc_ok: bool) -> _Entry:
    """The stage as it stands, tagged with the widest box whose full check it passes."""
    level = 0 if wc_ok else len(boxes.levels)
    if not wc_ok:
        plain = plain_job(prep.job)
        for lvl in range(1, len(boxes.levels)):
            q_l = boxes.shelves[lvl].find_transistor(q.part_id)
            assert q_l is not None
            if analyze_stage(plain, plain.stage, boxes.bases[lvl], q_l, samples=0).ok:
                level = lvl
                break
    return _Entry({}, {}, 0, 0.0, level)


class _Clock:
    """The command's deadline and the longest run of each kind of step so far: no step
    starts that the time left cannot finish."""

    def __init__(self, deadline: float) -> None:
        self.deadline = deadline
        self.longest: dict[str, float] = {}

    def fits(self, step: str) -> bool:
        return time.monotonic() + self.longest.get(step, 0.0) <= self.deadline

    def timed(self, step: str, fn: Callable[..., Any], *args: Any, **kw: Any) -> Any:
        """``fn(*args, **kw)``, its duration kept as this step's if it is the longest."""
        t = time.monotonic()
        out = fn(*args, **kw)
        self.longest[step] = max(self.longest.get(step, 0.0), time.monotonic() - t)
        return out


@dataclass
class _Verdict:
    entry: _Entry
    evidence: YieldEvidence
    check: CheckResult


def _judge_batch(prep: Prepared, boxes: _Boxes, q: Transistor, entries: list[_Entry],
                 samples: int, ex: object, clock: _Clock, stats: dict[str, object],
                 note: Callable[[str], None], tested: dict[int, bool] | None = None
                 ) -> tuple[_Verdict | None, list[YieldEvidence], bool]:
    """The first entry in rank order that qualifies, the evidence of every entry judged
    before it (in order), and whether the time limit cut the batch."""
    job = prep.job
    plain = plain_job(job)
    t = job.stage.target
    y_min, conf = float(t.yield_min), float(t.yield_confidence)  # type: ignore[arg-type]
    trials = [Trial({**prep.base, **e.changes}, q) for e in entries]
    for e in entries:
        if e.level < len(boxes.levels):
            kf = boxes.levels[e.level]
            pieces = _pieces({**boxes.bases[e.level], **e.shrunk})
            e.mass = 1.0 if e.level == 0 else box_mass(*kf, pieces)
    known = tested or {}
    # parts already shown to pass every worst-case corner need no screening
    sampled = [i for i, e in enumerate(entries) if not known.get(id(e))]
    counts: dict[int, tuple[int, int]] = {}
    highs: dict[int, float] = {}
    each = None
    if sampled:
        note(f"screening {len(sampled)} candidates × {SCREEN_SAMPLES:,} boards")
        got = screen_counts(ex, job, [trials[i] for i in sampled], done=lambda k: note(
            f"screened {k} of {len(sampled)} candidates × {SCREEN_SAMPLES:,} boards"))
        up, each = upper_screen(got, conf)
        counts, highs = dict(zip(sampled, got, strict=True)), dict(zip(sampled, up, strict=True))
        stats["sampled_candidates"] += len(sampled)  # type: ignore[operator]
    seen: list[YieldEvidence] = []
    for i, (e, trial) in enumerate(zip(entries, trials, strict=True)):
        if not clock.fits("check"):
            return None, seen, True
        box = boxes.levels[e.level] if e.level < len(boxes.levels) else (1.0, 1.0)
        common: dict[str, Any] = {} if i not in counts else {
            "screen": yield_result(*counts[i]), "screen_high": highs[i],
            "screen_confidence": each, "screened_with": len(sampled)}
        kind = None
        if e.level == 0 or (e.level < len(boxes.levels) and e.mass >= y_min):
            # sound screens: the full check on the job's box, or on the sub-box
            q_l = boxes.shelves[e.level].find_transistor(q.part_id)
            assert q_l is not None
            parts = {**boxes.bases[e.level], **e.shrunk} if e.level else trial.parts
            ok = known.get(id(e))
            if ok is None:
                ok = clock.timed("check", analyze_stage, plain, plain.stage, parts, q_l,
                                 samples=0).ok
            if ok:
                kind = "worst case" if e.level == 0 else "sub-box"
                stats["proven_without_sampling"] += 1  # type: ignore[operator]
        judged = judged_low = None
        if kind is None:
            if highs.get(i, 1.0) < y_min:
                stats["screened_out"] += 1  # type: ignore[operator]
                seen.append(YieldEvidence("screened out", box, e.mass, **common))
                continue
            if not clock.fits("judge"):
                return None, seen, True
            note(f"judging candidate {i + 1} of {len(entries)} on {samples:,} boards")
            stats["judged"] += 1  # type: ignore[operator]
            judged, judged_low = clock.timed("judge", judge, ex, job, trial, samples, conf)
            if judged_low < y_min:
                seen.append(YieldEvidence("below target", box, e.mass, judged=judged,
                                          judged_low=judged_low, **common))
                continue
            kind = "sampled"
        if not clock.fits("final"):
            return None, seen, True
        note(f"final check on {samples:,} fresh boards")
        check, low = clock.timed("final", final_check, job, trial, samples, conf)
        mc = check.monte_carlo
        assert mc is not None
        failing = tuple(c.name for c in check.constraints if not c.ok and c.name != "yield_min")
        ev = YieldEvidence(kind, box if kind != "worst case" else (1.0, 1.0),
                           1.0 if kind == "worst case" else e.mass, judged=judged,
                           judged_low=judged_low, final=mc.yield_, final_low=low,
                           worst_case_failing=failing, **common)
        if low < y_min:
            stats["dropped_on_final_check"].append(  # type: ignore[attr-defined]
                f"{q.part_id} " + (", ".join(f"{r}={'+'.join(p.part_ids)}"
                                             for r, p in e.changes.items()) or "as it stands")
                + f": final check {100 * mc.yield_.yield_:.3f} %")
            seen.append(replace(ev, kind="failed final check"))
            continue
        return _Verdict(e, ev, check), seen, False
    return None, seen, False


def yield_substitute(prep: Prepared, inventory: Inventory, *, deadline: float,
                     max_changes: int | None = None, samples: int | None = None,
                     seed: int = 0, executor: object | None = None,
                     progress: Callable[[str, float], None] | None = None,
                     started: float | None = None,
                     levels: tuple[tuple[float, float], ...] = LEVELS) -> SubstituteResult:
    """Every stock transistor judged by the yield rule; see the module docstring.

    Parameters
    ----------
    prep : Prepared
        The stage from :func:`.substitute.prepare` (purpose held, parts resolved).
    inventory : Inventory
    deadline : float
        ``time.monotonic()`` at which the command's time limit runs out.
    max_changes : int, optional
        Most resistors a rework may change (default: every role).
    samples : int, optional
        Boards per judged candidate and per final check (default :data:`YIELD_SAMPLES`).
    seed : int
        Monte Carlo seed (every stream is spawned from it).
    executor : stockbias.executor.Executor, optional
        Where the Monte Carlo runs (default: this process).
    """
    from ..executor import InProcess

    t0 = time.monotonic() if started is None else started
    job = replace(prep.job, search=replace(prep.job.search, seed=int(seed)))
    prep = replace(prep, job=job)
    plain = plain_job(job)
    stage = job.stage
    y_min, conf = float(stage.target.yield_min), float(stage.target.yield_confidence)  # type: ignore[arg-type]
    samples = YIELD_SAMPLES if samples is None else int(samples)
    if samples < 1:
        raise InputError("the job sets yield_min, so each candidate is judged on Monte Carlo "
                         "boards (--samples at least 1)", column="--samples", text=str(samples))
    ex = executor if executor is not None else InProcess()
    boxes = _boxes(prep, inventory, levels)
    clock = _Clock(deadline)
    most = min(max_changes or len(prep.base), len(prep.base))
    stats: dict[str, object] = {
        "sampled_candidates": 0, "proven_without_sampling": 0, "screened_out": 0,
        "judged": 0, "dropped_on_final_check": [], "cut_by_time_limit": [],
        "executor": getattr(ex, "name", "this process")}
    out: list[SubstituteCandidate] = []
    shelf_q = inventory.transistors
    for qi, q in enumerate(shelf_q):

        def note(text: str, qi: int = qi, name: str = q.part_id) -> None:
            if progress is not None:
                progress(f"{name} ({qi + 1} of {len(shelf_q)}): {text}", qi / len(shelf_q))

        reason = _ruled_out(job, q, prep.current.polarity)
        if reason is not None:
            out.append(SubstituteCandidate(q, False, reason))
            continue
        if not clock.fits("check"):
            # no check starts that the time left cannot finish
            stats["cut_by_time_limit"].append(q.part_id)  # type: ignore[attr-defined]
            out.append(SubstituteCandidate(q, False, None, proven=False, note=(
                "not judged: the time limit ran out before its drop-in check")))
            continue
        note("worst-case check as it stands")
        wc = clock.timed("check", analyze_stage, plain, plain.stage, prep.base, q, samples=0)
        verdict, drop_ev, cut = None, None, False
        for k in range(most + 1):
            if k == 0:
                entry = _drop_in_entry(prep, boxes, q, wc.ok)
                entries, cut = [entry], False
                tested = {id(entry): True} if wc.ok else None
            else:
                note(f"screening changes of {k} resistor{'s' if k > 1 else ''}")
                entries, cut = _entries(prep, boxes, inventory, q, k, deadline)
                tested = None
            if entries:
                verdict, seen, cut_j = _judge_batch(prep, boxes, q, entries, samples, ex,
                                                    clock, stats, note, tested)
                cut = cut or cut_j
                if k == 0:
                    drop_ev = verdict.evidence if verdict is not None else (
                        seen[0] if seen else YieldEvidence("not judged"))
            if verdict is not None or cut:
                break
        if cut:
            stats["cut_by_time_limit"].append(q.part_id)  # type: ignore[attr-defined]
        note("worst-case verdict beside it")
        worst = _worst_case_verdict(prep, inventory, q, wc, deadline, most)
        if verdict is None:
            out.append(SubstituteCandidate(q, False, None, check=wc, drop_in_check=wc,
                                           proven=not cut, note=_no_fix(prep, most, cut),
                                           drop_in_yield=drop_ev, worst_case=worst))
        elif not verdict.entry.changes:
            out.append(SubstituteCandidate(q, True, None, check=verdict.check, drop_in_check=wc,
                                           yield_evidence=verdict.evidence, worst_case=worst))
        else:
            out.append(SubstituteCandidate(
                q, False, None, changes=verdict.entry.changes, check=verdict.check,
                drop_in_check=wc, added_cost=verdict.entry.cost / 1e6, proven=not cut,
                yield_evidence=verdict.evidence, drop_in_yield=drop_ev, worst_case=worst))
    out.sort(key=lambda c: c.sort_key())
    info: dict[str, object] = {
        "yield_min": y_min, "yield_confidence": conf, "samples_per_design": samples,
        "screen_samples": SCREEN_SAMPLES, "seed": int(seed),
        "boxes": [{"resistor_factor": k, "range_fraction": f} for k, f in levels],
        "candidates_per_change_count": PER_CHANGE_COUNT, "stats": stats,
        "assumptions": [
            "a yield verdict judges the drop-in and, per number of changed resistors, the "
            f"{PER_CHANGE_COUNT} cheapest change sets that pass the vertex screen on the "
            "job's box or a sub-box (resistor tolerances × k, hFE and VBE ranges narrowed "
            "to a fraction f); change sets outside these families are not judged, so a "
            "rework is the cheapest among these candidates, not a proof over the shelf"]}
    return SubstituteResult(stage=stage.name, topology=prep.network, current=prep.current,
                            values=prep.base, candidates=out,
                            solve_seconds=time.monotonic() - t0, purpose=prep.held,
                            purpose_rule=_rule(prep), yield_search=info)


def _worst_case_verdict(prep: Prepared, inventory: Inventory, q: Transistor, wc: CheckResult,
                        deadline: float, most: int) -> dict[str, object]:
    """What the worst-case ``substitute`` rules say for this transistor (drop-in, the least
    rework, or none), for comparison with the yield verdict."""
    if wc.ok:
        return {"verdict": "drop-in", "changes": [], "added_cost": 0.0, "proven": True}
    if time.monotonic() > deadline:
        return {"verdict": "not searched", "changes": [], "added_cost": 0.0, "proven": False}
    changes, _res, cost, proven = _least_rework(plain_job(prep.job), prep.base, q, inventory,
                                                deadline, most, 0, 0)
    return {"verdict": "rework" if changes else "none",
            "changes": [{"role": r, "part_id": "+".join(p.part_ids), "value_ohm": p.value}
                        for r, p in changes.items()],
            "added_cost": cost, "proven": proven}


def _no_fix(prep: Prepared, most: int, cut: bool) -> str:
    """Why a transistor has no verdict under the yield rule."""
    if cut:
        return no_fix_note(prep.held, False)
    kept = (" with the stage's purpose kept (--keep-purpose loosens it)"
            if prep.held.limits else "")
    y = prep.job.stage.target.yield_min
    return (f"no candidate with up to {most} changed resistor{'s' if most > 1 else ''} is "
            f"shown to yield ≥ {100 * float(y):g} %{kept}")  # type: ignore[arg-type]


def _rule(prep: Prepared) -> str:
    from .keep_purpose import defaults_text

    return defaults_text(prep.keep)
