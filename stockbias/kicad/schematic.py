"""A KiCad schematic (``.kicad_sch``) with new values, edited as text.

Only the string token of each changed symbol's ``(property "Value" "…")`` is
replaced, and its ``(property "Stock part" "…")`` (replaced, or added as a hidden
copy of the Value property right after it).  Every other byte of the file stays
as it was: libraries that load and save the whole schematic rewrite far more than
that.  Strings are written the way KiCad writes them (backslash before ``"`` and
``\\``).  A placed symbol is a direct child ``(symbol (lib_id …) …)`` of
``kicad_sch``; the definitions inside ``lib_symbols`` are never touched.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from itertools import pairwise

from ..errors import InputError
from . import STOCK_FIELD
from .changes import Change
from .sexpr import Atom, Node, parse, quote

__all__ = ["SymbolEdit", "edit_schematic", "edits_of"]

#: the first schematic file version that writes ``(hide yes)`` (KiCad 8); older: ``hide``
_HIDE_YES_FROM = 20231120


@dataclass(frozen=True)
class SymbolEdit:
    """New Value (None: keep) and stock part (None: keep) of the symbol ``reference``;
    ``value_if`` set: change the Value only where it reads exactly that today."""

    reference: str
    value: str | None
    stock_part: str | None
    value_if: str | None = None


def edits_of(changes: Iterable[Change]) -> tuple[list[SymbolEdit], list[str]]:
    """Symbol edits for a change list, and notes on changes no symbol edit can carry
    (a pair on the schematic that becomes one part, a role without a designator)."""
    edits, notes = [], []
    for c in changes:
        refs = c.designators
        if not refs:
            notes.append(f"{c.role}@{c.stage}: no designator in [stage.refs]; not edited")
            continue
        if c.is_transistor:
            edits.append(SymbolEdit(refs[0], c.new_value, c.part_id or None, c.old_value))
            continue
        if len(refs) == 1:
            edits.append(SymbolEdit(refs[0], c.new_value, c.part_id or None))
            continue
        values = c.new_value.replace("|", "+").split("+")
        parts = c.part_id.replace("|", "+").split("+") if c.part_id else []
        same_shape = len(values) == len(refs) and \
            ("|" in c.reference) == ("|" in c.new_value)
        if not same_shape:
            notes.append(f"{c.reference} ({c.role}@{c.stage}) becomes {c.new_value}: the "
                         "schematic needs a different number of parts; edit it by hand")
            continue
        for i, ref in enumerate(refs):
            edits.append(SymbolEdit(ref, values[i], parts[i] if i < len(parts) else None))
    return edits, notes


def _line(text: str, offset: int) -> int:
    return text.count("\n", 0, offset) + 1


def _props(symbol: Node) -> dict[str, Node]:
    out: dict[str, Node] = {}
    for prop in symbol.children("property"):
        atoms = prop.atoms()
        if atoms:
            out.setdefault(atoms[0].value, prop)
    return out


def _instance_refs(symbol: Node) -> set[str]:
    refs: set[str] = set()
    inst = symbol.child("instances")
    for project in inst.children("project") if inst else ():
        for path in project.children("path"):
            ref = path.text("reference")
            if ref:
                refs.add(ref)
    return refs


def _new_property(text: str, value_prop: Node, stock: str, version: int,
                  next_id: int | None) -> str:
    """A hidden copy of the Value property named ``Stock part`` (same layout as the file)."""
    start = value_prop.start
    name_atom, value_atom = value_prop.atoms()[:2]
    pieces = [(name_atom.start, name_atom.end, quote(STOCK_FIELD)),
              (value_atom.start, value_atom.end, quote(stock))]
    ident = value_prop.child("id")
    if ident is not None and next_id is not None and ident.atoms():
        id_atom = ident.atoms()[0]
        pieces.append((id_atom.start, id_atom.end, str(next_id)))
    effects = value_prop.child("effects")
    if effects is not None:
        hidden = any(isinstance(i, Atom) and i.value == "hide" for i in effects.items) or \
            effects.child("hide") is not None
        if not hidden:
            token = " (hide yes)" if version >= _HIDE_YES_FROM else " hide"
            pieces.append((effects.end - 1, effects.end - 1, token))
    copy = text[start:value_prop.end]
    for a, b, new in sorted(pieces, reverse=True):
        copy = copy[:a - start] + new + copy[b - start:]
    if effects is None:
        hide = "(hide yes)" if version >= _HIDE_YES_FROM else "hide"
        copy = copy[:-1] + f" (effects (font (size 1.27 1.27)) {hide}))"
    return copy


def edit_schematic(text: str, edits: Iterable[SymbolEdit], path: str = "<schematic>"
                   ) -> str:
    """The schematic text with the edits applied (see the module notes).

    Raises
    ------
    InputError
        Not a schematic; a reference not on it; a symbol shared by several sheet instances
        (its value cannot differ between them).
    """
    root = parse(text, path)
    if root.head != "kicad_sch":
        raise InputError(f"not a KiCad schematic: the file starts with ({root.head} …), "
                         "expected (kicad_sch …)", file=path, line=1)
    try:
        version = int(root.text("version", "0"))
    except ValueError:
        version = 0
    newline = "\r\n" if "\r\n" in text else "\n"
    by_ref: dict[str, list[Node]] = {}
    shared: dict[str, set[str]] = {}
    for sym in root.children("symbol"):
        props = _props(sym)
        ref_prop = props.get("Reference")
        refs = _instance_refs(sym)
        if ref_prop is not None and len(ref_prop.atoms()) > 1:
            refs.add(ref_prop.atoms()[1].value)
        for ref in refs:
            by_ref.setdefault(ref, []).append(sym)
            shared[ref] = refs
    spans: list[tuple[int, int, str]] = []
    for edit in edits:
        symbols = by_ref.get(edit.reference)
        if not symbols:
            raise InputError(f"{edit.reference} is not on this schematic; give the schematic "
                             "the netlist was exported from", file=path,
                             column="--schematic", text=edit.reference)
        if len(shared[edit.reference]) > 1:
            others = sorted(shared[edit.reference] - {edit.reference})
            raise InputError(f"{edit.reference} is on a sheet used more than once (also "
                             f"{', '.join(others)}); its value is shared, so edit it by hand",
                             file=path, line=_line(text, symbols[0].start),
                             column="--schematic", text=edit.reference)
        for sym in symbols:   # every unit of a multi-unit part
            spans.extend(_symbol_spans(text, sym, edit, version, newline, path))
    spans.sort()
    for (_a1, b1, _), (a2, _b2, _n) in pairwise(spans):
        if a2 < b1:
            raise InputError("two edits of one property; a reference is changed twice",
                             file=path, line=_line(text, a2), column="--schematic")
    out = text
    for a, b, new in reversed(spans):
        out = out[:a] + new + out[b:]
    return out


def _symbol_spans(text: str, sym: Node, edit: SymbolEdit, version: int, newline: str,
                  path: str) -> list[tuple[int, int, str]]:
    props = _props(sym)
    value = props.get("Value")
    spans = []
    if value is None or len(value.atoms()) < 2:
        raise InputError(f"{edit.reference} has no Value property", file=path,
                         line=_line(text, sym.start), column="--schematic", text=edit.reference)
    value_atom = value.atoms()[1]
    if edit.value is not None and (edit.value_if is None or value_atom.value == edit.value_if):
        spans.append((value_atom.start, value_atom.end, quote(edit.value)))
    if edit.stock_part is not None:
        stock = props.get(STOCK_FIELD)
        if stock is not None and len(stock.atoms()) > 1:
            a = stock.atoms()[1]
            spans.append((a.start, a.end, quote(edit.stock_part)))
        else:
            ids = [int(p.text("id")) for p in props.values() if p.text("id").isdigit()]
            indent_start = text.rfind("\n", 0, value.start) + 1
            indent = text[indent_start:value.start]
            if indent.strip():       # the property does not start its line: one space
                indent, lead = "", " "
            else:
                lead = newline
            new = _new_property(text, value, edit.stock_part, version,
                                max(ids) + 1 if ids else None)
            spans.append((value.end, value.end, lead + indent + new))
    return spans
