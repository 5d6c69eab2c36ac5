"""Boards on the command line: `consolidate`, `design BOARD`, `check BOARD --stage`.

Expected values come from the bundled sample board (inventory_samples/
distribution_amp_board.toml, invented) on the workshop shelf: its current values
use 11 resistor lines (counted from the file), and every stage passes `check`.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.stock_io import load_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMAS = ROOT / "stockbias" / "schemas"
BOARD = SAMPLES / "distribution_amp_board.toml"
SHELF = SAMPLES / "workshop_drawers.csv"

runner = CliRunner()


def schema(name: str) -> dict:
    return json.loads((SCHEMAS / f"{name}.schema.json").read_text())


@pytest.fixture(scope="module")
def consolidated() -> dict:
    result = runner.invoke(app, ["consolidate", str(BOARD), "--inventory", str(SHELF), "--json"])
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)


def test_sample_board_passes_as_it_stands() -> None:
    job, inv = load_job(BOARD), load_inventory(SHELF)
    for st in job.stages:
        res = analyze(job, st.values, st.transistor, inv, samples=0, stage_name=st.name)
        assert res.ok, (st.name, [c.name for c in res.failing])


def test_consolidate_json_schema_and_savings(consolidated: dict) -> None:
    jsonschema.validate(consolidated, schema("consolidate"))
    assert consolidated["status"] == "optimal"
    # before: 11 resistor lines + 3 transistor lines (counted from the board file)
    assert consolidated["bom_lines_before"] == 14
    assert consolidated["distinct_values_before"] == 11
    assert consolidated["bom_lines_after"] <= consolidated["bom_lines_before"] - 2
    assert consolidated["distinct_values_after"] < consolidated["distinct_values_before"]
    # the BOM rows add up to the totals
    after = consolidated["bom_after"]
    assert len(after) == consolidated["bom_lines_after"]
    assert sum(r["placements"] for r in after) == 4 * 5    # 4 stages × (4 resistors + 1 Q)


def test_consolidated_stages_pass_check_and_respect_stock(consolidated: dict) -> None:
    job, inv = load_job(BOARD), load_inventory(SHELF)
    for st in consolidated["stages"]:
        values = {role: p["part_id"] for role, p in st["parts"].items()}
        res = analyze(job, values, st["transistor"]["part_id"], inv, samples=0,
                      stage_name=st["name"])
        assert res.ok, st["name"]
    for row in consolidated["bom_after"]:
        if row["kind"] == "resistor":
            assert row["needed"] == row["placements"] * job.build.quantity
            assert row["needed"] <= row["in_stock"]
    # transistors are not changed by consolidation
    assert {s["name"]: s["transistor"]["part_id"] for s in consolidated["stages"]} == {
        s.name: s.transistor for s in job.stages}


def test_consolidate_changes_counted_against_the_file(consolidated: dict) -> None:
    job = load_job(BOARD)
    current = {s.name: s.values for s in job.stages}
    changed = 0
    for st in consolidated["stages"]:
        for role, p in st["parts"].items():
            if p["part_id"] != current[st["name"]][role]:
                changed += 1
                assert role in st["changed"]
            else:
                assert role not in st["changed"]
    assert changed == consolidated["changes"]


def test_consolidate_keep_holds_the_part() -> None:
    result = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(SHELF), "--json",
                                 "--keep", "RC@input,RE@line_out"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    stages = {s["name"]: s for s in payload["stages"]}
    assert stages["input"]["parts"]["RC"]["part_id"] == "CF-10K"
    assert stages["line_out"]["parts"]["RE"]["part_id"] == "CF-680R"
    assert payload["kept"] == ["RC@input", "RE@line_out"]


def test_consolidate_table_shows_before_and_after() -> None:
    result = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(SHELF)])
    assert result.exit_code == 0, result.output
    for text in ("BOM before", "BOM after", "optimal", "BOM line(s) fewer"):
        assert text in result.output


@pytest.mark.parametrize(("args", "message"), [
    (["--keep", "RC"], "expected ROLE@STAGE"),
    (["--keep", "RC@nowhere"], "no stage named 'nowhere'"),
    (["--objectives", "cost,ic_margin"], "consolidation ranks by"),
])
def test_consolidate_bad_options_exit_2(args: list[str], message: str) -> None:
    result = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(SHELF), *args])
    assert result.exit_code == 2, result.output
    assert message in result.output
    assert "Traceback" not in result.output
    assert len(result.output.strip().splitlines()) == 1


def test_consolidate_needs_current_values(tmp_path: Path) -> None:
    text = BOARD.read_text().replace('transistor = "QN-LB1"\n', "")
    board = tmp_path / "no_transistor.toml"
    board.write_text(text)
    result = runner.invoke(app, ["consolidate", str(board), "-i", str(SHELF)])
    assert result.exit_code == 2
    assert "stage 'gain'" in result.output and "transistor" in result.output


def test_consolidate_impossible_board_exit_1(tmp_path: Path) -> None:
    # a window of ±1 % cannot be held with 5 % carbon film and this VBE spread
    text = BOARD.read_text().replace("ic_window_pct = 40", "ic_window_pct = 1", 1)
    board = tmp_path / "tight.toml"
    board.write_text(text)
    result = runner.invoke(app, ["consolidate", str(board), "-i", str(SHELF), "--json"])
    assert result.exit_code == 1, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("consolidate"))
    assert payload["status"] == "infeasible"
    assert payload["explanation"]["stage"] == "input"
    assert payload["bom_after"] is None
    # nothing was found, so nothing may claim to meet the targets
    assert not any("consolidated one meets" in a for a in payload["assumptions"])


def test_design_board_json_schema() -> None:
    result = runner.invoke(app, ["design", str(BOARD), "-i", str(SHELF), "--json", "--top", "2"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("board_design"))
    assert payload["status"] == "optimal"
    assert [d["rank"] for d in payload["designs"]] == [1, 2]
    keys = [(d["cost_micro"], d["part_count"], d["distinct_values"], d["bom_lines"])
            for d in payload["designs"]]
    assert keys == sorted(keys)                 # the board's objective order
    assert payload["objectives"] == ["cost", "part_count", "distinct_values", "bom_lines"]


def test_design_board_table() -> None:
    result = runner.invoke(app, ["design", str(BOARD), "-i", str(SHELF), "--top", "1"])
    assert result.exit_code == 0, result.output
    assert "Board design" in result.output and "BOM of rank 1" in result.output


def test_check_takes_the_stage_values_from_the_board() -> None:
    result = runner.invoke(app, ["check", str(BOARD), "-i", str(SHELF), "--stage", "split",
                                 "--json", "--samples", "0"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    assert payload["stage"] == "split"
    assert payload["parts"]["RE"]["part_id"] == "CF-1K0"


def test_check_without_values_or_stage_values_exit_2() -> None:
    job = SAMPLES / "line_driver_job.toml"
    result = runner.invoke(app, ["check", str(job), "-i", str(SHELF), "-t", "QN-GP40"])
    assert result.exit_code == 2
    assert "--values" in result.output


@pytest.mark.parametrize(("old", "new", "where", "bad"), [
    ('RE = "CF-680R"', 'RX = "CF-680R"', "key 'stage.values.RX': stage 'line_out': divider has "
                                         "no role RX", "RX"),
    ('R1 = "CF-15K"', 'R1 = "15 kV"', "key 'stage.values.R1': stage 'line_out': unit 'V'",
     "15 kV"),
    ('transistor = "QN-LB1"', 'transistor = "QX-9"', "key 'stage.transistor': stage 'gain': "
                                                     "transistor QX-9 is not in the stock file",
     "QX-9"),
])
def test_board_errors_name_file_line_key_and_text(tmp_path: Path, old: str, new: str,
                                                  where: str, bad: str) -> None:
    board = tmp_path / "board.toml"
    text = BOARD.read_text()
    assert old in text
    board.write_text(text.replace(old, new))
    line = next(i for i, row in enumerate(board.read_text().splitlines(), start=1)
                if row.strip() == new)
    for command in ("consolidate", "design"):
        if command == "design" and "transistor" not in old:
            continue          # design ignores [stage.values]
        result = runner.invoke(app, [command, str(board), "-i", str(SHELF)])
        assert result.exit_code == 2, result.output
        out = result.output.strip()
        assert len(out.splitlines()) == 1
        assert out.startswith(f"{board}:{line}: ")
        assert where in out
        assert out.endswith(f"(text '{bad}')")            # the offending text


def test_consolidate_report(tmp_path: Path) -> None:
    out = tmp_path / "board.html"
    result = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(SHELF), "--report",
                                 str(out)])
    assert result.exit_code == 0, result.output
    html = out.read_text()
    assert "Consolidation of distribution_amp_board.toml" in html
    assert "Before: 14 BOM lines (11 resistor lines, 11 values)" in html  # the board file
    for name in ("input", "gain", "split", "line_out"):
        assert f"Stage {name}" in html
