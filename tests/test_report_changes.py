"""The consolidation and substitution reports, and the limit column of every report.

Assertions read the HTML text (parsed into table rows).  Expected values come from the
result objects the same run returns (the report must show what the search found), from
the board file (today's parts) and, for the signs, from each constraint's kind (a "min"
limit holds at or above, a "max" limit at or below, as the terminal shows them).
"""

from __future__ import annotations

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
from stockbias.render.report import render_report_html
from stockbias.search.consolidate import consolidate
from stockbias.search.keep_purpose import FIGURE_LABELS, change_text
from stockbias.search.substitute import substitute
from stockbias.stock_io import read_inventory
from stockbias.units import format_quantity

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
BOARD = SAMPLES / "distribution_amp_board.toml"
JOB = SAMPLES / "line_driver_job.toml"
VALUES = {"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
runner = CliRunner()


class _Tables(HTMLParser):
    """Every table as (title: the h2/h3 before it, rows of cell texts)."""

    def __init__(self) -> None:
        super().__init__()
        self.tables: list[tuple[str, list[list[str]]]] = []
        self._heading = ""
        self._in_heading = False
        self._cell: list[str] | None = None
        self._row: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list) -> None:
        if tag in ("h2", "h3"):
            self._in_heading, self._heading = True, ""
        elif tag == "table":
            self.tables.append((self._heading, []))
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag in ("h2", "h3"):
            self._in_heading = False
        elif tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.tables[-1][1].append(self._row)
            self._row = None

    def handle_data(self, data: str) -> None:
        if self._in_heading:
            self._heading += data
        if self._cell is not None:
            self._cell.append(data)


def tables(text: str) -> dict[str, list[list[str]]]:
    p = _Tables()
    p.feed(text)
    out: dict[str, list[list[str]]] = {}
    for title, rows in p.tables:
        out.setdefault(title.strip(), rows)
    return out


@pytest.fixture(scope="module")
def consolidation():
    job, inv = load_job(BOARD), read_inventory(SHELF)
    result = consolidate(job, inv)
    assert result.after is not None
    return job, inv, result


@pytest.fixture(scope="module")
def consolidation_html(consolidation):
    job, inv, result = consolidation
    checks = [(f"Stage {s.name} after", s.check) for s in result.after.stages]
    return render_report_html(title="Consolidation", job=job, inventory=inv, checks=checks,
                              consolidation=result, plots=False)


def test_consolidation_report_has_the_bom_before_and_after(consolidation,
                                                           consolidation_html) -> None:
    _job, _inv, result = consolidation
    t = tables(consolidation_html)
    before, after = t["BOM before"], t["BOM after"]
    assert [r[0] for r in before[1:]] == [r["part_id"] for r in result.before_bom]
    assert [r[0] for r in after[1:]] == [r["part_id"] for r in result.after.bom]
    for row, line in zip(after[1:], result.after.bom, strict=True):
        assert row[3] == str(line["placements"]) and row[7] == ", ".join(line["uses"])
    assert (f"Before: {result.before['bom_lines']} BOM lines" in consolidation_html)
    saved = result.before["bom_lines"] - result.after.bom_lines
    assert f"{saved} BOM line(s) fewer" in consolidation_html


def test_consolidation_report_lists_every_change_per_stage(consolidation,
                                                           consolidation_html) -> None:
    job, inv, result = consolidation
    rows = tables(consolidation_html)["What changes, per stage"]
    assert rows[0] == ["stage", "role", "today", "after"]
    shown = {(r[0], r[1]): (r[2], r[3]) for r in rows[1:]}
    n_changes = 0
    for stage, s in zip(job.stages, result.after.stages, strict=True):
        if not s.changed:
            assert shown[(s.name, "")] == ("no change", "")
        for role, new in s.changed.items():
            n_changes += 1
            today, after = shown[(s.name, role)]
            old = inv.find_resistor(stage.values[role])   # the board file's part id
            assert old is not None
            assert f"({old.part_id})" in today
            assert format_quantity(old.value_ohm, "ohm") in today
            assert f"({new['part_id']})" in after
            assert format_quantity(new["value_ohm"], "ohm") in after
    assert n_changes == result.after.changes == len(rows) - 1 - sum(
        1 for s in result.after.stages if not s.changed)


def test_consolidation_report_shows_each_stage_purpose_today_and_after(
        consolidation, consolidation_html) -> None:
    _job, _inv, result = consolidation
    rows = tables(consolidation_html)["What each stage does: today → after"]
    assert rows[0][1:5] == [label for label, _u in FIGURE_LABELS.values()]
    by_stage = {r[0]: r for r in rows[1:]}
    for held in result.purpose:
        row = by_stage[held.stage]
        for i, (key, (_label, unit)) in enumerate(FIGURE_LABELS.items(), start=1):
            assert row[i] == change_text(held.before[key], held.after[key], unit)
        assert "|gain|" in row[5] and "input resistance ≥" in row[5]


def test_consolidation_report_escapes_file_text(consolidation) -> None:
    job, _inv, result = consolidation
    hostile = replace(result, kept=["<script>alert(1)</script>@x"])
    text = render_report_html(title="c", job=job, consolidation=hostile, plots=False)
    assert "<script>" not in text and "&lt;script&gt;alert(1)&lt;/script&gt;@x" in text


@pytest.fixture(scope="module")
def substitution():
    job, inv = load_job(JOB), read_inventory(SHELF)
    return job, inv, substitute(job, VALUES, "QN-GP40", inv, samples=0)


def test_substitution_report_says_each_verdict_once_and_unnumbered(substitution) -> None:
    job, inv, result = substitution
    text = render_report_html(title="s", job=job, inventory=inv, substitution=result,
                              plots=False)
    assert not re.search(r"<li>\s*\d+\.\s", text)       # no list item numbered by hand
    rows = tables(text)["Stock transistors, best first"]
    assert [r[0] for r in rows[1:]] == [str(i) for i in range(1, len(result.candidates) + 1)]
    assert [r[1].split(" ")[0] for r in rows[1:]] == [c.transistor.part_id
                                                      for c in result.candidates]
    for row, c in zip(rows[1:], result.candidates, strict=True):
        if c.ruled_out:
            assert row[2] == "ruled out" and row[6] == c.ruled_out
        elif c.drop_in:
            assert row[2] == "drop-in"
        elif c.changes:
            for role, p in c.changes.items():
                assert f"{role}: " in row[3] and f"({'+'.join(p.part_ids)})" in row[3]
                today = result.values[role]
                assert f"({'+'.join(today.part_ids)}) →" in row[3]


def test_every_report_limit_shows_its_comparison() -> None:
    job, inv = load_job(JOB), read_inventory(SHELF)
    res = analyze(job, VALUES, "QN-GP40", inv, samples=0)
    rows = tables(render_report_html(title="c", job=job, checks=[("c", res)], plots=False))[
        "Constraints at the worst corner (failures first)"]
    by_name = {r[1]: r for r in rows[1:]}
    for c in res.constraints:
        limit = by_name[c.name][3]
        if c.name == "active_region":
            assert limit == "active at every corner"
            n = res.worst.n_vertices
            assert by_name[c.name][4] == f"active at {n} of {n} corners"
        else:
            assert limit.startswith("≥ " if c.kind == "min" else "≤ "), (c.name, limit)
    # the window's two ends, as the terminal shows them
    assert by_name["ic_min"][3].startswith("≥") and by_name["ic_max"][3].startswith("≤")


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


@pytest.mark.skipif(_chromium() is None,
                    reason="chromium is not installed (scripts/setup.sh --test installs it)")
def test_consolidation_report_renders_in_headless_chromium(tmp_path: Path) -> None:
    report = tmp_path / "board.html"
    out = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(SHELF), "--report",
                              str(report)])
    assert out.exit_code == 0, out.output
    text = report.read_text(encoding="utf-8")
    assert "BOM before" in text and "What changes, per stage" in text
    shot = tmp_path / "shot.png"
    proc = subprocess.run(
        [_chromium(), "--headless", "--no-sandbox", "--disable-gpu",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--no-first-run", f"--user-data-dir={tmp_path / 'profile'}",
         f"--screenshot={shot}", "--window-size=1200,2000", report.resolve().as_uri()],
        capture_output=True, text=True, timeout=180, check=False, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr[-2000:]
    data = shot.read_bytes()
    assert data.startswith(PNG_MAGIC) and len(data) > 20_000
    assert "Uncaught" not in proc.stderr
