"""Benchmarks of the analysis engine (issue 3): extreme-value analysis and Monte Carlo.

Run: .venv/bin/python benchmarks/bench_analysis.py  (prints a markdown table)

1. Extreme-value analysis of 100 000 candidate divider stages over every tolerance
   (supply, four resistors with tolerance and tempco drift, hFE, VBE, leakage, ambient:
   9 axes, 512 vertices): the few-corner method (analysis.fast_bounds, proven
   monotonicity, 10 corner evaluations plus a proven PD bound) against brute force over all
   512 vertices (the same closed-form solver, in chunks).
2. Monte Carlo of one stage with 1 000 000 boards, each at 4 environment corners.
Timings are the best of 3 runs; peak memory is the traced peak of Python allocations
(numpy arrays included) during one run.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

from stockbias.analysis.constraints import Limit
from stockbias.analysis.fast_bounds import divider_bounds
from stockbias.analysis.montecarlo import monte_carlo
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.eseries import series_values
from stockbias.topologies.divider import active_constant_vbe

N = 100_000
AMBIENT = (0.0, 55.0)
DEV = {"hfe_min": 100.0, "hfe_max": 300.0, "vbe_min": 0.6, "vbe_max": 0.7, "vce_sat": 0.2,
       "icbo25": 50e-9, "xtb": 1.5}


def candidates(rng: np.random.Generator) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    values = series_values("E24", 100, 1e6)
    pick = {role: rng.choice(values, N) for role in ("R1", "R2", "RC", "RE")}
    tol = rng.choice([0.01, 0.05], N)
    drift = 100e-6 * 30.0   # 100 ppm/°C over 30 °C from 25 °C
    return {r: (v * (1 - tol) * (1 - drift), v * (1 + tol) * (1 + drift)) for r, v in
            pick.items()}


def fast(bands):
    return divider_bounds(bands, vcc=12.0, vcc_tol=0.05, ambient_min_c=AMBIENT[0],
                          ambient_max_c=AMBIENT[1], **DEV)


def brute(bands, chunk: int = 4000):
    """All 2^9 vertices of every candidate, closed form, chunked to bound memory."""
    k = 9
    bits = (np.arange(2 ** k)[:, None] >> np.arange(k)[None, :]) & 1
    t_k = 273.15
    out = np.empty((N, 4))
    for s in range(0, N, chunk):
        sl = slice(s, s + chunk)
        b = [bands[r] for r in ("R1", "R2", "RC", "RE")]
        res = [np.where(bits[:, j], hi[sl, None], lo[sl, None]) for j, (lo, hi) in enumerate(b)]
        vcc = np.where(bits[:, 4], 12.6, 11.4)[None, :]
        amb = np.where(bits[:, 8], AMBIENT[1], AMBIENT[0])[None, :]
        hfe = np.where(bits[:, 5], DEV["hfe_max"], DEV["hfe_min"])[None, :]
        beta = hfe * ((amb + t_k) / 298.15) ** DEV["xtb"]
        vbe = np.where(bits[:, 6], DEV["vbe_max"], DEV["vbe_min"])[None, :] - 2e-3 * (amb - 25)
        icbo = np.where(bits[:, 7], DEV["icbo25"], 0.0)[None, :] * 2.0 ** ((amb - 25) / 10)
        _ib, ic, _vb, vc, ve = active_constant_vbe(
            {"R1": res[0], "R2": res[1], "RC": res[2], "RE": res[3]}, vcc, 0.0, beta, vbe,
            icbo)
        vce = vc - ve
        out[sl] = np.stack([ic.min(1), ic.max(1), vce.min(1), vce.max(1)], axis=1)
    return out


def timed(fn, *args, repeat: int = 3):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        result = fn(*args)
        best = min(best, time.perf_counter() - t0)
    tracemalloc.start()
    fn(*args)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return best, peak, result


def main() -> None:
    rng = np.random.default_rng(1)
    bands = candidates(rng)
    t_fast, m_fast, fb = timed(fast, bands)
    t_brute, m_brute, bb = timed(brute, bands, repeat=1)
    active = fb.active
    agree = np.allclose(np.stack([fb.ic_min, fb.ic_max, fb.vce_min, fb.vce_max], 1)[active],
                        bb[active], rtol=1e-12, atol=1e-15)
    spec = StageSpec("divider", {"R1": ResistorSpec(47e3, 0.05, 0.003),
                                 "R2": ResistorSpec(10e3, 0.05, 0.003),
                                 "RC": ResistorSpec(3.3e3, 0.05, 0.003),
                                 "RE": ResistorSpec(1e3, 0.05, 0.003)},
                     DeviceSpec("NPN", 100, 300, 0.6, 0.7, 0.2, 50e-9, theta_ja=200.0,
                                pd_max_w=0.625),
                     vcc=12.0, vcc_tol=0.05, ambient_min_c=AMBIENT[0], ambient_max_c=AMBIENT[1])
    limits = [Limit("ic_min", "ic", "min", 1.2e-3, "A", ""),
              Limit("ic_max", "ic", "max", 1.8e-3, "A", ""),
              Limit("vce_min", "vce", "min", 3.0, "V", "")]

    def mc():
        return monte_carlo(spec, limits, 1_000_000, 0,
                           tempco_ppm={r: 100.0 for r in spec.resistors})

    t_mc, m_mc, res = timed(mc)
    print("| benchmark | time | peak memory | note |")
    print("| --- | --- | --- | --- |")
    print(f"| EVA, {N:,} divider stages, few-corner method | {t_fast:.3f} s | "
          f"{m_fast / 2**20:.0f} MiB | 10 corner solves per stage + proven PD bound; "
          f"{int(active.sum()):,} stages active at every corner |")
    print(f"| EVA, {N:,} divider stages, all 512 vertices | {t_brute:.3f} s | "
          f"{m_brute / 2**20:.0f} MiB | brute force, same solver; bounds agree: {agree} |")
    print(f"| Monte Carlo, 1,000,000 boards × 4 environment corners | {t_mc:.3f} s | "
          f"{m_mc / 2**20:.0f} MiB | yield {100 * res.yield_.yield_:.2f} % |")


if __name__ == "__main__":
    main()
