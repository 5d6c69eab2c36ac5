"""The HTML report: one self-contained file, text escaped, and it renders in headless Chromium."""

from __future__ import annotations

import base64
import re
import shutil
import subprocess
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.render.report import CAUTION_FOOTER, render_report, render_report_html
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"
VALUES = "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0"
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
runner = CliRunner()


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict[str, str | None]]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))


@pytest.fixture(scope="module")
def check_result():
    job = load_job(JOB)
    return job, analyze(job, dict(x.split("=") for x in VALUES.split(",")), "QN-GP40",
                        read_inventory(SHELF), samples=1000)


def test_report_is_self_contained_and_complete(check_result) -> None:
    job, res = check_result
    inv = read_inventory(SHELF)
    text = render_report_html(title="Bench check", job=job, inventory=inv,
                              checks=[("Check", res)],
                              designs=[{"rank": 1, "topology": "divider", "cost": 0.05,
                                        "transistor": {"part_id": "QN-GP40"},
                                        "parts": {"R1": {"part_id": ["CF-22K", "CF-22K"],
                                                         "value_ohm": 44e3,
                                                         "arrangement": "series"}},
                                        "ic_margin": 0.0667}])
    parser = _Tags()
    parser.feed(text)
    tags = [t for t, _ in parser.tags]
    assert "script" not in tags and "link" not in tags and "iframe" not in tags
    images = [a["src"] for t, a in parser.tags if t == "img"]
    assert len(images) == 3  # Q-points, IC histogram, cost against margin
    for src in images:
        assert src is not None and src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1]).startswith(PNG_MAGIC)
    assert not re.search(r"(src|href)=\"(https?:)?//", text)  # nothing from the network
    assert inv.sha256 in text and str(JOB) in text and str(SHELF) in text
    assert "CF-22K+CF-22K" in text
    assert "6.67 %" in text   # the design's ic_margin 0.0667 in % of the target
    assert "min(IC worst-case min − IC min, IC max − IC worst-case max) / IC target" in text
    # failures first in the constraints table
    table = text.split("Constraints at the worst corner", 1)[1]
    assert table.index("FAIL") < table.index('class="ok"')
    for item in (*res.assumptions, *res.cautions):
        assert item.replace("'", "&#x27;") in text or item in text
    assert CAUTION_FOOTER in text


def test_text_from_user_files_is_escaped(tmp_path: Path, check_result) -> None:
    job, res = check_result
    hostile = replace(job, path="<script>alert(1)</script>.toml")
    text = render_report_html(title="<b>x</b> & y", job=hostile, checks=[("<i>c</i>", res)],
                              plots=False, notes=["<img src=x onerror=alert(1)>"])
    assert "<script>" not in text and "<img src=x" not in text and "<b>x</b>" not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;.toml" in text
    assert "&lt;b&gt;x&lt;/b&gt; &amp; y" in text


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.skipif(_chromium() is None,
                    reason="chromium is not installed (scripts/setup.sh --test installs it)")
def test_report_renders_in_headless_chromium(tmp_path: Path) -> None:
    report = tmp_path / "report.html"
    result = runner.invoke(app, ["check", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t",
                                 "QN-GP40", "--samples", "1000", "--report", str(report)])
    assert result.exit_code == 1, result.output  # the design fails; the report is written
    assert f"Report written: {report}" in result.stdout
    shot = tmp_path / "shot.png"
    profile = tmp_path / "profile"
    proc = subprocess.run(
        [_chromium(), "--headless", "--no-sandbox", "--disable-gpu",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--no-first-run", f"--user-data-dir={profile}", f"--screenshot={shot}",
         "--window-size=1200,2000", report.resolve().as_uri()],
        capture_output=True, text=True, timeout=180, check=False, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    data = shot.read_bytes()
    assert data.startswith(PNG_MAGIC) and len(data) > 20_000  # a rendered page, not blank
    # the page itself raised no errors in the console
    assert "Uncaught" not in proc.stderr and "ERR_FILE_NOT_FOUND" not in proc.stderr


def test_render_report_writes_the_file(tmp_path: Path, check_result) -> None:
    job, res = check_result
    out = render_report(tmp_path / "r.html", title="t", job=job, checks=[("c", res)],
                        plots=False)
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")


def test_cli_report_into_a_missing_folder_is_one_line_exit_2(tmp_path: Path) -> None:
    result = runner.invoke(app, ["check", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t",
                                 "QN-GP40", "--samples", "0",
                                 "--report", str(tmp_path / "no" / "r.html")])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "--report" in lines[0] and "does not exist" in lines[0], lines
