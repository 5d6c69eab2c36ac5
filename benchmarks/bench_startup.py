"""Benchmark of the command line's start-up: quick commands against ``import numpy``.

Run: .venv/bin/python benchmarks/bench_startup.py [runs]  (prints a markdown table)

Each command runs in ``runs`` fresh processes (default 7), output to a pipe, and the
median wall time is set against the median of ``python -c "import numpy"`` measured the
same way, interleaved with the commands so a change of machine load hits both alike
(the ratio of CPU times, user + system, is the steadier of the two on a loaded machine).
Timed:

1. ``stockbias --help``;
2. ``stockbias stock check`` of the bundled 35-line shelf (``workshop_drawers.csv``);
3. a usage error (an option no command has), exit 2.

The commands run as ``python -c`` calling ``stockbias.cli.app.main`` (what the console
script does) so the numbers do not depend on where the script was installed.  CPU time
(user + system of the child) is given too: on a shared machine the wall time grows with
the load while the CPU time does not.  The target is a ratio of at most 2.
"""

from __future__ import annotations

import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

SHELF = Path(__file__).resolve().parent.parent / "inventory_samples" / "workshop_drawers.csv"

BASELINE = "import numpy"


def _cli(*args: str) -> str:
    argv = ["stockbias", *args]
    return f"import sys; sys.argv = {argv!r}; from stockbias.cli.app import main; main()"


COMMANDS: list[tuple[str, str, int]] = [
    ("`stockbias --help`", _cli("--help"), 0),
    ("`stockbias stock check` (35-line shelf)", _cli("stock", "check", str(SHELF)), 0),
    ("usage error (`stockbias --no-such-option`)", _cli("--no-such-option"), 2),
]


def _run_once(code: str, expect: int) -> tuple[float, float]:
    """Wall and CPU seconds of one fresh ``python -c code`` (exit code checked)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          env={**os.environ, "COLUMNS": "100"}, check=False)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if proc.returncode != expect:
        raise SystemExit(f"{code!r} exited {proc.returncode}, expected {expect}: "
                         f"{proc.stderr.strip()[-300:]}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def measure(runs: int) -> list[tuple[str, float, float, float, float]]:
    """Rows (label, median wall s, median CPU s, baseline wall s, baseline CPU s)."""
    rows = []
    for label, code, expect in COMMANDS:
        walls, cpus, base_walls, base_cpus = [], [], [], []
        for _ in range(runs):
            base_wall, base_cpu = _run_once(BASELINE, 0)
            base_walls.append(base_wall)
            base_cpus.append(base_cpu)
            wall, cpu = _run_once(code, expect)
            walls.append(wall)
            cpus.append(cpu)
        rows.append((label, statistics.median(walls), statistics.median(cpus),
                     statistics.median(base_walls), statistics.median(base_cpus)))
    return rows


def main() -> None:
    runs = int(sys.argv[1]) if len(sys.argv) > 1 else 7
    _run_once(BASELINE, 0)  # warm the file cache once
    print(f"median of {runs} fresh processes; load average {os.getloadavg()[0]:.1f}\n")
    print("| command | wall | CPU | `import numpy` wall | CPU | ratio of walls | of CPU |")
    print("| --- | --- | --- | --- | --- | --- | --- |")
    for label, wall, cpu, base_wall, base_cpu in measure(runs):
        print(f"| {label} | {wall:.3f} s | {cpu:.3f} s | {base_wall:.3f} s | {base_cpu:.3f} s "
              f"| {wall / base_wall:.2f} | {cpu / base_cpu:.2f} |")


if __name__ == "__main__":
    main()
