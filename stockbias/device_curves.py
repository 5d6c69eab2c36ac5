"""Datasheet points of a transistor (hFE and VBE against IC and temperature), and the
Gummel–Poon DC parameters fitted to them.

A curve file is a CSV with one row per datasheet point::

    temp_c,ic,hfe,vbe,vce
    25,100u,180,0.58,5
    25,1m,240,0.64,5
    25,50m,150,,5
    -40,1m,170,0.75,5

``temp_c`` (°C), ``ic`` (A), ``hfe`` are required; ``vbe`` (V, the base–emitter
voltage at that point) and ``vce`` (V, the collector–emitter voltage the datasheet
states; 5 V when absent, a common datasheet test condition) are optional.  Numbers
take engineering notation (``100u``, ``50 mA``).

The fit (:func:`fit_curves`) adjusts, in log space with ``scipy.optimize.least_squares``,
the parameters the points can determine: BF, ISE, NE and IKF always; IS when some row
gives VBE (otherwise IS is held at the value given, and the output says so); XTB when
hFE is given at two or more temperatures; XTI when VBE is given at two or more
temperatures.  The equations are those of :mod:`stockbias.analysis.gp_dc`.  A fit that
misses any point by more than the tolerance (hFE 10 %, VBE 10 mV by default) is
refused with the point's line.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from stockbias.analysis.device import CELSIUS_TO_KELVIN, thermal_voltage
from stockbias.analysis.gp_dc import bias_at_current, device_at
from stockbias.errors import InputError, NotationError
from stockbias.stock_csv import CsvSyntax, records, sanitise
from stockbias.units import parse_quantity

__all__ = [
    "HFE_TOLERANCE",
    "VBE_TOLERANCE_V",
    "CurveFit",
    "CurvePoints",
    "fit_curves",
    "read_curve_points",
]

HFE_TOLERANCE = 0.10  # a fitted hFE may miss a point by 10 %
VBE_TOLERANCE_V = 0.010  # a fitted VBE may miss a point by 10 mV
VCE_DEFAULT_V = 5.0  # a common datasheet test condition for hFE
_COLUMNS = {"temp_c": "°C", "ic": "A", "hfe": "", "vbe": "V", "vce": "V"}
_REQUIRED = ("temp_c", "ic", "hfe")


@dataclass(frozen=True)
class CurvePoints:
    """Datasheet points, one entry per row of the curve file.

    Attributes
    ----------
    temp_c, ic, hfe, vbe, vce : ndarray
        Temperature (°C), collector current (A), hFE, VBE (V; NaN where not given)
        and VCE (V) of each point.
    lines : tuple of int
        The physical line of each point in the file.
    file : str
        The curve file.
    """

    temp_c: np.ndarray
    ic: np.ndarray
    hfe: np.ndarray
    vbe: np.ndarray
    vce: np.ndarray
    lines: tuple[int, ...]
    file: str = ""


def read_curve_points(path: str | Path) -> CurvePoints:
    """Read a curve file; every problem is a one-line :class:`InputError`."""
    source = str(path)
    try:
        text = Path(path).read_bytes().decode("utf-8-sig")
    except OSError as exc:
        raise InputError(f"cannot read the curve file: {exc.strerror or exc}",
                         file=source) from None
    except UnicodeDecodeError:
        raise InputError("the curve file is not UTF-8 text", file=source) from None
    lines = sanitise(text).splitlines(keepends=True)
    rows: list[tuple[int, dict[str, str]]] = []
    header: list[str] | None = None
    try:
        for record, _ in records(lines, ","):
            if header is None:
                header = [h.strip().lower() for h in record.fields]
                for name in _REQUIRED:
                    if name not in header:
                        raise InputError(f"the curve file needs a column {name!r} "
                                         f"(columns: temp_c, ic, hfe, and optionally "
                                         f"vbe, vce)", file=source, line=record.line)
                continue
            if len(record.fields) != len(header):
                raise InputError(f"{len(record.fields)} fields where the header has "
                                 f"{len(header)}", file=source, line=record.line)
            rows.append((record.line, dict(zip(header, record.fields, strict=True))))
    except CsvSyntax as exc:
        raise InputError(exc.message, file=source, line=exc.line) from None
    if header is None or not rows:
        raise InputError("the curve file holds no points", file=source)

    values: dict[str, list[float]] = {name: [] for name in _COLUMNS}
    for line, row in rows:
        for name, unit in _COLUMNS.items():
            raw = row.get(name, "").strip()
            if raw == "" and name not in _REQUIRED:
                values[name].append(VCE_DEFAULT_V if name == "vce" else math.nan)
                continue
            try:
                value = parse_quantity(raw, unit)
            except NotationError as exc:
                raise InputError(exc.message, file=source, line=line, column=name,
                                 text=raw) from None
            problem = _implausible(name, value)
            if problem:
                raise InputError(problem, file=source, line=line, column=name, text=raw)
            values[name].append(value)
    arrays = {name: np.asarray(v, dtype=float) for name, v in values.items()}
    if len(rows) < 3:
        raise InputError(f"a fit needs at least 3 points; the file has {len(rows)}",
                         file=source)
    return CurvePoints(**arrays, lines=tuple(line for line, _ in rows), file=source)


def _implausible(name: str, value: float) -> str | None:
    ranges = {"temp_c": (-65.0, 200.0, "°C"), "ic": (1e-9, 50.0, "A"),
              "hfe": (1.0, 1e5, ""), "vbe": (0.1, 1.5, "V"), "vce": (0.05, 1000.0, "V")}
    low, high, unit = ranges[name]
    if not (low <= value <= high):
        return f"{name} must be between {low:g} and {high:g} {unit}".rstrip()
    return None


@dataclass(frozen=True)
class CurveFit:
    """Gummel–Poon DC parameters fitted to datasheet points.

    Attributes
    ----------
    params : Mapping[str, float]
        The card: fitted and held parameters, SPICE names, SI units.
    fitted : tuple of str
        The names the points determined.
    held : Mapping[str, str]
        Each parameter held fixed and why.
    hfe_error : ndarray
        Fitted hFE / point hFE − 1, per point.
    vbe_error_v : ndarray
        Fitted VBE − point VBE, volt (NaN where the point has none).
    """

    params: Mapping[str, float]
    fitted: tuple[str, ...]
    held: Mapping[str, str] = field(default_factory=dict)
    hfe_error: np.ndarray = field(default_factory=lambda: np.zeros(0))
    vbe_error_v: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def worst_hfe_error(self) -> float:
        return float(np.max(np.abs(self.hfe_error)))

    @property
    def worst_vbe_error_v(self) -> float:
        errors = self.vbe_error_v[np.isfinite(self.vbe_error_v)]
        return float(np.max(np.abs(errors))) if errors.size else 0.0


# parameter: (lower bound, upper bound) of its log (natural) or of the value
_LOG_BOUNDS = {"is": (1e-18, 1e-9), "bf": (5.0, 5e4), "ise": (1e-20, 1e-8),
               "ikf": (1e-4, 100.0)}
_LIN_BOUNDS = {"ne": (1.0, 4.0), "xtb": (-1.0, 4.0), "xti": (0.0, 8.0)}


def _model(points: CurvePoints, params: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray]:
    dev = device_at(params, points.temp_c)
    vbe, ib = bias_at_current(points.ic, points.vce, dev, iterations=64)
    return points.ic / ib, vbe


def fit_curves(points: CurvePoints, *, held: Mapping[str, float] | None = None,
               hfe_tolerance: float = HFE_TOLERANCE,
               vbe_tolerance_v: float = VBE_TOLERANCE_V) -> CurveFit:
    """Fit the DC parameters the points determine; see the module notes.

    Parameters
    ----------
    points : CurvePoints
        The datasheet points.
    held : Mapping[str, float], optional
        Parameters to hold (SPICE names, SI): ``is`` when no point gives VBE, and any
        of ``nf``, ``vaf``, ``br``, ``eg``, ``xti``, ``xtb`` known from elsewhere.
    hfe_tolerance, vbe_tolerance_v : float
        The largest miss accepted: relative for hFE, volt for VBE.

    Returns
    -------
    CurveFit

    Raises
    ------
    InputError
        When the fit misses a point by more than the tolerance (names its line), or
        the points cannot determine IS and none is held.
    """
    from scipy.optimize import least_squares

    fixed = {"nf": 1.0, "eg": 1.11, "tnom": 27.0, **(held or {})}
    has_vbe = np.isfinite(points.vbe)
    reasons: dict[str, str] = {}
    names = ["bf", "ise", "ne", "ikf"]
    if has_vbe.any():
        names.insert(0, "is")
        fixed.pop("is", None)
    elif "is" not in fixed:
        raise InputError("no point gives VBE, so IS cannot be fitted: add a vbe column "
                         "or give IS", file=points.file)
    else:
        reasons["is"] = "no point gives VBE"
    if len(np.unique(points.temp_c)) >= 2 and "xtb" not in (held or {}):
        names.append("xtb")
    else:
        fixed.setdefault("xtb", 1.5)
        reasons.setdefault("xtb", "hFE at one temperature only: 1.5 assumed (typical of "
                           "device model cards, recalled)")
    if len(np.unique(points.temp_c[has_vbe])) >= 2 and "xti" not in (held or {}):
        names.append("xti")
    else:
        fixed.setdefault("xti", 3.0)
        reasons.setdefault("xti", "VBE at one temperature only: 3 assumed (SPICE default)")
    reasons.setdefault("tnom", f"the card's reference temperature, {fixed['tnom']:g} °C")
    for name in fixed:
        reasons.setdefault(name, "held as given" if name in (held or {}) else
                           "SPICE default")

    # Starting point from the points themselves.
    order = np.argsort(points.ic)
    ic_hi = float(points.ic.max())
    start = {"bf": float(points.hfe.max()) * 1.3, "ikf": 3.0 * ic_hi, "ne": 1.6,
             "xtb": 1.5, "xti": 3.0}
    if has_vbe.any():
        k = int(np.flatnonzero(has_vbe)[0])
        vt = float(thermal_voltage(points.temp_c[k] + CELSIUS_TO_KELVIN))
        start["is"] = float(points.ic[k] * math.exp(-points.vbe[k] / vt))
    is0 = start.get("is", fixed.get("is", 1e-14))
    lo = int(order[0])
    spare = max(1.0 / points.hfe[lo] - 1.0 / start["bf"], 1e-4 / start["bf"])
    start["ise"] = float(spare * points.ic[lo] / (points.ic[lo] / is0) ** (1 / 1.6))

    def pack(values: Mapping[str, float]) -> np.ndarray:
        return np.array([math.log(values[n]) if n in _LOG_BOUNDS else values[n]
                         for n in names])

    def unpack(x: np.ndarray) -> dict[str, float]:
        out = dict(fixed)
        for n, v in zip(names, x, strict=True):
            out[n] = math.exp(v) if n in _LOG_BOUNDS else float(v)
        return out

    lower = np.array([math.log(_LOG_BOUNDS[n][0]) if n in _LOG_BOUNDS else _LIN_BOUNDS[n][0]
                      for n in names])
    upper = np.array([math.log(_LOG_BOUNDS[n][1]) if n in _LOG_BOUNDS else _LIN_BOUNDS[n][1]
                      for n in names])
    x0 = np.clip(pack(start), lower + 1e-9, upper - 1e-9)

    def residuals(x: np.ndarray) -> np.ndarray:
        hfe, vbe = _model(points, unpack(x))
        r_hfe = np.log(hfe / points.hfe) / hfe_tolerance
        r_vbe = np.where(has_vbe, (vbe - np.nan_to_num(points.vbe)) / vbe_tolerance_v, 0.0)
        return np.concatenate([r_hfe, r_vbe[has_vbe]])

    result = least_squares(residuals, x0, bounds=(lower, upper), x_scale="jac",
                           max_nfev=400)
    params = unpack(result.x)
    hfe, vbe = _model(points, params)
    fit = CurveFit(params=params, fitted=tuple(names), held=reasons,
                   hfe_error=hfe / points.hfe - 1.0,
                   vbe_error_v=np.where(has_vbe, vbe - points.vbe, np.nan))
    worst_h = int(np.argmax(np.abs(fit.hfe_error)))
    if abs(fit.hfe_error[worst_h]) > hfe_tolerance:
        raise InputError(
            f"the fitted curve misses this point's hFE by {100 * fit.hfe_error[worst_h]:+.1f} % "
            f"(fitted {hfe[worst_h]:.4g}; tolerance ±{100 * hfe_tolerance:g} %): check the "
            f"point, or the points do not follow one device", file=points.file,
            line=points.lines[worst_h], column="hfe", text=f"{points.hfe[worst_h]:g}")
    if fit.worst_vbe_error_v > vbe_tolerance_v:
        k = int(np.nanargmax(np.abs(fit.vbe_error_v)))
        raise InputError(
            f"the fitted curve misses this point's VBE by {1e3 * fit.vbe_error_v[k]:+.1f} mV "
            f"(tolerance ±{1e3 * vbe_tolerance_v:g} mV)", file=points.file,
            line=points.lines[k], column="vbe", text=f"{points.vbe[k]:g}")
    return fit
