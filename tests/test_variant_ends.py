"""A long list of the free role's values: the range found from its ends, the stock rule.

Expected values: the complete listing of the same search (every screened candidate checked
at every vertex, the listing this shortcut replaces: its own correctness against an
exhaustive ``analyze_stage`` evaluation is ``tests/test_alternatives.py``), and the stock
rule written here as a loop over each design's lines (each line's uses × build quantity ≤
its quantity).  Shelves and jobs are generated for these tests (invented data).
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.parts import Inventory, Resistor
from stockbias.search import alternatives
from stockbias.search.alternatives import _fits, variants_of
from stockbias.search.candidates import PARALLEL, SERIES, SINGLE, build_shelf
from stockbias.search.deadline import Deadline
from stockbias.search.design import design
from tests.test_search_bounded import JOB, generated_shelf, job_for, signature

ROOT = Path(__file__).resolve().parent.parent
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "design.schema.json").read_text())


def _pairs_job(**search):
    job = job_for()
    return replace(job, build=replace(job.build, allow_pairs=True),
                   search=replace(job.search, **search))


def _ids(d) -> set[tuple[str, ...]]:
    return {tuple(v.part.part_ids) for v in d.variants}


@pytest.mark.parametrize(("lines", "seed", "full_list"), [(30, 5, 64), (26, 2, 64), (22, 5, 0)])
def test_the_ends_of_a_long_list_are_those_of_the_complete_list(lines, seed, full_list,
                                                                monkeypatch):
    inv = generated_shelf(lines, 2, seed=seed)
    job = _pairs_job()
    monkeypatch.setattr(alternatives, "FULL_LIST", full_list)
    ends = design(job, inv)
    monkeypatch.setattr(alternatives, "FULL_LIST", 10**9)
    full = design(job, inv)
    assert ends.status == full.status == "optimal"
    assert signature(ends) == signature(full)          # the ranking is untouched
    shortened = 0
    for a, b in zip(ends.designs, full.designs, strict=True):
        ra, rb = a.variant_range(), b.variant_range()
        assert rb["every_variant_listed"] and rb["count"] == len(b.variants)
        # the ends: the smallest and largest value of the complete list, exactly
        assert (ra["min_ohm"], ra["max_ohm"]) == (rb["min_ohm"], rb["max_ohm"])
        assert _ids(a) <= _ids(b)                     # every value listed works
        assert a.variants[0].representative
        assert a.variants[0].part.part_ids == a.check.parts["RC"].part_ids
        if ra["every_variant_listed"]:
            assert _ids(a) == _ids(b) and ra["count"] == rb["count"]
        else:
            shortened += 1
            assert ra["count"] is None
            # the bound counts screened candidates between the ends: never below the count
            assert ra["count_at_most"] >= rb["count"]
            assert len(a.variants) < len(b.variants)
    assert shortened, "each case is built so that at least one list is long"


def test_every_variant_is_listed_with_the_variants_option(monkeypatch):
    inv = generated_shelf(22, 1, seed=5)
    job = _pairs_job(top=2)
    monkeypatch.setattr(alternatives, "FULL_LIST", 0)      # the default would scan the ends
    checked = design(job, inv, verify_variants=True)
    monkeypatch.setattr(alternatives, "FULL_LIST", 10**9)
    vertices = design(job, inv)
    for a, b in zip(checked.designs, vertices.designs, strict=True):
        rng = a.variant_range()
        assert rng["every_variant_listed"] and rng["count"] == len(a.variants)
        assert all(v.verified for v in a.variants)
        # the full check can only remove values that pass at every vertex
        assert _ids(a) <= _ids(b)


def _uses_fit(shelf, cands, core, fc, j, need) -> bool:
    """The stock rule as a loop over the design's lines (written here)."""
    count: dict[int, int] = {}
    for c, i in [(cands[r], i) for r, i in core.items()] + [(fc, j)]:
        for line in (int(c.line_a[i]), int(c.line_b[i])):
            if line >= 0:
                count[line] = count.get(line, 0) + 1
    return all(shelf.lines[line].qty >= n * need for line, n in count.items())


def test_the_vectorised_stock_rule_equals_the_loop():
    rng = np.random.default_rng(11)
    # quantities 4…16 for a build of 4: a line used twice needs 8, three times 12
    values = np.sort(10 ** rng.uniform(2, 5, 14))
    res = tuple(Resistor(f"S{i:02d}", float(v), 1.0, 0.25, 100.0, int(rng.choice([4, 8, 12])),
                         0.01, line=i + 2) for i, v in enumerate(values))
    inv = Inventory("<stock rule>", res, generated_shelf(4, 1, seed=1).transistors)
    job = _pairs_job()
    job = replace(job, build=replace(job.build, quantity=4))
    shelf = build_shelf(job, inv)
    fc = shelf.candidates(False, True)
    cands = {"R1": fc, "R2": fc, "RE": fc}
    fj = np.arange(len(fc))
    seen = set()
    for _ in range(60):
        core = {r: int(rng.integers(len(fc))) for r in cands}
        got = _fits(job, shelf, cands, core, fc, fj)
        want = np.array([_uses_fit(shelf, cands, core, fc, j, 4) for j in fj])
        assert np.array_equal(got, want)
        seen.add((bool(got.any()), bool((~got).any())))
    assert (True, True) in seen and (False, True) in seen   # both outcomes exercised


def test_the_shortened_list_in_json_and_on_screen(tmp_path):
    inv = generated_shelf(26, 2, seed=2)
    text = JOB.format(topology="divider", window=15,
                      objectives='["cost", "part_count", "distinct_values", "ic_margin"]')
    text = text.replace("[build]\n", "[build]\nallow_pairs = true\n")
    assert "allow_pairs = true" in text
    job_file = tmp_path / "job.toml"
    job_file.write_text(text, encoding="utf-8")
    stock = tmp_path / "stock.csv"
    rows = ["kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,polarity,"
            "hfe_min,hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max"]
    for r in inv.resistors:
        rows.append(f"resistor,{r.part_id},{r.value_ohm!r},{r.tolerance_pct},{r.power_w},"
                    f"{r.tempco_ppm or 0},{r.qty},{r.unit_cost},,,,,,,,")
    for q in inv.transistors:
        rows.append(f"transistor,{q.part_id},,,,,{q.qty},{q.unit_cost},{q.polarity},"
                    f"{q.hfe_min},{q.hfe_max},{q.vceo_max},{q.ic_max},{q.pd_max_w},"
                    f"{q.vbe_min},{q.vbe_max}")
    stock.write_text("\n".join(rows) + "\n", encoding="utf-8")
    runner = CliRunner()
    out = runner.invoke(app, ["design", str(job_file), "-i", str(stock), "--json"])
    assert out.exit_code == 0, out.output
    payload = json.loads(out.stdout)
    jsonschema.validate(payload, SCHEMA)
    short = [d for d in payload["designs"] if not d["variant_range"]["every_variant_listed"]]
    assert short, "this shelf gives at least one long list"
    for d in short:
        rng = d["variant_range"]
        assert rng["count"] is None and rng["count_at_most"] >= len(d["variants"])
        vals = [v["value_ohm"] for v in d["variants"]]
        assert (min(vals), max(vals)) == (rng["min_ohm"], rng["max_ohm"])
    screen = runner.invoke(app, ["design", str(job_file), "-i", str(stock)],
                           env={"COLUMNS": "80"})
    assert screen.exit_code == 0, screen.output
    assert "values in stock" in screen.output and "up to " in screen.output
    assert "--variants checks each" in screen.output.replace("\n  ", " ")
    assert max(len(line) for line in screen.output.splitlines()) <= 80


def _index(shelf, table, part) -> int:
    """The candidate of ``table`` built from the same stock line(s) as ``part``."""
    line = {r.part_id: i for i, r in enumerate(shelf.lines)}
    ids = [line[p.part_id] for p in part.parts]
    code = {"single": SINGLE, "series": SERIES, "parallel": PARALLEL}[part.arrangement]
    a, b = (ids[0], -1) if len(ids) == 1 else (min(ids), max(ids))
    hit = np.flatnonzero((table.arrangement == code) & (table.line_a == a)
                         & (table.line_b == b))
    assert hit.size == 1
    return int(hit[0])


def test_a_listing_the_deadline_cut_checks_no_end_and_claims_no_bound():
    inv = generated_shelf(30, 2, seed=5)
    job = _pairs_job(top=1)
    d = design(job, inv).designs[0]
    shelf = build_shelf(job, inv)
    cands = {r: shelf.candidates(r == "RE", True) for r in ("R1", "R2", "RE", "RC")}
    core = {r: _index(shelf, cands[r], p) for r, p in d.check.parts.items() if r != "RC"}
    args = (job, job.stage, shelf, d.topology, d.transistor, cands, core,
            tuple(job.search.objectives))
    whole = variants_of(*args, every=True)
    ends = variants_of(*args, every=False)
    assert ends.screened.size > alternatives.FULL_LIST and not ends.complete
    vals = sorted(cands["RC"].value[[v.index for v in whole.variants]])
    got = sorted(cands["RC"].value[[v.index for v in ends.variants]])
    # source: the complete listing of the same network (every screened value checked)
    assert (got[0], got[-1]) == (vals[0], vals[-1])
    # a deadline already past: nothing is checked, and the listing is not a bounded range
    cut = variants_of(*args, deadline=Deadline.after_checks(1), every=False)
    assert cut.variants == [] and cut.complete
    # a deadline that passes after the low end's first block: the high end is not sought
    late = variants_of(*args, deadline=Deadline.after_checks(2), every=False)
    assert late.complete and late.variants
    assert max(cands["RC"].value[[v.index for v in late.variants]]) < vals[-1]
