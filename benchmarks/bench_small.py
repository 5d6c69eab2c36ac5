"""Benchmark: a small problem answered at once (issue 13, item 5).

Run:  python benchmarks/bench_small.py [--runs N]

The problem: one divider stage (the job of ``bench_search.py``: 12 V ±5 %, IC 1.5 mA ±12 %,
VCE ≥ 3 V, 0…55 °C, build of 10) on a 24-line shelf (E12, 100 Ω…8.2 kΩ, 1 %) with 4
transistors, written as a stock file and a job file.  Three things are timed, each in a
fresh process (median of ``--runs``):

* ``stockbias design JOB --inventory STOCK --json``: wall clock of the whole command, and
  the solve time it reports (everything after the stock and job are loaded);
* the exhaustive numpy search of the same problem (``--exhaustive``): every R1 × R2 × RC ×
  RE × transistor assignment (24⁴ × 4 = 1.3 million), IC and VCE bounds of each from the
  proven few-corner method (:func:`stockbias.analysis.fast_bounds.divider_bounds`), the IC
  window, the headroom and the active region, then the five cheapest.  It checks fewer
  limits than the search, so it is a generous baseline;
* ``python -c "import numpy"`` (start-up of the interpreter and numpy, for scale);
* for reference, the naive enumeration DESIGN §2 names as the baseline (every assignment
  at every vertex with every limit, ``bench_search.naive``), extrapolated from a slice.

The goal: the fresh-process design within half the exhaustive search's wall clock, and
its solve time within 1/50 of it.
"""

from __future__ import annotations

import argparse
import json
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

JOB = """[supply]
volts = 12
tolerance_pct = 5
[target]
ic = "1.5 mA"
ic_window_pct = 12
vce_min = "3 V"
[environment]
ambient_min_c = 0
ambient_max_c = 55
[build]
quantity = 10
[search]
topology = "divider"
objectives = ["cost", "part_count", "distinct_values", "ic_margin"]
top = 5
time_limit_s = 60
"""

def write_problem(folder: Path) -> tuple[Path, Path]:
    """The stock file and job file of the problem (the shelf of ``bench_search.shelf``)."""
    sys.path.insert(0, str(Path(__file__).parent))
    from bench_search import _shelf_csv, shelf

    stock, job = folder / "small_shelf.csv", folder / "small_job.toml"
    _shelf_csv(shelf("E12", 4, lo=100.0, hi=8.2e3), stock)
    job.write_text(JOB, encoding="utf-8")
    return stock, job


def exhaustive(stock: Path) -> list[tuple[float, tuple[str, ...]]]:
    """Every assignment of the problem, IC and VCE bounds by the few-corner method; the
    five cheapest that keep IC in the window and VCE ≥ 3 V in the active region."""
    import numpy as np

    from stockbias import load_inventory
    from stockbias.analysis.fast_bounds import divider_bounds

    inv = load_inventory(stock)
    rs = inv.resistors
    v = np.array([r.value_ohm for r in rs])
    tol = np.array([r.tolerance_pct / 100 for r in rs])
    drift = np.array([(r.tempco_ppm or 0.0) * 1e-6 * 30.0 for r in rs])
    cost = np.array([r.unit_cost for r in rs])
    lo, hi = v * (1 - tol - drift), v * (1 + tol + drift)
    n = v.size
    grid = [g.reshape(-1) for g in np.meshgrid(*[np.arange(n)] * 4, indexing="ij")]
    found = []
    for q in inv.transistors:
        bands = {role: (lo[g], hi[g]) for role, g in zip(("R1", "R2", "RC", "RE"), grid,
                                                           strict=True)}
        b = divider_bounds(bands, vcc=12.0, vcc_tol=0.05, hfe_min=q.hfe_min,
                           hfe_max=q.hfe_max, vbe_min=q.vbe_min, vbe_max=q.vbe_max,
                           vce_sat=q.vce_sat, icbo25=q.icbo_a, xtb=q.xtb, ambient_min_c=0.0,
                           ambient_max_c=55.0)
        ok = b.active & (b.ic_min >= 1.5e-3 * 0.88) & (b.ic_max <= 1.5e-3 * 1.12) \
            & (b.vce_min >= 3.0)
        total = q.unit_cost + sum(cost[g] for g in grid)
        for k in np.flatnonzero(ok)[np.argsort(total[ok], kind="stable")][:5]:
            found.append((float(total[k]), (q.part_id, *(rs[g[k]].part_id for g in grid))))
    return sorted(found)[:5]


def _timed(cmd: list[str]) -> tuple[float, float, str]:
    """(wall s, CPU s, stdout) of a command in a new process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    out = subprocess.run(cmd, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), \
        out.stdout


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--exhaustive", metavar="STOCK", help="run the baseline search and exit")
    args = ap.parse_args()
    if args.exhaustive:
        for row in exhaustive(Path(args.exhaustive)):
            print(row)
        return
    with tempfile.TemporaryDirectory() as tmp:
        stock, job = write_problem(Path(tmp))
        py = sys.executable
        walls: dict[str, list[float]] = {"numpy": [], "design": [], "exhaustive": []}
        cpus: dict[str, list[float]] = {"numpy": [], "design": [], "exhaustive": []}
        solve: list[float] = []
        status = ""
        for _ in range(args.runs):
            runs = {"numpy": [py, "-c", "import numpy"],
                    "design": [py, "-m", "stockbias", "design", str(job), "--inventory",
                               str(stock), "--json"],
                    "exhaustive": [py, __file__, "--exhaustive", str(stock)]}
            for name, cmd in runs.items():
                wall, cpu, out = _timed(cmd)
                walls[name].append(wall)
                cpus[name].append(cpu)
                if name == "design":
                    res = json.loads(out)
                    solve.append(res["solve_seconds"])
                    status = res["status"]
        w = {k: statistics.median(x) for k, x in walls.items()}
        c = {k: statistics.median(x) for k, x in cpus.items()}
        s = statistics.median(solve)
        print("| what | median wall (s) | median CPU (s) | wall / exhaustive | CPU / exhaustive |")
        print("| --- | --- | --- | --- | --- |")
        names = {"numpy": '`python -c "import numpy"`',
                 "exhaustive": "exhaustive numpy search, fresh process",
                 "design": f"`stockbias design`, fresh process ({status})"}
        for k in ("numpy", "exhaustive", "design"):
            print(f"| {names[k]} | {w[k]:.2f} | {c[k]:.2f} | {w[k] / w['exhaustive']:.2f} | "
                  f"{c[k] / c['exhaustive']:.2f} |")
        print(f"| its solve time (reported, wall) | {s:.3f} | | {s / w['exhaustive']:.3f} | |")
        # the baseline DESIGN §2 names: every assignment at every vertex with every limit
        from bench_search import naive, shelf

        from stockbias.job import parse_job

        est, finished = naive(parse_job(JOB), shelf("E12", 4, lo=100.0, hi=8.2e3), 20.0)
        print(f"| naive enumeration, every vertex and limit (in process"
              f"{'' if finished else ', est. from a 20 s slice'}) | {est:.1f} | | | |")
        print(f"| `stockbias design` against it (wall) | | | {w['design'] / est:.3f} | |")

if __name__ == "__main__":
    main()
