"""`stockbias sweep FOLDER -i STOCK [--without PART_ID]`: one summary for a folder of jobs."""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.samples import sample_path
from stockbias.search.board import stage_job
from stockbias.search.substitute import substitute
from stockbias.stock_io import read_inventory

runner = CliRunner(env={"COLUMNS": "120"})


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    d = tmp_path_factory.mktemp("jobs")
    for name in ("distribution_amp_board.toml", "line_driver_job.toml"):
        shutil.copy(sample_path(name), d / name)
    return d


def test_sweep_without_a_transistor_takes_substitutes_pick(folder: Path, tmp_path: Path) -> None:
    shelf = sample_path("workshop_drawers.csv")
    out = tmp_path / "sweep.csv"
    res = runner.invoke(app, ["sweep", str(folder), "-i", str(shelf), "--without", "QN-LB1",
                              "--json", "--csv", str(out)])
    assert res.exit_code == 0, res.output
    import jsonschema

    schema = Path(__file__).resolve().parent.parent / "stockbias" / "schemas"
    jsonschema.validate(json.loads(res.stdout),
                        json.loads((schema / "sweep.schema.json").read_text()))
    rows = json.loads(res.stdout)["stages"]
    assert [r["stage"] for r in rows] == ["input", "gain", "split", "line_out", "stage"]
    gain = rows[1]
    assert gain["current"] == "QN-LB1" and gain["verdict"] in ("drop-in", "rework")
    # reference: the substitute command's own ranking for that stage, struck part skipped
    job = load_job(folder / "distribution_amp_board.toml")
    st = next(s for s in job.stages if s.name == "gain")
    ref = substitute(stage_job(job, st), dict(st.values), "QN-LB1", read_inventory(shelf))
    best = next(c for c in ref.candidates if c.transistor.part_id != "QN-LB1" and c.fixed)
    assert gain["transistor"] == best.transistor.part_id
    assert gain["verdict"] == ("drop-in" if best.drop_in else "rework")
    assert [r["verdict"] for r in rows if r["stage"] != "gain"] == \
        ["unaffected", "unaffected", "unaffected", "not built"]
    with out.open() as fh:
        table = list(csv.DictReader(fh))
    assert [r["stage"] for r in table] == [r["stage"] for r in rows]
    text = runner.invoke(app, ["sweep", str(folder), "-i", str(shelf), "--without", "QN-LB1"])
    assert text.exit_code == 0
    assert f"gain (QN-LB1): {gain['verdict']} → {gain['transistor']}" in text.stdout
    assert "(5 stages)" in text.stdout


def test_sweep_says_when_no_substitute_exists(folder: Path, tmp_path: Path) -> None:
    lines = sample_path("workshop_drawers.csv").read_text().splitlines(keepends=True)
    keep = [ln for ln in lines if not ln.startswith("transistor,") or
            ln.startswith("transistor,QN-LB1,")]
    shelf = tmp_path / "one_transistor.csv"
    shelf.write_text("".join(keep))
    res = runner.invoke(app, ["sweep", str(folder), "-i", str(shelf), "--without", "QN-LB1"])
    assert res.exit_code == 1, res.output
    assert "gain (QN-LB1): none" in res.stdout


def test_sweep_input_errors(folder: Path, tmp_path: Path) -> None:
    shelf = str(sample_path("workshop_drawers.csv"))
    res = runner.invoke(app, ["sweep", str(folder), "-i", shelf, "--without", "QX-NONE"])
    assert res.exit_code == 2 and "QX-NONE" in res.output and "--without" in res.output
    empty = tmp_path / "empty"
    empty.mkdir()
    res = runner.invoke(app, ["sweep", str(empty), "-i", shelf])
    assert res.exit_code == 2 and "no job or board files" in res.output


def test_sweep_checks_every_built_stage_the_same_on_two_workers(folder: Path) -> None:
    shelf = str(sample_path("workshop_drawers.csv"))
    one = runner.invoke(app, ["sweep", str(folder), "-i", shelf, "--json"])
    two = runner.invoke(app, ["sweep", str(folder), "-i", shelf, "--json", "--workers", "2"])
    assert one.exit_code == two.exit_code == 0, one.output + two.output
    a, b = json.loads(one.stdout), json.loads(two.stdout)
    assert a == b
    # the board's prototype values meet every stage's limits (the board file says so, and
    # `stockbias check BOARD --stage NAME` agrees: test_cli_board)
    assert a["summary"] == {"passes": 4, "not built": 1}
