"""Benchmark: peak memory of the design search on large generated shelves, and the wall time
of a search under a short time limit.

Run:  python benchmarks/bench_memory.py [--cap-gib 6] [--cases 500x500@600,50000x500@5]

Each case runs in a fresh Python process (so that its peak resident set is its own) with its
address space capped by ``resource.setrlimit(RLIMIT_AS)`` at ``--cap-gib``: a search that
would need more fails inside the child with MemoryError and is reported as "exceeded the
cap" instead of pushing the machine into swap.  Peak RSS is ``ru_maxrss`` of the child
(kilobytes on Linux), read after the search; wall time is measured around
``stockbias.design(job, inventory)`` (the shelf is built in memory, so no file is read).

Shelves (invented data): ``lines`` resistor lines with log-uniform values over
10 Ω … 1 MΩ (seeded), 1 % or 5 %, 0.125 W or 0.25 W, 2000 pieces each, unit costs of
0.001 … 0.004; ``transistors`` generated small-signal rows (NPN, hFE bins 60–120, 100–300,
200–450, 300–800 at random, VBE 0.58 … 0.70–0.74 V, 45 V, 0.2 A, 0.5 W).
Job: one divider stage, 12 V ±5 %, IC 2 mA ±15 %, VCE ≥ 3 V, 0…50 °C, build of 10.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import time

import numpy as np

JOB = """
[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "2 mA"
ic_window_pct = 15
vce_min = "3 V"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 10
[search]
topology = "divider"
time_limit_s = {limit}
top = 3
"""

HFE_BINS = ((60.0, 120.0), (100.0, 300.0), (200.0, 450.0), (300.0, 800.0))


def shelf(lines: int, transistors: int, seed: int = 7):
    """A generated inventory: log-uniform resistor values, transistors in hFE bins."""
    from stockbias.parts import Inventory, Resistor, Transistor

    rng = np.random.default_rng(seed)
    values = np.sort(np.round(10 ** rng.uniform(1.0, 6.0, lines), 3))
    rs = tuple(Resistor(f"R{i:05d}", float(v), float(rng.choice([1.0, 5.0])),
                        float(rng.choice([0.125, 0.25])), 100.0, 2000,
                        float(rng.choice([0.001, 0.002, 0.003, 0.004])), line=i + 2)
               for i, v in enumerate(values))
    qs = []
    for j in range(transistors):
        lo_h, hi_h = HFE_BINS[int(rng.integers(len(HFE_BINS)))]
        qs.append(Transistor(f"Q{j:03d}", "NPN", lo_h, hi_h, 45.0, 0.2, 0.5, vbe_min=0.58,
                             vbe_max=float(rng.choice([0.70, 0.72, 0.74])), qty=500,
                             unit_cost=float(rng.choice([0.02, 0.03, 0.05])),
                             line=lines + 10 + j))
    return Inventory(f"<generated {lines} lines>", rs, tuple(qs))


def child(lines: int, transistors: int, limit: float, cap_gib: float) -> None:
    """Run one search in this process and print a JSON line."""
    cap = int(cap_gib * 2 ** 30)
    resource.setrlimit(resource.RLIMIT_AS, (cap, cap))
    from stockbias.job import parse_job
    from stockbias.search.design import design

    inv = shelf(lines, transistors)
    job = parse_job(JOB.format(limit=limit), "<bench>")
    out: dict[str, object] = {"lines": lines, "transistors": transistors, "limit_s": limit}
    ru0 = resource.getrusage(resource.RUSAGE_SELF)
    cpu0 = ru0.ru_utime + ru0.ru_stime
    t0 = time.monotonic()
    try:
        res = design(job, inv)
    except MemoryError:
        out.update(status="exceeded the cap", wall_s=round(time.monotonic() - t0, 1))
    else:
        out.update(status=res.status, wall_s=round(time.monotonic() - t0, 2),
                   designs=len(res.designs), cut=res.stats.get("prepass_cut"))
    ru = resource.getrusage(resource.RUSAGE_SELF)
    out["peak_rss_mib"] = round(ru.ru_maxrss / 1024)
    out["cpu_s"] = round(ru.ru_utime + ru.ru_stime - cpu0, 2)
    print(json.dumps(out))


def run_case(lines: int, transistors: int, limit: float, cap_gib: float) -> dict:
    cmd = [sys.executable, __file__, "--child", str(lines), str(transistors), str(limit),
           str(cap_gib)]
    p = subprocess.run(cmd, capture_output=True, text=True, env=os.environ.copy())
    last = [ln for ln in p.stdout.splitlines() if ln.startswith("{")]
    if p.returncode != 0 or not last:
        err = p.stderr.strip().splitlines()[-1:] or ["?"]
        return {"lines": lines, "transistors": transistors, "limit_s": limit,
                "status": f"failed ({err[0][:80]})"}
    return json.loads(last[-1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--child", nargs=4, help=argparse.SUPPRESS)
    ap.add_argument("--cap-gib", type=float, default=6.0)
    ap.add_argument("--cases", default="500x500@600,4000x500@60,50000x500@60,50000x500@5",
                    help="LINESxTRANSISTORS@TIME_LIMIT_S, comma-separated")
    a = ap.parse_args()
    if a.child:
        child(int(a.child[0]), int(a.child[1]), float(a.child[2]), float(a.child[3]))
        return
    rows = []
    for case in a.cases.split(","):
        size, limit = case.split("@")
        n, q = (int(x) for x in size.split("x"))
        rows.append(run_case(n, q, float(limit), a.cap_gib))
        print(json.dumps(rows[-1]), flush=True)
    print("\n| lines | transistors | time limit (s) | status | designs | wall (s) | CPU (s) "
          "| peak RSS (MiB) |")
    print("|---|---|---|---|---|---|---|---|")
    for r in rows:
        print(f"| {r['lines']} | {r['transistors']} | {r['limit_s']:g} | {r['status']} | "
              f"{r.get('designs', '')} | {r.get('wall_s', '')} | {r.get('cpu_s', '')} | "
              f"{r.get('peak_rss_mib', '')} |")


if __name__ == "__main__":
    main()
