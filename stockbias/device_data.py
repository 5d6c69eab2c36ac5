"""Device data beyond the hFE bin: a stock row's SPICE model card or datasheet points.

A transistor row may name a model card (columns ``model_name`` and ``model_file``, a
library path relative to the stock file) or a file of datasheet points (``curve_file``,
see :mod:`stockbias.device_curves`, fitted to Gummel–Poon DC parameters).  Either gives
the row a *card*: DC parameters from which β(IC, T) and VBE(IC, T) follow.

How the analysis uses a card:

* The card's IS, BR, NF, NR, VAF, XTB, XTI and EG fill the row's own Gummel–Poon columns
  where the row leaves them empty (a column the row gives wins), so the exponential
  model follows the card.
* The hFE bin stays the production spread at the bin's test current.  For a job, the
  range used is the bin moved to the job's collector-current window along the card's
  curve at 25 °C: hFE_min × min s(IC) … hFE_max × max s(IC), with s(IC) = β(IC)/β(test
  current) over the window, and the VBE range moved by the card's VBE(IC) − VBE(test
  current) (:func:`at_job_currents`).  Temperature then follows XTB as for every row.
  The row's note says which range was used.
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

from stockbias.errors import InputError, ModelCardError

__all__ = [
    "CARD_TO_ROW",
    "DeviceCard",
    "at_job_currents",
    "card_for_row",
    "hfe_scale_over",
]

#: Card parameter → the stock row's field it fills when the row leaves it empty.
CARD_TO_ROW = {"is": "is_a", "br": "br", "nf": "nf", "nr": "nr", "vaf": "vaf_v",
               "xtb": "xtb", "xti": "xti", "eg": "eg_ev"}
_VCE_CURVE_V = 5.0  # VCE at which the card's curve is read (a common datasheet condition)
_CURVE_POINTS = 49  # samples of the current window (β(IC) is unimodal: ends + peak)


class DeviceCard:
    """DC parameters of one transistor row and where they came from.

    Attributes
    ----------
    params : dict[str, float]
        Lower-case SPICE names, SI units.
    source : str
        ``"card QX in models.lib (line 12)"`` or ``"fit to q.csv (hFE within 2.1 %,
        VBE within 3.0 mV)"``.
    kind : str
        ``"card"`` or ``"curve"``.
    ic_span : tuple of float
        The collector-current range the data holds over, ampere.
    points : CurvePoints or None
        The datasheet points (``kind == "curve"``).
    fit : CurveFit or None
        The fit to them: parameters fitted and held (and why), residuals.
    """

    __slots__ = ("fit", "ic_span", "kind", "params", "points", "source")

    def __init__(self, params: dict[str, float], source: str, kind: str,
                 ic_span: tuple[float, float], points=None, fit=None) -> None:
        self.params = dict(params)
        self.source = source
        self.kind = kind
        self.ic_span = ic_span
        self.points = points
        self.fit = fit

    def __repr__(self) -> str:
        return f"DeviceCard({self.source!r})"


_CARD_CACHE: dict[tuple[str, float], dict] = {}


def _library(path: Path) -> dict:
    from stockbias.model_card import read_model_cards

    key = (str(path.resolve()), path.stat().st_mtime if path.exists() else 0.0)
    if key not in _CARD_CACHE:
        _CARD_CACHE[key] = read_model_cards(path)
    return _CARD_CACHE[key]


def card_for_row(*, polarity: str, model_name: str, model_file: str, curve_file: str,
                 stock_dir: Path, held: dict[str, float]) -> DeviceCard | None:
    """The card a stock row names, or None when it names none.

    Parameters
    ----------
    polarity : str
        ``"NPN"`` or ``"PNP"`` (the card's type must agree).
    model_name, model_file, curve_file : str
        The row's fields (empty when absent).
    stock_dir : Path
        The stock file's folder (relative paths start there).
    held : dict
        Parameters a curve fit must hold (``is`` from the row, ``vaf``…).

    Raises
    ------
    InputError
        One line; the message names the model or curve file and its line where the
        fault is inside it (the caller adds the stock file, line and column).
    """
    if curve_file and (model_file or model_name):
        raise InputError("give either a model card (model_name, model_file) or "
                         "datasheet points (curve_file), not both", column="curve_file",
                         text=curve_file)
    if curve_file:
        return _from_curves(stock_dir / curve_file, curve_file, held)
    if not (model_file or model_name):
        return None
    if not model_file:
        raise InputError("model_name needs model_file: the library file that holds the "
                         "card", column="model_file", text="")
    path = stock_dir / model_file
    try:
        cards = _library(path)
    except ModelCardError as exc:
        raise InputError(f"in the model file: {exc.one_line()}", column="model_file",
                         text=model_file) from None
    bjt = {k: c for k, c in cards.items() if c.is_bjt}
    if model_name:
        card = cards.get(model_name.lower())
        if card is None:
            names = ", ".join(c.name for c in bjt.values()) or "none"
            raise InputError(f"no card of this name in {model_file} (NPN/PNP cards: {names})",
                             column="model_name", text=model_name)
    elif len(bjt) == 1:
        card = next(iter(bjt.values()))
    else:
        names = ", ".join(c.name for c in bjt.values()) or "none"
        raise InputError(f"{model_file} holds {len(bjt)} NPN/PNP cards: name one in "
                         f"model_name ({names})", column="model_name", text="")
    if card.kind != polarity:
        raise InputError(f"card {card.name} in {model_file} is {card.kind}, the row is "
                         f"{polarity}", column="model_name", text=model_name or card.name)
    return DeviceCard(dict(card.params), f"card {card.name} in {model_file} (line {card.line})",
                      "card", (10e-6, 100e-3))


def _from_curves(path: Path, shown: str, held: dict[str, float]) -> DeviceCard:
    import numpy as np

    from stockbias.device_curves import fit_curves, read_curve_points

    try:
        points = read_curve_points(path)
        fit = fit_curves(points, held={"tnom": 25.0, **held})
    except InputError as exc:
        raise InputError(f"in the curve file: {exc.one_line()}", column="curve_file",
                         text=shown) from None
    source = (f"fit to {shown} (hFE within {100 * fit.worst_hfe_error:.1f} %"
              + (f", VBE within {1e3 * fit.worst_vbe_error_v:.1f} mV" if
                 np.isfinite(points.vbe).any() else "") + ")")
    return DeviceCard(dict(fit.params), source, "curve",
                      (float(points.ic.min()), float(points.ic.max())), points, fit)


def hfe_scale_over(card: DeviceCard, test_ic: float, ic_lo: float, ic_hi: float,
                   temp_c: float = 25.0) -> tuple[float, float, float, float]:
    """How the card moves hFE and VBE from the test current to a current window.

    Parameters
    ----------
    card : DeviceCard
    test_ic : float
        The current the row's hFE bin and VBE range are specified at, ampere.
    ic_lo, ic_hi : float
        The collector-current window, ampere.
    temp_c : float
        Temperature of the comparison, °C (the stock data's 25 °C).

    Returns
    -------
    s_min, s_max : float
        Smallest and largest β(IC)/β(test current) over the window.
    dv_min, dv_max : float
        Smallest and largest VBE(IC) − VBE(test current), volt.
    """
    import numpy as np

    from stockbias.analysis.gp_dc import bias_at_current, device_at

    dev = device_at(card.params, temp_c)
    grid = np.unique(np.concatenate([np.geomspace(ic_lo, ic_hi, _CURVE_POINTS),
                                     [ic_lo, ic_hi, test_ic]]))
    vbe, ib = bias_at_current(grid, _VCE_CURVE_V, dev)
    beta = grid / ib
    k = int(np.searchsorted(grid, test_ic))
    inside = (grid >= ic_lo) & (grid <= ic_hi)
    ratio = beta[inside] / beta[k]
    dv = vbe[inside] - vbe[k]
    return float(ratio.min()), float(ratio.max()), float(dv.min()), float(dv.max())


def _round_out(value: float, direction: int) -> float:
    """``value`` to three significant figures, rounded down (-1) or up (+1)."""
    step = 10.0 ** (math.floor(math.log10(value)) - 2)
    rounded = (math.floor if direction < 0 else math.ceil)(value / step - direction * 1e-9)
    return float(f"{rounded * step:.3g}")


def _window_text(lo: float, hi: float) -> str:
    from stockbias.units import format_quantity

    return f"{format_quantity(lo, 'A')}–{format_quantity(hi, 'A')}"


def at_job_currents(inventory, ic_lo: float, ic_hi: float):
    """The inventory with every card-bearing transistor's hFE bin and VBE range moved to
    the collector-current window ``ic_lo``…``ic_hi`` (ampere) along its card.

    Rows without a card are returned unchanged.  Each moved row's ``hfe_test_ic``
    becomes the window's geometric middle and its ``device_note`` says what was used.
    """
    if not any(getattr(t, "card", None) for t in inventory.transistors):
        return inventory
    moved = []
    for t in inventory.transistors:
        card = getattr(t, "card", None)
        if card is None or t.device_note:  # no data, or moved already: unchanged
            moved.append(t)
            continue
        s_lo, s_hi, dv_lo, dv_hi = hfe_scale_over(card, t.hfe_test_ic, ic_lo, ic_hi)
        lo_span, hi_span = card.ic_span
        outside = ic_lo < lo_span * 0.999 or ic_hi > hi_span * 1.001
        note = (f"hFE {_round_out(t.hfe_min * s_lo, -1):g}–{_round_out(t.hfe_max * s_hi, 1):g}"
                f" and VBE "
                f"{t.vbe_min + dv_lo:.3f}–{t.vbe_max + dv_hi:.3f} V over IC "
                f"{_window_text(ic_lo, ic_hi)} at 25 °C from the {card.source} "
                f"(bin hFE {t.hfe_min:.4g}–{t.hfe_max:.4g} at "
                f"{_window_text(t.hfe_test_ic, t.hfe_test_ic).split('–')[0]})")
        if outside:
            note += (f"; the window reaches outside the {_window_text(*card.ic_span)} the "
                     "data covers")
        # three significant figures, rounded outwards (the range only widens)
        hfe_lo, hfe_hi = _round_out(t.hfe_min * s_lo, -1), _round_out(t.hfe_max * s_hi, 1)
        moved.append(replace(
            t, hfe_min=hfe_lo, hfe_max=hfe_hi,
            vbe_min=max(t.vbe_min + dv_lo, 0.05), vbe_max=t.vbe_max + dv_hi,
            hfe_test_ic=math.sqrt(ic_lo * ic_hi), device_note=note,
            assumed=t.assumed - {"hfe_test_ic"}))
    return replace(inventory, transistors=tuple(moved))
