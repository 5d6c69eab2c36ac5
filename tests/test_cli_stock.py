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
