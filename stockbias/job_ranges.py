"""Plausible ranges of the job keys: one table, one check.

A value outside its range is far more likely a typo or a unit slip (``ic =
1.5`` for 1.5 mA, ``volts = 1e308``) than a design, and many such values would
only fail deep inside the analysis.  The job reader refuses them with a
one-line error naming the key, the range and the reason.  Values are in the
units the job writes (SI base units, °C, percentage numbers, fractions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .units import format_quantity

__all__ = ["PLAUSIBLE", "Plausible", "implausible"]


@dataclass(frozen=True)
class Plausible:
    """The plausible range of one job key.

    Attributes
    ----------
    low, high : float
        The ends of the range, in the key's unit.
    unit : str
        The key's unit (a :data:`stockbias.units.UNITS` entry) for messages.
    why : str
        Why the range ends where it does, in the user's terms.
    low_open, high_open : bool
        The end itself is excluded.
    whole : bool
        Only whole numbers.
    """

    low: float
    high: float
    unit: str
    why: str
    low_open: bool = False
    high_open: bool = False
    whole: bool = False

    def _show(self, value: float) -> str:
        if self.whole or (self.unit == "" and value == int(value) and abs(value) < 1e7):
            return str(int(value))
        if self.unit == "s":  # seconds read best without a prefix: 86400 s, not 86.4 ks
            return f"{value:g} s"
        return format_quantity(value, self.unit)

    def words(self) -> str:
        """The range in words: ``at least 100 mV and at most 1 kV``."""
        low = ("more than " if self.low_open else "at least ") + self._show(self.low)
        high = ("below " if self.high_open else "at most ") + self._show(self.high)
        return f"{low} and {high}"

    def contains(self, value: float) -> bool:
        if not math.isfinite(value):
            return False
        above = value > self.low if self.low_open else value >= self.low
        below = value < self.high if self.high_open else value <= self.high
        return above and below and (not self.whole or value == math.floor(value))


_SILICON = "a rail below 0.1 V cannot forward-bias a silicon junction; above 1 kV is beyond " \
           "discrete small-signal transistors"
_CURRENT = "small-signal and power bipolar transistors are biased between 100 nA and 10 A"
_TOL = "a supply further off than 50 % is not a rail to bias from"
_TEMP = "silicon parts are rated for -55 °C to +125 °C at the widest"

#: key -> plausible range; the keys of every section (and of [stage.target] and
#: [stage.limits]) that hold numbers.
PLAUSIBLE: dict[str, Plausible] = {
    # [supply]
    "volts": Plausible(0.1, 1000.0, "V", "the positive rail (a PNP stage also runs from a "
                       "positive supply); " + _SILICON),
    "negative_volts": Plausible(-1000.0, -0.1, "V", "the signed negative rail, e.g. -6; "
                                + _SILICON),
    "tolerance_pct": Plausible(0.0, 50.0, "%", _TOL, high_open=True),
    "negative_tolerance_pct": Plausible(0.0, 50.0, "%", _TOL, high_open=True),
    # [target]
    "ic": Plausible(100e-9, 10.0, "A", _CURRENT),
    "ic_min": Plausible(100e-9, 10.0, "A", _CURRENT),
    "ic_max": Plausible(100e-9, 10.0, "A", _CURRENT),
    "ic_window_pct": Plausible(0.1, 100.0, "%", "the window is ic ± this percentage; below "
                               "0.1 % no resistor tolerance fits, at 100 % ic_min would be 0",
                               high_open=True),
    "vce_min": Plausible(0.0, 1000.0, "V", "headroom above the largest plausible supply is "
                         "a typo"),
    "swing_pk": Plausible(1e-3, 1000.0, "V", "a peak swing from 1 mV up to the largest "
                          "plausible supply"),
    "gain_min": Plausible(1e-3, 1e6, "", "the magnitude of a stage's voltage gain"),
    "gain_max": Plausible(1e-3, 1e6, "", "the magnitude of a stage's voltage gain"),
    "yield_min": Plausible(50.0, 100.0, "%", "the share of built boards that pass, in percent; "
                           "below 50 % is no build target, and 100 % cannot be shown by "
                           "sampling (ask for 99.9)",
                           high_open=True),
    "yield_confidence": Plausible(50.0, 100.0, "%", "the one-sided confidence of the yield "
                                  "claim, in percent; below 50 % it claims nothing, and "
                                  "100 % cannot be reached by sampling", high_open=True),
    "rin_min": Plausible(1.0, 1e9, "ohm", "an input resistance from 1 Ω up to an "
                         "electrometer's 1 GΩ"),
    "divider_ratio_min": Plausible(0.0, 1000.0, "", "the divider current as a multiple of "
                                   "the base current; 0 drops the rule, 10 is the rule of "
                                   "thumb, beyond 1000 the divider carries more than IC"),
    # [limits]
    "supply_power_max": Plausible(1e-6, 10e3, "W", "1 µW is below any biased stage, 10 kW "
                                  "beyond any bias network"),
    "supply_current_max": Plausible(100e-9, 100.0, "A", "the current drawn from the supply, "
                                    "from 100 nA up to beyond any biased stage's"),
    "resistor_derating": Plausible(0.0, 1.0, "", "the fraction of the derated rating a part "
                                   "may use", low_open=True),
    "tj_max": Plausible(25.0, 250.0, "°C", "silicon junctions are rated 125 to 200 °C; "
                        "a limit must lie above the 25 °C the ratings are given at",
                        low_open=True),
    "derating_knee_c": Plausible(-60.0, 300.0, "°C", "resistor derating curves lie within "
                                 "-60 °C to 300 °C"),
    "derating_zero_c": Plausible(-60.0, 300.0, "°C", "resistor derating curves lie within "
                                 "-60 °C to 300 °C"),
    # [environment]
    "ambient_min_c": Plausible(-60.0, 200.0, "°C", _TEMP),
    "ambient_max_c": Plausible(-60.0, 200.0, "°C", _TEMP),
    # [small_signal]
    "load": Plausible(1.0, 1e9, "ohm", "1 Ω is below any loudspeaker, 1 GΩ an electrometer "
                      "input"),
    # [build]
    "quantity": Plausible(1, 10_000_000, "", "boards built in one batch", whole=True),
    "default_tolerance_pct": Plausible(0.0, 50.0, "%", "resistor tolerances run from 0.01 % "
                                       "to 20 %", low_open=True),
    # [search]
    "top": Plausible(1, 1000, "", "designs shown", whole=True),
    "time_limit_s": Plausible(0.0, 86400.0, "s", "at most a day", low_open=True),
    "seed": Plausible(0, 2**31 - 1, "", "the solver's random seed is a 32-bit signed integer",
                      whole=True),
}


def implausible(key: str, value: float) -> str | None:
    """Why ``value`` is not plausible for ``key``; ``None`` if it is (or ``key`` has no range).

    Parameters
    ----------
    key : str
        A job key (``"volts"``, ``"ic"``, ...).
    value : float
        Its value in the key's unit.

    Returns
    -------
    str or None
        A message such as ``"volts must be at least 100 mV and at most 1 kV (...)"``.
    """
    rng = PLAUSIBLE.get(key)
    if rng is None or rng.contains(value):
        return None
    if math.isfinite(value) and rng.whole and value != math.floor(value) and \
            rng.low <= value <= rng.high:
        return f"{key} must be a whole number, {rng.words()}"
    return f"{key} must be {rng.words()} ({rng.why})"
