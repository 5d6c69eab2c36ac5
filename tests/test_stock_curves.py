"""`stockbias stock curves`: device data shown, fitted residuals, plots."""

from __future__ import annotations

import json
from pathlib import Path

from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.render.device_plots import curve_figure
from stockbias.stock_io import read_inventory

SHELF = Path(__file__).resolve().parents[1] / "inventory_samples" / "characterised_parts.csv"


def _run(*args: str, columns: int = 80):
    return CliRunner().invoke(app, ["stock", "curves", str(SHELF), *args],
                              env={"COLUMNS": str(columns)})


def test_terminal_lists_every_device_with_its_source() -> None:
    for columns in (80, 120):
        result = _run(columns=columns)
        assert result.exit_code == 0, result.output
        out = result.output
        for part in ("QF-LC", "QF-HC", "QF-PNP"):
            assert f"{part}: " in out
        assert "QF-GP" not in out  # bin only: no device data
        assert "fit to 18 points" in out
        assert "card FH_HC_NPN in device_data/fernhill_models.lib (line 5)" in out.replace(
            "\n", " ").replace("  ", " ")
        assert max(len(line) for line in out.splitlines()) <= columns


def test_json_gives_parameters_and_residuals() -> None:
    result = _run("--json")
    assert result.exit_code == 0, result.output
    devices = {d["part_id"]: d for d in json.loads(result.output)["devices"]}
    lc = devices["QF-LC"]
    assert lc["kind"] == "curve" and lc["points"] == 18
    # the sample points were written to 3 significant figures from an invented card:
    # the fit must meet them to well within the 10 % / 10 mV refusal tolerance
    assert lc["worst_hfe_error"] < 0.01 and lc["worst_vbe_error_v"] < 0.002
    assert set(lc["fitted"]) >= {"bf", "ise", "ne", "ikf", "is", "xtb", "xti"}
    hc = devices["QF-HC"]
    assert hc["kind"] == "card" and hc["params"]["ikf"] == 12e-3
    assert hc["hfe_min"] < 0.2 * hc["bin"]["hfe_min"]


def test_part_filter_and_errors() -> None:
    result = _run("--part", "qf-hc", "--json")
    assert result.exit_code == 0, result.output
    assert [d["part_id"] for d in json.loads(result.output)["devices"]] == ["QF-HC"]
    result = _run("--part", "QF-GP")
    assert result.exit_code == 2
    assert "option '--part': this transistor has no model card" in result.output
    result = _run("--part", "NOPE")
    assert result.exit_code == 2 and "no transistor with this part id" in result.output


def test_plots_written(tmp_path: Path) -> None:
    result = _run("--plot", str(tmp_path / "plots"))
    assert result.exit_code == 0, result.output
    names = sorted(p.name for p in (tmp_path / "plots").iterdir())
    assert names == sorted(f"curves_{p}.{x}" for p in ("QF-LC", "QF-HC", "QF-PNP")
                           for x in ("png", "svg"))
    again = _run("--plot", str(tmp_path / "plots"))
    assert again.exit_code == 2  # files exist: --force needed


def test_plot_shows_points_and_curves_with_the_legend_beside_the_axes() -> None:
    inv = read_inventory(SHELF)
    lc = next(t for t in inv.transistors if t.part_id == "QF-LC")
    fig = curve_figure(lc)
    ax_h = fig.axes[0]
    labels = [line.get_label() for line in ax_h.get_lines()]
    assert labels.count("datasheet points 25 °C") == 1
    assert sum("(fit)" in label for label in labels) == 3
    fig.canvas.draw()
    legend = ax_h.get_legend().get_window_extent()
    axes = ax_h.get_window_extent()
    assert legend.x0 >= axes.x1  # never over the curves
