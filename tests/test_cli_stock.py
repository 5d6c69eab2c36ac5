"""`stockbias stock check`: exit codes, one-line errors, JSON against its schema (issue 2)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "stock_check.schema.json").read_text())

runner = CliRunner()


def test_valid_file_exit_0_and_summary() -> None:
    result = runner.invoke(app, ["stock", "check", str(SAMPLES / "workshop_drawers.csv")])
    assert result.exit_code == 0, result.output
    assert "valid, 27 resistor lines, 5 transistor lines" in result.output
    assert "zero-ohm link" in result.output
    assert "Assumed where the stock file is silent" in result.output


def test_json_is_alone_on_stdout_and_matches_schema() -> None:
    result = runner.invoke(app, ["stock", "check", "--json",
                                 str(SAMPLES / "nearly_empty_drawer.csv")])
    assert result.exit_code == 0
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    first = payload["parts"][0]
    # 1,2k in a semicolon file is 1.2 kΩ (decimal comma)
    assert (first["part_id"], first["value_ohm"], first["line"]) == ("N-1K2", 1200.0, 4)
    q1 = next(p for p in payload["parts"] if p["part_id"] == "N-Q1")
    assert q1["vceo_max"] == 45.0
    assert q1["ic_max"] == pytest.approx(0.1)
    assert "vbe_min" in q1["assumed"]
    assert payload["summary"]["zero_qty"] == ["N-56K"]


def test_broken_file_exit_2_every_problem_one_line_each() -> None:
    path = str(SAMPLES / "broken_shelf.csv")
    result = runner.invoke(app, ["stock", "check", path])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 9
    assert lines[0] == (f"{path}:3: column 'value': letter code followed by the prefix 'k'; "
                        "after a letter code only Ω or ohm may follow (text '4k7k')")
    assert "Traceback" not in result.output


def test_broken_file_json_lists_problems() -> None:
    result = runner.invoke(app, ["stock", "check", "--json", str(SAMPLES / "broken_shelf.csv")])
    assert result.exit_code == 2
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["valid"] is False
    assert payload["problems"][1] == {"line": 4, "column": "value", "text": "10 kV",
                                      "message": "unit 'V' where ohm (Ω) expected"}


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["stock", "check", "no/such/file.csv"], "does not exist"),
        (["stock", "check", "--bogus", "x.csv"], "No such option: --bogus"),
        (["stock", "check"], "Missing argument"),
        (["stock", "frobnicate"], "No such command"),
    ],
)
def test_usage_errors_are_one_line_exit_2(args: list[str], words: str) -> None:
    result = runner.invoke(app, args)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, lines
    assert words in lines[0]


def test_python_dash_m_entry_point() -> None:
    proc = subprocess.run([sys.executable, "-m", "stockbias", "stock", "check",
                           str(SAMPLES / "broken_shelf.csv")], capture_output=True, text=True,
                          check=False)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""


# -- big files: summarised above 200 lines, every row with --rows --------------------------------

BIG_HEADER = "kind,part_id,value,tolerance_pct,power_w,qty,polarity,hfe_min,hfe_max,vceo_max," \
             "ic_max,pd_max_w"


def big_shelf(tmp_path: Path, n_resistors: int = 240) -> Path:
    """n resistor lines (E12 values at 5 %, every fourth at 1 %, every tenth empty) and 3 NPN."""
    e12 = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)  # IEC 60063
    lines = [BIG_HEADER]
    for i in range(n_resistors):
        tol = 1 if i % 4 == 0 else 5
        lines.append(f"resistor,BR-{i:04d},{e12[i % 12]}{'0' * (i % 5)},{tol},0.25,"
                     f"{0 if i % 10 == 0 else 100},,,,,,")
    lines += [f"transistor,BQ-{k},,,,50,NPN,100,300,40,0.2,0.5" for k in range(3)]
    path = tmp_path / "reel_store.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_big_file_prints_the_summary_not_the_rows(tmp_path: Path) -> None:
    result = runner.invoke(app, ["stock", "check", str(big_shelf(tmp_path))])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "valid, 240 resistor lines, 3 transistor lines" in out
    assert "243 lines: rows not drawn above 200 lines (--rows draws every row" in out
    # hand count: i % 4 == 0 -> 60 lines at 1 %, the other 180 at 5 %
    assert "Resistor lines by tolerance: 1 %: 60, 5 %: 180" in out
    assert "Transistor lines by polarity: NPN: 3" in out
    # 216 resistor lines with 100 pieces, 24 with none; 3 × 50 transistors
    assert "Pieces on the shelf: 21600 resistors, 150 transistors" in out
    assert "BR-0001" not in out  # no row drawn
    # 24 lines with no pieces: the first 20 named, then a count
    assert "BR-0000, BR-0010" in out and "… and 4 more" in out
    assert result.stderr == ""  # no progress bar when stderr is not a terminal


def test_rows_option_draws_every_row(tmp_path: Path) -> None:
    result = runner.invoke(app, ["stock", "check", "--rows", str(big_shelf(tmp_path))])
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert all(f"BR-{i:04d}" in out for i in range(240))
    assert all(f"BQ-{k}" in out for k in range(3))
    assert "rows not drawn" not in out
    assert "… and" not in out
    # one text line per row: BR-0013 is e12[13 % 12] = 12 with 13 % 5 = 3 zeros, 12 kΩ at 5 %
    row = next(line for line in out.splitlines() if line.startswith("BR-0013"))
    assert row.split()[1:5] == ["12", "kΩ", "±5", "%"]


def test_small_file_draws_rows_by_default(tmp_path: Path) -> None:
    result = runner.invoke(app, ["stock", "check", str(big_shelf(tmp_path, 150))])
    assert result.exit_code == 0, result.output
    assert "BR-0001" in result.stdout
    assert "rows not drawn" not in result.stdout


def test_big_file_json_has_every_part_and_the_counts(tmp_path: Path) -> None:
    result = runner.invoke(app, ["stock", "check", "--json", str(big_shelf(tmp_path))])
    assert result.exit_code == 0
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert len(payload["parts"]) == 243
    summary = payload["summary"]
    assert summary["tolerance_counts"] == {"1": 60, "5": 180}
    assert summary["polarity_counts"] == {"NPN": 3}
    assert summary["pieces"] == {"resistor": 21600, "transistor": 150}
    # E12 values only (IEC 60063), each counted in its coarsest series
    assert sum(summary["series_counts"].values()) == 240
    assert set(summary["series_counts"]) <= {"E3", "E6", "E12"}


def test_hidden_character_in_a_part_id_is_one_line_exit_2(tmp_path: Path) -> None:
    path = tmp_path / "shelf.csv"
    path.write_text("kind,part_id,value,tolerance_pct,power_w,qty\n"
                    "resistor,CF-4K7,4k7,5,0.25,10\nresistor,CF-4K7\u200b,4k7,5,0.25,500\n",
                    encoding="utf-8")
    result = runner.invoke(app, ["stock", "check", str(path)])
    assert result.exit_code == 2
    assert result.stderr.strip() == (
        f"{path}:3: column 'part_id': invisible character U+200B ZERO WIDTH SPACE at "
        "character 7; retype the field without it (text 'CF-4K7<U+200B>')")


def test_reading_progress_appears_only_after_its_delay() -> None:
    import io

    from rich.console import Console

    from stockbias.render.stock_table import ReadingProgress

    sink = io.StringIO()
    console = Console(file=sink, force_terminal=True, width=80)
    with ReadingProgress(console, "reading shelf", delay_s=3600.0) as late:
        late(10, 100)
    assert late.bar is None and sink.getvalue() == ""
    with ReadingProgress(console, "reading shelf", delay_s=0.0) as soon:
        soon(50, 100)
        assert soon.bar is not None
        assert soon.bar.tasks[0].completed == 50
        assert soon.bar.tasks[0].total == 100
    assert "reading shelf" in sink.getvalue()


def test_misspelt_header_is_one_line_exit_2(tmp_path: Path) -> None:
    shelf = tmp_path / "drawer.csv"
    shelf.write_text("kind,part_id,valeu,tolerance_pct,power_w,qty\n"
                     + "".join(f"resistor,R{i},1k,5,0.25,10\n" for i in range(12)))
    for columns in ("80", "120"):
        result = runner.invoke(app, ["stock", "check", str(shelf)], env={"COLUMNS": columns})
        assert result.exit_code == 2
        assert result.stdout == ""
        assert result.stderr.splitlines() == [
            f"{shelf}:1: column 'valeu': unknown column; did you mean 'value' (required for "
            "resistor rows)? A column the reader does not know is ignored with its data "
            "(text 'valeu')"]
