"""`stockbias check JOB`: worst-case analysis of one stage with given parts, or of every
stage of a board file with the parts it is fitted with."""

from __future__ import annotations

import shlex
import sys
from collections.abc import Callable
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
    SamplesOpt,
    SeedOpt,
    WorkersOpt,
    executor_for,
    load,
    plot_files,
    sample_progress,
)

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
        "pair A|B. Repeatable. Default: the stage's [stage.values]. One stage's parts: "
        "on a board file it goes with --stage.")] = None,
    transistor: Annotated[str | None, typer.Option(
        "--transistor", "-t", metavar="PART_ID",
        help="Stock part id of the transistor. Default: the stage's "
        "transistor. On a board file it goes with --stage.")] = None,
    json_out: JsonOpt = False,
    samples: SamplesOpt = 20000,
    seed: SeedOpt = 0,
    workers: WorkersOpt = 0,
    cluster: ClusterOpt = None,
    tolerance: Annotated[float | None, typer.Option(
        "--tolerance", metavar="PERCENT", min=0.01, max=50.0,
        help="Tolerance, %, for values that are not stock parts (default: the job's).")] = None,
    stage: Annotated[str | None, typer.Option(
        "--stage", metavar="NAME",
        help="Check this stage of a board file alone, with every table. Without it a board "
        "file has every stage checked with its fitted parts: a verdict each and the "
        "board's.")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", file_okay=False, help="Write the plots (PNG and SVG) into this folder. "
        "One stage's plots: on a board file it goes with --stage.")]
    = None,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here (of every "
        "stage, for a board file without --stage).")] = None,
    pick_list: Annotated[Path | None, typer.Option(
        "--pick-list", dir_okay=False, help="Write the pick list for the job's build "
        "quantity here (CSV; every stage's parts together, for a board file without "
        "--stage).")] = None,
    force: ForceOpt = False,
) -> None:
    """Analyse a stage with given parts at every worst-case corner, or every stage of a
    board; exit 1 if a limit fails."""
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
        board = job.is_board and stage is None
        if board:
            _one_stage_options(job, values, transistor, plot)
        else:
            job = pick_stage(job, stage, "check")
        runs = samples * (len(job.stages) if board else 1)
        executor = executor_for(runs, workers, cluster)
        try:
            with sample_progress(json_out, runs) as progress:
                if board:
                    results = _check_board(job, inv, samples, seed, tolerance, executor,
                                           progress)
                else:
                    result = _check_stage(job, inv, values, transistor, samples, seed,
                                          tolerance, executor, progress)
        finally:
            close = getattr(executor, "close", None)
            if close is not None:
                close()
        if board:
            _board_outputs(outs, job, inv, results, report, pick_list)
            written = outs.commit()
            _show_board(job, inventory, results, written, json_out)
            if not all(r.ok for r in results):
                raise typer.Exit(1)
            return
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


def _check_stage(job: Job, inv: Inventory | None, values: list[str] | None,
                 transistor: str | None, samples: int, seed: int, tolerance: float | None,
                 executor: object, progress: Callable[[int], None] | None) -> CheckResult:
    """The one stage of ``job``: as fitted (its [stage.values] and transistor, a problem
    named at its key in the file), or with the parts given on the command line."""
    from ..assign import parse_assignments

    st = job.stage
    if not values and transistor is None and st.values and inv is not None:
        from ..analysis.check import analyze_stage
        from ..selection import fitted_parts

        q, parts = fitted_parts(job, st, inv, tolerance)
        return analyze_stage(job, st, parts, q, samples=samples, seed=seed,
                             executor=executor, progress=progress)
    assignment = parse_assignments(values) if values else dict(st.values)
    if not assignment:
        raise InputError("give the parts with --values ROLE=VALUE,... (or [stage.values] "
                         "in the job file)", column="--values")
    if transistor is None:
        transistor = st.transistor
    if transistor is None:
        raise InputError("give the transistor with --transistor PART_ID (or transistor = "
                         "\"PART_ID\" in the stage)", column="--transistor")
    return analyze(job, assignment, transistor, inv, samples=samples, seed=seed,
                   tolerance_pct=tolerance, executor=executor, progress=progress)


def pick_stage(job: Job, name: str | None, doing: str) -> Job:
    """:func:`stockbias.selection.pick_stage`, loaded on the first call."""
    from ..selection import pick_stage as run

    return run(job, name, doing)


def _one_stage_options(job: Job, values: list[str] | None, transistor: str | None,
                       plot: Path | None) -> None:
    """Options about one stage, given for a whole board: ask for --stage."""
    names = ", ".join(s.name for s in job.stages)
    for option, given in (("--values", values), ("--transistor", transistor),
                          ("--plot", plot)):
        if given:
            raise InputError(f"{option} is about one stage: name it with --stage NAME "
                             f"(stages: {names}); without --stage every stage is checked "
                             "with its fitted parts", file=job.path, column=option)


def _check_board(job: Job, inv: Inventory | None, samples: int, seed: int,
                 tolerance: float | None, executor: object,
                 progress: Callable[[int], None] | None) -> list[CheckResult]:
    """Every stage of a board with its fitted parts (``[stage.values]``, ``transistor``);
    ``progress`` counts the boards of every stage together."""
    from dataclasses import replace

    from ..analysis.check import analyze_stage
    from ..selection import fitted_parts

    if inv is None:  # pragma: no cover - --inventory is a required option
        raise InputError("check needs --inventory FILE", column="--inventory")
    fitted = [fitted_parts(job, st, inv, tolerance) for st in job.stages]  # errors first
    results = []
    for i, (st, (q, parts)) in enumerate(zip(job.stages, fitted, strict=True)):
        done = None if progress is None else (
            lambda n, base=i * samples: progress(base + n))
        results.append(analyze_stage(replace(job, stages=(st,)), st, parts, q,
                                     samples=samples, seed=seed, executor=executor,
                                     progress=done))
    return results


def _board_outputs(outs: OutputSet, job: Job, inv: Inventory | None,
                   results: list[CheckResult], report: Path | None,
                   pick_list: Path | None) -> None:
    """The board's report (every stage) and pick list (every stage's parts together)."""
    if report is not None:
        from ..render.report import render_report

        with outs.writing("--report") as tmp:
            render_report(tmp, title=f"Check of board {Path(job.path).name}", job=job,
                          inventory=inv, checks=[(f"Stage '{r.stage}': {r.topology} with "
                                                  f"{r.transistor.part_id}", r)
                                                 for r in results],
                          command=shlex.join(["stockbias", *sys.argv[1:]]))
    if pick_list is not None:
        from ..render.pick_list import write_pick_list

        with outs.writing("--pick-list") as tmp:
            write_pick_list(tmp, _board_needs(job, results))


def _board_needs(job: Job, results: list[CheckResult]):
    from ..selection import board_needs

    return board_needs([(r.stage, r.parts, r.transistor) for r in results], job.build.quantity)


def _show_board(job: Job, inventory: Path, results: list[CheckResult],
                written: dict[str, list[Path]], json_out: bool) -> None:
    """The board's verdicts (or its JSON) and the files written."""
    from ..render.board_check import board_check_payload, render_board_check
    from ..render.console import make_console
    from ..render.json_out import dumps

    if json_out:
        typer.echo(dumps(board_check_payload(job, results)))
    else:
        render_board_check(make_console(), job, results,
                           command=shlex.join(["stockbias", "check", job.path, "-i",
                                               str(inventory)]))
    console = make_console(stderr=json_out)
    if "--report" in written:
        console.print(f"Report written: {written['--report'][0]}", markup=False)
    if "--pick-list" in written:
        if not json_out:
            from ..render.pick_list import render_pick_list

            render_pick_list(console, _board_needs(job, results), job.build.quantity,
                             title=f"Pick list for {job.build.quantity} board(s), every "
                             "stage, by location")
        console.print(f"Pick list written: {written['--pick-list'][0]}", markup=False)


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
