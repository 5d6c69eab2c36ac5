"""`stockbias stock curves`: the device data of a stock file's transistors."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..errors import InputError


def curves(
    file: Annotated[Path, typer.Argument(exists=True, dir_okay=False, readable=True,
                                         metavar="STOCK_FILE", help="The stock CSV file.")],
    part: Annotated[list[str] | None, typer.Option(
        "--part", "-p", metavar="PART_ID", help="Only this transistor (repeatable); default: "
        "every row with a model card or datasheet points.")] = None,
    plot: Annotated[Path | None, typer.Option(
        "--plot", file_okay=False, help="Write hFE(IC) and VBE(IC) plots (PNG and SVG) into "
        "this folder, the datasheet points over the fitted curves.")] = None,
    json_out: Annotated[bool, typer.Option("--json",
                                           help="Print only a JSON object on stdout.")] = False,
    force: Annotated[bool, typer.Option(
        "--force", help="Replace plot files that exist.")] = False,
) -> None:
    """Show each transistor's model card or fit to datasheet points: parameters, residuals,
    hFE over the currents the data cover."""
    from ..device_report import device_rows, render_devices
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..stock_io import read_inventory

    inv = read_inventory(file)
    chosen = [t for t in inv.transistors if t.card is not None]
    if part:
        wanted = {p.lower() for p in part}
        known = {t.part_id.lower(): t for t in inv.transistors}
        for p in part:
            if p.lower() not in known:
                raise InputError("no transistor with this part id in the stock file",
                                 column="--part", text=p)
            if known[p.lower()].card is None:
                raise InputError("this transistor has no model card or datasheet points "
                                 "(columns model_name/model_file or curve_file)",
                                 column="--part", text=p)
        chosen = [t for t in chosen if t.part_id.lower() in wanted]
    if not chosen:
        raise InputError("no transistor in the stock file names a model card or datasheet "
                         "points (columns model_name/model_file or curve_file)", file=str(file))
    written: list[Path] = []
    if plot is not None:
        from ..render.device_plots import curve_stem, write_curve_plots

        outs = OutputSet({"the stock file": file}, force=force)
        outs.folder("--plot", plot, [f"{curve_stem(t)}.{x}" for t in chosen
                                     for x in ("png", "svg")])
        with outs:
            with outs.writing("--plot") as folder:
                write_curve_plots(chosen, folder)
            written = [Path(p) for p in outs.commit().get("--plot", [])]
    rows = device_rows(chosen)
    if json_out:
        typer.echo(dumps({"file": str(file), "devices": rows,
                          "plots": [str(p) for p in written]}))
        return
    console = make_console()
    render_devices(console, rows)
    if written:
        console.print("Plots written: " + ", ".join(str(p) for p in written), markup=False)
