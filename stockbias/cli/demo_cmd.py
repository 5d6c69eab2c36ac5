"""`stockbias demo`: the main job on a bundled shelf and job."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from .common import ForceOpt

_SHELF = "workshop_drawers.csv"
_JOB = "line_driver_job.toml"
_BOARD = "distribution_amp_board.toml"


def demo(
    copy_to: Annotated[Path | None, typer.Option(
        "--copy-to", metavar="FOLDER", file_okay=False,
        help="First copy the bundled sample shelves, jobs and board into FOLDER (created if "
        "its parent exists), then run the demo on the copies: every command it prints, and "
        "the README's examples with FOLDER for inventory_samples, work on them.")] = None,
    force: ForceOpt = False,
) -> None:
    """Design a line-driver stage from the bundled workshop drawers and show the ranking."""
    from ..inert_text import console_text
    from ..job import load_job
    from ..render.console import make_console
    from ..render.design_table import render_design
    from ..samples import sample_path, shown_path
    from ..search.defaults import with_design_defaults
    from ..search.design import design
    from ..stock_io import read_inventory

    console = make_console()
    folder = _copy_samples(copy_to, force) if copy_to is not None else None
    shelf = sample_path(_SHELF, folder)
    job_path = sample_path(_JOB, folder)
    inv = read_inventory(shelf)
    job, assumed = with_design_defaults(load_job(job_path))
    shelf_arg, job_arg = shown_path(shelf), shown_path(job_path)
    board_arg = shown_path(sample_path(_BOARD, folder))
    console.rule("stockbias demo")
    if folder is not None:
        console.print(console_text(f"Sample files copied to {shown_path(folder)}"))
    console.print(f"Shelf: {shelf.name} ({len(inv.resistors)} resistor lines, "
                  f"{len(inv.transistors)} transistors); job: {job_path.name}")
    prog = _program()
    console.print(console_text(f"Equivalent command: {prog} design {job_arg} "
                               f"--inventory {shelf_arg}"))
    result = design(job, inv)
    result.assumptions[:0] = [a for a in assumed if a not in result.assumptions]
    render_design(console, job, result)
    if result.designs:
        from ..render.check_table import purpose_rows
        from ..selection import from_design

        first = result.designs[0].check
        if first.purpose is not None:
            said = "; ".join(f"{r['figure']} {r['nominal']}"
                             f"{' V/V' if r['unit'] == 'V/V' else ''} nominal, "
                             f"{r['worst']}{' V/V' if r['unit'] == 'V/V' else ''} worst case"
                             for r in purpose_rows(first))
            console.print(f"What rank 1 does ({first.purpose.conditions}): {said}")

        best = from_design(result.designs[0].to_dict(), "demo rank 1")
        console.print(console_text(
            "Next: the full worst-case report of the best design: "
            f"{prog} check {job_arg} --inventory {shelf_arg} "
            f"--values {best.assignment_text()} --transistor {best.transistor_id}"))
    console.print(console_text(
        "A whole board: the bundled four-stage board onto fewer drawer lines, every stage "
        f"still in spec: {prog} consolidate {board_arg} --inventory {shelf_arg}"))
    if folder is None:
        console.print(console_text(f"Your own copies of these files: {prog} demo --copy-to "
                                   "FOLDER"))


def _program() -> str:
    """How the user runs stockbias from here: ``stockbias`` when that name on the PATH is
    this program, else the path it was started by (``.venv/bin/stockbias`` straight after
    the Quick start, before the environment is activated)."""
    import shutil
    import sys

    from ..samples import shown_path

    started = Path(sys.argv[0])
    if started.name != "stockbias":
        return "stockbias"  # python -m stockbias, or a test runner
    found = shutil.which("stockbias")
    if found is not None and Path(found).resolve() == started.resolve():
        return "stockbias"
    return shown_path(started)


def _copy_samples(folder: Path, force: bool) -> Path:
    """Copy every bundled sample file into ``folder`` (all or none, as every output)."""
    from ..outputs import OutputSet
    from ..samples import SAMPLES_DIR, sample_names

    names = sample_names()
    outs = OutputSet({}, force=force)
    outs.folder("--copy-to", folder, names)
    with outs:
        staged = outs.stage("--copy-to")
        for name in names:
            (staged / name).parent.mkdir(parents=True, exist_ok=True)
            (staged / name).write_bytes((SAMPLES_DIR / name).read_bytes())
        outs.commit()
    return folder
