"""Read a stock file (one CSV, a ``kind`` column) into an :class:`Inventory`.

Records are split as RFC 4180 splits them (:mod:`stockbias.stock_csv`, on top of the
:mod:`csv` module) so that every problem can name the physical line, the column and
the exact text.  It collects every problem in the file before it raises one
:class:`StockFileError` that carries them all.  It never writes the file.

Accepted: UTF-8 with or without a byte-order mark; ``,`` or ``;`` as the
delimiter (detected from the header line); CRLF, LF or CR line ends; quoted fields
holding delimiters, quotes and line breaks; blank lines and comment lines whose first
non-blank character is ``#`` (outside quoted fields); header names in any case with
spaces around them.  A semicolon-delimited file may use decimal commas (``4,7k``).
Unknown columns are kept (their names are listed) and otherwise ignored, unless a
header looks like a misspelt stock column that the header lacks (:func:`likely_column`):
that is one error on the header line naming both, since the column's data would
otherwise be ignored without a word.  A required column missing for the rows of a kind
is likewise one error on the header line, not one per row.

Refused, each with its line, column and text: a row with fewer or more fields than
the header; control characters anywhere (other programs split or hide lines at
them); invisible characters and non-ASCII digits in part ids and numbers; a number
outside its column's plausible range (:mod:`stockbias.stock_ranges`), not finite, or
longer than 64 characters.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from . import stock_csv
from .device_data import CARD_TO_ROW, DeviceCard, card_for_row
from .errors import InputError, NotationError, Problem, StockFileError
from .parts import TRANSISTOR_DEFAULTS, Inventory, Resistor, Transistor, id_key
from .stock_csv import describe, field_fault, line_faults, sanitise, visible
from .stock_ranges import RANGES as _RANGES
from .units import parse_quantity

__all__ = ["COLUMNS", "likely_column", "load_inventory", "read_inventory"]


@dataclass(frozen=True)
class Column:
    """One known column: its unit for parsing, which kinds use it, whether required."""

    name: str
    unit: str | None  # None: free text
    kinds: tuple[str, ...]
    required: bool = False


_BOTH = ("resistor", "transistor")
_R = ("resistor",)
_T = ("transistor",)

COLUMNS: dict[str, Column] = {c.name: c for c in (
    Column("kind", None, _BOTH, True),
    Column("part_id", None, _BOTH, True),
    Column("qty", "", _BOTH, True),
    Column("unit_cost", "", _BOTH),
    Column("location", None, _BOTH),
    Column("note", None, _BOTH),
    Column("value", "ohm", _R, True),
    Column("tolerance_pct", "%", _R, True),
    Column("power_w", "W", _R, True),
    Column("tempco_ppm", "ppm/°C", _R),
    Column("polarity", None, _T, True),
    Column("hfe_min", "", _T, True),
    Column("hfe_max", "", _T, True),
    Column("vceo_max", "V", _T, True),
    Column("ic_max", "A", _T, True),
    Column("pd_max_w", "W", _T, True),
    Column("vbe_min", "V", _T),
    Column("vbe_max", "V", _T),
    Column("vce_sat", "V", _T),
    Column("hfe_test_ic", "A", _T),
    Column("theta_ja", "°C/W", _T),
    Column("tj_max", "°C", _T),
    Column("icbo_a", "A", _T),
    Column("is_a", "A", _T),
    Column("br", "", _T),
    Column("nf", "", _T),
    Column("nr", "", _T),
    Column("vaf_v", "V", _T),
    Column("xtb", "", _T),
    Column("xti", "", _T),
    Column("eg_ev", "eV", _T),
    Column("model_name", None, _T),
    Column("model_file", None, _T),
    Column("curve_file", None, _T),
)}

#: Longest text read as a number (a longer one is refused before it is parsed).
_MAX_NUMBER_CHARS = 64

#: Words shop and supplier lists use for a stock column, too far from its name for a
#: spelling match.
_OTHER_NAMES = {
    "quantity": "qty", "quant": "qty", "count": "qty", "pcs": "qty", "pieces": "qty",
    "id": "part_id", "part": "part_id", "part_no": "part_id", "part_number": "part_id",
    "resistance": "value", "ohms": "value", "ohm": "value",
    "tol": "tolerance_pct", "watts": "power_w", "wattage": "power_w",
    "cost": "unit_cost", "price": "unit_cost", "unit_price": "unit_cost", "type": "kind",
}

#: How alike (difflib ratio of the normalised names) a header and a stock column must be
#: to read as a misspelling: 0.75 takes one slip in a five-letter name ('valeu', 'locaton',
#: 'tempco' for 'tempco_ppm'); 'supplier', 'bin colour', 'typ' or 'hfe' stay foreign.
SPELLING_RATIO = 0.75


def _normalised(name: str) -> str:
    return re.sub(r"[\s\-]+", "_", name.strip().lower())


def likely_column(header: str, absent: set[str]) -> str | None:
    """The stock column a header not in :data:`COLUMNS` was probably meant to be.

    Parameters
    ----------
    header : str
        The header as written (case and spacing as in the file).
    absent : set of str
        The stock columns the header line does not have; only these are suggested (a
        header beside the column it resembles, such as ``notes`` beside ``note``, is
        the user's own column).

    Returns
    -------
    str or None
        The column, or ``None`` when the header is near none of them (it is kept and
        ignored).
    """
    name = _normalised(header)
    if name in absent:  # 'part id', 'Part-ID'
        return name
    other = _OTHER_NAMES.get(name)
    if other in absent:
        return other
    close = difflib.get_close_matches(name, sorted(absent), n=1, cutoff=SPELLING_RATIO)
    return close[0] if close else None


def _decode(data: bytes, path: str) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        bad = data[exc.start: exc.start + 4].hex(" ")
        raise StockFileError(path, [Problem(
            line, "", bad, "file is not UTF-8 text (save it as UTF-8); bad bytes")]) from None


def _is_skipped(line: str) -> bool:
    stripped = line.strip()
    return stripped == "" or stripped.startswith("#")


def _detect_delimiter(header: str) -> str:
    commas, semis = header.count(","), header.count(";")
    if semis > commas:
        return ";"
    return ","


#: Called now and then while a file is read: (physical lines read, lines in the file).
ReadProgress = Callable[[int, int], None]


def _line_fault_problems(faults: list[tuple[int, int, str]], text: str, lines: list[str],
                         delimiter: str, columns: list[str]) -> list[Problem]:
    """One problem per refused character, naming the column where the line is a record."""
    if not faults:
        return []
    starts = [0]
    for raw in lines:
        starts.append(starts[-1] + len(raw))
    problems = []
    for line, pos, ch in faults:
        raw = lines[line - 1]  # sanitised: same length as the original line
        column = ""
        if not _is_skipped(raw) and '"' not in raw and columns:
            field = raw[:pos - 1].count(delimiter)
            column = columns[field] if field < len(columns) else ""
        original = text[starts[line - 1]:starts[line]].rstrip("\r\n")
        around = original[max(0, pos - 31):pos + 30]
        problems.append(Problem(
            line, column, visible(around),
            f"control character {describe(ch)} at character {pos} of the line: other "
            "programs break or hide lines at it; remove it"))
    return problems


def read_inventory(path: str | Path, *, progress: ReadProgress | None = None) -> Inventory:
    """Read and validate a stock file.

    Records are split as RFC 4180 does (see :mod:`stockbias.stock_csv`); every row must
    have as many fields as the header; every number must lie in its plausible range.

    Parameters
    ----------
    path : str or Path
        The CSV stock file.
    progress : callable(lines_read, lines_total), optional
        Called every few thousand records (for a progress bar on big files).

    Returns
    -------
    Inventory
        Every row validated, values in SI units.

    Raises
    ------
    StockFileError
        With every problem found (file, line, column, text, message).
    """
    path = Path(path)
    name = str(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise StockFileError(name, [Problem(0, "", "", f"cannot read the file: {exc.strerror}")]) \
            from None
    text = _decode(data, name)
    faults = line_faults(text)
    lines = sanitise(text).splitlines(keepends=True) if faults else text.splitlines(keepends=True)
    if all(_is_skipped(line) for line in lines):
        raise StockFileError(name, [Problem(1, "", "", "file is empty: no header and no rows")])

    header_line = next(line for line in lines if not _is_skipped(line))
    delimiter = _detect_delimiter(header_line)
    records = stock_csv.records(lines, delimiter)
    problems: list[Problem] = []
    try:
        header_record, _ = next(records)
    except stock_csv.CsvSyntax as exc:
        raise StockFileError(name, [Problem(exc.line, "", "", f"CSV syntax: {exc.message}")]) \
            from None
    header_no, header = header_record.line, header_record.fields

    columns = [h.strip().lower() for h in header]
    problems.extend(_line_fault_problems(faults, text, lines, delimiter, columns))
    index: dict[str, int] = {}
    for i, col in enumerate(columns):
        if col == "":
            continue
        if col in index:
            problems.append(Problem(header_no, col, visible(header[i]),
                                    "column appears twice in the header"))
        index.setdefault(col, i)
    meant = _misspelt_headers(header, columns, index)
    problems.extend(Problem(header_no, visible(header[i].strip()), visible(header[i]),
                            _misspelt_message(col)) for i, col in meant.items())
    missing = [c.name for c in COLUMNS.values() if c.name in ("kind", "part_id", "qty")
               and c.name not in index and c.name not in meant.values()]
    if missing:
        found = "semicolon" if delimiter == ";" else "comma"
        problems.extend(Problem(header_no, m, visible(header_line.strip()),
                                f"required column '{m}' is missing from the header "
                                f"({found}-delimited file)") for m in missing)
    if missing or any(c in ("kind", "part_id", "qty") for c in meant.values()):
        raise StockFileError(name, problems)
    extra = tuple(c for c in columns if c and c not in COLUMNS)
    layout = _Layout(columns, index, delimiter, path.parent)

    resistors: list[Resistor] = []
    transistors: list[Transistor] = []
    warnings: list[tuple[int, str, str, str]] = []
    seen_ids: dict[str, tuple[int, str]] = {}   # id_key -> (line, the id as written)
    total = len(lines)
    try:
        for count, (record, _) in enumerate(records, start=1):
            if progress is not None and count % 5000 == 0:
                progress(record.last_line, total)
            row = _RowReader(record, layout, problems, warnings)
            if not row.has_header_width():
                continue
            raw_id = row.raw("part_id")
            key = id_key(raw_id)
            if raw_id and key in seen_ids:
                first_line, first_id = seen_ids[key]
                same = "" if first_id == raw_id else \
                    f" as '{visible(first_id)}': ids match in any letter case"
                problems.append(Problem(record.line, "part_id", visible(raw_id),
                                        f"duplicate part_id (first on line {first_line}{same})"))
                continue
            if raw_id:
                seen_ids[key] = (record.line, raw_id)
            part = row.build()
            if part is None:
                continue
            if isinstance(part, Resistor):
                resistors.append(part)
            else:
                transistors.append(part)
    except stock_csv.CsvSyntax as exc:
        problems.append(Problem(exc.line, "", "", f"CSV syntax: {exc.message}"))
    for (kind, col), (count, first) in layout.lacking.items():
        if col in meant.values():  # the misspelt header already names it
            continue
        rows = f"{count} {kind} row{'s' if count > 1 else ''}, the first on line {first}"
        problems.append(Problem(header_no, col, "", f"required column '{col}' for {kind} "
                                f"rows is missing from the header ({rows})"))
    if progress is not None:
        progress(total, total)
    if not problems and not resistors and not transistors:
        problems.append(Problem(header_no, "", "", "file has a header but no stock rows"))
    if problems:
        problems.sort(key=lambda p: p.line)
        raise StockFileError(name, problems)
    return Inventory(path=name, resistors=tuple(resistors), transistors=tuple(transistors),
                     delimiter=delimiter, warnings=tuple(warnings),
                     sha256=hashlib.sha256(data).hexdigest(), extra_columns=extra)


load_inventory = read_inventory


def _misspelt_headers(header: list[str], columns: list[str],
                      index: dict[str, int]) -> dict[int, str]:
    """Header position -> the stock column it misspells (see :func:`likely_column`)."""
    absent = {c for c in COLUMNS if c not in index}
    meant: dict[int, str] = {}
    for i, col in enumerate(columns):
        if col == "" or col in COLUMNS or index.get(col) != i:
            continue
        guess = likely_column(header[i], absent)
        if guess is not None:
            meant[i] = guess
            absent.discard(guess)
    return meant


def _misspelt_message(col: str) -> str:
    spec = COLUMNS[col]
    need = (f"required for {' and '.join(spec.kinds)} rows" if spec.required
            else f"optional, for {' and '.join(spec.kinds)} rows")
    return (f"unknown column; did you mean '{col}' ({need})? A column the reader does not "
            "know is ignored with its data")


class _Layout:
    """What every row of one file shares: its columns and a cache of parsed numbers."""

    def __init__(self, columns: list[str], index: dict[str, int], delimiter: str,
                 stock_dir: Path = Path(".")) -> None:
        self.columns = columns
        self.stock_dir = stock_dir  # model and curve files are named relative to it
        self.index = index
        self.decimal_comma = delimiter == ";"
        self.known = [(col, i) for col, i in index.items() if col in COLUMNS]
        self.foreign = {kind: [c for c, _ in self.known if kind not in COLUMNS[c].kinds]
                        for kind in _BOTH}
        self.missing = {kind: [c for c, spec in COLUMNS.items()
                               if spec.required and kind in spec.kinds and c not in index]
                        for kind in _BOTH}
        #: (text, column) -> value, or why it is refused: stock files repeat their numbers.
        self.numbers: dict[tuple[str, str], float | str] = {}
        #: (kind, required column missing from the header) -> (rows of that kind, first line)
        self.lacking: dict[tuple[str, str], tuple[int, int]] = {}


def _evaluate(text: str, col: str, decimal_comma: bool) -> float | str:
    """The value of a number field in SI units, or the message saying why it is refused."""
    unit = COLUMNS[col].unit
    assert unit is not None
    try:
        value = parse_quantity(text, unit, decimal_comma=decimal_comma)
    except NotationError as exc:
        return exc.message
    except (ValueError, OverflowError):  # a number the float conversion cannot take
        return "out of range; expected a finite number"
    check = _RANGES.get(col)
    if check is not None and not check[0](value):
        return check[1]
    return value


class _RowReader:
    """Parse one record, appending every problem it finds."""

    def __init__(self, record: stock_csv.Record, layout: _Layout, problems: list[Problem],
                 warnings: list[tuple[int, str, str, str]]) -> None:
        self.line = record.line
        self.record = record
        self.fields = record.fields
        self.layout = layout
        self.columns = layout.columns
        self.index = layout.index
        self.decimal_comma = layout.decimal_comma
        self.problems = problems
        self.warnings = warnings
        self.ok = True
        self.refused: set[str] = set()
        # column name -> stripped field (a duplicated name is refused with the header)
        self.values = dict(zip(layout.columns, map(str.strip, record.fields), strict=False))

    def has_header_width(self) -> bool:
        """A row must have exactly as many fields as the header (RFC 4180); else one problem."""
        n, width = len(self.fields), len(self.columns)
        if n == width:
            return True
        if n < width:
            last = self.fields[-1].strip() if self.fields else ""
            self.fail("", visible(last), f"row has {n} fields but the header has {width}: "
                      f"the row stops at column '{self.columns[n - 1]}' (a row cut short, or "
                      "a delimiter missing); nothing on this row was read")
        else:
            self.fail("", visible(self.fields[width].strip()),
                      f"row has {n} fields but the header has {width} (a delimiter too many, "
                      "or a field with a delimiter that is not quoted); nothing on this row "
                      "was read")
        return False

    def raw(self, col: str) -> str:
        return self.values.get(col, "")

    def fail(self, col: str, text: str, message: str) -> None:
        i = self.index.get(col)
        line = self.record.field_lines[i] if i is not None and i < len(self.fields) else self.line
        self.problems.append(Problem(line, col, text, message))
        self.ok = False

    def screen(self, col: str, number: bool) -> bool:
        """Refuse invisible characters and non-ASCII digits in a part id or a number."""
        text = self.raw(col)
        if text.isascii() and text.isprintable() and (not number or len(text) <= _MAX_NUMBER_CHARS):
            return True
        fault = field_fault(text, number=number)
        if fault is None and number and len(text) > _MAX_NUMBER_CHARS:
            fault = (f"{len(text)} characters is too long for a number (at most "
                     f"{_MAX_NUMBER_CHARS})")
            text = text[:40] + "…"
        if fault is None:
            return True
        self.fail(col, visible(text), fault)
        self.refused.add(col)
        return False

    def number(self, col: str, required: bool) -> float | None:
        text = self.values.get(col, "")
        if text == "":
            if required:
                self.fail(col, "", f"required field '{col}' is empty")
            return None
        if col in self.refused:
            return None
        if not (text.isascii() and text.isprintable() and len(text) <= _MAX_NUMBER_CHARS) \
                and not self.screen(col, number=True):
            return None
        found = self.layout.numbers.get((text, col))
        if found is None:
            found = self.layout.numbers[text, col] = _evaluate(text, col, self.decimal_comma)
        if isinstance(found, str):
            self.fail(col, visible(text), found)
            return None
        return found

    def quantity(self) -> int | None:
        text = self.raw("qty")
        value = self.number("qty", required=True)
        if value is None:
            return None
        if value != math.floor(value):
            self.fail("qty", text, "quantity must be a whole number of pieces, 0 or more")
            return None
        return int(value)

    def build(self) -> Resistor | Transistor | None:
        kind = self.raw("kind").lower()
        part_id = self.raw("part_id")
        if kind not in ("resistor", "transistor"):
            if kind == "":
                self.fail("kind", "", "required field 'kind' is empty")
            else:
                self.fail("kind", visible(self.raw("kind")),
                          "unknown kind: use 'resistor' or 'transistor'")
            return None
        if part_id == "":
            self.fail("part_id", "", "required field 'part_id' is empty")
        else:
            self.screen("part_id", number=False)
        if "tempco_ppm" in self.index and kind == "resistor" and self.raw("tempco_ppm"):
            self.screen("tempco_ppm", number=True)  # before any reading of the field
        values = self.values
        for col in self.layout.foreign[kind]:
            if values.get(col):
                self.warnings.append((self.line, col, visible(values[col]),
                                      f"field does not apply to a {kind} row; ignored"))
        missing = self.layout.missing[kind]
        if missing:  # one problem per column on the header line, after the last row
            for col in missing:
                count, first = self.layout.lacking.get((kind, col), (0, self.line))
                self.layout.lacking[kind, col] = (count + 1, first)
            self.ok = False
            return None
        qty = self.quantity()
        cost = self.number("unit_cost", required=False)
        common = {"part_id": part_id, "qty": qty if qty is not None else 0,
                  "unit_cost": cost if cost is not None else 0.0,
                  "location": self.raw("location"), "note": self.raw("note"), "line": self.line}
        if kind == "resistor":
            return self._resistor(common)
        return self._transistor(common)

    def _resistor(self, common: dict) -> Resistor | None:
        value = self.number("value", required=True)
        tol = self.number("tolerance_pct", required=True)
        power = self.number("power_w", required=True)
        tempco, signed = self.tempco()
        if not self.ok or value is None or tol is None or power is None:
            return None
        if value == 0:
            self.warnings.append((self.line, "value", self.raw("value"),
                                  "zero-ohm link: kept in stock, never used for a bias role"))
        return Resistor(value_ohm=value, tolerance_pct=tol, power_w=power,
                        tempco_ppm=tempco, tempco_signed=signed, **common)

    def tempco(self) -> tuple[float | None, bool]:
        """``tempco_ppm`` and whether it is signed: ``-350``/``+100`` are that signed
        coefficient; a bare magnitude, ``±350`` or ``+/-350`` mean either sign (magnitude)."""
        text = self.raw("tempco_ppm")
        if "tempco_ppm" in self.refused:  # already reported by screen()
            return None, False
        either = next((p for p in ("±", "+/-", "+-") if text.startswith(p)), None)
        if either is None:
            value = self.number("tempco_ppm", required=False)
            if value is None:
                return None, False
            signed = text.startswith(("-", "+", "−"))
            return (value, True) if signed else (abs(value), False)
        rest = text[len(either):].strip()
        try:
            if rest[:1] in ("+", "-", "−"):
                raise NotationError("a ± tempco is a magnitude: no second sign")
            value = parse_quantity(rest, COLUMNS["tempco_ppm"].unit or "",
                                   decimal_comma=self.decimal_comma)
        except NotationError as exc:
            self.fail("tempco_ppm", text, exc.message)
            return None, False
        check = _RANGES.get("tempco_ppm")
        if check is not None and not check[0](value):
            self.fail("tempco_ppm", text, check[1])
            return None, False
        return abs(value), False

    def _transistor(self, common: dict) -> Transistor | None:
        polarity = self.raw("polarity").upper()
        if polarity not in ("NPN", "PNP"):
            if polarity == "":
                self.fail("polarity", "", "required field 'polarity' is empty")
            else:
                self.fail("polarity", visible(self.raw("polarity")),
                          "unknown polarity: use NPN or PNP")
        values: dict[str, float] = {}
        for col, spec in COLUMNS.items():
            if "transistor" not in spec.kinds or spec.unit is None or col in ("qty", "unit_cost"):
                continue
            v = self.number(col, required=spec.required)
            if v is not None:
                values[col] = v
        if "hfe_min" in values and "hfe_max" in values and values["hfe_min"] > values["hfe_max"]:
            self.fail("hfe_min", self.raw("hfe_min"),
                      f"hfe_min is larger than hfe_max ({self.raw('hfe_max')})")
        vbe_min = values.get("vbe_min", TRANSISTOR_DEFAULTS["vbe_min"][0])
        vbe_max = values.get("vbe_max", TRANSISTOR_DEFAULTS["vbe_max"][0])
        assert vbe_min is not None and vbe_max is not None
        if vbe_min > vbe_max:
            col = "vbe_min" if "vbe_min" in values else "vbe_max"
            self.fail(col, self.raw(col),
                      f"vbe_min ({vbe_min:g} V) is larger than vbe_max ({vbe_max:g} V)")
        if not self.ok:
            return None
        card = self.device_card(polarity, values)
        if not self.ok:
            return None
        if card is not None:  # the card (with SPICE's defaults) fills the Gummel-Poon
            from .analysis.gp_dc import CARD_DEFAULTS  # numpy: only for rows with a card

            full = {**CARD_DEFAULTS, **card.params}  # columns the row left empty
            for name, col in CARD_TO_ROW.items():
                if col not in values:
                    values[col] = full[name]
            if values.get("vaf_v") == 0.0:     # SPICE's VAF = 0 means no Early effect
                values["vaf_v"] = math.inf
        assumed = frozenset(c for c in TRANSISTOR_DEFAULTS if c not in values)
        optional = {c: values.get(c, TRANSISTOR_DEFAULTS[c][0]) for c in TRANSISTOR_DEFAULTS}
        names = {c: self.raw(c) for c in ("model_name", "model_file", "curve_file")}
        return Transistor(
            polarity=polarity,  # type: ignore[arg-type]
            hfe_min=values["hfe_min"], hfe_max=values["hfe_max"], vceo_max=values["vceo_max"],
            ic_max=values["ic_max"], pd_max_w=values["pd_max_w"], assumed=assumed,
            card=card, **names, **optional, **common,  # type: ignore[arg-type]
        )

    def device_card(self, polarity: str, values: dict[str, float]) -> DeviceCard | None:
        """The row's model card or fitted datasheet points (None when it names neither)."""
        held = {"vaf": values["vaf_v"]} if "vaf_v" in values else {}
        # only a curve fit holds IS (so numpy is loaded for such rows only)
        if self.raw("curve_file") and "is_a" in values:
            held["is"] = values["is_a"]
        elif self.raw("curve_file"):  # points without VBE: IS from the VBE range at the
            # test current (25 °C)
            from .analysis.device import CELSIUS_TO_KELVIN, saturation_current_from_vbe

            vbe_mid = 0.5 * (values.get("vbe_min", 0.60) + values.get("vbe_max", 0.75))
            held["is"] = float(saturation_current_from_vbe(
                vbe_mid, values.get("hfe_test_ic", 1e-3), values.get("nf", 1.0),
                25.0 + CELSIUS_TO_KELVIN))
        try:
            return card_for_row(polarity=polarity, model_name=self.raw("model_name"),
                                model_file=self.raw("model_file"),
                                curve_file=self.raw("curve_file"),
                                stock_dir=self.layout.stock_dir, held=held)
        except InputError as exc:
            self.fail(exc.column or "model_file", visible(exc.text or ""), exc.message)
            return None
