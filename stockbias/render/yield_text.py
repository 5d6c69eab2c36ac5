"""A yield and its confidence interval in words that never claim more than the counts.

A percentage is rounded only where the rounding cannot mislead: a yield below 100 %
is never shown as ``100.00 %`` (nor one above 0 as ``0.00 %``); an interval's ends
are rounded outward (the lower end down, the upper end up), so the printed interval
contains the computed one; and an interval whose ends would print alike reads as the
one-sided bound it is (``≥ 99.9998 %`` when every board passed).
"""

from __future__ import annotations

import math

__all__ = ["interval_text", "lower_percent", "percent_text", "yield_text"]

_MAX_DIGITS = 8


def _pct(x: float, digits: int) -> str:
    return f"{x:.{digits}f}"


def percent_text(fraction: float, digits: int = 2) -> str:
    """``fraction`` as a percentage: ``digits`` decimals, more where the rounding would
    show 100 % for less than all or 0 % for more than none (``99.995 %`` stays below
    100).  Returns the number without the ``%`` sign."""
    pct = 100.0 * fraction
    if 0.0 < fraction < 1.0:
        for d in range(digits, _MAX_DIGITS + 1):
            text = _pct(pct, d)
            if float(text) not in (0.0, 100.0):
                return text
        return _pct(pct, _MAX_DIGITS)
    return _pct(pct, digits)


def _down(pct: float, d: int) -> str:
    return _pct(math.floor(pct * 10 ** d + 1e-9) / 10 ** d, d)


def _up(pct: float, d: int) -> str:
    return _pct(math.ceil(pct * 10 ** d - 1e-9) / 10 ** d, d)


def interval_text(low: float, high: float, confidence: str = "95 %", digits: int = 2) -> str:
    """A confidence interval on a fraction, in words.

    ``low``, ``high``: the interval's ends, fractions.  Both ends inside (0, 1): the
    interval rounded outward, ``95 % interval 97.31–99.02 %``.  The upper end at 1
    (every board passed, or nearly): the one-sided bound ``95 % confidence ≥ 99.9998 %``
    with enough decimals to be true and to differ from 100 %; the lower end at 0:
    ``≤ 0.0002 %``.
    """
    lo, hi = 100.0 * low, 100.0 * high
    if high >= 1.0 and low <= 0.0:
        return f"{confidence} interval 0–100 %"
    if high >= 1.0:
        # as many decimals as the shortfall from 100 % needs for its first digit
        d0 = max(digits, -math.floor(math.log10(max(100.0 - lo, 1e-12))))
        for d in range(min(d0, _MAX_DIGITS), _MAX_DIGITS + 1):
            text = _down(lo, d)
            if float(text) < 100.0:
                return f"{confidence} confidence ≥ {text} %"
        return f"{confidence} confidence ≥ {_down(lo, _MAX_DIGITS)} %"
    if low <= 0.0:
        d0 = max(digits, -math.floor(math.log10(max(hi, 1e-12))))
        for d in range(min(d0, _MAX_DIGITS), _MAX_DIGITS + 1):
            text = _up(hi, d)
            if float(text) > 0.0:
                return f"{confidence} confidence ≤ {text} %"
        return f"{confidence} confidence ≤ {_up(hi, _MAX_DIGITS)} %"
    for d in range(digits, _MAX_DIGITS + 1):
        a, b = _down(lo, d), _up(hi, d)
        if float(b) < 100.0 and float(a) > 0.0 and a != b:
            return f"{confidence} interval {a}–{b} %"
    return f"{confidence} interval {_down(lo, _MAX_DIGITS)}–{_up(hi, _MAX_DIGITS)} %"


def lower_percent(fraction: float, digits: int = 3) -> str:
    """A lower bound on a fraction as a percentage, rounded down (never claims more)."""
    return _down(100.0 * fraction, digits)


def yield_text(yield_: float, low: float, high: float, samples: int) -> str:
    """``yield 99.95 % of 20000 boards (95 % interval 99.90–99.98 %)``."""
    return (f"yield {percent_text(yield_)} % of {samples} boards "
            f"({interval_text(low, high)})")
