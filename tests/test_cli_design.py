"""`stockbias design`: exit codes, JSON alone on stdout against its schema, explanations."""

from __future__ import annotations

import json
import re
from pathlib import Path

import jsonschema
from typer.testing import CliRunner

from stockbias.cli.app import app

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "design.schema.json").read_text())
JOB = SAMPLES / "line_driver_job.toml"
SHELF = SAMPLES / "workshop_drawers.csv"

runner = CliRunner()


def test_design_json_schema_and_ranks(tmp_path: Path) -> None:
    saved = tmp_path / "result.json"
    result = runner.invoke(app, ["design", str(JOB), "--inventory", str(SHELF), "--top", "3",
                                 "--json", "--save", str(saved)])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)          # nothing but JSON on stdout
    jsonschema.validate(payload, SCHEMA)
    assert payload["status"] == "optimal"
    assert [d["rank"] for d in payload["designs"]] == [1, 2, 3]
    costs = [d["cost_micro"] for d in payload["designs"]]
    assert costs == sorted(costs)                # cost is the first objective of the job
    assert all(d["ok"] for d in payload["designs"])
    assert json.loads(saved.read_text()) == payload


def test_design_table_exit_0() -> None:
    result = runner.invoke(app, ["design", str(JOB), "--inventory", str(SHELF), "--top", "2"])
    assert result.exit_code == 0, result.output
    assert "Ranked designs" in result.output and "optimal" in result.output


def test_infeasible_exit_1_with_explanation(tmp_path: Path) -> None:
    job = tmp_path / "tight.toml"
    job.write_text(re.sub(r"ic_window_pct = \d+", "ic_window_pct = 3", JOB.read_text()))
    result = runner.invoke(app, ["design", str(job), "--inventory", str(SHELF), "--json"])
    assert result.exit_code == 1
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["status"] == "infeasible" and payload["designs"] == []
    ex = payload["explanation"]
    assert ex["binding"] in ("ic_min", "ic_max")
    assert ex["misses"] and ex["misses"][0]["margin"] < 0        # a computed shortfall
    assert ex["relaxation"]["kind"] == "wider_window"
    # the suggested window is wider than the job's ±3 % (source: the job file)
    assert ex["relaxation"]["ic_min_a"] < 1.5e-3 * 0.97
    text = runner.invoke(app, ["design", str(job), "--inventory", str(SHELF)])
    assert text.exit_code == 1 and "What would help" in text.output


def test_no_transistor_explained(tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    lines = [ln for ln in SHELF.read_text().splitlines() if not ln.startswith("transistor")]
    shelf.write_text("\n".join(lines) + "\n")
    result = runner.invoke(app, ["design", str(JOB), "--inventory", str(shelf), "--json"])
    assert result.exit_code == 1
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["explanation"]["binding"] == "transistor_ratings"


def test_bad_input_one_line_exit_2(tmp_path: Path) -> None:
    job = tmp_path / "bad.toml"
    job.write_text(JOB.read_text().replace('topology = "divider"', 'topology = "ladder"'))
    result = runner.invoke(app, ["design", str(job), "--inventory", str(SHELF)])
    assert result.exit_code == 2
    assert len(result.output.strip().splitlines()) == 1
    assert "Traceback" not in result.output
    missing = runner.invoke(app, ["design", str(JOB)])
    assert missing.exit_code == 2
