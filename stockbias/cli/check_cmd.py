"""`stockbias check JOB`: worst-case analysis of one stage with given parts."""

from __future__ import annotations

from typing import Annotated

import typer

from ..analysis.check import analyze
from ..assign import parse_assignments
from ..render.console import make_console
from ..render.json_out import dumps
from .common import InventoryOpt, JobArg, JsonOpt, load


def check(
    job_file: JobArg,
    inventory: InventoryOpt,
    values: Annotated[list[str], typer.Option(
        "--values", "-v", help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel "
        "pair A|B. Repeatable.")],
    transistor: Annotated[str, typer.Option("--transistor", "-t",
                                            help="Stock part id of the transistor.")],
    json_out: JsonOpt = False,
    samples: Annotated[int, typer.Option("--samples", min=0, max=10_000_000,
                                         help="Monte Carlo boards (0: none).")] = 20000,
    seed: Annotated[int, typer.Option("--seed", help="Monte Carlo seed.")] = 0,
    tolerance: Annotated[float | None, typer.Option(
        "--tolerance", min=0.01, max=50.0,
        help="Tolerance, %, for values that are not stock parts (default: the job's).")] = None,
    stage: Annotated[str | None, typer.Option("--stage",
                                              help="Stage name in a board file.")] = None,
) -> None:
    """Analyse a stage with given parts at every worst-case corner; exit 1 if a limit fails."""
    job, inv = load(job_file, inventory)
    assignment = parse_assignments(values)
    result = analyze(job, assignment, transistor, inv, samples=samples, seed=seed,
                     tolerance_pct=tolerance, stage_name=stage)
    if json_out:
        typer.echo(dumps(result.to_dict()))
    else:
        from ..render.check_table import render_check

        render_check(make_console(), job, result)
    if not result.ok:
        raise typer.Exit(1)
