"""Helpers the board and consolidation tests share: reading a returned board back
independently of the search, and re-checking every stage with ``analyze_stage``."""

from __future__ import annotations

from dataclasses import replace

from stockbias.analysis.check import analyze_stage
from stockbias.assign import ResolvedResistor
from stockbias.job import Job
from stockbias.parts import Resistor, Transistor

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
