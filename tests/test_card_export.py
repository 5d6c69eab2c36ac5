"""Exported netlists carry a stock row's model card, and ngspice finds check's point.

ngspice-39 (Debian package) runs the exported text unchanged; check's exponential-model
nominal point uses the card as given, so the two agree to 1e-5 in IC (the agreement the
card model is built to; measured about 1e-7).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias import analyze
from stockbias.analysis.spice import run_ngspice_plots
from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.stock_io import read_inventory

SAMPLES = Path(__file__).resolve().parents[1] / "inventory_samples"
SHELF = SAMPLES / "characterised_parts.csv"
RTOL = 1e-5

CASES = {
    # name: (job, transistor, values)
    "card-PNP-40mA": ("cable_driver_job.toml", "QF-PNP",
                      "R1=CF-1k5,R2=CF-470R,RE=CF-56R,RC=CF-47R"),
    "card-NPN-high-injection": ("cable_driver_job.toml", "QF-HC",
                                "R1=CF-820R,R2=CF-270R,RE=CF-68R,RC=CF-27R"),
    "fitted-points-NPN-20uA": ("sensor_preamp_job.toml", "QF-LC",
                               "R1=CF-820k,R2=CF-560k,RE=CF-150k,RC=CF-100k"),
}


def _exponential(tmp_path: Path, job: str) -> Path:
    text = (SAMPLES / job).read_text().replace('[search]\n', '[search]\nmodel = "exponential"\n')
    path = tmp_path / job
    path.write_text(text)
    return path


@pytest.mark.spice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed")
@pytest.mark.parametrize("name", sorted(CASES))
def test_exported_card_reproduces_checks_point(tmp_path: Path, name: str) -> None:
    job_name, transistor, assignment = CASES[name]
    path = _exponential(tmp_path, job_name)
    out = tmp_path / "stage.cir"
    result = CliRunner().invoke(app, ["export", str(path), "-i", str(SHELF), "-v", assignment,
                                      "-t", transistor, "--netlist", str(out)])
    assert result.exit_code == 0, result.output
    text = out.read_text()
    model = next(x for x in text.splitlines() if x.startswith(".model"))
    assert "as given" in text
    inv = read_inventory(SHELF)
    q = inv.find_transistor(transistor)
    assert "ISE=" in model and "IKF=" in model
    assert f"TNOM={q.card.params.get('tnom', 27.0):g}" in model
    check = analyze(load_job(path), dict(x.split("=", 1) for x in assignment.split(",")),
                    transistor, inv, samples=0)
    assert check.nominal["region"] == "active"
    op = dict(run_ngspice_plots(text))["Operating Point"]
    sign = 1.0 if q.polarity == "NPN" else -1.0
    assert sign * op["i(v_ic)"][0] == pytest.approx(float(check.nominal["ic"]), rel=RTOL)
