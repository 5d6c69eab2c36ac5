"""Options and loaders the commands share."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..job import Job, load_job
from ..parts import Inventory
from ..stock_io import read_inventory

JobArg = Annotated[Path, typer.Argument(exists=True, dir_okay=False, readable=True,
                                        help="The job (TOML) file.")]
InventoryOpt = Annotated[Path, typer.Option("--inventory", "-i", exists=True, dir_okay=False,
                                            readable=True, help="The stock CSV file.")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print only a JSON object on stdout.")]
ValuesOpt = Annotated[list[str], typer.Option(
    "--values", "-v", help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel pair "
    "A|B. Repeatable.")]
TransistorOpt = Annotated[str, typer.Option("--transistor", "-t",
                                            help="Stock part id of the transistor.")]
SeedOpt = Annotated[int, typer.Option("--seed", help="Monte Carlo seed.")]


def load(job_path: Path, inventory_path: Path | None) -> tuple[Job, Inventory | None]:
    """Load the job and the stock file (errors become one-line messages in cli.app)."""
    job = load_job(job_path)
    inv = read_inventory(inventory_path) if inventory_path is not None else None
    return job, inv
