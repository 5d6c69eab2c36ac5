"""`stockbias board from-netlist NETLIST`: a board file from a KiCad netlist."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from .common import ForceOpt, JsonOpt

app = typer.Typer(help="Boards from KiCad: read a netlist into a board file.",
                  no_args_is_help=True)


def _rails(items: list[str] | None) -> dict[str, float]:
    """``--rail NET=VOLTS`` items → {net: volts}."""
    from ..errors import InputError, NotationError
    from ..units import parse_quantity

    out: dict[str, float] = {}
    for item in items or []:
        net, sep, volts = item.rpartition("=")
        if not sep or not net.strip() or not volts.strip():
            raise InputError("expected NET=VOLTS, e.g. VCC=12 or -6V=-6", column="--rail",
                             text=item)
        try:
            value = parse_quantity(volts, "V")
        except NotationError as exc:
            raise InputError(exc.message, column="--rail", text=item) from None
        if abs(value) > 1000:
            raise InputError("a rail beyond ±1000 V is no bias supply", column="--rail",
                             text=item)
        if net.strip() in out:
            raise InputError("this net is given twice", column="--rail", text=item)
        out[net.strip()] = value
    return out


@app.command("from-netlist")
def from_netlist(
    netlist: Annotated[Path, typer.Argument(
        exists=True, dir_okay=False, readable=True, metavar="NETLIST_FILE",
        help="KiCad netlist export: S-expression (.net) or XML.")],
    out: Annotated[Path | None, typer.Option(
        "--out", "-o", dir_okay=False, metavar="BOARD_FILE",
        help="Write the board file (TOML) here; without it the board file is printed.")]
    = None,
    rail: Annotated[list[str] | None, typer.Option(
        "--rail", metavar="NET=VOLTS",
        help="The voltage of a supply net (VCC=12, -VS=-6); also makes any net a rail. "
        "Repeatable.")] = None,
    inventory: Annotated[Path | None, typer.Option(
        "--inventory", "-i", exists=True, dir_okay=False, readable=True,
        help="The stock CSV file: resolves transistor part ids and sets each stage's "
        "collector-current target from today's operating point.")] = None,
    ic_window: Annotated[float | None, typer.Option(
        "--ic-window", metavar="PERCENT", min=1.0, max=95.0,
        help="Collector-current window, ± % of today's nominal IC (default: the narrowest "
        "multiple of 5 % from 20 % that holds today's worst case).")] = None,
    json_out: JsonOpt = False,
    force: ForceOpt = False,
) -> None:
    """Read a KiCad netlist: find each transistor's bias network and roles, write a board
    file with [stage.refs] (role → reference designator); list what cannot be classified."""
    from ..kicad.board_writer import import_board
    from ..kicad.netlist import load_netlist
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps

    outs = OutputSet({"the netlist": netlist, "the stock file (--inventory)": inventory},
                     force=force)
    outs.file("--out", out)
    with outs:
        rails = _rails(rail)
        inv = None
        if inventory is not None:
            from ..stock_io import read_inventory

            inv = read_inventory(inventory)
        board = import_board(load_netlist(netlist), rails, inv, ic_window)
        if out is not None and board.stages:
            outs.write_text("--out", board.text)
        written = outs.commit()
    if json_out:
        payload = board.to_dict()
        payload["board"] = str(written["--out"][0]) if "--out" in written else None
        typer.echo(dumps(payload))
    else:
        from ..render.board_import import render_import

        if out is None and board.stages:
            typer.echo(board.text, nl=False)
        render_import(make_console(stderr=out is None), board,
                      str(written["--out"][0]) if "--out" in written else None)
    if not board.stages:
        from ..errors import printable

        typer.echo(printable(f"stockbias board from-netlist: {netlist}: no stage could be "
                             "imported (see the parts not classified)"), err=True)
        raise typer.Exit(1)
