"""The stock reader on random files: never a traceback, and csv-written rows read back exactly.

1. Random text built from the characters that matter to a CSV reader (delimiters, quotes, every
   line-break character Python's str.splitlines knows, '#', spaces, digits, unit letters,
   invisible characters, non-ASCII digits), after a valid header or not, and random bytes:
   :func:`read_inventory` returns an inventory or raises :class:`StockFileError`, nothing else.
2. Random valid rows written with Python's :mod:`csv` module (random quoting, line terminator,
   delimiter; free text holding delimiters, quotes, line breaks and '#') read back to exactly
   those rows, each on the physical line the writer put it on.
"""

from __future__ import annotations

import csv
import io
import re
import tempfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockbias.errors import StockFileError
from stockbias.stock_io import read_inventory

SETTINGS = settings(max_examples=150, derandomize=True, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])
HEADER = "kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,location,note"

# pieces a hostile or broken file is made of
PIECES = [",", ";", '"', '""', "\n", "\r\n", "\r", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e",
          "\x85", "\u2028", "\u2029", "\x00", "#", " ", "\t", "resistor", "transistor", "NPN",
          "R1", "4k7", "1e", "9" * 40, "0.25", "5", "-", "+", "±", "%", "mW", "kΩ", "µ", "e308",
          "nan", "inf", "\u200b", "\ufeff", "\u202e", "\u0664", "\uff14", "\u00a0", ",,,,,",
          "resistor,R1,4k7,5,0.25,,10,,,", "transistor,Q1,,,,,3,,,"]


def read_text(data: bytes) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "stock.csv"
        path.write_bytes(data)
        try:
            read_inventory(path)
        except StockFileError as exc:
            assert exc.problems
            for line in exc.lines():
                assert "\n" not in line and "\r" not in line  # one line per problem
                assert line.startswith(str(path))


@SETTINGS
@given(pieces=st.lists(st.sampled_from(PIECES), max_size=80), header=st.booleans())
def test_random_csv_text_gives_an_inventory_or_a_stock_file_error(pieces: list[str],
                                                                    header: bool) -> None:
    text = (HEADER + "\n" if header else "") + "".join(pieces)
    read_text(text.encode("utf-8"))


@SETTINGS
@given(data=st.binary(max_size=400), header=st.booleans())
def test_random_bytes_give_an_inventory_or_a_stock_file_error(data: bytes, header: bool) -> None:
    read_text((HEADER.encode() + b"\n" if header else b"") + data)


# -- round trip ----------------------------------------------------------------------------------

FREE_TEXT = st.text(
    alphabet=st.one_of(
        st.sampled_from([",", ";", '"', "\n", "\r", "#", " ", "'", "Ω", "µ", "\u200d"]),
        st.characters(codec="utf-8", exclude_categories=("Cc", "Cs", "Zl", "Zp")),
    ),
    max_size=30,
).map(str.strip)
PART_ID = st.text(alphabet="ABCDEFGHJKLMNPQRSTUVWXYZ0123456789-_./", min_size=1, max_size=10)


def number(low: float, high: float) -> st.SearchStrategy[float]:
    return st.floats(min_value=low, max_value=high, allow_nan=False, allow_infinity=False)


RESISTOR = st.fixed_dictionaries({
    "kind": st.just("resistor"),
    "value": st.one_of(st.just(0.0), number(1e-3, 1e10)),
    "tolerance_pct": number(1e-3, 50),
    "power_w": number(1e-3, 1e3),
    "tempco_ppm": st.one_of(st.none(), number(-1e4, 1e4)),
    "qty": st.integers(min_value=0, max_value=10**9),
    "unit_cost": number(0, 1e6),
    "location": FREE_TEXT,
    "note": FREE_TEXT,
})


def text_of(value: float | int | None, decimal_comma: bool) -> str:
    if value is None:
        return ""
    out = repr(value)
    return out.replace(".", ",") if decimal_comma else out


@SETTINGS
@given(rows=st.lists(RESISTOR, min_size=1, max_size=12),
       ids=st.lists(PART_ID, min_size=12, max_size=12, unique=True),
       quoting=st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_ALL, csv.QUOTE_NONNUMERIC]),
       terminator=st.sampled_from(["\n", "\r\n"]),
       delimiter=st.sampled_from([",", ";"]),
       comments=st.lists(st.booleans(), min_size=12, max_size=12))
def test_rows_written_by_the_csv_module_read_back_exactly(
        rows: list[dict], ids: list[str], quoting: int, terminator: str, delimiter: str,
        comments: list[bool]) -> None:
    decimal_comma = delimiter == ";"
    columns = HEADER.split(",")
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, delimiter=delimiter, quoting=quoting, lineterminator=terminator)
    writer.writerow(columns)
    expected_lines = []
    for row, pid, comment in zip(rows, ids, comments, strict=False):
        if comment:  # a comment line and a blank line between records
            buffer.write(f"# bin {pid}{terminator}{terminator}")
        expected_lines.append(1 + len(re.findall(r"\r\n|\r|\n", buffer.getvalue())))
        fields = dict(row, part_id=pid)
        writer.writerow([fields[c] if c in ("kind", "part_id", "location", "note")
                         else text_of(fields[c], decimal_comma) for c in columns])
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "stock.csv"
        path.write_bytes(buffer.getvalue().encode("utf-8"))
        inv = read_inventory(path)
    assert inv.delimiter == delimiter
    assert len(inv.resistors) == len(rows)
    for got, row, pid, line in zip(inv.resistors, rows, ids, expected_lines, strict=False):
        assert (got.part_id, got.line, got.qty) == (pid, line, row["qty"])
        assert (got.value_ohm, got.tolerance_pct, got.power_w, got.unit_cost) == \
            (row["value"], row["tolerance_pct"], row["power_w"], row["unit_cost"])
        assert (got.location, got.note) == (row["location"], row["note"])
        tempco = row["tempco_ppm"]
        if tempco is None:
            assert got.tempco_ppm is None
        else:  # a written sign makes a signed coefficient; a bare number is a magnitude
            assert (got.tempco_ppm, got.tempco_signed) == (tempco, repr(tempco)[0] == "-")
