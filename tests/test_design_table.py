"""The ranked designs as blocks: at 80 and 120 columns no block line is wider than the
terminal and no value or part id is cut (every part id of the JSON result appears whole)."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.render.design_table import design_block

ROOT = Path(__file__).resolve().parent.parent
JOB = ROOT / "inventory_samples" / "line_driver_job.toml"
SHELF = ROOT / "inventory_samples" / "workshop_drawers.csv"


@pytest.fixture(scope="module")
def designs() -> list[dict]:
    res = CliRunner().invoke(app, ["design", str(JOB), "-i", str(SHELF), "--json"])
    assert res.exit_code == 0, res.output
    return json.loads(res.stdout)["designs"]


@pytest.mark.parametrize("width", [80, 120])
def test_blocks_fit_the_terminal_and_cut_nothing(designs: list[dict], width: int) -> None:
    res = CliRunner(env={"COLUMNS": str(width)}).invoke(
        app, ["design", str(JOB), "-i", str(SHELF)])
    assert res.exit_code == 0, res.output
    out = res.stdout
    assert "…" not in out.replace(" … ", "")          # the range's ellipsis only
    for d in designs:
        block = design_block(d, width)
        assert all(len(line) <= width for line in block)
        for line in block:
            assert line in out
        text = "\n".join(block)
        for part in d["parts"].values():
            ids = part["part_id"] if isinstance(part["part_id"], list) else [part["part_id"]]
            for pid in ids:
                assert re.search(rf"(?<![\w-]){re.escape(pid)}(?![\w-])", text)
        assert d["transistor"]["part_id"] in block[0]


def test_block_escapes_markup_and_controls() -> None:
    d = {"rank": 1, "topology": "divider", "transistor": {"part_id": "[red]Q1"},
         "polarity": "NPN", "cost": 0.1, "part_count": 4, "distinct_values": 4,
         "parts": {"R1": {"part_id": "[bag 1]\x1b[2J", "value_ohm": 4700.0}}, "absent": [],
         "worst_case": {"ic": {"min": 1e-3, "max": 2e-3}, "vce": {"min": 3.0}},
         "ic_margin": 0.05}
    block = design_block(d, 80)
    assert "\x1b" not in "".join(block)
    assert r"\[red]Q1" in block[0]                     # rich shows it as written
