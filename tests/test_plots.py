"""Plots: the files exist, are valid PNG and SVG and carry real content (pixels not tested)."""

from __future__ import annotations

import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.job import load_job
from stockbias.render.plots import (
    design_margin_figure,
    ic_histogram_figure,
    qpoint_figure,
    write_check_plots,
    write_design_plots,
)
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"
VALUES = {"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
runner = CliRunner()


def assert_plot_files(paths: list[Path]) -> None:
    for path in paths:
        data = path.read_bytes()
        assert len(data) > 10_000, path  # a drawn figure, not an empty canvas
        if path.suffix == ".png":
            assert data.startswith(PNG_MAGIC)
        else:
            root = ET.fromstring(data)
            assert root.tag.endswith("svg")


@pytest.fixture(scope="module")
def result():
    return analyze(load_job(JOB), VALUES, "QN-GP40", read_inventory(SHELF), samples=2000)


def test_check_plots_png_and_svg(tmp_path: Path, result) -> None:
    paths = write_check_plots(result, load_job(JOB), tmp_path / "plots")
    assert sorted(p.name for p in paths) == ["ic_histogram.png", "ic_histogram.svg",
                                             "qpoints.png", "qpoints.svg"]
    assert_plot_files(paths)
    svg = (tmp_path / "plots" / "qpoints.svg").read_text()
    assert "<script" not in svg


def test_histogram_needs_monte_carlo() -> None:
    res = analyze(load_job(JOB), VALUES, "QN-GP40", read_inventory(SHELF), samples=0)
    with pytest.raises(InputError, match="needs Monte Carlo boards"):
        ic_histogram_figure(res, load_job(JOB))


def test_design_plot_from_a_hand_made_list(tmp_path: Path) -> None:
    designs = [
        {"rank": 1, "topology": "divider", "cost": 0.07, "ic_margin": 0.02},
        {"rank": 2, "topology": "collector_feedback", "cost": 0.09, "ic_margin": 0.1333},
        {"rank": 3, "topology": "divider", "cost": 0.11, "ic_margin": -0.0067},
    ]
    paths = write_design_plots(designs, tmp_path)
    assert [p.name for p in paths] == ["design_cost_margin.png", "design_cost_margin.svg"]
    assert_plot_files(paths)
    with pytest.raises(InputError, match="no design with a cost and an IC margin"):
        design_margin_figure([{"rank": 1, "cost": 0.1}])


def test_cli_check_plot_names_the_files(tmp_path: Path) -> None:
    out = tmp_path / "figs"
    result = runner.invoke(app, ["check", str(JOB), "-i", str(SHELF), "-v",
                                 ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t",
                                 "QN-GP40", "--samples", "500", "--plot", str(out)])
    assert result.exit_code == 1  # this design fails its window (tests/test_check.py)
    assert "Plots written: " in result.stdout
    flat = "".join(result.stdout.split())          # the console may wrap long paths
    for name in ("qpoints.png", "qpoints.svg", "ic_histogram.png", "ic_histogram.svg"):
        assert "".join(str(out / name).split()) in flat
    assert_plot_files(sorted(out.iterdir()))


def test_cli_plot_into_a_file_is_refused(tmp_path: Path) -> None:
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    result = runner.invoke(app, ["check", str(JOB), "-i", str(SHELF), "-v",
                                 ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t",
                                 "QN-GP40", "--samples", "0", "--plot", str(blocker)])
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1 and "afile" in result.stderr


def test_importing_the_package_does_not_import_matplotlib() -> None:
    code = ("import sys, stockbias, stockbias.render.plots, stockbias.render.report, "
            "stockbias.cli.app; print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=ROOT)
    assert out.stdout.strip() == "False"


def _label_boxes(fig) -> dict[str, object]:
    renderer = fig.canvas.get_renderer()
    return {t.get_text(): t.get_window_extent(renderer) for t in fig.axes[0].texts}


def test_design_plot_labels_tied_designs_once() -> None:
    """Designs at the same cost and margin share one label; no two labels overlap."""
    def d(rank: int, cost: float, margin: float) -> dict:
        return {"rank": rank, "cost": cost, "topology": "divider", "ic_margin": margin}
    fig = design_margin_figure([d(1, 0.1, 0.02), d(2, 0.1, 0.02), d(3, 0.1, 0.05),
                                d(4, 0.2, 0.02)])
    boxes = _label_boxes(fig)
    assert sorted(boxes) == ["#1, #2", "#3", "#4"]
    names = sorted(boxes)
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            assert not boxes[a].overlaps(boxes[b]), (a, b)


@pytest.mark.parametrize("margins", [
    (0.020, 0.0201, 0.0202, 0.0203),   # four designs at one cost, margins 0.01 % apart
    (0.050, 0.050, 0.0501, 0.0499),    # two exact ties and two near ones
])
def test_design_plot_labels_of_near_ties_do_not_stack(margins) -> None:
    """Equal costs with nearly equal margins: the labels are moved apart until no two
    overlap (measured on the laid-out figure), and each still names its ranks."""
    designs = [{"rank": i + 1, "cost": 0.12, "topology": "divider", "ic_margin": m}
               for i, m in enumerate(margins)]
    fig = design_margin_figure(designs)
    boxes = _label_boxes(fig)
    shown = sorted(r for text in boxes for r in text.split(", "))
    assert shown == [f"#{i + 1}" for i in range(len(margins))]  # every rank once
    names = list(boxes)
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            assert not boxes[a].overlaps(boxes[b]), (a, b)
    assert len({round(b.y0, 3) for b in boxes.values()}) == len(boxes)  # distinct heights


def test_histogram_legend_covers_no_bar(result) -> None:
    """The legend sits where no bar is: its box meets neither the tallest bar nor the
    histogram's outline anywhere, measured on the rendered figure."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.patches import StepPatch
    from matplotlib.transforms import Bbox

    fig = ic_histogram_figure(result, load_job(JOB))
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    renderer = canvas.get_renderer()
    ax = fig.axes[0]
    steps = [p for p in ax.patches if isinstance(p, StepPatch)]
    assert len(steps) == 1, "the histogram is drawn"
    data = steps[0].get_data()
    counts, edges = np.asarray(data.values), np.asarray(data.edges)
    i = int(np.argmax(counts))
    tallest = Bbox(ax.transData.transform([(edges[i], 0.0), (edges[i + 1], counts[i])]))
    legends = [*fig.legends, *([ax.get_legend()] if ax.get_legend() else [])]
    assert len(legends) == 1
    legend_box = legends[0].get_window_extent(renderer)
    assert not legend_box.overlaps(tallest)
    assert not legend_box.overlaps(steps[0].get_window_extent(renderer))
    texts = [t.get_text() for t in legends[0].get_texts()]
    assert any("target window" in t for t in texts)
    assert any(t.startswith("worst-case min") for t in texts)


def test_load_lines_at_the_supply_extremes_differ(result) -> None:
    """Nominal, low and high supply load lines: three styles, one legend entry each."""
    fig = qpoint_figure(result, load_job(JOB))
    lines = {ln.get_label(): ln for ln in fig.axes[0].get_lines()
             if ln.get_label().startswith("DC load line")}
    by_name = {name: next(ln for lbl, ln in lines.items() if f", {name} supply" in lbl)
               for name in ("nominal", "low", "high")}
    styles = {name: ln.get_linestyle() for name, ln in by_name.items()}
    assert len(set(styles.values())) == 3, styles
    # 12 V ±5 %: the low line starts at 11.4 V, the high at 12.6 V on the VCE axis (job file)
    assert by_name["low"].get_xdata()[1] == pytest.approx(11.4)
    assert by_name["high"].get_xdata()[1] == pytest.approx(12.6)
    entries = [t.get_text() for t in fig.legends[0].get_texts()]
    for name in ("nominal", "low", "high"):
        assert sum(f", {name} supply" in e for e in entries) == 1


def test_design_plot_margin_is_percent_of_target() -> None:
    """The x axis is the designs' ic_margin in % of the target (one unit with the tables)."""
    fig = design_margin_figure([{"rank": 1, "cost": 0.1, "topology": "divider",
                                 "ic_margin": 0.0425}])
    ax = fig.axes[0]
    xs = ax.collections[0].get_offsets()[:, 0]
    assert list(xs) == pytest.approx([4.25], abs=1e-12)   # hand calculation: 0.0425 → 4.25 %
    assert "% of the target" in ax.get_xlabel()
    assert "IC target" in ax.get_xlabel() and "min(" in ax.get_xlabel()
