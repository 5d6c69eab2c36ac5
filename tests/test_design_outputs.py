"""`design --plot` and `--report`: the files a bench engineer takes away."""

from __future__ import annotations

from pathlib import Path

from typer.testing import CliRunner

from stockbias.cli.app import app

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"


def test_design_plot_and_report(tmp_path: Path) -> None:
    res = CliRunner().invoke(app, ["design", str(SAMPLES / "line_driver_job.toml"), "-i",
                                   str(SAMPLES / "workshop_drawers.csv"), "--top", "3",
                                   "--plot", str(tmp_path), "--report",
                                   str(tmp_path / "d.html")])
    assert res.exit_code == 0, res.output
    png = tmp_path / "design_cost_margin.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    html = (tmp_path / "d.html").read_text()
    assert "Rank 1: divider" in html and "Status: optimal" in html
    assert "data:image/png;base64," in html   # plots embedded, no external files


def test_saved_result_feeds_export(tmp_path: Path) -> None:
    saved = tmp_path / "best.json"
    runner = CliRunner()
    job, shelf = str(SAMPLES / "line_driver_job.toml"), str(SAMPLES / "workshop_drawers.csv")
    res = runner.invoke(app, ["design", job, "-i", shelf, "--top", "2", "--save", str(saved)])
    assert res.exit_code == 0, res.output
    out = runner.invoke(app, ["export", job, "-i", shelf, "--from", str(saved), "--rank", "2",
                              "--netlist", str(tmp_path / "r2.cir"), "--json"])
    assert out.exit_code == 0, out.output
    assert "design rank 2 of" in out.stdout
    assert (tmp_path / "r2.cir").read_text().count(".model") == 1
