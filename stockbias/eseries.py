"""IEC 60063 preferred-number series (E3 … E192) for resistor values.

Each series is kept as integer mantissas per decade: two digits for E3 … E24
(10 … 91), three digits for E48 … E192 (100 … 988).  Values are built from those
integers (47 × 10**2, not 4.7 × 100.0), so 4700.0 and 0.47 come out as the floats
nearest to the decimal values, and comparisons with parsed stock values are exact.

E24 and the coarser series keep their historical values, which differ from
round(10**(i/24), 1 decimal) at 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2, so they
are written out.  E48, E96 and E192 are round(10**(i/n)) to three significant
figures, with one exception the standard keeps: E192 has 920 where the formula
gives 919.

numpy is imported by the functions that return or take arrays; the membership test
:func:`smallest_series_many` tests a short list in plain Python (``stock check`` of a small
file loads no numpy).
"""

from __future__ import annotations

import bisect
import math
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import numpy as np

__all__ = [
    "E3",
    "E6",
    "E12",
    "E24",
    "E48",
    "E96",
    "E192",
    "SERIES_NAMES",
    "decade_values",
    "mantissas",
    "nearest",
    "nearest_many",
    "series_of",
    "series_tolerance_pct",
    "series_values",
    "smallest_series",
    "smallest_series_many",
]

E3: tuple[int, ...] = (10, 22, 47)
E6: tuple[int, ...] = (10, 15, 22, 33, 47, 68)
E12: tuple[int, ...] = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)
E24: tuple[int, ...] = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
                        33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)


def _three_figure_series(n: int, exceptions: dict[int, int]) -> tuple[int, ...]:
    """round(100 · 10**(i/n)) for i = 0 … n−1, with the standard's exceptions by index."""
    values = [round(100.0 * 10.0 ** (i / n)) for i in range(n)]
    for index, value in exceptions.items():
        values[index] = value
    return tuple(values)


E48: tuple[int, ...] = _three_figure_series(48, {})
E96: tuple[int, ...] = _three_figure_series(96, {})
E192: tuple[int, ...] = _three_figure_series(192, {185: 920})  # formula: 919

SERIES_NAMES: tuple[str, ...] = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")

_MANTISSAS: dict[str, tuple[int, ...]] = {
    "E3": E3, "E6": E6, "E12": E12, "E24": E24, "E48": E48, "E96": E96, "E192": E192,
}

# Associated tolerance, percent.  IEC 60063 gives E3 only as "wider than ±20 %";
# 40 % is the figure in use for it.  E192 serves ±0.5, ±0.25 and ±0.1 % parts;
# the widest, 0.5 %, is returned.
_TOLERANCE_PCT: dict[str, float] = {
    "E3": 40.0, "E6": 20.0, "E12": 10.0, "E24": 5.0, "E48": 2.0, "E96": 1.0, "E192": 0.5,
}


def _check(name: str) -> str:
    key = name.strip().upper() if isinstance(name, str) else name
    if key not in _MANTISSAS:
        raise ValueError(f"unknown E-series {name!r}; expected one of {', '.join(SERIES_NAMES)}")
    return key


def _exact(mantissa: int, exponent: int) -> float:
    """mantissa × 10**exponent as the float nearest to the decimal value."""
    if exponent >= 0:
        return float(mantissa * 10**exponent)
    return mantissa / 10**-exponent  # int / int is correctly rounded


def _figures(key: str) -> int:
    """Digits per mantissa: 2 for E3 … E24, 3 for E48 … E192."""
    return len(str(_MANTISSAS[key][0]))


def mantissas(name: str) -> tuple[int, ...]:
    """The integer mantissas of one decade, e.g. ``(10, 22, 47)`` for E3.

    Parameters
    ----------
    name : str
        Series name, one of :data:`SERIES_NAMES` (case-insensitive).
    """
    return _MANTISSAS[_check(name)]


def series_tolerance_pct(name: str) -> float:
    """The tolerance a series is made for, percent (E24 -> 5.0).

    E3 returns 40.0 (the standard says only "wider than ±20 %"); E192 returns 0.5,
    the widest of its ±0.5/0.25/0.1 % grades.
    """
    return _TOLERANCE_PCT[_check(name)]


def decade_values(name: str) -> tuple[float, ...]:
    """The values of one decade as mantissas in [1, 10), e.g. E3 -> (1.0, 2.2, 4.7)."""
    key = _check(name)
    shift = 1 - _figures(key)
    return tuple(_exact(m, shift) for m in _MANTISSAS[key])


def series_values(name: str, low: float, high: float) -> np.ndarray:
    """Every value of a series in [low, high], across decades, ascending.

    Parameters
    ----------
    name : str
        Series name, one of :data:`SERIES_NAMES`.
    low, high : float
        Inclusive bounds, ohm; 0 < low ≤ high, both finite.

    Returns
    -------
    numpy.ndarray
        float64 values, each the float nearest to its decimal value (4700.0, 0.47).
    """
    import numpy as np

    key = _check(name)
    low, high = float(low), float(high)
    if not (math.isfinite(low) and math.isfinite(high) and 0.0 < low <= high):
        raise ValueError(f"need finite bounds with 0 < low <= high, got low={low!r}, high={high!r}")
    shift = 1 - _figures(key)
    first = math.floor(math.log10(low)) - 1
    last = math.floor(math.log10(high)) + 1
    values = [
        _exact(m, decade + shift)
        for decade in range(first, last + 1)
        for m in _MANTISSAS[key]
    ]
    return np.array([v for v in values if low <= v <= high], dtype=np.float64)


def _neighbours(key: str, value: float) -> np.ndarray:
    """The series values in the decade of ``value`` and the decades either side."""
    import numpy as np

    decade = math.floor(math.log10(value))
    shift = 1 - _figures(key)
    return np.array(
        [_exact(m, d + shift) for d in (decade - 1, decade, decade + 1) for m in _MANTISSAS[key]],
        dtype=np.float64,
    )


def _check_positive(value: float) -> float:
    value = float(value)
    if not (math.isfinite(value) and value > 0.0):
        raise ValueError(f"an E-series value must be finite and > 0, got {value!r}")
    return value


def nearest(value: float, name: str) -> float:
    """The series value nearest to ``value`` in log distance (ratio), any decade.

    Parameters
    ----------
    value : float
        Resistance, ohm; finite and > 0.
    name : str
        Series name, one of :data:`SERIES_NAMES`.

    Returns
    -------
    float
        The nearest value; 9.9 in E12 gives 10.0.  On an exact tie in ratio the
        lower value is returned.
    """
    import numpy as np

    key = _check(name)
    value = _check_positive(value)
    candidates = _neighbours(key, value)
    distance = np.abs(np.log(candidates / value))
    return float(candidates[int(np.argmin(distance))])


def series_of(value: float, *, rel_tol: float = 1e-6) -> tuple[str, ...]:
    """Every series that contains ``value``, coarsest first.

    Parameters
    ----------
    value : float
        Resistance, ohm; finite and > 0 (any decade, 0.47 or 2.2e9 alike).
    rel_tol : float, optional
        Relative distance to a series value still counted as equal.

    Returns
    -------
    tuple of str
        E.g. 4700 -> ("E3", "E6", "E12", "E24", "E192") (470 is also an E192
        value), 4750 -> ("E96", "E192"), 125 -> ().
    """
    value = _check_positive(value)
    return tuple(
        name for name in SERIES_NAMES
        if abs(nearest(value, name) / value - 1.0) <= rel_tol
    )


def smallest_series(value: float, *, rel_tol: float = 1e-6) -> str | None:
    """The coarsest series (fewest values per decade) containing ``value``, or None."""
    found = series_of(value, rel_tol=rel_tol)
    return found[0] if found else None


# --------------------------------------------------------------------------- arrays
# The same answers as nearest() and smallest_series(), for many values at once.

_POW10_EXACT = 22  # 10.0**k is exact for 0 <= k <= 22, so m * 10**k and m / 10**k round once


def _as_positive_array(values: object) -> np.ndarray:
    import numpy as np

    arr = np.asarray(values, dtype=np.float64)
    if arr.size and not (np.all(np.isfinite(arr)) and np.all(arr > 0.0)):
        raise ValueError("E-series values must be finite and > 0")
    return arr


def nearest_many(values: object, name: str) -> np.ndarray:
    """The series value nearest to each of ``values`` in log distance, as an array.

    Element by element the same as :func:`nearest` (the lower value on an exact tie),
    computed for the whole array at once: the mantissas of one decade, extended by the
    last value of the decade below and the first of the decade above, are searched
    with :func:`numpy.searchsorted` on the log scale.

    Parameters
    ----------
    values : array_like
        Resistances, ohm; each finite and > 0.
    name : str
        Series name, one of :data:`SERIES_NAMES`.

    Returns
    -------
    numpy.ndarray
        float64, the shape of ``values``; each the float nearest to its decimal value.
    """
    import numpy as np

    key = _check(name)
    arr = _as_positive_array(values)
    flat = arr.ravel()
    if flat.size == 0:
        return arr.copy()
    mant = np.asarray(_MANTISSAS[key], dtype=np.int64)
    figures = _figures(key)
    scale = 10 ** (figures - 1)
    # one decade of mantissas with a neighbour on each side: (mantissa, decade offset)
    ext_m = np.concatenate(([mant[-1]], mant, [mant[0]]))
    ext_d = np.concatenate(([-1], np.zeros(mant.size, dtype=np.int64), [1]))
    ext_log = np.log10(ext_m / scale) + ext_d
    decade = np.floor(np.log10(flat)).astype(np.int64)
    frac = np.log10(flat) - decade
    hi = np.clip(np.searchsorted(ext_log, frac, side="left"), 1, ext_log.size - 1)
    lo = hi - 1
    # log distances from the exact candidate values (ratios, as nearest() measures them)
    exp_lo = decade + ext_d[lo] + 1 - figures
    exp_hi = decade + ext_d[hi] + 1 - figures
    cand_lo = _exact_many(ext_m[lo], exp_lo)
    cand_hi = _exact_many(ext_m[hi], exp_hi)
    take_hi = np.abs(np.log(cand_hi / flat)) < np.abs(np.log(cand_lo / flat))
    return np.where(take_hi, cand_hi, cand_lo).reshape(arr.shape)


def _exact_many(mantissa: np.ndarray, exponent: np.ndarray) -> np.ndarray:
    """mantissa × 10**exponent, each the float nearest to the decimal value."""
    import numpy as np

    out = np.empty(mantissa.shape, dtype=np.float64)
    pos = (exponent >= 0) & (exponent <= _POW10_EXACT)
    neg = (exponent < 0) & (exponent >= -_POW10_EXACT)
    out[pos] = mantissa[pos] * 10.0 ** exponent[pos]
    out[neg] = mantissa[neg] / 10.0 ** (-exponent[neg])
    for i in np.flatnonzero(~(pos | neg)):  # beyond 1e±22: exact integer arithmetic
        out[i] = _exact(int(mantissa[i]), int(exponent[i]))
    return out


def _in_series(value: float, key: str, rel_tol: float) -> bool:
    """``value`` within ``rel_tol`` of a value of series ``key`` (any decade).

    Series values lie more than 1 % apart, so a value within ``rel_tol`` (≪ 1 %) of one
    of them is within it of the nearest one: the same answer as comparing
    :func:`nearest`'s value, computed with the same exact candidates."""
    mant = _MANTISSAS[key]
    shift = 1 - _figures(key)
    decade = math.floor(math.log10(value))
    for d in (decade - 1, decade, decade + 1):
        i = bisect.bisect_left(mant, value / 10.0 ** (d + shift))
        for j in (i - 1, i):
            if 0 <= j < len(mant) and abs(_exact(mant[j], d + shift) / value - 1.0) <= rel_tol:
                return True
    return False


def _positive_floats(values: object) -> list[float]:
    """The values of a number, a (nested) sequence or an array, flattened, as floats."""
    if hasattr(values, "ravel"):
        values = values.ravel().tolist()
    out: list[float] = []
    stack = [values]
    while stack:
        v = stack.pop()
        if isinstance(v, (list, tuple)):
            stack.extend(reversed(v))
        else:
            out.append(float(v))  # type: ignore[arg-type]
    if not all(math.isfinite(v) and v > 0.0 for v in out):
        raise ValueError("E-series values must be finite and > 0")
    return out


#: Up to this many values, and while numpy is not loaded yet, the membership test runs in
#: plain Python (about 9 µs a value against numpy's 0.7 µs plus 0.13 s to import it).
PLAIN_PYTHON_MOST = 10_000


def smallest_series_many(values: object, *, rel_tol: float = 1e-6) -> list[str | None]:
    """The coarsest series containing each value (None: off-series), for many values.

    Element by element the same as :func:`smallest_series`.  A short list (at most
    :data:`PLAIN_PYTHON_MOST` values) is tested in plain Python while numpy is not loaded
    (``stock check`` of a small file then loads no numpy); otherwise with numpy arrays.

    Parameters
    ----------
    values : array_like
        Resistances, ohm; each finite and > 0.
    rel_tol : float, optional
        Relative distance to a series value still counted as equal.

    Returns
    -------
    list of (str or None)
        One entry per value, in order.
    """
    import sys

    short = isinstance(values, (list, tuple)) and len(values) <= PLAIN_PYTHON_MOST
    if short and "numpy" not in sys.modules:
        return _smallest_series_plain(values, rel_tol)
    return _smallest_series_arrays(values, rel_tol)


def _smallest_series_plain(values: object, rel_tol: float) -> list[str | None]:
    return [next((name for name in SERIES_NAMES if _in_series(v, name, rel_tol)), None)
            for v in _positive_floats(values)]


def _smallest_series_arrays(values: object, rel_tol: float) -> list[str | None]:
    import numpy as np

    flat = _as_positive_array(values).ravel()
    found = np.full(flat.size, -1, dtype=np.int64)
    for i, name in enumerate(SERIES_NAMES):
        open_ = found < 0
        if not open_.any():
            break
        near = nearest_many(flat[open_], name)
        hit = np.abs(near / flat[open_] - 1.0) <= rel_tol
        found[np.flatnonzero(open_)[hit]] = i
    return [SERIES_NAMES[i] if i >= 0 else None for i in found.tolist()]
