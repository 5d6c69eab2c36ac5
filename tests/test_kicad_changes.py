"""Changes back to KiCad: the change list by reference designator and the schematic edit.

The byte-identity check compares the files line by line and, on a differing line, the
text either side of the quoted value, without the code under test; the round trip
re-exports the netlist from the edited schematic the way KiCad fills a netlist
(connectivity from the board, Value and fields from each symbol:
tests/kicad_boards.reexport).
"""

from __future__ import annotations

import csv
import io
import json
import re
from pathlib import Path

import pytest
from kicad_boards import distribution_amp, reexport
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError
from stockbias.job import parse_job
from stockbias.kicad.board_writer import import_board
from stockbias.kicad.changes import CHANGE_COLUMNS, Change, changes_csv
from stockbias.kicad.netlist import load_netlist, parse_netlist
from stockbias.kicad.schematic import SymbolEdit, edit_schematic, edits_of
from stockbias.kicad.sexpr import parse
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
SCH = SAMPLES / "kicad_distribution_amp.kicad_sch"
runner = CliRunner()


@pytest.fixture(scope="module")
def consolidated(tmp_path_factory: pytest.TempPathFactory) -> dict:
    """import → consolidate with --changes and --schematic-out, once for the module."""
    d = tmp_path_factory.mktemp("roundtrip")
    board = d / "amp.toml"
    r = runner.invoke(app, ["board", "from-netlist", str(SAMPLES / "kicad_distribution_amp.net"),
                            "-i", str(SHELF), "-o", str(board)])
    assert r.exit_code == 0, r.output
    r = runner.invoke(app, ["consolidate", str(board), "-i", str(SHELF), "--json",
                            "--changes", str(d / "changes.csv"), "--schematic", str(SCH),
                            "--schematic-out", str(d / "amp.kicad_sch")])
    assert r.exit_code == 0, r.output
    return {"dir": d, "board": board, "result": json.loads(r.stdout),
            "rows": list(csv.DictReader(io.StringIO((d / "changes.csv").read_text()))),
            "schematic": (d / "amp.kicad_sch").read_text(encoding="utf-8"),
            "stderr": r.stderr}


def test_change_list_is_the_consolidation_by_designator(consolidated: dict) -> None:
    job = parse_job(consolidated["board"].read_text())
    refs = {s.name: s.refs for s in job.stages}
    expected = {(stage["name"], role): part["part_id"]
                for stage in consolidated["result"]["stages"]
                for role, part in stage["changed"].items()}
    rows = consolidated["rows"]
    assert list(rows[0]) == list(CHANGE_COLUMNS)
    assert len(rows) == consolidated["result"]["changes"] == len(expected) > 0
    for row in rows:
        assert expected[(row["stage"], row["role"])] == row["stock_part_id"]
        assert row["reference"] == refs[row["stage"]][row["role"]]
        assert row["old_value"] != row["new_value"]
    assert "Change list written" in consolidated["stderr"]


def _token_spans(line: str) -> tuple[int, int] | None:
    """Where the quoted value of a Value or Stock part property sits on a line."""
    m = re.match(r'\t\t\(property "(?:Value|Stock part)" ("(?:[^"\\]|\\.)*")', line)
    return (m.start(1), m.end(1)) if m else None


def test_schematic_differs_only_in_the_changed_values(consolidated: dict) -> None:
    old = SCH.read_text(encoding="utf-8")
    new = consolidated["schematic"]
    changed = {r["reference"]: r for r in consolidated["rows"]}
    old_lines, new_lines = old.splitlines(keepends=True), new.splitlines(keepends=True)
    assert len(old_lines) == len(new_lines)   # the sample has Stock part fields: no insertion
    differing = [i for i, (a, b) in enumerate(zip(old_lines, new_lines, strict=True)) if a != b]
    assert len(differing) == 2 * len(changed)   # Value and Stock part of each changed symbol
    for i in differing:
        a, b = old_lines[i], new_lines[i]
        sa, sb = _token_spans(a), _token_spans(b)
        assert sa is not None and sb is not None, a
        assert a[:sa[0]] == b[:sb[0]] and a[sa[1]:] == b[sb[1]:]   # only the token moved
        # the symbol this line belongs to is a changed one
        ref = re.findall(r'\(property "Reference" "([^"]+)"', "".join(old_lines[:i]))[-1]
        assert ref in changed
        token = b[sb[0] + 1:sb[1] - 1]
        assert token in (changed[ref]["new_value"], changed[ref]["stock_part_id"])


def test_round_trip_import_gives_the_consolidated_values(consolidated: dict) -> None:
    text = reexport(distribution_amp(), consolidated["schematic"])
    again = import_board(parse_netlist(text, "again.net"), inventory=read_inventory(SHELF))
    before = parse_job(consolidated["board"].read_text())
    after = parse_job(again.text)
    chosen = {s["name"]: s["parts"] for s in consolidated["result"]["stages"]}
    for old, new in zip(before.stages, after.stages, strict=True):
        assert (new.name, new.topology, new.transistor, new.refs) == \
            (old.name, old.topology, old.transistor, old.refs)       # nothing else changed
        assert new.values == {role: p["part_id"] for role, p in chosen[new.name].items()}
    assert after.supply == before.supply


def test_stock_part_field_is_added_when_missing() -> None:
    # KiCad 8 layout: a hidden copy of the Value property, right after it
    text = ('(kicad_sch\n\t(version 20231120)\n\t(lib_symbols\n\t\t(symbol "Device:R"\n'
            '\t\t\t(property "Reference" "R" (at 0 0 0))\n\t\t)\n\t)\n'
            '\t(symbol\n\t\t(lib_id "Device:R")\n\t\t(property "Reference" "R3"\n'
            '\t\t\t(at 1 2 0)\n\t\t)\n\t\t(property "Value" "4k7"\n\t\t\t(at 1 3 0)\n'
            '\t\t\t(effects (font (size 1.27 1.27)) (justify left))\n\t\t)\n\t)\n)\n')
    out = edit_schematic(text, [SymbolEdit("R3", "10K", "CF-10K")])
    assert out == text.replace(
        '\t\t(property "Value" "4k7"\n\t\t\t(at 1 3 0)\n'
        '\t\t\t(effects (font (size 1.27 1.27)) (justify left))\n\t\t)\n',
        '\t\t(property "Value" "10K"\n\t\t\t(at 1 3 0)\n'
        '\t\t\t(effects (font (size 1.27 1.27)) (justify left))\n\t\t)\n'
        '\t\t(property "Stock part" "CF-10K"\n\t\t\t(at 1 3 0)\n'
        '\t\t\t(effects (font (size 1.27 1.27)) (justify left) (hide yes))\n\t\t)\n')
    assert '(property "Reference" "R" (at 0 0 0))' in out   # the library symbol untouched


def test_kicad6_layout_gets_an_id_and_bare_hide() -> None:
    text = ('(kicad_sch (version 20211123)\n  (symbol (lib_id "Device:R") (at 1 1 0)\n'
            '    (property "Reference" "R1" (id 0) (at 0 0 0))\n'
            '    (property "Value" "1k" (id 1) (at 0 0 0)\n'
            '      (effects (font (size 1.27 1.27))))\n  )\n)\n')
    out = edit_schematic(text, [SymbolEdit("R1", "2K2", "CF-2K2")])
    assert ('    (property "Value" "2K2" (id 1) (at 0 0 0)\n'
            '      (effects (font (size 1.27 1.27))))\n'
            '    (property "Stock part" "CF-2K2" (id 2) (at 0 0 0)\n'
            '      (effects (font (size 1.27 1.27)) hide))\n') in out


def test_quotes_and_backslashes_are_escaped_as_kicad_does() -> None:
    text = ('(kicad_sch (version 20231120)\n (symbol (lib_id "Device:R")\n'
            '  (property "Reference" "R1")\n  (property "Value" "1k")\n'
            '  (property "Stock part" "old")))\n')
    out = edit_schematic(text, [SymbolEdit("R1", 'a"b\\c', 'x"y')])
    assert '(property "Value" "a\\"b\\\\c")' in out
    assert '(property "Stock part" "x\\"y")' in out
    sym = next(parse(out).children("symbol"))
    values = {p.atoms()[0].value: p.atoms()[1].value for p in sym.children("property")}
    assert values["Value"] == 'a"b\\c' and values["Stock part"] == 'x"y'


def test_transistor_value_changes_only_when_it_was_the_part_id() -> None:
    text = ('(kicad_sch (version 20231120)\n (symbol (lib_id "Device:Q_NPN_BCE")\n'
            '  (property "Reference" "Q1")\n  (property "Value" "NPN")\n'
            '  (property "Stock part" "QN-LB1")))\n')
    rows = [Change("Q1", "QN-LB1", "QN-LB2", "QN-LB2", "Q1", "transistor")]
    edits, notes = edits_of(rows)
    out = edit_schematic(text, edits)
    assert '(property "Value" "NPN")' in out and '"Stock part" "QN-LB2"' in out
    assert notes == []


def test_a_pair_that_changes_shape_is_left_to_the_user() -> None:
    rows = [Change("R22+R23", "2K2+1K", "3K3", "CF-3K3", "Q7", "RC"),
            Change("R24|R25", "2M2|2M2", "1M|1M", "A|B", "Q8", "RB")]
    edits, notes = edits_of(rows)
    assert edits == [SymbolEdit("R24", "1M", "A"), SymbolEdit("R25", "1M", "B")]
    assert len(notes) == 1 and "R22+R23" in notes[0] and "by hand" in notes[0]


def test_unknown_reference_and_shared_sheet_are_errors() -> None:
    text = ('(kicad_sch (version 20231120)\n (symbol (lib_id "Device:R")\n'
            '  (property "Reference" "R1")\n  (property "Value" "1k")\n'
            '  (instances (project "p" (path "/a" (reference "R1")) (path "/b" '
            '(reference "R101"))))))\n')
    with pytest.raises(InputError) as err:
        edit_schematic(text, [SymbolEdit("R9", "1K", None)], "x.kicad_sch")
    assert "R9 is not on this schematic" in err.value.message
    with pytest.raises(InputError) as err:
        edit_schematic(text, [SymbolEdit("R1", "1K", None)], "x.kicad_sch")
    assert "used more than once" in err.value.message and "R101" in err.value.message
    with pytest.raises(InputError):
        edit_schematic("(export (version E))", [], "x.net")


def test_change_list_cells_are_inert() -> None:
    text = changes_csv([Change("=R1", "1K", "2K2", "@CF", "+stage", "RC")])
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[1] == ["'=R1", "1K", "2K2", "'@CF", "'+stage", "RC"]  # OWASP CSV injection
    assert text.endswith("\r\n")


def test_cli_errors_before_any_search(tmp_path: Path) -> None:
    hand = SAMPLES / "distribution_amp_board.toml"          # a board without [stage.refs]
    r = runner.invoke(app, ["consolidate", str(hand), "-i", str(SHELF),
                            "--changes", str(tmp_path / "c.csv")])
    assert r.exit_code == 2 and "has no [stage.refs]" in r.output
    r = runner.invoke(app, ["consolidate", str(hand), "-i", str(SHELF),
                            "--schematic", str(SCH)])
    assert r.exit_code == 2 and "--schematic needs --schematic-out too" in r.output
    r = runner.invoke(app, ["consolidate", str(hand), "-i", str(SHELF),
                            "--schematic", str(SCH), "--schematic-out", str(SCH), "--force"])
    assert r.exit_code == 2 and "never written over" in r.output
    assert not (tmp_path / "c.csv").exists()


def test_substitute_writes_the_transistor_change(tmp_path: Path) -> None:
    # a one-stage board: the first stage of the sample amplifier on its own
    board = import_board(load_netlist(SAMPLES / "kicad_distribution_amp.net"),
                         inventory=read_inventory(SHELF))
    body = board.text.split("\n[[stage]]")
    (tmp_path / "one.toml").write_text(body[0] + "\n[[stage]]" + body[1])
    r = runner.invoke(app, ["substitute", str(tmp_path / "one.toml"), "-i", str(SHELF),
                            "-v", "R1=CF-100K,R2=CF-22K,RC=CF-10K,RE=CF-4K7", "-t", "QN-LB2",
                            "--samples", "0", "--json", "--changes", str(tmp_path / "s.csv"),
                            "--schematic", str(SCH), "--schematic-out",
                            str(tmp_path / "s.kicad_sch")])
    assert r.exit_code == 0, r.output
    best = next(c for c in json.loads(r.stdout)["candidates"]     # the first other that works
                if c["ruled_out"] is None and (c["drop_in"] or c["changes"])
                and c["part_id"] != "QN-LB2")
    rows = list(csv.DictReader(io.StringIO((tmp_path / "s.csv").read_text())))
    assert rows[0] == {"reference": "Q1", "old_value": "QN-LB2",
                       "new_value": best["part_id"], "stock_part_id": best["part_id"],
                       "stage": "Q1", "role": "transistor"}
    assert len(rows) == 1 + len(best["changes"])
    for row, change in zip(rows[1:], best["changes"], strict=True):
        assert row["role"] == change["role"] and row["stock_part_id"] == change["part_id"]
    sch = (tmp_path / "s.kicad_sch").read_text()
    assert f'"Stock part" "{best["part_id"]}"' in sch


def test_substitute_on_one_stage_of_the_board(consolidated: dict, tmp_path: Path) -> None:
    # --stage picks Q3 of the imported board; the change names Q3's designator
    r = runner.invoke(app, ["substitute", str(consolidated["board"]), "-i", str(SHELF),
                            "--stage", "Q3", "--samples", "0", "--json",
                            "--changes", str(tmp_path / "q3.csv")])
    assert r.exit_code == 0, r.output
    best = next(c for c in json.loads(r.stdout)["candidates"]
                if c["ruled_out"] is None and (c["drop_in"] or c["changes"])
                and c["part_id"] != "QN-GP40")
    rows = list(csv.DictReader(io.StringIO((tmp_path / "q3.csv").read_text())))
    assert rows[0]["reference"] == "Q3" and rows[0]["new_value"] == best["part_id"]
    refs = {"R1": "R9", "R2": "R10", "RC": "R11", "RE": "R12"}   # the sample's Q3 stage
    assert [r["reference"] for r in rows[1:]] == [refs[c["role"]] for c in best["changes"]]
