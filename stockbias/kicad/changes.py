"""The change list of a consolidation or a substitution, by reference designator.

One row per changed position: the schematic reference(s) from the stage's
``[stage.refs]``, the old and the new value (resistance in the letter code, the
transistor by stock part id), the stock part id fitted, the stage and the role.
The CSV goes through :func:`stockbias.inert_text.spreadsheet_row`, so no cell from
a file is read as a formula.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from ..errors import InputError
from ..inert_text import spreadsheet_row
from ..units import format_resistance_code

if TYPE_CHECKING:
    from ..assign import ResolvedResistor
    from ..job import Job
    from ..parts import Inventory
    from ..search.consolidate import ConsolidateResult
    from ..search.substitute import SubstituteResult

__all__ = ["CHANGE_COLUMNS", "Change", "changes_csv", "consolidate_changes",
           "require_refs", "substitute_changes"]

CHANGE_COLUMNS = ("reference", "old_value", "new_value", "stock_part_id", "stage", "role")
TRANSISTOR_ROLE = "transistor"


@dataclass(frozen=True)
class Change:
    """One changed position of the board.

    Attributes
    ----------
    reference : str
        Designator(s) as ``[stage.refs]`` has them (``R3``, ``R22+R23`` for a series pair,
        ``R24|R25`` for a parallel one).
    old_value, new_value : str
        Resistances in the letter code (``4K7``; pairs ``2K2+1K``), a transistor by part id;
        ``absent`` for a role left out.
    part_id : str
        Stock part id(s) fitted (``+``/``|`` between a pair's), empty for a value not in stock.
    stage, role : str
        Where on the board; ``role`` is ``transistor`` for the transistor.
    """

    reference: str
    old_value: str
    new_value: str
    part_id: str
    stage: str
    role: str

    @property
    def designators(self) -> list[str]:
        """The single designators of ``reference``."""
        return [d for d in re.split(r"[+|]", self.reference) if d]

    @property
    def is_transistor(self) -> bool:
        return self.role == TRANSISTOR_ROLE

    def row(self) -> list[str]:
        return spreadsheet_row([self.reference, self.old_value, self.new_value, self.part_id,
                                self.stage, self.role])


def require_refs(job: Job, option: str) -> None:
    """InputError unless every stage names its parts' designators ([stage.refs])."""
    for st in job.stages:
        if not st.refs:
            raise InputError(f"stage '{st.name}' has no [stage.refs]; {option} needs the "
                             "reference designators of a board read with `stockbias board "
                             "from-netlist`", file=job.path, column=option)


def _resolved_text(p: ResolvedResistor | None) -> str:
    if p is None:
        return "absent"
    if p.arrangement == "single" or len(p.parts) < 2:
        return format_resistance_code(p.value)
    sep = "+" if p.arrangement == "series" else "|"
    return sep.join(format_resistance_code(x.value_ohm) for x in p.parts)


def _part_ids(p: ResolvedResistor | None) -> str:
    if p is None:
        return ""
    sep = "|" if p.arrangement == "parallel" else "+"
    return sep.join(x.part_id for x in p.parts if x.part_id)


def _ref(job: Job, stage: str, role: str) -> str:
    st = next(s for s in job.stages if s.name == stage)
    return st.refs.get(role, "")


def consolidate_changes(job: Job, result: ConsolidateResult, inventory: Inventory
                        ) -> list[Change]:
    """The rows of a consolidation's best board (none when nothing was found)."""
    from ..assign import resolve_resistor

    if result.after is None:
        return []
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    out = []
    for s in result.after.stages:
        st = next(x for x in job.stages if x.name == s.name)
        for role, new in s.changed.items():
            old_text = st.values.get(role)
            old = None if old_text is None else resolve_resistor(
                role, old_text, inventory, job.build.default_tolerance_pct, "stage.values",
                ambient)
            value = new.get("value_ohm")
            out.append(Change(_ref(job, s.name, role), _resolved_text(old),
                              "absent" if value is None else format_resistance_code(value),
                              new.get("part_id") or "", s.name, role))
    return out


def substitute_changes(job: Job, result: SubstituteResult) -> list[Change] | None:
    """The rows of the first-ranked other transistor that works (drop-in or with rework);
    None when no other transistor works."""
    best = next((c for c in result.candidates
                 if c.fixed and c.transistor.part_id != result.current.part_id), None)
    if best is None:
        return None
    out = [Change(_ref(job, result.stage, TRANSISTOR_ROLE), result.current.part_id,
                  best.transistor.part_id, best.transistor.part_id, result.stage,
                  TRANSISTOR_ROLE)]
    for role, new in best.changes.items():
        out.append(Change(_ref(job, result.stage, role), _resolved_text(result.values.get(role)),
                          _resolved_text(new), _part_ids(new), result.stage, role))
    return out


def changes_csv(changes: Iterable[Change]) -> str:
    """The change list as CSV (header :data:`CHANGE_COLUMNS`, RFC 4180 CRLF rows)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(CHANGE_COLUMNS)
    for c in changes:
        writer.writerow(c.row())
    return buf.getvalue()


def changes_dicts(changes: Iterable[Change]) -> list[dict[str, Any]]:
    """The rows as JSON objects (keys :data:`CHANGE_COLUMNS`)."""
    return [dict(zip(CHANGE_COLUMNS, (c.reference, c.old_value, c.new_value, c.part_id,
                                      c.stage, c.role), strict=True)) for c in changes]
