"""Bounded memory and one time limit for the whole design search.

* Exactness of the row ranges and groups: the same job on the same generated shelf,
  searched with a row budget of a few hundred rows (many ranges of R1 / RB, many groups,
  κ carried between them) and with the default budget, returns the same designs.
  Source of the expected values: the default-budget run, itself proven equal to an
  exhaustive search in tests/test_search_exhaustive.py.
* Honesty of a cut-short run: a deadline that expires after N checks (no clock involved)
  stops the search at a reproducible point; the status is then ``feasible`` with verified
  designs or ``unknown`` without any, never ``optimal``; the result says which rows were
  searched; no design offered ranks above the proven optimum (from the uncut run).
"""

from __future__ import annotations

import numpy as np
import pytest

from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.deadline import Deadline
from stockbias.search.design import design
from stockbias.search.prepass import PLANS, row_cuts, row_slices
from stockbias.search.scan_coverage import Coverage

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "2 mA"
ic_window_pct = {window}
vce_min = "3 V"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 10
[search]
topology = "{topology}"
objectives = {objectives}
time_limit_s = 600
top = 3
"""

SMALL = 1 << 9          # rows built at once in the chunked runs (groups of 16 × that)


def generated_shelf(lines: int, transistors: int, seed: int) -> Inventory:
    """Log-uniform resistor values 10 Ω … 1 MΩ and NPN rows in hFE bins (invented data)."""
    rng = np.random.default_rng(seed)
    values = np.sort(np.round(10 ** rng.uniform(1.0, 6.0, lines), 3))
    rs = tuple(Resistor(f"R{i:04d}", float(v), float(rng.choice([1.0, 5.0])),
                        float(rng.choice([0.125, 0.25])), 100.0, int(rng.choice([15, 2000])),
                        float(rng.choice([0.001, 0.002, 0.003])), line=i + 2)
               for i, v in enumerate(values))
    bins = ((60.0, 120.0), (100.0, 300.0), (200.0, 450.0))
    qs = []
    for j in range(transistors):
        lo, hi = bins[int(rng.integers(len(bins)))]
        qs.append(Transistor(f"Q{j:02d}", "NPN", lo, hi, 45.0, 0.2, 0.5, vbe_min=0.58,
                             vbe_max=float(rng.choice([0.70, 0.74])), qty=100,
                             unit_cost=float(rng.choice([0.02, 0.03])), line=lines + 5 + j))
    return Inventory("<generated>", rs, tuple(qs))


def job_for(topology: str = "divider", window: float = 15,
            objectives: str = '["cost", "part_count", "distinct_values", "ic_margin"]'):
    return parse_job(JOB.format(topology=topology, window=window, objectives=objectives),
                     "<test>")


def signature(result) -> tuple:
    """What a user sees of each ranked design: network, transistor, parts per role, keys."""
    return result.status, [
        (d.topology, d.transistor.part_id,
         tuple(sorted((role, tuple(p.part_ids)) for role, p in d.check.parts.items())),
         d.cost_micro, d.part_count, d.distinct_values, d.bom_lines, d.ic_margin)
        for d in result.designs]


@pytest.mark.parametrize(("topology", "objectives", "lines", "transistors", "budget"), [
    ("divider", '["cost", "part_count", "distinct_values", "ic_margin"]', 120, 6, SMALL),
    ("divider", '["distinct_values", "ic_margin", "cost"]', 90, 5, SMALL),
    ("any", '["cost", "ic_margin"]', 60, 4, 1 << 2),
])
def test_small_row_budget_gives_the_same_designs(topology, objectives, lines, transistors,
                                                 budget):
    inv = generated_shelf(lines, transistors, seed=3)
    job = job_for(topology, objectives=objectives)
    reference = design(job, inv)                      # default budget: one range, one group
    chunked = design(job, inv, row_budget=budget)
    assert reference.status == "optimal" and reference.designs
    assert signature(chunked) == signature(reference)
    # the chunked run really did build and search the rows in many pieces
    assert chunked.stats["row_units"] > 4 * reference.stats["row_units"]
    assert chunked.stats["row_groups"] > reference.stats["row_groups"]


class _Len:
    """A stand-in candidate table with only a length (for row_slices)."""

    def __init__(self, n: int):
        self.n = n

    def __len__(self) -> int:
        return self.n


def test_row_slices_cover_every_row_once_within_the_budget():
    # exhaustive check written here: every first-role index appears in exactly one range
    for n1, n2, budget in [(7, 5, 10), (120, 120, 512), (3, 1000, 10), (50, 1, 8)]:
        spans = row_slices("divider", {"R1": _Len(n1), "R2": _Len(n2)}, budget)
        covered = [i for a, z in spans for i in range(a, z)]
        assert covered == list(range(n1))
        assert all((z - a) * n2 <= max(budget, n2) for a, z in spans)


def test_row_cuts_of_a_range_equal_the_same_rows_of_the_whole_grid():
    inv = generated_shelf(40, 2, seed=5)
    job = job_for()
    from stockbias.search.candidates import build_shelf

    shelf = build_shelf(job, inv)
    cands = {"R1": shelf.single, "R2": shelf.single, "RE": shelf.single,
             "RC": shelf.single}
    q = inv.transistors[0]
    whole = row_cuts(job, job.stage, "divider", q, cands)
    n2 = len(cands["R2"])
    for a, z in row_slices("divider", cands, 300):
        part = row_cuts(job, job.stage, "divider", q, cands, first=(a, z))
        sl = slice(a * n2, z * n2)
        for r in PLANS["divider"].enumerated:
            np.testing.assert_array_equal(part.grid[r], whole.grid[r][sl])
        np.testing.assert_array_equal(part.i0, whole.i0[sl])
        np.testing.assert_array_equal(part.i1, whole.i1[sl])
        np.testing.assert_allclose(part.a_thr, whole.a_thr[sl], rtol=0, atol=0)


def _lex(d) -> tuple:
    return (d.cost_micro, d.part_count, d.distinct_values, -round(d.ic_margin * 1e6))


def test_a_run_cut_after_n_checks_is_honest():
    inv = generated_shelf(120, 6, seed=3)
    job = job_for()
    full = design(job, inv, row_budget=SMALL)
    assert full.status == "optimal" and full.stats["prepass_cut"] is None
    best = _lex(full.designs[0])
    seen = set()
    for n in (1, 10, 60, 100, 150, 200):
        r = design(job, inv, row_budget=SMALL, deadline=Deadline.after_checks(n))
        cut = r.stats["prepass_cut"]
        if cut is None:                      # finished before the N-th check
            assert r.status == "optimal"
            continue
        assert r.status in ("feasible", "unknown")
        assert (r.status == "unknown") == (not r.designs)
        assert cut in r.assumptions
        assert cut.startswith("the time limit cut the pre-pass, so the status is not a proof")
        assert "R1 candidates" in cut and "of 120" in cut
        for d in r.designs:
            assert d.check.ok                                  # re-verified
            assert _lex(d) >= best                             # never better than optimal
        seen.add(r.status)
    assert seen == {"feasible", "unknown"}                     # both outcomes exercised


def test_a_deadline_expired_before_the_search_searches_nothing():
    inv = generated_shelf(60, 3, seed=4)
    r = design(job_for(), inv, row_budget=SMALL, deadline=Deadline.after_checks(1))
    assert r.status == "unknown" and not r.designs
    assert "divider: none of 60 R1 candidates searched" in r.stats["prepass_cut"]
    assert r.bound == {}                         # nothing is known about the unsearched rows
    assert r.explanation is not None and r.explanation.binding == "time_limit"


def test_coverage_message_names_the_searched_rows():
    cov = Coverage(transistors=500)
    values = [float(10 + i) for i in range(50_000)]
    cov.start("divider", "R1", values)
    cov.searched("divider", (2280, 2300), 499)           # range done with every transistor
    cov.searched("divider", (2300, 2320), 119)           # next range: 120 transistors
    msg = cov.message(["divider", "collector_feedback"])
    assert ("divider: R1 candidates 1–2,300 of 50,000 (values to 2.31 kΩ) searched with "
            "every transistor, 2,301–2,320 with 120 of 500 transistors") in msg
    assert "collector_feedback not reached" in msg
    cov.scan_complete = True
    assert "not proven best" in cov.message(["divider"])


def test_deadline_with_an_injected_clock():
    now = [100.0]
    d = Deadline(5.0, clock=lambda: now[0])
    assert not d.expired() and d.remaining() == pytest.approx(5.0)
    now[0] = 103.0
    assert d.past(0.5) and not d.expired() and d.remaining() == pytest.approx(2.0)
    now[0] = 105.5
    assert d.expired() and d.remaining() == 0.0
    now[0] = 104.0                                   # once expired, it stays expired
    assert d.expired()
    c = Deadline.after_checks(3)
    assert [c.expired() for _ in range(4)] == [False, False, True, True]
    assert not Deadline.after_checks(3).past(0.5)


BOARD = """
[supply]
volts = 12
tolerance_pct = 5
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 10
[search]
objectives = ["cost", "distinct_values"]
time_limit_s = 600
top = 1
[[stage]]
name = "input"
topology = "divider"
[stage.target]
ic = "1 mA"
ic_window_pct = 20
vce_min = "3 V"
[[stage]]
name = "driver"
topology = "divider"
[stage.target]
ic = "3 mA"
ic_window_pct = 20
vce_min = "2.5 V"
"""


def test_stage_options_are_the_same_for_any_row_budget():
    from stockbias.search.board import stage_job
    from stockbias.search.board_options import stage_options
    from stockbias.search.candidates import build_shelf

    inv = generated_shelf(70, 2, seed=6)
    job = parse_job(BOARD, "<board>")
    st = job.stages[0]
    sj = stage_job(job, st)
    shelf = build_shelf(job, inv, pairs=False)
    cands = {r: shelf.candidates(False, False) for r in ("R1", "R2", "RC", "RE")}
    for q in inv.transistors:
        whole = stage_options(sj, st, 0, "divider", q, cands)
        small = stage_options(sj, st, 0, "divider", q, cands, row_budget=200)
        assert whole.complete and small.complete and whole.size > 0
        for r in whole.core:
            np.testing.assert_array_equal(small.core[r], whole.core[r])
        np.testing.assert_array_equal(small.lo, whole.lo)
        np.testing.assert_array_equal(small.hi, whole.hi)
        cut = stage_options(sj, st, 0, "divider", q, cands, Deadline.after_checks(3),
                            row_budget=200)
        assert not cut.complete and 0 < cut.rows_done < cut.rows_total == 70
        assert cut.size < whole.size                     # a prefix of the options
        for r in whole.core:
            np.testing.assert_array_equal(cut.core[r], whole.core[r][:cut.size])


def test_a_board_whose_options_were_cut_is_never_optimal():
    from stockbias.search.board import design_board

    inv = generated_shelf(70, 2, seed=6)
    job = parse_job(BOARD, "<board>")
    full = design_board(job, inv)
    assert full.status == "optimal" and full.stats["prepass_cut"] is None
    for n in (1, 2, 3):
        r = design_board(job, inv, deadline=Deadline.after_checks(n))
        assert r.status in ("feasible", "unknown")
        assert (r.status == "unknown") == (not r.designs)
        cut = r.stats["prepass_cut"]
        assert cut.startswith("the time limit cut the pre-pass, so the status is not a proof")
        assert cut in r.assumptions
        assert "stage 'input'" in cut or "stage 'driver'" in cut


def test_cli_design_cut_by_the_time_limit_says_so(monkeypatch):
    """`stockbias design`: a search the limit stops before anything is searched exits 1 with
    status unknown and the unsearched part named (a deadline counted in checks stands in
    for the clock)."""
    import json
    from pathlib import Path

    from typer.testing import CliRunner

    import stockbias.search.design as design_module
    from stockbias.cli.app import app

    samples = Path(__file__).resolve().parent.parent / "inventory_samples"
    monkeypatch.setattr(design_module, "Deadline", lambda limit: Deadline.after_checks(1))
    args = ["design", str(samples / "line_driver_job.toml"), "--inventory",
            str(samples / "workshop_drawers.csv")]
    result = CliRunner().invoke(app, [*args, "--json"])
    assert result.exit_code == 1, result.output
    payload = json.loads(result.stdout)
    assert payload["status"] == "unknown" and payload["designs"] == []
    assert payload["stats"]["prepass_cut"].startswith("the time limit cut the pre-pass")
    assert payload["stats"]["prepass_cut"] in payload["assumptions"]
    table = CliRunner().invoke(app, args)
    assert table.exit_code == 1
    assert "the time limit cut the pre-pass" in " ".join(table.output.split())
