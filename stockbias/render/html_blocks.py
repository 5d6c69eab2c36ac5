"""Small HTML building blocks shared by the report's sections.

Every function returns HTML text.  Text that may come from a user's file goes
through :func:`esc` before it is placed in the page; :func:`table` takes cells
that are already escaped HTML, so a caller escapes each datum once, where it
builds the cell.
"""

from __future__ import annotations

import base64
import html
from collections.abc import Sequence

from ..units import format_quantity

__all__ = ["bullet_list", "esc", "figure", "quantity", "table"]


def esc(value: object) -> str:
    """``str(value)`` with ``& < > " '`` escaped: inert text in an HTML page."""
    return html.escape(str(value), quote=True)


def quantity(value: object, unit: str) -> str:
    """A number in engineering notation with its unit (``V/V`` and bare ratios without a
    scale prefix); ``n/a`` for None, other objects as text."""
    if value is None or isinstance(value, bool) or not isinstance(value, (int, float)):
        return "n/a" if value is None else str(value)
    if unit in ("", "corners"):
        return f"{float(value):.4g}"
    if unit == "V/V":  # a voltage gain: a plain ratio, no scale prefix
        return f"{float(value):.4g} V/V"
    return format_quantity(float(value), unit, digits=4)


def table(header: Sequence[str], rows: Sequence[Sequence[str]],
          numeric: Sequence[int] = ()) -> str:
    """An HTML table; ``header`` is plain text (escaped here), ``rows`` hold escaped HTML.

    Columns whose index is in ``numeric`` are right-aligned and never wrap.
    """
    head = "".join(f"<th>{esc(h)}</th>" for h in header)
    body = []
    for row in rows:
        cells = "".join(f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>"
                        for i, c in enumerate(row))
        body.append(f"<tr>{cells}</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def bullet_list(items: Sequence[str], cls: str = "") -> str:
    """Plain-text items (escaped here) as an unnumbered list; "none" when empty."""
    if not items:
        return "<p class=\"small\">none</p>"
    attr = f' class="{cls}"' if cls else ""
    return "<ul>" + "".join(f"<li{attr}>{esc(i)}</li>" for i in items) + "</ul>"


def figure(png: bytes, caption: str) -> str:
    """A PNG embedded as a data URI with its caption (nothing fetched when the page opens)."""
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img alt="{esc(caption)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{esc(caption)}</figcaption></figure>")
