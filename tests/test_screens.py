"""What a person reads: help screens, usage lines, option errors, and file data in tables.

Every screen is drawn at 80 and 120 columns.  Text in square brackets (help that
names a TOML table, part ids and locations from a stock file, file names) must
reach the terminal as written: the terminal library reads ``[red]`` as a colour
and ``[/x]`` as a closing tag unless it is escaped.

Expected texts are the help strings and error wording of the commands themselves
(read from the click command objects, not copied); the bracketed shelf is the
bundled workshop drawer file with every part id and location rewritten.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import pytest
from typer.main import get_command
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError, JobError

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
WIDTHS = (80, 120)
LOCATIONS = ("[A3]", "[bag 1]", "[red]box", "[/x]")

runner = CliRunner()


def invoke(args: list[str], columns: int):  # type: ignore[no-untyped-def]
    return runner.invoke(app, args, env={"COLUMNS": str(columns), "TERM": "dumb"})


def flat(text: str) -> str:
    return " ".join(text.split())


def _commands() -> list[tuple[list[str], object]]:
    root = get_command(app)
    found = []
    for name, cmd in root.commands.items():  # type: ignore[attr-defined]
        if hasattr(cmd, "commands"):
            found += [([name, sub], c) for sub, c in cmd.commands.items()]
        else:
            found.append(([name], cmd))
    return found


COMMANDS = _commands()
IDS = [" ".join(words) for words, _ in COMMANDS]


# --- help screens -----------------------------------------------------------------------


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize(("words", "cmd"), COMMANDS, ids=IDS)
def test_help_shows_every_bracketed_text_literally(words: list[str], cmd: object,
                                                   columns: int) -> None:
    result = invoke([*words, "--help"], columns)
    assert result.exit_code == 0, result.output
    shown = flat(result.output)
    helps = [cmd.help or ""] + [p.help or "" for p in cmd.params]  # type: ignore[attr-defined]
    bracketed = [b for h in helps for b in re.findall(r"\[[^\]]*\]", h)]
    for text in bracketed:
        assert flat(text) in shown, (text, result.output)


@pytest.mark.parametrize("columns", WIDTHS)
def test_bracketed_help_named_in_the_fault_report(columns: int) -> None:
    check = invoke(["check", "--help"], columns)
    assert "the stage's [stage.values]." in flat(check.output)
    reserve = invoke(["stock", "reserve", "--help"], columns)
    assert "the job's [build] quantity" in flat(reserve.output)


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize(("words", "cmd"), COMMANDS, ids=IDS)
def test_flags_show_no_value_placeholder(words: list[str], cmd: object, columns: int) -> None:
    result = invoke([*words, "--help"], columns)
    for placeholder in ("<bool>", "<str>", "<list[str]>", "<int range>", "<float range>"):
        assert placeholder not in result.output  # values are named: N, PART_ID, ROLE=VALUE...
    for p in cmd.params:  # type: ignore[attr-defined]
        if getattr(p, "is_flag", False) and p.help and "--help" not in p.opts:
            line = next(ln for ln in result.output.splitlines() if p.opts[-1] in ln.split())
            # the flag is followed by the start of its help text, nothing between
            after = line.split(p.opts[-1], 1)[1].split()
            assert after[0] == p.help.split()[0], line


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize(("words", "usage"), [
    (["check"], "Usage: stockbias check [OPTIONS] JOB_FILE"),
    (["design"], "Usage: stockbias design [OPTIONS] JOB_FILE"),
    (["substitute"], "Usage: stockbias substitute [OPTIONS] JOB_FILE"),
    (["export"], "Usage: stockbias export [OPTIONS] JOB_FILE"),
    (["consolidate"], "Usage: stockbias consolidate [OPTIONS] BOARD_FILE"),
    (["stock", "check"], "Usage: stockbias stock check [OPTIONS] STOCK_FILE"),
    (["stock", "reserve"], "Usage: stockbias stock reserve [OPTIONS] STOCK_FILE"),
    (["demo"], "Usage: stockbias demo [OPTIONS]"),
])
def test_usage_line_names_the_arguments_without_braces(words: list[str], usage: str,
                                                       columns: int) -> None:
    result = invoke([*words, "--help"], columns)
    assert result.exit_code == 0
    assert result.output.splitlines()[0].rstrip() == usage
    assert "{" not in result.output


@pytest.mark.parametrize("columns", WIDTHS)
def test_option_values_are_named(columns: int) -> None:
    shown = invoke(["check", "--help"], columns).output
    for text in ("-v, --values ROLE=VALUE", "-t, --transistor PART_ID", "--samples N",
                 "--stage NAME", "--tolerance PERCENT", "-i, --inventory <file>"):
        assert text in shown
    shown = invoke(["consolidate", "--help"], columns).output
    for text in ("-k, --keep ROLE@STAGE", "--keep-purpose NAME=PERCENT", "--objectives NAMES",
                 "--time-limit SECONDS"):
        assert text in shown


@pytest.mark.parametrize("columns", WIDTHS)
def test_consolidate_argument_is_the_board_file(columns: int) -> None:
    result = invoke(["consolidate", "--help"], columns)
    shown = flat(result.output)
    assert "BOARD_FILE <file> The board (TOML) file" in shown
    assert "The job (TOML) file" not in shown


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize("words", [[], ["stock"]])
def test_command_lists_wrap_instead_of_cutting(words: list[str], columns: int) -> None:
    result = invoke([*words, "--help"], columns)
    shown = flat(result.output)
    group = get_command(app)
    if words:
        group = group.commands[words[0]]  # type: ignore[attr-defined]
    for cmd in group.commands.values():  # type: ignore[attr-defined]
        assert flat(cmd.help.split("\n\n")[0]) in shown
    assert "..." not in result.output.split("Commands:")[1]


@pytest.mark.parametrize("columns", WIDTHS)
def test_missing_argument_named_as_in_the_usage_line(columns: int) -> None:
    result = invoke(["consolidate"], columns)
    assert result.exit_code == 2
    assert "Missing argument 'BOARD_FILE'" in result.output


# --- option errors ----------------------------------------------------------------------


def test_an_error_about_an_option_reads_option_not_column() -> None:
    # wording of StockbiasError.one_line
    assert InputError("--rank counts from 1", column="--rank", text="0").one_line() \
        == "option '--rank': --rank counts from 1 (text '0')"
    assert JobError("bad", column="--stage").one_line() == "option '--stage': bad"
    assert JobError("bad", file="j.toml", line=3, column="target.ic").one_line() \
        == "j.toml:3: key 'target.ic': bad"
    assert InputError("bad", column="qty").one_line() == "column 'qty': bad"


@pytest.mark.parametrize("columns", WIDTHS)
def test_option_error_names_the_option_and_the_command(columns: int) -> None:
    job = str(SAMPLES / "line_driver_job.toml")
    shelf = str(SAMPLES / "workshop_drawers.csv")
    result = invoke(["export", job, "-i", shelf, "--json", "--netlist", "-"], columns)
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1
    assert lines[0].startswith("stockbias export: option '--netlist': ")
    assert "column '--netlist'" not in result.output

    result = invoke(["stock", "reserve", shelf, "-j", job, "-t", "QN-LB2", "--dry-run"],
                    columns)
    assert result.exit_code == 2
    assert result.output.startswith("stockbias stock reserve: option '--transistor': ")


# --- file data in tables ----------------------------------------------------------------


def _bracket_shelf(folder: Path) -> tuple[Path, dict[str, str]]:
    """The workshop drawers with every part id and location holding markup-like text."""
    lines = (SAMPLES / "workshop_drawers.csv").read_text().splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.startswith("kind,"))
    rows = list(csv.reader(lines[start:]))
    head = rows[0]
    pid, loc = head.index("part_id"), head.index("location")
    ids = {}
    out = [head]
    for i, row in enumerate(r for r in rows[1:] if r):
        new = f"[red]{row[pid]}" if i % 2 else f"{row[pid]}[/x]"
        ids[row[pid]] = new
        row[pid], row[loc] = new, LOCATIONS[i % len(LOCATIONS)]
        out.append(row)
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "[A3] shelf.csv"
    with path.open("w", newline="") as f:
        csv.writer(f).writerows(out)
    return path, ids


def _renamed(text: str, ids: dict[str, str]) -> str:
    for old, new in ids.items():
        text = re.sub(rf'"{re.escape(old)}"', f'"{new}"', text)
    return text


@pytest.fixture
def shelf(tmp_path: Path) -> tuple[Path, dict[str, str], Path, Path]:
    folder = tmp_path / "[bag 1]"
    path, ids = _bracket_shelf(folder)
    job = folder / "[red]job.toml"
    job.write_text((SAMPLES / "line_driver_job.toml").read_text())
    board = folder / "[b]board.toml"
    text = _renamed((SAMPLES / "distribution_amp_board.toml").read_text(), ids)
    board.write_text(re.sub(r'^name = "(\w+)"', r'name = "[red]\1"', text, flags=re.M))
    return path, ids, job, board


def assert_literal(output: str, ids: dict[str, str], must: list[str]) -> None:
    """Every part id named is shown whole, brackets included, and none is shown stripped."""
    assert "internal error" not in output and "Traceback" not in output, output
    for bare, full in ids.items():
        assert output.count(bare) == output.count(full), (full, output)
    for full in must:
        assert full in output, (full, output)


LINE_DRIVER = {"R1": "MF-47K5", "R2": "MF-10K0", "RE": "MF-1K00", "RC": "CF-3K3"}


def _values(ids: dict[str, str]) -> str:
    return ",".join(f"{role}={ids[part]}" for role, part in LINE_DRIVER.items())


@pytest.mark.parametrize("columns", WIDTHS)
def test_stock_check_shows_ids_and_locations_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, _, _ = shelf
    result = invoke(["stock", "check", str(path)], columns)
    assert result.exit_code == 0, result.output
    assert flat(result.output).startswith(f"{path}: valid")
    assert_literal(result.output, ids, list(ids.values()))
    for location in LOCATIONS:
        assert f" {location} " in result.output


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_shows_ids_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, job, _ = shelf
    result = invoke(["check", str(job), "-i", str(path), "-v", _values(ids),
                     "-t", ids["QN-LB2"], "--samples", "0"], columns)
    # the line driver on these parts passes (tests/test_cli_design.py ranks it first)
    assert result.exit_code == 0, result.output
    assert_literal(result.output, ids, [ids["QN-LB2"], *(ids[p] for p in LINE_DRIVER.values())])


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_board_stage_names_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, _, board = shelf
    result = invoke(["check", str(board), "-i", str(path), "--stage", "[red]input",
                     "--samples", "0"], columns)
    assert result.exit_code in (0, 1), result.output
    assert "Stage '[red]input'" in result.output
    assert_literal(result.output, ids, [ids["QN-LB2"]])


@pytest.mark.parametrize("columns", WIDTHS)
def test_design_shows_ids_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, job, _ = shelf
    result = invoke(["design", str(job), "-i", str(path), "--top", "2"], columns)
    assert result.exit_code == 0, result.output
    assert_literal(result.output, ids, [])
    assert any(full in result.output for full in ids.values())


@pytest.mark.parametrize("columns", WIDTHS)
def test_export_pick_list_shows_ids_and_locations_literally(shelf, columns: int,  # type: ignore[no-untyped-def]
                                                            tmp_path: Path) -> None:
    path, ids, job, _ = shelf
    out = tmp_path / "[red]picks.csv"
    result = invoke(["export", str(job), "-i", str(path), "-v", _values(ids),
                     "-t", ids["QN-LB2"], "--pick-list", str(out)], columns)
    assert result.exit_code == 0, result.output
    assert_literal(result.output, ids, [ids["QN-LB2"], *(ids[p] for p in LINE_DRIVER.values())])
    with path.open(newline="") as f:
        where = {row["part_id"]: row["location"] for row in csv.DictReader(f)}
    chosen = [ids["QN-LB2"], *(ids[p] for p in LINE_DRIVER.values())]
    for part in chosen:  # each pick-list row: location, then part id
        assert re.search(rf"^  {re.escape(where[part])} +{re.escape(part)} ", result.output,
                         re.M), (part, result.output)
    assert f"Pick list written to {out}" in result.output


@pytest.mark.parametrize("columns", WIDTHS)
def test_substitute_shows_ids_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, job, _ = shelf
    result = invoke(["substitute", str(job), "-i", str(path), "-v", _values(ids),
                     "-t", ids["QN-LB2"], "--samples", "0", "--max-changes", "1"], columns)
    assert result.exit_code in (0, 1), result.output
    transistors = [full for bare, full in ids.items() if bare.startswith("Q")]
    assert_literal(result.output, ids, transistors)


@pytest.mark.parametrize("columns", WIDTHS)
def test_consolidate_shows_ids_and_stage_names_literally(shelf, columns: int) -> None:  # type: ignore[no-untyped-def]
    path, ids, _, board = shelf
    result = invoke(["consolidate", str(board), "-i", str(path), "--time-limit", "20"], columns)
    assert result.exit_code in (0, 1), result.output
    assert "[red]input" in result.output
    assert_literal(result.output, ids, [])


@pytest.mark.parametrize(("name", "kind", "sign"), [
    ("gain_nominal_min", "min", "≥"), ("gain_nominal_max", "max", "≤"),
    ("supply_current_max", "max", "≤"), ("rin_min", "min", "≥")])
def test_every_limit_shows_the_comparison_its_kind_says(name: str, kind: str, sign: str) -> None:
    """The sign beside a limit comes from the limit's own kind (a kept stage's nominal gain
    band has a lower and an upper end), not from a list of names kept beside the renderer."""
    from stockbias.analysis.constraints import ConstraintResult
    from stockbias.render.check_table import constraint_lines
    c = ConstraintResult(name, 10.0, 12.0, 2.0, True, "V/V", "a limit", None, kind)
    assert f"ok[/green]    {name} {sign} 10 V/V   worst 12 V/V" in constraint_lines(c, 80)[0]
