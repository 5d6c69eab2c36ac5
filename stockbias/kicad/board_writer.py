"""A board file (TOML) from the stages found in a netlist.

Each stage becomes a ``[[stage]]`` named after its transistor's reference, with
its network, transistor, ``[stage.values]`` (the schematic's values, or the part
ids of a ``Stock part`` field) and ``[stage.refs]`` (role → reference designator,
``transistor`` → the transistor's).  The supply comes from the rails' net names
or ``--rail``.  What the netlist does not say is written as an entry beginning
``fill in`` that :func:`stockbias.job.load_job` refuses with a one-line error
naming it: a rail's voltage, a transistor's stock part, a resistor's value.

Targets: with a stock file, each stage's collector-current window is centred on
today's nominal collector current and wide enough to hold today's worst case (at
least ``ic_window_pct``, in steps of 5 %); the headroom is the floor the
explanations use (max(1 V, VCE(sat) + 0.5 V)).  Without a stock file, or where the
stage cannot be analysed, the current is an entry to fill in.
"""

from __future__ import annotations

import json
import math
import textwrap
from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from ..errors import StockbiasError
from ..job import FILL_IN
from ..units import format_quantity, parse_quantity
from . import STOCK_FIELD
from .classify import Problem, StageFound, classify
from .graph import DcGraph, Element, build_graph
from .netlist import Netlist

if TYPE_CHECKING:
    from ..parts import Inventory

__all__ = ["STOCK_FIELD", "ImportedBoard", "ImportedStage", "import_board"]

#: the narrowest collector-current window written, % either side of today's nominal IC
DEFAULT_WINDOW_PCT = 20.0
#: supply tolerance assumed where the netlist cannot say (a regulated rail, common practice)
ASSUMED_SUPPLY_TOL_PCT = 5.0


@dataclass
class ImportedStage:
    """One stage as written to the board file."""

    found: StageFound
    transistor: str | None          # stock part id (None: to fill in)
    transistor_from: str
    values: dict[str, str | None]   # role → value text for [stage.values] (None: to fill in)
    ic: float | None = None         # A, today's nominal collector current
    ic_window_pct: float | None = None
    vce_min: float | None = None
    target_note: str = ""

    @property
    def name(self) -> str:
        return self.found.ref

    def to_dict(self, graph: DcGraph) -> dict[str, Any]:
        roles = {}
        for role, e in self.found.roles.items():
            ohm = [graph.values.get(r) for r in e.refs]
            roles[role] = {"refs": list(e.refs), "arrangement": e.arrangement,
                           "value": self.values.get(role),
                           "value_ohm": _combined(ohm, e.arrangement)}
        return {"name": self.name, "transistor_ref": self.found.ref,
                "topology": self.found.topology, "polarity": self.found.polarity,
                "polarity_from_symbol": self.found.polarity_said,
                "transistor": self.transistor, "roles": roles,
                "absent": [r for r in _optional(self.found.topology) if r not in roles],
                "re_bypassed": self.found.bypassed,
                "target": {"ic": self.ic, "ic_window_pct": self.ic_window_pct,
                           "vce_min": self.vce_min, "note": self.target_note or None}}


@dataclass
class ImportedBoard:
    """Everything ``board from-netlist`` found, and the board file's text."""

    netlist: Netlist
    graph: DcGraph
    stages: list[ImportedStage]
    problems: list[Problem]
    supply_node: int | None
    negative_node: int | None
    to_fill: list[str] = field(default_factory=list)
    text: str = ""

    def to_dict(self) -> dict[str, Any]:
        rails = []
        for node, rail in sorted(self.graph.rails.items()):
            role = ("supply" if node == self.supply_node else "negative_supply"
                    if node == self.negative_node else "ground" if rail.is_ground else "unused")
            rails.append({"net": self.graph.names[node], "volts": rail.volts, "role": role})
        return {"netlist": self.netlist.path, "version": self.netlist.version,
                "rails": rails, "stages": [s.to_dict(self.graph) for s in self.stages],
                "not_classified": [{"refs": list(p.refs), "reason": p.reason}
                                   for p in self.problems],
                "to_fill": self.to_fill}


def _optional(topology: str) -> tuple[str, ...]:
    from ..topologies import get_network

    return get_network(topology).optional_roles


def _combined(ohm: list[float | None], arrangement: str) -> float | None:
    if any(v is None for v in ohm):
        return None
    vals = [float(v) for v in ohm if v is not None]
    if arrangement == "parallel":
        return 1.0 / sum(1.0 / v for v in vals)
    return sum(vals)


def _q(text: str) -> str:
    """A TOML basic string (JSON's escapes are TOML's; DEL, which JSON leaves, escaped)."""
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _comment(text: str) -> str:
    """Text safe inside a TOML comment: one line, no control characters."""
    return "".join(c if c.isprintable() else " " for c in text)


def _value_text(graph: DcGraph, ref: str) -> str | None:
    """What [stage.values] holds for one resistor: its Stock part, its Value if the stock
    notation reads it as written, else the value in the letter code; None: no value."""
    comp = graph.components[ref]
    stock = (comp.field_value(STOCK_FIELD) or "").strip()
    if stock:
        return stock
    ohm = graph.values.get(ref)
    if ohm is None:
        return None
    try:
        if parse_quantity(comp.value, "ohm") == ohm:
            return comp.value.strip()
    except StockbiasError:
        pass
    from ..units import format_resistance_code

    return format_resistance_code(ohm)


def _element_text(graph: DcGraph, e: Element) -> str | None:
    parts = [_value_text(graph, r) for r in e.refs]
    if any(p is None for p in parts):
        return None
    sep = "|" if e.arrangement == "parallel" else "+"
    return sep.join(p for p in parts if p is not None)


def _transistor_part(graph: DcGraph, ref: str, inventory: Inventory | None
                     ) -> tuple[str | None, str]:
    comp = graph.components[ref]
    stock = (comp.field_value(STOCK_FIELD) or "").strip()
    if stock:
        return stock, f"{ref}'s {STOCK_FIELD} field"
    if inventory is not None and inventory.find_transistor(comp.value.strip()) is not None:
        return comp.value.strip(), f"{ref}'s value, a stock part id"
    return None, ""


def import_board(netlist: Netlist, rails: dict[str, float] | None = None,
                 inventory: Inventory | None = None,
                 ic_window_pct: float | None = None) -> ImportedBoard:
    """Read a netlist's stages into a board (see the module notes).

    Parameters
    ----------
    netlist : Netlist
    rails : dict, optional
        ``--rail`` net name → volts.
    inventory : Inventory, optional
        The stock file: resolves transistor part ids and sets each stage's targets.
    ic_window_pct : float, optional
        The collector-current window, % either side of today's nominal IC; default: the
        narrowest multiple of 5 % from 20 % up that holds today's worst case.
    """
    graph = build_graph(netlist, rails)
    found, problems = classify(graph)
    supply = _most_common([s.positive_rail for s in found])
    negative = _most_common([s.negative_rail for s in found])
    stages: list[ImportedStage] = []
    for s in found:
        if s.positive_rail is not None and s.positive_rail != supply:
            problems.append(Problem(_stage_refs(s), f"stage {s.ref} runs from "
                                    f"{graph.names[s.positive_rail]}, the board's supply is "
                                    f"{graph.names[supply]}" if supply is not None else ""))
            continue
        if s.negative_rail is not None and s.negative_rail != negative:
            problems.append(Problem(_stage_refs(s), f"stage {s.ref} uses the negative rail "
                                    f"{graph.names[s.negative_rail]}, the board's is "
                                    f"{graph.names[negative] if negative is not None else ''}"))
            continue
        part, source = _transistor_part(graph, s.ref, inventory)
        values = {role: _element_text(graph, e) for role, e in s.roles.items()}
        stages.append(ImportedStage(s, part, source, values))
    stages.sort(key=lambda st: _natural(st.name))
    board = ImportedBoard(netlist, graph, stages, problems, supply, negative)
    board.text = _render(board, inventory, ic_window_pct)
    return board


def _natural(ref: str) -> tuple:
    import re

    return tuple(int(t) if t.isdigit() else t for t in re.split(r"(\d+)", ref))


def _stage_refs(s: StageFound) -> tuple[str, ...]:
    return (s.ref, *(r for e in s.roles.values() for r in e.refs))


def _most_common(nodes: list[int | None]) -> int | None:
    counts = Counter(n for n in nodes if n is not None)
    return min(counts, key=lambda n: (-counts[n], n)) if counts else None


def _render(board: ImportedBoard, inventory: Inventory | None,
            ic_window_pct: float | None) -> str:
    text = _text(board, with_targets=False)
    if inventory is not None and board.stages:
        _targets(board, text, inventory, ic_window_pct)
    return _text(board, with_targets=True)


def _targets(board: ImportedBoard, provisional: str, inventory: Inventory,
             ic_window_pct: float | None) -> None:
    """Today's operating point of each stage that can be analysed sets its target."""
    from ..analysis.check import analyze
    from ..job import parse_job
    from ..search.levers import headroom_floor

    try:
        job = parse_job(provisional, "<board>")
    except StockbiasError as exc:
        for s in board.stages:
            s.target_note = f"not analysed: {exc.message}"
        return
    for s in board.stages:
        if s.transistor is None or any(v is None for v in s.values.values()):
            s.target_note = "not analysed: the stage has entries to fill in"
            continue
        stage = next(st for st in job.stages if st.name == s.name)
        try:
            res = analyze(job, stage.values, s.transistor, inventory, samples=0,
                          stage_name=s.name)
        except StockbiasError as exc:
            s.target_note = f"not analysed: {exc.message}"
            continue
        ic = res.nominal.get("ic")
        if res.nominal.get("region") != "active" or not isinstance(ic, float) or ic <= 0:
            s.target_note = f"today's nominal point is {res.nominal.get('region')}"
            continue
        ic = parse_quantity(format_quantity(ic, "A"), "A")
        bounds = res.worst.bounds["ic"]
        spread = 100 * max(float(bounds.max) / ic - 1, 1 - float(bounds.min) / ic)
        if ic_window_pct is None:
            pct = max(DEFAULT_WINDOW_PCT, 5 * math.ceil(spread / 5 - 1e-9))
            s.ic_window_pct = min(pct, 95.0)
        else:
            s.ic_window_pct = ic_window_pct
        s.ic = ic
        s.vce_min = headroom_floor(res.transistor.vce_sat)
        s.target_note = (f"today's nominal IC; today's worst case spans "
                         f"{format_quantity(float(bounds.min), 'A')} to "
                         f"{format_quantity(float(bounds.max), 'A')}")


def _fill(what: str, to_fill: list[str]) -> str:
    to_fill.append(what)
    return _q(f"{FILL_IN}: {what}")


def _text(board: ImportedBoard, *, with_targets: bool) -> str:
    g = board.graph
    to_fill: list[str] = []
    out = [f"# Board read from the KiCad netlist {_comment(board.netlist.path)}",
           "# by `stockbias board from-netlist`.",
           "# [stage.refs] names each role's parts on the schematic; [stage.values] holds",
           "# their values (or the part ids of their 'Stock part' field). Entries that begin",
           "# 'fill in' are what the netlist does not say: replace them before `check`.",
           "", "[supply]"]
    if board.supply_node is None:
        out.append(f"volts = {_fill('the positive supply voltage', to_fill)}")
    else:
        rail = g.rails[board.supply_node]
        name = _comment(g.names[board.supply_node])
        volts = (f"{rail.volts:g}" if rail.volts is not None
                 else _fill(f"volts of net {g.names[board.supply_node]}", to_fill))
        out.append(f"volts = {volts}  # net {name}")
    out.append(f"tolerance_pct = {ASSUMED_SUPPLY_TOL_PCT:g}  # assumed; set your supply's")
    if board.negative_node is not None:
        rail = g.rails[board.negative_node]
        volts = (f"{rail.volts:g}" if rail.volts is not None
                 else _fill(f"volts of net {g.names[board.negative_node]} (negative)",
                            to_fill))
        out.append(f"negative_volts = {volts}  # net {_comment(g.names[board.negative_node])}")
    out += ["", "[environment]  # set the ambient range the board must work over",
            "ambient_min_c = 25", "ambient_max_c = 25"]
    bypass = [s.found.bypassed for s in board.stages if s.found.bypassed is not None]
    if bypass:
        out += ["", "[small_signal]",
                f"re_bypassed = {'true' if all(bypass) else 'false'}  # "
                + ("a capacitor across every RE" if all(bypass) else
                   "not every RE has a capacitor across it")]
    out += ["", "[build]", "quantity = 1", "", "[search]",
            'objectives = ["cost", "part_count", "distinct_values", "bom_lines"]']
    for s in board.stages:
        if not with_targets and (s.transistor is None or None in s.values.values()):
            continue  # the provisional board analyses only the stages it can
        out += ["", "[[stage]]", f"name = {_q(s.name)}", f"topology = {_q(s.found.topology)}"]
        if s.transistor is not None:
            out.append(f"transistor = {_q(s.transistor)}  # {_comment(s.transistor_from)}")
        else:
            pol = s.found.polarity if s.found.polarity_said else \
                f"{s.found.polarity} as biased (the symbol does not say)"
            out.append(f"transistor = "
                       f"{_fill(f'stock part id of {s.name}, {pol}', to_fill)}")
        out.append("[stage.target]")
        if with_targets and s.ic is not None:
            out += [f"ic = {_q(format_quantity(s.ic, 'A'))}  # {_comment(s.target_note)}",
                    f"ic_window_pct = {s.ic_window_pct:g}",
                    f"vce_min = {_q(format_quantity(s.vce_min or 1.0, 'V'))}"]
        elif with_targets:
            note = f" ({_comment(s.target_note)})" if s.target_note else ""
            out += [f"ic = {_fill(f'collector current of {s.name}', to_fill)}{note and '  #'}"
                    f"{note}", f"ic_window_pct = {DEFAULT_WINDOW_PCT:g}", 'vce_min = "1 V"']
        else:
            out += ['ic = "1 mA"', "ic_window_pct = 99"]
        out.append("[stage.values]")
        for role, e in s.found.roles.items():
            v = s.values.get(role)
            text = _q(v) if v is not None else _fill(f"value of {e.label}", to_fill)
            out.append(f"{role} = {text}")
        out += ["[stage.refs]", f"transistor = {_q(s.found.ref)}"]
        out += [f"{role} = {_q(e.label)}" for role, e in s.found.roles.items()]
    if board.problems:
        out += ["", "# Not classified (not in this board file):"]
        for p in board.problems:
            out += textwrap.wrap(f"{_comment(', '.join(p.refs))}: {_comment(p.reason)}",
                                 width=88, initial_indent="#   ", subsequent_indent="#       ",
                                 break_long_words=False, break_on_hyphens=False)
    if with_targets:
        board.to_fill = to_fill
    return "\n".join(out) + "\n"
