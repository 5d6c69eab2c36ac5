"""Ranked designs are distinct bias networks; the free role's values are listed per network.

A network is the transistor and the resistors that set IC (divider: R1, R2, RE; dual
supply and fixed base: RB, RE; collector feedback: every role).  The expected variants of
a network come from an exhaustive evaluation written here: every resistor line on the
shelf put in the RC position, judged by ``analyze_stage`` (the path ``check`` uses) and
the stock rule (each line's uses × build quantity ≤ its quantity).
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from stockbias.analysis.check import analyze_stage
from stockbias.assign import ResolvedResistor
from stockbias.cli.app import app
from stockbias.eseries import series_values
from stockbias.job import load_job, parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.design import design
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SCHEMA = json.loads((ROOT / "stockbias" / "schemas" / "design.schema.json").read_text())
JOB = SAMPLES / "line_driver_job.toml"
SHELF = SAMPLES / "workshop_drawers.csv"

#: the role whose values are variants of one network (it does not set IC)
FREE_ROLE = {"divider": "RC", "dual_supply": "RC", "fixed_base": "RC",
             "collector_feedback": None}

GEN_JOB = """
[supply]
volts = 12
tolerance_pct = 5
{vee}
[target]
ic = "1 mA"
ic_window_pct = {window}
vce_min = "2 V"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 4
[search]
topology = "{topology}"
objectives = ["cost", "part_count", "distinct_values", "ic_margin"]
top = 4
"""


def _network(d) -> tuple:
    free = FREE_ROLE[d.topology]
    return (d.topology, d.transistor.part_id,
            tuple(sorted((r, tuple(p.part_ids), p.arrangement)
                         for r, p in d.check.parts.items() if r != free)))


def _shelf(seed: int, lo: float = 100.0, hi: float = 100e3, n: int = 16) -> Inventory:
    """A generated drawer: ``n`` E12 values from ``lo`` to ``hi`` ohm."""
    rng = np.random.default_rng(seed)
    values = sorted(rng.choice(series_values("E12", lo, hi), size=n, replace=False))
    res = tuple(Resistor(part_id=f"G{i:02d}", value_ohm=float(v),
                         tolerance_pct=float(rng.choice([1.0, 5.0])), power_w=0.25,
                         tempco_ppm=100.0, qty=int(rng.choice([4, 8, 12])),
                         unit_cost=float(rng.choice([0.01, 0.02])), line=i + 2)
                for i, v in enumerate(values))
    qs = tuple(Transistor(part_id=f"T{j}", polarity="NPN", hfe_min=100.0 + 60 * j,
                          hfe_max=300.0 + 100 * j, vceo_max=40.0, ic_max=0.1, pd_max_w=0.5,
                          vbe_min=0.6, vbe_max=0.72, qty=50, unit_cost=0.05, line=100 + j)
               for j in range(2))
    return Inventory(path=f"<drawer {seed}>", resistors=res, transistors=qs)


def _expected_variants(job, inv: Inventory, d) -> set[str]:
    """Every shelf line that, in the free role with this network, passes the full check and
    fits the stock (exhaustive evaluation)."""
    free = FREE_ROLE[d.topology]
    need = job.build.quantity
    out = set()
    for r in inv.resistors:
        if r.value_ohm <= 0 or r.qty < need:
            continue
        parts = {k: p for k, p in d.check.parts.items() if k != free}
        parts[free] = ResolvedResistor.of_part(free, r)
        uses: dict[str, int] = {}
        for p in parts.values():
            for part in p.parts:
                uses[part.part_id] = uses.get(part.part_id, 0) + 1
        if any(inv.find_resistor(pid).qty < n * need for pid, n in uses.items()):
            continue
        if analyze_stage(job, job.stage, parts, d.transistor, samples=0,
                         topology=d.topology).ok:
            out.add(r.part_id)
    return out


@pytest.mark.parametrize(("seed", "topology", "window", "hi"),
                         [(3, "divider", 30, 100e3), (2, "fixed_base", 60, 1e6),
                          (5, "dual_supply", 30, 100e3)])
def test_variants_are_every_rc_value_that_works(seed, topology, window, hi):
    inv = _shelf(seed, 100.0, hi, 24 if hi > 1e5 else 16)
    vee = 'negative_volts = -6' if topology == "dual_supply" else ""
    job = parse_job(GEN_JOB.format(vee=vee, window=window, topology=topology), f"<job {seed}>")
    result = design(job, inv, verify_variants=True)
    assert result.designs, "each generated case is built to be feasible"
    nets = [_network(d) for d in result.designs]
    assert len(set(nets)) == len(nets)                  # distinct networks
    for d in result.designs[:3]:
        assert d.free_role == "RC"
        got = {v.part.part_ids[0] for v in d.variants}
        # source: the exhaustive evaluation above (every shelf line as RC, full check)
        assert got == _expected_variants(job, inv, d)
        assert d.variants[0].representative
        assert d.variants[0].part.part_ids == d.check.parts["RC"].part_ids
        assert all(v.verified for v in d.variants)
    # default: variants checked at every vertex (a superset of the full check's set)
    plain = design(job, inv)
    assert [_network(d) for d in plain.designs] == nets
    for a, b in zip(plain.designs, result.designs, strict=True):
        assert {v.part.part_ids[0] for v in a.variants} >= {v.part.part_ids[0]
                                                           for v in b.variants}


def test_collector_feedback_has_no_free_role():
    inv = _shelf(4, 100.0, 1e6, 24)
    job = parse_job(GEN_JOB.format(vee="", window=50, topology="collector_feedback"), "<cf>")
    result = design(job, inv)
    assert result.designs
    for d in result.designs:
        assert d.free_role is None and d.variants == ()
        assert d.to_dict()["variant_range"] is None
    nets = [_network(d) for d in result.designs]
    assert len(set(nets)) == len(nets)


def test_bundled_demo_ranks_distinct_networks():
    """The bundled job: the five ranked designs are five networks, and the RC values that
    used to fill the ranking under one network are that network's variants."""
    inv = read_inventory(SHELF)
    job = load_job(JOB)
    result = design(job, inv)
    assert result.status == "optimal"
    nets = [_network(d) for d in result.designs]
    assert len(nets) == job.search.top and len(set(nets)) == len(nets)
    for d in result.designs:
        rng = d.variant_range()
        assert rng is not None and rng["count"] == len(d.variants) >= 1
        assert rng["min_ohm"] <= d.check.parts["RC"].value <= rng["max_ohm"]


def test_top_counts_networks_and_variants_option(tmp_path: Path):
    runner = CliRunner()
    out = runner.invoke(app, ["design", str(JOB), "--inventory", str(SHELF), "--top", "2",
                              "--json", "--variants"])
    assert out.exit_code == 0, out.output
    payload = json.loads(out.stdout)
    jsonschema.validate(payload, SCHEMA)
    designs = payload["designs"]
    assert len(designs) == 2
    keys = [(d["transistor"]["part_id"], tuple(sorted(
        (r, str(p["part_id"])) for r, p in d["parts"].items() if r != d["free_role"])))
        for d in designs]
    assert len(set(keys)) == 2
    for d in designs:
        assert d["variants"][0]["representative"]
        assert all(v["check"] == "full" for v in d["variants"])
        assert d["variant_range"]["count"] == len(d["variants"])
    table = runner.invoke(app, ["design", str(JOB), "--inventory", str(SHELF), "--top", "2",
                                "--variants"], env={"COLUMNS": "220"})
    assert table.exit_code == 0, table.output
    extra = sum(len(d["variants"]) - 1 for d in designs)
    assert table.output.count("RC variant") == extra
    assert "values in stock" in table.output and "--top counts networks" in table.output
