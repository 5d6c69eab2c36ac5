"""Every command's --json output matches the JSON Schema kept in stockbias/schemas/."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMAS = ROOT / "stockbias" / "schemas"
JOB = str(ROOT / "tests" / "data" / "line_driver_dc.toml")   # DC window and limits only
VALUES = "R1=MF-2K49,R2=CF-4K7,RE=CF-4K7,RC=CF-680R"
runner = CliRunner()


def schema(name: str) -> dict:
    return json.loads((SCHEMAS / f"{name}.schema.json").read_text())


@pytest.mark.parametrize("name", sorted(p.name for p in SCHEMAS.glob("*.schema.json")))
def test_schemas_are_valid_json_schema(name: str) -> None:
    jsonschema.Draft202012Validator.check_schema(json.loads((SCHEMAS / name).read_text()))


def test_export_json(tmp_path: Path) -> None:
    out = tmp_path / "stage.cir"
    result = runner.invoke(app, ["export", JOB, "-i", str(SAMPLES / "workshop_drawers.csv"),
                                 "--values", VALUES, "-t", "QN-GP40", "--netlist", str(out),
                                 "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("export"))
    assert out.is_file()


def test_reserve_json(tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    shutil.copy(SAMPLES / "workshop_drawers.csv", shelf)
    result = runner.invoke(app, ["stock", "reserve", str(shelf), "--job", JOB, "--values", VALUES,
                                 "-t", "QN-GP40", "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("reserve"))
    # ten boards: RE and R2 are both CF-4K7, so that line gives 2 × 10 pieces
    change = {c["part_id"]: c for c in payload["changes"]}
    assert change["CF-4K7"]["taken"] == 20
    assert payload["written"] is True
