"""Which bias network each transistor of a DC graph sits in, role by role.

A transistor's *stage* is everything reachable from its base, collector and
emitter without passing through a supply rail: resistive elements, other parts
and other transistors.  Stages that share only the rails are independent; a stage
that reaches another transistor is DC-coupled to it and is reported, never
designed as if it stood alone.

A stage on its own is matched against the declarations of
:mod:`stockbias.topologies`: each network's roles name the two nodes they join
(``B``, ``C``, ``E``, ``RAIL_C``, ``RAIL_E``, ``GND``).  With the rails put where
the polarity and the supply say (NPN: collector-side rail the positive supply,
emitter-side rail ground, or the negative rail for ``dual_supply``; PNP the
mirror), the stage matches a network when its resistive elements join exactly
the node pairs the network's roles join, one element per role; an optional role
is absent exactly when its two nodes are the same net (the emitter straight on
the rail).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

from ..topologies import NETWORKS
from .graph import DcGraph, Element, Transistor

__all__ = ["Problem", "StageFound", "classify"]


@dataclass(frozen=True)
class StageFound:
    """One transistor in a recognised network.

    Attributes
    ----------
    ref : str
        The transistor's reference (also the stage's name).
    topology : str
        The network's registry name.
    polarity : str
        NPN or PNP, as the circuit is biased.
    polarity_said : bool
        True when the symbol, value or a field says the polarity (False: to fill in).
    roles : dict
        Role → the element filling it.
    positive_rail, negative_rail : int or None
        Nodes of the rails the stage uses.
    bypassed : bool or None
        Whether a capacitor is across RE (None: no RE).
    """

    ref: str
    topology: str
    polarity: str
    polarity_said: bool
    roles: dict[str, Element]
    positive_rail: int | None
    negative_rail: int | None
    bypassed: bool | None = None
    notes: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class Problem:
    """Parts that could not be classified, and why (one sentence)."""

    refs: tuple[str, ...]
    reason: str


def _terminal_names(graph: DcGraph, t: Transistor) -> dict[int, str]:
    return {t.b: "B", t.c: "C", t.e: "E"}


def _stage_nodes(graph: DcGraph, t: Transistor) -> set[int]:
    """The non-rail nodes reachable from the transistor's terminals without a rail."""
    seen: set[int] = set()
    todo = [n for n in (t.b, t.c, t.e) if n not in graph.rails]
    while todo:
        node = todo.pop()
        if node in seen:
            continue
        seen.add(node)
        nxt = [e.other(node) for e in graph.touching(node)]
        nxt += [n for q in graph.transistors if node in (q.b, q.c, q.e) for n in (q.b, q.c, q.e)]
        nxt += [n for nodes in graph.others.values() if node in nodes for n in nodes]
        todo.extend(n for n in nxt if n not in graph.rails and n not in seen)
    return seen


def _describe_coupling(graph: DcGraph, group: list[Transistor]) -> str:
    """How the transistors of a DC-coupled group meet, in a few words."""
    words = []
    for i, a in enumerate(group):
        for b in group[i + 1:]:
            ta, tb = _terminal_names(graph, a), _terminal_names(graph, b)
            shared = [n for n in ta if n in tb and n not in graph.rails]
            for n in shared:
                words.append(f"{a.ref} {_pin_word(ta[n])} and {b.ref} {_pin_word(tb[n])} "
                             f"share {graph.names[n]}")
            for e in graph.elements:
                if (e.a in ta and e.b in tb) or (e.b in ta and e.a in tb):
                    na, nb = (e.a, e.b) if e.a in ta else (e.b, e.a)
                    words.append(f"{e.label} joins {a.ref} {_pin_word(ta[na])} to {b.ref} "
                                 f"{_pin_word(tb[nb])}")
    return "; ".join(words) or "joined through other parts"


def _pin_word(name: str) -> str:
    return {"B": "base", "C": "collector", "E": "emitter"}[name]


def classify(graph: DcGraph) -> tuple[list[StageFound], list[Problem]]:
    """Stages found and problems, in reference order (see the module notes)."""
    stages: list[StageFound] = []
    problems: list[Problem] = []
    used: set[str] = set()
    done: set[str] = set()
    for t in graph.transistors:
        if t.ref in done:
            continue
        nodes = _stage_nodes(graph, t)
        group = [q for q in graph.transistors if q.ref == t.ref or
                 any(n in nodes for n in (q.b, q.c, q.e) if n not in graph.rails)]
        elements = [e for e in graph.elements if e.a in nodes or e.b in nodes]
        used.update(r for e in elements for r in e.refs)
        if len(group) > 1:
            done.update(q.ref for q in group)
            problems.append(Problem(
                tuple(q.ref for q in group) + tuple(r for e in elements for r in e.refs),
                f"DC-coupled stages ({_describe_coupling(graph, group)}); a stage is "
                "designed alone only when it shares nothing but the supply rails"))
            continue
        done.add(t.ref)
        found, problem = _one_stage(graph, t, nodes, elements)
        if found is not None:
            stages.append(found)
        if problem is not None:
            problems.append(problem)
    for e in graph.elements:
        if not set(e.refs) & used:
            problems.append(Problem(e.refs, "not in any transistor's bias network"))
    for ref in graph.shorted:
        problems.append(Problem((ref,), "both ends on one net"))
    return stages, problems


def _one_stage(graph: DcGraph, t: Transistor, nodes: set[int], elements: list[Element]
               ) -> tuple[StageFound | None, Problem | None]:
    refs = (t.ref, *(r for e in elements for r in e.refs))
    others = sorted(ref for ref, at in graph.others.items() if at & nodes)
    if others:
        return None, Problem(refs + tuple(others), f"{', '.join(others)} on the stage's nets: "
                             "a part no bias network has")
    extra = nodes - {t.b, t.c, t.e}
    if extra:
        node = min(extra)
        caps = [ref for ref, a, b in graph.capacitors
                if node in (a, b) and ({a, b} - {node}) & {t.e}]
        via = [e.label for e in graph.touching(node)]
        feed = [e.label for e in graph.touching(node) if t.b in (e.a, e.b)]
        if caps and feed:
            return None, Problem(refs + tuple(caps), f"bootstrapped base: the base is fed "
                                 f"through {', '.join(feed)} from {graph.names[node]}, which "
                                 f"{', '.join(caps)} ties to the emitter; no declared network "
                                 "has a bootstrap")
        return None, Problem(refs, f"{graph.names[node]} (between {', '.join(via)}) is neither "
                             "a transistor terminal nor a rail; no declared network has "
                             "such a node")
    if t.b in graph.rails or t.c in graph.rails:
        pin = "base" if t.b in graph.rails else "collector"
        return None, Problem(refs, f"the {pin} is tied straight to "
                             f"{graph.names[t.b if pin == 'base' else t.c]}; no declared "
                             "network has that")
    for e in elements:
        if e.arrangement == "mixed" or len(e.refs) > 2:
            return None, Problem(refs, f"{e.label} ({len(e.refs)} resistors in series and "
                                 "parallel) between two nodes; a role holds one part or a pair")
    match = _match(graph, t, elements)
    if isinstance(match, str):
        return None, Problem(refs, match)
    topology, polarity, roles, pos, neg = match
    notes: list[str] = []
    missing = [r for e in roles.values() for r in e.refs if graph.values.get(r) is None]
    bypassed = None
    if "RE" in roles:
        re_ = roles["RE"]
        bypassed = any({a, b} == {re_.a, re_.b} for _, a, b in graph.capacitors)
    stage = StageFound(t.ref, topology, polarity, t.polarity is not None, roles, pos, neg,
                       bypassed, notes)
    if missing:
        texts = ", ".join(f"{r} ('{graph.value_text.get(r, '')}')" for r in missing)
        return stage, Problem(tuple(missing), f"resistor with no value: {texts}; stage "
                              f"{t.ref} written with an entry to fill in")
    return stage, None


def _rails(graph: DcGraph, t: Transistor, elements: list[Element]) -> list[int]:
    out = {n for e in elements for n in (e.a, e.b) if n in graph.rails}
    out |= {n for n in (t.e,) if n in graph.rails}
    return sorted(out)


def _match(graph: DcGraph, t: Transistor, elements: list[Element]
           ) -> tuple[str, str, dict[str, Element], int | None, int | None] | str:
    rails = _rails(graph, t, elements)
    pos = [n for n in rails if graph.rails[n].sign > 0]
    neg = [n for n in rails if graph.rails[n].sign < 0]
    gnd = [n for n in rails if graph.rails[n].sign == 0]
    if len(pos) > 1 or len(neg) > 1:
        return (f"the stage uses the rails {', '.join(graph.names[n] for n in rails)}; a "
                "board file has one positive and one negative supply")
    p, n_, g = (pos[0] if pos else None), (neg[0] if neg else None), (gnd[0] if gnd else None)
    term = {"B": t.b, "C": t.c, "E": t.e}
    actual = Counter(frozenset((e.a, e.b)) for e in elements)
    polarities = [t.polarity] if t.polarity else ["NPN", "PNP"]
    found = []
    for polarity in ("NPN", "PNP"):
        for net in NETWORKS.values():
            if net.supply == "dual":
                rail_c, rail_e = (p, n_) if polarity == "NPN" else (n_, p)
            else:
                rail_c, rail_e = (p, g) if polarity == "NPN" else (g, p)
            where = {**term, "RAIL_C": rail_c, "RAIL_E": rail_e,
                     "GND": g if net.supply == "dual" else None}
            roles: dict[str, frozenset[int]] = {}
            ok = True
            for role in net.roles:
                a, b = where[role.node_a], where[role.node_b]
                if a is None or b is None:
                    ok = False
                    break
                if a == b:
                    if not role.optional:
                        ok = False
                        break
                    continue
                roles[role.name] = frozenset((a, b))
            if not ok or Counter(roles.values()) != actual:
                continue
            if t.e in graph.rails and t.e != where["RAIL_E"]:
                continue
            by_pair = {frozenset((e.a, e.b)): e for e in elements}
            found.append((net.name, polarity, {r: by_pair[pair] for r, pair in roles.items()},
                          p, n_ if net.supply == "dual" else None))
    said = [f for f in found if f[1] in polarities]
    if said:
        return said[0]
    sym = {t.b: "B", t.c: "C", t.e: "E"}
    pairs = ", ".join(f"{e.label} {sym.get(e.a, graph.names[e.a])}–"
                      f"{sym.get(e.b, graph.names[e.b])}" for e in elements)
    if found:
        return (f"{t.ref} is {t.polarity} by its {t.polarity_from}, but the circuit is biased "
                f"for {found[0][1]} ({found[0][0]})")
    return f"no declared network joins these nodes: {pairs or 'no resistors'}"
