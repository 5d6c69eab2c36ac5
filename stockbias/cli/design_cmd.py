"""`stockbias design JOB --inventory FILE`: ranked designs from the stock."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from .common import (
    ClusterOpt,
    ForceOpt,
    InventoryOpt,
    JobArg,
    JsonOpt,
    WorkersOpt,
    load,
    plot_files,
    search_progress,
)

if TYPE_CHECKING:  # loaded by the command when it runs
    from ..outputs import OutputSet


def design(
    job_file: JobArg,
    inventory: InventoryOpt,
    top: Annotated[int | None, typer.Option("--top", metavar="N", min=1, max=1000,
                                            help="How many designs (default: the job's).")
                   ] = None,
    time_limit: Annotated[float | None, typer.Option(
        "--time-limit", metavar="SECONDS", min=0.1, max=86400.0,
        help="Seconds for the whole search (default: the job's).")] = None,
    json_out: JsonOpt = False,
    save: Annotated[Path | None, typer.Option("--save", dir_okay=False,
                                              help="Also write the JSON result to FILE.")
                    ] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", file_okay=False, help="Write the cost against margin plot (PNG, SVG) here.")
                    ] = None,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here.")] = None,
    force: ForceOpt = False,
    variants: Annotated[bool, typer.Option(
        "--variants", help="List every RC value that works with each network, each "
        "re-verified in full (--top counts networks either way).")] = False,
    workers: WorkersOpt = 0,
    cluster: ClusterOpt = None,
) -> None:
    """Search the stock for the best designs that meet every worst-case limit."""
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..render.plots import DESIGN_PLOTS
    from ..search.defaults import with_design_defaults
    from ..search.design import design as run_design
    from ..selection import input_record

    outs = OutputSet({"the job file": job_file, "the stock file (--inventory)": inventory},
                     force=force)
    outs.file("--save", save)
    outs.folder("--plot", plot, plot_files(DESIGN_PLOTS))
    outs.file("--report", report)
    with outs:
        job, inv = load(job_file, inventory)
        assert inv is not None
        job, assumed = with_design_defaults(job)
        if not job.is_board and job.stage.target.yield_min is not None:
            from .yield_design import run_yield_design

            run_yield_design(outs, job, inv, job_file, inventory, top=top,
                             time_limit=time_limit, json_out=json_out, save=save,
                             workers=workers, cluster=cluster, assumed=assumed)
            return
        if job.is_board and any(s.target.yield_min is not None for s in job.stages):
            from .yield_design import run_yield_board

            run_yield_board(outs, job, inv, job_file, inventory, top=top,
                            time_limit=time_limit, json_out=json_out, save=save,
                            report=report, plot=plot, workers=workers, cluster=cluster,
                            assumed=assumed)
            return
        with search_progress(json_out, "searching the shelf") as progress:
            result = run_design(job, inv, top=top, time_limit_s=time_limit, progress=progress,
                                verify_variants=variants)
        result.assumptions[:0] = [a for a in assumed if a not in result.assumptions]
        payload = result.to_dict()
        payload["job"] = str(job_file)
        payload["inventory"] = str(inventory)
        payload["inputs"] = {"job": input_record(job_file),
                             "inventory": input_record(inventory)}
        text = dumps(payload)
        if save is not None:
            outs.write_text("--save", text + "\n")
        if job.is_board:
            _board_outputs(outs, job_file, job, inv, result, payload, report)
        else:
            _stage_outputs(outs, job_file, job, inv, result, payload, plot, report)
        written = outs.commit()
    if json_out:
        typer.echo(text)
    elif job.is_board:
        from ..render.board_table import render_board

        render_board(make_console(), job, result)
    else:
        from ..render.design_table import render_design

        render_design(make_console(), job, result, show_variants=variants)
    note = make_console(stderr=json_out)
    if job.is_board and plot is not None:
        note.print("--plot draws single-stage results; for a board, check each stage with "
                   "`stockbias check BOARD --stage NAME --plot DIR`")
    if "--save" in written:
        note.print(f"Result saved: {written['--save'][0]}", markup=False)
    if "--plot" in written:
        note.print("Plots written: " + ", ".join(str(p) for p in written["--plot"]), markup=False)
    if "--report" in written:
        note.print(f"Report written: {written['--report'][0]}", markup=False)
    if not result.designs:
        raise typer.Exit(1)


def _stage_outputs(outs: OutputSet, job_file: Path, job, inv, result, payload,
                   plot: Path | None, report: Path | None) -> None:
    """--plot and --report for a single-stage result, staged in ``outs``."""
    designs = payload.get("designs") or []
    if plot is not None and designs:
        from ..render.plots import write_design_plots

        with outs.writing("--plot") as folder:
            write_design_plots(designs, folder)
    if report is not None:
        import sys

        from ..render.report import render_report

        notes = [f"Status: {payload.get('status')}"]
        if payload.get("explanation"):
            notes.append(f"Explanation: {payload['explanation']}")
        checks = [(f"Rank {d.rank}: {d.topology}, {d.transistor.part_id}", d.check)
                  for d in result.designs[:3]]
        with outs.writing("--report") as tmp:
            render_report(tmp, title=f"Designs for {job_file.name}", job=job, inventory=inv,
                          checks=checks, designs=designs, notes=notes,
                          assumptions=result.assumptions,
                          command="stockbias design " + " ".join(sys.argv[2:]))


def _board_outputs(outs: OutputSet, job_file: Path, job, inv, result, payload,
                   report: Path | None) -> None:
    """--report for a board result, staged in ``outs``."""
    if report is not None:
        import sys

        from ..render.report import render_report

        notes = [f"Status: {payload.get('status')}"]
        if payload.get("explanation"):
            notes.append(f"Explanation: {payload['explanation'].get('reason')}")
        checks = []
        if result.designs:
            best = result.designs[0]
            notes.append(f"Rank 1: cost {best.cost:g} per board, {best.part_count} parts, "
                         f"{best.distinct_values} values, {best.bom_lines} BOM lines")
            checks = [(f"Stage {s.name}: {s.topology}, {s.transistor.part_id}", s.check)
                      for s in best.stages]
        with outs.writing("--report") as tmp:
            render_report(tmp, title=f"Board design for {job_file.name}", job=job,
                          inventory=inv, checks=checks, notes=notes,
                          assumptions=result.assumptions,
                          command="stockbias design " + " ".join(sys.argv[2:]))
