"""`stockbias stock ...`: look after the stock file."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from ..errors import InputError, StockFileError, UnmetError
from .curves_cmd import curves as _curves
from .export_cmd import AcceptChangedOpt, FromOpt, RankOpt, TransistorOpt, ValuesOpt

if TYPE_CHECKING:  # loaded by the command when it runs
    from ..job import Job
    from ..selection import Selection

app = typer.Typer(help="Check and look after a stock file.", no_args_is_help=True)
app.command("curves")(_curves)


@app.command("check")
def check(
    file: Annotated[Path, typer.Argument(exists=True, dir_okay=False, readable=True,
                                         metavar="STOCK_FILE", help="The stock CSV file.")],
    json_out: Annotated[bool, typer.Option("--json",
                                           help="Print only a JSON object on stdout.")] = False,
    rows: Annotated[bool, typer.Option(
        "--rows", help="Draw every row, however big the file (above 200 lines only the "
        "summary is drawn by default).")] = False,
) -> None:
    """Validate a stock file and summarise what is on the shelf."""
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..render.stock_table import ReadingProgress, render_stock_summary, stock_check_json
    from ..stock_io import read_inventory
    from ..stock_summary import summarise

    err = make_console(stderr=True)
    show_progress = not json_out and err.is_terminal
    try:
        with ReadingProgress(err, f"reading {file.name}") as progress:
            inv = read_inventory(file, progress=progress if show_progress else None)
    except StockFileError as exc:
        if json_out:
            typer.echo(dumps({"file": str(file), "valid": False, "parts": [],
                              "problems": [p.to_dict() for p in exc.problems]}))
        raise
    summary = summarise(inv)
    if json_out:
        payload = {"file": str(file), "valid": True,
                   "parts": [r.to_dict() for r in inv.resistors]
                   + [t.to_dict() for t in inv.transistors],
                   "problems": [],
                   "warnings": [{"line": w[0], "column": w[1], "text": w[2], "message": w[3]}
                                for w in inv.warnings],
                   "summary": summary.to_dict()}
        typer.echo(stock_check_json(payload))
        return
    render_stock_summary(make_console(), inv, summary, rows=True if rows else None)


@app.command("reserve")
def reserve(
    file: Annotated[Path, typer.Argument(exists=True, dir_okay=False, readable=True,
                                         writable=True, metavar="STOCK_FILE",
                                         help="The stock CSV file to change.")],
    job_file: Annotated[Path, typer.Option("--job", "-j", exists=True, dir_okay=False,
                                           readable=True, help="The job or board (TOML) file.")],
    rank: RankOpt = None,
    from_file: FromOpt = None,
    values: ValuesOpt = None,
    transistor: TransistorOpt = None,
    stage: Annotated[str | None, typer.Option(
        "--stage", metavar="NAME",
        help="Reserve for this stage of a board file alone (with --rank, --from or "
        "--values, or its fitted parts). Without it, a board file's every stage is reserved "
        "with the parts it is fitted with (its transistor and [stage.values]), all stages "
        "× the build quantity.")] = None,
    quantity: Annotated[int | None, typer.Option(
        "--quantity", "-q", metavar="N", min=1, help="Boards to build (default: the job's [build] "
        "quantity).")] = None,
    dry_run: Annotated[bool, typer.Option("--dry-run", help="Show what would be taken; "
                                          "write nothing.")] = False,
    json_out: Annotated[bool, typer.Option("--json",
                                           help="Print only a JSON object on stdout.")] = False,
    accept_changed: AcceptChangedOpt = False,
    force: Annotated[bool, typer.Option(
        "--force", help="Reserve even a design that fails the job (it is re-checked first; "
        "the failing limits are shown).")] = False,
) -> None:
    """Take the pieces for a build off the stock file (atomic, with a timestamped backup)."""
    from ..job import load_job
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..render.pick_list import render_reservation
    from ..selection import (
        bench_needs,
        board_needs,
        check_inputs,
        failing_summary,
        fitted_selection,
        pick_stage,
        resolve_selection,
        verify_selection,
    )
    from ..stock_io import read_inventory
    from ..stock_write import reserve_stock
    from .export_cmd import select

    job = load_job(job_file)
    boards = job.build.quantity if quantity is None else quantity
    inventory = read_inventory(file)
    whole_board = (job.is_board and stage is None and rank is None and from_file is None
                   and not values and not transistor)
    chosen: list[tuple[Job, Selection]]
    if whole_board:  # every stage as fitted, each with its own topology and limits
        chosen = [(replace(job, stages=(st,)), fitted_selection(job, st))
                  for st in job.stages]
    else:
        one = pick_stage(job, stage, "reserve for")
        chosen = [(one, select(one, inventory, rank, from_file, values, transistor, stage))]

    def takes(inv):  # run on the file as read under the lock
        resolved = [(sj.stage.name, *resolve_selection(sj, sel, inv)) for sj, sel in chosen]
        needs = (board_needs(resolved, boards) if whole_board
                 else bench_needs(resolved[0][1], resolved[0][2], boards))
        off = [n for n in needs if not n.part_id]
        if off:
            raise InputError("reserve takes stock parts only, and "
                             f"{', '.join(n.roles[0] for n in off)} is not a stock part; "
                             "nothing written", column="--values",
                             text="; ".join(sel.assignment_text() for _, sel in chosen))
        return {n.part_id: n.quantity for n in needs}

    takes(inventory)  # a part that is not on the shelf is refused before any analysis
    verdicts = []
    for sj, sel in chosen:
        changed = check_inputs(sel, job_file, file, accept_changed=accept_changed)
        verdict = verify_selection(sj, sel, inventory)
        verdicts.append(verdict)
        if not verdict.ok:
            why = (f"{sel.source} fails the job: {failing_summary(verdict)}")
            if not force:
                raise UnmetError(f"{why}; nothing reserved (--force reserves it anyway)",
                                 file=str(job_file))
            make_console(stderr=True).print(f"Warning: {why}; reserved anyway (--force)",
                                            markup=False)
        elif changed:
            make_console(stderr=True).print(f"Note: {', '.join(changed)} changed since the "
                                            f"result was saved; {sel.source} re-verified "
                                            "against the current files: it meets the job.",
                                            markup=False)

    label = f" for {boards} board(s)" + (f", every stage of {job.path}" if whole_board else "")
    res = reserve_stock(file, takes, dry_run=dry_run, build_label=label)
    if json_out:
        payload = res.to_dict()
        payload["build_quantity"] = boards
        if whole_board:
            payload["stages"] = [{"stage": sj.stage.name, "selection": sel.to_dict(),
                                  "design_ok": v.ok}
                                 for (sj, sel), v in zip(chosen, verdicts, strict=True)]
        else:
            payload["selection"] = chosen[0][1].to_dict()
        payload["design_ok"] = all(v.ok for v in verdicts)
        typer.echo(dumps(payload))
        return
    render_reservation(make_console(), res, boards)
