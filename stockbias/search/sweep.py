"""Many jobs at once: every stage of every job and board file in a folder, run on one
executor.

With a struck transistor (``without``), every stage fitted with it gets the substitute with
the least rework by the ``substitute`` rules (drop-in first, then fewest resistor changes,
then least added cost; a stage with ``yield_min`` judged by its yield, as ``substitute``
judges it), or the statement that none exists; the struck part itself is never
offered.  Without one, every stage that names its parts is checked (worst case at every
corner).  Stages that name no parts are listed as not built.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError

__all__ = ["SweepRow", "stage_tasks", "sweep_stage"]


@dataclass(frozen=True)
class SweepRow:
    """One stage's outcome.  ``verdict``: drop-in, rework, none, passes, fails, not built,
    unaffected, not judged (the sweep's time limit ran out first)."""

    file: str
    stage: str
    current: str
    verdict: str
    transistor: str = ""
    changes: str = ""
    added_cost: float = 0.0
    note: str = ""

    def to_dict(self) -> dict[str, object]:
        return {"file": self.file, "stage": self.stage, "current": self.current,
                "verdict": self.verdict, "transistor": self.transistor,
                "changes": self.changes, "added_cost": self.added_cost, "note": self.note}


def stage_tasks(folder: Path) -> list[tuple[str, str]]:
    """(job file, stage name) for every stage of every ``*.toml`` in ``folder`` (sorted)."""
    from ..job import load_job

    files = sorted(p for p in folder.glob("*.toml") if p.is_file())
    if not files:
        raise InputError("no job or board files (*.toml) in the folder", file=str(folder))
    out = []
    for path in files:
        job = load_job(path)
        out.extend((str(path), st.name) for st in job.stages)
    return out


def sweep_stage(task: tuple) -> SweepRow:
    """One stage of the sweep (module level: it runs in worker processes too).

    ``task``: (job file, stage, stock file, struck part or None, samples, seed[, end]);
    ``end``, when given, is the sweep's time limit as a :func:`time.time` value (shared by
    worker processes and cluster machines): a stage reached after it is not judged, and a
    substitute search gets what is left of it."""
    import time

    from ..assign import resolve_resistor
    from ..job import load_job
    from ..stock_io import read_inventory
    from .board import stage_job
    from .substitute import substitute

    job_path, stage_name, inv_path, without, samples, seed = task[:6]
    end = task[6] if len(task) > 6 else None
    job = load_job(job_path)
    inv = read_inventory(inv_path)
    stage = next(s for s in job.stages if s.name == stage_name)
    name = Path(job_path).name
    current = stage.transistor or ""
    if end is not None and time.time() >= end:
        return SweepRow(name, stage_name, current, "not judged",
                        note="the sweep's time limit ran out before this stage")
    if not stage.values or not current:
        return SweepRow(name, stage_name, current, "not built",
                        note="the stage names no parts ([stage.values] and transistor)")
    one = stage_job(job, stage)
    if without is not None:
        if current != without:
            return SweepRow(name, stage_name, current, "unaffected")
        left = None if end is None else max(end - time.time(), 0.1)
        # a yield target is judged on the yield search's own sample count
        res = substitute(one, dict(stage.values), current, inv, seed=seed, time_limit_s=left,
                         samples=None if stage.target.yield_min is not None else samples)
        for c in res.candidates:
            if c.transistor.part_id == without or not c.fixed:
                continue
            changes = "; ".join(f"{role}={'+'.join(r.part_id for r in p.parts)}"
                                for role, p in c.changes.items())
            return SweepRow(name, stage_name, current, "drop-in" if c.drop_in else "rework",
                            c.transistor.part_id, changes, float(c.added_cost),
                            "; ".join(x for x in (_yield_note(c.yield_evidence), c.note) if x))
        notes = sorted({c.ruled_out or c.note for c in res.candidates
                        if c.transistor.part_id != without and (c.ruled_out or c.note)})
        return SweepRow(name, stage_name, current, "none",
                        note="; ".join(notes) or "no other transistor on the shelf")
    from ..analysis.check import analyze_stage

    amb = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    parts = {role: resolve_resistor(role, text, inv, job.build.default_tolerance_pct,
                                    source="[stage.values]", ambient=amb)
             for role, text in stage.values.items()}
    q = inv.find_transistor(current)
    if q is None:
        return SweepRow(name, stage_name, current, "fails",
                        note=f"transistor {current} is not on the shelf")
    res = analyze_stage(one, stage, parts, q, samples=samples if
                        stage.target.yield_min is not None else 0, seed=seed)
    failing = ", ".join(c.name for c in res.constraints if not c.ok)
    return SweepRow(name, stage_name, current, "passes" if res.ok else "fails",
                    note=f"fails {failing}" if failing else "")


def _yield_note(ev: object | None) -> str:
    """A yield verdict in a few words (empty without a yield target)."""
    if ev is None:
        return ""
    from ..render.yield_text import lower_percent

    final = ev.final  # type: ignore[attr-defined]
    wc = ev.worst_case_failing  # type: ignore[attr-defined]
    shown = {"worst case": "passes every worst-case corner", "sub-box": "sub-box",
             "sampled": "sampled"}[ev.kind]  # type: ignore[attr-defined]
    return (f"yield ≥ {lower_percent(ev.final_low)} % on {final.samples:,} fresh boards "  # type: ignore[attr-defined]
            f"({shown})" + (f", worst case fails {', '.join(wc)}" if wc else ""))
