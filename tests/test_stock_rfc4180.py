"""Records of the stock file split only where RFC 4180 splits them; hidden characters refused.

Expected values are hand-written files whose records are counted by hand from RFC 4180
(section 2: records end at a line break, a quoted field may hold line breaks, delimiters and
doubled quotes).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from stockbias.errors import StockFileError
from stockbias.stock_csv import field_fault, visible
from stockbias.stock_io import read_inventory
from stockbias.stock_write import reserve_stock, rewrite_quantities

HEADER = "kind,part_id,value,tolerance_pct,power_w,qty,note"
ROW = "resistor,{pid},4k7,5,0.25,{qty},{note}"


def write(tmp_path: Path, text: str, name: str = "shelf.csv") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8"))
    return path


def problems_of(path: Path) -> list[tuple[int, str, str, str]]:
    with pytest.raises(StockFileError) as info:
        read_inventory(path)
    return [(p.line, p.column, p.text, p.message) for p in info.value.problems]


# -- characters other programs split lines at ------------------------------------------------

SPLITTERS = ["\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029"]


@pytest.mark.parametrize("sep", SPLITTERS, ids=[f"U+{ord(c):04X}" for c in SPLITTERS])
def test_a_note_cannot_hide_a_ghost_row(tmp_path: Path, sep: str) -> None:
    # str.splitlines() breaks at each of these; RFC 4180 does not, so there is one row
    # (R1) whose note holds the whole tail, and the character itself is refused.
    ghost = ROW.format(pid="GHOST", qty=500, note="")
    text = f"{HEADER}\n{ROW.format(pid='R1', qty=10, note='drawer 3' + sep + ghost)}\n"
    found = problems_of(write(tmp_path, text))
    assert [f[0] for f in found] == [2, 2]  # the character, then the row width
    # hand count: 6 fields, the note ("drawer 3…resistor"), then GHOST,4k7,5,0.25,500 and ""
    _, column, shown, message = found[0]
    assert column == "note"
    assert f"U+{ord(sep):04X}" in message
    assert f"<U+{ord(sep):04X}>" in shown
    assert "row has 13 fields but the header has 7" in found[1][3]


@pytest.mark.parametrize("sep", SPLITTERS, ids=[f"U+{ord(c):04X}" for c in SPLITTERS])
def test_a_quoted_note_with_a_splitter_is_refused_not_split(tmp_path: Path, sep: str) -> None:
    ghost = ROW.format(pid="GHOST", qty=500, note="")
    note = f'"drawer 3{sep}{ghost}"'
    text = f"{HEADER}\n{ROW.format(pid='R1', qty=10, note=note)}\n"
    found = problems_of(write(tmp_path, text))
    assert len(found) == 1
    assert found[0][0] == 2
    assert "other programs break or hide lines" in found[0][3]


def test_a_splitter_in_a_comment_is_refused_too(tmp_path: Path) -> None:
    text = f"# stock of bench 2\u2028{ROW.format(pid='GHOST', qty=500, note='')}\n{HEADER}\n" \
           f"{ROW.format(pid='R1', qty=10, note='')}\n"
    found = problems_of(write(tmp_path, text))
    assert [(f[0], f[1]) for f in found] == [(1, "")]


def test_nul_and_escape_are_refused_with_their_place(tmp_path: Path) -> None:
    text = (f"{HEADER}\n{ROW.format(pid='R1', qty=10, note='a' + chr(0) + 'b')}\n"
            f"{ROW.format(pid='R2', qty=10, note=chr(27) + '[31mred')}\n")
    found = problems_of(write(tmp_path, text))
    assert [(f[0], f[1]) for f in found] == [(2, "note"), (3, "note")]
    assert "U+0000" in found[0][3] and "a<U+0000>b" in found[0][2]
    assert "U+001B" in found[1][3]


# -- what RFC 4180 does allow ------------------------------------------------------------------

def test_quoted_line_breaks_comments_and_blank_lines_are_data(tmp_path: Path) -> None:
    note = '"first line\n# not a comment\n\n  indented, with a comma and ""quotes"""'
    text = (f"# a real comment\n{HEADER}\n{ROW.format(pid='R1', qty=10, note=note)}\n\n"
            f"# another comment\n{ROW.format(pid='R2', qty=7, note='')}\n")
    inv = read_inventory(write(tmp_path, text))
    r1, r2 = inv.resistors
    assert r1.note == 'first line\n# not a comment\n\n  indented, with a comma and "quotes"'
    # hand count: header on line 2, R1 starts on line 3 and ends on line 6, R2 on line 9
    assert (r1.line, r2.line) == (3, 9)
    assert r2.qty == 7


@pytest.mark.parametrize("eol", ["\n", "\r\n", "\r"], ids=["LF", "CRLF", "CR"])
def test_line_endings(tmp_path: Path, eol: str) -> None:
    text = eol.join([HEADER, ROW.format(pid="R1", qty=10, note='"a' + eol + 'b"'),
                     ROW.format(pid="R2", qty=3, note="")]) + eol
    inv = read_inventory(write(tmp_path, text))
    assert [r.line for r in inv.resistors] == [2, 4]
    assert inv.resistors[0].note == "a" + eol + "b"


def test_last_row_without_a_line_break(tmp_path: Path) -> None:
    inv = read_inventory(write(tmp_path, f"{HEADER}\n{ROW.format(pid='R1', qty=30, note='')}"))
    assert inv.resistors[0].qty == 30


def test_unterminated_quote_at_the_end_names_the_record(tmp_path: Path) -> None:
    text = f'{HEADER}\n{ROW.format(pid="R1", qty=1, note="")}\n' \
           f'{ROW.format(pid="R2", qty=1, note=chr(34) + "open")}\nmore\n'
    found = problems_of(write(tmp_path, text))
    assert found[0][0] == 3
    assert "CSV syntax" in found[0][3]


def test_an_error_inside_a_multi_line_record_names_the_line_of_its_field(tmp_path: Path) -> None:
    # the note spans lines 2-4; qty follows on line 4 (fields in a different order)
    header = "kind,part_id,value,tolerance_pct,power_w,note,qty"
    text = f'{header}\nresistor,R1,4k7,5,0.25,"one\ntwo\nthree",ten\n'
    (line, column, shown, _), = problems_of(write(tmp_path, text))
    assert (line, column, shown) == (4, "qty", "ten")


# -- row width ---------------------------------------------------------------------------------

def test_a_row_cut_short_is_an_error_not_a_smaller_quantity(tmp_path: Path) -> None:
    # "30" cut to "3" with the note column lost: the row has 6 fields, the header 7
    text = f"{HEADER}\n{ROW.format(pid='R0', qty=5, note='')}\nresistor,R1,4k7,5,0.25,3\n"
    (line, column, shown, message), = problems_of(write(tmp_path, text))
    assert (line, column, shown) == (3, "", "3")
    assert "row has 6 fields but the header has 7" in message
    assert "stops at column 'qty'" in message


def test_a_row_with_a_field_too_many_is_an_error_even_when_empty(tmp_path: Path) -> None:
    text = f"{HEADER}\n{ROW.format(pid='R1', qty=5, note='')},\n"
    (line, column, shown, message), = problems_of(write(tmp_path, text))
    assert (line, column, shown) == (2, "", "")
    assert "row has 8 fields but the header has 7" in message


def test_a_header_with_a_trailing_delimiter_takes_rows_with_one(tmp_path: Path) -> None:
    # a spreadsheet that pads every line, the header included, to the same width
    text = f"{HEADER},\n{ROW.format(pid='R1', qty=5, note='')},\n"
    assert read_inventory(write(tmp_path, text)).resistors[0].qty == 5


# -- invisible characters and foreign digits ---------------------------------------------------

@pytest.mark.parametrize(
    ("pid", "shown"),
    [
        ("CF-4K7\u200b", "CF-4K7<U+200B>"),    # zero-width space
        ("CF-\ufeff4K7", "CF-<U+FEFF>4K7"),    # byte-order mark inside a field
        ("CF-4K7\u202e", "CF-4K7<U+202E>"),    # right-to-left override
        ("CF-4\u00adK7", "CF-4<U+00AD>K7"),    # soft hyphen
        ("CF-4K7\u2060", "CF-4K7<U+2060>"),    # word joiner
        ("CF\u00a04K7", "CF<U+00A0>4K7"),      # no-break space (looks like a space)
        ("CF-4K7\t1", "CF-4K7<U+0009>1"),      # tab
        ("CF-\uff14K7", "CF-\uff14K7"),        # full-width digit four (visible, refused)
    ],
)
def test_part_ids_refuse_hidden_characters(tmp_path: Path, pid: str, shown: str) -> None:
    text = f"{HEADER}\n{ROW.format(pid='CF-4K7', qty=5, note='')}\n" \
           f"{ROW.format(pid=pid, qty=500, note='')}\n"
    (line, column, text_shown, message), = problems_of(write(tmp_path, text))
    assert (line, column, text_shown) == (3, "part_id", shown)
    assert "character" in message


@pytest.mark.parametrize(
    ("column", "value", "words"),
    [
        ("value", "\u0664k7", "U+0664 ARABIC-INDIC DIGIT FOUR at character 1"),
        ("value", "\uff14k7", "U+FF14 FULLWIDTH DIGIT FOUR"),
        ("qty", "\u0967\u0966", "U+0967 DEVANAGARI DIGIT ONE"),
        ("qty", "1\u200b0", "U+200B ZERO WIDTH SPACE at character 2"),
        ("power_w", "0.25\u2063", "U+2063"),
    ],
)
def test_numbers_refuse_foreign_digits_and_invisibles(tmp_path: Path, column: str, value: str,
                                                      words: str) -> None:
    fields = {"pid": "R1", "qty": 10, "note": ""}
    row = ROW.format(**fields)
    row = row.replace("4k7", value) if column == "value" else row
    row = row.replace(",10,", f",{value},") if column == "qty" else row
    row = row.replace("0.25", value) if column == "power_w" else row
    (line, col, shown, message), = problems_of(write(tmp_path, f"{HEADER}\n{row}\n"))
    assert (line, col, shown) == (2, column, visible(value))
    assert words in message


def test_free_text_keeps_format_characters(tmp_path: Path) -> None:
    # a note may hold a zero-width joiner or a right-to-left mark (names in other scripts)
    note = "bin \u05d0\u200f 3 \u200d"
    inv = read_inventory(write(tmp_path, f"{HEADER}\n{ROW.format(pid='R1', qty=5, note=note)}\n"))
    assert inv.resistors[0].note == note.strip()


def test_visible_and_field_fault_helpers() -> None:
    assert visible("CF-4K7\u200b") == "CF-4K7<U+200B>"
    assert visible("plain 4k7") == "plain 4k7"
    assert field_fault("4.7 kΩ", number=True) is None       # Ω and µ are fine in numbers
    assert field_fault("47 µA", number=True) is None
    assert field_fault("4.7\u00a0k", number=True) is None    # a no-break space in a number
    assert field_fault("R\u00a01", number=False) is not None  # ... but not in a part id


# -- the stock rewriter sees the same lines ----------------------------------------------------

def test_rewriter_finds_the_rows_the_reader_numbers(tmp_path: Path) -> None:
    note = '"first\r\nsecond, with ""quotes""\r\n# not a comment"'
    text = "\r\n".join([
        "# shelf", HEADER, ROW.format(pid="R1", qty=10, note=note), "",
        ROW.format(pid="R2", qty=20, note='"x\ny"'), ROW.format(pid="R3", qty=30, note=""),
    ]) + "\r\n"
    path = write(tmp_path, text)
    inv = read_inventory(path)
    lines = {r.part_id: r.line for r in inv.resistors}
    assert lines == {"R1": 3, "R2": 7, "R3": 9}  # hand count of physical lines
    data = path.read_bytes()
    new = rewrite_quantities(data, 2, 5, ",", {lines["R1"]: 9, lines["R2"]: 18, lines["R3"]: 27})
    expected = data.replace(b",10,", b",9,").replace(b",20,", b",18,").replace(b",30,", b",27,")
    assert new == expected
    path.write_bytes(new)
    again = read_inventory(path)
    assert [(r.part_id, r.qty, r.note) for r in again.resistors] == \
        [(r.part_id, r.qty - (r.qty // 10), r.note) for r in inv.resistors]


def test_reserve_takes_from_a_file_with_multi_line_notes(tmp_path: Path) -> None:
    note = '"a\nb"'
    text = f"{HEADER}\n{ROW.format(pid='R1', qty=10, note=note)}\n" \
           f"{ROW.format(pid='R2', qty=20, note='')}\n"
    path = write(tmp_path, text)
    res = reserve_stock(path, lambda inv: {"R2": 5})
    assert [(c.part_id, c.line, c.before, c.after) for c in res.changes] == [("R2", 4, 20, 15)]
    assert {r.part_id: r.qty for r in read_inventory(path).resistors} == {"R1": 10, "R2": 15}


def test_reserve_refuses_a_file_with_a_line_splitter_and_writes_nothing(tmp_path: Path) -> None:
    ghost = ROW.format(pid="GHOST", qty=500, note="")
    text = f"{HEADER}\n{ROW.format(pid='R1', qty=10, note='a' + chr(0x2028) + ghost)}\n"
    path = write(tmp_path, text)
    before = path.read_bytes()
    with pytest.raises(StockFileError):
        reserve_stock(path, lambda inv: {"GHOST": 5})
    assert path.read_bytes() == before
    assert not list(tmp_path.glob("*.bak"))
