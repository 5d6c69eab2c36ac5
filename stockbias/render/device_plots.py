"""Plots of a transistor's device data: hFE(IC) and VBE(IC) at each temperature, the
datasheet points over the fitted curves (or a model card's curves alone).

matplotlib is imported inside the functions only.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from ..analysis.gp_dc import bias_at_current, device_at
from ..parts import Transistor
from .plots import _figure, save_figure

__all__ = ["curve_figure", "write_curve_plots"]

_CARD_TEMPS_C = (-40.0, 25.0, 85.0)  # a card's curves are drawn at these temperatures
_VCE_V = 5.0


def curve_figure(t: Transistor) -> Any:
    """hFE and VBE against IC (log axis) for a row with device data."""
    card = t.card
    assert card is not None
    points = card.points
    temps = sorted(set(points.temp_c.tolist())) if points is not None else list(_CARD_TEMPS_C)
    lo, hi = card.ic_span
    ic = np.geomspace(lo / 2, hi * 2, 120)
    fig = _figure(9.0, 6.4)
    ax_h, ax_v = fig.subplots(2, 1, sharex=True)
    styles = ["-", "--", ":", "-."]
    for k, temp in enumerate(temps):
        vbe, ib = bias_at_current(ic, points.vce[0] if points is not None else _VCE_V,
                                  device_at(card.params, temp))
        style = styles[k % len(styles)]
        line, = ax_h.semilogx(ic * 1e3, ic / ib, style, label=f"{temp:g} °C (fit)"
                              if points is not None else f"{temp:g} °C")
        ax_v.semilogx(ic * 1e3, vbe, style, color=line.get_color())
        if points is not None:
            here = points.temp_c == temp
            ax_h.semilogx(points.ic[here] * 1e3, points.hfe[here], "o", color=line.get_color(),
                          label=f"datasheet points {temp:g} °C")
            has = here & np.isfinite(points.vbe)
            if has.any():
                ax_v.semilogx(points.ic[has] * 1e3, points.vbe[has], "o",
                              color=line.get_color())
    ax_h.axvspan(lo * 1e3, hi * 1e3, color="0.93", zorder=0, label="where the data hold")
    ax_h.set_ylabel("hFE (IC/IB)")
    ax_v.set_ylabel("VBE, V")
    vce = points.vce[0] if points is not None else _VCE_V
    ax_v.set_xlabel(f"collector current IC, mA (VCE {vce:g} V)")
    ax_h.set_title(f"{t.part_id}: {card.source}", fontsize=9)
    ax_h.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=7)  # beside the axes
    for ax in (ax_h, ax_v):
        ax.grid(True, which="both", alpha=0.3)
    return fig


def write_curve_plots(transistors: list[Transistor], folder: str | Path) -> list[Path]:
    """``curves_<part>.png`` and ``.svg`` for each row with device data; paths written."""
    out: list[Path] = []
    for t in transistors:
        out += save_figure(curve_figure(t), folder, curve_stem(t))
    return out


def curve_stem(t: Transistor) -> str:
    """The file stem of a row's curve plot (the part id made file-safe)."""
    safe = "".join(c if c.isalnum() or c in "-_" else "_" for c in t.part_id)
    return f"curves_{safe}"
