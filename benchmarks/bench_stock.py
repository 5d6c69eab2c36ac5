"""Benchmark of `stock check` on a big stock file (100 000 lines).

Run: .venv/bin/python benchmarks/bench_stock.py [rows]  (prints a markdown table)

The file is generated in a temporary folder: a reel store's worth of resistor lines
(E24, E96 and off-series values over 1 Ω … 10 MΩ, five tolerances, four power ratings,
signed tempcos, notes with quoted commas) and one transistor line in fifty.  Timed:

1. reading and validating the file (``read_inventory``);
2. the summary (``summarise``: E-series of every value, counts);
3. the whole command in a fresh process, output to a file (not a terminal): the
   default summary, ``--rows`` (every row drawn as a table) and ``--json``.

In-process timings are the best of 3 runs; the command timings are one run each
(they include the interpreter start and the imports).  Wall time and CPU time (user +
system, of this process or of the command's) are both given: on a shared machine the
wall time grows with the load while the CPU time does not.
"""

from __future__ import annotations

import random
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from stockbias.eseries import series_values
from stockbias.stock_io import read_inventory
from stockbias.stock_summary import summarise

HEADER = ("kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,location,"
          "polarity,hfe_min,hfe_max,vceo_max,ic_max,pd_max_w,note")


def generate(path: Path, rows: int, seed: int = 7) -> None:
    """Write a stock file of ``rows`` lines (one transistor in fifty)."""
    rng = random.Random(seed)
    e24 = list(series_values("E24", 1.0, 1e7))
    e96 = list(series_values("E96", 1.0, 1e7))
    lines = ["# reel store of an invented contract assembler, generated for the benchmark",
             HEADER]
    for i in range(rows):
        if i % 50 == 49:
            lines.append(f"transistor,Q{i:06d},,,,,{rng.randint(0, 5000)},0.04,T{i % 90},"
                         f"{rng.choice(['NPN', 'PNP'])},{rng.choice([40, 100, 200])},"
                         f"{rng.choice([300, 600])},{rng.choice([30, 45, 80])},"
                         f"{rng.choice(['100m', '200mA', '1.5'])},{rng.choice(['500m', '1.2 W'])},")
            continue
        pick = rng.random()
        if pick < 0.5:
            value = f"{rng.choice(e24):.6g}"
        elif pick < 0.9:
            value = f"{rng.choice(e96):.6g}"
        else:
            value = f"{rng.uniform(1.0, 1e7):.4g}"
        note = '"reel, cut tape"' if i % 7 == 0 else ""
        lines.append(f"resistor,R{i:06d},{value},{rng.choice([0.1, 0.5, 1, 2, 5])},"
                     f"{rng.choice(['0.063', '0.1', '0.125', '250mW'])},"
                     f"{rng.choice(['', '50', '-200', '+100'])},{rng.randint(0, 5000)},"
                     f"0.002,S{i % 400},,,,,,,{note}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def best_of(fn, runs: int = 3) -> tuple[float, float]:
    """(wall, CPU) seconds of the fastest of ``runs`` calls."""
    times = []
    for _ in range(runs):
        start, cpu = time.perf_counter(), time.process_time()
        fn()
        times.append((time.perf_counter() - start, time.process_time() - cpu))
    return min(times)


def _children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def command(args: list[str], out: Path) -> tuple[float, float, int]:
    """(wall, CPU, exit code) of one run of the command, stdout to a file."""
    start, cpu = time.perf_counter(), _children_cpu()
    with out.open("wb") as sink:
        proc = subprocess.run([sys.executable, "-m", "stockbias", *args], stdout=sink,
                              stderr=subprocess.PIPE, check=False)
    return time.perf_counter() - start, _children_cpu() - cpu, proc.returncode


def main() -> None:
    rows = int(sys.argv[1]) if len(sys.argv) > 1 else 100_000
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "reel_store.csv"
        generate(path, rows)
        size = path.stat().st_size
        inv = read_inventory(path)
        t_read = best_of(lambda: read_inventory(path))
        t_summary = best_of(lambda: summarise(inv))
        out = Path(tmp) / "out.txt"
        results = [("read_inventory (parse and validate)", *t_read, 0),
                   ("summarise (E-series of every value)", *t_summary, 0)]
        for label, args in (("`stock check` (fresh process)", []),
                            ("`stock check --rows`", ["--rows"]),
                            ("`stock check --json`", ["--json"])):
            results.append((label, *command(["stock", "check", *args, str(path)], out)))
    print(f"{rows} lines, {size / 1e6:.1f} MB; in-process best of 3, commands one run\n")
    print("| step | wall | CPU | exit |")
    print("| --- | --- | --- | --- |")
    for label, wall, cpu, code in results:
        print(f"| {label} | {wall:.2f} s | {cpu:.2f} s | {code} |")


if __name__ == "__main__":
    main()
