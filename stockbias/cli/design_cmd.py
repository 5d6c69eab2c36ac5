"""`stockbias design JOB --inventory FILE`: ranked designs from the stock."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..errors import InputError
from ..render.console import make_console
from ..render.json_out import dumps
from .common import InventoryOpt, JobArg, JsonOpt, load, search_progress


def design(
    job_file: JobArg,
    inventory: InventoryOpt,
    top: Annotated[int | None, typer.Option("--top", min=1, max=1000,
                                            help="How many designs (default: the job's).")
                   ] = None,
    time_limit: Annotated[float | None, typer.Option(
        "--time-limit", min=0.1, max=86400.0,
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
) -> None:
    """Search the stock for the best designs that meet every worst-case limit."""
    from ..search.design import design as run_design

    job, inv = load(job_file, inventory)
    assert inv is not None
    with search_progress(json_out, "searching the shelf") as progress:
        result = run_design(job, inv, top=top, time_limit_s=time_limit, progress=progress)
    payload = result.to_dict()
    payload["job"] = str(job_file)
    payload["inventory"] = str(inventory)
    text = dumps(payload)
    if save is not None:
        try:
            save.write_text(text + "\n", encoding="utf-8")
        except OSError as exc:
            raise InputError(f"cannot write the result: {exc.strerror}", file=str(save)) from None
    if json_out:
        typer.echo(text)
    elif job.is_board:
        from ..render.board_table import render_board

        render_board(make_console(), job, result)
    else:
        from ..render.design_table import render_design

        render_design(make_console(), job, result)
    note = make_console(stderr=json_out)
    if job.is_board:
        _board_outputs(job_file, job, inv, result, payload, plot, report, note)
        if not result.designs:
            raise typer.Exit(1)
        return
    designs = payload.get("designs") or []
    if plot is not None and designs:
        from ..render.plots import write_design_plots

        written = write_design_plots(designs, plot)
        note.print("Plots written: " + ", ".join(str(p) for p in written))
    if report is not None:
        import sys

        from ..render.report import render_report

        notes = [f"Status: {payload.get('status')}"]
        if payload.get("explanation"):
            notes.append(f"Explanation: {payload['explanation']}")
        checks = [(f"Rank {d.rank}: {d.topology}, {d.transistor.part_id}", d.check)
                  for d in result.designs[:3]]
        render_report(report, title=f"Designs for {job_file.name}", job=job, inventory=inv,
                      checks=checks, designs=designs, notes=notes,
                      command="stockbias design " + " ".join(sys.argv[2:]))
        note.print(f"Report written: {report}")
    if not result.designs:
        raise typer.Exit(1)


def _board_outputs(job_file: Path, job, inv, result, payload, plot, report, note) -> None:
    """--plot and --report for a board result."""
    if plot is not None:
        note.print("--plot draws single-stage results; for a board, check each stage with "
                   "`stockbias check BOARD --stage NAME --plot DIR`")
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
        render_report(report, title=f"Board design for {job_file.name}", job=job,
                      inventory=inv, checks=checks, notes=notes,
                      command="stockbias design " + " ".join(sys.argv[2:]))
        note.print(f"Report written: {report}")
