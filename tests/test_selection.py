"""Choosing the design the bench commands act on: --rank, --from RESULT.json, --values."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stockbias.analysis.check import analyze
from stockbias.errors import InputError
from stockbias.job import load_job
from stockbias.selection import (
    ResultFileError,
    Selection,
    bench_needs,
    choose,
    from_result_file,
    resolve_selection,
)
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"


def design(rank: int, **parts: object) -> dict[str, object]:
    return {"rank": rank, "topology": "divider", "cost": 0.1, "transistor": {"part_id": "QN-LB1"},
            "parts": parts or {
                "R1": {"part_id": "MF-23K7", "value_ohm": 23700.0, "tolerance_pct": 1.0,
                       "arrangement": "single"},
                "R2": {"part_id": "MF-4K99", "value_ohm": 4990.0, "tolerance_pct": 1.0},
                "RC": {"part_id": ["CF-1K0", "CF-1K5"], "value_ohm": 2500.0,
                       "tolerance_pct": 5.0, "arrangement": "series"},
                "RE": {"part_id": ["CF-2K2", "CF-2K2"], "value_ohm": 1100.0,
                       "tolerance_pct": 5.0, "arrangement": "parallel"}},
            "worst_case": {}, "constraints": []}


def saved(tmp_path: Path, doc: object) -> Path:
    path = tmp_path / "result.json"
    path.write_text(json.dumps(doc))
    return path


def test_from_file_reads_the_design_shape_and_pairs(tmp_path: Path) -> None:
    path = saved(tmp_path, {"status": "optimal", "solve_seconds": 0.5,
                            "designs": [design(1), design(2, R1={"part_id": "CF-47K"},
                                                         R2={"part_id": "CF-10K"},
                                                         RC={"part_id": "CF-3K3"},
                                                         RE={"part_id": "CF-1K0"})]})
    first = from_result_file(path)
    assert first == Selection("divider", "QN-LB1", {"R1": "MF-23K7", "R2": "MF-4K99",
                                                    "RC": "CF-1K0+CF-1K5",
                                                    "RE": "CF-2K2|CF-2K2"},
                              f"design rank 1 of {path}")
    second = from_result_file(path, rank=2)
    assert second.values["RE"] == "CF-1K0"
    # analyze() takes the selection as it is
    res = analyze(load_job(JOB), first.values, first.transistor_id, read_inventory(SHELF),
                  samples=0)
    assert res.parts["RC"].value == pytest.approx(2500.0)   # series: 1 k + 1.5 k
    assert res.parts["RE"].value == pytest.approx(1100.0)   # parallel: 2.2 k ‖ 2.2 k


@pytest.mark.parametrize(("doc", "key", "message"), [
    ([], None, "expected a JSON object"),
    ({"designs": {}}, "designs", "expected a 'designs' list"),
    ({"status": "infeasible", "designs": []}, "designs", "no designs (search status infeasible)"),
    ({"designs": [design(1)]}, None, None),
    ({"designs": [{**design(1), "topology": "bridge"}]}, "designs[0].topology",
     "unknown topology"),
    ({"designs": [{**design(1), "transistor": {}}]}, "designs[0].transistor.part_id",
     "needs transistor.part_id"),
    ({"designs": [design(1, R1={"part_id": ["A"], "arrangement": "series"})]},
     "designs[0].parts.R1.part_id", "a pair is a list of two part ids"),
    ({"designs": [design(1, R1={"part_id": ["A", "B"]})]},
     "designs[0].parts.R1.arrangement", "arrangement must be 'series' or 'parallel'"),
    ({"designs": [design(1, R1={"part_id": None, "value_ohm": -3})]},
     "designs[0].parts.R1.value_ohm", "needs a positive value_ohm"),
    ({"designs": [design(1, R1={"part_id": 7})]}, "designs[0].parts.R1.part_id",
     "part_id must be"),
    ({"designs": [design(2)]}, "designs", "no design of rank 1"),
])
def test_from_file_errors_name_the_file_and_the_key(tmp_path: Path, doc: object,
                                                    key: str | None,
                                                    message: str | None) -> None:
    path = saved(tmp_path, doc)
    if message is None:
        assert from_result_file(path).transistor_id == "QN-LB1"
        return
    with pytest.raises(ResultFileError) as err:
        from_result_file(path)
    line = err.value.one_line()
    assert line.startswith(f"{path}: ") and message in line
    if key is not None:
        assert f"key '{key}'" in line


def test_from_file_that_is_not_json(tmp_path: Path) -> None:
    path = tmp_path / "r.json"
    path.write_text('{"designs": [\n  oops]')
    with pytest.raises(ResultFileError, match="not valid JSON") as err:
        from_result_file(path)
    assert err.value.line == 2


def test_choose_rules() -> None:
    job, inv = load_job(JOB), read_inventory(SHELF)
    sel = choose(job, inv, values=["R1=47k,R2=10k", "RC=3k3,RE=1k"], transistor="QN-GP40")
    assert sel.values == {"R1": "47k", "R2": "10k", "RC": "3k3", "RE": "1k"}
    assert sel.topology == "divider" and sel.source == "--values"
    with pytest.raises(InputError, match="not both"):
        choose(job, inv, from_file="x.json", values=["R1=1k"], transistor="QN-GP40")
    with pytest.raises(InputError, match="does not go with --values"):
        choose(job, inv, rank=2, values=["R1=1k"], transistor="QN-GP40")
    with pytest.raises(InputError, match="--transistor goes with --values"):
        choose(job, inv, rank=1, transistor="QN-GP40")


def test_bench_needs_counts_uses_times_build_quantity() -> None:
    job, inv = load_job(JOB), read_inventory(SHELF)
    sel = Selection("divider", "QN-GP40", {"R1": "CF-22K+CF-22K", "R2": "CF-10K",
                                           "RC": "CF-10K", "RE": "9k1"}, "test")
    parts, t = resolve_selection(job, sel, inv)
    needs = {n.part_id: n for n in bench_needs(parts, t, 10)}
    assert needs["CF-22K"].per_board == 2 and needs["CF-22K"].quantity == 20
    assert needs["CF-10K"].roles == ("R2", "RC") and needs["CF-10K"].quantity == 20
    assert needs["QN-GP40"].quantity == 10 and needs["QN-GP40"].remaining == 110
    assert needs[""].short and "not in stock" in needs[""].description  # 9k1: off the shelf


def test_rank_runs_the_search() -> None:
    pytest.importorskip("stockbias.search.design",
                        reason="the design search module is not in this checkout yet")
    job, inv = load_job(JOB), read_inventory(SHELF)
    from stockbias.search.design import design as run_design

    best = run_design(job, inv, top=2).to_dict()["designs"]
    if len(best) < 2:
        pytest.skip("the sample job has fewer than two designs")
    sel = choose(job, inv, rank=2)
    assert sel.transistor_id == best[1]["transistor"]["part_id"]
    assert sel.topology == best[1]["topology"]
