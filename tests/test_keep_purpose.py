"""An existing stage keeps its purpose in `consolidate` and `substitute`.

The stage as it stands is its own reference: by default a change keeps the nominal gain
within ±10 %, the worst-case input resistance at or above 80 %, the worst-case swing at or
above 90 % and the worst-case supply current at or below 125 % of today's figures.

Sources of expected values:

* exhaustive enumerations written in these tests (tests/test_consolidate.py's reference
  for boards; an enumeration of every assignment of the shelf's lines to the roles for
  `substitute`), run on a stage whose purpose limits are written out here from the
  figures ``check`` reports for today's design (tests/board_reference.held_stage);
* those enumerations without the limits, to show that today's optimum breaks a default;
* the bundled board and the README's stage, with the figures ``check`` reports for them.
"""

from __future__ import annotations

import itertools
import json
from dataclasses import replace
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from board_reference import held_stage
from board_reference import resolved as _resolved
from test_consolidate import CASES, _common_checks, _exhaustive, _make
from typer.testing import CliRunner
from vertex_reference import vertex_screen

from stockbias.analysis.check import analyze_stage, build_spec
from stockbias.assign import resolve_resistor
from stockbias.cli.app import app
from stockbias.errors import InputError, JobError
from stockbias.job import KeepPurpose, load_job, parse_job
from stockbias.search.candidates import micro
from stockbias.search.consolidate import consolidate
from stockbias.search.keep_purpose import parse_keep_purpose
from stockbias.search.substitute import substitute
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
DATA = Path(__file__).resolve().parent / "data"
BOARD = ROOT / "inventory_samples" / "distribution_amp_board.toml"
DRAWERS = ROOT / "inventory_samples" / "workshop_drawers.csv"
LINE_JOB = ROOT / "inventory_samples" / "line_driver_job.toml"
LINE_VALUES = "R1=CF-47K,R2=CF-10K,RC=CF-3K3,RE=CF-1K0"
runner = CliRunner()


def schema(name: str) -> dict:
    return json.loads((ROOT / "stockbias" / "schemas" / f"{name}.schema.json").read_text())

HELD_KEYS = ("gain_nominal_min", "gain_nominal_max", "rin_min", "swing_pk")


def _limits_of(stage) -> dict[str, float]:
    t = stage.target
    out = {k: getattr(t, k) for k in HELD_KEYS if getattr(t, k) is not None}
    if stage.limits.supply_current_max is not None:
        out["supply_current_max"] = stage.limits.supply_current_max
    return out


def _current_parts(job, inv, st):
    parts = {role: _resolved(role, inv.find_resistor(pid)) for role, pid in st.values.items()}
    return parts, inv.find_transistor(st.transistor)


def _held_job(job, inv, **pct):
    stages = []
    for st in job.stages:
        parts, q = _current_parts(job, inv, st)
        stages.append(held_stage(job, st, parts, q, **pct))
    return replace(job, stages=tuple(stages))


def _within(before: dict, after, gain=0.10, rin=0.80, swing=0.90, current=1.25) -> None:
    """The after design's check figures against today's, by the tolerances given."""
    p = after.purpose
    g0, g1 = abs(before["gain"]), abs(p["gain"].nominal)
    assert (1 - gain) * g0 * (1 - 1e-9) <= g1 <= (1 + gain) * g0 * (1 + 1e-9)
    assert p["rin"].worst >= rin * before["rin"] * (1 - 1e-9)
    if swing is not None:
        assert p["swing_pk"].worst >= swing * before["swing_pk"] * (1 - 1e-9)
    assert p["supply_current"].worst <= current * before["supply_current"] * (1 + 1e-9)


# --- boards: consolidate equals the exhaustive optimum under the held limits ------------
PASSING = [c for c in CASES if c[6]]


@pytest.mark.parametrize("case", PASSING, ids=[f"seed{c[0]}-{c[1]}lines" for c in PASSING])
def test_consolidation_keeps_purpose_and_matches_exhaustive(case):
    seed, n_lines, n_q, build, stages, qs, passing, temps = case
    inv, job, _current = _make(seed, n_lines, n_q, build, stages, qs, passing, temps)
    held = _held_job(job, inv)
    expected, _combo = _exhaustive(held, inv)
    assert expected is not None        # today's board is itself a candidate
    free, _ = _exhaustive(job, inv)
    # today's optimum breaks a default: the free optimum ranks strictly better than any
    # board that keeps every stage's purpose (source: the two enumerations)
    assert free < expected
    result = consolidate(job, inv)
    d = _common_checks(held, inv, result, expected)
    # the limits the search held are the ones written out here
    for record, st in zip(result.purpose, held.stages, strict=True):
        assert record.limits == pytest.approx(_limits_of(st), rel=1e-9)
        assert record.notes == []
    for record, s in zip(result.purpose, d.stages, strict=True):
        _within(record.before, s.check)
        assert record.after["gain"] == pytest.approx(s.check.purpose["gain"].nominal)


def test_consolidation_tolerances_from_the_command_line():
    """gain ±30 % and no swing limit (source: the exhaustive enumeration with the same
    limits written out here)."""
    inv, job, _ = _make(4, 8, 2, 5, CASES[0][4], ["Q0", "Q1"], True)
    held = _held_job(job, inv, gain_pct=30.0, swing_pct=None)
    expected, _ = _exhaustive(held, inv)
    result = consolidate(job, inv, keep_purpose=parse_keep_purpose("gain=30, swing=off"))
    d = _common_checks(held, inv, result, expected)
    for record, s in zip(result.purpose, d.stages, strict=True):
        assert "swing_pk" not in record.limits
        _within(record.before, s.check, gain=0.30, swing=None)
    assert "nominal gain within ±30 %" in result.purpose_rule
    assert "swing" not in result.purpose_rule


def test_consolidation_without_purpose_is_the_free_optimum():
    inv, job, _ = _make(5, 7, 2, 5, CASES[1][4], ["Q0", "Q0"], True)
    free, _ = _exhaustive(job, inv)
    result = consolidate(job, inv, purpose=False)
    _common_checks(job, inv, result, free)
    assert all(r.limits == {} for r in result.purpose)


def test_a_broken_reference_is_reported_not_held():
    """Today's stages saturate or cut off at some corner (current values chosen here
    without regard to the targets): their worst-case figures are no reference, and the
    record says so."""
    inv, job, _ = _make(1, 8, 1, 10, CASES[3][4], ["Q0", "Q0"], False, (0, 50))
    result = consolidate(job, inv)
    for record in result.purpose:
        assert not set(record.limits) & {"rin_min", "swing_pk", "supply_current_max"}
        assert any("saturated or cut off" in n for n in record.notes)


# --- substitute: the least rework keeps the purpose ------------------------------------
SUB_SHELF = DATA / "substitute_shelf.csv"
SUB_JOB = DATA / "substitute_job.toml"
SUB_VALUES = {"R1": "R-47K", "R2": "R-47K", "RC": "R-2K7", "RE": "R-4K7"}
ROLES = tuple(SUB_VALUES)


def _rework_reference(job, inv, q, base_ids):
    """Fewest changes, then added cost, then largest IC margin, over every assignment of
    the shelf's lines to the four roles (9⁴ here): screened at every vertex, confirmed with
    analyze_stage.  Returns (changes: role → part id, added cost in micro-units, margin)."""
    lines = inv.resistors
    combos = np.array(list(itertools.product(range(len(lines)), repeat=len(ROLES))))
    parts0 = {role: _resolved(role, inv.find_resistor(pid)) for role, pid in base_ids.items()}
    spec0 = build_spec(job, job.stage, parts0, q)
    from stockbias.analysis.stage import ResistorSpec, StageSpec

    val = np.array([r.value_ohm for r in lines])
    tol = np.array([r.tolerance_pct / 100 for r in lines])
    resistors = {role: ResistorSpec(val[combos[:, k]], tol[combos[:, k]])
                 for k, role in enumerate(ROLES)}
    spec = StageSpec(spec0.network, resistors, spec0.device, spec0.vcc, spec0.vcc_tol,
                     spec0.vee, spec0.vee_tol, spec0.ambient_min_c, spec0.ambient_max_c,
                     spec0.model, spec0.load, spec0.re_bypassed)
    ratings = {role: np.array([lines[i].power_w for i in combos[:, k]])
               for k, role in enumerate(ROLES)}
    ok, _, _ = vertex_screen(job, job.stage, spec, ratings)
    ids = [r.part_id for r in lines]
    ranked = []
    for row in combos[ok]:
        changed = {role: ids[i] for role, i in zip(ROLES, row, strict=True)
                   if ids[i] != base_ids[role]}
        cost = sum(micro(lines[i].unit_cost) for role, i in zip(ROLES, row, strict=True)
                   if ids[i] != base_ids[role])
        ranked.append((len(changed), cost, tuple(row), changed))
    ranked.sort(key=lambda x: x[:2])
    best = None
    for n, cost, row, changed in ranked:
        if best is not None and (n, cost) > best[0]:
            break
        parts = {role: _resolved(role, lines[i]) for role, i in zip(ROLES, row, strict=True)}
        res = analyze_stage(job, job.stage, parts, q, samples=0)
        if res.ok and (best is None or res.ic_margin > best[2]):
            best = ((n, cost), changed, res.ic_margin)
    return best


def test_substitute_rework_keeps_purpose_and_matches_exhaustive():
    job, inv = load_job(SUB_JOB), read_inventory(SUB_SHELF)
    qa, qb = inv.find_transistor("Q-A"), inv.find_transistor("Q-B")
    parts, _ = _current_parts(job, inv, replace(job.stage, values=SUB_VALUES,
                                                transistor="Q-A"))
    held = replace(job, stages=(held_stage(job, job.stage, parts, qa),))
    free = _rework_reference(job, inv, qb, SUB_VALUES)
    expected = _rework_reference(held, inv, qb, SUB_VALUES)
    assert free is not None and expected is not None
    # without the purpose the least rework is one RC change, which moves the nominal gain
    # by more than 10 % (source: the enumeration without the held limits)
    assert list(free[1]) == ["RC"]
    today = analyze_stage(job, job.stage, parts, qa, samples=0).purpose["gain"].nominal
    free_parts = {**parts, "RC": _resolved("RC", inv.find_resistor(free[1]["RC"]))}
    moved = analyze_stage(job, job.stage, free_parts, qb, samples=0).purpose["gain"].nominal
    assert abs(moved / today - 1) > 0.10
    result = substitute(job, SUB_VALUES, "Q-A", inv, samples=0)
    b = next(c for c in result.candidates if c.transistor.part_id == "Q-B")
    assert b.proven and not b.drop_in
    # source: the enumeration with the limits written out here
    assert {r: p.part_ids[0] for r, p in b.changes.items()} == expected[1]
    assert micro(b.added_cost) == expected[0][1]
    assert b.check.ic_margin == pytest.approx(expected[2], rel=1e-9)
    assert result.purpose.limits == pytest.approx(_limits_of(held.stage), rel=1e-9)
    _within(result.purpose.before, b.check)
    # the drop-in keeps its purpose too: Q-A as it stands is today's design
    a = next(c for c in result.candidates if c.transistor.part_id == "Q-A")
    assert a.drop_in


# --- the bundled board and the README's stage ------------------------------------------


def test_bundled_board_consolidation_keeps_every_stage_purpose():
    out = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(DRAWERS), "--json"])
    assert out.exit_code == 0, out.output
    payload = json.loads(out.stdout)
    jsonschema.validate(payload, schema("consolidate"))
    assert payload["status"] == "optimal"
    # still fewer lines (source: the board file, 14 lines as it stands)
    assert payload["bom_lines_after"] < payload["bom_lines_before"] == 14
    by_name = {s["name"]: s for s in payload["stages"]}
    job, inv = load_job(BOARD), read_inventory(DRAWERS)
    for record, st in zip(payload["purpose"], job.stages, strict=True):
        # today's figures are those check reports for the board file's values
        amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
        parts = {role: resolve_resistor(role, pid, inv, 5.0, ambient=amb)
                 for role, pid in st.values.items()}
        q = inv.find_transistor(st.transistor)
        today = analyze_stage(replace(job, stages=(st,)), st, parts, q, samples=0).purpose
        before, after = record["before"], record["after"]
        assert before["gain"] == pytest.approx(today["gain"].nominal, rel=1e-9)
        assert before["rin"] == pytest.approx(today["rin"].worst, rel=1e-9)
        assert after == {k: by_name[record["stage"]]["purpose"][k]["nominal" if k == "gain"
                                                                   else "worst"]
                         for k in after}
        assert 0.9 * abs(before["gain"]) <= abs(after["gain"]) <= 1.1 * abs(before["gain"])
        assert after["rin"] >= 0.8 * before["rin"]
        assert after["swing_pk"] >= 0.9 * before["swing_pk"]
        assert after["supply_current"] <= 1.25 * before["supply_current"]
    # without the purpose the search may take more designs, never fewer: at most as many
    # lines (source: the designs kept above are a subset of those allowed below)
    free = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(DRAWERS), "--json",
                               "--no-keep-purpose"])
    assert free.exit_code == 0, free.output
    unheld = json.loads(free.stdout)
    assert all(r["limits"] == {} for r in unheld["purpose"])
    assert unheld["bom_lines_after"] <= payload["bom_lines_after"]


def test_consolidate_table_states_the_rule_and_before_after():
    out = runner.invoke(app, ["consolidate", str(BOARD), "-i", str(DRAWERS),
                              "--keep-purpose", "gain=15,rin=70"], terminal_width=200)
    assert out.exit_code == 0, out.output
    text = " ".join(out.stdout.split())  # sentences wrap to the console width
    assert "What each stage does: today → after" in text
    assert ("Each stage keeps its purpose: nominal gain within ±15 %, input resistance ≥ 70 "
            "%, worst-case swing ≥ 90 %, supply current ≤ 125 % of today's") in text
    assert "[stage.keep_purpose]" in text


def test_readme_stage_substitution_keeps_its_purpose():
    """The README's stage (R1 47 k, R2 10 k, RC 3.3 k, RE 1 k, QN-GP40): every verdict keeps
    the gain within ±10 % of today's and the worst-case figures within their tolerances, or
    reports no fix; without the purpose no transistor needs more changes (source: the
    reworks allowed with the purpose are a subset of those allowed without)."""
    base = ["substitute", str(LINE_JOB), "-i", str(DRAWERS), "-v", LINE_VALUES, "-t",
            "QN-GP40", "--json", "--samples", "0"]
    out = runner.invoke(app, base)
    payload = json.loads(out.stdout)
    jsonschema.validate(payload, schema("substitute"))
    before = payload["purpose"]["before"]
    for c in payload["candidates"]:
        a = c["purpose_after"]
        if a is None:
            continue
        assert 0.9 * abs(before["gain"]) <= abs(a["gain"]) <= 1.1 * abs(before["gain"])
        assert a["rin"] >= 0.8 * before["rin"] and a["swing_pk"] >= 0.9 * before["swing_pk"]
        assert a["supply_current"] <= 1.25 * before["supply_current"]
    fits = [c for c in payload["candidates"] if c["purpose_after"] is not None]
    assert out.exit_code == (0 if fits else 1)
    free = json.loads(runner.invoke(app, [*base, "--no-keep-purpose"]).stdout)
    unheld = {c["part_id"]: c for c in free["candidates"]}
    for c in fits:
        u = unheld[c["part_id"]]
        assert u["purpose_after"] is not None
        assert len(u["changes"]) <= len(c["changes"])


# --- the tolerances as input ------------------------------------------------------------
JOB_HEAD = """[supply]
volts = 12
[target]
ic = "1 mA"
ic_window_pct = 20
"""


def test_job_keep_purpose_tables():
    board = """[supply]
volts = 12
[keep_purpose]
gain_pct = 20
[[stage]]
name = "a"
[stage.target]
ic = "1 mA"
ic_window_pct = 20
[stage.keep_purpose]
swing_pct = false
rin_pct = "60 %"
[[stage]]
name = "b"
[stage.target]
ic = "1 mA"
ic_window_pct = 20
"""
    job = parse_job(board)
    assert job.stages[0].keep_purpose == KeepPurpose(20.0, 60.0, None, 125.0)
    assert job.stages[1].keep_purpose == KeepPurpose(20.0, 80.0, 90.0, 125.0)
    assert parse_job(JOB_HEAD).stage.keep_purpose is None      # the defaults


@pytest.mark.parametrize("text, key, message", [
    ("[keep_purpose]\ngain_pct = 0\n", "keep_purpose.gain_pct", "more than 0 and at most 100"),
    ("[keep_purpose]\nsupply_current_pct = 90\n", "keep_purpose.supply_current_pct",
     "more than 100 and at most 1000"),
    ("[keep_purpose]\nswing = 90\n", "keep_purpose.swing", "did you mean 'swing_pct'"),
    ("[keep_purpose]\nrin_pct = true\n", "keep_purpose.rin_pct", "expected a number"),
])
def test_job_keep_purpose_errors(text, key, message):
    with pytest.raises(JobError) as err:
        parse_job(JOB_HEAD + text, "job.toml")
    assert err.value.line == 7
    assert err.value.column == key
    assert message in str(err.value)


def test_keep_purpose_option_parsing():
    assert parse_keep_purpose("gain=15, rin=70%,swing=off,current=150") == {
        "gain_pct": 15.0, "rin_pct": 70.0, "swing_pct": None, "supply_current_pct": 150.0}
    for bad, message in [("gain", "NAME=PERCENT"), ("speed=5", "NAME=PERCENT"),
                         ("gain=lots", "percentage"), ("rin=150", "at most 100"),
                         ("current=50", "more than 100")]:
        with pytest.raises(InputError) as err:
            parse_keep_purpose(bad)
        assert message in err.value.message
        assert err.value.column == "--keep-purpose"


@pytest.mark.parametrize("args, message", [
    (["--keep-purpose", "gain=200"], "at most 100"),
    (["--keep-purpose", "gain=10", "--no-keep-purpose"], "contradict"),
])
def test_cli_bad_keep_purpose_exit_2(args, message):
    for cmd in (["consolidate", str(BOARD), "-i", str(DRAWERS)],
                ["substitute", str(LINE_JOB), "-i", str(DRAWERS), "-v", LINE_VALUES, "-t",
                 "QN-GP40"]):
        out = runner.invoke(app, [*cmd, *args])
        assert out.exit_code == 2, out.output
        assert message in out.stderr
        assert "Traceback" not in out.output
