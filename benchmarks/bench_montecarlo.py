"""Benchmark: streamed Monte Carlo — peak memory against the sample count, samples per second
per core, and the speed-up from one to two local worker processes.

Run:  python benchmarks/bench_montecarlo.py [--memory 1e5,1e6,1e7] [--rate 1e6] [--workers 2]

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


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--memory", default="1e5,1e6,1e7")
    ap.add_argument("--rate", type=float, default=1e6)
    ap.add_argument("--workers", type=int, default=2)
    a = ap.parse_args()
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
    print()
    print("| measure | value |")
    print("| --- | --- |")
    print(f"| command at 0 boards (start-up, worst case) | {base['wall']:.2f} s |")
    print(f"| {n:,} boards, 1 worker | {one['wall']:.2f} s wall, {one['cpu']:.2f} s CPU |")
    print(f"| {n:,} boards, {a.workers} workers | {many['wall']:.2f} s wall, "
          f"{many['cpu']:.2f} s CPU; largest worker {many['worker_rss_mib']:.0f} MiB |")
    print(f"| samples per second per core (Monte Carlo alone) | {rate:,.0f} |")
    print(f"| speed-up 1 → {a.workers} workers (whole command) | "
          f"{one['wall'] / many['wall']:.2f}× |")


if __name__ == "__main__":
    main()
