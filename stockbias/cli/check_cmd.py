"""`stockbias check JOB`: worst-case analysis of one stage with given parts."""

from __future__ import annotations

import shlex
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any

import typer

from ..errors import InputError
from .common import (
    ClusterOpt,
    ForceOpt,
    InventoryOpt,
    JobArg,
    JsonOpt,
    SeedOpt,
    WorkersOpt,
    executor_for,
    load,
    plot_files,
    sample_progress,
)

#: check's Monte Carlo streams counts and histograms, so memory does not grow with --samples
MAX_CHECK_SAMPLES = 1_000_000_000

if TYPE_CHECKING:  # loaded by the command when it runs (the analysis brings in scipy)
    from ..analysis.check import CheckResult
    from ..job import Job
    from ..outputs import OutputSet
    from ..parts import Inventory


def analyze(*args: Any, **kwargs: Any) -> CheckResult:
    """:func:`stockbias.analysis.check.analyze`, loaded on the first call (it brings scipy)."""
    from ..analysis.check import analyze as run

    return run(*args, **kwargs)


def check(
    job_file: JobArg,
    inventory: InventoryOpt,
    values: Annotated[list[str] | None, typer.Option(
        "--values", "-v", metavar="ROLE=VALUE",
        help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel "
        "pair A|B. Repeatable. Default: the stage's [stage.values].")] = None,
    transistor: Annotated[str | None, typer.Option(
        "--transistor", "-t", metavar="PART_ID",
        help="Stock part id of the transistor. Default: the stage's "
        "transistor.")] = None,
    json_out: JsonOpt = False,
    samples: Annotated[int, typer.Option(
        "--samples", metavar="N", min=0, max=MAX_CHECK_SAMPLES,
        help="Monte Carlo boards (0: none; up to 10^9, streamed in bounded memory).")]
    = 20000,
    seed: SeedOpt = 0,
    workers: WorkersOpt = 0,
    cluster: ClusterOpt = None,
    tolerance: Annotated[float | None, typer.Option(
        "--tolerance", metavar="PERCENT", min=0.01, max=50.0,
        help="Tolerance, %, for values that are not stock parts (default: the job's).")] = None,
    stage: Annotated[str | None, typer.Option("--stage", metavar="NAME",
                                              help="Stage name in a board file.")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", file_okay=False, help="Write the plots (PNG and SVG) into this folder.")]
    = None,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here.")] = None,
    pick_list: Annotated[Path | None, typer.Option(
        "--pick-list", dir_okay=False, help="Write the pick list for the job's build "
        "quantity here (CSV).")] = None,
    force: ForceOpt = False,
) -> None:
    """Analyse a stage with given parts at every worst-case corner; exit 1 if a limit fails."""
    from ..assign import parse_assignments
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..render.plots import CHECK_PLOTS

    outs = OutputSet({"the job file": job_file, "the stock file (--inventory)": inventory},
                     force=force)
    outs.folder("--plot", plot, plot_files(CHECK_PLOTS))
    outs.file("--report", report)
    outs.file("--pick-list", pick_list)
    with outs:
        job, inv = load(job_file, inventory)
        st = _stage(job, stage)
        assignment = parse_assignments(values) if values else dict(st.values)
        if not assignment:
            raise InputError("give the parts with --values ROLE=VALUE,... (or [stage.values] "
                             "in the job file)", column="--values")
        if transistor is None:
            transistor = st.transistor
        if transistor is None:
            raise InputError("give the transistor with --transistor PART_ID (or transistor = "
                             "\"PART_ID\" in the stage)", column="--transistor")
        executor = executor_for(samples, workers, cluster)
        try:
            with sample_progress(json_out, samples) as progress:
                result = analyze(job, assignment, transistor, inv, samples=samples, seed=seed,
                                 tolerance_pct=tolerance, stage_name=stage, executor=executor,
                                 progress=progress)
        finally:
            close = getattr(executor, "close", None)
            if close is not None:
                close()
        _stage_outputs(outs, job, inv, result, plot, report, pick_list)
        written = outs.commit()
    if json_out:
        typer.echo(dumps(result.to_dict()))
    else:
        from ..render.check_table import render_check

        render_check(make_console(), job, result)
    _written_notes(job, result, written, json_out)
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


def _stage_outputs(outs: OutputSet, job: Job, inv: Inventory | None, result: CheckResult,
                   plot: Path | None, report: Path | None, pick_list: Path | None) -> None:
    """Plots, report and pick list, staged in ``outs`` (placed together by its commit)."""
    if plot is not None:
        from ..render.plots import write_check_plots

        with outs.writing("--plot") as folder:
            write_check_plots(result, job, folder)
    if report is not None:
        from ..render.report import render_report

        with outs.writing("--report") as tmp:
            render_report(tmp, title=f"Check of stage '{result.stage}'", job=job,
                          inventory=inv, checks=[(f"Check: {result.topology} with "
                                                  f"{result.transistor.part_id}", result)],
                          command=shlex.join(["stockbias", *sys.argv[1:]]))
    if pick_list is not None:
        from ..render.pick_list import write_pick_list

        with outs.writing("--pick-list") as tmp:
            write_pick_list(tmp, _needs(job, result))


def _needs(job: Job, result: CheckResult):
    from ..selection import bench_needs

    return bench_needs(result.parts, result.transistor, job.build.quantity)


def _written_notes(job: Job, result: CheckResult, written: dict[str, list[Path]],
                   json_out: bool) -> None:
    """Name the files written (on stderr with --json)."""
    from ..render.console import make_console

    console = make_console(stderr=json_out)
    if "--plot" in written:
        console.print("Plots written: " + ", ".join(str(p) for p in written["--plot"]),
                      markup=False)
    if "--report" in written:
        console.print(f"Report written: {written['--report'][0]}", markup=False)
    if "--pick-list" in written:
        if not json_out:
            from ..render.pick_list import render_pick_list

            render_pick_list(console, _needs(job, result), job.build.quantity)
        console.print(f"Pick list written: {written['--pick-list'][0]}", markup=False)
