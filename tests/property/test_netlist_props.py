"""Properties: no text from a file changes a netlist's cards or becomes a spreadsheet formula.

For arbitrary text (any Unicode, and texts built from SPICE and spreadsheet control tokens) in
every free-text field, the exported netlist has exactly the cards of the clean netlist, one
printable ASCII line per line; every pick-list cell reads back as the text written (a leading
``'`` added where a spreadsheet would see a formula) and no cell starts a formula.
"""

from __future__ import annotations

import csv
import io
from dataclasses import replace
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from stockbias.inert_text import (
    FORMULA_LEADS,
    NETLIST_TEXT_LIMIT,
    netlist_text,
    spreadsheet_cell,
)
from stockbias.job import load_job
from stockbias.render.netlist import export_netlist
from stockbias.render.pick_list import PICK_LIST_COLUMNS, pick_list_csv
from stockbias.selection import Selection, bench_needs, resolve_selection
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent.parent
SHELF = ROOT / "inventory_samples" / "workshop_drawers.csv"
JOB = ROOT / "inventory_samples" / "line_driver_job.toml"
VALUES = {"R1": "CF-22K+CF-22K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}
FIELDS = ("resistor_part_id", "resistor_location", "resistor_note", "transistor_part_id",
          "transistor_note", "stage_name", "job_path", "source")
SETTINGS = settings(max_examples=150, derandomize=True, deadline=None)

_JOB = load_job(JOB)
_PARTS, _T = resolve_selection(_JOB, Selection("divider", "QN-GP40", VALUES, "t"),
                               read_inventory(SHELF))

# Pieces that mean something to ngspice or a spreadsheet, and every kind of line break.
TOKENS = ["\n", "\r", "\r\n", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028",
          "\u2029", "\x00", "\t", "\u200b", "\u202e", "\ufeff", ".control", ".endc", ".end",
          "shell touch /tmp/x", "*#", "*", "+", ";", "$", "\\", ".include /dev/null", ".lib",
          "=", "-", "@", "\uff1d", " ", "R_R1 b 0 1", "Q1", "CF-10K", "é", "Ω"]
hostile = st.one_of(
    st.text(st.characters(exclude_categories=("Cs",)), max_size=60),
    st.lists(st.sampled_from(TOKENS), max_size=12).map("".join),
)


def _export(texts: dict[str, str]) -> str:
    job = replace(_JOB, path=texts["job_path"],
                  stages=(replace(_JOB.stage, name=texts["stage_name"]),))
    parts = {role: replace(p, parts=tuple(
        replace(x, part_id=texts["resistor_part_id"] + x.part_id,
                location=texts["resistor_location"], note=texts["resistor_note"])
        for x in p.parts)) for role, p in _PARTS.items()}
    t = replace(_T, part_id=texts["transistor_part_id"], note=texts["transistor_note"])
    return export_netlist(job, parts, t, source=texts["source"]).text


def _cards(text: str) -> list[str]:
    return [x for x in text.split("\n")[1:] if x and not x.startswith("* ") and x != "*"]


_CLEAN = _export(dict.fromkeys(FIELDS, "clean"))


@SETTINGS
@given(st.fixed_dictionaries(dict.fromkeys(FIELDS, hostile)))
def test_any_text_in_any_field_leaves_the_cards_unchanged(texts: dict[str, str]) -> None:
    text = _export(texts)
    lines = text.split("\n")
    assert text.splitlines() == lines[:-1]  # no line break but "\n", for any reader
    assert all(x.isascii() and x.isprintable() for x in lines)
    assert len(lines) == len(_CLEAN.split("\n"))
    assert _cards(text) == _cards(_CLEAN)
    assert lines[0].startswith("stockbias export: divider stage with")
    assert all(x[:2] == "* " or x == "*" or x in _cards(_CLEAN) for x in lines[1:-1])


@SETTINGS
@given(st.text(st.characters(exclude_categories=("Cs",)), max_size=300))
def test_netlist_text_is_one_printable_ascii_line(text: str) -> None:
    out = netlist_text(text)
    assert out.isascii() and out.isprintable() and len(out.splitlines()) <= 1
    if text.isascii() and text.isprintable() and len(text) <= NETLIST_TEXT_LIMIT:
        assert out == text  # ordinary text is kept as it is


@SETTINGS
@given(hostile)
def test_spreadsheet_cell_is_lossless_and_never_a_formula(text: str) -> None:
    cell = spreadsheet_cell(text)
    assert cell in (text, "'" + text)
    lead = cell.lstrip(" \u00a0\u3000")[:1]
    assert lead not in FORMULA_LEADS or cell.startswith("'")


@SETTINGS
@given(hostile, hostile, st.integers(1, 200))
def test_pick_list_reads_back_with_no_formula(part_id: str, location: str,
                                              quantity: int) -> None:
    parts = {role: replace(p, parts=tuple(replace(x, part_id=part_id + x.part_id,
                                                  location=location) for x in p.parts))
             for role, p in _PARTS.items()}
    t = replace(_T, part_id=part_id + _T.part_id, location=location)
    needs = bench_needs(parts, t, quantity)
    rows = list(csv.reader(io.StringIO(pick_list_csv(needs), newline="")))
    assert rows[0] == list(PICK_LIST_COLUMNS)
    assert len(rows) == 1 + 5  # CF-22K, CF-10K, CF-3K3, CF-1K0, QN-GP40: no row split
    numeric = {"per_board", "pull", "in_stock", "remaining"}
    for row in rows[1:]:
        cells = dict(zip(PICK_LIST_COLUMNS, row, strict=True))
        assert cells["location"] == spreadsheet_cell(location)  # the text, marked if need be
        assert cells["part_id"].removeprefix("'").startswith(part_id)
        for column, cell in cells.items():
            if column in numeric:
                int(cell)  # a number we computed, written as a number
            else:
                lead = cell.lstrip(" \u00a0\u3000")[:1]
                assert lead not in FORMULA_LEADS or cell.startswith("'"), (column, cell)
