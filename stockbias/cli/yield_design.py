"""`design` of a stage with [target] yield_min: the yield search, its outputs and exit code
(called from :mod:`.design_cmd`, inside its output set)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

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
    from ..executor import InProcess, make_executor
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..search.yield_search import yield_design
    from ..selection import input_record

    # candidates are few and short: local workers only pay off when asked for
    executor = make_executor(workers or None, cluster) if (cluster or workers > 1) \
        else InProcess()
    try:
        with search_progress(json_out, "yield search") as progress:
            result = yield_design(job, inv, top=top, time_limit_s=time_limit,
                                  executor=executor, progress=progress)
    finally:
        close = getattr(executor, "close", None)
        if close is not None:
            close()
    result.assumptions[:0] = assumed
    payload = result.to_dict()
    payload["job"] = str(job_file)
    payload["inventory"] = str(inventory)
    payload["inputs"] = {"job": input_record(job_file), "inventory": input_record(inventory)}
    text = dumps(payload)
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
