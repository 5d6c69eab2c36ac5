"""What `stock check` says about a valid stock file: counts, ranges, E-series, gaps."""

from __future__ import annotations

from dataclasses import dataclass, field

from .eseries import smallest_series_many
from .parts import Inventory

__all__ = ["StockSummary", "summarise"]


@dataclass(frozen=True)
class StockSummary:
    """A summary of one stock file, in SI units.

    Attributes
    ----------
    counts : dict
        Lines per kind (``resistor``, ``transistor``).
    resistance_min, resistance_max : float or None
        Range of the bias-usable resistor values, ohm (links excluded).
    series_of_value : dict
        part_id → the coarsest IEC 60063 series the value belongs to (None: off-series).
    zero_qty : list of str
        part_ids with no pieces left.
    links : list of str
        part_ids of zero-ohm links.
    assumptions : dict
        transistor part_id → statements of the defaults it relies on.
    tolerance_counts : dict
        Resistor lines per tolerance (key: the percentage as written by ``%g``).
    polarity_counts : dict
        Transistor lines per polarity.
    pieces : dict
        Pieces on the shelf per kind.
    device_data : dict
        transistor part_id → where its model card or datasheet points come from, and
        its hFE range over the collector currents the data covers (25 °C): ``source``,
        ``ic_min``, ``ic_max`` (A), ``hfe_min``, ``hfe_max``.
    """

    file: str
    sha256: str
    delimiter: str
    counts: dict[str, int]
    resistance_min: float | None
    resistance_max: float | None
    series_of_value: dict[str, str | None]
    series_counts: dict[str, int]
    zero_qty: list[str]
    links: list[str]
    assumptions: dict[str, list[str]]
    extra_columns: list[str] = field(default_factory=list)
    tolerance_counts: dict[str, int] = field(default_factory=dict)
    polarity_counts: dict[str, int] = field(default_factory=dict)
    pieces: dict[str, int] = field(default_factory=dict)
    device_data: dict[str, dict[str, object]] = field(default_factory=dict)

    def to_dict(self) -> dict[str, object]:
        return {
            "file": self.file, "sha256": self.sha256,
            "delimiter": self.delimiter, "counts": dict(self.counts),
            "resistance_min_ohm": self.resistance_min, "resistance_max_ohm": self.resistance_max,
            "series_of_value": dict(self.series_of_value),
            "series_counts": dict(self.series_counts),
            "zero_qty": list(self.zero_qty), "zero_ohm_links": list(self.links),
            "assumptions": {k: list(v) for k, v in self.assumptions.items()},
            "extra_columns": list(self.extra_columns),
            "tolerance_counts": dict(self.tolerance_counts),
            "polarity_counts": dict(self.polarity_counts),
            "pieces": dict(self.pieces),
            "device_data": {k: dict(v) for k, v in self.device_data.items()},
        }


def _tally(keys: list[str]) -> dict[str, int]:
    counts: dict[str, int] = {}
    for key in keys:
        counts[key] = counts.get(key, 0) + 1
    return counts


def summarise(inv: Inventory) -> StockSummary:
    """Summarise a validated inventory (the E-series of every value found at once)."""
    usable = inv.bias_resistors
    values = [r.value_ohm for r in usable]
    names = smallest_series_many(values)
    series = {r.part_id: name for r, name in zip(usable, names, strict=True)}
    counts = _tally([name or "off-series" for name in names])
    tolerances = sorted({r.tolerance_pct for r in inv.resistors})
    by_tol = _tally([f"{r.tolerance_pct:g}" for r in inv.resistors])
    return StockSummary(
        file=inv.path, sha256=inv.sha256, delimiter=inv.delimiter,
        counts={"resistor": len(inv.resistors), "transistor": len(inv.transistors)},
        resistance_min=min(values) if values else None,
        resistance_max=max(values) if values else None,
        series_of_value=series, series_counts=counts,
        zero_qty=[r.part_id for r in inv.resistors if r.qty == 0]
        + [t.part_id for t in inv.transistors if t.qty == 0],
        links=[r.part_id for r in inv.resistors if r.is_link],
        assumptions={t.part_id: t.assumptions() for t in inv.transistors if t.assumptions()},
        extra_columns=list(inv.extra_columns),
        tolerance_counts={f"{t:g}": by_tol[f"{t:g}"] for t in tolerances},
        polarity_counts=_tally([t.polarity for t in inv.transistors]),
        pieces={"resistor": sum(r.qty for r in inv.resistors),
                "transistor": sum(t.qty for t in inv.transistors)},
        device_data=_device_data(inv),
    )


def _device_data(inv: Inventory) -> dict[str, dict[str, object]]:
    """Each card-bearing transistor's hFE range over the currents its data covers."""
    out: dict[str, dict[str, object]] = {}
    for t in inv.transistors:
        if t.card is None:
            continue
        from .device_data import hfe_scale_over

        lo, hi = t.card.ic_span
        s_lo, s_hi, _, _ = hfe_scale_over(t.card, t.hfe_test_ic, lo, hi)
        out[t.part_id] = {"source": t.card.source, "ic_min": lo, "ic_max": hi,
                          "hfe_min": t.hfe_min * s_lo, "hfe_max": t.hfe_max * s_hi}
    return out
