"""What a stage does today → after a change, as a block of lines per stage or transistor."""

from __future__ import annotations

from .blocks import fill, item

__all__ = ["purpose_change_lines"]


def purpose_change_lines(name: str, before: dict, after: dict | None, width: int,
                         held: str | None = None) -> list[str]:
    """``name`` and each figure of the stage, today → after (or today's alone when
    ``after`` is None), then ``held`` (the limits kept from today's figures).

    ``before``/``after``: figure key (``gain``, ``rin``, ``swing_pk``,
    ``supply_current``) → value in SI units, None where undefined.
    """
    from ..search.keep_purpose import FIGURE_LABELS, change_text

    items = [item(name, "bold")]
    for key, (label, unit) in FIGURE_LABELS.items():
        text = change_text(before.get(key), after.get(key) if after is not None else None, unit)
        if after is None:
            text = text.split(" →")[0] + (" V/V" if unit == "V/V" else "")
        items.append(item(f"{label} {text}"))
    lines = fill(items, width, "  ", hang="      ")
    if held:
        lines += fill([item(f"held: {held}")], width, "      ")
    return lines
