"""`--changes`, `--schematic` and `--schematic-out`: results back onto a KiCad board.

``consolidate`` and ``substitute`` share these options: the change list (CSV, by
reference designator from the board's ``[stage.refs]``) and a copy of the schematic
in which only the changed symbols' Value and ``Stock part`` fields differ.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

if TYPE_CHECKING:
    from ..job import Job
    from ..kicad.changes import Change
    from ..outputs import OutputSet

ChangesOpt = Annotated[Path | None, typer.Option(
    "--changes", dir_okay=False, metavar="FILE.csv",
    help="Write the change list here (CSV: reference, old value, new value, stock part id, "
    "stage, role); the board needs [stage.refs].")]
SchematicOpt = Annotated[Path | None, typer.Option(
    "--schematic", exists=True, dir_okay=False, readable=True, metavar="FILE.kicad_sch",
    help="The KiCad schematic the board was read from (with --schematic-out).")]
SchematicOutOpt = Annotated[Path | None, typer.Option(
    "--schematic-out", dir_okay=False, metavar="FILE.kicad_sch",
    help="Write a copy of --schematic with the changed Values and 'Stock part' fields; "
    "nothing else in it changes.")]


def declare(outs: OutputSet, changes: Path | None, schematic: Path | None,
            schematic_out: Path | None) -> None:
    """Declare the outputs (before any work) and check the two schematic options agree."""
    from ..errors import InputError

    if (schematic is None) != (schematic_out is None):
        given, missing = (("--schematic", "--schematic-out") if schematic_out is None
                          else ("--schematic-out", "--schematic"))
        raise InputError(f"{given} needs {missing} too", column=given)
    outs.file("--changes", changes)
    outs.file("--schematic-out", schematic_out)


def check_board(job: Job, changes: Path | None, schematic: Path | None) -> None:
    """InputError before the search when the board cannot carry changes back."""
    if changes is None and schematic is None:
        return
    from ..kicad.changes import require_refs

    require_refs(job, "--changes" if changes is not None else "--schematic")


def write(outs: OutputSet, rows: list[Change], changes: Path | None,
          schematic: Path | None) -> list[str]:
    """Stage the change list and the edited schematic; the notes on changes not edited."""
    notes: list[str] = []
    if changes is not None:
        from ..kicad.changes import changes_csv

        outs.write_text("--changes", changes_csv(rows))
    if schematic is not None:
        from ..errors import InputError
        from ..kicad.schematic import edit_schematic, edits_of

        try:
            text = schematic.read_bytes().decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("the schematic is not UTF-8 text", file=str(schematic),
                             column="--schematic") from None
        edits, notes = edits_of(rows)
        outs.write_bytes("--schematic-out",
                         edit_schematic(text, edits, str(schematic)).encode("utf-8"))
    return notes


def report(written: dict[str, list[Path]], rows: list[Change], notes: list[str],
           stderr: bool) -> None:
    """Name the files written and the changes left to do by hand."""
    from ..errors import printable
    from ..render.console import make_console

    console = make_console(stderr=stderr)
    if "--changes" in written:
        console.print(printable(f"Change list written ({len(rows)} change(s)): "
                                f"{written['--changes'][0]}"), markup=False)
    if "--schematic-out" in written:
        console.print(printable(f"Schematic written: {written['--schematic-out'][0]}"),
                      markup=False)
    for note in notes:
        console.print(printable(f"note: {note}"), markup=False)
