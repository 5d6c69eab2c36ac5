"""Board files in every command: `check BOARD` (every stage), `--stage` in `export`,
`substitute` and `stock reserve`, and the one `--samples` cap.

Boards: the bundled sample (inventory_samples/distribution_amp_board.toml, invented; every
stage passes on the workshop shelf) and tests/data/probe_board.toml (invented): 'sense'
passes, 'driver' (collector feedback) runs above its IC window, 'clamp' (fixed base,
RB 10 kΩ) saturates.  Counts of pieces are hand counts from the board files.
"""

from __future__ import annotations

import csv
import hashlib
import json
import shutil
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.cli.common import MAX_SAMPLES
from stockbias.selection import input_record

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMAS = ROOT / "stockbias" / "schemas"
BOARD = SAMPLES / "distribution_amp_board.toml"
PROBE = ROOT / "tests" / "data" / "probe_board.toml"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"
STAGES = "input, gain, split, line_out"
WIDTHS = (80, 120)

runner = CliRunner()


def invoke(args: list[str], columns: int = 80):  # type: ignore[no-untyped-def]
    return runner.invoke(app, args, env={"COLUMNS": str(columns), "TERM": "dumb"})


def schema(name: str) -> dict:
    return json.loads((SCHEMAS / f"{name}.schema.json").read_text())


def fits(text: str, columns: int) -> bool:
    """Every line fits ``columns``, or is one word (a path) that cannot be broken."""
    return all(len(line) <= columns or " " not in line.strip() for line in text.splitlines())


def one_line(result) -> str:  # type: ignore[no-untyped-def]
    lines = result.output.strip().splitlines()
    assert len(lines) == 1, result.output
    assert "Traceback" not in result.output
    return lines[0]


# --- check BOARD: every stage -----------------------------------------------------------

@pytest.mark.parametrize("columns", WIDTHS)
def test_check_board_gives_every_stage_a_verdict(columns: int) -> None:
    result = invoke(["check", str(BOARD), "-i", str(SHELF), "--samples", "200"], columns)
    assert result.exit_code == 0, result.output
    out = result.output
    for name in ("input", "gain", "split", "line_out"):
        assert f"PASS  stage '{name}': all " in out
    assert "Board: 4 of 4 stages pass" in out
    for part in ("CF-100K", "CF-22K", "CF-4K7", "CF-680R", "QN-LB2", "QN-LB1", "QN-GP40"):
        assert part in out
    assert "Monte Carlo yield 100.00 % of 200 boards" in out
    assert "Assumed (in one stage or more): TJ max 150 °C" in " ".join(out.split())
    assert "--stage NAME" in out
    assert fits(out, columns), out


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_board_failing_stages_exit_1_with_what_fails(columns: int) -> None:
    result = invoke(["check", str(PROBE), "-i", str(SHELF), "--samples", "0"], columns)
    assert result.exit_code == 1, result.output
    out = result.output
    assert "PASS  stage 'sense'" in out
    assert "FAIL  stage 'driver': 1 of " in out
    assert "FAIL  stage 'clamp': " in out
    assert "✗ ic_max: worst 3.62 mA against ≤ 1.2 mA" in out
    assert "Board: 1 of 3 stages pass; failing: 'driver', 'clamp'" in out
    clamp = out[out.index("FAIL  stage 'clamp'"):out.index("Board: ")]
    # a saturated stage: the corners are counted, no active-region figure is shown
    assert "not in the active region at 128 of 128 corners (saturated)" in clamp
    assert "|gain|" not in clamp
    assert fits(out, columns), out


def test_check_board_json_matches_the_schema_and_each_stage_alone() -> None:
    result = runner.invoke(app, ["check", str(PROBE), "-i", str(SHELF), "--samples", "300",
                                 "--seed", "7", "--json"])
    assert result.exit_code == 1, result.output
    board = json.loads(result.stdout)
    jsonschema.validate(board, schema("board_check"))
    assert board["ok"] is False
    assert board["stages_passed"] == 1
    assert board["stages_failed"] == ["driver", "clamp"]
    assert board["build_quantity"] == 5
    assert [s["stage"] for s in board["stages"]] == ["sense", "driver", "clamp"]
    for stage in board["stages"]:   # the same analysis as the stage checked alone
        alone = runner.invoke(app, ["check", str(PROBE), "-i", str(SHELF), "--stage",
                                    stage["stage"], "--samples", "300", "--seed", "7",
                                    "--json"])
        assert alone.exit_code == (0 if stage["ok"] else 1), alone.output
        single = json.loads(alone.stdout)
        jsonschema.validate(single, schema("check"))
        assert stage == single


def test_driver_current_against_a_hand_calculation() -> None:
    # hand calculation, collector feedback with constant VBE: IE = (VCC − VBE)/(RC + RE +
    # RB/(β+1)) at VCC 9 V +10 %, every resistor −5 % and its negative tempco at 40 °C
    # (CF-2K2 −500, CF-220R −400, CF-100K −700 ppm/°C), β = 300·(313.15/298.15)^1.5,
    # VBE 0.60 V − 2 mV/°C·15 °C.  Leakage and self-heating, left out here, only raise IC.
    rc = 2200 * 0.95 * (1 - 500e-6 * 15)
    re = 220 * 0.95 * (1 - 400e-6 * 15)
    rb = 100e3 * 0.95 * (1 - 700e-6 * 15)
    beta = 300 * (313.15 / 298.15) ** 1.5
    ie = (9.9 - (0.60 - 0.002 * 15)) / (rc + re + rb / (beta + 1))
    ic = ie * beta / (beta + 1)
    result = runner.invoke(app, ["check", str(PROBE), "-i", str(SHELF), "--samples", "0",
                                 "--json"])
    driver = json.loads(result.stdout)["stages"][1]
    assert driver["stage"] == "driver"
    worst = driver["worst_case"]["ic"]["max"]
    assert ic <= worst <= ic * 1.02
    failing = {c["name"]: c for c in driver["constraints"] if not c["ok"]}
    assert set(failing) == {"ic_max"}
    assert failing["ic_max"]["worst"] == pytest.approx(worst, rel=1e-9)


def test_check_board_report_and_pick_list_cover_every_stage(tmp_path: Path) -> None:
    report, picks = tmp_path / "board.html", tmp_path / "board.csv"
    result = invoke(["check", str(BOARD), "-i", str(SHELF), "--samples", "0", "--report",
                     str(report), "--pick-list", str(picks)])
    assert result.exit_code == 0, result.output
    html = report.read_text(encoding="utf-8")
    for name in ("input", "gain", "split", "line_out"):
        assert f"Stage &#x27;{name}&#x27;" in html or f"Stage '{name}'" in html
    with picks.open(newline="", encoding="utf-8") as f:
        rows = {r["part_id"]: r for r in csv.DictReader(f)}
    # hand count from the board file, 8 boards: CF-4K7 is input RE, gain RC and split R2;
    # QN-GP40 is the transistor of split and line_out
    assert rows["CF-4K7"]["per_board"] == "3" and rows["CF-4K7"]["pull"] == "24"
    assert rows["CF-4K7"]["roles"] == "RE@input RC@gain R2@split"
    assert rows["QN-GP40"]["pull"] == "16"
    assert rows["QN-GP40"]["roles"] == "Q@split Q@line_out"
    assert len(rows) == 14            # 11 resistor lines and 3 transistor lines
    assert f"Pick list written: {picks}" in result.output
    assert "every stage" in result.output


@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize(("option", "extra"), [
    ("--values", ["-v", "R1=CF-47K"]), ("--transistor", ["-t", "QN-LB1"]),
    ("--plot", ["--plot", "PLOTS"])])
def test_check_board_one_stage_options_ask_for_the_stage(option: str, extra: list[str],
                                                         columns: int, tmp_path: Path) -> None:
    extra = [str(tmp_path / "plots") if x == "PLOTS" else x for x in extra]
    result = invoke(["check", str(BOARD), "-i", str(SHELF), *extra], columns)
    assert result.exit_code == 2
    line = one_line(result)
    assert line.startswith(f"stockbias check: {BOARD}: option '{option}': {option} is about "
                           "one stage: name it with --stage NAME")
    assert f"--stage NAME (stages: {STAGES})" in line
    assert not (tmp_path / "plots").exists()


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_board_unknown_stage_names_the_file_and_the_stages(columns: int) -> None:
    result = invoke(["check", str(BOARD), "-i", str(SHELF), "--stage", "outpt"], columns)
    assert result.exit_code == 2
    line = one_line(result)
    assert line == (f"stockbias check: {BOARD}: option '--stage': no stage of that name in "
                    f"the file; its stages: {STAGES} (text 'outpt')")


@pytest.mark.parametrize(("old", "new", "key", "bad"), [
    ('R1 = "CF-47K"', 'R1 = "CF-47Q"', "stage.values.R1", "CF-47Q"),
    ('transistor = "QN-LB1"', 'transistor = "QX-1"', "stage.transistor", "QX-1"),
])
def test_check_board_bad_fitted_part_names_file_line_and_key(tmp_path: Path, old: str,
                                                              new: str, key: str,
                                                              bad: str) -> None:
    board = tmp_path / "board.toml"
    board.write_text(BOARD.read_text().replace(old, new))
    line_no = next(i for i, row in enumerate(board.read_text().splitlines(), start=1)
                   if row.strip() == new)
    for extra in ([], ["--stage", "gain"]):
        result = invoke(["check", str(board), "-i", str(SHELF), "--samples", "0", *extra])
        assert result.exit_code == 2
        line = one_line(result)
        assert line.startswith(f"{board}:{line_no}: key '{key}': stage 'gain': ")
        assert line.endswith(f"(text '{bad}')")


def test_check_board_stage_without_fitted_parts_exit_2(tmp_path: Path) -> None:
    board = tmp_path / "board.toml"
    text = PROBE.read_text()
    board.write_text(text.replace('[stage.values]\nRC = "CF-2K2"\nRB = "CF-100K"\n'
                                  'RE = "CF-220R"\n', ""))
    result = invoke(["check", str(board), "-i", str(SHELF), "--samples", "0"])
    assert result.exit_code == 2
    line = one_line(result)
    assert f"{board}:" in line and "stage 'driver': no fitted parts" in line


@pytest.mark.parametrize("columns", WIDTHS)
def test_check_board_shows_stage_names_as_written(tmp_path: Path, columns: int) -> None:
    board = tmp_path / "board.toml"
    board.write_text(PROBE.read_text().replace('name = "sense"', 'name = "[red]sense :x:"'))
    result = invoke(["check", str(board), "-i", str(SHELF), "--samples", "0"], columns)
    assert result.exit_code == 1, result.output
    assert "PASS  stage '[red]sense :x:'" in result.output


# --- the --samples cap ------------------------------------------------------------------

@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize("command", [
    ["check", str(JOB), "-i", str(SHELF), "-v", "R1=CF-47K,R2=CF-10K,RE=CF-1K0,RC=CF-3K3",
     "-t", "QN-LB2"],
    ["substitute", str(JOB), "-i", str(SHELF), "-v", "R1=CF-47K,R2=CF-10K,RE=CF-1K0,RC=CF-3K3",
     "-t", "QN-LB2"],
])
def test_samples_cap_is_one_rule(command: list[str], columns: int) -> None:
    assert MAX_SAMPLES == 10**9
    result = invoke([*command, "--samples", str(MAX_SAMPLES + 1)], columns)
    assert result.exit_code == 2
    line = one_line(result)
    assert line.startswith(f"stockbias {command[0]}: option '--samples': at most "
                           "1,000,000,000 Monte Carlo boards per check: memory stays bounded")
    assert "time grows with the count" in line
    assert line.endswith("(text '1000000001')")
    shown = " ".join(invoke([command[0], "--help"], columns).output.split())
    assert "Monte Carlo boards per check, 0 (none) to 1,000,000,000 in every command" in shown


# --- export --stage ---------------------------------------------------------------------

@pytest.mark.parametrize("columns", WIDTHS)
@pytest.mark.parametrize("extra", [[], ["--rank", "1"], ["-v", "R1=CF-47K", "-t", "QN-LB1"]])
def test_export_board_without_stage_lists_the_stages(extra: list[str], columns: int,
                                                     tmp_path: Path) -> None:
    out = tmp_path / "x.cir"
    result = invoke(["export", str(BOARD), "-i", str(SHELF), "--netlist", str(out), *extra],
                    columns)
    assert result.exit_code == 2
    line = one_line(result)
    assert line == (f"stockbias export: {BOARD}: option '--stage': the board has 4 stages: "
                    f"name the one to export with --stage NAME (stages: {STAGES})")
    assert "designs[0].topology" not in line
    assert not out.exists()


@pytest.mark.parametrize("columns", WIDTHS)
def test_export_stage_takes_its_fitted_parts(columns: int, tmp_path: Path) -> None:
    out, picks = tmp_path / "split.cir", tmp_path / "split.csv"
    result = invoke(["export", str(BOARD), "-i", str(SHELF), "--stage", "split", "--netlist",
                     str(out), "--pick-list", str(picks)], columns)
    assert result.exit_code == 0, result.output
    assert f"Netlist written to {out}: stage 'split', divider, NPN QN-GP40" in \
        " ".join(result.output.split())
    text = out.read_text()
    # the split stage's fitted values (board file): R1 22k, R2 4k7, RC 2k2, RE 1k
    for card in ("R_R1 rail_c b 22000", "R_R2 b 0 4700", "R_RC rail_c c 2200", "R_RE e 0 1000"):
        assert card in text
    assert "* stage 'split' of job" in text
    with picks.open(newline="", encoding="utf-8") as f:
        pulled = {r["part_id"]: r["pull"] for r in csv.DictReader(f)}
    assert pulled == {"QN-GP40": "8", "CF-22K": "8", "CF-4K7": "8", "CF-2K2": "8",
                      "CF-1K0": "8"}


def test_export_stage_with_values_uses_the_stage_topology(tmp_path: Path) -> None:
    out = tmp_path / "driver.cir"
    result = invoke(["export", str(PROBE), "-i", str(SHELF), "--stage", "driver", "-v",
                     "RC=CF-3K3,RB=CF-220K,RE=CF-220R", "-t", "QN-GP40", "--netlist",
                     str(out), "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("export"))
    assert payload["selection"]["topology"] == "collector_feedback"
    assert payload["selection"]["values"] == {"RC": "CF-3K3", "RB": "CF-220K", "RE": "CF-220R"}


def _board_result(path: Path, job: Path, shelf: Path) -> Path:
    """A saved board result (the shape design --save writes) naming two stages."""
    def stage(name: str, values: dict[str, str], q: str) -> dict:
        return {"name": name, "topology": "divider", "transistor": {"part_id": q},
                "parts": {role: {"part_id": pid, "value_ohm": None}
                          for role, pid in values.items()}}

    doc = {"status": "optimal", "designs": [{"rank": 1, "stages": [
        stage("input", {"R1": "CF-100K", "R2": "CF-22K", "RE": "CF-4K7", "RC": "CF-10K"},
              "QN-LB2"),
        stage("split", {"R1": "CF-22K", "R2": "CF-4K7", "RE": "CF-1K0", "RC": "CF-2K2"},
              "QN-LB1")]}],
        "inputs": {"job": input_record(job), "inventory": input_record(shelf)}}
    path.write_text(json.dumps(doc))
    return path


def test_export_from_a_board_result_takes_the_named_stage(tmp_path: Path) -> None:
    saved = _board_result(tmp_path / "board.json", BOARD, SHELF)
    out = tmp_path / "split.cir"
    result = invoke(["export", str(BOARD), "-i", str(SHELF), "--stage", "split", "--from",
                     str(saved), "--netlist", str(out), "--json"])
    assert result.exit_code == 0, result.output
    sel = json.loads(result.stdout)["selection"]
    assert sel["transistor"] == "QN-LB1"        # the result's, not the board file's QN-GP40
    assert sel["source"] == f"stage 'split' of design rank 1 of {saved}"
    missing = invoke(["export", str(BOARD), "-i", str(SHELF), "--stage", "gain", "--from",
                      str(saved), "--netlist", str(out), "--force"])
    assert missing.exit_code == 2
    assert one_line(missing) == (f"{saved}: key 'designs[0].stages': the board design has no "
                                 "stage of that name; its stages: input, split (text 'gain')")


# --- substitute --stage -----------------------------------------------------------------

@pytest.mark.parametrize("columns", WIDTHS)
def test_substitute_board_without_stage_lists_the_stages(columns: int) -> None:
    result = invoke(["substitute", str(BOARD), "-i", str(SHELF)], columns)
    assert result.exit_code == 2
    assert one_line(result) == (f"stockbias substitute: {BOARD}: option '--stage': the board "
                                "has 4 stages: name the one to substitute in with --stage "
                                f"NAME (stages: {STAGES})")


def test_substitute_stage_judges_its_fitted_parts() -> None:
    result = invoke(["substitute", str(BOARD), "-i", str(SHELF), "--stage", "gain",
                     "--samples", "0", "--time-limit", "5", "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("substitute"))
    assert payload["stage"] == "gain"
    assert payload["current"]["part_id"] == "QN-LB1"
    assert {role: p["part_id"] for role, p in payload["values"].items()} == {
        "R1": "CF-47K", "R2": "CF-10K", "RE": "CF-2K2", "RC": "CF-4K7"}
    verdicts = {c["part_id"]: c for c in payload["candidates"]}
    # the gain stage passes `check` as fitted, so its own transistor is a drop-in
    assert verdicts["QN-LB1"]["drop_in"] is True


def test_substitute_one_stage_job_still_needs_the_parts() -> None:
    result = invoke(["substitute", str(JOB), "-i", str(SHELF), "-t", "QN-LB2"])
    assert result.exit_code == 2
    assert one_line(result).startswith("stockbias substitute: option '--values': give the "
                                       "stage's parts")


# --- stock reserve on a board -----------------------------------------------------------

def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_reserve_whole_board_takes_every_stage(tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    shutil.copy(SHELF, shelf)
    before = _sha(shelf)
    dry = invoke(["stock", "reserve", str(shelf), "-j", str(BOARD), "--dry-run", "--json"])
    assert dry.exit_code == 0, dry.output
    assert _sha(shelf) == before
    result = invoke(["stock", "reserve", str(shelf), "-j", str(BOARD), "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("reserve"))
    assert [s["stage"] for s in payload["stages"]] == ["input", "gain", "split", "line_out"]
    assert all(s["design_ok"] for s in payload["stages"]) and payload["design_ok"]
    taken = {c["part_id"]: c["taken"] for c in payload["changes"]}
    # hand count, 8 boards: CF-4K7 three per board, CF-2K2 two (gain RE, split RC),
    # QN-GP40 two (split, line_out)
    assert taken["CF-4K7"] == 24 and taken["CF-2K2"] == 16 and taken["QN-GP40"] == 16
    assert sum(taken.values()) == 8 * (4 * 4 + 4)
    with shelf.open(newline="") as f:
        qty = {r["part_id"]: int(r["qty"]) for r in csv.DictReader(
            line for line in f if not line.startswith("#"))}
    assert qty["CF-4K7"] == 70 - 24


@pytest.mark.parametrize("columns", WIDTHS)
def test_reserve_one_stage_of_a_board(columns: int, tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    shutil.copy(SHELF, shelf)
    result = invoke(["stock", "reserve", str(shelf), "-j", str(BOARD), "--stage", "split",
                     "-q", "3", "--json"], columns)
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, schema("reserve"))
    assert payload["selection"]["values"] == {"R1": "CF-22K", "R2": "CF-4K7", "RE": "CF-1K0",
                                              "RC": "CF-2K2"}
    assert {c["part_id"]: c["taken"] for c in payload["changes"]} == {
        "CF-1K0": 3, "CF-2K2": 3, "CF-4K7": 3, "CF-22K": 3, "QN-GP40": 3}


@pytest.mark.parametrize("columns", WIDTHS)
def test_reserve_board_with_values_asks_for_the_stage(columns: int, tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    shutil.copy(SHELF, shelf)
    result = invoke(["stock", "reserve", str(shelf), "-j", str(BOARD), "-v",
                     "R1=CF-22K,R2=CF-4K7,RE=CF-1K0,RC=CF-2K2", "-t", "QN-GP40"], columns)
    assert result.exit_code == 2
    assert one_line(result).endswith(f"with --stage NAME (stages: {STAGES})")


def test_reserve_board_with_a_failing_stage_reserves_nothing(tmp_path: Path) -> None:
    shelf = tmp_path / "shelf.csv"
    shutil.copy(SHELF, shelf)
    before = _sha(shelf)
    result = invoke(["stock", "reserve", str(shelf), "-j", str(PROBE)])
    assert result.exit_code == 1
    line = one_line(result)
    assert line.startswith(f"{PROBE}: stage 'driver' as fitted")
    assert "ic_max" in line and line.endswith("nothing reserved (--force reserves it anyway)")
    assert _sha(shelf) == before


# --- plots of a board stage -------------------------------------------------------------

def test_plots_draw_the_window_of_the_stage_checked() -> None:
    # line_out's window in the board file: 3 mA ±40 % = 1.8–4.2 mA (hand calculation);
    # the first stage's (input, 0.5 mA ±40 %) must not be drawn for it
    import matplotlib

    matplotlib.use("Agg")
    from stockbias.analysis.check import analyze
    from stockbias.job import load_job
    from stockbias.render.plots import ic_histogram_figure, qpoint_figure
    from stockbias.stock_io import load_inventory

    job, inv = load_job(BOARD), load_inventory(SHELF)
    result = analyze(job, dict(job.stages[3].values), "QN-GP40", inv, samples=200,
                     stage_name="line_out")
    for figure in (qpoint_figure(result, job), ic_histogram_figure(result, job)):
        labels = [h.get_label() for ax in figure.axes
                  for h in ax.get_legend_handles_labels()[0]]
        assert any("target" in x and "1.8–4.2 mA" in x for x in labels), labels
        assert not any("0.3–0.7 mA" in x for x in labels), labels


def test_board_check_schema_holds_the_check_schema_unchanged() -> None:
    # the board schema embeds check.schema.json as $defs.check (its $defs lifted to the
    # root); a change to the check schema must be made in both
    check, board = schema("check"), schema("board_check")
    body = {k: v for k, v in check.items()
            if k not in ("$schema", "title", "description", "$defs")}
    assert board["$defs"]["check"] == body
    for name, definition in check["$defs"].items():
        assert board["$defs"][name] == definition
