"""Benchmark: does every searching command end within its ``--time-limit``?

Run:  python benchmarks/bench_time_limit.py [--limits 1 2 5] [--cases NAME ...]

Each case is a job too hard to finish in a few seconds, run in a fresh process with
``--time-limit`` 1, 2 and 5 s.  Measured per run: wall clock and CPU (user + system of
the child), the command's own ``solve_seconds`` where its JSON reports one, the status
and how many designs it returned.  Start-up is measured in the same run, alternately:
``stockbias --help`` (the CLI alone) and a process that imports the CLI, the search
modules and CP-SAT and reads the case's stock (``LOAD``: the loading every search command
does before its clock starts).  The overrun is ``wall − limit − load``, where ``load`` is that
loading time; the promise (issue 13, goal 4) is ``overrun ≤ 0.1 × limit``.  On a shared
machine the wall clock waits for the cores, so the same is shown in CPU seconds (the
searches run on one core: alone, their wall time would be their CPU time).

Cases (every one searched with the time limit, never enough to finish):

* ``design``: the bundled line-driver job on the bundled E96 reels (481 lines);
* ``pairs``: the same with ``allow_pairs = true``;
* ``exponential``: the same with ``model = "exponential"``;
* ``yield``: the same with ``[target] yield_min = 99.9`` (the yield search);
* ``board8``, ``board16``: board design of 8 and 16 stages on the shelf of
  ``bench_board.py`` (E24, 121 lines, 3 transistors free);
* ``yieldboard8``: the 8-stage board with ``yield_min = 99`` in every stage (the yield
  board search);
* ``consolidate8``, ``consolidate16``: consolidation of the same boards, fitted with each
  stage's cheapest single design;
* ``substitute``: the line-driver job's cheapest design on the E96 reels, judged for
  every transistor (the rework searches);
* ``sweep``: ``sweep --without`` over a folder holding the 16-stage board.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from bench_board import board, shelf  # noqa: E402
from bench_search import _shelf_csv  # noqa: E402

from stockbias.samples import SAMPLES_DIR as SAMPLES  # noqa: E402
E96 = SAMPLES / "stockroom_e96_reels.csv"
LINE = (SAMPLES / "line_driver_job.toml").read_text(encoding="utf-8")
EXE = [sys.executable, "-m", "stockbias"]


#: what every search command loads before its clock starts: the CLI, the search modules,
#: CP-SAT and the stock file
LOAD = ("import sys; import stockbias.cli.app; import stockbias.search.design, "
        "stockbias.search.board, stockbias.search.consolidate, stockbias.search.substitute, "
        "stockbias.search.yield_search; from ortools.sat.python import cp_model; "
        "from stockbias.stock_io import read_inventory; read_inventory(sys.argv[1])")


def _child(cmd: list[str]) -> tuple[float, float, subprocess.CompletedProcess]:
    """Run ``cmd``: (wall s, CPU s of the child, the finished process)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, p


def _line_job(folder: Path, name: str, *, pairs: bool = False, model: str | None = None,
              yield_min: float | None = None) -> Path:
    text = LINE.replace("time_limit_s = 20", "time_limit_s = 600")
    if pairs:
        text = text.replace("allow_pairs = false", "allow_pairs = true")
    if model:
        text = text.replace('model = "constant_vbe"', f'model = "{model}"')
    if yield_min is not None:
        text = text.replace('rin_min = "5 k"', f'rin_min = "5 k"\nyield_min = {yield_min}')
    path = folder / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _fitted_board(n: int, inv) -> str:
    """The consolidation board of ``bench_board.py``: each stage fitted with its cheapest
    single design (searched here, in this process, without a limit that could cut it)."""
    from stockbias.job import parse_job
    from stockbias.search.design import design

    text = board(n, ["bom_lines", "changes", "cost"], ["Q0", "Q1"])
    job = parse_job(text)
    blocks = text.split("\n[[stage]]\n")
    out = [blocks[0]]
    for st, block in zip(job.stages, blocks[1:], strict=True):
        one = design(replace(job, stages=(st,)), inv, top=1, time_limit_s=600)
        vals = "".join(f'{r} = "{p.part_ids[0]}"\n'
                       for r, p in one.designs[0].check.parts.items())
        out.append(block + "[stage.values]\n" + vals)
    return "\n[[stage]]\n".join(out)


def cases(folder: Path, wanted: set[str] | None) -> list[tuple[str, list[str], Path]]:
    """(name, command without ``--time-limit``, stock file) per case."""
    from stockbias.job import load_job
    from stockbias.search.design import design
    from stockbias.stock_io import read_inventory

    def want(name: str) -> bool:
        return wanted is None or name in wanted

    out = []
    if want("design"):
        out.append(("design", EXE + ["design", str(_line_job(folder, "plain")), "-i", str(E96),
                                     "--json"], E96))
    if want("pairs"):
        out.append(("pairs", EXE + ["design", str(_line_job(folder, "pairs", pairs=True)),
                                    "-i", str(E96), "--json"], E96))
    if want("exponential"):
        out.append(("exponential", EXE + ["design", str(_line_job(folder, "exp",
                                                                  model="exponential")),
                                          "-i", str(E96), "--json"], E96))
    if want("yield"):
        out.append(("yield", EXE + ["design", str(_line_job(folder, "yield", yield_min=99.9)),
                                    "-i", str(E96), "--json", "--workers", "1"], E96))
    inv3, inv2 = shelf(3), shelf(2)
    e24_3, e24_2 = folder / "e24_3q.csv", folder / "e24_2q.csv"
    _shelf_csv(inv3, e24_3)
    _shelf_csv(inv2, e24_2)
    for n in (8, 16):
        if want(f"board{n}"):
            path = folder / f"board{n}.toml"
            path.write_text(board(n, ["cost", "part_count", "distinct_values"], None))
            out.append((f"board{n}", EXE + ["design", str(path), "-i", str(e24_3), "--json"],
                        e24_3))
    if want("yieldboard8"):
        path = folder / "yieldboard8.toml"
        path.write_text(board(8, ["cost", "part_count", "distinct_values"], None)
                        .replace("ic_window_pct = 20\n", "ic_window_pct = 20\nyield_min = 99\n"))
        out.append(("yieldboard8", EXE + ["design", str(path), "-i", str(e24_3), "--json",
                                          "--workers", "1"], e24_3))
    need_fitted = want("consolidate8") or want("consolidate16") or want("sweep")
    inv2_read = read_inventory(e24_2) if need_fitted else None
    fitted16 = _fitted_board(16, inv2_read) if need_fitted else ""
    for n in (8, 16):
        if want(f"consolidate{n}"):
            path = folder / f"fitted{n}.toml"
            text = fitted16 if n == 16 else "\n[[stage]]\n".join(
                fitted16.split("\n[[stage]]\n")[:n + 1])
            path.write_text(text)
            out.append((f"consolidate{n}", EXE + ["consolidate", str(path), "-i", str(e24_2),
                                                  "--json"], e24_2))
    if want("substitute"):
        plain = _line_job(folder, "sub")
        inv = read_inventory(E96)
        best = design(load_job(plain), inv, top=1, time_limit_s=600).designs[0]
        vals = ",".join(f"{r}={p.part_ids[0]}" for r, p in best.check.parts.items())
        out.append(("substitute", EXE + ["substitute", str(plain), "-i", str(E96), "-v", vals,
                                         "-t", best.transistor.part_id, "--json"], E96))
    if want("sweep"):
        sweep_dir = folder / "sweep"
        sweep_dir.mkdir()
        (sweep_dir / "fitted16.toml").write_text(fitted16)
        out.append(("sweep", EXE + ["sweep", str(sweep_dir), "-i", str(e24_2), "--without",
                                    "Q0", "--json", "--workers", "1"], e24_2))
    return out


def _summary(p: subprocess.CompletedProcess) -> tuple[str, str, str]:
    """(status, designs, in-process seconds) from a command's JSON output."""
    try:
        d = json.loads(p.stdout)
    except json.JSONDecodeError:
        return f"exit {p.returncode}: {p.stderr.strip()[-60:]}", "", ""
    secs = d.get("solve_seconds")
    secs = "" if secs is None else f"{secs:.2f}"
    if "status" in d:
        n = d.get("designs")
        return str(d["status"]), str(len(n) if isinstance(n, list) else ""), secs
    if "candidates" in d:                                    # substitute
        c = d["candidates"]
        cut = sum(1 for x in c if x.get("proven") is False)
        return f"{cut} of {len(c)} not proven", "", secs
    if "stages" in d:                                        # sweep
        s = d.get("summary", {})
        return ", ".join(f"{v} {k}" for k, v in s.items()), "", secs
    return f"exit {p.returncode}", "", secs


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--limits", type=float, nargs="+", default=[1.0, 2.0, 5.0])
    ap.add_argument("--cases", nargs="+", help="only these cases")
    args = ap.parse_args()
    print(f"load average at start: {os.getloadavg()[0]:.1f} (2 cores, shared machine)")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        todo = cases(folder, set(args.cases) if args.cases else None)
        print("\n| case | limit s | wall s (CPU s) | load s wall (CPU) | overrun s wall (CPU) | "
              "over 10 %? wall (CPU) | in-process s | status | designs |")
        print("| --- | --- | --- | --- | --- | --- | --- | --- | --- |")
        helps = []
        for name, cmd, stock in todo:
            for limit in args.limits:
                hw, _hc, _ = _child(EXE + ["--help"])
                lw, lc, _ = _child([sys.executable, "-c", LOAD, str(stock)])
                helps.append(hw)
                wall, cpu, p = _child(cmd + ["--time-limit", f"{limit:g}"])
                status, n, secs = _summary(p)
                over, over_cpu = wall - limit - lw, cpu - limit - lc
                flag = "yes" if over > 0.1 * limit else "no"
                flag_cpu = "yes" if over_cpu > 0.1 * limit else "no"
                print(f"| {name} | {limit:g} | {wall:.2f} ({cpu:.2f}) | {lw:.2f} ({lc:.2f}) | "
                      f"{over:+.2f} ({over_cpu:+.2f}) | {flag} ({flag_cpu}) | {secs} | "
                      f"{status} | {n} |", flush=True)
        print(f"\n`stockbias --help`: median {statistics.median(helps):.2f} s wall over "
              f"{len(helps)} runs; load average at end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
