"""The evidence a yield verdict rests on, shared by every search that judges a candidate by
Monte Carlo instead of its worst corner (``design`` and ``substitute`` with ``[target]
yield_min``).

A *trial* is one set of parts for one stage (resolved resistors, a transistor, a network).
Three independent families of random streams are used, so that no verdict is judged on the
boards that picked it:

* stream 1 (:data:`STREAM_SCREEN`): the screening pass, ``SCREEN_SAMPLES`` common boards for
  every trial (common random numbers: trials of one structure see the very same draws,
  vectorised over trials × boards × corners by :mod:`stockbias.analysis.mc_candidates`).  A
  trial whose one-sided Clopper–Pearson *upper* bound is below the target at confidence
  1 − α/m (α = 1 − confidence, m trials screened; Bonferroni) is out: with probability at
  least 1 − α no trial that meets the target is dropped.
* stream 2 (:data:`STREAM_JUDGE`): a trial is judged on fresh boards; it qualifies when its
  one-sided lower bound at the confidence meets the target.
* stream 3 (:data:`STREAM_CHECK`): the final check of a chosen trial, by the path ``check``
  uses (:func:`stockbias.analysis.check.analyze_stage`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace

from ..analysis.check import CheckResult, analyze_stage, build_spec
from ..analysis.constraints import stage_limits
from ..analysis.statistics import YieldResult, clopper_pearson, one_sided_bounds
from ..assign import ResolvedResistor
from ..job import Job
from ..parts import Transistor

__all__ = ["SCREEN_SAMPLES", "STREAM_CHECK", "STREAM_JUDGE", "STREAM_SCREEN", "YIELD_SAMPLES",
           "Trial", "clopper", "final_check", "judge", "plain_job", "sample_tasks",
           "screen_counts", "upper_screen", "yield_result"]

#: Boards per candidate in the screening pass (stream 1).
SCREEN_SAMPLES = 2_000
#: Boards per candidate when it is judged (stream 2) and in the final check (stream 3).
YIELD_SAMPLES = 20_000
STREAM_SCREEN, STREAM_JUDGE, STREAM_CHECK = 1, 2, 3


@dataclass(frozen=True)
class Trial:
    """One set of parts for the job's stage: what a Monte Carlo run samples."""

    parts: Mapping[str, ResolvedResistor]
    transistor: Transistor
    topology: str | None = None


def plain_job(job: Job) -> Job:
    """The job without its yield target: what the worst-case searches and checks judge."""
    st = job.stage
    return replace(job, stages=(replace(st, target=replace(st.target, yield_min=None)),))


def clopper(k: int, n: int) -> tuple[float, float]:
    """Two-sided 95 % Clopper–Pearson interval (what ``check`` reports)."""
    return clopper_pearson(k, n, 0.95)


def yield_result(k: int, n: int) -> YieldResult:
    """Counts as a :class:`YieldResult` with the two-sided 95 % interval."""
    return YieldResult(n, k, k / n, *clopper(k, n))


def sample_tasks(job: Job, trials: Sequence[Trial], n: int, stream: int) -> list[tuple]:
    """One picklable Monte Carlo task per trial: (spec, limits, tempcos, n, seed, stream,
    histogram ranges)."""
    stage = job.stage
    vcc = job.supply.volts * (1 + job.supply.tolerance_pct / 100)
    ranges = {"ic": (0.0, 2 * stage.target.ic_max), "vce": (0.0, vcc)}
    out = []
    for t in trials:
        spec = build_spec(job, stage, t.parts, t.transistor, t.topology)
        limits = stage_limits(job, stage, spec, {r: p.rating for r, p in t.parts.items()})
        tempcos = {r: p.tempco_ppm for r, p in t.parts.items()}
        out.append((spec, limits, tempcos, n, job.search.seed, stream, ranges))
    return out


def sample_task(task: tuple) -> tuple[int, int]:
    """Monte Carlo of one trial (module level: it runs in worker processes too)."""
    from ..analysis.montecarlo import monte_carlo

    spec, limits, tempcos, n, seed, stream, ranges = task
    mc = monte_carlo(spec, limits, n, seed, tempco_ppm=tempcos, stream=stream, ranges=ranges)
    return mc.yield_.passed, mc.yield_.samples


def group_task(task: tuple) -> list[int]:
    """Pass counts of one group of trials on common boards (runs in workers too)."""
    from ..analysis.mc_candidates import passing_counts

    specs, limits, tempcos, n, seed, stream = task
    return passing_counts(specs, limits, tempcos, n, seed, stream)


def screen_counts(ex: object, job: Job, trials: Sequence[Trial], n: int = SCREEN_SAMPLES,
                  stream: int = STREAM_SCREEN, done: Callable[[int], None] | None = None
                  ) -> list[tuple[int, int]]:
    """(passed, samples) of every trial on the screening boards: trials that share network,
    transistor and piece structure are vectorised together (trials × boards × corners), one
    executor task per group.  ``done(k)``: k trials screened so far (after each group)."""
    from ..analysis.mc_candidates import group_key

    tasks = sample_tasks(job, trials, n, stream)
    groups: dict[object, list[int]] = {}
    for i, (spec, limits, tempcos, *_rest) in enumerate(tasks):
        key = group_key(spec, limits, tempcos)
        groups.setdefault(("alone", i) if key is None else key, []).append(i)
    members = list(groups.values())
    work = [([tasks[i][0] for i in g], [tasks[i][1] for i in g], [tasks[i][2] for i in g],
             n, job.search.seed, stream) for g in members]
    out: list[tuple[int, int]] = [(0, 0)] * len(trials)
    finished = 0
    for g, counts in zip(members, ex.imap(group_task, work), strict=True):  # type: ignore[attr-defined]
        for i, k in zip(g, counts, strict=True):
            out[i] = (k, n)
        finished += len(g)
        if done is not None:
            done(finished)
    return out


def upper_screen(counts: Sequence[tuple[int, int]], confidence: float
                 ) -> tuple[list[float], float]:
    """The one-sided upper bound of each screened trial's yield at the Bonferroni-adjusted
    confidence 1 − α/m, and that confidence (m = len(counts), α = 1 − confidence)."""
    m = len(counts)
    each = 1.0 - (1.0 - confidence) / max(m, 1)
    return [one_sided_bounds(k, n, each)[1] for k, n in counts], each


def judge(ex: object, job: Job, trial: Trial, n: int, confidence: float,
          stream: int = STREAM_JUDGE) -> tuple[YieldResult, float]:
    """One trial on ``n`` fresh boards: its yield and one-sided lower bound."""
    (k, m), = ex.map(sample_task, sample_tasks(job, [trial], n, stream))  # type: ignore[attr-defined]
    return yield_result(k, m), one_sided_bounds(k, m, confidence)[0]


def final_check(job: Job, trial: Trial, samples: int, confidence: float
                ) -> tuple[CheckResult, float]:
    """The path ``check`` uses, on the independent stream 3: the analysis and the one-sided
    lower bound of its Monte Carlo yield."""
    res = analyze_stage(job, job.stage, trial.parts, trial.transistor, samples=samples,
                        seed=job.search.seed, topology=trial.topology, stream=STREAM_CHECK)
    mc = res.monte_carlo
    assert mc is not None
    return res, one_sided_bounds(mc.yield_.passed, mc.yield_.samples, confidence)[0]
