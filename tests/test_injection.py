"""Text from the stock file, the job and the command line never acts as a command.

Netlists: a part id, location or note, a transistor's part id, a board stage's name, the job
path and the design's source are each loaded with a SPICE payload (a ``.control`` block with
``shell touch <sentinel>``, a ``*#`` command line, a ``+`` continuation card, ``.include``,
an early ``.end``) behind every kind of line break.  The exported deck must hold exactly the
cards of the clean deck, ngspice-39 (``ngspice -b``) must run it without creating the sentinel,
and its operating point must be the one stockbias expects.

Pick lists: a text cell a spreadsheet would read as a formula starts with ``'`` (OWASP "CSV
Injection" guidance: cells starting ``=``, ``+``, ``-``, ``@``, tab, carriage return).
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
import shutil
import subprocess
from dataclasses import replace
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from stockbias.analysis.spice import run_ngspice_plots, write_netlist
from stockbias.cli.app import app
from stockbias.inert_text import (
    check_spice_name,
    console_text,
    netlist_comment,
    netlist_text,
    spice_name,
    spreadsheet_cell,
    spreadsheet_row,
)
from stockbias.job import load_job
from stockbias.render.netlist import ExportedNetlist, export_netlist
from stockbias.render.pick_list import pick_list_csv, render_pick_list
from stockbias.selection import Selection, bench_needs, resolve_selection
from stockbias.stock_io import read_inventory

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "inventory_samples"
SHELF = SAMPLES / "workshop_drawers.csv"
JOB = SAMPLES / "line_driver_job.toml"
BOARD = SAMPLES / "distribution_amp_board.toml"
VALUES = {"R1": "CF-22K+CF-22K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}
IC_RTOL = 0.005  # ngspice-39 against check's exponential-model IC (tests/test_export.py bound)
HAS_NGSPICE = shutil.which("ngspice") is not None
runner = CliRunner()

# Every character that some reader takes as the end of a line: \n, \r, \r\n, VT, FF, the file,
# group and record separators, NEL, and the Unicode line and paragraph separators.
BREAKS = ["\n", "\r", "\r\n", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028",
          "\u2029"]
ROUTES = ["resistor part_id", "resistor location", "resistor note", "transistor part_id",
          "transistor note", "stage name", "job path", "source"]

# The cards a netlist may hold (everything we write that is not a comment): element cards with
# generated names, our model card, options, temperature, analyses, the end.
_CARD = re.compile(
    r"(?:[RV]_[A-Za-z0-9_]+ [a-z0-9_]+ [a-z0-9_]+ (?:DC )?[-+0-9.e]+"
    r"|Q1 q[cb] qb e q[cb] QSTAGE"
    r"|V_IC c qc DC 0|V_IB b qb DC 0"
    r"|B_ICBO q[cb] q[cb] I = [0-9.e+-]+ \* pow\(2, \(temper - 25\) / [0-9.]+\)"
    r"|\.model QSTAGE (?:NPN|PNP) \((?:[A-Z]+=[-+0-9.e]+ ?)+\)"
    r"|\.options reltol=1e-6 abstol=1e-15 vntol=1e-9 gmin=1e-15|\.temp [-0-9.e]+|\.op"
    r"|\.dc TEMP [-0-9.e]+ [-0-9.e]+ [-0-9.e]+|\.print dc v\(b\) v\(c\) v\(e\) i\(V_IC\) i\(V_IB\)"
    r"|\.end)")


def payload(sentinel: Path, br: str = "\n") -> str:
    """A text that, written raw into a deck, runs ``touch sentinel`` in ngspice -b."""
    return br.join(["X", ".control", f"shell touch {sentinel}", ".endc",
                    f"*# shell touch {sentinel}", "+ R_X b 0 1", ".include /dev/null",
                    ".end", ""]) + "; $ * + end"


def clean_stage():
    job, inv = load_job(JOB), read_inventory(SHELF)
    parts, t = resolve_selection(job, Selection("divider", "QN-GP40", VALUES, "t"), inv)
    return job, parts, t


def hostile_export(text: str, routes: list[str]) -> ExportedNetlist:
    """The clean stage exported with ``text`` in every free-text field named in ``routes``."""
    job, parts, t = clean_stage()
    if "stage name" in routes:
        job = replace(job, stages=(replace(job.stage, name=text),))
    if "job path" in routes:
        job = replace(job, path=text)
    changes = {f: text for route, f in (("resistor part_id", "part_id"),
                                         ("resistor location", "location"),
                                         ("resistor note", "note")) if route in routes}
    if changes:
        parts = {role: replace(p, parts=tuple(replace(x, **changes) for x in p.parts))
                 for role, p in parts.items()}
    tchanges = {f: text for route, f in (("transistor part_id", "part_id"),
                                          ("transistor note", "note")) if route in routes}
    t = replace(t, **tchanges)
    return export_netlist(job, parts, t, source=text if "source" in routes else "--values")


def cards(text: str) -> list[str]:
    """Every line ngspice reads as a card: not the title (line 1), not a ``* `` comment."""
    return [x for x in text.split("\n")[1:] if x and not x.startswith("* ") and x != "*"]


def assert_inert(text: str, clean: str) -> None:
    lines = text.split("\n")
    # one line per "\n" for every reader: no other line break survives anywhere
    assert text.splitlines() == lines[:-1] and lines[-1] == ""
    assert all(x.isascii() and x.isprintable() for x in lines)
    assert len(lines) == len(clean.split("\n"))  # free text added no line
    assert cards(text) == cards(clean)  # exactly the cards of the clean deck, in order
    for card in cards(text):
        assert _CARD.fullmatch(card), card  # each one a card we write
    for x in lines[1:]:
        assert not x.startswith(("*#", "+", ".control", ".endc", ".include", ".lib", "shell"))


# --- the text functions -------------------------------------------------------------------

@pytest.mark.parametrize("br", [*BREAKS, "\x00", "\t", "\x7f", "\x9b", "\u200b", "\u202e",
                                "\ufeff"])
def test_netlist_text_shows_every_control_character_as_a_placeholder(br: str) -> None:
    out = netlist_text(f"A{br}.endc")
    assert out == "A" + "".join(f"<U+{ord(c):04X}>" for c in br) + ".endc"  # e.g. <U+000A>
    assert out.isascii() and out.isprintable() and len(out.splitlines()) == 1


def test_netlist_text_keeps_ordinary_text_and_words_our_symbols() -> None:
    assert netlist_text("CF-4K7 drawer B3, row 2 (left)") == "CF-4K7 drawer B3, row 2 (left)"
    assert netlist_text("4.7 kΩ ±5 % at 25 °C, 2 µA") == "4.7 kohm +/-5 % at 25 C, 2 uA"
    assert netlist_text("Schublade Nr. 3 Wärme") == "Schublade Nr. 3 Warme"  # accent dropped
    assert netlist_text("x" * 500) == "x" * 197 + "..."  # capped at NETLIST_TEXT_LIMIT


def test_netlist_comment_never_starts_a_star_hash_command() -> None:
    # ngspice runs a line starting "*#" as a command; ours always start "* "
    assert netlist_comment("# shell touch x") == "* # shell touch x"
    assert netlist_comment("") == "*"


def test_spice_names() -> None:
    assert spice_name("CF-4K7 (B3)", "R_") == "R_CF_4K7__B3_"
    assert spice_name("a\nb", "Q_", used=["Q_a_b", "q_A_B_2"]) == "Q_a_b_3"  # SPICE ignores case
    assert check_spice_name("R_R1a") == "R_R1a"
    for bad in ("R 1", "R1\n", "", "R-1", "R1;"):
        with pytest.raises(ValueError, match="not a safe SPICE name"):
            check_spice_name(bad)


# --- netlists: every route, every line break ----------------------------------------------

@pytest.mark.parametrize("route", ROUTES)
@pytest.mark.parametrize("br", BREAKS, ids=[f"U+{ord(b[-1]):04X}{len(b)}" for b in BREAKS])
def test_payload_in_every_field_leaves_the_cards_unchanged(tmp_path: Path, route: str,
                                                           br: str) -> None:
    clean = hostile_export("CF-0", []).text
    text = hostile_export(payload(tmp_path / "sentinel", br), [route]).text
    assert_inert(text, clean)
    if route != "resistor note" and route != "transistor note":  # notes are not written
        assert "shell touch" in text  # the text is there, on a comment line


@pytest.mark.parametrize("title", [".control", "*# shell touch x", "+ R9 b 0 1", "; x", ""])
def test_title_line_never_looks_like_a_card(title: str) -> None:
    text = write_netlist("divider", {"R1": 47e3, "R2": 10e3, "RC": 3.3e3, "RE": 1e3}, "NPN",
                         12.0, None, {"is_a": 1e-14, "bf": 150.0}, 25.0, title=title + "\nX")
    first = text.split("\n")[0]
    assert first[0] not in ".*+;$" and first.endswith(netlist_text(title + "\nX"))


def test_raw_payload_does_run_in_ngspice(tmp_path: Path) -> None:
    """The payload is live when written raw: this is what the tests below guard against."""
    if not HAS_NGSPICE:
        pytest.skip("ngspice is not installed")
    sentinel = tmp_path / "sentinel"
    deck = tmp_path / "raw.cir"
    deck.write_text(f"title\n* {payload(sentinel)}\nV1 1 0 1\nR1 1 0 1k\n.op\n.end\n")
    subprocess.run(["ngspice", "-b", str(deck)], cwd=tmp_path, capture_output=True,
                   timeout=60, check=False, env={**os.environ, "HOME": str(tmp_path)})
    assert sentinel.exists()


@pytest.mark.spice
@pytest.mark.skipif(not HAS_NGSPICE, reason="ngspice is not installed")
@pytest.mark.parametrize("br", BREAKS, ids=[f"U+{ord(b[-1]):04X}{len(b)}" for b in BREAKS])
def test_ngspice_runs_nothing_and_finds_the_expected_point(tmp_path: Path, br: str) -> None:
    sentinel = tmp_path / "sentinel"
    ex = hostile_export(payload(sentinel, br), ROUTES)  # every route at once
    clean = hostile_export("CF-0", [])
    assert_inert(ex.text, clean.text)
    plots = dict(run_ngspice_plots(ex.text))
    assert not sentinel.exists()
    op = plots["Operating Point"]
    ic = op["i(v_ic)"][0]  # NPN: positive into the collector
    # ngspice-39 against stockbias's exponential-model nominal point (tests/test_export.py bound)
    assert ic == pytest.approx(ex.expected["ic"], rel=IC_RTOL)
    assert op["v(c)"][0] - op["v(e)"][0] == pytest.approx(ex.expected["vce"], abs=5e-3)
    # and exactly the clean deck's result (same cards, same simulator)
    assert op == dict(run_ngspice_plots(clean.text))["Operating Point"]


def _hostile_shelf(path: Path, location: str) -> Path:
    """The workshop shelf with ``location`` on every line (written with the csv module)."""
    lines = SHELF.read_text(encoding="utf-8").splitlines(keepends=True)
    comments = [x for x in lines if x.startswith("#")]
    rows = list(csv.reader(io.StringIO("".join(x for x in lines if not x.startswith("#")))))
    at = rows[0].index("location")
    for row in rows[1:]:
        row[at] = location
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    path.write_text("".join(comments) + buf.getvalue(), encoding="utf-8")
    return path


@pytest.mark.spice
@pytest.mark.skipif(not HAS_NGSPICE, reason="ngspice is not installed")
def test_cli_export_through_location_stage_name_and_job_path(tmp_path: Path) -> None:
    sentinel = tmp_path / "sentinel"
    evil = payload(sentinel)
    try:
        folder = tmp_path / evil.replace("/", "_")  # the job path carries the payload too
        folder.mkdir()
        hostile_path = True
    except OSError:  # a file system that refuses line breaks in names: the field route only
        folder = tmp_path / "jobs"
        folder.mkdir()
        hostile_path = False
    board = folder / "board.toml"
    name = json.dumps(evil)  # a TOML basic string with the line breaks escaped
    board.write_text(BOARD.read_text(encoding="utf-8").replace('name = "input"',
                                                               f"name = {name}", 1))
    shelf = _hostile_shelf(tmp_path / "shelf.csv", evil)
    out = tmp_path / "stage.cir"
    result = runner.invoke(app, ["export", str(board), "-i", str(shelf), "--stage", evil, "-v",
                                 "R1=CF-100K,R2=CF-22K,RE=CF-4K7,RC=CF-10K", "-t", "QN-LB2",
                                 "--netlist", str(out), "--json"])
    assert result.exit_code == 0, result.output
    text = out.read_text(encoding="utf-8")
    lines = text.split("\n")
    # the payloads are there, each inert on one comment line
    stage = next(x for x in lines if x.startswith("* stage '"))
    assert stage.startswith("* stage 'X<U+000A>.control<U+000A>shell touch ")
    assert ("<U+000A>" in stage.partition("' of job ")[2]) == hostile_path
    located = [x for x in lines if x.startswith("* R_") and " at X<U+000A>.control<U+000A>"
               "shell touch " in x]
    assert len(located) == 4  # R1, R2, RC, RE
    assert all(x.startswith("* ") for x in lines if "shell touch" in x)
    expected = json.loads(result.stdout)["netlist"]["expected"]
    proc = subprocess.run(["ngspice", "-b", "-r", "stage.raw", str(out)], cwd=tmp_path,
                          capture_output=True, text=True, timeout=60, check=False,
                          env={**os.environ, "HOME": str(tmp_path), "SPICE_ASCIIRAWFILE": "1"})
    assert proc.returncode == 0, proc.stderr
    assert not sentinel.exists()
    plots = dict(run_ngspice_plots(text))
    # ngspice-39 against stockbias's exponential-model nominal point (tests/test_export.py bound)
    assert plots["Operating Point"]["i(v_ic)"][0] == pytest.approx(expected["ic"], rel=IC_RTOL)
    clean = runner.invoke(app, ["export", str(BOARD), "-i", str(SHELF), "--stage", "input", "-v",
                                "R1=CF-100K,R2=CF-22K,RE=CF-4K7,RC=CF-10K", "-t", "QN-LB2",
                                "--netlist", "-"])
    assert clean.exit_code == 0, clean.output
    assert cards(text) == cards(clean.stdout[:clean.stdout.index(".end\n") + 5])


# --- spreadsheets --------------------------------------------------------------------------

@pytest.mark.parametrize(("text", "cell"), [
    # OWASP "CSV Injection": cells starting = + - @ tab CR get a leading single quote
    ("=HYPERLINK(\"http://x\",\"B3\")", "'=HYPERLINK(\"http://x\",\"B3\")"),
    ("+1+cmd|' /C calc'!A0", "'+1+cmd|' /C calc'!A0"),
    ("-2+3", "'-2+3"),
    ("@SUM(A1:A9)", "'@SUM(A1:A9)"),
    ("\t=1", "'\t=1"),
    ("\r=1", "'\r=1"),
    ("\n=1", "'\n=1"),
    ("  =1", "'  =1"),  # a leading blank does not hide it
    ("\uff1d1+1", "'\uff1d1+1"),  # full-width equals sign
    ("CF-4K7", "CF-4K7"),
    ("B3 = top", "B3 = top"),
    ("", ""),
    (-3, "-3"),  # a count we computed stays a number
    (None, ""),
])
def test_spreadsheet_cell(text: object, cell: str) -> None:
    assert spreadsheet_cell(text) == cell


def test_spreadsheet_cell_refuses_what_it_cannot_judge() -> None:
    with pytest.raises(TypeError):
        spreadsheet_row([1.5])


FORMULAS = ["=1+2", "+SUM(1)", "-3+4", "@A1", "\t=2", "\r=3", "=CMD|' /C calc'!A0"]


def _hostile_needs(text: str, field: str, quantity: int = 10):
    """The clean stage's pick list with ``text`` leading ``field`` of every part."""
    _, parts, t = clean_stage()
    parts = {role: replace(p, parts=tuple(replace(x, **{field: text + getattr(x, field)})
                                          for x in p.parts))
             for role, p in parts.items()}
    return bench_needs(parts, replace(t, **{field: text + getattr(t, field)}), quantity)


@pytest.mark.parametrize("field", ["part_id", "location", "note"])
@pytest.mark.parametrize("text", FORMULAS)
def test_pick_list_cells_are_never_formulas(field: str, text: str) -> None:
    rows = list(csv.DictReader(io.StringIO(pick_list_csv(_hostile_needs(text, field)),
                                           newline="")))
    assert len(rows) == 5  # CF-22K, CF-10K, CF-3K3, CF-1K0, QN-GP40 (hand count)
    for row in rows:
        for column, cell in row.items():
            assert not cell or cell[0] not in "=+-@\t\r", (column, cell)
        if field != "note":  # notes are not in the pick list
            assert row[field].startswith("'" + text)  # the text itself, marked as text
    # workshop_drawers.csv: CF-22K 45 in stock, two per board x 10 boards; numbers stay numbers
    by_role = {r["roles"]: r for r in rows}
    assert by_role["R1"]["pull"] == "20" and by_role["R1"]["remaining"] == "25"


def test_a_short_line_keeps_its_negative_count_as_a_number() -> None:
    # CF-470K: 10 in stock, 12 boards need 12 (workshop_drawers.csv, hand count)
    job, inv = load_job(JOB), read_inventory(SHELF)
    parts, t = resolve_selection(job, Selection("divider", "QN-GP40", {
        "R1": "CF-470K", "R2": "CF-10K", "RC": "CF-3K3", "RE": "CF-1K0"}, "t"), inv)
    rows = list(csv.DictReader(io.StringIO(pick_list_csv(bench_needs(parts, t, 12)))))
    assert {r["part_id"]: r["remaining"] for r in rows}["CF-470K"] == "-2"


def test_cli_pick_list_from_a_hostile_shelf(tmp_path: Path) -> None:
    shelf = _hostile_shelf(tmp_path / "shelf.csv", "=HYPERLINK(\"http://x\",\"open\")")
    out = tmp_path / "pick.csv"
    result = runner.invoke(app, ["export", str(JOB), "-i", str(shelf), "-v",
                                 ",".join(f"{k}={v}" for k, v in VALUES.items()), "-t",
                                 "QN-GP40", "--pick-list", str(out)])
    assert result.exit_code == 0, result.output
    with out.open(encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    assert [r["location"] for r in rows] == ["'=HYPERLINK(\"http://x\",\"open\")"] * 5


# --- the terminal ----------------------------------------------------------------------------

def test_console_text_shows_markup_and_escapes_as_written() -> None:
    assert console_text("[bold]B3[/bold]") == "\\[bold]B3\\[/bold]"  # rich shows "[bold]B3..."
    assert console_text("\x1b[31mB3\x1b]0;title\x07") == "<U+001B>[31mB3<U+001B>]0;title<U+0007>"
    assert console_text("CF-4K7 drawer B3") == "CF-4K7 drawer B3"


def test_pick_list_table_prints_hostile_ids_literally() -> None:
    # "[/x]" alone makes rich raise a markup error; ESC sequences would recolour the terminal
    needs = _hostile_needs("[/x]\x1b[2J", "part_id") + _hostile_needs("[link=file:///]", "location")
    console = Console(file=io.StringIO(), width=250)
    render_pick_list(console, needs, 10)
    out = console.file.getvalue()
    assert "[/x]<U+001B>[2JCF-22K" in out and "[link=file:///]B2" in out
    assert "\x1b" not in out
