"""Every command's terminal output at 80 and 120 columns: it fits, and nothing is cut.

Each command runs once per width on the bundled samples (CliRunner, ``COLUMNS`` set,
output piped as in a script).  A line may exceed the width only when it is a single
unbreakable token (a long path).  Values never part from their units across a line
break, part ids appear whole, the active-region row reads in words, corners follow
one notation with its key, and a Monte Carlo interval never prints as
``100.00–100.00 %``.
"""

from __future__ import annotations

import itertools
import json
import re
from pathlib import Path

import pytest
from scipy.stats import beta
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.render.console import break_points, layout, wrap_plain
from stockbias.render.corners import CORNER_KEY, corner_text
from stockbias.render.yield_text import interval_text, percent_text, yield_text

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
JOB = SAMPLES / "line_driver_job.toml"
BOARD = SAMPLES / "distribution_amp_board.toml"
SHELF = SAMPLES / "workshop_drawers.csv"
VALUES = "R1=MF-47K5,R2=MF-10K0,RE=MF-1K00,RC=CF-3K3"
WIDTHS = (80, 120)
UNITS = r"(?:[pnµumkMG]?(?:Ω|V/V|V|A|W)|°C|%)"

runner = CliRunner()


def invoke(args: list[str], columns: int):  # type: ignore[no-untyped-def]
    return runner.invoke(app, args, env={"COLUMNS": str(columns), "TERM": "dumb"})


def flat(text: str) -> str:
    return " ".join(text.split())


def tight_job(folder: Path) -> Path:
    """The line driver with an 8 % IC window: nothing on the drawers meets it (the
    closest design's worst-case IC spans 1.12–1.71 mA, hand calculation from check)."""
    path = folder / "tight.toml"
    path.write_text(JOB.read_text().replace("ic_window_pct = 30", "ic_window_pct = 8"))
    return path


#: name → the command's arguments (paths filled in by the fixture)
RUNS = {
    "check": ["check", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t", "QN-LB2",
              "--samples", "2000"],
    "check_saturated": ["check", str(JOB), "-i", str(SHELF), "-v",
                        "R1=MF-47K5,R2=MF-10K0,RE=MF-1K00,RC=CF-470K", "-t", "QN-LB2",
                        "--samples", "0"],
    "design": ["design", str(JOB), "-i", str(SHELF), "--top", "3"],
    "design_board": ["design", str(BOARD), "-i", str(SHELF), "--top", "1"],
    "consolidate": ["consolidate", str(BOARD), "-i", str(SHELF)],
    "substitute": ["substitute", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t", "QN-LB2",
                   "--samples", "0"],
    "stock_check": ["stock", "check", str(SHELF)],
    "demo": ["demo"],
    "export": ["export", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t", "QN-LB2",
               "--pick-list", "PICKS"],
    "infeasible": ["design", "TIGHT", "-i", str(SHELF)],
}


@pytest.fixture(scope="module")
def outputs(tmp_path_factory: pytest.TempPathFactory) -> dict[tuple[str, int], object]:
    folder = tmp_path_factory.mktemp("screens")
    tight = tight_job(folder)
    out = {}
    for name, args in RUNS.items():
        for columns in WIDTHS:
            picks = folder / f"picks{columns}.csv"
            argv = [str(tight) if a == "TIGHT" else str(picks) if a == "PICKS" else a
                    for a in args]
            out[(name, columns)] = invoke(argv, columns)
    return out


def _unbreakable(line: str) -> bool:
    """A line holding one token (a path, a long part id) and at most its lead-in."""
    words = line.split()
    return len(words) == 1 or (len(words) <= 3 and len(max(words, key=len)) > 40)


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize("name", list(RUNS))
def test_every_line_fits_the_width(outputs, name: str, columns: int) -> None:  # type: ignore[no-untyped-def]
    result = outputs[(name, columns)]
    assert result.exit_code in (0, 1), result.output
    assert "Traceback" not in result.output
    for line in result.output.splitlines():
        assert len(line) <= columns or _unbreakable(line), (name, columns, line)
    assert "…  " not in result.output and "…\n" not in result.output  # nothing ellipsised


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize("name", list(RUNS))
def test_no_value_parts_from_its_unit(outputs, name: str, columns: int) -> None:  # type: ignore[no-untyped-def]
    lines = outputs[(name, columns)].output.splitlines()
    for a, b in itertools.pairwise(lines):
        if re.search(r"(?:^|\s)[\d.]+$", a.rstrip(" \\")):  # a line ending in a number
            assert not re.match(rf"\s*{UNITS}(?:[\s,;.)]|$)", b), (name, a, b)
        # a corner entry keeps its sign and value together: 'RC− 3.088 kΩ'
        assert not re.search(r"[A-Z][A-Za-z0-9|]*[+−~]$", a.rstrip()), (name, a, b)


def test_exit_codes(outputs) -> None:  # type: ignore[no-untyped-def]
    # the line driver on these parts passes (tests/test_cli_design.py ranks it first);
    # RC 470 kΩ saturates it; the 8 % window has no design
    for columns in WIDTHS:
        assert outputs[("check", columns)].exit_code == 0
        assert outputs[("check_saturated", columns)].exit_code == 1
        assert outputs[("infeasible", columns)].exit_code == 1
        assert outputs[("design", columns)].exit_code == 0


# --- part ids and values whole ------------------------------------------------------------


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_shows_parts_and_values_whole(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = outputs[("check", columns)].output
    for part in ("MF-47K5", "MF-10K0", "MF-1K00", "CF-3K3", "QN-LB2"):
        assert re.search(rf"(?<![\w-]){re.escape(part)}(?![\w-])", text), part
    for value in ("47.5 kΩ ±1 %", "10 kΩ ±1 %", "1 kΩ ±1 %", "3.3 kΩ ±5 %"):
        assert value in flat(text), value


@pytest.mark.parametrize("columns", WIDTHS)
def test_bom_lines_keep_part_ids_and_values_on_one_line(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = outputs[("consolidate", columns)].output
    bom = json.loads(invoke(["consolidate", str(BOARD), "-i", str(SHELF), "--json"],
                            columns).stdout)
    lines = text.splitlines()
    for row in bom["bom_before"]:
        if row["kind"] != "resistor":
            continue
        # the stock line's id and its value on one screen line (values: stock file)
        assert any(row["part_id"] in ln and re.search(r"\d Ω|\d kΩ|\d MΩ", ln)
                   for ln in lines if re.search(rf"\b{re.escape(row['part_id'])}\b", ln)), row
        uses = ", ".join(row["uses"])
        assert f"used in {uses}" in flat(text), row


@pytest.mark.parametrize("columns", WIDTHS)
def test_substitute_one_block_per_candidate(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = outputs[("substitute", columns)].output
    # hFE ranges: the workshop drawers file
    for head in ("1. QN-LB2 (NPN, hFE 200–450)", "QN-MP80 (NPN, hFE 40–250)",
                 "QP-GP40 (PNP, hFE 100–300)"):
        assert head in text
    assert re.search(r"QP-GP40 \(PNP, hFE 100–300\)\s+ruled out", text)
    assert "polarity PNP: the stage is built for NPN" in flat(text)


# --- verdict rows (item 7) ------------------------------------------------------------------


@pytest.mark.parametrize("columns", WIDTHS)
def test_active_region_row_reads_in_words(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    n = json.loads(invoke(["check", str(JOB), "-i", str(SHELF), "-v", VALUES, "-t", "QN-LB2",
                           "--samples", "0", "--json"], columns).stdout)["worst_case_vertices"]
    text = outputs[("check", columns)].output
    assert f"active_region: active at {n} of {n} corners" in text
    assert "≤ 0   worst 0" not in text and "| 0 | 0" not in text


@pytest.mark.parametrize("columns", WIDTHS)
def test_saturated_stage_says_so(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    # RC 470 kΩ with IC near 1 mA would drop about 470 V: saturated at every corner
    # (hand calculation)
    text = outputs[("check_saturated", columns)].output
    n = re.search(r"Worst case over (\d+) corners", text)
    assert n is not None
    k = n.group(1)
    assert f"FAIL  active_region: saturated at {k} of {k} corners" in text
    assert "e.g. at VCC" in text


# --- one corner notation (item 8) -----------------------------------------------------------


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_shows_the_corner_key_and_labels_the_ambient(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = outputs[("check", columns)].output
    assert flat(CORNER_KEY) in flat(text)
    assert "ambient 0 °C" in text and "ambient 55 °C" in text
    assert "TA~" not in text and "T~" not in text
    # every temperature in a corner is named (ambient or TJ), never bare or signed
    assert not re.search(r", [\d.]+ °C|\bat [\d.]+ °C,", flat(text))
    assert not re.search(r"\b(?!ambient)[A-Za-z]+[+−~] [\d.]+ °C", flat(text))


@pytest.mark.parametrize("columns", WIDTHS)
def test_explanation_uses_the_corner_notation(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = flat(outputs[("infeasible", columns)].output)
    assert "No design." in text
    for internal in ("vcc min", "R1 max", "ambient_c", "junction_c", "self_heated"):
        assert internal not in text
    assert re.search(r"at VCC− 11\.4 V, R1\+ [\d.]+ kΩ", text)  # 12 V − 5 %: the job
    assert flat(CORNER_KEY) in text


def test_corner_text_names_ambient_and_junction() -> None:
    corner = {"vcc": {"setting": "max", "value": 12.6},
              "R1": {"setting": "min", "value": 46950.0},
              "hfe": {"setting": "interior", "value": 300.0, "used": 310.0},
              "ambient_c": {"setting": "interior", "value": 30.0},
              "junction_c": {"setting": "self_heated", "value": 57.4}}
    assert corner_text(corner) == ("VCC+ 12.6 V, R1− 46.95 kΩ, hFE~ β 310, ambient~ 30 °C, "
                                   "TJ 57.4 °C self-heated")
    corner["ambient_c"]["setting"] = "max"
    assert "ambient 30 °C" in corner_text(corner)


# --- the yield interval (item 13) -----------------------------------------------------------


def _clopper_pearson(k: int, n: int) -> tuple[float, float]:
    """95 % Clopper–Pearson interval (scipy.stats beta quantiles)."""
    lo = 0.0 if k == 0 else float(beta.ppf(0.025, k, n - k + 1))
    hi = 1.0 if k == n else float(beta.ppf(0.975, k + 1, n - k))
    return lo, hi


@pytest.mark.parametrize(("k", "n", "expected"), [
    (20000, 20000, "95 % confidence ≥ 99.98 %"),  # low end 99.98156 %
    (2_000_000, 2_000_000, "95 % confidence ≥ 99.9998 %"),  # low end 99.999816 %
    (0, 20000, "95 % confidence ≤ 0.02 %"),  # high end 0.01844 %
    (19990, 20000, "95 % interval 99.90–99.98 %"),  # 99.9081–99.9760 %
])
def test_interval_reads_as_a_true_bound(k: int, n: int, expected: str) -> None:
    lo, hi = _clopper_pearson(k, n)
    assert interval_text(lo, hi) == expected


@pytest.mark.parametrize("n", [100, 1000, 20000, 2_000_000])
@pytest.mark.parametrize("frac", [0.0, 1e-6, 0.5, 0.999, 0.99999, 1.0])
def test_interval_never_claims_more_than_the_counts(n: int, frac: float) -> None:
    k = round(frac * n)
    lo, hi = _clopper_pearson(k, n)
    text = interval_text(lo, hi)
    assert "100.00–100.00" not in text and "0.00–0.00" not in text
    nums = [float(x) for x in re.findall(r"\d+(?:\.\d+)?(?= %|–)", text.split("% ", 1)[1])]
    if "≥" in text:
        assert nums[0] <= 100 * lo + 1e-9 and nums[0] < 100
    elif "≤" in text:
        assert nums[0] >= 100 * hi - 1e-9 and nums[0] > 0
    else:  # rounded outward: the printed interval contains the computed one
        assert nums[0] <= 100 * lo + 1e-9 and nums[1] >= 100 * hi - 1e-9
    shown = float(percent_text(k / n))
    assert (shown == 100.0) == (k == n) and (shown == 0.0) == (k == 0)


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_prints_an_all_pass_yield_as_a_bound(outputs, columns: int) -> None:  # type: ignore[no-untyped-def]
    text = flat(outputs[("check", columns)].output)
    lo, hi = _clopper_pearson(2000, 2000)  # every board passes (failing boards: none)
    assert yield_text(1.0, lo, hi, 2000) in text
    assert "≥ 99.81 %" in text  # 2000 of 2000: low end 99.8157 % (scipy.stats)
    assert "100.00–100.00" not in text


# --- wrapping rules -------------------------------------------------------------------------


def test_wrap_keeps_values_and_corner_entries_whole() -> None:
    text = ("worst 1.123 mA against 1.38 mA at VCC− 11.4 V, R1+ 48.05 kΩ, hFE− β 175.4, "
            "VBE+ 750 mV, VCE ≥ 3 V, ambient 0 °C")
    for width in range(20, 60):
        lines = wrap_plain(text, width)
        assert flat(" ".join(lines)) == text
        for a in lines:
            assert not re.search(r"(\d|[+−~]|≥|β)$", a), (width, lines)


def test_a_command_continues_with_a_backslash() -> None:
    line = ("Next: stockbias check inventory_samples/line_driver_job.toml --inventory "
            "inventory_samples/workshop_drawers.csv --values R1=A,R2=B --transistor Q1")
    spans = layout(line, 60)
    shown = [pre + line[a:b] + post for a, b, pre, post in spans]
    assert shown[0] == "Next:"
    assert all(s.endswith(" \\") for s in shown[1:-1]) and not shown[-1].endswith("\\")
    assert all(len(s) <= 60 for s in shown)
    joined = " ".join(s.rstrip("\\").strip() for s in shown[1:])
    assert flat(joined) == line.split(": ", 1)[1]


def test_a_short_label_stays_with_its_path() -> None:
    path = "/tmp/" + "x" * 70 + "/report.html"
    assert break_points(f"Report written: {path}", 80, 2) == [(0, 16 + len(path))]


def test_piped_output_wraps_at_80_without_columns() -> None:
    # piped (CliRunner is not a terminal) and no COLUMNS: 80 columns (common practice)
    result = runner.invoke(app, ["design", str(JOB), "-i", str(SHELF), "--top", "1"],
                           env={"TERM": "dumb", "COLUMNS": None})
    assert result.exit_code == 0
    assert max(len(ln) for ln in result.output.splitlines()) <= 80


@pytest.mark.parametrize("columns", WIDTHS)
def test_substitute_rework_block(columns: int) -> None:
    # tests/data substitute stage: Q-B loses the headroom as it stands and is fixed by one
    # RC change (tests/test_substitute.py proves that rework least by exhaustive search)
    data = ROOT / "tests" / "data"
    args = ["substitute", str(data / "substitute_job.toml"), "-i",
            str(data / "substitute_shelf.csv"), "-v", "R1=R-47K,R2=R-47K,RC=R-2K7,RE=R-4K7",
            "-t", "Q-A", "--samples", "0", "--no-keep-purpose"]
    result = invoke(args, columns)
    payload = json.loads(invoke([*args, "--json"], columns).stdout)
    assert result.exit_code == 0, result.output
    for line in result.output.splitlines():
        assert len(line) <= columns or _unbreakable(line), line
    qb = next(c for c in payload["candidates"] if c["part_id"] == "Q-B")
    change = qb["changes"][0]
    text = flat(result.output)
    assert re.search(r"Q-B \(NPN, hFE 150–600\) 1 change added cost [\d.]+/board IC margin "
                     r"-?[\d.]+ %", text)
    assert "rework: RC → " in text and f"({change['part_id']})" in text
    assert "as it stands fails vce_min" in text
