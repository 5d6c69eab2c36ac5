"""Boards and consolidation to a yield target (`design BOARD` and `consolidate` with
``[stage.target] yield_min``): generated shelves where the yield board is cheaper than the
worst-case board optimum, and where worst case has no board and the yield target has one;
each chosen stage's yield, and the board's yield as the product of its stages', confirmed
by an independent Monte Carlo written here; the same result on 1 and 2 worker processes;
the commands' exit codes, 80-column screens and JSON schema."""

from __future__ import annotations

import json
import math
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from independent_mc import divider_passes
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.job import parse_job
from stockbias.search.yield_board import yield_board, yield_consolidate
from stockbias.stock_io import read_inventory

SCHEMAS = Path(__file__).resolve().parent.parent / "stockbias" / "schemas"
HEADER = ("kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,location,"
          "polarity,hfe_min,hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,vce_sat,"
          "hfe_test_ic,icbo_a\n")
VALUES = (("47K", "47k"), ("10K", "10k"), ("1K0", "1k"), ("3K3", "3.3k"))
PRECISE = "".join(f"resistor,P-{n},{v},1,0.25,0,100,0.05,A{i},,,,,,,,,,,\n"
                  for i, (n, v) in enumerate(VALUES))
WIDE = "".join(f"resistor,W-{n},{v},10,0.25,0,100,0.002,B{i},,,,,,,,,,,\n"
               for i, (n, v) in enumerate(VALUES))
TRANSISTOR = "transistor,TQ-1,,,,,100,0.03,C1,NPN,190,210,40,200mA,500mW,0.64,0.66,0.2,1mA,0\n"
HEAD = """\
[supply]
volts = 12
tolerance_pct = 2
[environment]
ambient_min_c = 25
ambient_max_c = 25
[build]
quantity = 10
[search]
model = "constant_vbe"
objectives = ["cost", "part_count"]
top = 2
time_limit_s = 120
"""
STAGE = """
[[stage]]
name = "{name}"
topology = "divider"
{fitted}[stage.target]
ic = "1.4 mA"
ic_window_pct = {window}
vce_min = "2 V"
{target}"""
VCC, VCC_TOL, HFE, VBE, IC, VCE_MIN = 12.0, 0.02, (190.0, 210.0), (0.64, 0.66), 1.4e-3, 2.0


def board_text(windows: tuple[float, float], targets: tuple[str, str],
               fitted: tuple[str, str] = ("", "")) -> str:
    return HEAD + "".join(STAGE.format(name=n, window=w, target=t, fitted=f)
                          for n, w, t, f in zip(("first", "second"), windows, targets, fitted,
                                                strict=True))


def fitted(prefix: str) -> str:
    return (f'transistor = "TQ-1"\n[stage.values]\nR1 = "{prefix}-47K"\nR2 = "{prefix}-10K"\n'
            f'RE = "{prefix}-1K0"\nRC = "{prefix}-3K3"\n')


@pytest.fixture(scope="module")
def files(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("yboard")
    out = {"both": d / "both.csv", "wide": d / "wide.csv", "board": d / "board.toml",
           "tight": d / "tight.toml", "none": d / "none.toml", "cons": d / "cons.toml",
           "cons_none": d / "cons_none.toml"}
    out["both"].write_text(HEADER + PRECISE + WIDE + TRANSISTOR)
    out["wide"].write_text(HEADER + WIDE + TRANSISTOR)
    out["board"].write_text(board_text((25, 25), ("yield_min = 95\n", "yield_min = 90\n")))
    out["tight"].write_text(board_text((14, 12), ("yield_min = 80\n", "yield_min = 70\n")))
    out["none"].write_text(board_text((3, 25), ("yield_min = 95\n", "yield_min = 90\n")))
    out["cons"].write_text(board_text((25, 25), ("yield_min = 95\n", "yield_min = 90\n"),
                                      (fitted("P"), fitted("W"))))
    out["cons_none"].write_text(board_text((3, 25), ("yield_min = 95\n", "yield_min = 90\n"),
                                           (fitted("P"), fitted("W"))))
    return out


def _window(window_pct: float) -> tuple[float, float]:
    return IC * (1 - window_pct / 100), IC * (1 + window_pct / 100)


def stage_passes(values: dict[str, tuple[float, float]], window_pct: float, n: int,
                 rng: np.random.Generator) -> np.ndarray:
    """Which of n drawn boards pass one divider stage, written apart from the engine:
    scipy's truncated normal for each resistor (σ = tol/3, cut at ±tol), uniform hFE and
    VBE, the divider's closed-form active-region solution (constant VBE, no leakage,
    25 °C) at both supply extremes; a board passes when IC stays in the window and
    VCE ≥ 2 V at both."""
    return divider_passes(values, hfe=HFE, vbe=VBE, vcc=VCC, vcc_tol=VCC_TOL,
                          ic_window=_window(window_pct), vce_min=VCE_MIN, n=n, rng=rng)


def _values(stage) -> dict[str, tuple[float, float]]:
    return {role: (p.value, p.tol) for role, p in stage.check.parts.items()}


def _close(mine: float, n_mine: int, theirs: float, n_theirs: int) -> bool:
    p = max(theirs * (1 - theirs), 1e-4)
    return abs(mine - theirs) <= 5 * math.sqrt(p * (1 / n_mine + 1 / n_theirs))


def test_the_yield_board_is_cheaper_than_the_worst_case_board(files) -> None:
    job = parse_job(files["board"].read_text())
    res = yield_board(job, read_inventory(files["both"]))
    assert res.worst_case.designs, "the precise lines meet every stage at every corner"
    best = res.designs[0]
    # hand calculation: the worst-case board takes the 1 % lines (0.05 each) where the
    # yield board may take the 10 % ones (0.002 each)
    assert best.board.cost < res.worst_case.designs[0].cost
    assert any(e.kind == "sampled" for e in best.stages)
    for e, s, window in zip(best.stages, best.board.stages, (25, 25), strict=True):
        assert e.yield_min is not None
        if e.kind == "sampled":
            assert e.judged_low >= e.yield_min and e.check_low >= e.yield_min
            assert not e.check.ok           # the worst case fails: only the yield holds
        mine = stage_passes(_values(s), window, 40_000, np.random.default_rng(7)).mean()
        theirs = e.check.monte_carlo.yield_.yield_
        assert _close(mine, 40_000, theirs, e.check.monte_carlo.yield_.samples)
        assert mine >= e.yield_min


def test_worst_case_has_no_board_and_the_yield_target_has_one(files) -> None:
    job = parse_job(files["board"].read_text())
    res = yield_board(job, read_inventory(files["wide"]))
    assert res.worst_case.designs == [] and res.worst_case_best() is None
    assert res.status == "feasible" and res.designs
    for d in res.designs:
        for e, s in zip(d.stages, d.board.stages, strict=True):
            mine = stage_passes(_values(s), 25, 40_000, np.random.default_rng(11)).mean()
            assert mine >= e.yield_min


def test_the_board_yield_is_the_product_of_independent_stage_yields(files) -> None:
    # every stage draws its own parts; the corners are fixed, not random.  An independent
    # Monte Carlo of whole boards (both stages drawn apart on each board) agrees with the
    # product of the engine's stage yields, and not with what shared draws would give.
    job = parse_job(files["tight"].read_text())
    res = yield_board(job, read_inventory(files["both"]), top=1)
    best = res.designs[0]
    first, second = (_values(s) for s in best.board.stages)
    n = 60_000
    rng = np.random.default_rng(2024)
    a = stage_passes(first, 14, n, rng)
    b = stage_passes(second, 12, n, rng)
    board = float((a & b).mean())
    product = best.board_yield
    assert 0.5 < product < 0.97, "both stages lose boards: the product is not trivial"
    n_engine = min(e.check.monte_carlo.yield_.samples for e in best.stages)
    assert _close(board, n, product, n_engine)
    # the same draws for both stages (the wrong model) would give a different board yield
    rng2 = np.random.default_rng(2024)
    shared = rng2.bit_generator.state
    a2 = stage_passes(first, 14, n, rng2)
    rng2.bit_generator.state = shared
    b2 = stage_passes(second, 12, n, rng2)
    assert not _close(float((a2 & b2).mean()), n, product, n_engine)
    # the claimed lower bound: the product of the stages' bounds, at the joint confidence
    assert best.board_low == pytest.approx(math.prod(e.low for e in best.stages))
    assert best.board_low <= board
    sampled = [e for e in best.stages if e.kind == "sampled"]
    assert best.board_confidence == pytest.approx(
        1 - sum(1 - e.confidence for e in sampled))


def test_a_stage_without_a_yield_target_keeps_its_worst_case(files) -> None:
    # 'second' states no yield_min: it must pass every worst-case corner, while 'first'
    # may take the cheaper 10 % lines on its yield target
    job = parse_job(board_text((14, 12), ("yield_min = 80\n", "")))
    res = yield_board(job, read_inventory(files["both"]), top=1)
    best = res.designs[0]
    first, second = best.stages
    assert second.yield_min is None and second.kind == "worst case" and second.check.ok
    assert first.kind == "sampled" and first.check_low >= 0.8
    assert best.board.cost < res.worst_case.designs[0].cost
    mine = stage_passes(_values(best.board.stages[0]), 14, 40_000,
                        np.random.default_rng(3)).mean()
    assert mine >= 0.8
    assert stage_passes(_values(best.board.stages[1]), 12, 20_000,
                        np.random.default_rng(4)).all()


def test_one_and_two_workers_give_the_same_yield_board(files) -> None:
    from stockbias.executor import InProcess, LocalProcesses

    job = parse_job(files["board"].read_text())
    inv = read_inventory(files["both"])
    here = yield_board(job, inv, executor=InProcess())
    there = yield_board(job, inv, executor=LocalProcesses(2))
    assert [d.board.cost_micro for d in here.designs] == \
        [d.board.cost_micro for d in there.designs]
    for a, b in zip(here.designs, there.designs, strict=True):
        for x, y in zip(a.stages, b.stages, strict=True):
            assert (x.kind, x.screen, x.judged, x.check.monte_carlo.yield_) == \
                (y.kind, y.screen, y.judged, y.check.monte_carlo.yield_)
    drop = ("executor",)
    assert {k: v for k, v in here.stats.items() if k not in drop} == \
        {k: v for k, v in there.stats.items() if k not in drop}


def test_consolidation_to_a_yield_target(files) -> None:
    job = parse_job(files["cons"].read_text())
    inv = read_inventory(files["both"])
    res = yield_consolidate(job, inv)
    wc = res.worst_case
    assert wc.after is not None and res.designs
    after = res.designs[0].board
    # the 10 % lines of stage 'second' fail the worst case today, so the worst-case
    # consolidation must buy 1 % parts; the yield one keeps cheaper lines
    assert not wc.before_ok["second"]
    assert (after.bom_lines, after.changes) <= (wc.after.bom_lines, wc.after.changes)
    assert after.cost < wc.after.cost
    # changes are counted against today's board, role by role
    today = {st.name: dict(st.values) for st in job.stages}
    counted = sum(1 for s in after.stages for role, p in s.check.parts.items()
                  if p.parts[0].part_id != today[s.name][role])
    assert after.changes == counted == sum(len(s.changed) for s in after.stages)
    # today's board on the same footing: stage 'first' (1 % parts) loses no board
    ref = dict(res.reference)
    assert ref["first"].monte_carlo.yield_.passed == ref["first"].monte_carlo.yield_.samples
    for e, s in zip(res.designs[0].stages, after.stages, strict=True):
        mine = stage_passes(_values(s), 25, 40_000, np.random.default_rng(5)).mean()
        assert mine >= e.yield_min


def _fits(text: str, width: int) -> None:
    for line in text.splitlines():
        assert len(line) <= width or len(line.split()) == 1, line


def _validate(payload: dict) -> None:
    jsonschema.validate(payload, json.loads((SCHEMAS / "yield_board.schema.json").read_text()))


@pytest.mark.parametrize("columns", [80, 120])
def test_design_board_cli_says_what_it_claims(files, columns: int) -> None:
    runner = CliRunner(env={"COLUMNS": str(columns), "TERM": "dumb"})
    res = runner.invoke(app, ["design", str(files["board"]), "-i", str(files["both"])])
    assert res.exit_code == 0, res.output
    out = res.stdout
    _fits(out, columns)
    flat = " ".join(out.split())
    assert "Yield board design" in flat and "Bonferroni" in flat
    assert "Board yield (every stage passes)" in flat and "fresh boards" in flat
    # hand calculation: the worst-case optimum takes four 1 % lines on each stage
    # (8 × 0.05 ... less what the stages share) — its cost is printed beside the result
    assert "Worst-case optimum for comparison: cost" in flat
    assert "W-47K" in out and "W-10K" in out                # part ids whole


def test_design_board_cli_json_and_exit_codes(files, tmp_path: Path) -> None:
    runner = CliRunner()
    js = runner.invoke(app, ["design", str(files["board"]), "-i", str(files["both"]),
                             "--json"])
    assert js.exit_code == 0, js.output
    payload = json.loads(js.stdout)
    _validate(payload)
    assert payload["kind"] == "board" and payload["samples_per_design"] == 20_000
    best = payload["designs"][0]
    assert best["board_yield"]["estimate"] == pytest.approx(
        math.prod(e["final_check"]["yield"] for e in best["stage_evidence"]))
    assert payload["worst_case_optimum"]["cost"] > best["cost"]
    # 1: no candidate meets the target (a 3 % window on the first stage)
    none = runner.invoke(app, ["design", str(files["none"]), "-i", str(files["both"])])
    assert none.exit_code == 1, none.output
    assert "No board." in none.stdout
    none_js = runner.invoke(app, ["design", str(files["none"]), "-i", str(files["both"]),
                                  "--json"])
    assert none_js.exit_code == 1
    _validate(json.loads(none_js.stdout))
    # 2: bad input, one line naming the file, line and key
    bad = tmp_path / "bad.toml"
    bad.write_text(files["board"].read_text().replace("yield_min = 90", "yield_min = 150"))
    err = runner.invoke(app, ["design", str(bad), "-i", str(files["both"])])
    assert err.exit_code == 2
    assert "bad.toml" in err.output and "yield_min" in err.output
    assert "Traceback" not in err.output


@pytest.mark.parametrize("columns", [80, 120])
def test_consolidate_cli_exit_codes_and_screen(files, columns: int) -> None:
    runner = CliRunner(env={"COLUMNS": str(columns), "TERM": "dumb"})
    res = runner.invoke(app, ["consolidate", str(files["cons"]), "-i", str(files["both"])])
    assert res.exit_code == 0, res.output
    _fits(res.stdout, columns)
    flat = " ".join(res.stdout.split())
    assert "Yield consolidation" in flat and "Today's board:" in flat
    assert "BOM before" in flat and "BOM after" in flat
    none = runner.invoke(app, ["consolidate", str(files["cons_none"]), "-i",
                               str(files["both"])])
    assert none.exit_code == 1, none.output
    _fits(none.stdout, columns)
    bad = runner.invoke(app, ["consolidate", str(files["cons"]), "-i", str(files["both"]),
                              "--keep", "RX@first"])
    assert bad.exit_code == 2 and "RX@first" in bad.output


def test_consolidate_cli_report_states_the_yield_status(files, tmp_path: Path) -> None:
    report = tmp_path / "r.html"
    res = CliRunner().invoke(app, ["consolidate", str(files["cons"]), "-i", str(files["both"]),
                                   "--report", str(report)])
    assert res.exit_code == 0, res.output
    html = report.read_text()
    assert "judged by its yield target" in html and "time limit reached" not in html


def test_consolidate_cli_json(files) -> None:
    js = CliRunner().invoke(app, ["consolidate", str(files["cons"]), "-i", str(files["both"]),
                                  "--json"])
    assert js.exit_code == 0, js.output
    payload = json.loads(js.stdout)
    _validate(payload)
    assert payload["kind"] == "consolidate"
    assert {s["name"] for s in payload["reference"]["stages"]} == {"first", "second"}
    assert payload["designs"][0]["changes"] == sum(
        len(s["changed"]) for s in payload["designs"][0]["stages"])


def test_the_schema_shares_the_board_schema_definitions() -> None:
    mine = json.loads((SCHEMAS / "yield_board.schema.json").read_text())["$defs"]
    board = json.loads((SCHEMAS / "board_design.schema.json").read_text())["$defs"]
    for name in ("corner", "bound", "constraint", "part", "bom_row", "totals"):
        assert mine[name] == board[name]
    stage = dict(board["stage"])
    ours = dict(mine["yield_stage"])
    assert {k: v for k, v in ours["properties"].items() if k != "ok"} == \
        {k: v for k, v in stage["properties"].items() if k != "ok"}
    assert ours["required"] == stage["required"]


def test_the_library_routes_yield_boards_and_consolidations(files) -> None:
    import stockbias
    from stockbias.search.yield_board_result import YieldBoardResult

    inv = stockbias.load_inventory(files["wide"])
    res = stockbias.design(stockbias.load_job(files["board"]), inv, top=1)
    assert isinstance(res, YieldBoardResult) and res.kind == "board" and res.designs
    both = stockbias.load_inventory(files["both"])
    cons = stockbias.consolidate(stockbias.load_job(files["cons"]), both)
    assert isinstance(cons, YieldBoardResult) and cons.kind == "consolidate"
    assert cons.after is not None and cons.after.changes == cons.designs[0].board.changes
