"""Pick list: pieces per line for the build, by location, with what stays on the shelf."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

from rich.console import Console
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.render.pick_list import PICK_LIST_COLUMNS, pick_list_csv, render_pick_list
from stockbias.selection import Selection, bench_needs, resolve_selection
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"
runner = CliRunner()


def needs(values: dict[str, str], quantity: int = 10):
    job, inv = load_job(JOB), read_inventory(SHELF)
    parts, t = resolve_selection(job, Selection("divider", "QN-GP40", values, "t"), inv)
    return bench_needs(parts, t, quantity)


def test_csv_by_location_with_remaining_stock() -> None:
    rows = list(csv.DictReader(io.StringIO(pick_list_csv(needs(
        {"R1": "CF-22K+CF-22K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "MF-1K00"})))))
    assert list(rows[0]) == list(PICK_LIST_COLUMNS)
    assert [r["location"] for r in rows] == ["A5", "B1", "B2", "C1", "D1"]  # walk order
    by_id = {r["part_id"]: r for r in rows}
    # workshop_drawers.csv: CF-22K 45 in stock, two per board × 10 boards
    assert by_id["CF-22K"]["per_board"] == "2" and by_id["CF-22K"]["pull"] == "20"
    assert by_id["CF-22K"]["remaining"] == "25"
    assert by_id["QN-GP40"]["pull"] == "10" and by_id["QN-GP40"]["remaining"] == "110"


def test_short_and_off_stock_lines_are_marked() -> None:
    lines = needs({"R1": "CF-470K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "9k1"}, quantity=12)
    console = Console(file=io.StringIO(), width=160)
    render_pick_list(console, lines, 12)
    out = console.file.getvalue()
    assert "short" in out and "CF-470K needs 12, 10 in stock" in out
    assert "not in stock" in out
    rows = list(csv.DictReader(io.StringIO(pick_list_csv(lines))))
    assert rows[-1]["part_id"] == "" and rows[-1]["in_stock"] == ""  # off stock, last


def test_cli_check_and_export_write_the_pick_list(tmp_path: Path) -> None:
    args = ["-i", str(SHELF), "-v", "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0", "-t",
            "QN-GP40"]
    out1 = tmp_path / "check.csv"
    result = runner.invoke(app, ["check", str(JOB), *args, "--samples", "0", "--json",
                                 "--pick-list", str(out1)])
    assert result.exit_code == 1  # the design fails its window; the list is still written
    json.loads(result.stdout)  # JSON alone on stdout; the file notice went to stderr
    assert f"Pick list written: {out1}" in result.stderr
    out2 = tmp_path / "export.csv"
    result = runner.invoke(app, ["export", str(JOB), *args, "--pick-list", str(out2)])
    assert result.exit_code == 0, result.output
    assert "Pick list for 10 board(s), by location" in result.stdout
    assert out1.read_text() == out2.read_text()
