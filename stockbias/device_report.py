"""What `stock curves` reports about each transistor's device data (plain data, and
its terminal rendering)."""

from __future__ import annotations

from typing import Any

from .device_data import hfe_scale_over
from .parts import Transistor
from .units import format_quantity

__all__ = ["device_rows", "render_devices"]

_UNITS = {"is": "A", "ise": "A", "isc": "A", "ikf": "A", "ikr": "A", "vaf": "V", "var": "V",
          "eg": "eV", "tnom": "°C", "rb": "Ω", "re": "Ω", "rc": "Ω"}


def device_rows(transistors: list[Transistor]) -> list[dict[str, Any]]:
    """One JSON-ready record per transistor with device data (SI units)."""
    rows = []
    for t in transistors:
        card = t.card
        assert card is not None
        lo, hi = card.ic_span
        s_lo, s_hi, _, _ = hfe_scale_over(card, t.hfe_test_ic, lo, hi)
        row: dict[str, Any] = {
            "part_id": t.part_id, "kind": card.kind, "source": card.source,
            "params": dict(sorted(card.params.items())),
            "ic_min": lo, "ic_max": hi,
            "hfe_min": t.hfe_min * s_lo, "hfe_max": t.hfe_max * s_hi,
            "bin": {"hfe_min": t.hfe_min, "hfe_max": t.hfe_max, "at_ic": t.hfe_test_ic},
        }
        if card.fit is not None:
            row.update({"fitted": list(card.fit.fitted), "held": dict(card.fit.held),
                        "worst_hfe_error": card.fit.worst_hfe_error,
                        "worst_vbe_error_v": card.fit.worst_vbe_error_v,
                        "points": int(card.points.ic.size)})
        rows.append(row)
    return rows


def _value(name: str, value: float) -> str:
    unit = _UNITS.get(name, "")
    if unit in ("V", "Ω") or (unit == "A" and value >= 1e-12):
        return format_quantity(value, "ohm" if unit == "Ω" else unit)
    return f"{value:.4g}{' ' + unit if unit else ''}"


def render_devices(console: Any, rows: list[dict[str, Any]]) -> None:
    """Print each device's source, parameters and residuals; plain lines that wrap."""
    import textwrap

    out = console

    class _Wrapped:  # lines wrapped between words to the console width
        def print(self, text: str, markup: bool = False) -> None:
            indent = " " * (len(text) - len(text.lstrip()) + 2)
            out.print(textwrap.fill(text, width=max(out.width, 40), subsequent_indent=indent,
                                    break_long_words=False, break_on_hyphens=False),
                      markup=False)

    console = _Wrapped()
    for row in rows:
        span = f"{format_quantity(row['ic_min'], 'A')}–{format_quantity(row['ic_max'], 'A')}"
        b = row["bin"]
        console.print(f"{row['part_id']}: {row['source']}", markup=False)
        console.print(f"  hFE {row['hfe_min']:.0f}–{row['hfe_max']:.0f} over IC {span} at "
                      f"25 °C (bin {b['hfe_min']:g}–{b['hfe_max']:g} at "
                      f"{format_quantity(b['at_ic'], 'A')})", markup=False)
        fitted = set(row.get("fitted", []))
        items = [f"{name.upper()} {_value(name, v)}{' (fitted)' if name in fitted else ''}"
                 for name, v in row["params"].items()]
        console.print("  " + ", ".join(items), markup=False)
        if "worst_hfe_error" in row:
            console.print(f"  fit to {row['points']} points: hFE within "
                          f"{100 * row['worst_hfe_error']:.2f} %, VBE within "
                          f"{1e3 * row['worst_vbe_error_v']:.2f} mV", markup=False)
            for name, why in row["held"].items():
                if name not in fitted:
                    console.print(f"  held {name.upper()}: {why}", markup=False)
