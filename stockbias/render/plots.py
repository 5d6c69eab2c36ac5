"""Plots for the bench and for print: Q-point spread on the load line, IC histogram, cost vs margin.

Each plot is a matplotlib :class:`~matplotlib.figure.Figure` built without
pyplot (no global backend state; the Agg renderer is used for PNG), saved as
PNG and SVG.  matplotlib is imported inside the functions only, so importing
stockbias never pulls it in.  Figures are meant to survive black-and-white
printing: labelled axes with units, legends, distinct marker shapes and
hatching as well as colour.
"""

from __future__ import annotations

import io
import math
import textwrap
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from ..analysis.check import CheckResult
from ..analysis.constraints import IC_MARGIN_DEFINITION
from ..errors import InputError
from ..job import Job

__all__ = [
    "CHECK_PLOTS",
    "DESIGN_PLOTS",
    "design_margin_figure",
    "figure_bytes",
    "ic_histogram_figure",
    "qpoint_figure",
    "save_figure",
    "write_check_plots",
    "write_design_plots",
]

#: File stems written by :func:`write_check_plots` and :func:`write_design_plots`.
CHECK_PLOTS = ("qpoints", "ic_histogram")
DESIGN_PLOTS = ("design_cost_margin",)
_STYLE: dict[str, Any] = {"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10,
                          "legend.fontsize": 8, "svg.hashsalt": "stockbias",
                          "svg.fonttype": "path"}


def _figure(width: float = 7.5, height: float = 5.2) -> Any:
    from matplotlib.figure import Figure

    return Figure(figsize=(width, height), dpi=150, layout="constrained")


def _target(result: CheckResult, job: Job) -> Any:
    """The target of the stage ``result`` checks (a board holds one per stage)."""
    return next((s for s in job.stages if s.name == result.stage), job.stage).target


def _flat(x: Any) -> np.ndarray:
    return np.asarray(x, dtype=float).reshape(-1)


def _supply_span(job: Job, topology: str) -> tuple[float, float, float]:
    """(low, nominal, high) total voltage across the stage, V."""
    s = job.supply
    total = s.volts
    lo, hi = s.volts * (1 - s.tolerance_pct / 100), s.volts * (1 + s.tolerance_pct / 100)
    if topology == "dual_supply" and s.negative_volts is not None:
        v = abs(s.negative_volts)
        total += v
        lo += v * (1 - s.vee_tolerance_pct / 100)
        hi += v * (1 + s.vee_tolerance_pct / 100)
    return lo, total, hi


def qpoint_figure(result: CheckResult, job: Job) -> Any:
    """Output characteristic: DC load lines, the Q-points of every corner and board, the limits.

    Parameters
    ----------
    result : CheckResult
        The analysed stage (worst-case vertices and, when run, Monte Carlo boards).
    job : Job
        Supplies and the target window.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib as mpl

    t = result.transistor
    with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
        fig = _figure(8.0, 7.0)
        ax = fig.add_subplot()
        lo, nominal, hi = _supply_span(job, result.topology)
        r_dc = sum(result.parts[r].value for r in ("RC", "RE") if r in result.parts)
        ev = result.worst.vertex_eval
        vce_c, ic_c = _flat(ev.quantities["vce"]), _flat(ev.quantities["ic"])
        mc = result.monte_carlo
        vce_m = ic_m = np.zeros(0)
        if mc is not None:  # occupied cells of the streamed joint (VCE, IC) histogram
            vce_m, ic_m, _ = mc.qpoint.centres()
        x_max = 1.1 * hi
        ic_line = hi / r_dc if r_dc > 0 else float(np.nanmax(ic_c)) * 2
        y_top = 1.15 * max(ic_line, float(np.nanmax(ic_c)), _target(result, job).ic_max) * 1e3
        # limits first, underneath everything
        ax.axvspan(0, t.vce_sat, color="0.85", hatch="//", ec="0.55", lw=0,
                   label=f"saturation (VCE < {t.vce_sat:g} V)")
        pd = next((c for c in result.constraints if c.name == "pd"), None)
        pd_allowed = pd.limit if pd is not None else t.pd_max_w
        v = np.linspace(max(t.vce_sat, 1e-3), x_max, 400)
        i_pd = pd_allowed / v * 1e3
        pd_text = (f"PD above {pd_allowed * 1e3:.3g} mW (derated to "
                   f"{job.environment.ambient_max_c:g} °C)")
        if float(i_pd.min()) < y_top:
            ax.fill_between(v, np.minimum(i_pd, y_top), y_top, where=i_pd < y_top,
                            color="#f4c7c3", hatch="\\\\", ec="#b0413e", lw=0, alpha=0.6,
                            label=pd_text)
            ax.plot(v, i_pd, color="#b0413e", lw=1.2)
        else:
            ax.plot([], [], " ", label=f"{pd_text}: beyond the axis")
        if t.vceo_max <= x_max:
            ax.axvspan(t.vceo_max, x_max, color="#d9c8e8", hatch="xx", ec="#6a4c93", lw=0,
                       label=f"above VCEO {t.vceo_max:g} V")
        else:
            ax.plot([], [], " ", label=f"VCEO {t.vceo_max:g} V (beyond the axis)")
        tgt = _target(result, job)
        ax.axhspan(tgt.ic_min * 1e3, tgt.ic_max * 1e3, color="#cfe8cf", alpha=0.6,
                   label=f"IC target {tgt.ic_min * 1e3:.3g}–{tgt.ic_max * 1e3:.3g} mA")
        if tgt.vce_min > 0:
            ax.axvline(tgt.vce_min, color="0.3", ls=":", lw=1.2,
                       label=f"VCE headroom {tgt.vce_min:g} V")
        if r_dc > 0:
            # one dash style per supply: solid nominal, dashed low, dash-dot high (the dotted
            # style is the VCE headroom line)
            for v_s, style, name in ((nominal, "-", "nominal"), (lo, "--", "low"),
                                     (hi, "-.", "high")):
                if name != "nominal" and lo == hi:
                    continue
                ax.plot([0, v_s], [v_s / r_dc * 1e3, 0], color="black", ls=style, lw=1.0,
                        label=f"DC load line, {name} supply ({v_s:.3g} V, "
                              f"RC+RE = {r_dc / 1e3:.3g} kΩ)")
        ax.scatter(vce_c, ic_c * 1e3, s=18, marker="^", facecolor="none", edgecolor="#d1495b",
                   lw=0.8, label=f"worst-case corners ({result.worst.n_vertices})")
        if vce_m.size:
            ax.scatter(vce_m, ic_m * 1e3, s=4, marker="s", color="#1f4e79", alpha=0.4,
                       lw=0, label=f"Monte Carlo boards × environment corners "
                                   f"({mc.yield_.samples if mc else 0} boards; occupied "
                                   f"cells of a {mc.qpoint.counts.shape[0] if mc else 0}² "
                                   "grid)")
        nom = result.nominal
        ax.scatter([float(nom["vce"])], [float(nom["ic"]) * 1e3],  # type: ignore[arg-type]
                   s=70, marker="o", facecolor="black", edgecolor="white", zorder=5,
                   label="nominal Q-point")
        ax.set_xlim(0, x_max)
        ax.set_ylim(0, y_top)
        ax.set_xlabel("collector–emitter voltage VCE (V)")
        ax.set_ylabel("collector current IC (mA)")
        ax.set_title(f"Q-point spread: {result.topology}, {t.polarity} {t.part_id}, "
                     f"{job.environment.ambient_min_c:g} to {job.environment.ambient_max_c:g} °C")
        ax.grid(True, color="0.9", lw=0.6)
        fig.legend(loc="outside lower center", ncols=2, frameon=False)
    return fig


def ic_histogram_figure(result: CheckResult, job: Job) -> Any:
    """Histogram of the Monte Carlo IC against the target window, with the yield.

    Raises
    ------
    InputError
        When the check ran without Monte Carlo boards.
    """
    import matplotlib as mpl

    mc = result.monte_carlo
    if mc is None:
        raise InputError("the IC histogram needs Monte Carlo boards (--samples more than 0)",
                         column="--samples", text="0")
    tgt = _target(result, job)
    with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
        fig = _figure(7.5, 4.6)
        ax = fig.add_subplot()
        b = result.worst.bounds.get("ic")
        edges, counts = mc.ic.rebinned(80)
        ax.axvspan(tgt.ic_min * 1e3, tgt.ic_max * 1e3, color="#cfe8cf", alpha=0.7,
                   label=f"target window {tgt.ic_min * 1e3:.3g}–{tgt.ic_max * 1e3:.3g} mA")
        ax.stairs(counts, edges * 1e3, fill=True, color="#4878a8", ec="white", lw=0.3,
                  label=f"{mc.yield_.samples} boards × {mc.corners} environment corners")
        if b is not None:
            for x, name in ((b.min, "min"), (b.max, "max")):
                ax.axvline(x * 1e3, color="#d1495b", ls="--", lw=1.2,
                           label=f"worst-case {name} {x * 1e3:.3g} mA")
        y = mc.yield_
        inside = mc.ic_window_boards / y.samples
        ax.set_xlabel("collector current IC (mA)")
        ax.set_ylabel("count (board × corner)")
        from .yield_text import interval_text, percent_text

        ax.set_title(f"IC spread, {result.topology} with {result.transistor.part_id}\n"
                     f"boards inside the IC window at every corner {100 * inside:.2f} %\n"
                     f"yield over all constraints {percent_text(y.yield_)} % "
                     f"({interval_text(y.low, y.high)})")
        ax.grid(True, axis="y", color="0.9", lw=0.6)
        # below the axes: a legend inside would cover bars wherever the peaks fall
        fig.legend(loc="outside lower center", ncols=2, frameon=False)
    return fig


def _ic_margin(design: Mapping[str, Any]) -> float | None:
    """The design's ``ic_margin`` (fraction of the target, as every result reports it)."""
    m = design.get("ic_margin")
    return float(m) if isinstance(m, (int, float)) and not isinstance(m, bool) \
        and math.isfinite(m) else None


def design_margin_figure(designs: Sequence[Mapping[str, Any]], title: str = "") -> Any:
    """Cost against worst-case IC margin for ranked designs (``design`` result dicts).

    Parameters
    ----------
    designs : sequence of dict
        Each with ``rank``, ``cost`` (stock-file currency), ``topology`` and
        ``ic_margin`` (fraction of the target, see
        :func:`stockbias.analysis.constraints.ic_margin`; plotted in % of the target).
    """
    import matplotlib as mpl

    points = [(int(d.get("rank", i + 1)), float(d["cost"]), m, str(d.get("topology", "")))
              for i, d in enumerate(designs)
              if isinstance(d.get("cost"), (int, float)) and (m := _ic_margin(d)) is not None]
    if not points:
        raise InputError("no design with a cost and an IC margin to plot", column="designs")
    with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
        fig = _figure(7.0, 4.8)
        ax = fig.add_subplot()
        markers = {"divider": "o", "collector_feedback": "s", "dual_supply": "D",
                   "fixed_base": "^"}
        for topo in dict.fromkeys(p[3] for p in points):
            sel = [p for p in points if p[3] == topo]
            ax.scatter([p[2] * 100 for p in sel], [p[1] for p in sel], s=40,
                       marker=markers.get(topo, "o"), facecolor="white", edgecolor="black",
                       lw=1.1, label=topo or "design", zorder=3)
        ax.axvline(0, color="#b0413e", ls="--", lw=1, label="zero margin (window edge)")
        ax.set_xlabel("worst-case IC margin (% of the target)\n"
                      + textwrap.fill(IC_MARGIN_DEFINITION, 90), fontsize=9)
        ax.margins(x=0.08, y=0.12)  # room for the rank labels inside the axes
        ax.set_ylabel("cost per board (stock-file currency)")
        ax.set_title(title or f"Cost against worst-case IC margin, top {len(points)} designs")
        ax.grid(True, color="0.9", lw=0.6)
        ax.legend(loc="best", framealpha=0.9)
        _label_designs(fig, ax, points)
    return fig


def _label_designs(fig: Any, ax: Any, points: list[tuple[int, float, float, str]]) -> None:
    """Rank labels beside the points, never on top of each other.

    Designs whose markers overlap on the figure (the same cost and margin, or margins a
    hair apart) share one label (``#1, #3``).  Each label starts up and to the right of its
    point (to the left where it would leave the axes); where it would overlap a label
    already placed, it moves up one line at a time until it is clear.  Positions are
    measured on the laid-out figure.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    if not isinstance(fig.canvas, FigureCanvasAgg):
        FigureCanvasAgg(fig)
    fig.draw_without_rendering()  # fix the layout before measuring the labels
    renderer = fig.canvas.get_renderer()
    near = fig.dpi * 7 / 72  # one marker's width (s=40 is about 6.3 points across), pixels
    groups: list[tuple[np.ndarray, float, float, list[int]]] = []
    for rank, cost, margin, _ in sorted(points):
        xy = ax.transData.transform((margin * 100, cost))
        for anchor, _c, _m, ranks in groups:
            if float(np.hypot(*(xy - anchor))) <= near:
                ranks.append(rank)
                break
        else:
            groups.append((xy, cost, margin * 100, [rank]))
    frame = ax.get_window_extent(renderer)
    placed: list[Any] = []
    for _xy, cost, margin_pct, ranks in groups:
        note = ax.annotate(", ".join(f"#{r}" for r in ranks), (margin_pct, cost),
                           textcoords="offset points", xytext=(5, 4), fontsize=8)
        note.set_in_layout(False)
        if note.get_window_extent(renderer).x1 > frame.x1:  # keep it inside the axes
            note.set_horizontalalignment("right")
            note.xyann = (-5, 4)
        for _ in range(60):
            box = note.get_window_extent(renderer)
            if not any(box.overlaps(other) for other in placed):
                break
            note.xyann = (note.xyann[0], note.xyann[1] + 10.0)
        placed.append(note.get_window_extent(renderer))


def figure_bytes(fig: Any, fmt: str = "png") -> bytes:
    """The figure rendered to PNG or SVG bytes."""
    import matplotlib as mpl

    buf = io.BytesIO()
    with mpl.rc_context(_STYLE):  # type: ignore[arg-type]
        fig.savefig(buf, format=fmt, metadata={"Date": None} if fmt == "svg" else None)
    return buf.getvalue()


def save_figure(fig: Any, folder: str | Path, stem: str) -> list[Path]:
    """Save ``folder/stem.png`` and ``folder/stem.svg``; the paths written."""
    folder = Path(folder)
    out = []
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for fmt in ("png", "svg"):
            path = folder / f"{stem}.{fmt}"
            path.write_bytes(figure_bytes(fig, fmt))
            out.append(path)
    except OSError as exc:
        raise InputError(f"cannot write the plot: {exc.strerror}", file=str(folder),
                         column="--plot") from None
    return out


def write_check_plots(result: CheckResult, job: Job, folder: str | Path) -> list[Path]:
    """Write the Q-point and (with Monte Carlo) IC histogram plots of a check; paths written."""
    paths = save_figure(qpoint_figure(result, job), folder, CHECK_PLOTS[0])
    if result.monte_carlo is not None:
        paths += save_figure(ic_histogram_figure(result, job), folder, CHECK_PLOTS[1])
    return paths


def write_design_plots(designs: Sequence[Mapping[str, Any]], folder: str | Path) -> list[Path]:
    """Write the cost against margin plot of ranked designs; paths written."""
    return save_figure(design_margin_figure(designs), folder, DESIGN_PLOTS[0])
