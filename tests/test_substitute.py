"""`substitute`: drop-ins, the least rework proven by exhaustive search, ratings that rule out.

The shelf and job in tests/data are invented for these tests. The stage (R1 = R2 = 47 k,
RC = 2.7 k, RE = 4.7 k) passes with Q-A (hFE 100–200); Q-B (hFE 150–600) raises IC at hFE
max enough to lose the 3.5 V headroom; Q-C's VCEO (10 V) is below the 12.24 V supply maximum.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze_stage
from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.job import load_job
from stockbias.search.substitute import substitute
from stockbias.stock_io import read_inventory

DATA = Path(__file__).resolve().parent / "data"
SHELF = DATA / "substitute_shelf.csv"
JOB = DATA / "substitute_job.toml"
VALUES = {"R1": "R-47K", "R2": "R-47K", "RC": "R-2K7", "RE": "R-4K7"}


@pytest.fixture(scope="module")
def result():
    # the worst-case limits alone (tests/test_keep_purpose.py holds the stage's purpose too)
    return substitute(load_job(JOB), VALUES, "Q-A", read_inventory(SHELF), samples=200,
                      purpose=False)


def by_id(result, part_id):
    return next(c for c in result.candidates if c.transistor.part_id == part_id)


def test_drop_in_passes(result) -> None:
    a = by_id(result, "Q-A")
    assert a.drop_in and not a.changes and a.check.ok
    assert result.candidates[0].transistor.part_id == "Q-A"   # drop-ins rank first


def test_vceo_and_polarity_rule_out_with_the_rating_named(result) -> None:
    c = by_id(result, "Q-C")
    assert c.ruled_out == "VCEO 10 V below the 12.2 V supply maximum"   # 12 V + 2 %
    d = by_id(result, "Q-D")
    assert d.ruled_out.startswith("polarity PNP")
    assert [x.transistor.part_id for x in result.candidates][-2:] == ["Q-C", "Q-D"]


def test_headroom_failure_fixed_by_the_least_rework(result) -> None:
    job, inv = load_job(JOB), read_inventory(SHELF)
    b = by_id(result, "Q-B")
    assert not b.drop_in
    assert {c.name for c in b.drop_in_check.failing} == {"vce_min"}
    assert list(b.changes) == ["RC"] and b.proven
    # Exhaustive proof on the small shelf: no zero-change fix (the drop-in fails above), and
    # among all one-resistor changes the reported one has the lowest added cost, then the
    # largest IC margin.
    base = {role: resolve_resistor(role, text, inv, 5.0) for role, text in VALUES.items()}
    q = inv.find_transistor("Q-B")
    passing = []
    for role in VALUES:
        for r in inv.resistors:
            if r.part_id == VALUES[role]:
                continue
            parts = dict(base)
            parts[role] = resolve_resistor(role, r.part_id, inv, 5.0)
            res = analyze_stage(job, job.stage, parts, q, samples=0)
            if res.ok:
                by = {c.name: c for c in res.constraints}
                margin = min(by["ic_min"].margin, by["ic_max"].margin)
                passing.append((r.unit_cost, -margin, role, r.part_id))
    assert passing, "the test shelf must have a one-change fix"
    best_cost = min(p[0] for p in passing)
    assert b.added_cost == pytest.approx(best_cost, abs=1e-9)
    best = min(passing)
    (role, part), = ((r, p.part_ids[0]) for r, p in b.changes.items())
    chosen = next(p for p in passing if p[2] == role and p[3] == part)
    assert chosen[:2] == pytest.approx(best[:2], rel=1e-9, abs=1e-12)
    assert b.check.ok


def test_cli_json_and_exit_codes() -> None:
    runner = CliRunner()
    args = ["substitute", str(JOB), "-i", str(SHELF), "-v",
            ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t", "Q-A", "--json",
            "--samples", "100", "--no-keep-purpose"]
    out = runner.invoke(app, args)
    assert out.exit_code == 0, out.output
    payload = json.loads(out.stdout)
    first = payload["candidates"][0]
    assert (first["part_id"], first["drop_in"], first["ruled_out"], first["changes"]) == \
        ("Q-A", True, None, [])
    qb = next(c for c in payload["candidates"] if c["part_id"] == "Q-B")
    assert [c["role"] for c in qb["changes"]] == ["RC"]
    assert isinstance(qb["changes"][0]["part_id"], str)
    qc = next(c for c in payload["candidates"] if c["part_id"] == "Q-C")
    assert "VCEO" in qc["ruled_out"]
    bad = runner.invoke(app, ["substitute", str(JOB), "-i", str(SHELF), "-v", "R1=R-47K",
                              "-t", "Q-A"])
    assert bad.exit_code == 2
    assert "needs a value for R2, RC, RE" in bad.stderr


def test_json_matches_schema(result) -> None:
    import jsonschema

    from stockbias.render.json_out import clean

    schema = json.loads((Path(__file__).resolve().parent.parent / "stockbias" / "schemas"
                         / "substitute.schema.json").read_text())
    jsonschema.validate(clean(result.to_dict()), schema)


def test_report(tmp_path: Path) -> None:
    out = tmp_path / "sub.html"
    res = CliRunner().invoke(app, ["substitute", str(JOB), "-i", str(SHELF), "-v",
                                   ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t", "Q-A",
                                   "--samples", "100", "--report", str(out)])
    assert res.exit_code == 0, res.output
    html = out.read_text()
    assert "Q-B: with the least rework" in html
    assert "ruled out" in html and "VCEO 10 V below the 12.2 V supply maximum" in html
