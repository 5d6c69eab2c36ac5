"""KiCad netlist exports read into parts, pins and nets.

Two formats, both what KiCad 6 to 9 write with *File → Export → Netlist* (or
``kicad-cli sch export netlist``):

* the S-expression netlist (``.net``): ``(export (version "E") (components
  (comp (ref ..) (value ..) (fields (field (name ..) "text")) (libsource (lib ..)
  (part ..)))) (libparts (libpart (lib ..) (part ..) (pins (pin (num ..) (name
  ..))))) (nets (net (code ..) (name ..) (node (ref ..) (pin ..) (pinfunction ..)))))``;
* the XML netlist, the same tree as elements and attributes.

A pin's function is the node's ``pinfunction`` where KiCad wrote one, else the pin's
name in the symbol's ``libpart``: transistors are recognised by pin function (B, C,
E), never by pin number, which differs between symbols.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from .sexpr import Node, parse

__all__ = ["Component", "Net", "Netlist", "PinNode", "load_netlist", "parse_netlist"]


@dataclass(frozen=True)
class Component:
    """One symbol of the schematic as the netlist lists it.

    Attributes
    ----------
    ref : str
        Reference designator (``R3``, ``Q1``).
    value : str
        The Value field as written (free text: ``4k7``, ``10K 1%``, ``Q_NPN``).
    lib, part : str
        The symbol's library and name (``Device``, ``Q_NPN_BCE``); empty when absent.
    fields : dict
        User fields (``Stock part``, ``Polarity``...) → text.
    line : int or None
        Line of the component in the file (S-expression netlists).
    """

    ref: str
    value: str
    lib: str = ""
    part: str = ""
    fields: dict[str, str] = field(default_factory=dict)
    line: int | None = None

    @property
    def lib_id(self) -> str:
        """``lib:part`` as the schematic names the symbol."""
        return f"{self.lib}:{self.part}" if self.lib else self.part

    def field_value(self, name: str) -> str | None:
        """A field's text by name, case-insensitive; None when absent."""
        for key, text in self.fields.items():
            if key.casefold() == name.casefold():
                return text
        return None


@dataclass(frozen=True)
class PinNode:
    """One pin on a net: the part's reference, the pin number and its function."""

    ref: str
    pin: str
    function: str = ""


@dataclass(frozen=True)
class Net:
    """One net: its name as KiCad exports it (``+15V``, ``/base1``, ``Net-(Q1-C)``)."""

    code: str
    name: str
    nodes: tuple[PinNode, ...]
    line: int | None = None


@dataclass(frozen=True)
class Netlist:
    """Parts and nets of one netlist file."""

    path: str
    version: str
    components: dict[str, Component]
    nets: tuple[Net, ...]

    def pins_of(self, ref: str) -> list[tuple[PinNode, Net]]:
        """Every pin of a part with the net it is on."""
        return [(n, net) for net in self.nets for n in net.nodes if n.ref == ref]


def _line(text: str, offset: int) -> int:
    return text.count("\n", 0, offset) + 1


def _sexpr_netlist(text: str, path: str) -> Netlist:
    root = parse(text, path)
    if root.head != "export":
        raise InputError(f"not a KiCad netlist: the file starts with ({root.head} …), "
                         "expected (export …)", file=path, line=_line(text, root.start))
    version = root.text("version")
    pin_names: dict[tuple[str, str], dict[str, str]] = {}
    libparts = root.child("libparts")
    for lp in libparts.children("libpart") if libparts else ():
        names = {}
        pins = lp.child("pins")
        for pin_def in pins.children("pin") if pins else ():
            names[pin_def.text("num")] = pin_def.text("name")
        pin_names[(lp.text("lib"), lp.text("part"))] = names
    comps: dict[str, Component] = {}
    section = root.child("components")
    for comp in section.children("comp") if section else ():
        comps_add(comps, _sexpr_component(comp, text, path), path)
    nets: list[Net] = []
    section = root.child("nets")
    for net in section.children("net") if section else ():
        nodes = []
        for node in net.children("node"):
            ref, pin = node.text("ref"), node.text("pin")
            if not ref:
                raise InputError("a net node without a ref", file=path,
                                 line=_line(text, node.start), column="node")
            function = node.text("pinfunction")
            if not function and ref in comps:
                c = comps[ref]
                function = pin_names.get((c.lib, c.part), {}).get(pin, "")
            nodes.append(PinNode(ref, pin, function))
        nets.append(Net(net.text("code"), net.text("name"), tuple(nodes),
                        _line(text, net.start)))
    return Netlist(path, version, comps, tuple(nets))


def comps_add(comps: dict[str, Component], comp: Component, path: str) -> None:
    """Add ``comp``; a reference used twice is an error (the netlist is not annotated)."""
    if not comp.ref or comp.ref.endswith("?"):
        raise InputError("a part is not annotated (no reference number); annotate the "
                         "schematic and export again", file=path, line=comp.line,
                         column="ref", text=comp.ref)
    if comp.ref in comps:
        raise InputError("two parts share this reference; annotate the schematic and "
                         "export again", file=path, line=comp.line, column="ref",
                         text=comp.ref)
    comps[comp.ref] = comp


def _sexpr_component(comp: Node, text: str, path: str) -> Component:
    fields: dict[str, str] = {}
    section = comp.child("fields")
    for f in section.children("field") if section else ():
        atoms = f.atoms()
        fields[f.text("name")] = atoms[0].value if atoms else ""
    for prop in comp.children("property"):
        fields.setdefault(prop.text("name"), prop.text("value"))
    lib = comp.child("libsource")
    return Component(ref=comp.text("ref"), value=comp.text("value"),
                     lib=lib.text("lib") if lib else "", part=lib.text("part") if lib else "",
                     fields=fields, line=_line(text, comp.start))


def _xml_netlist(text: str, path: str) -> Netlist:
    import xml.etree.ElementTree as ET

    try:
        root = ET.fromstring(text)
    except ET.ParseError as exc:
        line = exc.position[0] if exc.position else None
        raise InputError(f"not well-formed XML: {exc}", file=path, line=line) from None
    if root.tag != "export":
        raise InputError(f"not a KiCad netlist: the root element is <{root.tag}>, expected "
                         "<export>", file=path)
    pin_names: dict[tuple[str, str], dict[str, str]] = {}
    for lp in root.iterfind("libparts/libpart"):
        pin_names[(lp.get("lib", ""), lp.get("part", ""))] = {
            p.get("num", ""): p.get("name", "") for p in lp.iterfind("pins/pin")}
    comps: dict[str, Component] = {}
    for comp in root.iterfind("components/comp"):
        fields = {f.get("name", ""): (f.text or "") for f in comp.iterfind("fields/field")}
        for prop in comp.iterfind("property"):
            fields.setdefault(prop.get("name", ""), prop.get("value", ""))
        src = comp.find("libsource")
        value = comp.find("value")
        comps_add(comps, Component(
            ref=comp.get("ref", ""), value=(value.text or "") if value is not None else "",
            lib=src.get("lib", "") if src is not None else "",
            part=src.get("part", "") if src is not None else "", fields=fields), path)
    nets = []
    for net in root.iterfind("nets/net"):
        nodes = []
        for node in net.iterfind("node"):
            ref, pin = node.get("ref", ""), node.get("pin", "")
            function = node.get("pinfunction", "")
            if not function and ref in comps:
                c = comps[ref]
                function = pin_names.get((c.lib, c.part), {}).get(pin, "")
            nodes.append(PinNode(ref, pin, function))
        nets.append(Net(net.get("code", ""), net.get("name", ""), tuple(nodes)))
    version = root.get("version", "")
    return Netlist(path, version, comps, tuple(nets))


def parse_netlist(text: str, path: str = "<netlist>") -> Netlist:
    """Read a KiCad netlist (S-expression or XML, told apart by the first character).

    Raises
    ------
    InputError
        Neither format, malformed text, or parts without a reference.
    """
    body = text.lstrip("\ufeff \t\r\n")
    if body.startswith("("):
        return _sexpr_netlist(text, path)
    if body.startswith("<"):
        return _xml_netlist(text, path)
    raise InputError("not a KiCad netlist: expected an S-expression '(export …)' or XML "
                     "'<export …>'", file=path, line=1, text=body[:20] or None)


def load_netlist(path: str | Path) -> Netlist:
    """Read a KiCad netlist file; see :func:`parse_netlist`."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise InputError(f"cannot read the netlist: {exc.strerror}", file=str(p)) from None
    except UnicodeDecodeError:
        raise InputError("the netlist is not UTF-8 text", file=str(p)) from None
    return parse_netlist(text, str(p))
