"""`stockbias export JOB`: the chosen stage as a SPICE netlist (and its pick list)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..job import Job
from ..parts import Inventory
from ..selection import Selection, choose

__all__ = ["FromOpt", "RankOpt", "TransistorOpt", "ValuesOpt", "export", "select"]

RankOpt = Annotated[int | None, typer.Option(
    "--rank", min=1, help="Design N of the search (or of the --from file; default 1).")]
FromOpt = Annotated[Path | None, typer.Option(
    "--from", exists=True, dir_okay=False, readable=True,
    help="A result saved by design --save (JSON).")]
ValuesOpt = Annotated[list[str] | None, typer.Option(
    "--values", "-v", help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel pair "
    "A|B. Repeatable. Goes with --transistor.")]
TransistorOpt = Annotated[str | None, typer.Option(
    "--transistor", "-t", help="Stock part id of the transistor (with --values).")]


def select(job: Job, inventory: Inventory, rank: int | None, from_file: Path | None,
           values: list[str] | None, transistor: str | None) -> Selection:
    """The design the command acts on (exactly one of --rank, --from, --values)."""
    return choose(job, inventory, rank=rank, from_file=from_file, values=values,
                  transistor=transistor)


def export() -> None:  # replaced below once the netlist writer exists
    raise NotImplementedError
