"""Design to a yield target: the cheapest designs whose Monte Carlo yield is shown, at the
job's confidence, to meet ``[target] yield_min``.

Candidates
    The worst-case search (:func:`.design.design`, unchanged) is run on the job's own
    tolerance box and on *sub-boxes* of it: every resistor's tolerance shrunk to ``k`` of
    itself (±3k σ of its truncated normal) and the hFE and VBE ranges of every transistor
    narrowed about their centres to a fraction ``f`` of their width (:data:`LEVELS`).  A
    design found on a sub-box passes every limit at every environment corner for every
    board whose draws fall inside that sub-box.  The candidates are the top designs of each
    box; designs that pass no sub-box at all are not searched (so the result is never
    called optimal: it is the best among these candidates).

Screens before sampling, each sound
    * A design found on the full box passes every worst-case corner: its yield is 1.
    * A design found on a sub-box has yield ≥ the probability that a board falls inside
      that sub-box (the draws are independent): Π over resistor pieces of
      (2Φ(3k) − 1)/(2Φ(3) − 1), times f² for hFE and VBE (ICBO and tempcos keep their full
      ranges).  Where that mass already meets the target the design qualifies with
      certainty, without sampling.
    * The nominal point is not used as a screen: a design whose nominal point fails a limit
      may still have boards that pass (a window off-centre, a skewed spread), and only
      sampling says how many.

Sampled screens
    Every other candidate is sampled on the same boards (common random numbers: the same
    seed and stream give every candidate the same manufacturing draws, so differences
    between candidates are not noise), vectorised over candidates × boards × corners
    for candidates that share network, transistor and piece structure
    (:mod:`stockbias.analysis.mc_candidates`).  First ``SCREEN_SAMPLES`` boards each (stream 1):
    a candidate whose one-sided Clopper–Pearson *upper* bound is below the target at
    confidence 1 − α/m (α = 1 − yield_confidence, m the candidates screened; Bonferroni)
    is out — with probability ≥ 1 − α no candidate that meets the target is dropped.
    The rest are judged in rank order on ``samples`` fresh boards (stream 2): a design
    qualifies when its one-sided lower bound at ``yield_confidence`` meets the target.

Final check
    Each chosen design is checked again with the path ``check`` uses
    (:func:`stockbias.analysis.check.analyze_stage`) on an independent stream (3); a design
    whose lower bound there falls below the target is dropped and reported.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from ..analysis.check import CheckResult
from ..analysis.statistics import TRUNCATION_SIGMAS, YieldResult
from ..assign import ResolvedResistor, resolve_resistor
from ..job import Job
from ..parts import Inventory, Transistor
from .design import design
from .design_result import Design, DesignResult
from .yield_evidence import (
    SCREEN_SAMPLES,
    STREAM_CHECK,
    YIELD_SAMPLES,
    Trial,
    clopper,
    final_check,
    judge,
    plain_job,
    screen_counts,
    upper_screen,
)

__all__ = ["LEVELS", "SCREEN_SAMPLES", "YIELD_SAMPLES", "YieldDesign", "YieldDesignResult",
           "box_mass", "shrunk_inventory", "yield_design"]

#: (resistor tolerance factor k, hFE/VBE range fraction f) of each box searched; the first
#: is the job's own box.
LEVELS: tuple[tuple[float, float], ...] = ((1.0, 1.0), (2.0 / 3, 0.99), (1.5 / 3, 0.97))
#: Designs asked of each box's worst-case search at least (--top asks more).
PER_LEVEL = 5

Progress = Callable[[str, float], None]


def _phi(x: float) -> float:
    return 0.5 * (1.0 + math.erf(x / math.sqrt(2.0)))


def box_mass(k: float, f: float, pieces: int) -> float:
    """Probability that a drawn board falls inside the sub-box (k, f): resistor pieces each
    within ±k·tol of a 3σ-truncated normal, hFE and VBE each in the central fraction f of a
    uniform range (ICBO and tempcos keep their full ranges), all drawn independently."""
    s = TRUNCATION_SIGMAS
    per_piece = (2 * _phi(s * k) - 1) / (2 * _phi(s) - 1)
    return min(1.0, per_piece ** pieces * f * f)


def shrunk_inventory(inventory: Inventory, k: float, f: float) -> Inventory:
    """The shelf with every resistor's tolerance × k and every transistor's hFE and VBE
    ranges narrowed about their centres to the fraction f (everything else as it is)."""
    if k == 1.0 and f == 1.0:
        return inventory

    def narrow(lo: float, hi: float) -> tuple[float, float]:
        mid, half = (lo + hi) / 2, (hi - lo) / 2 * f
        return mid - half, mid + half

    rs = tuple(replace(r, tolerance_pct=r.tolerance_pct * k) for r in inventory.resistors)
    qs = []
    for q in inventory.transistors:
        h0, h1 = narrow(q.hfe_min, q.hfe_max)
        v0, v1 = narrow(q.vbe_min, q.vbe_max)
        qs.append(replace(q, hfe_min=h0, hfe_max=h1, vbe_min=v0, vbe_max=v1))
    return replace(inventory, resistors=rs, transistors=tuple(qs))


@dataclass
class _Candidate:
    """A design from one box, with its parts resolved on the real shelf."""

    design: Design
    level: int
    mass: float
    parts: dict[str, ResolvedResistor]
    transistor: Transistor
    key: tuple[float, ...]
    screen: YieldResult | None = None
    screen_high: float | None = None
    judged: YieldResult | None = None
    judged_low: float | None = None

    @property
    def trial(self) -> Trial:
        return Trial(self.parts, self.transistor, self.design.topology)


@dataclass
class YieldDesign:
    """A chosen design and the evidence for it."""

    rank: int
    design: Design
    evidence: str             # "worst case", "sub-box" or "sampled"
    box: tuple[float, float]
    box_mass: float
    judged: YieldResult | None
    judged_low: float | None
    check: CheckResult
    check_low: float

    def to_dict(self) -> dict[str, object]:
        d = self.design.to_dict()
        d["rank"] = self.rank
        d["check"] = self.check.to_dict()
        d["yield_evidence"] = {
            "kind": self.evidence, "box_resistor_factor": self.box[0],
            "box_range_fraction": self.box[1], "box_mass": self.box_mass,
            "judged": None if self.judged is None else {
                **self.judged.to_dict(), "yield_low_one_sided": self.judged_low},
            "final_check": {**self.check.monte_carlo.to_dict(),  # type: ignore[union-attr]
                            "yield_low_one_sided": self.check_low, "stream": STREAM_CHECK},
        }
        return d


@dataclass
class YieldDesignResult:
    """What the yield search found and on what evidence."""

    status: str
    designs: list[YieldDesign]
    objectives: tuple[str, ...]
    yield_min: float
    confidence: float
    samples: int
    worst_case: DesignResult
    seconds: float
    stats: dict[str, object] = field(default_factory=dict)
    assumptions: list[str] = field(default_factory=list)
    explanation: str | None = None

    @property
    def found(self) -> bool:
        return bool(self.designs)

    def to_dict(self) -> dict[str, object]:
        wc = self.worst_case.designs[0] if self.worst_case.designs else None
        return {
            "status": self.status, "mode": "yield", "yield_min": self.yield_min,
            "yield_confidence": self.confidence, "samples_per_design": self.samples,
            "screen_samples": SCREEN_SAMPLES, "solve_seconds": self.seconds,
            "objectives": list(self.objectives),
            "designs": [d.to_dict() for d in self.designs],
            "worst_case_optimum": None if wc is None else {
                "cost": wc.cost, "part_count": wc.part_count, "topology": wc.topology,
                "transistor": wc.transistor.part_id, "status": self.worst_case.status},
            "stats": self.stats, "assumptions": self.assumptions,
            "explanation": self.explanation,
        }


def _text(p: ResolvedResistor) -> str:
    ids = [r.part_id for r in p.parts]
    return ids[0] if len(ids) == 1 else ("+" if p.arrangement == "series" else "|").join(ids)


def _key(d: Design, objectives: tuple[str, ...], level: int) -> tuple[float, ...]:
    cols = {"cost": d.cost_micro, "part_count": d.part_count,
            "distinct_values": d.distinct_values, "bom_lines": d.bom_lines,
            "ic_margin": -d.ic_margin, "changes": 0}
    # among equal objectives, the design shown on the wider box first
    return (*(float(cols[o]) for o in objectives), float(level))


def _network(d: Design) -> tuple[object, ...]:
    return (d.topology, d.transistor.part_id,
            tuple(sorted((r, _text(p)) for r, p in d.check.parts.items() if r != d.free_role)))


def yield_design(job: Job, inventory: Inventory, *, top: int | None = None,
                 time_limit_s: float | None = None, samples: int = YIELD_SAMPLES,
                 executor: object | None = None, progress: Progress | None = None,
                 levels: tuple[tuple[float, float], ...] = LEVELS) -> YieldDesignResult:
    """The best designs (by the job's objectives) whose yield meets ``yield_min`` at the job's
    ``yield_confidence``; see the module docstring for the candidates, screens and evidence.

    Parameters
    ----------
    job : Job
        One stage with ``[target] yield_min``.
    inventory : Inventory
    top : int, optional
        How many designs (default: the job's).
    time_limit_s : float, optional
        Seconds for the whole search (default: the job's); the box searches share it.
    samples : int
        Boards per candidate when judged, and in the final check.
    executor : stockbias.executor.Executor, optional
        Where the candidates' Monte Carlo runs (default: this process).
    """
    import scipy.special
    import scipy.stats  # noqa: F401

    from ..executor import InProcess

    t0 = time.monotonic()
    stage = job.stage
    target = stage.target
    if target.yield_min is None:
        raise ValueError("yield_design needs a job with [target] yield_min")
    y_min, conf = float(target.yield_min), float(target.yield_confidence)
    top = job.search.top if top is None else int(top)
    limit = job.search.time_limit_s if time_limit_s is None else float(time_limit_s)
    ex = executor if executor is not None else InProcess()
    # the box searches judge the worst case on their box; the yield is judged here
    plain = plain_job(job)
    per_level = max(PER_LEVEL, top)
    cands: dict[tuple[object, ...], _Candidate] = {}
    worst: DesignResult | None = None
    levels_run: list[dict[str, object]] = []
    amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    for i, (k, f) in enumerate(levels):
        left = limit - (time.monotonic() - t0)
        if i > 0 and left < 0.5:
            break
        if progress is not None:
            progress(f"box {i + 1} of {len(levels)}: worst-case search", i / (len(levels) + 2))
        share = max(0.5, 0.6 * left / (len(levels) - i))
        res = design(plain, shrunk_inventory(inventory, k, f), top=per_level,
                     time_limit_s=share, _explain=False)
        if i == 0:
            worst = res
        levels_run.append({"resistor_factor": k, "range_fraction": f,
                           "status": res.status, "designs": len(res.designs)})
        for d in res.designs:
            net = _network(d)
            if net in cands:
                continue   # found on a wider box already: that evidence is stronger
            parts = {r: resolve_resistor(r, _text(p), inventory,
                                         job.build.default_tolerance_pct, source="search",
                                         ambient=amb) for r, p in d.check.parts.items()}
            q = inventory.find_transistor(d.transistor.part_id)
            assert q is not None
            pieces = sum(max(1, len(p.pieces)) for p in parts.values())
            mass = 1.0 if i == 0 else box_mass(k, f, pieces)
            cands[net] = _Candidate(d, i, mass, parts, q, _key(d, plain.search.objectives, i))
    assert worst is not None
    order = sorted(cands.values(), key=lambda c: c.key)
    proven = [c for c in order if c.mass >= y_min]
    sampled = [c for c in order if c.mass < y_min]
    # screening pass: common random numbers (stream 1), Bonferroni-adjusted upper bounds
    m = len(sampled)
    alpha = 1.0 - conf
    screened_out = 0
    # Monte Carlo time per candidate and board, s (from the screen; a guess before it)
    per_board = 2e-6
    not_screened = 0
    if m and time.monotonic() - t0 > limit:
        not_screened = m            # the box searches used the time: nothing is sampled
    elif m:
        if progress is not None:
            progress(f"screening {m} candidates × {SCREEN_SAMPLES:,} boards",
                     len(levels) / (len(levels) + 2))

        def screened(k: int) -> None:
            if progress is not None:
                progress(f"screened {k} of {m} candidates × {SCREEN_SAMPLES:,} boards",
                         len(levels) / (len(levels) + 2))

        t_screen = time.monotonic()
        counts = screen_counts(ex, job, [c.trial for c in sampled], done=screened)
        per_board = max(per_board, (time.monotonic() - t_screen) / (m * SCREEN_SAMPLES))
        highs, _each = upper_screen(counts, conf)
        for c, (k_pass, n), high in zip(sampled, counts, highs, strict=True):
            c.screen = YieldResult(n, k_pass, k_pass / n, *clopper(k_pass, n))
            c.screen_high = high
            if c.screen_high < y_min:
                screened_out += 1
    alive = [c for c in order if c.mass >= y_min or
             (c.screen_high is not None and c.screen_high >= y_min)]
    chosen: list[YieldDesign] = []
    dropped_final: list[str] = []
    judged = 0
    seen_nets: set[tuple[object, ...]] = set()
    cut = 0
    for i, c in enumerate(alive):
        if len(chosen) >= top:
            break
        # the time limit holds: the rest is not judged, and no judgement or final check
        # starts that the time left (by the Monte Carlo rate so far) cannot finish
        runs = 1 if c.mass >= y_min else 2
        if limit - (time.monotonic() - t0) < runs * per_board * samples:
            cut = len(alive) - i
            break
        t_mc = time.monotonic()
        if c.mass < y_min:
            if progress is not None:
                progress(f"judging candidate {i + 1} of {len(alive)} on {samples:,} boards",
                         (len(levels) + 2 * i / len(alive)) / (len(levels) + 2))
            judged += 1
            c.judged, c.judged_low = judge(ex, job, c.trial, samples, conf)
            if c.judged_low < y_min:
                continue
        if progress is not None:
            # the bar moves on through the candidates, never back
            progress(f"final check of design {len(chosen) + 1} on fresh boards",
                     (len(levels) + 2 * (i + 0.5) / len(alive)) / (len(levels) + 2))
        check, check_low = final_check(job, c.trial, samples, conf)
        per_board = max(per_board, (time.monotonic() - t_mc) / (runs * samples))
        mc = check.monte_carlo
        assert mc is not None
        if check_low < y_min:
            dropped_final.append(f"{c.design.topology} {c.transistor.part_id} "
                                 f"{', '.join(f'{r}={_text(p)}' for r, p in c.parts.items())}: "
                                 f"final check {100 * mc.yield_.yield_:.3f} %, one-sided lower "
                                 f"bound {100 * check_low:.3f} %")
            continue
        seen_nets.add(_network(c.design))
        evidence = "worst case" if c.level == 0 else (
            "sub-box" if c.mass >= y_min else "sampled")
        # the margin of the design on the real shelf (a sub-box design's search margin is
        # that of its sub-box, which the full box's worst case may overstep)
        chosen.append(YieldDesign(len(chosen) + 1, replace(c.design, check=check,
                                                           rank=len(chosen) + 1,
                                                           ic_margin=check.ic_margin),
                                  evidence, levels[c.level], c.mass, c.judged, c.judged_low,
                                  check, check_low))
    seconds = time.monotonic() - t0
    status = "feasible" if chosen else "unknown"
    stats: dict[str, object] = {
        "boxes": levels_run, "candidates": len(order), "proven_without_sampling": len(proven),
        "sampled_candidates": m, "screened_out": screened_out,
        "screen_confidence_each": None if not m else 1.0 - alpha / m,
        "judged": judged, "dropped_on_final_check": dropped_final,
        "not_judged_time_limit": cut, "not_screened_time_limit": not_screened,
        "executor": getattr(ex, "name", "this process"),
    }
    result = YieldDesignResult(status, chosen, plain.search.objectives, y_min, conf, samples,
                               worst, seconds, stats)
    result.assumptions = _assumptions(worst, chosen)
    if cut:
        result.assumptions.append(f"time limit reached: {cut} candidates were not judged; a "
                                  "longer --time-limit may find cheaper designs")
    if not_screened:
        result.assumptions.append(f"time limit reached: {not_screened} candidates that need "
                                  "sampling were neither screened nor judged")
    if not chosen:
        result.explanation = (
            f"no candidate was shown to reach {100 * y_min:g} % at {100 * conf:g} % "
            f"confidence: {len(order)} candidates from {len(levels_run)} boxes, "
            f"{screened_out} screened out, {judged} judged on {samples:,} boards"
            + ("; " + "; ".join(dropped_final) if dropped_final else ""))
        timed = _time_limit_cause(levels_run, len(levels), cut + not_screened)
        if timed:
            result.explanation = timed + "; " + result.explanation
    return result


def _time_limit_cause(levels_run: list[dict[str, object]], n_levels: int,
                      not_judged: int) -> str:
    """What the time limit cut in a yield search that found no design ("" when nothing)."""
    cut = [i + 1 for i, b in enumerate(levels_run) if b["status"] in ("unknown", "feasible")]
    parts = []
    if cut:
        parts.append(f"the time limit cut the worst-case search of box"
                     f"{'es' if len(cut) > 1 else ''} {', '.join(map(str, cut))} of "
                     f"{n_levels}")
    if len(levels_run) < n_levels:
        parts.append(f"{n_levels - len(levels_run)} of {n_levels} boxes were not searched")
    if not_judged:
        parts.append(f"{not_judged} candidates were not sampled")
    if not parts:
        return ""
    return ("; ".join(parts) + " (raise [search] time_limit_s or --time-limit)")


def _assumptions(worst: DesignResult, chosen: list[YieldDesign]) -> list[str]:
    out: list[str] = []
    for d in chosen:
        for a in d.check.assumptions:
            if a not in out:
                out.append(a)
    out.append("candidates: the top designs of the worst-case search on the job's box and on "
               "sub-boxes (resistor tolerances × k, hFE and VBE ranges narrowed to a "
               "fraction f); designs outside these families are not searched, so the ranking "
               "is the best among the candidates, not a proof over the shelf")
    return out
