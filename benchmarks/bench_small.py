"""Benchmark: a small problem answered at once (issue 13, item 5).

Run:  python benchmarks/bench_small.py [--runs N]

The problem: one divider stage (the job of ``bench_search.py``: 12 V ±5 %, IC 1.5 mA ±12 %,
VCE ≥ 3 V, 0…55 °C, build of 10) on a 24-line shelf (E12, 100 Ω…8.2 kΩ, 1 %) with 4
transistors, written as a stock file and a job file.  Timed, each in a fresh process
(median of ``--runs``, CPU seconds of the child as well as wall clock):

* ``stockbias design JOB --inventory STOCK --json``: the whole command, and the solve
  time it reports (everything after the stock and job are loaded);
* the exhaustive numpy search of the same problem (``--exhaustive``): every R1 × R2 × RC ×
  RE × transistor assignment (24⁴ × 4 = 1.3 million) judged by every limit the design
  applies.  First the IC window, the headroom and the active region at the corners where
  they are extreme (the proven few-corner bounds of
  :func:`stockbias.analysis.fast_bounds.divider_bounds`; each rejection there is a failure
  at a vertex), then every limit of the stage (the defaults the design adds included:
  divider current, supply current; resistor and transistor dissipation, TJ, IC and VCEO
  ratings) at every vertex, self-heated too, for the assignments left (the design's own
  vertex evaluation, :func:`stockbias.search.prepass.vertex_check`); ranked by the job's
  objectives, the best design of each of the ``top`` best networks.  It prints the same
  designs as ``stockbias design`` (the benchmark says whether they agree); it skips the
  interior maxima the design's final check adds, so it is, if anything, generous;
* the earlier, partial baseline (``--window-only``: the first step alone, the IC window,
  headroom and active region), for comparison with the figures measured before;
* ``python -c "import numpy"`` (start-up of the interpreter and numpy, for scale);
* for reference, the naive enumeration DESIGN §2 names as the baseline (every assignment
  at every vertex with every limit, ``bench_search.naive``), extrapolated from a slice.

Bytecode: the package is compiled first (``compileall``), as an installed package is;
where ``PYTHONDONTWRITEBYTECODE`` is set every fresh process would otherwise compile the
sources again.  ``--no-compile`` leaves that out.

The goal: the fresh-process design within half the exhaustive search's time, and its
solve time within 1/50 of it.
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


def exhaustive(stock: Path, job_path: Path, every_limit: bool = True
               ) -> list[tuple[tuple[int, ...], tuple[str, ...]]]:
    """Every assignment of the problem judged by every limit the design applies (only the
    IC window, headroom and active region without ``every_limit``: the earlier, partial
    baseline); the best design of each of the ``top`` best networks, ranked by the job's
    objectives: [(objective key, (transistor, R1, R2, RC, RE part ids))]."""
    import numpy as np

    from stockbias.analysis.constraints import ic_margin
    from stockbias.analysis.fast_bounds import divider_bounds
    from stockbias.job import load_job
    from stockbias.search.candidates import build_shelf
    from stockbias.search.defaults import with_design_defaults
    from stockbias.stock_io import read_inventory

    job, inv = load_job(job_path), read_inventory(stock)   # no curve rows in this stock
    job, _assumed = with_design_defaults(job)       # the limits the design adds by default
    stage, env, t = job.stage, job.environment, job.stage.target
    shelf = build_shelf(job, inv)
    c = shelf.single                                # every line with a build's worth
    n = len(c)
    roles = ("R1", "R2", "RC", "RE")
    grid = dict(zip(roles, (g.reshape(-1) for g in np.meshgrid(*[np.arange(n)] * 4,
                                                                 indexing="ij")), strict=True))
    found: list[tuple[np.ndarray, ...]] = []
    for qi, q in enumerate(inv.transistors):
        # 1. IC window, headroom and active region at the corners where they are extreme
        #    (a rejection here is a failure at a vertex, where step 2 would reject it too)
        b = divider_bounds({r: (c.low[g], c.high[g]) for r, g in grid.items()},
                           vcc=job.supply.volts, vcc_tol=job.supply.tolerance_pct / 100,
                           hfe_min=q.hfe_min, hfe_max=q.hfe_max, vbe_min=q.vbe_min,
                           vbe_max=q.vbe_max, vce_sat=q.vce_sat, icbo25=q.icbo_a, xtb=q.xtb,
                           ambient_min_c=env.ambient_min_c, ambient_max_c=env.ambient_max_c)
        keep = np.flatnonzero(b.active & (b.ic_min >= t.ic_min) & (b.ic_max <= t.ic_max)
                              & (b.vce_min >= t.vce_min))
        if keep.size == 0:
            continue
        # 2. every limit of the stage at every vertex, also self-heated where θJA is known
        if every_limit:
            from stockbias.search.prepass import vertex_check

            chk = vertex_check(job, stage, "divider", q,
                               {r: (c, g[keep]) for r, g in grid.items()})
        else:
            chk = {"ok": np.ones(keep.size, dtype=bool), "ic_min": b.ic_min[keep],
                   "ic_max": b.ic_max[keep]}
        ok = chk["ok"]
        idx = np.stack([grid[r][keep[ok]] for r in roles], axis=1)
        vals = np.sort(c.value[idx], axis=1)
        cols = {"cost": round(q.unit_cost * 1e6) + c.cost[idx].sum(axis=1),
                "part_count": 1 + c.parts[idx].sum(axis=1),
                "distinct_values": 1 + (np.diff(vals, axis=1) != 0).sum(axis=1),
                "ic_margin": -np.floor(ic_margin(chk["ic_min"][ok], chk["ic_max"][ok],
                                                 t.ic_min, t.ic_max, t.ic) * 1e6 + 1e-6)}
        key = np.stack([np.asarray(cols[o], dtype=np.int64) for o in job.search.objectives],
                       axis=1)
        found.append((key, np.full(len(key), qi), idx))
    if not found:
        return []
    key = np.concatenate([f[0] for f in found])
    qix = np.concatenate([f[1] for f in found])
    idx = np.concatenate([f[2] for f in found])
    order = np.lexsort(key.T[::-1])
    # a network is the transistor and the lines of the roles that set IC (R1, R2, RE)
    net = (qix * n + idx[:, 0]) * n ** 2 + idx[:, 1] * n + idx[:, 3]
    _u, first = np.unique(net[order], return_index=True)
    best = order[np.sort(first)][:job.search.top]
    return [(tuple(int(x) for x in key[k]),
             (inv.transistors[qix[k]].part_id,
              *(shelf.lines[c.line_a[i]].part_id for i in idx[k]))) for k in best]


def solve_cpu(stock: Path, job_path: Path) -> dict[str, float]:
    """CPU and wall seconds of the solve alone (``design()`` after the stock and job are
    loaded), first call in a fresh process, as ``stockbias design`` runs it."""
    from stockbias.cli.common import load
    from stockbias.search.defaults import with_design_defaults
    from stockbias.search.design import design

    job, inv = load(job_path, stock)
    job, _assumed = with_design_defaults(job)
    c0, w0 = time.process_time(), time.perf_counter()
    design(job, inv)
    return {"cpu": time.process_time() - c0, "wall": time.perf_counter() - w0}


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
    ap.add_argument("--exhaustive", nargs=2, metavar=("STOCK", "JOB"),
                    help="run the baseline search and exit")
    ap.add_argument("--window-only", action="store_true",
                    help="with --exhaustive: the IC window, headroom and active region only")
    ap.add_argument("--solve-cpu", nargs=2, metavar=("STOCK", "JOB"),
                    help="time the solve alone in this process and exit")
    ap.add_argument("--no-compile", action="store_true",
                    help="do not compile the package's bytecode first")
    args = ap.parse_args()
    if args.exhaustive:
        rows = exhaustive(Path(args.exhaustive[0]), Path(args.exhaustive[1]),
                          every_limit=not args.window_only)
        print(json.dumps(rows))
        return
    if args.solve_cpu:
        print(json.dumps(solve_cpu(Path(args.solve_cpu[0]), Path(args.solve_cpu[1]))))
        return
    py = sys.executable
    if not args.no_compile:
        import stockbias

        subprocess.run([py, "-m", "compileall", "-q", str(Path(stockbias.__file__).parent)],
                       check=True, stdout=subprocess.DEVNULL)
    with tempfile.TemporaryDirectory() as tmp:
        stock, job = write_problem(Path(tmp))
        runs = {"numpy": [py, "-c", "import numpy"],
                "window": [py, __file__, "--exhaustive", str(stock), str(job), "--window-only"],
                "exhaustive": [py, __file__, "--exhaustive", str(stock), str(job)],
                "design": [py, "-m", "stockbias", "design", str(job), "--inventory",
                           str(stock), "--json"]}
        walls: dict[str, list[float]] = {k: [] for k in runs}
        cpus: dict[str, list[float]] = {k: [] for k in runs}
        outs: dict[str, str] = {}
        solve: list[float] = []
        solve_cpus: list[float] = []
        for _ in range(args.runs):
            for name, cmd in runs.items():
                wall, cpu, out = _timed(cmd)
                walls[name].append(wall)
                cpus[name].append(cpu)
                outs[name] = out
                if name == "design":
                    solve.append(json.loads(out)["solve_seconds"])
            _w, _c, out = _timed([py, __file__, "--solve-cpu", str(stock), str(job)])
            solve_cpus.append(json.loads(out)["cpu"])
        res = json.loads(outs["design"])
        shown = [[[d[o if o != "cost" else "cost_micro"] for o in res["objectives"]],
                  [d["transistor"]["part_id"], *(d["parts"][r]["part_id"]
                                                 for r in ("R1", "R2", "RC", "RE"))]]
                 for d in res["designs"]]
        base = json.loads(outs["exhaustive"])
        def agree(o: str, key: int, value: float) -> bool:
            # ic_margin: the key is −ppm, floored; the result states the fraction
            return abs(-key / 1e6 - value) <= 2e-6 if o == "ic_margin" else key == value

        same = [b[1] for b in base] == [s_[1] for s_ in shown] and all(
            agree(o, k, v) for b, s_ in zip(base, shown, strict=True)
            for o, k, v in zip(res["objectives"], b[0], s_[0], strict=True))
        w = {k: statistics.median(x) for k, x in walls.items()}
        c = {k: statistics.median(x) for k, x in cpus.items()}
        s = statistics.median(solve)
        print("| what | median wall (s) | median CPU (s) | wall / exhaustive | CPU / exhaustive |")
        print("| --- | --- | --- | --- | --- |")
        names = {"numpy": '`python -c "import numpy"`',
                 "window": "partial baseline: IC window, headroom, active region only",
                 "exhaustive": "exhaustive numpy search, every limit, fresh process",
                 "design": f"`stockbias design`, fresh process ({res['status']})"}
        for k in ("numpy", "window", "exhaustive", "design"):
            print(f"| {names[k]} | {w[k]:.2f} | {c[k]:.2f} | {w[k] / w['exhaustive']:.2f} | "
                  f"{c[k] / c['exhaustive']:.2f} |")
        sc = statistics.median(solve_cpus)
        print(f"| its solve time (reported wall; CPU of the solve alone, fresh process) | "
              f"{s:.3f} | {sc:.3f} | {s / w['exhaustive']:.3f} | {sc / c['exhaustive']:.3f} |")
        print(f"\nexhaustive and design agree on the designs shown: {'yes' if same else 'NO'} "
              f"({len(shown)} designs)")
        # the baseline DESIGN §2 names: every assignment at every vertex with every limit
        from bench_search import naive, shelf

        from stockbias.job import parse_job

        est, finished = naive(parse_job(JOB), shelf("E12", 4, lo=100.0, hi=8.2e3), 20.0)
        print(f"\nnaive enumeration, every vertex and limit (in process"
              f"{'' if finished else ', est. from a 20 s slice'}): {est:.1f} s; "
              f"`stockbias design` against it (wall): {w['design'] / est:.4f}")


if __name__ == "__main__":
    main()
