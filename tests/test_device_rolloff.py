"""β roll-off from device data changes the best design (the two sample jobs).

The characterised-parts shelf is read twice: as it is, and with its device-data columns
emptied (the hFE bins alone, at 1 mA).  For a 20 µA job the high-gain part's droop at low
current, and for a 40 mA job the other part's high-injection collapse, change the best
design; the design the bins alone choose then fails `check` with the device data.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app

SAMPLES = Path(__file__).resolve().parents[1] / "inventory_samples"
SHELF = SAMPLES / "characterised_parts.csv"


@pytest.fixture(scope="module")
def bins_only(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The shelf without model_name, model_file and curve_file (bins only)."""
    lines = SHELF.read_text().splitlines()
    header = next(i for i, line in enumerate(lines) if line.startswith("kind,"))
    cols = lines[header].split(",")
    drop = [cols.index(c) for c in ("model_name", "model_file", "curve_file")]
    out = []
    for i, line in enumerate(lines):
        if i > header and line.startswith("transistor,"):
            fields = line.split(",")
            for k in drop:
                fields[k] = ""
            line = ",".join(fields)
        out.append(line)
    path = tmp_path_factory.mktemp("bins") / "bins_only.csv"
    path.write_text("\n".join(out) + "\n")
    return path


def _best(job: str, shelf: Path) -> dict:
    result = CliRunner().invoke(app, ["design", str(SAMPLES / job), "-i", str(shelf),
                                      "--json", "--top", "1"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.output)
    assert data["status"] == "optimal"
    return data["designs"][0]


def _parts(design: dict) -> tuple[str, dict[str, str]]:
    return (design["transistor"]["part_id"],
            {role: part["part_id"] for role, part in design["parts"].items()})


@pytest.mark.slow
@pytest.mark.parametrize(("job", "bin_choice", "data_choice"), [
    # (job, transistor the bins choose, transistor the device data choose)
    ("sensor_preamp_job.toml", "QF-LC", "QF-LC"),
    ("cable_driver_job.toml", "QF-HC", "QF-PNP"),
])
def test_device_data_change_the_best_design(bins_only: Path, job: str, bin_choice: str,
                                            data_choice: str) -> None:
    by_bin = _parts(_best(job, bins_only))
    by_data = _parts(_best(job, SHELF))
    assert by_bin[0] == bin_choice and by_data[0] == data_choice
    assert by_bin != by_data
    # the bins' choice, checked with the device data, fails the job
    values = ",".join(f"{role}={pid}" for role, pid in by_bin[1].items())
    result = CliRunner().invoke(app, ["check", str(SAMPLES / job), "-i", str(SHELF),
                                      "-v", values, "-t", by_bin[0], "--json"])
    assert result.exit_code == 1, result.output
    failed = [c["name"] for c in json.loads(result.output)["constraints"] if not c["ok"]]
    assert failed
