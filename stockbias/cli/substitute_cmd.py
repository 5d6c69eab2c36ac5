"""`stockbias substitute JOB`: which stock transistors can take this stage, with what rework."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from . import changes_opts
from .changes_opts import ChangesOpt, SchematicOpt, SchematicOutOpt
from .common import (
    ClusterOpt,
    ForceOpt,
    InventoryOpt,
    JobArg,
    JobSamplesOpt,
    JsonOpt,
    SeedOpt,
    WorkersOpt,
    load,
    search_progress,
)


def substitute(
    job_file: JobArg,
    inventory: InventoryOpt,
    values: Annotated[list[str] | None, typer.Option(
        "--values", "-v", metavar="ROLE=VALUE",
        help="The stage's parts today: ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a "
        "parallel pair A|B. Repeatable. Default: the stage's [stage.values].")] = None,
    transistor: Annotated[str | None, typer.Option(
        "--transistor", "-t", metavar="PART_ID",
        help="Stock part id of the transistor specified today. Default: the stage's "
        "transistor.")] = None,
    stage: Annotated[str | None, typer.Option(
        "--stage", metavar="NAME",
        help="The stage of a board file (needed when it has several): its own topology, "
        "target, limits and fitted parts.")] = None,
    json_out: JsonOpt = False,
    max_changes: Annotated[int | None, typer.Option(
        "--max-changes", metavar="N",
        min=0, max=8, help="Most resistors a rework may change.")] = None,
    time_limit: Annotated[float | None, typer.Option(
        "--time-limit", metavar="SECONDS",
        min=0.1, max=86400.0, help="Seconds for the rework searches.")] = None,
    samples: JobSamplesOpt = None,
    seed: SeedOpt = 0,
    workers: WorkersOpt = 0,
    cluster: ClusterOpt = None,
    keep_purpose: Annotated[str | None, typer.Option(
        "--keep-purpose", metavar="NAME=PERCENT",
        help="NAME=PERCENT[,...], NAME one of gain (± % of today's nominal "
        "gain), rin (≥ % of today's input resistance), swing (≥ % of today's worst-case "
        "swing), current (≤ % of today's supply current); NAME=off drops one. Default "
        "gain=10,rin=80,swing=90,current=125, or the job's [keep_purpose].")] = None,
    no_keep_purpose: Annotated[bool, typer.Option(
        "--no-keep-purpose", help="Hold only the job's limits, not the stage's purpose.")
    ] = False,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here.")] = None,
    changes: ChangesOpt = None,
    schematic: SchematicOpt = None,
    schematic_out: SchematicOutOpt = None,
    force: ForceOpt = False,
) -> None:
    """Judge every stock transistor for an existing stage: drop-in, least rework, or ruled out."""
    from ..assign import parse_assignments
    from ..errors import InputError
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..search.keep_purpose import parse_keep_purpose
    from ..search.substitute import substitute as run
    from ..selection import fitted_parts, pick_stage

    outs = OutputSet({"the job file": job_file, "the stock file (--inventory)": inventory,
                      "the schematic (--schematic)": schematic}, force=force)
    outs.file("--report", report)
    changes_opts.declare(outs, changes, schematic, schematic_out)
    with outs:
        job, inv = load(job_file, inventory)
        assert inv is not None
        job = pick_stage(job, stage, "substitute in")
        changes_opts.check_board(job, changes, schematic)
        st = job.stage
        if not values and st.values:
            fitted_parts(job, st, inv)  # a problem with the file's parts names its key
        assignment = parse_assignments(values) if values else dict(st.values)
        if not assignment:
            raise InputError("give the stage's parts with --values ROLE=VALUE,... (or "
                             "[stage.values] in the job file)", column="--values")
        transistor = transistor or st.transistor
        if transistor is None:
            raise InputError("give the transistor specified today with --transistor PART_ID "
                             "(or transistor = \"PART_ID\" in the stage)", column="--transistor")
        tolerances = parse_keep_purpose(keep_purpose)
        if no_keep_purpose and tolerances:
            raise InputError("--keep-purpose and --no-keep-purpose contradict each other",
                             column="--no-keep-purpose", text=keep_purpose)
        result = _run(run, job, assignment, transistor, inv, json_out, workers, cluster,
                      max_changes=max_changes, time_limit_s=time_limit, samples=samples,
                      seed=seed, keep_purpose=tolerances, purpose=not no_keep_purpose)
        if report is not None:
            from ..render.report import render_report

            checks = [(f"{c.transistor.part_id}: "
                       + ("drop-in" if c.drop_in else "with the least rework"), c.check)
                      for c in result.candidates if c.check is not None and c.fixed]
            with outs.writing("--report") as tmp:
                render_report(tmp, title=f"Substitutes for {transistor} in stage "
                              f"'{result.stage}'", job=job, inventory=inv, checks=checks,
                              substitution=result,
                              command="stockbias substitute " + " ".join(sys.argv[2:]))
        rows, notes = [], []
        if changes or schematic:  # the first-ranked other transistor that works
            from ..kicad.changes import substitute_changes

            found = substitute_changes(job, result)
            if found is not None:
                rows = found
                notes = changes_opts.write(outs, rows, changes, schematic)
        written = outs.commit()
    if json_out:
        typer.echo(dumps(result.to_dict()))
    else:
        from ..render.substitute_table import render_substitute

        render_substitute(make_console(), job, result)
    if "--report" in written:
        make_console(stderr=json_out).print(f"Report written: {written['--report'][0]}",
                                            markup=False)
    changes_opts.report(written, rows, notes, json_out)
    if not any(c.fixed for c in result.candidates):
        raise typer.Exit(1)


def _run(run, job, assignment, transistor, inv, json_out: bool, workers: int,
         cluster: str | None, **options):
    """The substitution; a yield target's Monte Carlo on the executor the options ask for,
    with a progress bar naming the transistor, the candidates and the boards."""
    if job.stage.target.yield_min is None:
        return run(job, assignment, transistor, inv, **options)
    from ..executor import InProcess, make_executor

    # candidates are short runs: local workers only pay off when asked for
    executor = make_executor(workers or None, cluster) if (cluster or workers > 1) \
        else InProcess()
    try:
        with search_progress(json_out, "yield substitute") as progress:
            return run(job, assignment, transistor, inv, executor=executor, progress=progress,
                       **options)
    finally:
        close = getattr(executor, "close", None)
        if close is not None:
            close()
