"""Benchmark: design-search solve time against shelf size, and the naive baseline.

Run:  python benchmarks/bench_search.py [--quick | --sample-only | --pairs | --exponential
      | --exponential-cpu]

Solve time is everything after the stock and job are loaded (pre-pass, model, solve,
re-verification), as DESIGN §2 defines it; the median of three runs after one warm-up
search (so that the one-off imports of OR-Tools and SciPy are not counted).  The baseline
is the naive vectorised enumeration of the full cross product (every role × every line ×
every transistor, all corners), evaluated with the analysis engine and the same limits,
then sorted by the same objectives; it is run only where it finishes in reasonable time,
otherwise its time is extrapolated from a measured slice (marked "est.").

Fresh process: each case is also run once as ``python -m stockbias design JOB --inventory
STOCK --json`` in a new process (the shelf and job written as files); its wall clock and
CPU time include start-up, reading the files and rendering.  The machine is shared, so CPU
time is given beside wall time.

Sample job: the bundled line-driver job on the bundled E96 reels, pairs off and on, in
fresh processes, with the ratio of the two (goal: pairs within 3× of no pairs).

Exponential in process (``--exponential-cpu``): each bundled shelf (the model-card shelf
with its cable-driver job) and the generated E96 shelf with 20 transistors, both models one
after the other in one process, the search CPU after a warm-up search, the least of three
runs (one on the generated shelf); the ratio exponential / constant VBE of the CPU times.

Pairs (``--pairs``): each generated shelf of the pairs rows searched with pairs off and
on, each search in its own process after a warm-up search there (imports not counted):
CPU and wall of the search, the process's peak memory (``VmHWM``), and the ratio on /
off of the CPU times measured in the same run.

Shelves: E12 … E96 over 10 Ω … 1 MΩ (stockbias.eseries.series_values), 5000 pieces per
line, seeded unit costs; transistors are generated small-signal rows (NPN and PNP).
Job: one divider stage, 12 V ±5 %, IC 1.5 mA ±12 %, VCE ≥ 3 V, 0…55 °C, build of 10.
"""

from __future__ import annotations

import argparse
import itertools
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

from stockbias.analysis.constraints import evaluate_limits, stage_limits
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec, evaluate
from stockbias.analysis.worst_case import vertex_points
from stockbias.eseries import series_values
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor
from stockbias.search.design import design
from stockbias.topologies import get_network

JOB = """
[supply]
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
allow_pairs = {pairs}
[search]
topology = "divider"
time_limit_s = 120
top = 5
"""


def shelf(series: str, n_q: int, lo: float = 10.0, hi: float = 1e6, seed: int = 1) -> Inventory:
    rng = np.random.default_rng(seed)
    values = series_values(series, lo, hi)
    tol = 1.0  # 1 % parts in every series (E12 values are stocked at 1 % too)
    rs = tuple(Resistor(f"{series}-{i}", float(v), tol, 0.125, 100.0, 5000,
                        float(rng.choice([0.001, 0.002, 0.003])), line=i + 2)
               for i, v in enumerate(values))
    qs = []
    for j in range(n_q):
        lo_h = float(rng.choice([60, 100, 110, 200]))
        qs.append(Transistor(f"Q{j:02d}", "NPN" if j % 3 else "PNP", lo_h,
                             lo_h * float(rng.choice([1.6, 2.0, 3.0])), 45.0, 0.2, 0.5,
                             vbe_min=0.58, vbe_max=float(rng.choice([0.70, 0.72])),
                             qty=500, unit_cost=float(rng.choice([0.02, 0.03, 0.05])),
                             line=1000 + j))
    return Inventory(f"<{series}>", rs, tuple(qs))


SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"


def peak_mib() -> float:
    """This process's peak resident memory, MiB: ``VmHWM`` of /proc/self/status (Linux), which
    a new program starts afresh; ``ru_maxrss`` elsewhere (on Linux it keeps, across exec, the
    peak of the forked copy of the parent that started the process)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def fresh(job_file: Path, stock: Path) -> tuple[float, float, dict]:
    """``stockbias design`` in a new process: (wall s, CPU s, the JSON result)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-m", "stockbias", "design", str(job_file),
                          "--inventory", str(stock), "--json"], capture_output=True, text=True,
                         check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, json.loads(out.stdout)


def sample_job_rows(folder: Path) -> list[str]:
    """The bundled line-driver job on the bundled E96 reels, pairs off and on."""
    text = (SAMPLES / "line_driver_job.toml").read_text(encoding="utf-8")
    stock = SAMPLES / "stockroom_e96_reels.csv"
    out, walls = [], {}
    for pairs in ("false", "true"):
        job_file = folder / f"line_driver_pairs_{pairs}.toml"
        # the job's own 20 s limit, raised so that a busy machine does not cut the run
        job_file.write_text(text.replace("allow_pairs = false", f"allow_pairs = {pairs}")
                            .replace("time_limit_s = 20", "time_limit_s = 600"),
                            encoding="utf-8")
        wall, cpu, res = fresh(job_file, stock)
        # the search alone, CPU and peak memory: in its own process after a warm-up search
        # (imports); the peak is the process's own VmHWM (see peak_mib)
        code = _ONE_FILE.format(here=str(Path(__file__).resolve().parent),
                                job=str(job_file), stock=str(stock))
        got = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             check=False)
        one = json.loads(got.stdout.strip().splitlines()[-1])
        peak = one["peak_mib"]
        walls[pairs] = (wall, cpu, res["solve_seconds"], one["cpu"])
        out.append(f"| line-driver job, E96 reels | {'on' if pairs == 'true' else 'off'} | "
                   f"{res['status']} | {res['solve_seconds']:.2f} ({one['cpu']:.2f}) | "
                   f"{wall:.2f} ({cpu:.2f}) | {peak:.0f} | {len(res['designs'])} |")
    w0, w1 = walls["false"], walls["true"]
    out.append(f"| ratio pairs on / off | | | {w1[2] / w0[2]:.1f}× ({w1[3] / w0[3]:.1f}×) | "
               f"{w1[0] / w0[0]:.1f}× ({w1[1] / w0[1]:.1f}×) | | |")
    return out


_ONE_FILE = """
import json, resource, sys, time
sys.path.insert(0, {here!r})
from bench_search import JOB, peak_mib, shelf
from stockbias.job import load_job, parse_job
from stockbias.search.design import design
from stockbias.stock_io import read_inventory
job, inv = load_job({job!r}), read_inventory({stock!r})
design(parse_job(JOB.format(pairs="false")), shelf("E12", 1))   # warm-up: imports
c0 = time.process_time()
r = design(job, inv)
print(json.dumps({{"status": r.status, "cpu": time.process_time() - c0,
                  "peak_mib": peak_mib()}}))
"""


def naive(job, inv: Inventory, budget_s: float) -> tuple[float, bool]:
    """Full cross product × every vertex; returns (seconds, finished)."""
    st = job.stage
    net = get_network("divider")
    lines = inv.resistors
    n = len(lines)
    span = 30.0
    v = np.array([r.value_ohm for r in lines])
    t = np.array([r.tolerance_pct / 100 for r in lines])
    d = np.array([(r.tempco_ppm or 0) * 1e-6 * span for r in lines])
    p = np.array([r.power_w for r in lines])
    total = n ** 4 * len(inv.transistors)
    t0 = time.perf_counter()
    done = 0
    best = []
    chunk = 4096
    combos = itertools.product(range(n), repeat=4)
    for q in inv.transistors:
        combos = itertools.product(range(n), repeat=4)
        while True:
            block = np.array(list(itertools.islice(combos, chunk)))
            if block.size == 0:
                break
            res = {role.name: ResistorSpec(v[block[:, k]], t[block[:, k]], d[block[:, k]])
                   for k, role in enumerate(net.roles)}
            spec = StageSpec(network=net, resistors=res, device=DeviceSpec.from_transistor(q),
                             vcc=12.0, vcc_tol=0.05, ambient_min_c=0, ambient_max_c=55)
            pt, _ = vertex_points(spec)
            ev = evaluate(spec, pt)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                low = {k: np.nanmin(np.broadcast_to(x, ev.op.shape), -1)
                       for k, x in ev.quantities.items() if np.ndim(x)}
                high = {k: np.nanmax(np.broadcast_to(x, ev.op.shape), -1)
                        for k, x in ev.quantities.items() if np.ndim(x)}
            na = np.sum(ev.op.region != 0, -1).astype(float)
            low["non_active_corners"] = high["non_active_corners"] = na
            low["vceo_needed"] = high["vceo_needed"] = np.full(na.shape, 12.6)
            ratings = {role.name: p[block[:, k]] for k, role in enumerate(net.roles)}
            m = evaluate_limits(stage_limits(job, st, spec, ratings), low, high)
            ok = np.all(np.stack([x >= 0 for x in m.values()]), 0)
            best.extend(block[ok][:5].tolist())
            done += len(block)
            if time.perf_counter() - t0 > budget_s:
                el = time.perf_counter() - t0
                return el * total / done, False
    return time.perf_counter() - t0, True




def _shelf_csv(inv: Inventory, path: Path) -> None:
    """A generated shelf as a stock file (the columns the reader takes)."""
    cols = ["kind", "part_id", "value", "tolerance_pct", "power_w", "tempco_ppm", "qty",
            "unit_cost", "polarity", "hfe_min", "hfe_max", "vceo_max", "ic_max", "pd_max_w",
            "vbe_min", "vbe_max"]
    rows = [",".join(cols)]
    for r in inv.resistors:
        rows.append(f"resistor,{r.part_id},{r.value_ohm!r},{r.tolerance_pct},{r.power_w},"
                    f"{r.tempco_ppm or 0},{r.qty},{r.unit_cost},,,,,,,,")
    for q in inv.transistors:
        rows.append(f"transistor,{q.part_id},,,,,{q.qty},{q.unit_cost},{q.polarity},"
                    f"{q.hfe_min},{q.hfe_max},{q.vceo_max},{q.ic_max},{q.pd_max_w},"
                    f"{q.vbe_min},{q.vbe_max}")
    path.write_text("\n".join(rows) + "\n")


def _with_model(job_text: str, model: str) -> str:
    """The job text with ``[search] model`` set (the key replaced or added)."""
    out, in_search, done = [], False, False
    for line in job_text.splitlines():
        if line.strip().startswith("[") and in_search and not done:
            out.append(f'model = "{model}"')
            done = True
        if line.strip() == "[search]":
            in_search = True
        if in_search and line.strip().startswith("model"):
            continue
        out.append(line)
    if not done:
        out += ([] if in_search else ["[search]"]) + [f'model = "{model}"']
    return "\n".join(out) + "\n"


def _fresh(job: Path, stock: Path) -> tuple[float, float, str, int]:
    """`stockbias design JOB --inventory STOCK --json` in a fresh process:
    (wall clock s, solve s, status, designs checked at every vertex)."""
    cmd = [sys.executable, "-m", "stockbias", "design", str(job), "--inventory", str(stock),
           "--json", "--time-limit", "300"]
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, env=os.environ.copy())
    wall = time.perf_counter() - t0
    out = json.loads(p.stdout)
    return wall, out["solve_seconds"], out["status"], out["stats"].get("designs_vertex_checked",
                                                                        0)


def exponential_rows() -> None:
    """Exponential vs constant-VBE model on every bundled shelf with the line-driver job
    and on the generated E96 shelf with 20 transistors (this script's job), each in a fresh
    process, both models in the same run; ratios exponential / constant VBE."""
    cases = []
    line_driver = (SAMPLES / "line_driver_job.toml").read_text()
    for csv in sorted(SAMPLES.glob("*.csv")):
        if csv.name == "broken_shelf.csv":
            continue                    # every line is a deliberate mistake: no design
        cases.append((csv.name, line_driver, csv))
    with tempfile.TemporaryDirectory() as tmp:
        e96 = Path(tmp) / "e96_20.csv"
        _shelf_csv(shelf("E96", 20), e96)
        cases.append(("generated E96, 20 transistors (bench job)", JOB.format(pairs="false"),
                      e96))
        print("\n| shelf | job | model | status | fresh-process wall (s) | solve (s) | "
              "designs checked at every vertex | wall ratio exp/cvbe | solve ratio exp/cvbe |")
        print("|---|---|---|---|---|---|---|---|---|")
        for name, text, stock in cases:
            res = {}
            for model in ("constant_vbe", "exponential"):
                job = Path(tmp) / f"job_{model}.toml"
                job.write_text(_with_model(text, model))
                res[model] = _fresh(job, stock)
            c, e = res["constant_vbe"], res["exponential"]
            jname = "line_driver_job.toml" if text is line_driver else "bench JOB"
            for model, r in res.items():
                ratio = (f"{e[0] / c[0]:.2f}", f"{e[1] / c[1]:.2f}") if model == "exponential" \
                    else ("", "")
                print(f"| {name} | {jname} | {model} | {r[2]} | {r[0]:.2f} | {r[1]:.2f} | "
                      f"{r[3]} | {ratio[0]} | {ratio[1]} |", flush=True)


def _design_cpu(job: Path, stock: Path, reps: int) -> tuple[float, float, str, int]:
    """One in-process ``design`` of a job on a stock file, after a warm-up search of the
    same job (imports and the first-use caches not counted): (least CPU s, least wall s
    of ``reps`` runs, status, designs checked at every vertex)."""
    from stockbias.cli.common import load

    job_o, inv = load(job, stock)
    design(job_o, inv)
    cpu = wall = float("inf")
    for _ in range(reps):
        c0, t0 = time.process_time(), time.perf_counter()
        r = design(job_o, inv)
        cpu = min(cpu, time.process_time() - c0)
        wall = min(wall, time.perf_counter() - t0)
    return cpu, wall, r.status, r.stats.get("designs_vertex_checked", 0)


def exponential_cpu_rows(reps: int = 3) -> None:
    """Exponential vs constant-VBE model, in process: the search CPU time of each model
    after a warm-up search, the least of ``reps`` runs, both models one after the other
    in the same run.  Every bundled shelf with a job it can meet (the model-card shelf
    with the cable-driver job, the others with the line-driver job; the broken shelf left
    out) and the generated E96 shelf with 20 transistors and this script's job."""
    cases = []
    line_driver = (SAMPLES / "line_driver_job.toml").read_text()
    cable = (SAMPLES / "cable_driver_job.toml").read_text()
    for csv in sorted(SAMPLES.glob("*.csv")):
        if csv.name == "broken_shelf.csv":
            continue                    # every line is a deliberate mistake: no design
        if csv.name == "characterised_parts.csv":
            cases.append((csv.name, "cable_driver_job.toml", cable, csv, reps))
        else:
            cases.append((csv.name, "line_driver_job.toml", line_driver, csv, reps))
    with tempfile.TemporaryDirectory() as tmp:
        e96 = Path(tmp) / "e96_20.csv"
        _shelf_csv(shelf("E96", 20), e96)
        cases.append(("generated E96, 20 transistors", "bench JOB", JOB.format(pairs="false"),
                      e96, 1))
        print("\n| shelf | job | model | status | search CPU (s) | search wall (s) | "
              "designs checked at every vertex | CPU ratio exp/cvbe |")
        print("|---|---|---|---|---|---|---|---|")
        for name, jname, text, stock, n in cases:
            res = {}
            for model in ("constant_vbe", "exponential"):
                job = Path(tmp) / f"job_{model}.toml"
                job.write_text(_with_model(text, model))
                res[model] = _design_cpu(job, stock, n)
            ratio = res["exponential"][0] / res["constant_vbe"][0]
            for model, r in res.items():
                shown = f"{ratio:.2f}" if model == "exponential" else ""
                print(f"| {name} | {jname} | {model} | {r[2]} | {r[0]:.2f} | {r[1]:.2f} | "
                      f"{r[3]} | {shown} |", flush=True)


PAIR_CASES = [("E12", 20), ("E24", 20), ("E48", 5), ("E48", 20), ("E96", 5), ("E96", 20)]

_ONE_CASE = """
import json, resource, sys, time
sys.path.insert(0, {here!r})
from bench_search import JOB, peak_mib, shelf
from stockbias.job import parse_job
from stockbias.search.design import design
inv = shelf({series!r}, {n_q})
job = parse_job(JOB.format(pairs={pairs!r}).replace("time_limit_s = 120", "time_limit_s = 900"))
design(parse_job(JOB.format(pairs="false")), shelf("E12", 1))   # warm-up: imports
c0, t0 = time.process_time(), time.perf_counter()
r = design(job, inv)
cpu, wall = time.process_time() - c0, time.perf_counter() - t0
print(json.dumps({{"status": r.status, "cpu": cpu, "wall": wall, "designs": len(r.designs),
                  "peak_mib": peak_mib(),
                  "keys": [[d.cost_micro, d.part_count, d.distinct_values, d.ic_margin]
                           for d in r.designs]}}))
"""


def pair_ratio_rows() -> None:
    """Pairs on against off on the generated shelves: each search once in its own process
    (after a warm-up search there, so imports are not counted), CPU and wall of the search,
    the process's peak memory (:func:`peak_mib`); the ratio on / off of the CPU times of
    the same run."""
    here = str(Path(__file__).resolve().parent)
    print("| shelf | transistors | pairs | status | search wall (CPU) (s) | peak memory (MiB) "
          "| ratio on / off CPU (wall) |")
    print("|---|---|---|---|---|---|---|")
    for series, n_q in PAIR_CASES:
        got = {}
        for pairs in ("false", "true"):
            code = _ONE_CASE.format(here=here, series=series, n_q=n_q, pairs=pairs)
            out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                 check=False)
            got[pairs] = json.loads(out.stdout.strip().splitlines()[-1])
        off, on = got["false"], got["true"]
        same = "" if off["keys"] == on["keys"] else " (pairs change the ranking)"
        for pairs, r in (("off", off), ("on", on)):
            ratio = (f"{on['cpu'] / off['cpu']:.1f}× ({on['wall'] / off['wall']:.1f}×){same}"
                     if pairs == "on" else "")
            print(f"| {series} | {n_q} | {pairs} | {r['status']} | {r['wall']:.2f} "
                  f"({r['cpu']:.2f}) | {r['peak_mib']:.0f} | {ratio} |", flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--baseline-only", action="store_true")
    ap.add_argument("--exponential", action="store_true",
                    help="only the exponential vs constant-VBE rows (fresh processes)")
    ap.add_argument("--exponential-cpu", action="store_true",
                    help="the exponential vs constant-VBE rows in process: search CPU after "
                    "a warm-up, the least of three runs")
    ap.add_argument("--sample-only", action="store_true", help="only the bundled sample job")
    ap.add_argument("--pairs", action="store_true",
                    help="only pairs on against off on the generated shelves, one process each")
    args = ap.parse_args()
    if args.pairs:
        pair_ratio_rows()
        return
    if args.exponential:
        exponential_rows()
        return
    if args.exponential_cpu:
        exponential_cpu_rows()
        return
    if args.sample_only:
        print("| job | pairs | status | solve time wall (search CPU) (s) | fresh process wall "
              "(CPU) (s) | peak memory of the search process (MiB) | designs |")
        print("|---|---|---|---|---|---|---|")
        for line in sample_job_rows(Path(tempfile.mkdtemp(prefix="bench_search_"))):
            print(line, flush=True)
        return
    rows = []
    cases = [("E12", 1, False), ("E12", 20, False), ("E24", 20, False), ("E48", 20, False),
             ("E96", 1, False), ("E96", 5, False), ("E96", 20, False),
             ("E12", 20, True), ("E24", 20, True), ("E48", 5, True), ("E48", 20, True),
             ("E96", 5, True), ("E96", 20, True)]
    if args.quick:
        cases = cases[:3]
    # warm-up: the first search in a process pays the imports (OR-Tools, SciPy), which are
    # not solve time; then each case is timed three times and the median is reported
    design(parse_job(JOB.format(pairs="false")), shelf("E12", 1))
    tmp = Path(tempfile.mkdtemp(prefix="bench_search_"))
    for series, n_q, pairs in cases[:0] if args.baseline_only else cases:
        inv = shelf(series, n_q)
        text = JOB.format(pairs="true" if pairs else "false")
        job = parse_job(text)
        times, cpus = [], []
        for _ in range(3):
            t0, c0 = time.perf_counter(), time.process_time()
            r = design(job, inv)
            times.append(time.perf_counter() - t0)
            cpus.append(time.process_time() - c0)
        el, el_cpu = sorted(times)[1], sorted(cpus)[1]
        stock, job_file = tmp / f"{series}_{n_q}.csv", tmp / f"{series}_{n_q}_{pairs}.toml"
        _shelf_csv(inv, stock)
        job_file.write_text(text, encoding="utf-8")
        wall, cpu, res = fresh(job_file, stock)
        # a busy machine can cut one run and not the other: then both statuses are shown
        status = r.status if res["status"] == r.status else f"{r.status} / {res['status']}"
        rows.append((series, len(inv.resistors), n_q, "on" if pairs else "off", el, el_cpu,
                     status, r.stats.get("rows", 0), r.stats.get("designs_vertex_checked", 0),
                     None, (wall, cpu)))
        print(rows[-1], flush=True)
    # the baseline: 12 lines (E12 1k-8k2), 24 lines (E12 100R-8k2), 1 and 20 transistors
    for lo, n_q in ((1e3, 1), (100.0, 1), (100.0, 20)):
        inv = shelf("E12", n_q, lo=lo, hi=8.2e3)
        job = parse_job(JOB.format(pairs="false"))
        t0, c0 = time.perf_counter(), time.process_time()
        r = design(job, inv)
        el, el_cpu = time.perf_counter() - t0, time.process_time() - c0
        base, finished = naive(job, inv, budget_s=60 if not args.quick else 10)
        stock, job_file = tmp / f"E12_{lo:g}_{n_q}.csv", tmp / f"E12_{lo:g}_{n_q}.toml"
        _shelf_csv(inv, stock)
        job_file.write_text(JOB.format(pairs="false"), encoding="utf-8")
        wall, cpu, _res = fresh(job_file, stock)
        rows.append((f"E12 {lo:g}-8k2", len(inv.resistors), n_q, "off", el, el_cpu, r.status,
                     r.stats.get("rows", 0), r.stats.get("designs_vertex_checked", 0),
                     (base, finished), (wall, cpu)))
        print(rows[-1], flush=True)
    print("\n| shelf | lines | transistors | pairs | solve time wall (CPU) (s) | fresh process "
          "wall (CPU) (s) | status | rows | designs checked at every vertex | naive baseline "
          "(s) | speed-up |")
    print("|---|---|---|---|---|---|---|---|---|---|---|")
    for series, n, q, pr, el, el_cpu, status, nrows, checked, base, (wall, cpu) in rows:
        b = "" if base is None else f"{base[0]:.1f}" + ("" if base[1] else " (est.)")
        sp = "" if base is None else f"{base[0] / el:.0f}×"
        print(f"| {series} | {n} | {q} | {pr} | {el:.2f} ({el_cpu:.2f}) | {wall:.2f} ({cpu:.2f}) "
              f"| {status} | {nrows} | {checked} | {b} | {sp} |")
    if not args.baseline_only:
        print("\n| job | pairs | status | solve time wall (search CPU) (s) | fresh process "
              "wall (CPU) (s) | peak memory of the search process (MiB) | designs |")
        print("|---|---|---|---|---|---|---|")
        for line in sample_job_rows(tmp):
            print(line, flush=True)


if __name__ == "__main__":
    main()
