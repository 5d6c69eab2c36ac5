"""The time limit is a promise: a run cut at each stage of a search ends there and says so.

No timing: every test drives an injected clock (:class:`Deadline` with ``clock=``) that
stands still except where the test moves it.  The clock is moved by each full check
(``analyze_stage``, wrapped here), so the deadline passes at a chosen full check: inside
the single-stage search's final checks, inside a board's re-verification, while today's
board is checked before a consolidation.  Each test asserts the status (``feasible``
with designs, ``unknown`` without), that no design is offered unchecked, the bound in the
objective's own units and the words that name the stage of the search that was cut.

Source of the expected values: the uncut run of the same job (its proven optimum and its
count of full checks), and the rules of the result as stated in DESIGN §3 (a status
``feasible`` never with fewer designs shown than verified ones, ``unknown`` only without
designs).
"""

from __future__ import annotations

import itertools
from pathlib import Path

from test_search_bounded import BOARD, generated_shelf, job_for

from stockbias.job import load_job, parse_job
from stockbias.search.deadline import Deadline
from stockbias.stock_io import read_inventory

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"


class FakeClock:
    """Seconds that pass only when a full check runs (``step`` each)."""

    def __init__(self, step: float):
        self.now, self.step, self.checks = 0.0, step, 0

    def __call__(self) -> float:
        return self.now

    def wrap(self, fn):
        def checked(*args, **kwargs):
            self.checks += 1
            self.now += self.step
            return fn(*args, **kwargs)
        return checked


def test_design_cut_during_the_final_checks_shows_only_checked_designs(monkeypatch):
    import stockbias.search.design_pool as pool_module
    from stockbias.search.design import design

    inv = generated_shelf(120, 6, seed=3)
    job = job_for()
    full = design(job, inv)
    assert full.status == "optimal" and len(full.designs) == 3
    clock = FakeClock(step=2.0)
    monkeypatch.setattr(pool_module, "analyze_stage", clock.wrap(pool_module.analyze_stage))
    # 10 s, each full check 2 s, five designs asked for: the search has 9 s, so after its
    # fourth check (at 8 s) a fifth could not end in time and the search stops there, with
    # networks that pass every vertex still unchecked; the checks after the search have
    # 2 s left, not more than one check takes, so none starts (the search used to run
    # its fifth check and two more after it, to 14 s)
    r = design(job, inv, top=5, deadline=Deadline(10.0, clock=clock))
    assert clock.checks == 4
    assert r.status == "feasible" and 1 <= len(r.designs) < 5
    for d in r.designs:
        assert d.check.ok                                          # every one checked
        assert d.cost_micro >= full.designs[0].cost_micro           # never above optimal
    cut = r.stats["prepass_cut"]
    assert cut is not None and cut in r.assumptions
    if r.bound:                      # a lower bound on cost, per board, in currency
        assert set(r.bound) == {"cost"}
        assert 0 < r.bound["cost"] <= full.designs[0].cost + 1e-12
    assert r.stats["unverified_networks"] > 0
    assert any("the time limit ended the full checks after the search" in a and
               "fewer designs are shown than asked for" in a for a in r.assumptions)


def test_board_cut_during_reverification_shows_no_unchecked_board(monkeypatch):
    import stockbias.search.board as board_module
    from stockbias.search.board import design_board

    inv = generated_shelf(70, 2, seed=6)
    job = parse_job(BOARD, "<board>")
    full = design_board(job, inv)
    assert full.status == "optimal" and full.designs
    # the first stage's check takes 6 s of 10: the second cannot start
    original = board_module.analyze_stage
    clock = FakeClock(step=6.0)
    monkeypatch.setattr(board_module, "analyze_stage", clock.wrap(original))
    r = design_board(job, inv, deadline=Deadline(10.0, clock=clock))
    assert clock.checks == 1
    assert r.status == "unknown" and not r.designs
    assert r.stats["verify_cut"] == ("the time limit ended the full check of the board found "
                                     "after 1 of 2 stages (each check 6 s), so it is not "
                                     "shown")
    assert r.stats["verify_cut"] in r.assumptions
    assert r.explanation["reason"] == (
        "the time limit ran out before any board was found, during the full check of the "
        "board found after 1 of 2 stages (each check 6 s), so it is not shown")
    # time for both stages (12 s of 20): the board is shown, as the uncut run found it
    clock = FakeClock(step=6.0)
    monkeypatch.setattr(board_module, "analyze_stage", clock.wrap(original))
    r = design_board(job, inv, deadline=Deadline(20.0, clock=clock))
    assert r.designs and r.stats["verify_cut"] is None
    assert r.designs[0].cost == full.designs[0].cost


def test_explanation_after_a_complete_search_keeps_to_the_time_left():
    from stockbias.search.board import explain_board

    now = [0.0]
    clock = Deadline(5.0, clock=lambda: now[0])
    now[0] = 5.5                                  # the search used all of it
    job = parse_job(BOARD, "<board>")
    inv = generated_shelf(20, 1, seed=1)
    ex = explain_board(job, inv, [], None, ("cost",), "infeasible", clock)
    assert ex["reason"].startswith("no board meets every stage from this stock (the search "
                                   "was complete); the time limit left no time")
    assert "skipped" in ex["reason"]


def test_consolidate_cut_while_todays_board_is_checked(monkeypatch):
    import stockbias.search.consolidate as cons_module
    from stockbias.search.consolidate import consolidate

    job = load_job(SAMPLES / "distribution_amp_board.toml")
    inv = read_inventory(SAMPLES / "workshop_drawers.csv")
    clock = FakeClock(step=6.0)
    monkeypatch.setattr(cons_module, "analyze_stage", clock.wrap(cons_module.analyze_stage))
    monkeypatch.setattr(cons_module, "Deadline", lambda limit: Deadline(10.0, clock=clock))
    r = consolidate(job, inv)
    assert clock.checks == 1                      # the second check could not finish
    assert r.status == "unknown" and r.after is None
    assert r.explanation["reason"] == (
        "the time limit ran out while today's board was being checked (1 of 4 stages, each "
        "about 6 s); its figures are what every stage must keep, so no consolidation was "
        "searched")
    d = r.to_dict()
    assert d["bom_lines_before"] > 0 and d["bom_lines_after"] is None


def test_sweep_stage_reached_after_the_limit_is_not_judged(tmp_path):
    import time

    from stockbias.search.sweep import sweep_stage

    board = SAMPLES / "distribution_amp_board.toml"
    shelf = str(SAMPLES / "workshop_drawers.csv")
    row = sweep_stage((str(board), "input", shelf, "QN-LB2", 0, 0, time.time() - 1.0))
    assert (row.verdict, row.current) == ("not judged", "QN-LB2")
    assert row.note == "the sweep's time limit ran out before this stage"
    # without an end (or before it) the stage is judged as before
    assert sweep_stage((str(board), "gain", shelf, "QN-LB2", 0, 0)).verdict == "unaffected"
    assert sweep_stage((str(board), "gain", shelf, "QN-LB2", 0, 0,
                        time.time() + 600)).verdict == "unaffected"


def test_substitute_starts_no_drop_in_check_past_the_limit(monkeypatch):
    import stockbias.search.substitute as sub_module
    from stockbias.search.substitute import substitute

    job = load_job(SAMPLES / "distribution_amp_board.toml")
    inv = read_inventory(SAMPLES / "workshop_drawers.csv")
    from stockbias.search.board import stage_job

    stage = job.stages[0]
    now = [0.0]

    class Clock:                       # stands still except in each full check (+6 s)
        @staticmethod
        def monotonic() -> float:
            return now[0]

    original = sub_module.analyze_stage

    def checked(*args, **kwargs):
        now[0] += 6.0
        return original(*args, **kwargs)

    monkeypatch.setattr(sub_module, "time", Clock)
    monkeypatch.setattr(sub_module, "analyze_stage", checked)
    r = substitute(stage_job(job, stage), dict(stage.values), stage.transistor, inv,
                   samples=0, time_limit_s=10.0)
    # today's check (0 → 6 s), the first drop-in check (6 → 12 s); then none starts
    assert now[0] == 12.0
    judged = [c for c in r.candidates if c.ruled_out is None and c.check is not None]
    skipped = [c for c in r.candidates if c.note.startswith("not judged")]
    assert len(judged) == 1 and skipped
    for c in skipped:
        assert not c.proven and not c.fixed and c.check is None
        assert c.note == "not judged: the time limit ran out before its drop-in check"


def test_yield_search_names_the_time_limit_as_the_cause():
    from stockbias.search.yield_search import _time_limit_cause

    boxes = [{"status": "unknown", "designs": 0}, {"status": "feasible", "designs": 2}]
    assert _time_limit_cause(boxes, 3, 4) == (
        "the time limit cut the worst-case search of boxes 1, 2 of 3; 1 of 3 boxes were not "
        "searched; 4 candidates were not sampled (raise [search] time_limit_s or "
        "--time-limit)")
    # every box searched to the end and every candidate sampled: not the time limit
    done = [{"status": "optimal", "designs": 5}, {"status": "infeasible", "designs": 0}]
    assert _time_limit_cause(done, 2, 0) == ""


def test_explanation_of_a_stage_keeps_to_the_time_left():
    from stockbias.search.design import _Search
    from stockbias.search.explain import explain

    inv = generated_shelf(30, 2, seed=2)
    job = job_for()
    search = _Search(job, inv, 3, Deadline(600.0), None)
    ex = explain(job, inv, search, "infeasible", budget_s=0.0)
    assert ex.binding == "time_limit" and ex.levers == [] and ex.relaxation is None
    assert ex.message.startswith("no design from this stock meets every limit (the search "
                                 "was complete); the time limit left no time")


def test_option_screen_cut_by_the_deadline_keeps_the_rest_unscreened(monkeypatch):
    """The board's option screen (purpose limits at every vertex) stops at the deadline and
    keeps what it has not screened: a superset of the full screen, a subset of the options
    (sound: the board search's full checks judge the rest).  Expected values: the same
    screen run to the end, and the unscreened options."""
    import stockbias.search.keep_purpose as kp
    from stockbias.search.board import stage_job
    from stockbias.search.board_options import stage_options
    from stockbias.search.candidates import build_shelf

    inv = generated_shelf(70, 2, seed=6)
    job = parse_job(BOARD, "<board>")
    st = job.stages[0]
    sj = stage_job(job, st)
    shelf = build_shelf(job, inv, pairs=False)
    cands = {r: shelf.candidates(False, False) for r in ("R1", "R2", "RC", "RE")}
    g = stage_options(sj, st, 0, "divider", inv.transistors[0], cands)

    def designs(opts) -> set:
        return {tuple(sorted(d.items())) for k in range(opts.size) for d in opts.designs(k)}

    every = designs(g)
    full = designs(kp.screen_options(sj, st, g))
    assert full < every                       # this screen removes designs
    monkeypatch.setattr(kp, "SCREEN_BLOCK", max(1, len(every) // 8))
    cuts = [designs(kp.screen_options(sj, st, g, Deadline.after_checks(n)))
            for n in range(1, 12)]                # n − 1 blocks screened
    assert cuts[0] == every and cuts[-1] == full
    for a, b in itertools.pairwise(cuts):
        assert full <= b <= a <= every          # each block only removes what fails
    assert kp.screen_options(sj, st, g, Deadline(600.0)).size == \
        kp.screen_options(sj, st, g).size


def test_yield_board_starts_no_monte_carlo_past_the_limit(monkeypatch, tmp_path):
    """A board to a yield target whose limit ends during the judging of its first candidate
    board: no stage's Monte Carlo starts after that, no board is shown, and the advice says
    the judging was cut.  (Board and shelf: tests/test_yield_board.py's, where the yield
    board exists; the clock moves 100 s with each Monte Carlo run.)"""
    from test_yield_board import HEADER, PRECISE, TRANSISTOR, WIDE, board_text

    import stockbias.search.yield_board as yb

    stock = tmp_path / "both.csv"
    stock.write_text(HEADER + PRECISE + WIDE + TRANSISTOR)
    job = parse_job(board_text((25, 25), ("yield_min = 95\n", "yield_min = 90\n")))
    clock = FakeClock(step=100.0)
    monkeypatch.setattr(yb, "Deadline", lambda limit: Deadline(limit, clock=clock))
    monkeypatch.setattr(yb, "judge", clock.wrap(yb.judge))
    monkeypatch.setattr(yb, "final_check", clock.wrap(yb.final_check))
    res = yb.yield_board(job, read_inventory(stock), time_limit_s=50.0)
    assert clock.checks == 1                      # one Monte Carlo run, none past the limit
    assert res.status == "unknown" and not res.designs
    assert res.explanation.startswith("the time limit ran out while the candidate boards "
                                      "were judged (")
