"""Benchmark: `substitute` to a yield target against the worst-case `substitute` of the same
stage: the bundled line-driver job (yield_min 99.7 %) and a generated shelf.

Run:  python benchmarks/bench_yield_substitute.py

Stages: on the workshop drawers the stage the README checks (R1 MF-47K5, R2 MF-10K0, RE
CF-1K0, RC CF-3K3, QN-LB2); on the E96 reels the worst-case design's first choice (found
before the clock starts).  Each run is a fresh process; wall and CPU seconds of the
substitution alone (the job and stock already loaded) are reported, with each transistor's
verdict under both rules.
"""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

CHILD = r"""
import json, sys, time
from stockbias.cli.common import load
from stockbias.samples import sample_path
from stockbias.search.substitute import substitute
mode, shelf, purpose = sys.argv[1], sys.argv[2], sys.argv[3] == "held"
text = sample_path("line_driver_job.toml").read_text()
if mode == "yield":
    text = text.replace("ic_window_pct = 30", "ic_window_pct = 30\nyield_min = 99.7")
from pathlib import Path
import tempfile
d = Path(tempfile.mkdtemp())
if shelf == "generated":
    sys.path.insert(0, sys.argv[4])
    from test_yield_search import HEADER, JOB, PRECISE, TRANSISTOR, WIDE
    from test_yield_substitute import MORE_PRECISE, MORE_WIDE, TQ2, VALUES
    text = JOB.format(window=25)
    if mode != "yield":
        text = text.replace("yield_min = 95\n", "")
    (d / "shelf.csv").write_text(HEADER + PRECISE + MORE_PRECISE + WIDE + MORE_WIDE
                                 + TRANSISTOR + TQ2)
(d / "job.toml").write_text(text)
job, inv = load(d / "job.toml", d / "shelf.csv" if shelf == "generated" else sample_path(shelf))
if shelf == "generated":
    values, current = VALUES, "TQ-1"
elif shelf == "workshop_drawers.csv":
    values = {"R1": "MF-47K5", "R2": "MF-10K0", "RE": "CF-1K0", "RC": "CF-3K3"}
    current = "QN-LB2"
else:
    from stockbias.search.design import design
    from stockbias.search.yield_evidence import plain_job
    best = design(plain_job(job), inv, top=1).designs[0]
    values = {r: "+".join(p.part_ids) for r, p in best.check.parts.items()}
    current = best.transistor.part_id
t0, c0 = time.perf_counter(), time.process_time()
res = substitute(job, values, current, inv, time_limit_s=120, purpose=purpose)
wall, cpu = time.perf_counter() - t0, time.process_time() - c0
def verdict(c):
    if c.ruled_out:
        return "ruled out"
    if c.drop_in:
        return "drop-in"
    if c.changes:
        return f"{len(c.changes)} changes, +{c.added_cost:g}"
    return "none"
stats = (res.yield_search or {}).get("stats", {})
print(json.dumps({"wall": wall, "cpu": cpu, "stage": values, "current": current,
                  "verdicts": {c.transistor.part_id: verdict(c) for c in res.candidates},
                  "stats": {k: v for k, v in stats.items() if k in (
                      "sampled_candidates", "proven_without_sampling", "screened_out",
                      "judged")}}))
"""


def main() -> None:
    print(f"# yield substitute against worst-case substitute, {time.strftime('%Y-%m-%d %H:%M')}"
          " (the machine was shared with other work)")
    print("| shelf | worst case: CPU (wall) s | yield: CPU (wall) s | CPU ratio | verdicts, "
          "worst case → yield | yield candidates |")
    print("| --- | --- | --- | --- | --- | --- |")
    tests = str(Path(__file__).resolve().parent.parent / "tests")
    for shelf, purpose in (("workshop_drawers.csv", "held"), ("stockroom_e96_reels.csv", "held"),
                           ("generated", "off")):
        r = {}
        for mode in ("worst", "yield"):
            out = subprocess.run([sys.executable, "-c", CHILD, mode, shelf, purpose, tests],
                                 capture_output=True, text=True, check=True)
            r[mode] = json.loads(out.stdout.strip().splitlines()[-1])
        w, y = r["worst"], r["yield"]
        pairs = "; ".join(f"{q}: {w['verdicts'][q]} → {y['verdicts'][q]}"
                          for q in w["verdicts"] if w["verdicts"][q] != "ruled out")
        held = "" if purpose == "held" else ", purpose not held"
        print(f"| {shelf} ({w['current']}{held}) | {w['cpu']:.2f} ({w['wall']:.2f}) | "
              f"{y['cpu']:.2f} ({y['wall']:.2f}) | {y['cpu'] / w['cpu']:.1f}× | {pairs} | "
              f"{y['stats']} |", flush=True)


if __name__ == "__main__":
    main()
