"""KiCad netlists in: reader, DC graph, classification and the board file.

Expected stages and roles are what a person reads off the sample declarations in
tests/kicad_boards.py (hand reading); expected rail voltages are what the net names
say (KiCad's power-symbol naming, common practice).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import jsonschema
import pytest
from kicad_boards import sample_files
from typer.testing import CliRunner

from stockbias.cli.app import app
from stockbias.errors import InputError, JobError
from stockbias.job import load_job, parse_job
from stockbias.kicad.board_writer import import_board
from stockbias.kicad.graph import build_graph, rail_of, resistor_value
from stockbias.kicad.netlist import load_netlist, parse_netlist
from stockbias.kicad.sexpr import parse, quote, unquote
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
runner = CliRunner()


def test_samples_are_what_the_declarations_write() -> None:
    # the committed files agree with tests/kicad_boards.py (rerun it after editing a board)
    for name, text in sample_files().items():
        assert (SAMPLES / name).read_text(encoding="utf-8") == text, name


# --- S-expressions ------------------------------------------------------------------

def test_sexpr_keeps_offsets_and_escapes() -> None:
    text = '(a (b "x \\"y\\" \\\\z") c)'
    root = parse(text)
    b = root.child("b")
    assert b is not None
    atom = b.atoms()[0]
    assert atom.value == 'x "y" \\z'          # KiCad's escapes, hand reading
    assert text[atom.start:atom.end] == '"x \\"y\\" \\\\z"'
    assert quote(atom.value) == text[atom.start:atom.end]
    assert unquote(quote("a\nb")) == "a\nb"


@pytest.mark.parametrize(("text", "message", "line"), [
    ("(a (b)\n", "never closed", 1),
    ("(a)\n)", "closes nothing", 2),
    ("(a)\n(b)", "text after", 2),
    ('(a\n "open)', "not closed", 2),
    ("x (a)", "outside any list", 1),
])
def test_sexpr_errors_name_the_line(text: str, message: str, line: int) -> None:
    with pytest.raises(InputError) as err:
        parse(text, "bad.net")
    assert message in err.value.message
    assert err.value.line == line
    assert err.value.file == "bad.net"


# --- netlist reader -------------------------------------------------------------------

def test_both_formats_read_the_same_board() -> None:
    s = load_netlist(SAMPLES / "kicad_distribution_amp.net")
    x = load_netlist(SAMPLES / "kicad_distribution_amp.xml")
    assert s.version == x.version == "E"
    assert {r: (c.value, c.lib_id, c.fields.get("Stock part")) for r, c in s.components.items()} \
        == {r: (c.value, c.lib_id, c.fields.get("Stock part")) for r, c in x.components.items()}
    assert {n.name: sorted(n.nodes, key=repr) for n in s.nets} == \
        {n.name: sorted(n.nodes, key=repr) for n in x.nets}
    assert len(s.components) == 31   # 16 R, 9 C, 4 Q, 2 J: hand count
    assert s.components["Q1"].fields["Stock part"] == "QN-LB2"


def test_pin_function_from_libpart_when_the_node_has_none() -> None:
    text = """(export (version "E")
      (components (comp (ref "Q1") (value "NPN") (libsource (lib "Device") (part "Q_X"))))
      (libparts (libpart (lib "Device") (part "Q_X")
        (pins (pin (num "1") (name "E")) (pin (num "2") (name "B")) (pin (num "3") (name "C")))))
      (nets (net (code "1") (name "/b") (node (ref "Q1") (pin "2")))))"""
    nl = parse_netlist(text)
    assert nl.nets[0].nodes[0].function == "B"


@pytest.mark.parametrize(("text", "message"), [
    ("(kicad_sch (version 1))", "expected (export"),
    ("hello", "not a KiCad netlist"),
    ("<netlist/>", "expected <export>"),
    ("<export><components>", "not well-formed XML"),
    ('(export (components (comp (ref "R?") (value "1k"))))', "not annotated"),
    ('(export (components (comp (ref "R1")) (comp (ref "R1"))))', "share this reference"),
])
def test_bad_netlists_are_one_line_errors(text: str, message: str) -> None:
    with pytest.raises(InputError) as err:
        parse_netlist(text, "x.net")
    assert message in err.value.message
    assert "\n" not in err.value.one_line()


# --- names and values -----------------------------------------------------------------

@pytest.mark.parametrize(("name", "volts", "sign"), [
    ("+15V", 15.0, 1), ("15V", 15.0, 1), ("-6V", -6.0, -1), ("+3V3", 3.3, 1),
    ("+3.3V", 3.3, 1), ("+12VA", 12.0, 1), ("GND", 0.0, 0), ("AGND", 0.0, 0), ("0V", 0.0, 0),
    ("VCC", None, 1), ("VEE", None, -1), ("/+9V", 9.0, 1),
])
def test_rails_from_net_names(name: str, volts: float | None, sign: int) -> None:
    rail = rail_of(name)
    assert rail is not None
    assert rail.volts == (pytest.approx(volts) if volts is not None else None)
    assert rail.sign == sign


@pytest.mark.parametrize("name", ["/base", "Net-(Q1-C)", "/in", "V", "+V3V3"])
def test_signal_nets_are_not_rails(name: str) -> None:
    assert rail_of(name) is None


def test_rail_override_wins() -> None:
    rail = rail_of("VCC", {"VCC": 12.0})
    assert rail is not None and rail.volts == 12.0
    rail = rail_of("/bias", {"bias": 5.0})
    assert rail is not None and rail.volts == 5.0


@pytest.mark.parametrize(("text", "ohm"), [
    ("4k7", 4700.0), ("4.7k", 4700.0), ("4K7", 4700.0), ("10K 1%", 10e3), ("470R 0.25W", 470.0),
    ("1 k", 1e3), ("2M2", 2.2e6), ("0", 0.0), ("~", None), ("", None), ("DNP", None),
    ("R", None), ("pull-up", None),
])
def test_resistor_values_through_the_stock_notation(text: str, ohm: float | None) -> None:
    assert resistor_value(text) == ohm   # stock notation (DESIGN §3), hand reading


# --- classification -------------------------------------------------------------------

NETWORKS = {  # stage → (network, polarity, role → designators), read off kicad_boards.networks
    "Q1": ("divider", "NPN", {"R1": "R1", "R2": "R2", "RC": "R3", "RE": "R4"}),
    "Q2": ("divider", "PNP", {"R1": "R5", "R2": "R6", "RC": "R7", "RE": "R8"}),
    "Q3": ("collector_feedback", "NPN", {"RC": "R9", "RB": "R10", "RE": "R11"}),
    "Q4": ("collector_feedback", "PNP", {"RC": "R12", "RB": "R13"}),
    "Q5": ("dual_supply", "NPN", {"RB": "R14", "RE": "R15", "RC": "R16"}),
    "Q6": ("dual_supply", "PNP", {"RB": "R17", "RE": "R18", "RC": "R19"}),
    "Q7": ("fixed_base", "NPN", {"RB": "R20", "RC": "R22+R23", "RE": "R21"}),
    "Q8": ("fixed_base", "PNP", {"RB": "R24|R25", "RC": "R26"}),
}


@pytest.mark.parametrize("name", ["kicad_networks.xml", "kicad_networks.net"])
def test_every_network_both_polarities(name: str) -> None:
    board = import_board(load_netlist(SAMPLES / name))
    found = {s.name: (s.found.topology, s.found.polarity,
                      {r: e.label for r, e in s.found.roles.items()}) for s in board.stages}
    assert found == NETWORKS
    assert board.problems == []
    values = {s.name: s.values for s in board.stages}
    assert values["Q2"] == {"R1": "15K", "R2": "68K", "RC": "4K7", "RE": "1K"}  # "15K 1%" read
    assert values["Q7"]["RC"] == "2k2+1k"
    assert values["Q8"]["RB"] == "2M2|2M2"
    g = board.graph
    assert g.names[board.supply_node] == "+12V" and g.names[board.negative_node] == "-12V"


def test_written_board_of_every_network_loads() -> None:
    board = import_board(load_netlist(SAMPLES / "kicad_networks.xml"))
    text = board.text.replace('"fill in: collector current of', '"1 mA" # ').replace(
        'transistor = "fill in:', 'transistor = "QN-GP40" # "')
    job = parse_job(text)
    assert job.supply.volts == 12.0 and job.supply.negative_volts == -12.0
    by = {s.name: s for s in job.stages}
    assert by["Q7"].refs == {"transistor": "Q7", "RB": "R20", "RC": "R22+R23", "RE": "R21"}
    assert by["Q8"].values == {"RB": "2M2|2M2", "RC": "3k3"}
    assert by["Q4"].topology == "collector_feedback"


def test_parts_it_cannot_classify_are_listed_with_the_reason() -> None:
    board = import_board(load_netlist(SAMPLES / "kicad_unclassified.net"))
    assert [s.name for s in board.stages] == ["Q4", "Q6"]
    q4, q6 = board.stages
    assert q4.values["RE"] is None and q4.found.roles["RE"].refs == ("R14",)
    assert q6.found.polarity == "NPN" and not q6.found.polarity_said
    assert q6.transistor is None
    reasons = {p.refs[0]: (set(p.refs), p.reason) for p in board.problems}
    assert reasons["Q1"][0] == {"Q1", "Q2", "R1", "R2", "R3", "R4", "R5", "R6"}
    assert "DC-coupled" in reasons["Q1"][1] and "Q1 collector and Q2 base" in reasons["Q1"][1]
    assert reasons["Q3"][0] == {"Q3", "R7", "R8", "R9", "R10", "C2"}
    assert reasons["Q3"][1].startswith("bootstrapped base") and "through R9" in reasons["Q3"][1]
    assert reasons["R14"][1].startswith("resistor with no value")
    assert reasons["Q5"][0] == {"Q5", "R15", "R16", "R17", "D1"} and "D1" in reasons["Q5"][1]
    assert reasons["R22"][1] == "not in any transistor's bias network"
    assert len(board.problems) == 5
    assert board.to_fill == ["stock part id of Q4, NPN", "collector current of Q4",
                             "value of R14",
                             "stock part id of Q6, NPN as biased (the symbol does not say)",
                             "collector current of Q6"]


def test_an_entry_to_fill_in_is_a_one_line_error(tmp_path: Path) -> None:
    board = import_board(load_netlist(SAMPLES / "kicad_unclassified.net"))
    path = tmp_path / "b.toml"
    path.write_text(board.text)
    with pytest.raises(JobError) as err:
        load_job(path)
    assert err.value.column == "stage.transistor"
    assert "still to be filled in: stock part id of Q4" in err.value.message
    assert err.value.line == board.text.splitlines().index(
        'transistor = "fill in: stock part id of Q4, NPN"') + 1


def _tiny(nets: dict[str, list[tuple[str, str, str]]], parts: dict[str, tuple[str, str]]) -> str:
    """An S-expression netlist: parts ref → (symbol, value); nets name → (ref, pin, function)."""
    comps = "".join(f'(comp (ref "{r}") (value "{v}") (libsource (lib "Device") (part "{p}")))'
                    for r, (p, v) in parts.items())
    body = "".join(
        f'(net (code "{i}") (name "{n}") '
        + "".join(f'(node (ref "{r}") (pin "{p}") (pinfunction "{f}"))' for r, p, f in nodes)
        + ")" for i, (n, nodes) in enumerate(nets.items(), start=1))
    return f'(export (version "E") (components {comps}) (nets {body}))'


def test_links_join_nets_and_chains_merge() -> None:
    # +15V reaches the stage through a ferrite bead and a 0 Ω link; RE is 330R + 1k in series
    parts = {"FB1": ("Ferrite_Bead", "600R@100MHz"), "R9": ("R", "0"),
             "R1": ("R", "47k"), "R2": ("R", "10k"), "R3": ("R", "4k7"),
             "R4": ("R", "330R"), "R5": ("R", "1k"), "Q1": ("Q_NPN_BCE", "NPN")}
    nets = {"+15V": [("FB1", "1", "")], "/filt": [("FB1", "2", ""), ("R9", "1", "")],
            "/rail": [("R9", "2", ""), ("R1", "1", ""), ("R3", "1", "")],
            "/b": [("R1", "2", ""), ("R2", "1", ""), ("Q1", "1", "B")],
            "/c": [("R3", "2", ""), ("Q1", "2", "C")],
            "/e": [("Q1", "3", "E"), ("R4", "1", "")], "/mid": [("R4", "2", ""), ("R5", "1", "")],
            "GND": [("R2", "2", ""), ("R5", "2", "")]}
    board = import_board(parse_netlist(_tiny(nets, parts)))
    (s,) = board.stages
    assert {r: e.label for r, e in s.found.roles.items()} == \
        {"R1": "R1", "R2": "R2", "RC": "R3", "RE": "R4+R5"}
    assert s.values["RE"] == "330R+1k"
    assert board.graph.names[board.supply_node] == "+15V"


def test_a_link_between_two_rails_is_an_error() -> None:
    parts = {"L1": ("L", "10u")}
    nets = {"+15V": [("L1", "1", "")], "GND": [("L1", "2", "")]}
    with pytest.raises(InputError) as err:
        build_graph(parse_netlist(_tiny(nets, parts), "x.net"))
    assert "L1" in err.value.message and "+15V" in err.value.message


def test_polarity_against_the_circuit_is_reported() -> None:
    # a PNP symbol in a circuit biased for NPN
    parts = {"R1": ("R", "47k"), "R2": ("R", "10k"), "R3": ("R", "4k7"), "R4": ("R", "1k"),
             "Q1": ("Q_PNP_BCE", "PNP")}
    nets = {"+9V": [("R1", "1", ""), ("R3", "1", "")],
            "/b": [("R1", "2", ""), ("R2", "1", ""), ("Q1", "1", "B")],
            "/c": [("R3", "2", ""), ("Q1", "2", "C")], "/e": [("Q1", "3", "E"), ("R4", "1", "")],
            "GND": [("R2", "2", ""), ("R4", "2", "")]}
    board = import_board(parse_netlist(_tiny(nets, parts)))
    assert board.stages == []
    assert "PNP by its symbol, but the circuit is biased for NPN" in board.problems[0].reason


# --- the board file with today's targets ----------------------------------------------

def test_sample_board_imports_ready_for_check() -> None:
    inv = read_inventory(SHELF)
    board = import_board(load_netlist(SAMPLES / "kicad_distribution_amp.net"), inventory=inv)
    assert board.to_fill == []
    job = parse_job(board.text)
    # the same parts as the hand-written distribution_amp_board.toml, stage by stage
    ref = load_job(SAMPLES / "distribution_amp_board.toml")
    for mine, theirs in zip(job.stages, ref.stages, strict=True):
        assert mine.values == theirs.values
        assert mine.transistor == theirs.transistor
        assert mine.topology == theirs.topology == "divider"
    assert job.stages[0].refs == {"transistor": "Q1", "R1": "R1", "R2": "R2", "RC": "R3",
                                  "RE": "R4"}
    assert job.small_signal.re_bypassed is True
    for s in board.stages:   # the window holds today's worst case (the stated rule)
        assert s.ic is not None and s.ic_window_pct is not None
        lo, hi = s.ic * (1 - s.ic_window_pct / 100), s.ic * (1 + s.ic_window_pct / 100)
        spans = s.target_note.split("spans ")[1]
        assert "µA" in spans or "mA" in spans
        assert lo < s.ic < hi


def test_cli_from_netlist_writes_a_board_that_checks(tmp_path: Path) -> None:
    out = tmp_path / "amp.toml"
    result = runner.invoke(app, ["board", "from-netlist",
                                 str(SAMPLES / "kicad_distribution_amp.net"), "-i", str(SHELF),
                                 "--out", str(out)], env={"COLUMNS": "80"})
    assert result.exit_code == 0, result.output
    assert "4 stage(s)" in result.stdout and "Board file written" in result.stdout
    for line in result.stdout.splitlines():
        # a path is never cut (the netlist's path is as long as the checkout's folder)
        assert len(line) <= 80 or str(out) in line or str(SAMPLES) in line, line
    for stage in ("Q1", "Q2", "Q3", "Q4"):
        checked = runner.invoke(app, ["check", str(out), "-i", str(SHELF), "--stage", stage,
                                      "--samples", "0"])
        assert checked.exit_code == 0, checked.output
    again = runner.invoke(app, ["board", "from-netlist",
                                str(SAMPLES / "kicad_distribution_amp.net"), "--out", str(out)])
    assert again.exit_code == 2 and "the file exists" in again.output


def test_cli_from_netlist_json_matches_its_schema() -> None:
    result = runner.invoke(app, ["board", "from-netlist",
                                 str(SAMPLES / "kicad_unclassified.net"), "--json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    schema = json.loads((ROOT / "stockbias" / "schemas" / "board_import.schema.json")
                        .read_text())
    jsonschema.validate(payload, schema)
    assert [s["name"] for s in payload["stages"]] == ["Q4", "Q6"]
    assert payload["board"] is None
    assert len(payload["not_classified"]) == 5
    assert {r["net"]: r["role"] for r in payload["rails"]} == {"+9V": "supply", "GND": "ground"}


def test_cli_without_out_prints_the_board() -> None:
    result = runner.invoke(app, ["board", "from-netlist", str(SAMPLES / "kicad_networks.xml")])
    assert result.exit_code == 0, result.output
    assert result.stdout.startswith("# Board read from the KiCad netlist")
    assert max(len(line) for line in result.stdout.splitlines()[1:]) <= 100
    assert 'RC = "R22+R23"' in result.stdout


@pytest.mark.parametrize(("args", "message"), [
    (["--rail", "VCC"], "expected NET=VOLTS"),
    (["--rail", "VCC=twelve"], "option '--rail'"),
    (["--rail", "VCC=5000"], "beyond"),
])
def test_cli_bad_rail_is_exit_2(args: list[str], message: str) -> None:
    result = runner.invoke(app, ["board", "from-netlist", str(SAMPLES / "kicad_networks.xml"),
                                 *args])
    assert result.exit_code == 2
    assert message in result.output and "Traceback" not in result.output


def test_cli_rail_override_sets_the_supply(tmp_path: Path) -> None:
    net = tmp_path / "vcc.net"
    net.write_text((SAMPLES / "kicad_networks.net").read_text().replace('"+12V"', '"VCC"'))
    result = runner.invoke(app, ["board", "from-netlist", str(net)])
    assert 'volts = "fill in: volts of net VCC"' in result.stdout
    result = runner.invoke(app, ["board", "from-netlist", str(net), "--rail", "VCC=12"])
    assert "volts = 12  # net VCC" in result.stdout


def test_cli_bad_netlist_and_no_stage() -> None:
    result = runner.invoke(app, ["board", "from-netlist", str(SHELF)])
    assert result.exit_code == 2 and "not a KiCad netlist" in result.output
    empty = ROOT / "tests" / "data" / "kicad_no_transistor.net"
    result = runner.invoke(app, ["board", "from-netlist", str(empty)])
    assert result.exit_code == 1
    assert "no stage could be imported" in result.output


def test_stages_joined_by_a_resistor_are_dc_coupled() -> None:
    # Q1's collector feeds Q2's base through R5: one DC-coupled pair, not two stages
    parts = {"R1": ("R", "47k"), "R2": ("R", "10k"), "R3": ("R", "4k7"), "R4": ("R", "1k"),
             "R5": ("R", "10k"), "R6": ("R", "2k2"), "R7": ("R", "470R"),
             "Q1": ("Q_NPN_BCE", "NPN"), "Q2": ("Q_NPN_BCE", "NPN")}
    nets = {"+12V": [("R1", "1", ""), ("R3", "1", ""), ("R6", "1", "")],
            "/b1": [("R1", "2", ""), ("R2", "1", ""), ("Q1", "1", "B")],
            "/c1": [("R3", "2", ""), ("Q1", "2", "C"), ("R5", "1", "")],
            "/e1": [("Q1", "3", "E"), ("R4", "1", "")],
            "/b2": [("R5", "2", ""), ("Q2", "1", "B")],
            "/c2": [("R6", "2", ""), ("Q2", "2", "C")], "/e2": [("Q2", "3", "E"), ("R7", "1", "")],
            "GND": [("R2", "2", ""), ("R4", "2", ""), ("R7", "2", "")]}
    board = import_board(parse_netlist(_tiny(nets, parts)))
    assert board.stages == []
    (p,) = board.problems
    assert set(p.refs) == {"Q1", "Q2", "R1", "R2", "R3", "R4", "R5", "R6", "R7"}
    assert "R5 joins Q1 collector to Q2 base" in p.reason


def test_a_board_naming_one_part_in_two_stages_is_refused() -> None:
    board = import_board(load_netlist(SAMPLES / "kicad_networks.xml"))
    text = board.text.replace('RE = "R11"', 'RE = "R4"')   # Q3's RE said to be Q1's
    with pytest.raises(JobError) as err:
        parse_job(text.replace('"fill in:', '"1 mA" #'))
    assert "stages 'Q1' and 'Q3' both name R4" in err.value.message
    assert "DC-coupled" in err.value.message


@pytest.mark.parametrize("width", [80, 120])
def test_screen_fits_the_width_and_keeps_values_whole(tmp_path: Path, width: int) -> None:
    for name, extra, wholes in (
            ("kicad_unclassified.net", [], ("R14 ('~')", "RE=R14 (value to fill in)")),
            ("kicad_distribution_amp.net", ["-i", str(SHELF)], ("330 µA", "RE=R16 CF-680R"))):
        out = tmp_path / f"{width}{name}.toml"
        r = runner.invoke(app, ["board", "from-netlist", str(SAMPLES / name), "-o", str(out),
                                *extra], env={"COLUMNS": str(width)})
        assert r.exit_code == 0, r.output
        lines = r.stdout.splitlines()
        for line in lines:
            assert len(line) <= width or str(SAMPLES) in line or str(out) in line, line
            assert not re.match(r"\s*[µmk]?[AVΩ]\b", line), line   # no unit torn from its number
        text = " ".join(line.strip() for line in lines)
        for whole in wholes:
            assert whole in text


@pytest.mark.parametrize(("part", "value", "fields", "polarity", "source"), [
    ("Q_NPN_BCE", "small signal", {}, "NPN", "symbol"),
    ("Q_BJT", "PNP general purpose", {}, "PNP", "value"),
    ("Q_BJT", "QX-7", {"Type": "npn"}, "NPN", "field 'Type'"),
    ("Q_BJT", "QX-7", {}, None, ""),
])
def test_polarity_from_symbol_value_or_field(part: str, value: str, fields: dict,
                                             polarity: str | None, source: str) -> None:
    from stockbias.kicad.graph import _polarity
    from stockbias.kicad.netlist import Component

    assert _polarity(Component("Q1", value, "Device", part, fields)) == (polarity, source)
