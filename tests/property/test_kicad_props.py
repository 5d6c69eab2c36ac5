"""Properties of the KiCad reader, import and schematic edit on hostile or mutated files.

Any text handed to the netlist reader ends in a netlist or an InputError (exit 2), never
another exception; a mutated sample netlist imports or is an InputError; whatever text
a schematic edit writes, reading the edited file back gives that text, and the file
outside the edited tokens is unchanged.
"""

from __future__ import annotations

import contextlib
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from stockbias.errors import InputError
from stockbias.job import parse_job
from stockbias.kicad.board_writer import import_board
from stockbias.kicad.netlist import parse_netlist
from stockbias.kicad.schematic import SymbolEdit, edit_schematic
from stockbias.kicad.sexpr import parse

ROOT = Path(__file__).resolve().parent.parent.parent
NET = (ROOT / "inventory_samples" / "kicad_networks.net").read_text()
SETTINGS = settings(max_examples=120, derandomize=True, deadline=None)
TOKENS = st.sampled_from(['(', ')', '"', '\\', ' ', '\n', 'export', 'comp', 'ref', 'net',
                          'node', '<', '>', '<export>', 'R1', 'Q1', 'pinfunction', 'B'])


@SETTINGS
@given(st.one_of(st.text(max_size=200), st.lists(TOKENS, max_size=60).map("".join)))
def test_any_text_is_a_netlist_or_an_input_error(text: str) -> None:
    try:
        netlist = parse_netlist(text, "x.net")
    except InputError as exc:
        assert "\n" not in exc.one_line()
        return
    with contextlib.suppress(InputError):
        import_board(netlist)


@SETTINGS
@given(st.integers(0, len(NET) - 1), st.integers(1, 40), st.text(max_size=8))
def test_a_mutated_netlist_imports_or_is_an_input_error(at: int, cut: int, insert: str) -> None:
    text = NET[:at] + insert + NET[at + cut:]
    try:
        board = import_board(parse_netlist(text, "x.net"))
    except InputError:
        return
    try:  # the board file is valid TOML whatever the names and values held
        parse_job(board.text.replace('"fill in:', '"1" #'))
    except InputError as exc:
        assert "not valid TOML" not in exc.message, exc.message


SCH = ('(kicad_sch (version 20231120)\n (symbol (lib_id "Device:R")\n'
       '  (property "Reference" "R1")\n  (property "Value" "1k" (at 0 0 0)\n'
       '   (effects (font (size 1.27 1.27))))\n  (pin "1")))\n')


@SETTINGS
@given(st.text(max_size=30), st.text(max_size=30))
def test_edited_values_read_back_exactly(value: str, stock: str) -> None:
    out = edit_schematic(SCH, [SymbolEdit("R1", value, stock)])
    sym = next(parse(out).children("symbol"))
    props = {p.atoms()[0].value: p.atoms()[1].value for p in sym.children("property")}
    assert props["Value"] == value and props["Stock part"] == stock
    head = SCH.index('"1k"')
    assert out.startswith(SCH[:head]) and out.endswith(SCH[SCH.index("\n  (pin"):])
