"""Benchmark: design-search solve time against shelf size, and the naive baseline.

Run:  python benchmarks/bench_search.py [--quick]

Solve time is everything after the stock and job are loaded (pre-pass, model, solve,
re-verification), as DESIGN §2 defines it; the median of three runs after one warm-up
search (so that the one-off imports of OR-Tools and SciPy are not counted).  The baseline is the naive vectorised
enumeration of the full cross product (every role × every line × every transistor, all
corners), evaluated with the analysis engine and the same limits, then sorted by the same
objectives; it is run only where it finishes in reasonable time, otherwise its time is
extrapolated from a measured slice (marked "est.").

Shelves: E12 … E96 over 10 Ω … 1 MΩ (stockbias.eseries.series_values), 5000 pieces per
line, seeded unit costs; transistors are generated small-signal rows (NPN and PNP).
Job: one divider stage, 12 V ±5 %, IC 1.5 mA ±12 %, VCE ≥ 3 V, 0…55 °C, build of 10.
"""

from __future__ import annotations

import argparse
import itertools
import time
import warnings

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


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--baseline-only", action="store_true")
    args = ap.parse_args()
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
    for series, n_q, pairs in cases[:0] if args.baseline_only else cases:
        inv = shelf(series, n_q)
        job = parse_job(JOB.format(pairs="true" if pairs else "false"))
        times = []
        for _ in range(3):
            t0 = time.perf_counter()
            r = design(job, inv)
            times.append(time.perf_counter() - t0)
        el = sorted(times)[1]
        rows.append((series, len(inv.resistors), n_q, "on" if pairs else "off", el, r.status,
                     r.stats.get("rows", 0), r.stats.get("designs_vertex_checked", 0), None))
        print(rows[-1], flush=True)
    # the baseline: 12 lines (E12 1k-8k2), 24 lines (E12 100R-8k2), 1 and 20 transistors
    for lo, n_q in ((1e3, 1), (100.0, 1), (100.0, 20)):
        inv = shelf("E12", n_q, lo=lo, hi=8.2e3)
        job = parse_job(JOB.format(pairs="false"))
        t0 = time.perf_counter()
        r = design(job, inv)
        el = time.perf_counter() - t0
        base, finished = naive(job, inv, budget_s=60 if not args.quick else 10)
        rows.append((f"E12 {lo:g}-8k2", len(inv.resistors), n_q, "off", el, r.status,
                     r.stats.get("rows", 0), r.stats.get("designs_vertex_checked", 0),
                     (base, finished)))
        print(rows[-1], flush=True)
    print("\n| shelf | lines | transistors | pairs | solve time (s) | status | rows | "
          "designs checked at every vertex | naive baseline (s) | speed-up |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    for series, n, q, pr, el, status, nrows, checked, base in rows:
        b = "" if base is None else f"{base[0]:.1f}" + ("" if base[1] else " (est.)")
        sp = "" if base is None else f"{base[0] / el:.0f}×"
        print(f"| {series} | {n} | {q} | {pr} | {el:.2f} | {status} | {nrows} | {checked} | "
              f"{b} | {sp} |")


if __name__ == "__main__":
    main()
