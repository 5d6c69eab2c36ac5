"""The DC graph of a netlist: what a bias analysis sees of the board.

* Parts are sorted by kind: a **transistor** has pins whose functions (or names)
  are B, C and E, one each; a **resistor** is a two-pin ``R…`` part; a
  **capacitor** (``C…``) is open at DC; an **inductor**, ferrite bead
  (``L…``, ``FB…``), net tie or a resistor whose value is 0 Ω is a **link** and
  joins its nets; a part with one pin (test point, mounting hole) touches nothing;
  anything else (diodes, ICs, connectors…) is **other**.
* Nets joined by links become one node.  A node whose name says it is a supply
  rail (``+15V``, ``-6V``, ``+3V3``, ``GND``, ``VCC``; see :func:`rail_of`) is a
  rail; ``--rail NET=VOLTS`` sets or overrides a rail's voltage.
* Resistors in a chain through a node nothing else touches are one series
  element; resistors between the same two nodes are one parallel element.
"""

from __future__ import annotations

import re
from collections import defaultdict
from dataclasses import dataclass, field

from ..errors import InputError, NotationError
from ..units import parse_quantity
from .netlist import Component, Netlist

__all__ = ["DcGraph", "Element", "Rail", "Transistor", "build_graph", "part_kind",
           "rail_of", "resistor_value"]

_GROUNDS = {"GND", "GNDA", "GNDD", "AGND", "DGND", "PGND", "GNDPWR", "GNDREF", "0V", "EARTH",
            "GND_ANALOG", "GND_DIGITAL"}
_POSITIVE = {"VCC", "VDD", "V+", "+V", "VBAT", "VIN", "VS+", "VPOS", "VP"}
_NEGATIVE = {"VEE", "VSS", "V-", "-V", "VS-", "VNEG", "VN"}
_VOLTS = re.compile(r"(?P<sign>[+-]?)(?P<int>\d+)(?:[.,](?P<frac>\d+))?V(?P<frac2>\d+)?"
                    r"(?P<tail>[A-Za-z_]*)")
_FUNCTIONS = {"B": "B", "BASE": "B", "C": "C", "COLLECTOR": "C", "E": "E", "EMITTER": "E"}
_NO_VALUE = {"", "~", "DNP", "NC", "?", "R", "VALUE"}


@dataclass(frozen=True)
class Rail:
    """A supply rail: its net name, its voltage (None: not known) and its sign."""

    name: str
    volts: float | None
    sign: int  # +1 positive, -1 negative, 0 ground

    @property
    def is_ground(self) -> bool:
        return self.sign == 0


def rail_of(net_name: str, overrides: dict[str, float] | None = None) -> Rail | None:
    """The rail a net's name says it is, or None for a signal net.

    ``+15V``, ``15V``, ``-6V``, ``+3V3``, ``+3.3V`` carry their voltage; ``GND``,
    ``AGND``, ``0V`` are ground; ``VCC``, ``VDD``, ``V+`` are positive and ``VEE``,
    ``VSS``, ``V-`` negative rails of unknown voltage.  ``overrides`` (net name →
    volts, from ``--rail``) wins over the name.
    """
    name = net_name.rsplit("/", 1)[-1] if net_name.startswith("/") else net_name
    for key in (net_name, name):
        if overrides and key in overrides:
            v = overrides[key]
            return Rail(name, v, 0 if v == 0 else (1 if v > 0 else -1))
    upper = name.upper()
    if upper in _GROUNDS:
        return Rail(name, 0.0, 0)
    m = _VOLTS.fullmatch(name)
    if m and not (m["frac"] and m["frac2"]):
        frac = m["frac"] or m["frac2"] or "0"
        volts = float(f"{m['int']}.{frac}") * (-1 if m["sign"] == "-" else 1)
        if volts == 0:
            return Rail(name, 0.0, 0)
        return Rail(name, volts, 1 if volts > 0 else -1)
    if upper in _POSITIVE:
        return Rail(name, None, 1)
    if upper in _NEGATIVE:
        return Rail(name, None, -1)
    return None


def _letters(ref: str) -> str:
    m = re.match(r"[A-Za-z_]+", ref)
    return m.group(0).upper() if m else ""


def resistor_value(text: str) -> float | None:
    """The resistance a KiCad Value names (``4k7``, ``4.7k``, ``10K 1%``, ``470R 0.25W``),
    read with the stock notation; None when it names none (empty, ``~``, ``DNP``)."""
    body = text.strip()
    if body.upper() in _NO_VALUE:
        return None
    tokens = [t for t in re.split(r"[\s/,;]+", body) if t]
    for candidate in (body, tokens[0] if tokens else "",
                      "".join(tokens[:2]) if len(tokens) > 1 else ""):
        if not candidate:
            continue
        try:
            value = parse_quantity(candidate, "ohm")
        except NotationError:
            continue
        return value if value >= 0 else None
    return None


def part_kind(comp: Component, functions: set[str], pins: int) -> str:
    """``transistor``, ``resistor``, ``link``, ``capacitor``, ``single`` or ``other``."""
    if {"B", "C", "E"} <= functions:
        return "transistor"
    letters = _letters(comp.ref)
    part = comp.part.upper()
    if pins <= 1:
        return "single"
    if pins == 2 and (letters == "R" or re.match(r"R(_|$)", part)):
        value = resistor_value(comp.value)
        return "link" if value == 0 else "resistor"
    if letters in ("L", "FB") or part.startswith(("L_", "FERRITE")) or part == "L" or \
            part.startswith("NETTIE") or letters == "NT":
        return "link"
    if letters == "C" or re.match(r"C(P)?(_|$)", part):
        return "capacitor"
    return "other"


@dataclass(frozen=True)
class Transistor:
    """A bipolar transistor: its reference, terminal nodes and polarity (None: not said)."""

    ref: str
    b: int
    c: int
    e: int
    polarity: str | None
    polarity_from: str


@dataclass(frozen=True)
class Element:
    """A resistive element between two nodes: one resistor, a series chain or a parallel set.

    ``arrangement`` is ``single``, ``series`` or ``parallel``; ``mixed`` when chains and
    parallel sets nest (no board role holds that).
    """

    refs: tuple[str, ...]
    arrangement: str
    a: int
    b: int

    def other(self, node: int) -> int:
        return self.b if node == self.a else self.a

    @property
    def label(self) -> str:
        sep = {"series": "+", "parallel": "|"}.get(self.arrangement, ",")
        return sep.join(self.refs)


@dataclass
class DcGraph:
    """Nodes (joined nets), rails, transistors, resistive elements and the rest."""

    names: list[str]
    rails: dict[int, Rail]
    transistors: list[Transistor]
    elements: list[Element]
    values: dict[str, float | None]  # resistor ref → ohm (None: no value)
    value_text: dict[str, str]
    components: dict[str, Component]
    capacitors: list[tuple[str, int, int]]
    others: dict[str, set[int]]  # other part ref → nodes it touches
    shorted: list[str] = field(default_factory=list)  # resistors with both ends on one node
    kinds: dict[str, str] = field(default_factory=dict)

    def touching(self, node: int) -> list[Element]:
        return [e for e in self.elements if node in (e.a, e.b)]


class _Union:
    def __init__(self, n: int) -> None:
        self.parent = list(range(n))

    def find(self, i: int) -> int:
        while self.parent[i] != i:
            self.parent[i] = self.parent[self.parent[i]]
            i = self.parent[i]
        return i

    def join(self, a: int, b: int) -> None:
        ra, rb = self.find(a), self.find(b)
        if ra != rb:
            self.parent[max(ra, rb)] = min(ra, rb)


def _polarity(comp: Component) -> tuple[str | None, str]:
    """NPN or PNP from the symbol name, the value or a field; (None, "") when none says."""
    pattern = re.compile(r"(?<![A-Za-z])(NPN|PNP)(?![A-Za-z])", re.IGNORECASE)
    for source, text in (("symbol", comp.lib_id), ("value", comp.value),
                         *((f"field '{k}'", v) for k, v in comp.fields.items())):
        found = {m.upper() for m in pattern.findall(text or "")}
        if len(found) == 1:
            return found.pop(), source
    return None, ""


def build_graph(netlist: Netlist, rails: dict[str, float] | None = None) -> DcGraph:
    """The DC graph of a netlist (see the module notes).

    Parameters
    ----------
    netlist : Netlist
    rails : dict, optional
        Net name → volts from ``--rail``; such a net is a rail whatever its name.

    Raises
    ------
    InputError
        A link (inductor, bead, 0 Ω) joins two rails of different voltage.
    """
    nets = list(netlist.nets)
    pin_net: dict[str, dict[str, int]] = defaultdict(dict)
    functions: dict[str, dict[str, int]] = defaultdict(dict)
    for i, net in enumerate(nets):
        for pn in net.nodes:
            pin_net[pn.ref][pn.pin] = i
            fn = _FUNCTIONS.get(pn.function.strip().upper().split("_")[0]) \
                if pn.function else None
            if fn is not None:
                functions[pn.ref].setdefault(fn, i)
    kinds = {ref: part_kind(comp, set(functions.get(ref, {})), len(pin_net.get(ref, {})))
             for ref, comp in netlist.components.items()}
    union = _Union(len(nets))
    for ref, kind in kinds.items():
        if kind == "link":
            joined = list(pin_net[ref].values())
            for other in joined[1:]:
                union.join(joined[0], other)
    # one node per set of joined nets; its rail from any member net that names one
    node_of: dict[int, int] = {}
    names: list[str] = []
    node_rails: dict[int, Rail] = {}
    members: dict[int, list[int]] = defaultdict(list)
    for i in range(len(nets)):
        members[union.find(i)].append(i)
    for root in sorted(members):
        node = len(names)
        found = [(nets[i].name, r) for i in members[root]
                 if (r := rail_of(nets[i].name, rails)) is not None]
        volts = {r.volts for _, r in found if r.volts is not None}
        if len(volts) > 1 or len({r.sign for _, r in found}) > 1:
            links = [ref for ref, k in kinds.items() if k == "link" and
                     any(union.find(n) == root for n in pin_net[ref].values())]
            raise InputError(f"{', '.join(sorted(links))} join(s) the rails "
                             f"{', '.join(n for n, _ in found)}, which differ",
                             file=netlist.path, column="nets",
                             text=", ".join(n for n, _ in found))
        names.append(found[0][0] if found else nets[members[root][0]].name)
        if found:
            known = [r for _, r in found if r.volts is not None]
            node_rails[node] = known[0] if known else found[0][1]
        for i in members[root]:
            node_of[i] = node

    def ends(ref: str) -> list[int]:
        return [node_of[i] for i in pin_net[ref].values()]

    transistors, elements, caps = [], [], []
    others: dict[str, set[int]] = {}
    values: dict[str, float | None] = {}
    texts: dict[str, str] = {}
    shorted: list[str] = []
    for ref, comp in sorted(netlist.components.items(), key=lambda kv: _natural(kv[0])):
        kind = kinds[ref]
        if kind == "transistor":
            f = functions[ref]
            pol, source = _polarity(comp)
            transistors.append(Transistor(ref, node_of[f["B"]], node_of[f["C"]],
                                          node_of[f["E"]], pol, source))
        elif kind == "resistor":
            a, b = ends(ref)
            values[ref] = resistor_value(comp.value)
            texts[ref] = comp.value
            if a == b:
                shorted.append(ref)
            else:
                elements.append(Element((ref,), "single", a, b))
        elif kind == "capacitor":
            a, b = ends(ref)
            caps.append((ref, a, b))
        elif kind == "other":
            others[ref] = set(ends(ref))
    graph = DcGraph(names, node_rails, transistors, elements, values, texts,
                    dict(netlist.components), caps, others, shorted, kinds)
    _merge(graph)
    return graph


def _natural(ref: str) -> tuple:
    return tuple(int(t) if t.isdigit() else t for t in re.split(r"(\d+)", ref))


def _touch_count(graph: DcGraph, node: int) -> int:
    """Pins on a node other than resistor elements' ends (transistors, capacitors, others)."""
    count = sum(node in (t.b, t.c, t.e) for t in graph.transistors)
    count += sum(node in (a, b) for _, a, b in graph.capacitors)
    count += sum(node in nodes for nodes in graph.others.values())
    return count


def _merge(graph: DcGraph) -> None:
    """Series chains through untouched nodes, then parallel sets, until nothing changes."""
    changed = True
    while changed:
        changed = False
        for node in range(len(graph.names)):
            if node in graph.rails or _touch_count(graph, node):
                continue
            at = graph.touching(node)
            if len(at) != 2:
                continue
            first, second = at
            refs = first.refs + second.refs
            kinds = {first.arrangement, second.arrangement} - {"single", "series"}
            graph.elements.remove(first)
            graph.elements.remove(second)
            graph.elements.append(Element(refs, "mixed" if kinds else "series",
                                          first.other(node), second.other(node)))
            changed = True
            break
        groups: dict[tuple[int, int], list[Element]] = defaultdict(list)
        for e in graph.elements:
            groups[(min(e.a, e.b), max(e.a, e.b))].append(e)
        for (a, b), group in groups.items():
            if len(group) < 2:
                continue
            refs = tuple(r for e in group for r in e.refs)
            kinds = {e.arrangement for e in group} - {"single", "parallel"}
            for e in group:
                graph.elements.remove(e)
            graph.elements.append(Element(refs, "mixed" if kinds else "parallel", a, b))
            changed = True
