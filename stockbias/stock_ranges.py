"""Plausible ranges of the numeric stock columns.

A value outside its range is refused with a one-line error: it is a typing slip or a
lost unit (``250 MW`` for ``250 mW``), and would only break the analysis later.  The
ranges are wide enough for any discrete small-signal or power bipolar part and any
resistor a bias network uses.  Units are the column's (ohm, V, A, W; tolerance in %,
tempco in ppm/°C, θJA in °C/W, TJ in °C).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

__all__ = ["RANGES", "Plausible"]


@dataclass(frozen=True)
class Plausible:
    """The plausible range of one numeric column, in the column's unit.

    A value passes when it is finite and ``low <= v <= high`` (``low < v`` when
    ``low_open``); ``zero_ok`` also lets 0 through (a zero-ohm link), ``magnitude``
    tests ``abs(v)`` (a signed tempco).
    """

    low: float
    high: float
    low_open: bool = False
    zero_ok: bool = False
    magnitude: bool = False

    def __call__(self, value: float) -> bool:
        if not math.isfinite(value):
            return False
        v = abs(value) if self.magnitude else value
        if self.zero_ok and v == 0:
            return True
        return (v > self.low if self.low_open else v >= self.low) and v <= self.high


def _between(what: str, low: str, high: str) -> str:
    return f"{what} must be between {low} and {high}"


#: Plausible ranges per numeric column: (test, message when it fails).  Wide enough for
#: any discrete small-signal or power part; outside them a value is a typing slip (or a
#: unit lost) and would only break the analysis later.  The README table lists them.
RANGES: dict[str, tuple[Callable[[float], bool], str]] = {
    "value": (Plausible(1e-3, 1e10, zero_ok=True),
              "resistance must be 0 (a zero-ohm link) or between 1 mΩ and 10 GΩ"),
    "tolerance_pct": (Plausible(1e-3, 50), _between("tolerance", "0.001 %", "50 %")),
    "power_w": (Plausible(1e-3, 1e3), _between("power rating", "1 mW", "1 kW")),
    "tempco_ppm": (Plausible(0, 1e4, magnitude=True),
                   _between("tempco", "−10000", "+10000 ppm/°C")),
    "qty": (Plausible(0, 1e9), _between("quantity", "0", "1000000000 pieces")),
    "unit_cost": (Plausible(0, 1e6), _between("unit cost", "0", "1000000")),
    "hfe_min": (Plausible(1, 1e5), _between("hFE", "1", "100000")),
    "hfe_max": (Plausible(1, 1e5), _between("hFE", "1", "100000")),
    "vceo_max": (Plausible(0.1, 1e4), _between("VCEO rating", "100 mV", "10 kV")),
    "ic_max": (Plausible(1e-6, 1e3), _between("IC rating", "1 µA", "1 kA")),
    "pd_max_w": (Plausible(1e-3, 1e4), _between("dissipation rating", "1 mW", "10 kW")),
    "vbe_min": (Plausible(0.1, 1.5), _between("VBE", "0.1 V", "1.5 V")),
    "vbe_max": (Plausible(0.1, 1.5), _between("VBE", "0.1 V", "1.5 V")),
    "vce_sat": (Plausible(0, 5), _between("VCE(sat)", "0 V", "5 V")),
    "hfe_test_ic": (Plausible(1e-9, 1e3), _between("hFE test current", "1 nA", "1 kA")),
    "theta_ja": (Plausible(0.1, 2000), _between("θJA", "0.1 °C/W", "2000 °C/W")),
    "tj_max": (Plausible(25, 300, low_open=True),
               "TJ max must be more than 25 °C and at most 300 °C"),
    "icbo_a": (Plausible(0, 1), _between("leakage ICBO", "0 A", "1 A")),
    "is_a": (Plausible(1e-25, 1e-6), _between("IS", "1e-25 A", "1 µA")),
    "br": (Plausible(1e-3, 1e3), _between("BR", "0.001", "1000")),
    "nf": (Plausible(0.5, 3), _between("NF", "0.5", "3")),
    "nr": (Plausible(0.5, 3), _between("NR", "0.5", "3")),
    "vaf_v": (Plausible(1, 1e5), _between("VAF", "1 V", "100 kV")),
    "xtb": (Plausible(-10, 10), _between("XTB", "−10", "10")),
    "xti": (Plausible(-10, 20), _between("XTI", "−10", "20")),
    "eg_ev": (Plausible(0.1, 5), _between("EG", "0.1 eV", "5 eV")),
}
