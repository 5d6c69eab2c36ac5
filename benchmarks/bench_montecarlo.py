"""Benchmark: streamed Monte Carlo — peak memory against the sample count, samples per second
per core, and the speed-up from one to two local worker processes.

Run:  python benchmarks/bench_montecarlo.py [--memory 1e5,1e6,1e7] [--rate 1e6] [--workers 2]
      python benchmarks/bench_montecarlo.py --design   (yield design against worst-case design)
      python benchmarks/bench_montecarlo.py --board    (the same for a board: every stage's
                                                        yield_min against the worst-case board)

Each measurement runs ``stockbias check`` on the bundled line-driver job (workshop drawers;
R1 MF-47K5, R2 MF-10K0, RE CF-1K0, RC CF-3K3, QN-LB2) in a fresh process, so its peak
resident set is its own: ``ru_maxrss`` of the child (and, with workers, the largest worker:
RUSAGE_CHILDREN of the child).  Wall and CPU time of the whole command are reported, and
the samples per second of the Monte Carlo alone (the command at 0 samples subtracted).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time

CHILD = r"""
import json, resource, sys, time
from stockbias.cli.app import app
from typer.testing import CliRunner
from stockbias.samples import sample_path
samples, workers = int(sys.argv[1]), int(sys.argv[2])
args = ["check", str(sample_path("line_driver_job.toml")), "-i",
        str(sample_path("workshop_drawers.csv")), "-v",
        "R1=MF-47K5,R2=MF-10K0,RE=CF-1K0,RC=CF-3K3", "-t", "QN-LB2", "--samples",
        str(samples), "--workers", str(workers), "--json"]
t0, c0 = time.perf_counter(), time.process_time()
res = CliRunner().invoke(app, args)
wall, cpu = time.perf_counter() - t0, time.process_time() - c0
mc = json.loads(res.stdout)["monte_carlo"] if res.exit_code in (0, 1) else None
own = resource.getrusage(resource.RUSAGE_SELF)
kids = resource.getrusage(resource.RUSAGE_CHILDREN)
print(json.dumps({"exit": res.exit_code, "wall": wall, "cpu": cpu + kids.ru_utime + kids.ru_stime,
                  "rss_mib": own.ru_maxrss / 1024, "worker_rss_mib": kids.ru_maxrss / 1024,
                  "yield": None if mc is None else mc["yield"]}))
"""


def run(samples: int, workers: int) -> dict[str, float]:
    out = subprocess.run([sys.executable, "-c", CHILD, str(samples), str(workers)],
                         capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


DESIGN_CHILD = r"""
import json, resource, sys, time
from pathlib import Path
from stockbias.job import parse_job
from stockbias.samples import sample_path
from stockbias.search.defaults import with_design_defaults
from stockbias.search.design import design
from stockbias.search.yield_search import yield_design
from stockbias.stock_io import read_inventory
mode, shelf = sys.argv[1], sys.argv[2]
text = sample_path("line_driver_job.toml").read_text()
if mode == "yield":
    text = text.replace("ic_window_pct = 30", "ic_window_pct = 30\nyield_min = 99.7")
job, _ = with_design_defaults(parse_job(text, "line_driver_job.toml"))
inv = read_inventory(sample_path(shelf))
t0, c0 = time.perf_counter(), time.process_time()
res = yield_design(job, inv) if mode == "yield" else design(job, inv)
wall, cpu = time.perf_counter() - t0, time.process_time() - c0
best = res.designs[0].design if mode == "yield" and res.designs else (
    res.designs[0] if res.designs else None)
print(json.dumps({"wall": wall, "cpu": cpu, "cost": None if best is None else best.cost,
                  "status": res.status,
                  "stats": {k: v for k, v in getattr(res, "stats", {}).items()
                            if k in ("candidates", "proven_without_sampling",
                                     "sampled_candidates", "screened_out", "judged")}}))
"""


BOARD_CHILD = r"""
import json, sys, time
from stockbias.job import parse_job
from stockbias.samples import sample_path
from stockbias.search.board import design_board
from stockbias.search.defaults import with_design_defaults
from stockbias.search.yield_board import yield_board
from stockbias.stock_io import read_inventory
mode, board, shelf, target = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4]
# a new design of the board's stages: each stage's transistor as the file names it, today's
# values not used; a time limit long enough that neither search is cut on a loaded machine
text = sample_path(board).read_text().replace("time_limit_s = 60", "time_limit_s = 600")
text = text.split("[stage.values]")
text = text[0] + "".join("\n[[stage]]" + t.split("[[stage]]", 1)[1] for t in text[1:]
                         if "[[stage]]" in t)
if mode == "yield":
    text = text.replace("[stage.target]\n", f"[stage.target]\nyield_min = {target}\n")
job, _ = with_design_defaults(parse_job(text, board))
inv = read_inventory(sample_path(shelf))
t0, c0 = time.perf_counter(), time.process_time()
res = yield_board(job, inv) if mode == "yield" else design_board(job, inv)
wall, cpu = time.perf_counter() - t0, time.process_time() - c0
best = (res.designs[0].board if mode == "yield" else res.designs[0]) if res.designs else None
keep = ("candidate_boards", "stage_designs", "proven_without_sampling",
        "sampled_stage_designs", "screened_out", "judged")
print(json.dumps({"wall": wall, "cpu": cpu, "cost": None if best is None else best.cost,
                  "status": res.status,
                  "boxes": [b["status"] for b in res.stats.get("boxes", [])],
                  "stats": {k: v for k, v in res.stats.items() if k in keep}}))
"""


def board_bench() -> None:
    """A board to a yield target (yield_min 99.7 % and 95 % in every stage) against the
    worst-case board design of the same board: the bundled distribution amplifier's four
    stages on the workshop drawers, each with the transistor the file names, today's values
    left out."""
    print("| board, shelf, yield_min | worst case: CPU (s), wall (s), cost | yield: CPU (s), "
          "wall (s), cost | CPU ratio | boxes | yield candidates |")
    print("| --- | --- | --- | --- | --- | --- |")
    shelf = "workshop_drawers.csv"

    def one(mode: str, target: str) -> dict:
        out = subprocess.run([sys.executable, "-c", BOARD_CHILD, mode,
                              "distribution_amp_board.toml", shelf, target],
                             capture_output=True, text=True, check=True)
        return json.loads(out.stdout.strip().splitlines()[-1])

    w = one("worst", "")
    for target in ("99.7", "95"):
        y = one("yield", target)
        print(f"| distribution_amp_board, {shelf}, {target} % | {w['cpu']:.2f}, {w['wall']:.1f}, "
              f"{w['cost']} ({w['status']}) | {y['cpu']:.2f}, {y['wall']:.1f}, {y['cost']} | "
              f"{y['cpu'] / w['cpu']:.1f}× | {', '.join(y['boxes'])} | {y['stats']} |",
              flush=True)


def design_bench() -> None:
    """Yield design (yield_min 99.7 %) against the worst-case design of the line-driver job."""
    print("| shelf | worst case: CPU (s), cost | yield: CPU (s), cost | CPU ratio | "
          "yield candidates |")
    print("| --- | --- | --- | --- | --- |")
    for shelf in ("workshop_drawers.csv", "stockroom_e96_reels.csv"):
        r = {}
        for mode in ("worst", "yield"):
            out = subprocess.run([sys.executable, "-c", DESIGN_CHILD, mode, shelf],
                                 capture_output=True, text=True, check=True)
            r[mode] = json.loads(out.stdout.strip().splitlines()[-1])
        w, y = r["worst"], r["yield"]
        print(f"| {shelf} | {w['cpu']:.2f}, {w['cost']} | {y['cpu']:.2f}, {y['cost']} | "
              f"{y['cpu'] / w['cpu']:.1f}× | {y['stats']} |", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--memory", default="1e5,1e6,1e7")
    ap.add_argument("--rate", type=float, default=1e6)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--design", action="store_true")
    ap.add_argument("--board", action="store_true")
    a = ap.parse_args()
    if a.design:
        design_bench()
        return
    if a.board:
        board_bench()
        return
    print(f"# streamed Monte Carlo, {time.strftime('%Y-%m-%d %H:%M')}")
    print("| boards | workers | wall (s) | CPU (s) | peak RSS, main (MiB) | "
          "peak RSS, largest worker (MiB) | yield |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for n in (int(float(x)) for x in a.memory.split(",")):
        r = run(n, 1)
        print(f"| {n:,} | 1 | {r['wall']:.1f} | {r['cpu']:.1f} | {r['rss_mib']:.0f} | – | "
              f"{r['yield']} |", flush=True)
    base = run(0, 1)
    n = int(a.rate)
    one = run(n, 1)
    many = run(n, a.workers)
    rate = n / (one["wall"] - base["wall"])
    cpu_rate = n / (one["cpu"] - base["cpu"])
    print()
    print("| measure | value |")
    print("| --- | --- |")
    print(f"| command at 0 boards (start-up, worst case) | {base['wall']:.2f} s |")
    print(f"| {n:,} boards, 1 worker | {one['wall']:.2f} s wall, {one['cpu']:.2f} s CPU |")
    print(f"| {n:,} boards, {a.workers} workers | {many['wall']:.2f} s wall, "
          f"{many['cpu']:.2f} s CPU; largest worker {many['worker_rss_mib']:.0f} MiB |")
    print(f"| boards per second, wall clock, 1 worker (Monte Carlo alone) | {rate:,.0f} |")
    print(f"| boards per CPU-second (Monte Carlo alone) | {cpu_rate:,.0f} |")
    print(f"| speed-up 1 → {a.workers} workers (whole command, wall clock) | "
          f"{one['wall'] / many['wall']:.2f}× |")
    print(f"| CPU spent, {a.workers} workers against 1 (start-up of the workers included) | "
          f"{many['cpu'] / one['cpu']:.2f}× |")


if __name__ == "__main__":
    main()
