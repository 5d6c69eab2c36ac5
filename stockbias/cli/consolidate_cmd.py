"""`stockbias consolidate BOARD --inventory FILE`: fewer resistor lines, every stage in spec."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from ..errors import InputError
from . import changes_opts
from .changes_opts import ChangesOpt, SchematicOpt, SchematicOutOpt
from .common import (
    BoardArg,
    ClusterOpt,
    ForceOpt,
    InventoryOpt,
    JsonOpt,
    WorkersOpt,
    load,
    search_progress,
)

if TYPE_CHECKING:  # loaded by the command when it runs
    from ..outputs import OutputSet


def consolidate(
    board_file: BoardArg,
    inventory: InventoryOpt,
    keep: Annotated[list[str] | None, typer.Option(
        "--keep", "-k", metavar="ROLE@STAGE",
        help="ROLE@STAGE[,...]: parts that must stay as they are. "
        "Repeatable.")] = None,
    objectives: Annotated[str | None, typer.Option(
        "--objectives", metavar="NAMES", help="Lexicographic order, comma-separated (default "
        "bom_lines,changes,cost; distinct_values and part_count may be named).")] = None,
    time_limit: Annotated[float | None, typer.Option(
        "--time-limit", metavar="SECONDS", min=0.1, max=86400.0,
        help="Seconds for the whole search (default: the board's time_limit_s).")] = None,
    keep_purpose: Annotated[str | None, typer.Option(
        "--keep-purpose", metavar="NAME=PERCENT",
        help="NAME=PERCENT[,...] for every stage, NAME one of gain (± % of "
        "today's nominal gain), rin (≥ % of today's input resistance), swing (≥ % of today's "
        "worst-case swing), current (≤ % of today's supply current); NAME=off drops one. "
        "Default gain=10,rin=80,swing=90,current=125, or the board's [stage.keep_purpose].")
    ] = None,
    no_keep_purpose: Annotated[bool, typer.Option(
        "--no-keep-purpose", help="Hold no stage's purpose, only its worst-case targets.")
    ] = False,
    json_out: JsonOpt = False,
    report: Annotated[Path | None, typer.Option(
        "--report", dir_okay=False, help="Write a self-contained HTML report here.")] = None,
    changes: ChangesOpt = None,
    schematic: SchematicOpt = None,
    schematic_out: SchematicOutOpt = None,
    force: ForceOpt = False,
    workers: WorkersOpt = 0,
    cluster: ClusterOpt = None,
) -> None:
    """Merge a board's resistor values onto fewer stock lines, every stage still meeting its
    worst-case targets and keeping its purpose (gain, input resistance, swing, supply
    current) within the stated tolerances of today's."""
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..search.consolidate import consolidate as run
    from ..search.consolidate import parse_keep
    from ..search.keep_purpose import parse_keep_purpose

    outs = OutputSet({"the board file": board_file, "the stock file (--inventory)": inventory,
                      "the schematic (--schematic)": schematic}, force=force)
    outs.file("--report", report)
    changes_opts.declare(outs, changes, schematic, schematic_out)
    with outs:
        job, inv = load(board_file, inventory)
        assert inv is not None
        changes_opts.check_board(job, changes, schematic)
        order = None
        if objectives is not None:
            order = tuple(o.strip() for o in objectives.split(",") if o.strip())
            if not order:
                raise InputError("name at least one objective", column="--objectives",
                                 text=objectives)
        kept = parse_keep(keep, job)
        tolerances = parse_keep_purpose(keep_purpose)
        if no_keep_purpose and tolerances:
            raise InputError("--keep-purpose and --no-keep-purpose contradict each other",
                             column="--no-keep-purpose", text=keep_purpose)
        to_yield = any(s.target.yield_min is not None for s in job.stages)
        with search_progress(json_out, "consolidating") as progress:
            if to_yield:   # the stages with yield_min are judged by Monte Carlo
                from .yield_design import run_yield_consolidate

                result = run_yield_consolidate(
                    job, inv, keep=kept, objectives=order, time_limit=time_limit,
                    keep_purpose=tolerances, purpose=not no_keep_purpose, workers=workers,
                    cluster=cluster, progress=progress)
            else:
                result = run(job, inv, keep=kept, objectives=order, time_limit_s=time_limit,
                             progress=progress, keep_purpose=tolerances,
                             purpose=not no_keep_purpose)
        if report is not None:
            _stage_report(outs, board_file, job, inv, result)
        rows, notes = [], []
        if result.after is not None and (changes or schematic):
            from ..kicad.changes import consolidate_changes

            rows = consolidate_changes(job, result, inv)
            notes = changes_opts.write(outs, rows, changes, schematic)
        written = outs.commit()
    if json_out:
        payload = result.to_dict()
        payload["board"] = str(board_file)
        payload["inventory"] = str(inventory)
        typer.echo(dumps(payload))
    elif to_yield:
        from ..render.yield_board import render_yield_board

        render_yield_board(make_console(), job, result)
    else:
        from ..render.board_table import render_consolidate

        render_consolidate(make_console(), job, result)
    if "--report" in written:
        make_console(stderr=json_out).print(f"Report written: {written['--report'][0]}",
                                            markup=False)
    changes_opts.report(written, rows, notes, json_out)
    if result.after is None:
        raise typer.Exit(1)


def _stage_report(outs: OutputSet, board_file: Path, job, inv, result) -> None:
    """The HTML report of a consolidation, staged in ``outs``."""
    from ..render.report import render_report

    checks = [] if result.after is None else [
        (f"Stage {s.name} after ({', '.join(s.changed) or 'unchanged'})", s.check)
        for s in result.after.stages]
    with outs.writing("--report") as tmp:
        render_report(tmp, title=f"Consolidation of {board_file.name}", job=job,
                      inventory=inv, checks=checks, consolidation=result,
                      command="stockbias consolidate " + " ".join(sys.argv[2:]))
