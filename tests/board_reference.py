"""Helpers the board and consolidation tests share: reading a returned board back
independently of the search, and re-checking every stage with ``analyze_stage``."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from stockbias.analysis.check import analyze_stage
from stockbias.assign import ResolvedResistor
from stockbias.eseries import series_values
from stockbias.job import Job
from stockbias.parts import Inventory, Resistor, Transistor

ROLES = ("R1", "R2", "RC", "RE")


def resolved(role: str, r: Resistor) -> ResolvedResistor:
    return ResolvedResistor(role=role, value=r.value_ohm, tol=r.tolerance_pct / 100,
                            tempco_ppm=r.tempco_ppm or 0.0, rating=r.power_w, parts=(r,))


def board_of(design) -> list[tuple[Transistor, list[Resistor]]]:
    out = []
    for s in design.stages:
        assert set(s.check.parts) == set(ROLES)
        rs = []
        for role in ROLES:
            p = s.check.parts[role]
            assert len(p.parts) == 1
            rs.append(p.parts[0])
        out.append((s.transistor, rs))
    return out


def recheck(job: Job, design) -> None:
    """Every returned stage passes analyze_stage, re-run here."""
    for s in design.stages:
        st = next(x for x in job.stages if x.name == s.name)
        res = analyze_stage(replace(job, stages=(st,)), st, s.check.parts, s.transistor,
                            samples=0, topology=s.topology)
        assert res.ok, (s.name, [c.name for c in res.failing])


def generated_shelf(seed: int, n_lines: int, n_q: int, build: int,
                    qty_scale: tuple[int, ...] = (2, 4, 8)) -> Inventory:
    """A seeded shelf: n_lines E12 values 100 Ω…100 kΩ, NPN rows; invented test data."""
    rng = np.random.default_rng(seed)
    values = rng.choice(series_values("E12", 100.0, 100e3), size=n_lines, replace=False)
    resistors = []
    for i, v in enumerate(sorted(values)):
        resistors.append(Resistor(
            part_id=f"R{i:02d}", value_ohm=float(v),
            tolerance_pct=float(rng.choice([1.0, 2.0, 5.0])), power_w=0.25,
            tempco_ppm=float(rng.choice([0.0, 100.0])),
            qty=int(rng.choice(qty_scale)) * build,
            unit_cost=float(rng.choice([0.01, 0.02, 0.05])), line=i + 2))
    transistors = []
    for j in range(n_q):
        lo = float(rng.choice([80, 100, 150]))
        transistors.append(Transistor(
            part_id=f"Q{j}", polarity="NPN", hfe_min=lo,
            hfe_max=lo * float(rng.choice([1.5, 2.0, 3.0])), vceo_max=40.0, ic_max=0.1,
            pd_max_w=0.5, vbe_min=0.6, vbe_max=0.72, qty=100,
            unit_cost=float(rng.choice([0.03, 0.05])), line=100 + j))
    return Inventory(path=f"<shelf {seed}>", resistors=tuple(resistors),
                     transistors=tuple(transistors))


def held_stage(job: Job, stage, parts, q: Transistor, gain_pct: float | None = 10.0,
               rin_pct: float | None = 80.0, swing_pct: float | None = 90.0,
               current_pct: float | None = 125.0):
    """The stage with the purpose limits an existing design sets, written out here.

    Today's figures are those ``check`` reports for the design as it stands (its Stage
    block): nominal gain, worst-case input resistance, swing and supply current.  Limits:
    |gain| at the nominal point within ±gain_pct; the worst-case figures at least rin_pct /
    swing_pct and at most current_pct of today's (the job itself sets none of these here).
    """
    res = analyze_stage(replace(job, stages=(stage,)), stage, parts, q, samples=0)
    p = res.purpose
    target, limits = stage.target, stage.limits
    if gain_pct is not None:
        g = abs(p["gain"].nominal)
        target = replace(target, gain_nominal_min=g * (1 - gain_pct / 100),
                         gain_nominal_max=g * (1 + gain_pct / 100))
    if rin_pct is not None:
        target = replace(target, rin_min=p["rin"].worst * rin_pct / 100)
    if swing_pct is not None:
        target = replace(target, swing_pk=p["swing_pk"].worst * swing_pct / 100)
    if current_pct is not None:
        limits = replace(limits, supply_current_max=p["supply_current"].worst * current_pct / 100)
    return replace(stage, target=target, limits=limits)
