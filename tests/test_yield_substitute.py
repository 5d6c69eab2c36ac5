"""`substitute` with a yield target: generated shelves where the yield rule fits a
transistor that the worst case cannot (or only with a dearer rework); every yield verdict's
parts confirmed by an independent Monte Carlo written here; the same verdicts on 1 and 2
worker processes; the CLI (exit codes, 80/120 columns, JSON schema) and `sweep --without`.

The shelf and job are invented for these tests: the job of tests/test_yield_search.py (12 V
±2 %, IC 1.4 mA ±25 %, VCE ≥ 2 V, 25 °C, yield ≥ 95 %), 10 % and 1 % resistor lines, TQ-1
(VBE 0.64–0.66 V, the stage's own transistor) and TQ-2 (VBE 0.80–0.90 V: the stage as it
stands runs low in the window with it).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from independent_mc import divider_passes
from test_yield_search import HEADER, JOB, PRECISE, TRANSISTOR, WIDE
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.job import parse_job
from stockbias.search.substitute import substitute
from stockbias.stock_io import read_inventory

MORE_WIDE = "".join(f"resistor,W-{n},{v},10,0.25,0,100,0.002,B{i + 4},,,,,,,,,,,\n"
                    for i, (n, v) in enumerate((("8K2", "8.2k"), ("12K", "12k"),
                                                ("820R", "820"), ("1K2", "1.2k"))))
MORE_PRECISE = "".join(f"resistor,P-{n},{v},1,0.25,0,100,0.05,A{i + 4},,,,,,,,,,,\n"
                       for i, (n, v) in enumerate((("8K2", "8.2k"), ("12K", "12k"),
                                                   ("820R", "820"), ("1K2", "1.2k"))))
TQ2 = "transistor,TQ-2,,,,,100,0.03,C2,NPN,190,210,40,200mA,500mW,0.80,0.90,0.2,1mA,0\n"
VALUES = {"R1": "W-47K", "R2": "W-10K", "RE": "W-1K0", "RC": "W-3K3"}
DEVICES = {"TQ-1": ((190.0, 210.0), (0.64, 0.66)), "TQ-2": ((190.0, 210.0), (0.80, 0.90))}
VCC, VCC_TOL = 12.0, 0.02
IC_MIN, IC_MAX, VCE_MIN = 1.4e-3 * 0.75, 1.4e-3 * 1.25, 2.0


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("ysub")
    out = {"wide": d / "wide.csv", "both": d / "both.csv", "job": d / "job.toml",
           "plain": d / "plain.toml"}
    out["wide"].write_text(HEADER + WIDE + MORE_WIDE + TRANSISTOR + TQ2)
    out["both"].write_text(HEADER + PRECISE + MORE_PRECISE + WIDE + MORE_WIDE + TRANSISTOR
                           + TQ2)
    out["job"].write_text(JOB.format(window=25))
    out["plain"].write_text(JOB.format(window=25).replace("yield_min = 95\n", ""))
    return out


def independent_yield(values: dict[str, tuple[float, float]], part_id: str,
                      n: int = 40_000, seed: int = 2024) -> float:
    """A Monte Carlo written apart from the engine: scipy's truncated normal per resistor
    (σ = tol/3, cut at ±tol), uniform hFE and VBE in the row's ranges, the divider's
    closed-form active-region solution (constant VBE, no leakage, 25 °C) at both supply
    extremes; a board passes when IC stays in the window and VCE ≥ 2 V at both."""
    (h0, h1), (v0, v1) = DEVICES[part_id]
    ok = divider_passes(values, hfe=(h0, h1), vbe=(v0, v1), vcc=VCC, vcc_tol=VCC_TOL,
                        ic_window=(IC_MIN, IC_MAX), vce_min=VCE_MIN, n=n,
                        rng=np.random.default_rng(seed))
    return float(ok.mean())


def _confirm(c) -> None:
    """The engine's claim and an independent Monte Carlo agree for one verdict."""
    ev = c.yield_evidence
    assert ev is not None and ev.qualifies
    assert ev.final_low >= 0.95                 # the one-sided lower bound on stream 3
    if ev.judged is not None:
        assert ev.judged_low >= 0.95
    values = {role: (p.value, p.tol) for role, p in c.check.parts.items()}
    mine = independent_yield(values, c.transistor.part_id)
    theirs = ev.final.yield_
    sigma = math.sqrt(max(theirs * (1 - theirs), 1e-4) * (1 / 40_000 + 1 / ev.final.samples))
    assert mine == pytest.approx(theirs, abs=5 * sigma)
    assert mine >= 0.95


def _run(files, shelf: str, job: str = "job", **kw):
    return substitute(parse_job(files[job].read_text()), VALUES, "TQ-1",
                      read_inventory(files[shelf]), purpose=False, **kw)


def by_id(result, part_id):
    return next(c for c in result.candidates if c.transistor.part_id == part_id)


@pytest.fixture(scope="module")
def wide(files):
    return _run(files, "wide")


def test_worst_case_fits_nothing_and_the_yield_target_fits_both(files, wide) -> None:
    worst = _run(files, "wide", "plain", samples=0)
    assert worst.yield_search is None
    assert not any(c.fixed for c in worst.candidates)       # no drop-in, no rework
    assert all(c.proven for c in worst.candidates)          # proven: none exists
    assert wide.yield_search is not None and wide.yield_search["yield_min"] == 0.95
    one, two = by_id(wide, "TQ-1"), by_id(wide, "TQ-2")
    # TQ-1 as it stands: every board sampled in the window bar a few, worst case fails
    assert one.drop_in and one.yield_evidence.kind == "sampled"
    assert set(one.yield_evidence.worst_case_failing) & {"ic_min", "ic_max"}
    # TQ-2 as it stands: screened out (its upper bound is below the target), then reworked
    assert not two.drop_in and two.changes
    assert two.drop_in_yield.kind == "screened out" and two.drop_in_yield.screen_high < 0.95
    for c in (one, two):
        _confirm(c)
        assert c.worst_case == {"verdict": "none", "changes": [], "added_cost": 0.0,
                                "proven": True}
    # the drop-in really misses: the independent Monte Carlo puts TQ-2 as it stands below
    today = {role: (p.value, p.tol) for role, p in two.drop_in_check.parts.items()}
    assert independent_yield(today, "TQ-2") < 0.95


def test_the_yield_verdict_is_cheaper_than_the_worst_case_rework(files) -> None:
    worst = _run(files, "both", "plain", samples=0)
    ylds = _run(files, "both")
    w1, y1 = by_id(worst, "TQ-1"), by_id(ylds, "TQ-1")
    # worst case: the 10 % lines fail at the corners, so precise lines must come in
    assert not w1.drop_in and w1.changes and w1.added_cost > 0
    # the yield target keeps the stage as it stands: fewer changes, no added cost
    assert y1.drop_in and y1.added_cost == 0
    # ... and shows the worst-case rules' verdict beside it, equal to that search's own
    assert y1.worst_case["verdict"] == "rework" and y1.worst_case["proven"]
    assert y1.worst_case["added_cost"] == pytest.approx(w1.added_cost)
    assert [(x["role"], x["part_id"]) for x in y1.worst_case["changes"]] == \
        [(r, "+".join(p.part_ids)) for r, p in w1.changes.items()]
    _confirm(y1)
    w2, y2 = by_id(worst, "TQ-2"), by_id(ylds, "TQ-2")
    assert y2.changes and w2.changes
    assert (len(y2.changes), y2.added_cost) <= (len(w2.changes), w2.added_cost)
    _confirm(y2)


def test_evidence_counts_and_streams(wide) -> None:
    s = wide.yield_search["stats"]
    assert s["sampled_candidates"] >= 2 and s["judged"] >= 1
    assert s["screened_out"] >= 1                    # TQ-2 as it stands
    d = wide.to_dict()
    assert d["mode"] == "yield"
    c = next(x for x in d["candidates"] if x["part_id"] == "TQ-2")
    assert c["yield"]["final_check"]["stream"] == 3
    assert c["yield"]["final_check"]["samples"] == 20_000
    assert c["drop_in_yield"]["screen"]["samples"] == 2_000
    # Bonferroni: each of the m candidates screened at 1 − 0.05/m
    m = c["drop_in_yield"]["screen"]["candidates"]
    assert c["drop_in_yield"]["screen"]["confidence_each"] == pytest.approx(1 - 0.05 / m)


def test_two_worker_processes_give_the_same_verdicts(files, wide) -> None:
    from stockbias.executor import LocalProcesses

    there = _run(files, "wide", executor=LocalProcesses(2))
    assert [c.to_dict() for c in there.candidates] == [c.to_dict() for c in wide.candidates]


def test_progress_names_the_candidates_and_boards_done(files) -> None:
    seen: list[tuple[str, float]] = []
    _run(files, "wide", progress=lambda text, frac: seen.append((text, frac)))
    texts = [t for t, _f in seen]
    assert any("screened 1 of" in t and "× 2,000 boards" in t for t in texts)
    assert any("judging candidate 1 of" in t and "20,000 boards" in t for t in texts)
    assert any(t.startswith("TQ-2 (2 of 2): ") for t in texts)
    fracs = [f for _t, f in seen]
    assert fracs == sorted(fracs) and fracs[0] >= 0 and fracs[-1] < 1


@pytest.mark.parametrize("chunk", [1_000, 100_000])
def test_screen_and_judge_counts_do_not_depend_on_the_chunk_size(files, chunk) -> None:
    # the candidates' counts (vectorised screen on stream 1, single judge on stream 2) equal
    # a streamed Monte Carlo of the same parts at either chunk size, exactly
    from stockbias.analysis.montecarlo import monte_carlo
    from stockbias.executor import InProcess
    from stockbias.search.substitute import prepare
    from stockbias.search.yield_evidence import Trial, judge, sample_tasks, screen_counts

    inv = read_inventory(files["wide"])
    prep = prepare(parse_job(files["job"].read_text()), VALUES, "TQ-1", inv, purpose=False)
    trials = [Trial(prep.base, q) for q in inv.transistors]
    screened = screen_counts(InProcess(), prep.job, trials)
    for t, (k, n) in zip(trials, screened, strict=True):
        spec, limits, tempcos, *_ = sample_tasks(prep.job, [t], n, 1)[0]
        mc = monte_carlo(spec, limits, n, prep.job.search.seed, tempco_ppm=tempcos, stream=1,
                         chunk=chunk)
        assert (mc.yield_.passed, mc.yield_.samples) == (k, n)
    y, _low = judge(InProcess(), prep.job, trials[1], 5_000, 0.95)
    spec, limits, tempcos, *_ = sample_tasks(prep.job, [trials[1]], 5_000, 2)[0]
    mc = monte_carlo(spec, limits, 5_000, prep.job.search.seed, tempco_ppm=tempcos, stream=2,
                     chunk=chunk)
    assert mc.yield_.passed == y.passed and 0 < y.passed < 5_000     # the case bites


def test_a_yield_job_needs_monte_carlo_boards(files) -> None:
    from stockbias.errors import InputError

    with pytest.raises(InputError, match="--samples"):
        _run(files, "wide", samples=0)


@pytest.mark.parametrize("columns", ["80", "120"])
def test_cli_says_what_each_verdict_claims(files, columns) -> None:
    runner = CliRunner(env={"COLUMNS": columns})
    args = ["substitute", str(files["job"]), "-i", str(files["wide"]), "-v",
            ",".join(f"{r}={p}" for r, p in VALUES.items()), "-t", "TQ-1",
            "--no-keep-purpose"]
    res = runner.invoke(app, args)
    assert res.exit_code == 0, res.output
    out = res.stdout
    assert "Yield rule" in out and "95 % confidence" in out and "Bonferroni" in out
    assert "final check" in out and "fresh boards" in out and "worst case fails" in out
    assert all(len(line) <= int(columns) for line in out.splitlines())
    js = runner.invoke(app, [*args, "--json"])
    assert js.exit_code == 0
    payload = json.loads(js.stdout)
    import jsonschema

    schema = Path(__file__).resolve().parent.parent / "stockbias" / "schemas"
    jsonschema.validate(payload, json.loads((schema / "substitute.schema.json").read_text()))
    assert payload["mode"] == "yield"


def test_cli_exits_1_when_no_transistor_reaches_the_target(files, tmp_path) -> None:
    job = tmp_path / "narrow.toml"
    job.write_text(JOB.format(window=3))
    res = CliRunner().invoke(app, ["substitute", str(job), "-i", str(files["wide"]), "-v",
                                   ",".join(f"{r}={p}" for r, p in VALUES.items()), "-t",
                                   "TQ-1", "--no-keep-purpose", "--max-changes", "1"])
    assert res.exit_code == 1, res.output
    assert "no fix" in res.stdout and "shown to yield ≥ 95 %" in res.stdout


BOARD = """\
[supply]
volts = 12
tolerance_pct = 2
[environment]
ambient_min_c = 25
ambient_max_c = 25
[build]
quantity = 10
[search]
objectives = ["cost", "part_count"]
time_limit_s = 60
[[stage]]
name = "amp"
topology = "divider"
transistor = "TQ-1"
[stage.target]
ic = "1.4 mA"
ic_window_pct = 25
vce_min = "2 V"
yield_min = 95
[stage.values]
R1 = "W-47K"
R2 = "W-10K"
RE = "W-1K0"
RC = "W-3K3"
[stage.keep_purpose]
gain_pct = false
rin_pct = false
swing_pct = false
supply_current_pct = false
"""


def test_sweep_without_the_part_takes_the_yield_verdict(files, tmp_path) -> None:
    from stockbias.job import load_job
    from stockbias.search.board import stage_job

    for name, text in (("yield", BOARD), ("plain", BOARD.replace("yield_min = 95\n", ""))):
        (tmp_path / name).mkdir()
        (tmp_path / name / "amp.toml").write_text(text)
    res = CliRunner().invoke(app, ["sweep", str(tmp_path / "yield"), "-i", str(files["wide"]),
                                   "--without", "TQ-1", "--json"])
    assert res.exit_code == 0, res.output
    row, = json.loads(res.stdout)["stages"]
    # reference: the substitute library's own verdict for the stage (purpose held, as sweep)
    job = load_job(tmp_path / "yield" / "amp.toml")
    st = job.stages[0]
    ref = substitute(stage_job(job, st), dict(st.values), "TQ-1", read_inventory(files["wide"]))
    two = by_id(ref, "TQ-2")
    assert ref.yield_search is not None
    assert two.changes and not two.drop_in      # the stage's purpose is not held here
    assert row["verdict"] == "rework" and row["transistor"] == "TQ-2"
    assert row["changes"] == "; ".join(f"{r}={'+'.join(p.part_ids)}"
                                       for r, p in two.changes.items())
    assert row["added_cost"] == pytest.approx(two.added_cost)
    assert "fresh boards" in row["note"] and "worst case fails" in row["note"]
    plain = CliRunner().invoke(app, ["sweep", str(tmp_path / "plain"), "-i",
                                     str(files["wide"]), "--without", "TQ-1", "--json"])
    assert json.loads(plain.stdout)["stages"][0]["verdict"] == "none"


def test_report_sentences_word_the_yield_verdicts(wide) -> None:
    from stockbias.render.substitute_table import verdict_lines

    lines = verdict_lines(wide)
    one = next(x for x in lines if "TQ-1:" in x)
    two = next(x for x in lines if "TQ-2:" in x)
    assert "drop-in by the yield rule" in one and "final check" in one
    assert "by the worst-case rules: no fix from stock" in one
    assert "change(s) by the yield rule" in two and "worst case fails" in two


def test_no_check_starts_after_the_time_limit(files) -> None:
    import time

    from stockbias.search.substitute import prepare
    from stockbias.search.yield_substitute import yield_substitute

    inv = read_inventory(files["wide"])
    prep = prepare(parse_job(files["job"].read_text()), VALUES, "TQ-1", inv, purpose=False)
    res = yield_substitute(prep, inv, deadline=time.monotonic() - 1.0)
    assert all(not c.fixed and not c.proven and c.note.startswith("not judged")
               for c in res.candidates)
    assert res.yield_search["stats"]["cut_by_time_limit"] == ["TQ-1", "TQ-2"]
    assert res.yield_search["stats"]["judged"] == 0


def test_cli_workers_and_a_bad_cluster_address(files) -> None:
    args = ["substitute", str(files["job"]), "-i", str(files["wide"]), "-v",
            ",".join(f"{r}={p}" for r, p in VALUES.items()), "-t", "TQ-1",
            "--no-keep-purpose", "--json"]
    one = CliRunner().invoke(app, [*args, "--workers", "1"])
    two = CliRunner().invoke(app, [*args, "--workers", "2"])
    assert one.exit_code == two.exit_code == 0, one.output + two.output
    a, b = json.loads(one.stdout), json.loads(two.stdout)
    assert a["candidates"] == b["candidates"]
    assert b["yield_search"]["stats"]["executor"] == "2 local worker processes"
    bad = CliRunner().invoke(app, [*args, "--cluster", "localhost:8786"])
    assert bad.exit_code == 2
    assert "a cluster address reads tcp://HOST:PORT" in bad.output
