"""`stockbias check JOB`: worst-case analysis of one stage with given parts."""

from __future__ import annotations

import shlex
import sys
from pathlib import Path
from typing import Annotated

import typer

from ..analysis.check import CheckResult, analyze
from ..assign import parse_assignments
from ..errors import InputError
from ..job import Job
from ..parts import Inventory
from ..render.console import make_console
from ..render.json_out import dumps
from .common import InventoryOpt, JobArg, JsonOpt, SeedOpt, load


def check(
    job_file: JobArg,
    inventory: InventoryOpt,
    values: Annotated[list[str] | None, typer.Option(
        "--values", "-v", help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel "
        "pair A|B. Repeatable. Default: the stage's [stage.values].")] = None,
    transistor: Annotated[str | None, typer.Option(
        "--transistor", "-t", help="Stock part id of the transistor. Default: the stage's "
        "transistor.")] = None,
    json_out: JsonOpt = False,
    samples: Annotated[int, typer.Option("--samples", min=0, max=10_000_000,
                                         help="Monte Carlo boards (0: none).")] = 20000,
    seed: SeedOpt = 0,
    tolerance: Annotated[float | None, typer.Option(
        "--tolerance", min=0.01, max=50.0,
        help="Tolerance, %, for values that are not stock parts (default: the job's).")] = None,
    stage: Annotated[str | None, typer.Option("--stage",
                                              help="Stage name in a board file.")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", file_okay=False, help="Write the plots (PNG and SVG) into this folder.")]
    = None,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here.")] = None,
    pick_list: Annotated[Path | None, typer.Option(
        "--pick-list", dir_okay=False, help="Write the pick list for the job's build "
        "quantity here (CSV).")] = None,
) -> None:
    """Analyse a stage with given parts at every worst-case corner; exit 1 if a limit fails."""
    job, inv = load(job_file, inventory)
    st = _stage(job, stage)
    assignment = parse_assignments(values) if values else dict(st.values)
    if not assignment:
        raise InputError("give the parts with --values ROLE=VALUE,... (or [stage.values] in "
                         "the job file)", column="--values")
    if transistor is None:
        transistor = st.transistor
    if transistor is None:
        raise InputError("give the transistor with --transistor PART_ID (or transistor = "
                         "\"PART_ID\" in the stage)", column="--transistor")
    result = analyze(job, assignment, transistor, inv, samples=samples, seed=seed,
                     tolerance_pct=tolerance, stage_name=stage)
    if json_out:
        typer.echo(dumps(result.to_dict()))
    else:
        from ..render.check_table import render_check

        render_check(make_console(), job, result)
    _bench_outputs(job, inv, result, plot, report, pick_list, json_out)
    if not result.ok:
        raise typer.Exit(1)


def _stage(job: Job, name: str | None):
    """The stage a check is about (the first unless --stage names one)."""
    if name is None:
        return job.stages[0]
    found = [s for s in job.stages if s.name == name]
    if not found:
        raise InputError(f"no stage named '{name}' in the job; stages: "
                         f"{', '.join(s.name for s in job.stages)}", column="--stage", text=name)
    return found[0]


def _bench_outputs(job: Job, inv: Inventory | None, result: CheckResult, plot: Path | None,
                   report: Path | None, pick_list: Path | None, json_out: bool) -> None:
    """Plots, report and pick list; the files written are named (on stderr with --json)."""
    console = make_console(stderr=json_out)
    if plot is not None:
        from ..render.plots import write_check_plots

        paths = write_check_plots(result, job, plot)
        console.print("Plots written: " + ", ".join(str(p) for p in paths))
    if report is not None:
        from ..render.report import render_report

        render_report(report, title=f"Check of stage '{result.stage}'", job=job, inventory=inv,
                      checks=[(f"Check: {result.topology} with {result.transistor.part_id}",
                               result)], command=shlex.join(["stockbias", *sys.argv[1:]]))
        console.print(f"Report written: {report}")
    if pick_list is not None:
        from ..render.pick_list import render_pick_list, write_pick_list
        from ..selection import bench_needs

        needs = bench_needs(result.parts, result.transistor, job.build.quantity)
        write_pick_list(pick_list, needs)
        if not json_out:
            render_pick_list(console, needs, job.build.quantity)
        console.print(f"Pick list written: {pick_list}")
