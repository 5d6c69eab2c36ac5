"""`stockbias sweep FOLDER -i STOCK [--without PART_ID]`: every job and board in a folder."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from .common import ClusterOpt, ForceOpt, InventoryOpt, JsonOpt, WorkersOpt, search_progress


def sweep(
    folder: Annotated[Path, typer.Argument(exists=True, file_okay=False, metavar="FOLDER",
                                           help="A folder of job and board (TOML) files.")],
    inventory: InventoryOpt,
    without: Annotated[str | None, typer.Option(
        "--without", metavar="PART_ID",
        help="Strike this transistor from the shelf: every stage fitted with it gets the "
        "substitute with the least rework, or is reported as having none.")] = None,
    json_out: JsonOpt = False,
    csv_out: Annotated[Path | None, typer.Option(
        "--csv", dir_okay=False, help="Also write the summary as CSV to FILE.")] = None,
    time_limit: Annotated[float | None, typer.Option(
        "--time-limit", metavar="SECONDS", min=0.1, max=86400.0,
        help="Seconds for the whole sweep: each substitute search gets what is left, and "
        "stages reached after it are listed as not judged.")] = None,
    workers: WorkersOpt = 1,
    cluster: ClusterOpt = None,
    force: ForceOpt = False,
) -> None:
    """Run every stage of every job and board in a folder on one executor; one summary.
    Exit 1 when a stage has no substitute (--without), fails its check or was not judged
    within the time limit."""
    import csv
    import io
    import time

    from ..errors import InputError
    from ..executor import make_executor
    from ..inert_text import console_text, spreadsheet_row
    from ..outputs import OutputSet
    from ..render.blocks import print_lines, prose
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..search.sweep import stage_tasks, sweep_stage
    from ..stock_io import read_inventory

    outs = OutputSet({"the stock file (--inventory)": inventory}, force=force)
    outs.file("--csv", csv_out)
    with outs:
        inv = read_inventory(inventory)
        if without is not None and inv.find_transistor(without) is None:
            ids = ", ".join(q.part_id for q in inv.transistors) or "none"
            raise InputError(f"no transistor with that part id in {inv.path}; transistors: "
                             f"{ids}", column="--without", text=without)
        stages = stage_tasks(folder)
        if time_limit is not None:
            # what a stage loads in this process, loaded before the clock starts
            from scipy import special, stats  # noqa: F401

            from ..search import board, substitute  # noqa: F401
        end = None if time_limit is None else time.time() + time_limit
        tasks = [(job, name, str(inventory), without, 2000, 0, end) for job, name in stages]
        executor = make_executor(workers or None, cluster)
        rows = []
        try:
            with search_progress(json_out, f"sweep: {len(tasks)} stages") as bar:
                for i, row in enumerate(executor.imap(sweep_stage, tasks)):
                    rows.append(row)
                    if bar is not None:
                        bar(f"sweep: {i + 1} of {len(tasks)} stages", (i + 1) / len(tasks))
        finally:
            close = getattr(executor, "close", None)
            if close is not None:
                close()
        if csv_out is not None:
            buf = io.StringIO()
            w = csv.writer(buf, lineterminator="\n")
            keys = ["file", "stage", "current", "verdict", "transistor", "changes",
                    "added_cost", "note"]
            w.writerow(keys)
            for r in rows:
                d = r.to_dict()
                d["added_cost"] = f"{r.added_cost:.6g}"
                w.writerow(spreadsheet_row([d[k] for k in keys]))
            outs.write_text("--csv", buf.getvalue())
        written = outs.commit()
    bad = [r for r in rows if r.verdict in ("none", "fails", "not judged")]
    if json_out:
        typer.echo(dumps({"folder": str(folder), "without": without,
                          "stages": [r.to_dict() for r in rows],
                          "summary": _summary(rows)}))
    else:
        console = make_console()
        title = (f"Sweep of {folder} without {without}" if without
                 else f"Sweep of {folder}: check of every built stage")
        console.print(console_text(title), style="bold", highlight=False)
        for r in rows:
            head = f"{r.file} / {r.stage} ({r.current or 'no transistor'}): {r.verdict}"
            if r.transistor:
                head += f" → {r.transistor}"
            if r.changes:
                head += f", change {r.changes}"
            if r.verdict == "rework":
                head += f", added cost {r.added_cost:.4g}/board"
            if r.note:
                head += f" — {r.note}"
            print_lines(console, prose(head, console.width))
        s = _summary(rows)
        console.print(", ".join(f"{v} {k}" for k, v in s.items()) + f" ({len(rows)} stages)")
    if "--csv" in written:
        make_console(stderr=json_out).print(f"Summary written: {written['--csv'][0]}",
                                            markup=False)
    if bad:
        raise typer.Exit(1)


def _summary(rows) -> dict[str, int]:
    out: dict[str, int] = {}
    for r in rows:
        out[r.verdict] = out.get(r.verdict, 0) + 1
    return out
