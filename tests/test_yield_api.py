"""The library API on a job with a yield target: ``stockbias.design`` routes it to the yield
search as the ``design`` command does, and the worst-case search's explanation of a job it
cannot meet no longer needs a check without Monte Carlo."""

from __future__ import annotations

import pytest
from test_yield_search import HEADER, JOB, PRECISE, TRANSISTOR, WIDE, independent_yield

import stockbias
from stockbias.search.design_result import DesignResult
from stockbias.search.yield_search import YieldDesignResult


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory):
    d = tmp_path_factory.mktemp("yield_api")
    (d / "wide.csv").write_text(HEADER + WIDE + TRANSISTOR)
    (d / "both.csv").write_text(HEADER + PRECISE + WIDE + TRANSISTOR)
    (d / "job.toml").write_text(JOB.format(window=25))
    (d / "plain.toml").write_text(JOB.format(window=25).replace("yield_min = 95\n", ""))
    return d


def test_design_routes_a_yield_job_to_the_yield_search(files) -> None:
    job = stockbias.load_job(files / "job.toml")
    res = stockbias.design(job, stockbias.load_inventory(files / "wide.csv"))
    assert isinstance(res, YieldDesignResult)
    assert res.worst_case.designs == [] and res.status == "feasible" and res.designs
    for d in res.designs:
        # the claim (one-sided lower bound at 95 % on fresh boards) and an independent
        # Monte Carlo written in the tests agree that the target is met
        assert d.check_low >= 0.95
        values = {role: (p.value, p.tol) for role, p in d.design.check.parts.items()}
        assert independent_yield(values) >= 0.95
    assert res.to_dict()["mode"] == "yield"


def test_design_of_a_job_without_a_yield_target_is_the_worst_case_search(files) -> None:
    job = stockbias.load_job(files / "plain.toml")
    res = stockbias.design(job, stockbias.load_inventory(files / "both.csv"), top=1)
    assert isinstance(res, DesignResult) and res.designs
    assert res.designs[0].check.ok and res.designs[0].check.monte_carlo is None


def test_the_worst_case_search_explains_a_yield_job_it_cannot_meet(files) -> None:
    # Before: explain analysed the closest design with samples=0 and the job's yield_min
    # made that an InputError.  The closest design is now judged with Monte Carlo too.
    from stockbias.search.design import design

    job = stockbias.load_job(files / "job.toml")
    res = design(job, stockbias.load_inventory(files / "wide.csv"), time_limit_s=30)
    assert res.designs == [] and res.explanation is not None
    ex = res.explanation.to_dict()
    # the closest design is named with what it misses against the original job
    assert ex["closest"] is not None and ex["closest"]["transistor"] == "TQ-1"
    assert ex["misses"] and all(not m["ok"] for m in ex["misses"])
    assert ex["binding"] in {m["name"] for m in ex["misses"]}


def test_the_yield_search_reports_the_candidates_and_boards_done(files) -> None:
    # what the progress bar shows: each box search, the screening count of candidates
    # (k of m, 2,000 boards each), each judgement with its board count; fractions never fall
    seen: list[tuple[str, float]] = []
    job = stockbias.load_job(files / "job.toml")
    res = stockbias.design(job, stockbias.load_inventory(files / "both.csv"),
                           progress=lambda text, frac: seen.append((text, frac)))
    texts = [t for t, _f in seen]
    m = res.stats["sampled_candidates"]
    assert m > 0 and f"screened {m} of {m} candidates × 2,000 boards" in texts
    assert any(t.startswith("box 1 of 3") for t in texts)
    assert any(t.startswith("judging candidate") and t.endswith("on 20,000 boards")
               for t in texts)
    fracs = [f for _t, f in seen]
    assert fracs == sorted(fracs) and fracs[-1] < 1
