"""Returned designs pass `check`, a dense Monte Carlo never breaks a hard limit, and the
pairs, "any" and exponential paths return re-verified designs."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from stockbias.analysis.check import analyze_stage
from stockbias.job import load_job, parse_job
from stockbias.parts import Inventory
from stockbias.search.design import design
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"


@pytest.fixture(scope="module")
def shelf() -> Inventory:
    return read_inventory(SAMPLES / "workshop_drawers.csv")


@pytest.fixture(scope="module")
def job():
    return load_job(ROOT / "tests" / "data" / "line_driver_dc.toml")  # DC limits only


def test_every_design_passes_check_and_dense_monte_carlo(job, shelf):
    result = design(job, shelf, top=3)
    assert result.status == "optimal" and len(result.designs) == 3
    assert result.stats["rejected_on_verification"] == 0
    for d in result.designs:
        res = analyze_stage(job, job.stage, d.check.parts, d.transistor, samples=20000,
                            seed=7, topology=d.topology)
        assert res.ok
        # every drawn board passes every hard limit at every environment corner
        # (source: the worst-case bounds contain every board; DESIGN §2)
        assert res.monte_carlo.yield_.yield_ == 1.0
        assert sum(res.monte_carlo.failing.values()) == 0


def test_deterministic(job, shelf):
    a = design(job, shelf, top=3).to_dict()
    b = design(job, shelf, top=3).to_dict()
    strip = [{k: v for k, v in d.items()} for d in a["designs"]]
    assert [d["parts"] for d in strip] == [d["parts"] for d in b["designs"]]


def test_any_topology_and_pairs(job, shelf):
    any_job = job.with_topology("any")
    r = design(any_job, shelf, top=2)
    assert r.status == "optimal" and r.designs
    plain = design(job, shelf, top=1).designs[0]
    # "any" searches a superset: its best is at least as good (source: set inclusion)
    assert r.designs[0].cost_micro <= plain.cost_micro
    few = Inventory(shelf.path, shelf.resistors[::2], shelf.transistors[:2])
    pair_job = replace(job, build=replace(job.build, allow_pairs=True),
                       search=replace(job.search, objectives=("ic_margin", "cost")))
    p = design(pair_job, few, top=1)
    single = design(replace(job, search=pair_job.search), few, top=1)
    assert p.designs and p.designs[0].check.ok
    # pairs only add candidates, so the best margin cannot get worse
    assert p.designs[0].ic_margin >= single.designs[0].ic_margin - 1e-6


def test_exponential_model_small_shelf(job, shelf):
    values = ("MF-2K49", "CF-4K7", "CF-680R", "CF-1K0", "CF-10K", "CF-470R")
    small = Inventory(shelf.path, tuple(r for r in shelf.resistors if r.part_id in values),
                      tuple(replace(q, theta_ja=None) for q in shelf.transistors[:1]))
    st = job.stage
    stage = replace(st, target=replace(st.target, ic_max=1.9e-3))
    exp_job = replace(job, search=replace(job.search, model="exponential"), stages=(stage,))
    r = design(exp_job, small, top=1)
    assert r.status == "optimal" and r.designs
    for d in r.designs:
        assert d.check.ok and d.check.model == "exponential"
    # the whole drawer: searched with interval cuts (no assignment limit), proven optimal
    full = design(exp_job, shelf, top=1)
    assert full.status == "optimal" and full.designs
    assert all(d.check.ok and d.check.model == "exponential" for d in full.designs)


def test_board_file_goes_to_the_board_search(shelf):
    """A board is designed as a whole (stockbias.search.board), every stage re-verified."""
    text = """
[supply]
volts = 12
[[stage]]
name = "a"
topology = "divider"
[stage.target]
ic = "1 mA"
ic_window_pct = 20
[[stage]]
name = "b"
topology = "divider"
[stage.target]
ic = "2 mA"
ic_window_pct = 20
[search]
time_limit_s = 600  # the proof, not the clock, is under test (a busy machine hit 20 s)
"""
    from stockbias.search.board import BoardResult

    result = design(parse_job(text), shelf, top=1)
    assert isinstance(result, BoardResult)
    assert result.status == "optimal"
    assert [s.name for s in result.designs[0].stages] == ["a", "b"]
    assert all(s.check.ok for s in result.designs[0].stages)
