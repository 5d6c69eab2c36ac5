"""Benchmark: board consolidation and board design on an E24 shelf.

Run:  python benchmarks/bench_board.py [--quick]

Shelf: E24 over 10 Ω … 1 MΩ (121 lines, stockbias.eseries.series_values), 5 % parts,
400 pieces per line, 0.002 each; transistors are generated small-signal rows.
Board: N divider stages on 12 V ±5 %, 0…55 °C, build of 10, collector currents from
0.5 to 3 mA with a ±20 % window, VCE ≥ 3 V and a supply-power limit per stage.

Consolidation: the "current" board is what designing each stage alone gives (the
cheapest design of each, which spreads the values over many lines); consolidation
then minimises bom_lines, changes, cost with each stage's transistor fixed.
Design: the same stages with the transistor free (every stock transistor), objectives
as stated per row.  Time is everything after the stock and board are loaded.
"""

from __future__ import annotations

import argparse
import resource
import time
from dataclasses import replace

import numpy as np

from stockbias.eseries import series_values
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.board import design_board
from stockbias.search.consolidate import consolidate
from stockbias.search.design import design

HEAD = """
[supply]
volts = 12
tolerance_pct = 5
[environment]
ambient_min_c = 0
ambient_max_c = 55
[build]
quantity = 10
[search]
objectives = {objectives}
top = 1
time_limit_s = 300
"""
ICS = [0.5, 1.0, 1.5, 2.0, 3.0, 0.8, 1.2, 2.5]


def shelf(n_q: int) -> Inventory:
    values = series_values("E24", 10, 1e6)
    rs = tuple(Resistor(f"R{v:g}", float(v), 5.0, 0.25, 200.0, 400, 0.002, line=i + 2)
               for i, v in enumerate(values))
    rng = np.random.default_rng(5)
    qs = []
    for j in range(n_q):
        lo = float(rng.choice([100, 110, 200]))
        qs.append(Transistor(f"Q{j}", "NPN", lo, lo * float(rng.choice([2.0, 2.2, 3.0])), 45.0,
                             0.2, 0.5, vbe_min=0.58, vbe_max=0.70, qty=500,
                             unit_cost=float(rng.choice([0.03, 0.04])), line=900 + j))
    return Inventory("<E24>", rs, tuple(qs))


def board(n_stages: int, objectives: list[str], transistors: list[str] | None) -> str:
    txt = HEAD.format(objectives=objectives)
    for i in range(n_stages):
        ic = ICS[i % len(ICS)]
        q = f'transistor = "{transistors[i % len(transistors)]}"\n' if transistors else ""
        txt += (f'\n[[stage]]\nname = "s{i}"\ntopology = "divider"\n{q}[stage.target]\n'
                f'ic = "{ic} mA"\nic_window_pct = 20\nvce_min = "3 V"\n[stage.limits]\n'
                f'supply_power_max = "{12 * ic * 1.6:.1f} mW"\n')
    return txt


def run_consolidate(n_stages: int, inv: Inventory) -> dict:
    job = parse_job(board(n_stages, ["bom_lines", "changes", "cost"], ["Q0", "Q1"]))
    stages = []
    for st in job.stages:
        one = design(replace(job, stages=(st,)), inv, top=1)
        stages.append(replace(st, values={r: p.part_ids[0]
                                          for r, p in one.designs[0].check.parts.items()}))
    job = replace(job, stages=tuple(stages))
    t0, c0 = time.monotonic(), time.process_time()
    r = consolidate(job, inv)
    dt, cpu = time.monotonic() - t0, time.process_time() - c0
    d = r.to_dict()
    return {"stages": n_stages, "status": r.status, "seconds": dt, "cpu": cpu,
            "options": sum(r.stats["options_per_stage"].values()),
            "before": d["bom_lines_before"], "after": d["bom_lines_after"],
            "changes": d["changes"]}


def run_design(n_stages: int, inv: Inventory, objectives: list[str]) -> dict:
    job = parse_job(board(n_stages, objectives, None))
    t0, c0 = time.monotonic(), time.process_time()
    r = design_board(job, inv)
    dt, cpu = time.monotonic() - t0, time.process_time() - c0
    best = r.designs[0] if r.designs else None
    return {"stages": n_stages, "status": r.status, "seconds": dt, "cpu": cpu,
            "options": sum(r.stats["options_per_stage"].values()),
            "bom_lines": best.bom_lines if best else None,
            "cost": best.cost if best else None}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="2 and 4 stages only")
    ap.add_argument("--stages", type=int, nargs="+", help="board sizes (default 2 4 8)")
    ap.add_argument("--consolidate-only", action="store_true")
    args = ap.parse_args()
    sizes = args.stages or ([2, 4] if args.quick else [2, 4, 8])
    inv2 = shelf(2)
    print("## Consolidation (bom_lines, changes, cost), E24 121 lines, transistors fixed")
    print("| stages | status | solve s wall (CPU) | options | BOM lines before → after | "
          "changes |")
    print("| --- | --- | --- | --- | --- | --- |")
    for n in sizes:
        r = run_consolidate(n, inv2)
        print(f"| {n} | {r['status']} | {r['seconds']:.2f} ({r['cpu']:.2f}) | {r['options']} | "
              f"{r['before']} → {r['after']} | {r['changes']} |", flush=True)
    inv3 = shelf(3)
    for objectives in [] if args.consolidate_only else (["cost", "part_count", "distinct_values"],
                       ["bom_lines", "cost", "part_count"]):
        print(f"\n## Board design ({', '.join(objectives)}), E24 121 lines, 3 transistors free")
        print("| stages | status | solve s wall (CPU) | options | BOM lines | cost/board |")
        print("| --- | --- | --- | --- | --- | --- |")
        for n in sizes:
            r = run_design(n, inv3, objectives)
            cost = "—" if r["cost"] is None else f"{r['cost']:.3f}"
            print(f"| {n} | {r['status']} | {r['seconds']:.2f} ({r['cpu']:.2f}) | {r['options']} | "
                  f"{r['bom_lines']} | {cost} |", flush=True)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"\nPeak resident memory of the whole run: {peak:.0f} MiB")


if __name__ == "__main__":
    main()
