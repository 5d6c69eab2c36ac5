"""The invented KiCad sample boards of inventory_samples/ (netlists and a schematic).

    .venv/bin/python tests/kicad_boards.py      # rewrites the sample files


Each board is declared once below (parts, values, fields and the net of every pin);
the S-expression netlist, the XML netlist and the schematic are written from that one
declaration, so they agree by construction.  The schematic joins pins by labels placed
on the pins' ends (global labels for the rails), as a schematic drawn without wires
does; its symbols carry the same references, values and fields as the netlist.
"""

from __future__ import annotations

import sys
import uuid
from dataclasses import dataclass, field
from pathlib import Path
from xml.sax.saxutils import quoteattr

OUT = Path(__file__).resolve().parent.parent / "inventory_samples"
NS = uuid.UUID("6b1d3c52-0c36-4f1e-9d0a-5a0c2b7e9f11")


def uid(*names: str) -> str:
    return str(uuid.uuid5(NS, "/".join(names)))


def q(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


# symbol → (library, description, pins: number → (name, type, x, y) in symbol units, mm)
SYMBOLS = {
    "R": ("Device", "Resistor", {"1": ("~", "passive", 0, 3.81),
                                 "2": ("~", "passive", 0, -3.81)}),
    "C": ("Device", "Unpolarized capacitor", {"1": ("~", "passive", 0, 3.81),
                                              "2": ("~", "passive", 0, -3.81)}),
    "Q_NPN_BCE": ("Device", "NPN transistor, base/collector/emitter",
                  {"1": ("B", "input", -5.08, 0), "2": ("C", "passive", 2.54, 5.08),
                   "3": ("E", "passive", 2.54, -5.08)}),
    "Q_PNP_BCE": ("Device", "PNP transistor, base/collector/emitter",
                  {"1": ("B", "input", -5.08, 0), "2": ("C", "passive", 2.54, 5.08),
                   "3": ("E", "passive", 2.54, -5.08)}),
    "Q_NPN_EBC": ("Device", "NPN transistor, emitter/base/collector",
                  {"1": ("E", "passive", 2.54, -5.08), "2": ("B", "input", -5.08, 0),
                   "3": ("C", "passive", 2.54, 5.08)}),
    "Q_BJT": ("Workshop", "Bipolar transistor, polarity set by the part fitted",
              {"1": ("B", "input", -5.08, 0), "2": ("C", "passive", 2.54, 5.08),
               "3": ("E", "passive", 2.54, -5.08)}),
    "LED": ("Device", "Light emitting diode", {"1": ("K", "passive", -3.81, 0),
                                               "2": ("A", "passive", 3.81, 0)}),
    "Conn_01x02": ("Connector_Generic", "Generic connector, single row, 01x02",
                   {"1": ("Pin_1", "passive", -5.08, 0), "2": ("Pin_2", "passive", -5.08, -2.54)}),
}


@dataclass
class Part:
    ref: str
    symbol: str
    value: str
    nets: dict[str, str]           # pin number → net
    fields: dict[str, str] = field(default_factory=dict)
    at: tuple[float, float] = (0.0, 0.0)


@dataclass
class Board:
    name: str
    title: str
    parts: list[Part]

    def nets(self) -> dict[str, list[tuple[Part, str]]]:
        out: dict[str, list[tuple[Part, str]]] = {}
        for p in sorted(self.parts, key=lambda p: _natural(p.ref)):
            for pin, net in p.nets.items():
                out.setdefault(net, []).append((p, pin))
        return dict(sorted(out.items(), key=lambda kv: _net_key(kv[0])))


def _natural(ref: str) -> tuple:
    import re

    return tuple(int(t) if t.isdigit() else t for t in re.split(r"(\d+)", ref))


def _net_key(name: str) -> tuple:
    return (name.startswith("/"), name)


# --- the boards -----------------------------------------------------------------------

def R(ref: str, value: str, a: str, b: str, **fields: str) -> Part:
    return Part(ref, "R", value, {"1": a, "2": b}, dict(fields))


def C(ref: str, value: str, a: str, b: str) -> Part:
    return Part(ref, "C", value, {"1": a, "2": b})


def Q(ref: str, symbol: str, value: str, b: str, c: str, e: str, **fields: str) -> Part:
    pins = {name: num for num, (name, *_rest) in SYMBOLS[symbol][2].items()}
    return Part(ref, symbol, value, {pins["B"]: b, pins["C"]: c, pins["E"]: e}, dict(fields))


def distribution_amp() -> Board:
    """Four AC-coupled NPN divider stages on +15 V (the shape of distribution_amp_board.toml)."""
    parts = [Part("J1", "Conn_01x02", "Signal in", {"1": "/in", "2": "GND"})]
    stages = [  # name, transistor, R1, R2, RC, RE (each resistor's stock line: CF-<code>)
        ("1", "QN-LB2", "100k", "22k", "10k", "4k7"),
        ("2", "QN-LB1", "47k", "10k", "4k7", "2k2"),
        ("3", "QN-GP40", "22k", "4k7", "2k2", "1k"),
        ("4", "QN-GP40", "15k", "3k3", "1k5", "680R"),
    ]

    def cf(value: str) -> dict[str, str]:
        code = {"1k": "1K0"}.get(value, value.upper())
        return {"Stock part": f"CF-{code}"}

    n = 1
    prev = "/in"
    for k, (s, part, r1, r2, rc, re_) in enumerate(stages):
        b, c, e = f"/q{s}_base", f"/q{s}_collector", f"/q{s}_emitter"
        parts += [C("C?", "1u", prev, b),
                  R(f"R{n}", r1, "+15V", b, **cf(r1)), R(f"R{n + 1}", r2, b, "GND", **cf(r2)),
                  R(f"R{n + 2}", rc, "+15V", c, **cf(rc)),
                  R(f"R{n + 3}", re_, e, "GND", **cf(re_)),
                  C("C?", "47u", e, "GND"),
                  Q(f"Q{s}", "Q_NPN_BCE", "NPN", b, c, e, **{"Stock part": part})]
        for p, (dx, dy) in zip(parts[-7:], [(-20, 0), (-10, -15), (-10, 15), (5, -15),
                                            (5, 15), (15, 15), (0, 0)], strict=True):
            p.at = (40 + 55 * k + dx, 80 + dy)
        prev, n = c, n + 4
    parts += [C("C?", "10u", prev, "/out"),
              Part("J2", "Conn_01x02", "Line out", {"1": "/out", "2": "GND"})]
    parts[0].at, parts[-2].at, parts[-1].at = (15, 80), (265, 65), (280, 80)
    _renumber_caps(parts)
    return Board("kicad_distribution_amp", "Kestrel Row distribution amplifier", parts)


def _renumber_caps(parts: list[Part]) -> None:
    caps = [p for p in parts if p.symbol == "C"]
    for i, p in enumerate(caps, start=1):
        p.ref = f"C{i}"


def networks() -> Board:
    """Every network in both polarities on +12 V / −12 V, with a series and a parallel role."""
    parts = [
        # divider, NPN and PNP
        R("R1", "68k", "+12V", "/div_n_b"), R("R2", "15k", "/div_n_b", "GND"),
        R("R3", "4.7k", "+12V", "/div_n_c"), R("R4", "1.0k", "/div_n_e", "GND"),
        Q("Q1", "Q_NPN_EBC", "NPN", "/div_n_b", "/div_n_c", "/div_n_e"),
        R("R5", "15K 1%", "GND", "/div_p_b"), R("R6", "68K 1%", "/div_p_b", "+12V"),
        R("R7", "4K7", "GND", "/div_p_c"), R("R8", "1K", "/div_p_e", "+12V"),
        Q("Q2", "Q_PNP_BCE", "PNP", "/div_p_b", "/div_p_c", "/div_p_e"),
        # collector feedback: NPN with RE, PNP without
        R("R9", "3k3", "+12V", "/cf_n_c"), R("R10", "220k", "/cf_n_c", "/cf_n_b"),
        R("R11", "470R", "/cf_n_e", "GND"),
        Q("Q3", "Q_NPN_BCE", "NPN", "/cf_n_b", "/cf_n_c", "/cf_n_e"),
        R("R12", "3k3", "GND", "/cf_p_c"), R("R13", "220k", "/cf_p_c", "/cf_p_b"),
        Q("Q4", "Q_PNP_BCE", "PNP", "/cf_p_b", "/cf_p_c", "+12V"),
        # dual supply, NPN and PNP (the PNP's collector-side rail is −12 V)
        R("R14", "10k", "GND", "/ds_n_b"), R("R15", "10k", "/ds_n_e", "-12V"),
        R("R16", "4k7", "+12V", "/ds_n_c"),
        Q("Q5", "Q_NPN_BCE", "NPN", "/ds_n_b", "/ds_n_c", "/ds_n_e"),
        R("R17", "10k", "GND", "/ds_p_b"), R("R18", "10k", "/ds_p_e", "+12V"),
        R("R19", "4k7", "-12V", "/ds_p_c"),
        Q("Q6", "Q_PNP_BCE", "PNP", "/ds_p_b", "/ds_p_c", "/ds_p_e"),
        # fixed base: NPN with a series RC (R22 + R23) and RE; PNP with a parallel RB
        R("R20", "1M", "+12V", "/fb_n_b"), R("R21", "1k", "/fb_n_e", "GND"),
        R("R22", "2k2", "+12V", "/fb_n_mid"), R("R23", "1k", "/fb_n_mid", "/fb_n_c"),
        Q("Q7", "Q_NPN_BCE", "NPN", "/fb_n_b", "/fb_n_c", "/fb_n_e"),
        R("R24", "2M2", "GND", "/fb_p_b"), R("R25", "2M2", "GND", "/fb_p_b"),
        R("R26", "3k3", "GND", "/fb_p_c"),
        Q("Q8", "Q_PNP_BCE", "PNP", "/fb_p_b", "/fb_p_c", "+12V"),
    ]
    _grid(parts)
    return Board("kicad_networks", "Every bias network, both polarities", parts)


def unclassified() -> Board:
    """Parts a bias search cannot take as independent stages, and one it can."""
    parts = [
        # DC-coupled pair: Q1's collector drives Q2's base directly
        R("R1", "47k", "+9V", "/pair_b1"), R("R2", "10k", "/pair_b1", "GND"),
        R("R3", "10k", "+9V", "/pair_c1"), R("R4", "1k", "/pair_e1", "GND"),
        Q("Q1", "Q_NPN_BCE", "NPN", "/pair_b1", "/pair_c1", "/pair_e1"),
        R("R5", "4k7", "+9V", "/pair_c2"), R("R6", "3k3", "/pair_e2", "GND"),
        Q("Q2", "Q_NPN_BCE", "NPN", "/pair_c1", "/pair_c2", "/pair_e2"),
        # bootstrapped base: the divider's middle reaches the base through R9, and C2
        # ties that middle to the emitter
        R("R7", "33k", "+9V", "/boot"), R("R8", "33k", "/boot", "GND"),
        R("R9", "47k", "/boot", "/boot_b"), R("R10", "2k2", "/boot_e", "GND"),
        C("C1", "10u", "/boot_b", "/in"), C("C2", "22u", "/boot", "/boot_e"),
        Q("Q3", "Q_NPN_BCE", "NPN", "/boot_b", "+9V", "/boot_e"),
        # a divider stage whose emitter resistor has no value yet
        R("R11", "56k", "+9V", "/nv_b"), R("R12", "12k", "/nv_b", "GND"),
        R("R13", "3k9", "+9V", "/nv_c"), R("R14", "~", "/nv_e", "GND"),
        Q("Q4", "Q_NPN_BCE", "NPN", "/nv_b", "/nv_c", "/nv_e"),
        # a diode in the emitter: no declared network has one
        R("R15", "39k", "+9V", "/d_b"), R("R16", "10k", "/d_b", "GND"),
        R("R17", "2k7", "+9V", "/d_c"), Part("D1", "LED", "red", {"1": "GND", "2": "/d_e"}),
        Q("Q5", "Q_NPN_BCE", "NPN", "/d_b", "/d_c", "/d_e"),
        # a divider stage whose symbol does not say the polarity
        R("R18", "82k", "+9V", "/g_b"), R("R19", "18k", "/g_b", "GND"),
        R("R20", "5k6", "+9V", "/g_c"), R("R21", "1k2", "/g_e", "GND"),
        Q("Q6", "Q_BJT", "small signal", "/g_b", "/g_c", "/g_e"),
        # a pull-down no transistor uses
        R("R22", "100k", "/in", "GND"),
    ]
    _grid(parts)
    return Board("kicad_unclassified", "Stages a bias search cannot take alone", parts)


def _grid(parts: list[Part]) -> None:
    for i, p in enumerate(parts):
        p.at = (30 + 25 * (i % 10), 40 + 30 * (i // 10))


# --- writers --------------------------------------------------------------------------

def sexpr_netlist(board: Board) -> str:
    out = ['(export (version "E")', "  (design",
           f'    (source "{board.name}.kicad_sch")', '    (tool "Eeschema 8.0.4")',
           '    (sheet (number "1") (name "/") (tstamps "/")',
           f'      (title_block (title {q(board.title)}) (company "Kestrel Row workshop")',
           '        (rev "A") (source "' + board.name + '.kicad_sch"))))', "  (components"]
    for p in sorted(board.parts, key=lambda p: _natural(p.ref)):
        lib, desc, _pins = SYMBOLS[p.symbol]
        out += [f"    (comp (ref {q(p.ref)})", f"      (value {q(p.value)})",
                '      (footprint "")', f"      (description {q(desc)})", "      (fields",
                '        (field (name "Footprint"))', '        (field (name "Datasheet") "~")']
        out += [f"        (field (name {q(k)}) {q(v)})" for k, v in p.fields.items()]
        out[-1] += ")"
        out += [f"      (libsource (lib {q(lib)}) (part {q(p.symbol)}) (description {q(desc)}))",
                '      (property (name "Sheetname") (value "Root"))',
                f'      (property (name "Sheetfile") (value "{board.name}.kicad_sch"))',
                '      (sheetpath (names "/") (tstamps "/"))',
                f"      (tstamps {q(uid(board.name, p.ref))}))"]
    out[-1] += ")"
    out.append("  (libparts")
    used = sorted({p.symbol for p in board.parts})
    for sym in used:
        lib, desc, pins = SYMBOLS[sym]
        out += [f"    (libpart (lib {q(lib)}) (part {q(sym)})", f"      (description {q(desc)})",
                "      (pins"]
        out += [f"        (pin (num {q(num)}) (name {q(name)}) (type {q(kind)}))"
                for num, (name, kind, _x, _y) in pins.items()]
        out[-1] += "))"
    out[-1] += ")"
    out.append("  (nets")
    for code, (net, nodes) in enumerate(board.nets().items(), start=1):
        out.append(f"    (net (code {q(str(code))}) (name {q(net)})")
        for p, pin in nodes:
            name, kind, _x, _y = SYMBOLS[p.symbol][2][pin]
            fn = "" if name == "~" else f" (pinfunction {q(name)})"
            out.append(f"      (node (ref {q(p.ref)}) (pin {q(pin)}){fn} (pintype {q(kind)}))")
        out[-1] += ")"
    out[-1] += "))"
    return "\n".join(out) + "\n"


def xml_netlist(board: Board) -> str:
    out = ['<?xml version="1.0" encoding="UTF-8"?>', '<export version="E">', "  <design>",
           f"    <source>{board.name}.kicad_sch</source>", "    <tool>Eeschema 8.0.4</tool>",
           "  </design>", "  <components>"]
    for p in sorted(board.parts, key=lambda p: _natural(p.ref)):
        lib, desc, _pins = SYMBOLS[p.symbol]
        out += [f"    <comp ref={quoteattr(p.ref)}>", f"      <value>{_x(p.value)}</value>"]
        if p.fields:
            out.append("      <fields>")
            out += [f"        <field name={quoteattr(k)}>{_x(v)}</field>"
                    for k, v in p.fields.items()]
            out.append("      </fields>")
        out += [f"      <libsource lib={quoteattr(lib)} part={quoteattr(p.symbol)} "
                f"description={quoteattr(desc)}/>",
                f'      <tstamps>{uid(board.name, p.ref)}</tstamps>', "    </comp>"]
    out += ["  </components>", "  <libparts>"]
    for sym in sorted({p.symbol for p in board.parts}):
        lib, desc, pins = SYMBOLS[sym]
        out += [f"    <libpart lib={quoteattr(lib)} part={quoteattr(sym)}>", "      <pins>"]
        out += [f"        <pin num={quoteattr(n)} name={quoteattr(name)} type={quoteattr(k)}/>"
                for n, (name, k, _x0, _y0) in pins.items()]
        out += ["      </pins>", "    </libpart>"]
    out += ["  </libparts>", "  <nets>"]
    for code, (net, nodes) in enumerate(board.nets().items(), start=1):
        out.append(f"    <net code=\"{code}\" name={quoteattr(net)}>")
        for p, pin in nodes:
            name, kind, _x1, _y1 = SYMBOLS[p.symbol][2][pin]
            fn = "" if name == "~" else f" pinfunction={quoteattr(name)}"
            out.append(f"      <node ref={quoteattr(p.ref)} pin={quoteattr(pin)}{fn} "
                       f"pintype={quoteattr(kind)}/>")
        out.append("    </net>")
    out += ["  </nets>", "</export>"]
    return "\n".join(out) + "\n"


def _x(text: str) -> str:
    from xml.sax.saxutils import escape

    return escape(text)


def _font(hide: bool = False, justify: str = "") -> str:
    extra = f" (justify {justify})" if justify else ""
    return f"(effects (font (size 1.27 1.27)){extra}{' (hide yes)' if hide else ''})"


def _lib_symbol(sym: str) -> list[str]:
    lib, desc, pins = SYMBOLS[sym]
    ref = {"R": "R", "C": "C", "LED": "D", "Conn_01x02": "J"}.get(sym, "Q")
    out = [f"\t\t(symbol {q(lib + ':' + sym)}",
           "\t\t\t(exclude_from_sim no)", "\t\t\t(in_bom yes)", "\t\t\t(on_board yes)",
           f'\t\t\t(property "Reference" {q(ref)} (at 2.032 0 90) {_font()})',
           f'\t\t\t(property "Value" {q(sym)} (at 0 0 90) {_font()})',
           f'\t\t\t(property "Footprint" "" (at 0 0 0) {_font(True)})',
           f'\t\t\t(property "Datasheet" "~" (at 0 0 0) {_font(True)})',
           f'\t\t\t(property "Description" {q(desc)} (at 0 0 0) {_font(True)})',
           f"\t\t\t(symbol {q(sym + '_0_1')}",
           "\t\t\t\t(rectangle (start -1.016 -2.54) (end 1.016 2.54) "
           "(stroke (width 0.254) (type default)) (fill (type none)))", "\t\t\t)",
           f"\t\t\t(symbol {q(sym + '_1_1')}"]
    for num, (name, kind, x, y) in pins.items():
        angle = 270 if y > 0 else 90 if y < 0 else (0 if x < 0 else 180)
        out.append(f"\t\t\t\t(pin {kind} line (at {x:g} {y:g} {angle}) (length 1.27) "
                   f"(name {q(name)} {_font()}) (number {q(num)} {_font()}))")
    out += ["\t\t\t)", "\t\t)"]
    return out


def schematic(board: Board) -> str:
    root = uid(board.name, "sheet")
    out = ["(kicad_sch", "\t(version 20231120)", '\t(generator "eeschema")',
           '\t(generator_version "8.0")', f"\t(uuid {q(root)})", '\t(paper "A3")',
           "\t(title_block", f"\t\t(title {q(board.title)})", '\t\t(rev "A")',
           '\t\t(company "Kestrel Row workshop")', "\t)", "\t(lib_symbols"]
    for sym in sorted({p.symbol for p in board.parts}):
        out += _lib_symbol(sym)
    out.append("\t)")
    for p in sorted(board.parts, key=lambda p: _natural(p.ref)):
        x, y = p.at
        for pin, net in p.nets.items():
            _n, _k, px, py = SYMBOLS[p.symbol][2][pin]
            lx, ly = round(x + px, 2), round(y - py, 2)
            kind = "label" if net.startswith("/") else "global_label"
            text = net[1:] if net.startswith("/") else net
            shape = "" if kind == "label" else " (shape passive)"
            out += [f"\t({kind} {q(text)}{shape} (at {lx:g} {ly:g} 0) "
                    f"(fields_autoplaced yes) {_font(justify='left bottom')} "
                    f"(uuid {q(uid(board.name, p.ref, pin, 'label'))}))"]
    for p in sorted(board.parts, key=lambda p: _natural(p.ref)):
        x, y = p.at
        lib = SYMBOLS[p.symbol][0]
        out += ["\t(symbol", f"\t\t(lib_id {q(lib + ':' + p.symbol)})", f"\t\t(at {x:g} {y:g} 0)",
                "\t\t(unit 1)", "\t\t(exclude_from_sim no)", "\t\t(in_bom yes)",
                "\t\t(on_board yes)", "\t\t(dnp no)", f"\t\t(uuid {q(uid(board.name, p.ref))})",
                f'\t\t(property "Reference" {q(p.ref)}', f"\t\t\t(at {x + 2.54:g} {y - 1.27:g} 0)",
                f"\t\t\t{_font(justify='left')}", "\t\t)",
                f'\t\t(property "Value" {q(p.value)}', f"\t\t\t(at {x + 2.54:g} {y + 1.27:g} 0)",
                f"\t\t\t{_font(justify='left')}", "\t\t)",
                '\t\t(property "Footprint" ""', f"\t\t\t(at {x:g} {y:g} 0)",
                f"\t\t\t{_font(True)}", "\t\t)",
                '\t\t(property "Datasheet" "~"', f"\t\t\t(at {x:g} {y:g} 0)",
                f"\t\t\t{_font(True)}", "\t\t)"]
        for k, v in p.fields.items():
            out += [f"\t\t(property {q(k)} {q(v)}", f"\t\t\t(at {x:g} {y + 3.81:g} 0)",
                    f"\t\t\t{_font(True)}", "\t\t)"]
        out += [f'\t\t(pin {q(pin)} (uuid {q(uid(board.name, p.ref, pin))}))' for pin in p.nets]
        out += ["\t\t(instances", f"\t\t\t(project {q(board.name)}",
                f"\t\t\t\t(path {q('/' + root)} (reference {q(p.ref)}) (unit 1))", "\t\t\t)",
                "\t\t)", "\t)"]
    out += ["\t(sheet_instances", '\t\t(path "/" (page "1"))', "\t)", ")"]
    return "\n".join(out) + "\n"


def sample_files() -> dict[str, str]:
    """File name in inventory_samples/ → its text."""
    amp = distribution_amp()
    return {
        f"{amp.name}.net": sexpr_netlist(amp),
        f"{amp.name}.xml": xml_netlist(amp),
        f"{amp.name}.kicad_sch": schematic(amp),
        "kicad_networks.xml": xml_netlist(networks()),
        "kicad_networks.net": sexpr_netlist(networks()),
        "kicad_unclassified.net": sexpr_netlist(unclassified()),
    }


def main() -> int:
    for name, text in sample_files().items():
        (OUT / name).write_text(text, encoding="utf-8", newline="\n")
        print(f"wrote {OUT / name}")
    return 0


if __name__ == "__main__":
    sys.exit(main())


def reexport(board: Board, schematic_text: str) -> str:
    """The S-expression netlist KiCad would export after the schematic was edited: the
    board's connectivity, each symbol's Value and fields as the schematic now has them."""
    import re

    symbols = re.split(r"\n\t\(symbol\n", schematic_text)[1:]
    props: dict[str, dict[str, str]] = {}
    for body in symbols:
        found = dict(re.findall(r'\(property "((?:[^"\\]|\\.)*)" "((?:[^"\\]|\\.)*)"', body))
        props[found["Reference"]] = {k: v.replace('\\"', '"').replace("\\\\", "\\")
                                     for k, v in found.items()}
    parts = []
    for p in board.parts:
        got = props[p.ref]
        fields = {k: v for k, v in got.items()
                  if k not in ("Reference", "Value", "Footprint", "Datasheet")}
        parts.append(Part(p.ref, p.symbol, got["Value"], dict(p.nets), fields, p.at))
    return sexpr_netlist(Board(board.name, board.title, parts))
