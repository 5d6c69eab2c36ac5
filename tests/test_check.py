"""`check` end to end: the analysis of one stage with stock parts, and its command line."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze
from stockbias.errors import InputError
from stockbias.job import load_job, parse_job
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "check.schema.json").read_text())
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = ROOT / "tests" / "data" / "line_driver_dc.toml"   # DC window and limits only
FAILING = "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0"   # ±20 % window missed at both ends
PASSING = "R1=MF-23K7,R2=MF-4K99,RC=CF-2K2,RE=MF-1K00"  # passes a ±30 % window with QN-LB1

runner = CliRunner()


@pytest.fixture(scope="module")
def wide_job(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("jobs") / "wide.toml"
    path.write_text(JOB.read_text().replace("ic_window_pct = 20", "ic_window_pct = 30"))
    return path


def values(text: str) -> dict[str, str]:
    return dict(item.split("=") for item in text.split(","))


def test_failing_design_names_the_failing_limits_and_corners() -> None:
    res = analyze(load_job(JOB), values(FAILING), "QN-GP40", read_inventory(SHELF), samples=2000)
    assert not res.ok
    assert {c.name for c in res.failing} == {"ic_min", "ic_max"}
    ic_min = next(c for c in res.constraints if c.name == "ic_min")
    # the low-current corner: low supply, R1 high, R2 low, RE high, hFE min, VBE max, cold
    settings = {k: v["setting"] for k, v in ic_min.corner.items()}
    assert settings == {"vcc": "min", "R1": "max", "R2": "min", "RC": "min", "RE": "max",
                        "hfe": "min", "vbe": "max", "icbo": "min", "ambient_c": "min"}
    assert ic_min.margin == pytest.approx(ic_min.worst - 1.2e-3, rel=1e-12)
    # Hand check of the nominal point (constant VBE, DESIGN §2 divider formula): VBB = 12·10/57,
    # RBB = 47k‖10k, β = √(100·300), VBE = 0.65 V at 25 °C, IE = (VBB−VBE)/(RE + RBB/(β+1)).
    vbb, rbb, beta = 12 * 10 / 57, 47e3 * 10e3 / 57e3, (100 * 300) ** 0.5
    ie = (vbb - 0.65 + rbb * 25e-9) / (1e3 + rbb / (beta + 1))   # ICBO at nominal: half of 50 nA
    assert res.nominal["ie"] == pytest.approx(ie, rel=1e-9)


def test_passing_design(wide_job: Path) -> None:
    res = analyze(load_job(wide_job), values(PASSING), "QN-LB1", read_inventory(SHELF),
                  samples=4000, seed=3)
    assert res.ok, [c.name for c in res.failing]
    assert res.monte_carlo is not None
    assert res.monte_carlo.yield_.yield_ == 1.0   # every board inside a window its EVA meets


def test_off_stock_value_is_analysed_with_a_warning() -> None:
    res = analyze(load_job(JOB), {"R1": "CF-47K", "R2": "9k1", "RC": "CF-3K3", "RE": "CF-1K0"},
                  "QN-GP40", read_inventory(SHELF), samples=0, tolerance_pct=2.0)
    assert res.parts["R2"].off_stock
    assert res.parts["R2"].tol == pytest.approx(0.02)
    assert any("9k1 is not a stock part" in w for w in res.warnings)


def test_value_matching_a_stock_line_uses_that_line() -> None:
    res = analyze(load_job(JOB), {"R1": "47k", "R2": "10k", "RC": "3k3", "RE": "1k"}, "QN-GP40",
                  read_inventory(SHELF), samples=0)
    assert res.parts["R1"].part_ids == ["CF-47K"]
    assert res.parts["RE"].part_ids == ["MF-1K00"]   # the 1 % line beats the 5 % one


def test_series_pair_bounds_are_exact() -> None:
    res = analyze(load_job(JOB), {"R1": "CF-22K+CF-22K", "R2": "CF-10K", "RC": "CF-3K3",
                                  "RE": "CF-1K0"}, "QN-GP40", read_inventory(SHELF), samples=0)
    p = res.parts["R1"]
    assert (p.value, p.arrangement, p.part_ids) == (44e3, "series", ["CF-22K", "CF-22K"])
    assert p.tol == pytest.approx(0.05)
    # two equal 0.25 W ±5 % parts in series (the same signed tempco, so drift moves both
    # alike): at the worst split one carries 1.05/(1.05 + 0.95) = 0.525 of the pair's power,
    # so the pair takes 0.25/0.525 W (hand calculation)
    assert p.rating == pytest.approx(0.25 / 0.525, rel=1e-12)


def test_saturated_stage_reports_real_voltages_and_no_gain() -> None:
    job = parse_job('[supply]\nvolts = 12\n[target]\nic = "1.5 mA"\nic_window_pct = 20\n')
    res = analyze(job, {"R1": "CF-10K", "R2": "CF-10K", "RC": "CF-10K", "RE": "CF-1K0"},
                  "QN-GP40", read_inventory(SHELF), samples=0)
    assert res.nominal["region"] == "saturated"
    assert res.nominal["gain"] is None and res.nominal["gm"] is None
    assert res.nominal["vce"] == pytest.approx(0.2)   # the row's VCE(sat)
    active = next(c for c in res.constraints if c.name == "active_region")
    assert not active.ok


@pytest.mark.parametrize(
    ("assignment", "transistor", "words"),
    [
        ({"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3"}, "QN-GP40", "needs a value for RE"),
        ({"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0", "RB": "1k"},
         "QN-GP40", "no role RB"),
        ({"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "4k7k"}, "QN-GP40",
         "letter code"),
        ({"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "LINK-0R"}, "QN-GP40",
         "zero-ohm link"),
        ({"R1": "CF-47K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}, "QX-99",
         "no transistor with that part id"),
    ],
)
def test_bad_assignments(assignment: dict[str, str], transistor: str, words: str) -> None:
    with pytest.raises(InputError, match=words):
        analyze(load_job(JOB), assignment, transistor, read_inventory(SHELF), samples=0)


def test_cli_failing_check_exit_1_and_json_schema() -> None:
    result = runner.invoke(app_(), ["check", str(JOB), "-i", str(SHELF), "-v", FAILING,
                                    "-t", "QN-GP40", "--json", "--samples", "500"])
    assert result.exit_code == 1
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["ok"] is False
    assert payload["nominal"]["region"] == "active"
    assert {"min", "max", "corner_min", "corner_max"} <= set(payload["worst_case"]["ic"])


def test_cli_passing_check_exit_0_table(wide_job: Path) -> None:
    result = runner.invoke(app_(), ["check", str(wide_job), "-i", str(SHELF), "-v", PASSING,
                                    "-t", "QN-LB1", "--samples", "500"])
    assert result.exit_code == 0, result.output
    assert "PASS: all" in result.stdout
    assert "Worst case over 512 corners" in result.stdout


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["-v", "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=1 kV", "-t", "QN-GP40"], "unit 'V'"),
        (["-v", "R1", "-t", "QN-GP40"], "expected ROLE=VALUE_OR_PART_ID"),
        (["-v", FAILING, "-t", "QN-GP40", "--samples", "-3"], "usage error"),
    ],
)
def test_cli_bad_input_one_line_exit_2(args: list[str], words: str) -> None:
    result = runner.invoke(app_(), ["check", str(JOB), "-i", str(SHELF), *args])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and words in lines[0], lines


def test_cli_bad_job_names_file_line_and_key(tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text(JOB.read_text().replace('vce_min = "3 V"', 'vce_min = "3 A"'))
    result = runner.invoke(app_(), ["check", str(bad), "-i", str(SHELF), "-v", FAILING,
                                    "-t", "QN-GP40"])
    assert result.exit_code == 2
    assert result.stderr.strip() == (f"{bad}:10: key 'target.vce_min': unit 'A' where volt (V) "
                                     "expected (text '3 A')")


def app_():
    from stockbias.cli.app import app

    return app
