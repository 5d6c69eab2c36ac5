"""`stockbias demo`: the main job on a bundled shelf."""

from __future__ import annotations

from ..render.console import make_console
from ..render.stock_table import render_stock_summary
from ..samples import sample_path
from ..stock_io import read_inventory
from ..stock_summary import summarise


def demo() -> None:
    """Run stockbias on the bundled workshop shelf and job."""
    console = make_console()
    inv = read_inventory(sample_path("workshop_drawers.csv"))
    console.rule("stockbias demo: the Kestrel Row workshop drawers")
    render_stock_summary(console, inv, summarise(inv))
