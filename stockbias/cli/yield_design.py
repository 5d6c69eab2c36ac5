"""`design` of a stage or a board, and `consolidate`, with [target] yield_min: the yield
searches, their outputs and exit codes (called from :mod:`.design_cmd` and
:mod:`.consolidate_cmd`, inside their output sets)."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any

import typer

from .common import search_progress

if TYPE_CHECKING:
    from ..job import Job
    from ..outputs import OutputSet
    from ..parts import Inventory


def run_yield_design(outs: OutputSet, job: Job, inv: Inventory, job_file: Path,
                     inventory: Path, *, top: int | None, time_limit: float | None,
                     json_out: bool, save: Path | None, workers: int, cluster: str | None,
                     assumed: list[str]) -> None:
    """Search, write --save, commit the outputs, print; exit 1 when no design qualifies."""
    from ..render.console import make_console
    from ..search.yield_search import yield_design

    with _executor(workers, cluster) as executor, \
            search_progress(json_out, "yield search") as progress:
        result = yield_design(job, inv, top=top, time_limit_s=time_limit,
                              executor=executor, progress=progress)
    result.assumptions[:0] = assumed
    text = _payload_text(result, job_file, inventory)
    if save is not None:
        outs.write_text("--save", text + "\n")
    written = outs.commit()
    if json_out:
        typer.echo(text)
    else:
        from ..render.yield_table import render_yield_design

        render_yield_design(make_console(), job, result)
    if "--save" in written:
        make_console(stderr=json_out).print(f"Result saved: {written['--save'][0]}",
                                            markup=False)
    if not result.designs:
        raise typer.Exit(1)


@contextmanager
def _executor(workers: int, cluster: str | None) -> Iterator[Any]:
    """The executor a yield search runs on, closed when the search ends."""
    from ..executor import InProcess, make_executor

    # candidates are few and short: local workers only pay off when asked for
    executor = (make_executor(workers or None, cluster) if (cluster or workers > 1)
                else InProcess())
    try:
        yield executor
    finally:
        close = getattr(executor, "close", None)
        if close is not None:
            close()


def _payload_text(result: Any, job_file: Path, inventory: Path) -> str:
    """The result's JSON with the input files and their records."""
    from ..render.json_out import dumps
    from ..selection import input_record

    payload = result.to_dict()
    payload["job"] = str(job_file)
    payload["inventory"] = str(inventory)
    payload["inputs"] = {"job": input_record(job_file), "inventory": input_record(inventory)}
    return dumps(payload)


def run_yield_board(outs: OutputSet, job: Job, inv: Inventory, job_file: Path,
                    inventory: Path, *, top: int | None, time_limit: float | None,
                    json_out: bool, save: Path | None, report: Path | None,
                    plot: Path | None, workers: int, cluster: str | None,
                    assumed: list[str]) -> None:
    """`design BOARD` with a yield target in some stage: search, write --save and --report,
    commit, print; exit 1 when no board qualifies."""
    from ..render.console import make_console
    from ..search.yield_board import yield_board

    with _executor(workers, cluster) as executor, \
            search_progress(json_out, "yield board search") as progress:
        result = yield_board(job, inv, top=top, time_limit_s=time_limit,
                             executor=executor, progress=progress)
    result.assumptions[:0] = [a for a in assumed if a not in result.assumptions]
    text = _payload_text(result, job_file, inventory)
    if save is not None:
        outs.write_text("--save", text + "\n")
    if report is not None:
        import sys

        from ..render.report import render_report

        notes = [f"Status: {result.status} (the best among the candidates searched; every "
                 "stage judged by its yield target)"]
        if result.explanation:
            notes.append(f"Explanation: {result.explanation}")
        checks = []
        if result.designs:
            best = result.designs[0]
            notes.append(f"Rank 1: cost {best.board.cost:g} per board, board yield "
                         f"{100 * best.board_yield:.3f} % (≥ {100 * best.board_low:.3f} % at "
                         f"{100 * best.board_confidence:.3g} % joint confidence)")
            checks = [(f"Stage {s.name}: {s.topology}, {s.transistor.part_id}", s.check)
                      for s in best.board.stages]
        with outs.writing("--report") as tmp:
            render_report(tmp, title=f"Yield board design for {job_file.name}", job=job,
                          inventory=inv, checks=checks, notes=notes,
                          assumptions=result.assumptions,
                          command="stockbias design " + " ".join(sys.argv[2:]))
    written = outs.commit()
    if json_out:
        typer.echo(text)
    else:
        from ..render.yield_board import render_yield_board

        render_yield_board(make_console(), job, result)
    note = make_console(stderr=json_out)
    if plot is not None:
        note.print("--plot draws single-stage results; for a board, check each stage with "
                   "`stockbias check BOARD --stage NAME --plot DIR`")
    if "--save" in written:
        note.print(f"Result saved: {written['--save'][0]}", markup=False)
    if "--report" in written:
        note.print(f"Report written: {written['--report'][0]}", markup=False)
    if not result.designs:
        raise typer.Exit(1)


def run_yield_consolidate(job: Job, inv: Inventory, *, keep, objectives, time_limit,
                          keep_purpose, purpose: bool, workers: int, cluster: str | None,
                          progress):
    """`consolidate` of a board with a yield target in some stage (the result reads like a
    consolidation's for the report and the change list)."""
    from ..search.yield_board import yield_consolidate

    with _executor(workers, cluster) as executor:
        return yield_consolidate(job, inv, keep=keep, objectives=objectives,
                                 time_limit_s=time_limit, keep_purpose=keep_purpose,
                                 purpose=purpose, executor=executor, progress=progress)
