"""The stock file reader: every parser path and every error kind (DESIGN §3, issue 2)."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from stockbias.errors import StockFileError
from stockbias.stock_io import likely_column, read_inventory

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"

HEADER = ("kind,part_id,value,tolerance_pct,power_w,qty,unit_cost,polarity,hfe_min,hfe_max,"
          "vceo_max,ic_max,pd_max_w")
GOOD_R = "resistor,R1,4k7,5,0.25,10,0.01,,,,,,"
GOOD_T = "transistor,Q1,,,,10,0.05,NPN,100,300,40,200m,625mW"


def write(tmp_path: Path, text: str, name: str = "stock.csv", encoding: str = "utf-8") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def problems_of(path: Path) -> list[tuple[int, str, str, str]]:
    with pytest.raises(StockFileError) as info:
        read_inventory(path)
    return [(p.line, p.column, p.text, p.message) for p in info.value.problems]


def test_valid_file_parses_to_si_units(tmp_path: Path) -> None:
    inv = read_inventory(write(tmp_path, f"{HEADER}\n{GOOD_R}\n{GOOD_T}\n"))
    r = inv.resistors[0]
    t = inv.transistors[0]
    assert r.value_ohm == pytest.approx(4700.0, rel=1e-12)  # IEC 60062: 4k7 = 4.7 kΩ
    assert (r.tolerance_pct, r.power_w, r.qty, r.line) == (5.0, 0.25, 10, 2)
    assert t.polarity == "NPN"
    assert t.ic_max == pytest.approx(0.2, rel=1e-12)
    assert t.pd_max_w == pytest.approx(0.625, rel=1e-12)
    assert t.line == 3
    # DESIGN §3 defaults, common practice: VBE 0.60..0.75 V, VCE(sat) 0.2 V, TJ max 150 °C
    assert (t.vbe_min, t.vbe_max, t.vce_sat, t.tj_max) == (0.60, 0.75, 0.2, 150.0)
    assert {"vbe_min", "vbe_max", "icbo_a", "theta_ja", "hfe_test_ic"} <= t.assumed
    assert math.isinf(t.vaf_v)


def test_bom_blank_lines_comments_and_header_case(tmp_path: Path) -> None:
    text = ("\ufeff# a comment first\n\n  KIND , Part_ID ,Value,Tolerance_pct,POWER_W,qty,"
            "unit_cost,polarity,hfe_min,hfe_max,vceo_max,ic_max,pd_max_w\n"
            "   # indented comment\n\n" + GOOD_R + "\n\n" + GOOD_T + "\n")
    inv = read_inventory(write(tmp_path, text))
    assert [r.line for r in inv.resistors] == [6]
    assert [t.line for t in inv.transistors] == [8]


def test_semicolon_file_with_decimal_commas(tmp_path: Path) -> None:
    text = ("kind;part_id;value;tolerance_pct;power_w;qty;unit_cost\n"
            "resistor;R1;4,7k;0,5;0,125;3;0,02\n")
    inv = read_inventory(write(tmp_path, text))
    assert inv.delimiter == ";"
    r = inv.resistors[0]
    assert (r.value_ohm, r.tolerance_pct, r.power_w, r.unit_cost) == pytest.approx(
        (4700.0, 0.5, 0.125, 0.02))


def test_decimal_comma_is_an_error_in_a_comma_file(tmp_path: Path) -> None:
    text = 'kind,part_id,value,tolerance_pct,power_w,qty\nresistor,R1,"1,5k",5,0.25,3\n'
    (line, column, bad, message), = problems_of(write(tmp_path, text))
    assert (line, column, bad) == (2, "value", "1,5k")
    assert "comma" in message


def test_unknown_columns_are_kept_and_ignored(tmp_path: Path) -> None:
    text = ("kind,part_id,value,tolerance_pct,power_w,qty,supplier,bin colour\n"
            "resistor,R1,10k,1,0.1,5,Acme,blue\n")
    inv = read_inventory(write(tmp_path, text))
    assert inv.extra_columns == ("supplier", "bin colour")
    assert inv.resistors[0].value_ohm == 10e3


def test_zero_ohm_link_is_accepted_and_flagged(tmp_path: Path) -> None:
    text = "kind,part_id,value,tolerance_pct,power_w,qty\nresistor,J1,0R,5,0.25,50\n"
    inv = read_inventory(write(tmp_path, text))
    assert inv.resistors[0].is_link
    assert inv.bias_resistors == ()
    assert any("zero-ohm link" in w[3] for w in inv.warnings)


def test_the_reader_never_writes(tmp_path: Path) -> None:
    path = write(tmp_path, f"{HEADER}\n{GOOD_R}\n")
    before = (path.read_bytes(), path.stat().st_mtime_ns)
    read_inventory(path)
    assert (path.read_bytes(), path.stat().st_mtime_ns) == before


@pytest.mark.parametrize(
    ("row", "column", "text", "words"),
    [
        ("resistor,R1,4k7k,5,0.25,10,0.01,,,,,,", "value", "4k7k", "letter code"),
        ("resistor,R1,10 kV,5,0.25,10,0.01,,,,,,", "value", "10 kV", "unit 'V'"),
        ("resistor,R1,-10,5,0.25,10,0.01,,,,,,", "value", "-10", "between 1 mΩ and 10 GΩ"),
        ("resistor,R1,20G,5,0.25,10,0.01,,,,,,", "value", "20G", "between 1 mΩ and 10 GΩ"),
        ("resistor,R1,0.5m,5,0.25,10,0.01,,,,,,", "value", "0.5m", "between 1 mΩ and 10 GΩ"),
        ("resistor,R1,,5,0.25,10,0.01,,,,,,", "value", "", "required field 'value'"),
        ("resistor,R1,1k,0,0.25,10,0.01,,,,,,", "tolerance_pct", "0", "between 0.001 % and 50 %"),
        ("resistor,R1,1k,51,0.25,10,0.01,,,,,,", "tolerance_pct", "51", "between 0.001 % and 50 %"),
        ("resistor,R1,1k,5,0,10,0.01,,,,,,", "power_w", "0", "between 1 mW and 1 kW"),
        ("resistor,R1,1k,5,-1,10,0.01,,,,,,", "power_w", "-1", "between 1 mW and 1 kW"),
        ("resistor,R1,1k,5,0.25,-2,0.01,,,,,,", "qty", "-2", "between 0 and 1000000000"),
        ("resistor,R1,1k,5,0.25,2.5,0.01,,,,,,", "qty", "2.5", "whole number"),
        ("resistor,R1,1k,5,0.25,ten,0.01,,,,,,", "qty", "ten", ""),
        ("resistor,R1,1k,5,0.25,1,-0.01,,,,,,", "unit_cost", "-0.01", "between 0 and 1000000"),
        ("inductor,L1,1k,5,0.25,1,0.01,,,,,,", "kind", "inductor", "unknown kind"),
        (",L1,1k,5,0.25,1,0.01,,,,,,", "kind", "", "'kind' is empty"),
        ("resistor,,1k,5,0.25,1,0.01,,,,,,", "part_id", "", "'part_id' is empty"),
        ("transistor,Q1,,,,1,0.05,NPX,100,300,40,0.2,0.6", "polarity", "NPX", "unknown polarity"),
        ("transistor,Q1,,,,1,0.05,,100,300,40,0.2,0.6", "polarity", "", "'polarity' is empty"),
        ("transistor,Q1,,,,1,0.05,NPN,300,100,40,0.2,0.6", "hfe_min", "300", "larger than hfe_max"),
        ("transistor,Q1,,,,1,0.05,NPN,100,300,40 A,0.2,0.6", "vceo_max", "40 A", "unit 'A'"),
        ("transistor,Q1,,,,1,0.05,NPN,100,300,40,,0.6", "ic_max", "", "'ic_max' is empty"),
        ("transistor,Q1,,,,1,0.05,NPN,100,300,40,0.2,0", "pd_max_w", "0", "between 1 mW and 10 kW"),
    ],
)
def test_each_error_names_line_column_and_text(tmp_path: Path, row: str, column: str, text: str,
                                               words: str) -> None:
    found = problems_of(write(tmp_path, f"{HEADER}\n{GOOD_R.replace('R1', 'R0')}\n{row}\n"))
    assert len(found) == 1, found
    line, col, bad, message = found[0]
    assert (line, col, bad) == (3, column, text)
    assert words in message


def test_vbe_min_above_vbe_max(tmp_path: Path) -> None:
    text = (HEADER + ",vbe_min,vbe_max\n" + GOOD_T + ",0.8,0.7\n")
    (line, col, bad, message), = problems_of(write(tmp_path, text))
    assert (line, col, bad) == (2, "vbe_min", "0.8")
    assert "larger than vbe_max" in message


def test_default_vbe_max_can_contradict_a_given_vbe_min(tmp_path: Path) -> None:
    text = HEADER + ",vbe_min\n" + GOOD_T + ",0.8\n"
    (line, col, bad, message), = problems_of(write(tmp_path, text))
    assert (line, col, bad) == (2, "vbe_min", "0.8")
    assert "0.75" in message


def test_every_problem_is_collected(tmp_path: Path) -> None:
    found = problems_of(SAMPLES / "broken_shelf.csv")
    # one mistake per line, lines 3..11 of the deliberately broken sample
    assert [p[0] for p in found] == list(range(3, 12))
    assert found[5][1:3] == ("part_id", "BR-5")
    assert "duplicate part_id (first on line 7)" in found[5][3]


def test_duplicate_part_id(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, f"{HEADER}\n{GOOD_R}\n{GOOD_R}\n"))
    assert found == [(3, "part_id", "R1", "duplicate part_id (first on line 2)")]


def test_missing_required_column(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, "kind,part_id,value,tolerance_pct\nresistor,R1,1k,5\n"))
    assert found[0][0] == 1
    assert found[0][1] == "qty"
    assert "required column 'qty'" in found[0][3]


def test_missing_kind_specific_column(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, "kind,part_id,value,qty\nresistor,R1,1k,5\n"))
    # on the header line, where the fix goes
    assert [(f[0], f[1]) for f in found] == [(1, "tolerance_pct"), (1, "power_w")]
    assert "(1 resistor row, the first on line 2)" in found[0][3]


def test_too_many_fields(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, f"{HEADER}\n{GOOD_R},surplus\n"))
    assert found[0][:3] == (2, "", "surplus")


@pytest.mark.parametrize("text", ["", "\n\n", "# only a comment\n"])
def test_empty_file(tmp_path: Path, text: str) -> None:
    found = problems_of(write(tmp_path, text))
    assert "empty" in found[0][3]


def test_header_only(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, HEADER + "\n"))
    assert "no stock rows" in found[0][3]


def test_not_utf8(tmp_path: Path) -> None:
    path = write(tmp_path, f"{HEADER}\n{GOOD_R}\nresistor,R2,4k7,5,0.25,3,0.01,,,,,,# 50 µ\n",
                 encoding="latin-1")
    found = problems_of(path)
    assert found[0][0] == 3
    assert "not UTF-8" in found[0][3]


def test_unterminated_quote(tmp_path: Path) -> None:
    found = problems_of(write(tmp_path, f'{HEADER}\n{GOOD_R}\nresistor,"R2,1k,5\n'))
    assert found[0][0] == 3
    assert "CSV syntax" in found[0][3]


@pytest.mark.parametrize("name", ["workshop_drawers.csv", "nearly_empty_drawer.csv",
                                  "stockroom_e96_reels.csv"])
def test_bundled_samples_are_valid(name: str) -> None:
    inv = read_inventory(SAMPLES / name)
    assert inv.resistors and inv.transistors


def test_e96_reel_sample_is_the_whole_series() -> None:
    # the sample claims every E96 value from 10 Ω to 1 MΩ: 5 decades × 96 + 1 (IEC 60063)
    inv = read_inventory(SAMPLES / "stockroom_e96_reels.csv")
    assert len(inv.resistors) == 481
    assert min(r.value_ohm for r in inv.resistors) == 10.0
    assert max(r.value_ohm for r in inv.resistors) == 1e6


# -- plausible ranges (stock_ranges.RANGES) -------------------------------------------------

FULL_HEADER = ("kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,polarity,"
               "hfe_min,hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,vce_sat,hfe_test_ic,"
               "theta_ja,tj_max,icbo_a,is_a,br,nf,nr,vaf_v,xtb,xti,eg_ev")
FULL_COLUMNS = FULL_HEADER.split(",")
R_BASE = {"kind": "resistor", "part_id": "R1", "value": "4700", "tolerance_pct": "5",
          "power_w": "0.25", "tempco_ppm": "100", "qty": "10", "unit_cost": "0.01"}
T_BASE = {"kind": "transistor", "part_id": "Q1", "qty": "10", "unit_cost": "0.05",
          "polarity": "NPN", "hfe_min": "100", "hfe_max": "300", "vceo_max": "40",
          "ic_max": "0.2", "pd_max_w": "0.625", "vbe_min": "0.6", "vbe_max": "0.75",
          "vce_sat": "0.2", "hfe_test_ic": "0.01", "theta_ja": "200", "tj_max": "150",
          "icbo_a": "5e-8", "is_a": "1e-14", "br": "4", "nf": "1", "nr": "1", "vaf_v": "75",
          "xtb": "1.5", "xti": "3", "eg_ev": "1.11"}
#: column, lowest accepted, highest accepted (the README table; DESIGN §3 for the value)
EDGES = [
    ("value", 1e-3, 1e10), ("tolerance_pct", 1e-3, 50), ("power_w", 1e-3, 1e3),
    ("tempco_ppm", -1e4, 1e4), ("qty", 0, 1e9), ("unit_cost", 0, 1e6),
    ("hfe_min", 1, 1e5), ("hfe_max", 1, 1e5), ("vceo_max", 0.1, 1e4), ("ic_max", 1e-6, 1e3),
    ("pd_max_w", 1e-3, 1e4), ("vbe_min", 0.1, 1.5), ("vbe_max", 0.1, 1.5), ("vce_sat", 0, 5),
    ("hfe_test_ic", 1e-9, 1e3), ("theta_ja", 0.1, 2000), ("tj_max", 25.000001, 300),
    ("icbo_a", 0, 1), ("is_a", 1e-25, 1e-6), ("br", 1e-3, 1e3), ("nf", 0.5, 3), ("nr", 0.5, 3),
    ("vaf_v", 1, 1e5), ("xtb", -10, 10), ("xti", -10, 20), ("eg_ev", 0.1, 5),
]
#: fields that must move with the one under test (hfe_min <= hfe_max, vbe_min <= vbe_max)
COMPANIONS = {("hfe_min", "high"): {"hfe_max": "1e5"}, ("hfe_max", "low"): {"hfe_min": "1"},
              ("vbe_min", "high"): {"vbe_max": "1.5"}, ("vbe_max", "low"): {"vbe_min": "0.1"}}


def one_row(tmp_path: Path, column: str, text: str, end: str = "") -> Path:
    kind = "resistor" if column in ("value", "tolerance_pct", "power_w", "tempco_ppm") \
        else "transistor"
    row = dict(R_BASE if kind == "resistor" else T_BASE)
    row[column] = text
    row.update(COMPANIONS.get((column, end), {}))
    line = ",".join(row.get(c, "") for c in FULL_COLUMNS)
    return write(tmp_path, f"{FULL_HEADER}\n{line}\n")


def test_every_numeric_column_has_a_plausible_range() -> None:
    from stockbias.stock_io import COLUMNS
    from stockbias.stock_ranges import RANGES

    numeric = {name for name, col in COLUMNS.items() if col.unit is not None}
    assert numeric == set(RANGES) == {c for c, _, _ in EDGES}


@pytest.mark.parametrize(("column", "low", "high"), EDGES, ids=[e[0] for e in EDGES])
def test_range_edges_are_accepted(tmp_path: Path, column: str, low: float, high: float) -> None:
    for end, value in (("low", low), ("high", high)):
        inv = read_inventory(one_row(tmp_path, column, repr(float(value)), end))
        part = (inv.resistors + inv.transistors)[0]
        got = getattr(part, "value_ohm" if column == "value" else column)
        if column == "tempco_ppm":
            assert (got, part.tempco_signed) == (value, value < 0)  # '-10000.0' is signed
        else:
            assert got == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize(("column", "low", "high"), EDGES, ids=[e[0] for e in EDGES])
def test_outside_the_range_is_one_error_naming_the_column(tmp_path: Path, column: str,
                                                          low: float, high: float) -> None:
    below = low - 1e-3 * max(abs(low), 1e-30) if low != 0 else -1e-9
    if column == "tj_max":
        below = 25.0
    for value in (below, high * 1.001 + 1e-30):
        found = problems_of(one_row(tmp_path, column, repr(value)))
        assert [(f[0], f[1], f[2]) for f in found] == [(2, column, repr(value))]
        assert "must be" in found[0][3]


@pytest.mark.parametrize(
    ("column", "text", "words"),
    [
        ("qty", "1e308", "between 0 and 1000000000 pieces"),
        ("power_w", "250 MW", "between 1 mW and 1 kW"),
        ("tempco_ppm", "5000000", "between −10000 and +10000 ppm/°C"),
        ("tempco_ppm", "±20000", "between −10000 and +10000 ppm/°C"),
        ("hfe_max", "1e30", "between 1 and 100000"),
        ("unit_cost", "1e30", "between 0 and 1000000"),
        ("qty", "1e-300", "whole number"),
        ("vceo_max", "1e999", "out of range"),
    ],
)
def test_implausible_values_from_the_field(tmp_path: Path, column: str, text: str,
                                           words: str) -> None:
    (line, col, bad, message), = problems_of(one_row(tmp_path, column, text))
    assert (line, col, bad) == (2, column, text)
    assert words in message


@pytest.mark.parametrize("column", [e[0] for e in EDGES])
@pytest.mark.parametrize("text", ["nan", "inf", "-inf", "NaN", "1e400", "-1e400"])
def test_non_finite_numbers_are_refused(tmp_path: Path, column: str, text: str) -> None:
    (line, col, bad, message), = problems_of(one_row(tmp_path, column, text))
    assert (line, col, bad) == (2, column, text)
    assert "finite" in message or "must be" in message


@pytest.mark.parametrize("column", ["value", "qty", "tempco_ppm", "hfe_min", "is_a"])
@pytest.mark.parametrize("text", ["1e" + "9" * 5000, "9" * 5000, "0." + "0" * 4999 + "1",
                                  "±1e" + "9" * 5000])
def test_numbers_of_thousands_of_digits_are_one_error(tmp_path: Path, column: str,
                                                      text: str) -> None:
    if text.startswith("±") and column != "tempco_ppm":
        text = text[1:]
    (line, col, bad, message), = problems_of(one_row(tmp_path, column, text))
    assert (line, col) == (2, column)
    assert bad.endswith("…") and len(bad) <= 41
    assert "too long for a number" in message


# --- misspelt headers: one error on the header line, not one per row -----------------------

_ROWS = "".join(f"resistor,R{i},10k,1,0.1,5\n" for i in range(40))


@pytest.mark.parametrize(("header", "written", "meant"), [
    ("kind,part_id,valeu,tolerance_pct,power_w,qty", "valeu", "value"),
    ("kind,part_id,value,tolerance_pct,power_w,quantity", "quantity", "qty"),
    ("kind,part id,value,tolerance_pct,power_w,qty", "part id", "part_id"),
    ("kind,Part-ID,value,tolerance_pct,power_w,qty", "Part-ID", "part_id"),
    ("kind,part_id,value,tolerance,power_w,qty", "tolerance", "tolerance_pct"),
])
def test_a_misspelt_header_is_one_error_naming_the_likely_column(
        tmp_path: Path, header: str, written: str, meant: str) -> None:
    found = problems_of(write(tmp_path, header + "\n" + _ROWS))
    assert len(found) == 1, found                  # 40 rows, one problem
    line, column, text, message = found[0]
    assert (line, column, text) == (1, written, written)
    assert f"unknown column; did you mean '{meant}'" in message


def test_a_misspelt_optional_column_is_refused_not_silently_ignored(tmp_path: Path) -> None:
    # tempco_pmm would drop every tempco (then taken as 0): one error on the header
    text = "kind,part_id,value,tolerance_pct,power_w,qty,tempco_pmm\n" + \
        "".join(f"resistor,R{i},10k,1,0.1,5,100\n" for i in range(5))
    (line, column, _, message), = problems_of(write(tmp_path, text))
    assert (line, column) == (1, "tempco_pmm")
    assert "did you mean 'tempco_ppm' (optional, for resistor rows)" in message


def test_a_misspelt_header_and_a_row_error_are_both_reported(tmp_path: Path) -> None:
    text = "kind,part_id,value,tolerance_pct,power_w,qty,locaton\nresistor,R1,10k,1,0.1,-5,A1\n"
    found = problems_of(write(tmp_path, text))
    assert [(p[0], p[1]) for p in found] == [(1, "locaton"), (2, "qty")]


@pytest.mark.parametrize(("header", "absent", "expected"), [
    # near a missing column (ratio ≥ SPELLING_RATIO = 0.75, hand-checked with difflib)
    ("valeu", {"value"}, "value"),          # ratio 0.80
    ("locaton", {"location"}, "location"),  # 0.93
    ("tempco", {"tempco_ppm"}, "tempco_ppm"),  # 0.75, the threshold itself
    ("theta", {"theta_ja"}, "theta_ja"),    # 0.77
    ("Quantity ", {"qty"}, "qty"),          # a shop word, not a spelling
    ("Price", {"unit_cost"}, "unit_cost"),
    # far from every column: kept and ignored
    ("typ", {"qty"}, None),                 # 0.67
    ("hfe", {"hfe_min", "hfe_max"}, None),  # 0.60
    ("cost basis", {"unit_cost"}, None),
    ("supplier", {"note", "location"}, None),
    ("bin colour", {"location"}, None),
    # near a column the header already has: the user's own column
    ("notes", {"location"}, None),
    ("valeu", set(), None),
])
def test_likely_column_threshold_both_sides(header: str, absent: set[str],
                                            expected: str | None) -> None:
    assert likely_column(header, absent) == expected


def test_foreign_columns_beside_the_ones_they_resemble_are_kept(tmp_path: Path) -> None:
    text = ("kind,part_id,value,tolerance_pct,power_w,qty,note,notes,supplier,typ\n"
            "resistor,R1,10k,1,0.1,5,a,b,Acme,x\n")
    inv = read_inventory(write(tmp_path, text))
    assert inv.extra_columns == ("notes", "supplier", "typ")
    assert inv.resistors[0].note == "a"


def test_a_required_column_missing_for_a_kind_is_one_error_on_the_header(tmp_path: Path) -> None:
    text = "kind,part_id,tolerance_pct,power_w,qty\n" + \
        "".join(f"resistor,R{i},1,0.1,5\n" for i in range(30))
    found = problems_of(write(tmp_path, text))
    assert found == [(1, "value", "", "required column 'value' for resistor rows is missing "
                      "from the header (30 resistor rows, the first on line 2)")]


def test_ids_differing_only_in_letter_case_are_duplicates(tmp_path: Path) -> None:
    # part ids match in any letter case (`-t qn-gp1` finds QN-GP1), so two lines whose ids
    # differ only in case could not be told apart
    text = f"{HEADER}\n{GOOD_T.replace('Q1', 'QN-GP1')}\n{GOOD_T.replace('Q1', 'qn-gp1')}\n"
    (line, column, bad, message), = problems_of(write(tmp_path, text))
    assert (line, column, bad) == (3, "part_id", "qn-gp1")
    assert message == ("duplicate part_id (first on line 2 as 'QN-GP1': ids match in any "
                       "letter case)")


def test_lookups_ignore_letter_case(tmp_path: Path) -> None:
    inv = read_inventory(write(tmp_path, f"{HEADER}\n{GOOD_R.replace('R1', 'CF-4K7')}\n"
                                         f"{GOOD_T.replace('Q1', 'QN-GP1')}\n"))
    assert inv.find_resistor("cf-4k7") is inv.resistors[0]
    assert inv.find_transistor("Qn-Gp1") is inv.transistors[0]
    assert inv.part("CF-4k7") is inv.resistors[0]
    assert inv.find_resistor("qn-gp1") is None and inv.find_transistor("cf-4k7") is None
    with pytest.raises(KeyError):
        inv.part("CF-4K8")
