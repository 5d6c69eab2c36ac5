"""The one notation for a corner of the tolerance box, on every screen and in every report.

``VCC+ 12.6 V, R1− 46.95 kΩ, hFE+ β 525.3, VBE− 515.2 mV, ambient 55 °C, TJ 57.4 °C
self-heated``: each parameter's name, its setting (+ the high end of its range, − the
low end, ~ a value inside) and the value the analysis used there.  The ambient is
always named as the ambient, the junction as TJ, so neither reads as the other.
"""

from __future__ import annotations

from ..units import format_quantity

__all__ = ["CORNER_KEY", "CORNER_LEGEND", "corner_items", "corner_text"]

#: The notation in one short line, printed wherever corners are shown.
CORNER_KEY = ("Corners: + the high end of a range, − the low end, ~ a value inside; "
              "ambient = the air temperature, TJ = the junction's.")

#: What a corner in the tables means (the drift rule and the rail convention), in full.
CORNER_LEGEND = (
    "A corner names each parameter's setting (+ the high end of its range, − the low end, "
    "~ a value inside) and the value the analysis used there: supplies as set, the negative "
    "rail by magnitude (|VEE|+ is the largest magnitude); each resistor with its tolerance "
    "and tempco drift applied (R·(1 ± tol)·(1 + tempco·(T − 25 °C)) at its extreme over the "
    "ambient range, either sign for an unsigned tempco); β = hFE·(T/298.15 K)^XTB, "
    "VBE = VBE(25 °C) − 2 mV/°C·(T − 25 °C) (exponential model: the VBE at the hFE test "
    "current), ICBO doubling every 10 °C, at the device temperature: the ambient, or TJ "
    "where the junction is self-heated.")

_AXIS_LABELS = {"vcc": "VCC", "vee": "|VEE|", "hfe": "hFE", "vbe": "VBE", "icbo": "ICBO"}
_CORNER_UNITS = {"vcc": "V", "vee": "V", "vbe": "V", "icbo": "A"}


def corner_items(corner: dict | None) -> list[str]:
    """A corner as one text per parameter (see :func:`corner_text`)."""
    if not corner:
        return []
    parts = []
    for axis, entry in corner.items():
        if not isinstance(entry, dict):
            continue
        setting, value = entry.get("setting"), float(entry["value"])
        used = float(entry.get("used", value))
        mark = {"max": "+", "min": "−"}.get(str(setting), "~")
        if axis == "junction_c":
            parts.append(f"TJ {used:.4g} °C self-heated")
        elif axis == "ambient_c":
            parts.append(f"ambient {used:.4g} °C" if setting in ("min", "max")
                         else f"ambient~ {used:.4g} °C")
        elif axis == "hfe":
            parts.append(f"hFE{mark} β {used:.4g}")
        else:
            unit = _CORNER_UNITS.get(axis, "ohm")
            label = _AXIS_LABELS.get(axis, axis)
            parts.append(f"{label}{mark} {format_quantity(abs(used), unit, digits=4)}")
    return parts


def corner_text(corner: dict | None) -> str:
    """A corner with the values used: ``VCC+ 12.6 V, R1− 9.31 kΩ, hFE+ β 342, ambient 55 °C``.

    The sign after a name is the setting (+ high end, − low end, ~ inside); the value
    beside it is the one the analysis used at the corner's device temperature
    (``used``: β(T), VBE(T), ICBO(T); resistors with tolerance and drift).  The
    negative rail is named by magnitude: ``|VEE|+`` is its largest magnitude.  The
    ambient is named ``ambient`` (``ambient~`` inside its range), the self-heated
    junction ``TJ``.
    """
    return ", ".join(corner_items(corner))
