"""Command-line values (`check -v ROLE=...`): part ids, values, pairs, and the traps between.

The shelf here is invented for these tests and names its lines the way some stock rooms do,
with the value in the id (``R4K7``, ``R10K``), which makes a mistyped id read as a value
(``R999`` is 0.999 Ω in the IEC 60062 letter code).  Expected values: hand calculation.
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
from typer.testing import CliRunner

from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
JOB = ROOT / "inventory_samples" / "line_driver_job.toml"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "check.schema.json").read_text())

HEADER = ("kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,polarity,hfe_min,"
          "hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max\n")
ROWS = """resistor,R47K,47k,5,0.25,,50,0.010,,,,,,,,
resistor,R10K,10k,5,0.25,,50,0.010,,,,,,,,
resistor,R10K-MF,10k,1,0.25,,50,0.030,,,,,,,,
resistor,R10K-MF2,10k,1,0.25,,80,0.020,,,,,,,,
resistor,R3K3,3k3,5,0.25,,50,0.010,,,,,,,,
resistor,R1K0,1k,5,0.25,,50,0.010,,,,,,,,
resistor,R4K7,4k7,5,0.25,,50,0.010,,,,,,,,
transistor,QN-1,,,,,50,0.040,NPN,100,300,40V,200mA,625mW,0.60,0.70
"""

runner = CliRunner()


@pytest.fixture()
def shelf(tmp_path: Path) -> Path:
    path = tmp_path / "value_named_shelf.csv"
    path.write_text(HEADER + ROWS)
    return path


def _check(shelf: Path, values: str, *extra: str):
    return runner.invoke(app, ["check", str(JOB), "-i", str(shelf), "-t", "QN-1", "-v", values,
                               "--samples", "0", *extra])


def _one_line_error(result) -> str:
    assert result.exit_code == 2, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, lines
    assert "Traceback" not in result.output
    return lines[0]


@pytest.mark.parametrize("token", ["R999", "R47", "R4K8", "r4k8"])
def test_token_that_resembles_the_shelf_ids_is_an_error_naming_them(shelf: Path,
                                                                    token: str) -> None:
    # R999 and R47 read as 0.999 Ω and 0.47 Ω; beside lines named R4K7, R10K they are far
    # more likely mistyped ids: exit 2, naming the nearest ids, never a PASS.
    line = _one_line_error(_check(shelf, f"R1=R47K,R2=R10K,RC=R3K3,RE={token}"))
    assert "nearest ids" in line and token in line
    assert "R4K7" in line or "R47K" in line or "R1K0" in line


def test_part_ids_match_in_any_letter_case(shelf: Path) -> None:
    # one rule for ids and role names: letter case is ignored; the stock's spelling is shown
    result = runner.invoke(app, ["check", str(JOB), "-i", str(shelf), "-t", "qn-1", "-v",
                                 "r1=r47k,R2=R10k,rc=R3K3,RE=r1k0", "--samples", "0",
                                 "--json"])
    assert result.exit_code in (0, 1), result.output
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert {role: p["part_id"] for role, p in payload["parts"].items()} == \
        {"R1": "R47K", "R2": "R10K", "RC": "R3K3", "RE": "R1K0"}
    assert payload["transistor"]["part_id"] == "QN-1"


def test_exponent_plus_is_a_number_not_a_series_pair(shelf: Path) -> None:
    # 4.7e+4 is 47 kΩ, the R47K line (hand calculation), not a series pair '4.7e' + '4'
    result = _check(shelf, "R1=4.7e+4,R2=R10K,RC=R3K3,RE=R1K0", "--json")
    assert result.exit_code in (0, 1), result.output
    r1 = json.loads(result.stdout)["parts"]["R1"]
    assert (r1["part_id"], r1["value_ohm"], r1["arrangement"]) == ("R47K", 47e3, "single")


def test_exponent_plus_inside_a_series_pair() -> None:
    p = resolve_resistor("R1", "4.7E+4+1k", None, 5.0)
    assert (p.arrangement, p.value) == ("series", pytest.approx(48e3))   # 47 k + 1 k


@pytest.mark.parametrize("token", ["1e308", "1e-9", "20G"])
def test_implausible_value_is_a_one_line_error(shelf: Path, token: str) -> None:
    # the stock reader's plausible range for a resistance: 1 mΩ … 10 GΩ
    line = _one_line_error(_check(shelf, f"R1={token},R2=R10K,RC=R3K3,RE=R1K0"))
    assert "between 1 mΩ and 10 GΩ" in line and token in line


def test_unstocked_value_is_flagged_on_the_parts_line_json_and_verdict(shelf: Path) -> None:
    values = "R1=R47K,R2=R10K,RC=R3K3,RE=1k2"
    text = _check(shelf, values)
    assert text.exit_code in (0, 1), text.output
    lines: list[str] = []  # a line and its indented continuation (lines wrap to the width)
    for x in text.stdout.splitlines():
        if x.startswith("  ") and lines:
            lines[-1] += " " + x.strip()
        else:
            lines.append(x)
    parts = next(x for x in lines if x.startswith("Parts:"))
    assert "RE = 1.2 kΩ ±5 % (NOT IN STOCK)" in parts
    verdict = next(x for x in lines if x.startswith(("PASS", "FAIL")))
    assert "with values not in stock: RE" in verdict
    result = _check(shelf, values, "--json")
    payload = json.loads(result.stdout)
    jsonschema.validate(payload, SCHEMA)
    assert payload["parts"]["RE"]["in_stock"] is False
    assert payload["parts"]["R1"]["in_stock"] is True


def test_value_on_several_lines_says_which_it_took_and_why(shelf: Path) -> None:
    # 10 k is on three lines: the 1 % ones beat the 5 % one; of those R10K-MF2 is cheaper
    result = _check(shelf, "R1=R47K,R2=10k,RC=R3K3,RE=R1K0", "--json")
    payload = json.loads(result.stdout)
    r2 = payload["parts"]["R2"]
    assert r2["part_id"] == "R10K-MF2"
    assert "took R10K-MF2" in r2["choice"] and "tightest tolerance" in r2["choice"]
    assert any("took R10K-MF2" in w for w in payload["warnings"])


def test_exact_ids_and_plain_values_still_work(shelf: Path) -> None:
    result = _check(shelf, "R1=R47K,R2=R10K,RC=3.3k,RE=1000", "--json")
    assert result.exit_code in (0, 1), result.output
    parts = json.loads(result.stdout)["parts"]
    assert parts["RC"]["part_id"] == "R3K3" and parts["RE"]["part_id"] == "R1K0"


def test_unknown_text_names_the_nearest_ids(shelf: Path) -> None:
    inv = read_inventory(shelf)
    with pytest.raises(InputError, match="nearest ids: R47K"):
        resolve_resistor("R1", "R47K-X", inv, 5.0)
