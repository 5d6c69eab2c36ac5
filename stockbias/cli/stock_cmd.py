"""`stockbias stock ...`: look after the stock file."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from ..errors import StockFileError
from ..render.console import make_console
from ..render.json_out import dumps
from ..stock_io import read_inventory
from ..stock_summary import summarise

app = typer.Typer(help="Check and look after a stock file.", no_args_is_help=True)


@app.command("check")
def check(
    file: Annotated[Path, typer.Argument(exists=True, dir_okay=False, readable=True,
                                         help="The stock CSV file.")],
    json_out: Annotated[bool, typer.Option("--json",
                                           help="Print only a JSON object on stdout.")] = False,
) -> None:
    """Validate a stock file and summarise what is on the shelf."""
    try:
        inv = read_inventory(file)
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
        typer.echo(dumps(payload))
        return
    from ..render.stock_table import render_stock_summary

    render_stock_summary(make_console(), inv, summary)
