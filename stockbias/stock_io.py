"""Read a stock file (one CSV, a ``kind`` column) into an :class:`Inventory`.

The reader uses the :mod:`csv` module so that every problem can name the
physical line, the column and the exact text.  It collects every problem in
the file before it raises one :class:`StockFileError` that carries them all.
It never writes the file.

Accepted: UTF-8 with or without a byte-order mark; ``,`` or ``;`` as the
delimiter (detected from the header line); blank lines; comment lines whose
first non-blank character is ``#``; header names in any case with spaces
around them.  A semicolon-delimited file may use decimal commas (``4,7k``).
Unknown columns are kept (their names are listed) and otherwise ignored.
"""

from __future__ import annotations

import csv
import hashlib
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

from .errors import NotationError, Problem, StockFileError
from .parts import TRANSISTOR_DEFAULTS, Inventory, Resistor, Transistor
from .units import parse_quantity

__all__ = ["COLUMNS", "load_inventory", "read_inventory"]


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
)}

#: Plausibility checks per numeric column: (test, message when it fails).
_RANGES: dict[str, tuple[Callable[[float], bool], str]] = {
    "value": (lambda v: v == 0 or 1e-3 <= v <= 1e10,
              "resistance must be 0 (a zero-ohm link) or between 1 mΩ and 10 GΩ"),
    "tolerance_pct": (lambda v: 0 < v <= 50, "tolerance must be more than 0 % and at most 50 %"),
    "power_w": (lambda v: v > 0, "power rating must be more than 0 W"),
    "unit_cost": (lambda v: v >= 0, "unit cost must not be negative"),
    "hfe_min": (lambda v: v > 0, "hFE must be more than 0"),
    "hfe_max": (lambda v: v > 0, "hFE must be more than 0"),
    "vceo_max": (lambda v: v > 0, "VCEO rating must be more than 0 V"),
    "ic_max": (lambda v: v > 0, "IC rating must be more than 0 A"),
    "pd_max_w": (lambda v: v > 0, "dissipation rating must be more than 0 W"),
    "vbe_min": (lambda v: 0 < v < 2, "VBE must be between 0 and 2 V"),
    "vbe_max": (lambda v: 0 < v < 2, "VBE must be between 0 and 2 V"),
    "vce_sat": (lambda v: 0 <= v < 5, "VCE(sat) must be between 0 and 5 V"),
    "hfe_test_ic": (lambda v: v > 0, "hFE test current must be more than 0 A"),
    "theta_ja": (lambda v: v > 0, "θJA must be more than 0 °C/W"),
    "tj_max": (lambda v: 25 < v <= 250, "TJ max must be between 25 and 250 °C"),
    "icbo_a": (lambda v: v >= 0, "leakage must not be negative"),
    "is_a": (lambda v: 0 < v < 1, "IS must be more than 0 and less than 1 A"),
    "br": (lambda v: v > 0, "BR must be more than 0"),
    "nf": (lambda v: 0.5 <= v <= 3, "NF must be between 0.5 and 3"),
    "nr": (lambda v: 0.5 <= v <= 3, "NR must be between 0.5 and 3"),
    "vaf_v": (lambda v: v > 0, "VAF must be more than 0 V"),
    "eg_ev": (lambda v: 0.1 <= v <= 5, "EG must be between 0.1 and 5 eV"),
}


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


def _records(text: str, delimiter: str) -> Iterator[tuple[int, list[str]]]:
    """Yield (physical line, fields) for each CSV record, skipping blanks and comments."""
    consumed: list[int] = []

    def lines() -> Iterator[str]:
        for number, raw in enumerate(text.splitlines(keepends=True), start=1):
            if _is_skipped(raw):
                continue
            consumed.append(number)
            yield raw

    reader = csv.reader(lines(), delimiter=delimiter, strict=True)
    while True:
        start = len(consumed)
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            line = consumed[start] if start < len(consumed) else (consumed[-1] if consumed else 1)
            raise _CsvSyntax(line, str(exc)) from None
        yield consumed[start], row


class _CsvSyntax(Exception):
    def __init__(self, line: int, message: str) -> None:
        super().__init__(message)
        self.line = line
        self.message = message


def read_inventory(path: str | Path) -> Inventory:
    """Read and validate a stock file.

    Parameters
    ----------
    path : str or Path
        The CSV stock file.

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
    if all(_is_skipped(line) for line in text.splitlines()):
        raise StockFileError(name, [Problem(1, "", "", "file is empty: no header and no rows")])

    header_line = next(line for line in text.splitlines() if not _is_skipped(line))
    delimiter = _detect_delimiter(header_line)
    records = _records(text, delimiter)
    problems: list[Problem] = []
    try:
        header_no, header = next(records)
    except _CsvSyntax as exc:
        raise StockFileError(name, [Problem(exc.line, "", "", f"CSV syntax: {exc.message}")]) \
            from None

    columns = [h.strip().lower() for h in header]
    index: dict[str, int] = {}
    for i, col in enumerate(columns):
        if col == "":
            continue
        if col in index:
            problems.append(Problem(header_no, col, header[i],
                                    "column appears twice in the header"))
        index.setdefault(col, i)
    missing = [c.name for c in COLUMNS.values()
               if c.name in ("kind", "part_id", "qty") and c.name not in index]
    if missing:
        found = "semicolon" if delimiter == ";" else "comma"
        problems.extend(Problem(header_no, m, header_line.strip(),
                                f"required column '{m}' is missing from the header "
                                f"({found}-delimited file)") for m in missing)
        raise StockFileError(name, problems)
    extra = tuple(c for c in columns if c and c not in COLUMNS)

    resistors: list[Resistor] = []
    transistors: list[Transistor] = []
    warnings: list[tuple[int, str, str, str]] = []
    seen_ids: dict[str, int] = {}
    try:
        for line_no, fields in records:
            row = _RowReader(line_no, fields, columns, index, delimiter, problems, warnings)
            raw_id = row.raw("part_id")
            if raw_id and raw_id in seen_ids:
                problems.append(Problem(line_no, "part_id", raw_id,
                                        f"duplicate part_id (first on line {seen_ids[raw_id]})"))
                continue
            if raw_id:
                seen_ids[raw_id] = line_no
            part = row.build()
            if part is None:
                continue
            if isinstance(part, Resistor):
                resistors.append(part)
            else:
                transistors.append(part)
    except _CsvSyntax as exc:
        problems.append(Problem(exc.line, "", "", f"CSV syntax: {exc.message}"))
    if not problems and not resistors and not transistors:
        problems.append(Problem(header_no, "", "", "file has a header but no stock rows"))
    if problems:
        raise StockFileError(name, problems)
    return Inventory(path=name, resistors=tuple(resistors), transistors=tuple(transistors),
                     delimiter=delimiter, warnings=tuple(warnings),
                     sha256=hashlib.sha256(data).hexdigest(), extra_columns=extra)


load_inventory = read_inventory


class _RowReader:
    """Parse one record, appending every problem it finds."""

    def __init__(self, line: int, fields: list[str], columns: list[str], index: dict[str, int],
                 delimiter: str, problems: list[Problem],
                 warnings: list[tuple[int, str, str, str]]) -> None:
        self.line = line
        self.fields = fields
        self.columns = columns
        self.index = index
        self.decimal_comma = delimiter == ";"
        self.problems = problems
        self.warnings = warnings
        self.ok = True

    def raw(self, col: str) -> str:
        i = self.index.get(col)
        if i is None or i >= len(self.fields):
            return ""
        return self.fields[i].strip()

    def fail(self, col: str, text: str, message: str) -> None:
        self.problems.append(Problem(self.line, col, text, message))
        self.ok = False

    def number(self, col: str, required: bool) -> float | None:
        text = self.raw(col)
        if text == "":
            if required:
                self.fail(col, "", f"required field '{col}' is empty")
            return None
        unit = COLUMNS[col].unit
        assert unit is not None
        try:
            value = parse_quantity(text, unit, decimal_comma=self.decimal_comma)
        except NotationError as exc:
            self.fail(col, text, exc.message)
            return None
        check = _RANGES.get(col)
        if check is not None and not check[0](value):
            self.fail(col, text, check[1])
            return None
        return value

    def quantity(self) -> int | None:
        text = self.raw("qty")
        value = self.number("qty", required=True)
        if value is None:
            return None
        if value < 0 or value != math.floor(value):
            self.fail("qty", text, "quantity must be a whole number of pieces, 0 or more")
            return None
        return int(value)

    def build(self) -> Resistor | Transistor | None:
        if len(self.fields) > len(self.columns):
            extra = self.fields[len(self.columns):]
            if any(f.strip() for f in extra):
                self.fail("", self.fields[len(self.columns)].strip(),
                          f"row has {len(self.fields)} fields but the header has "
                          f"{len(self.columns)}")
                return None
        kind = self.raw("kind").lower()
        part_id = self.raw("part_id")
        if kind not in ("resistor", "transistor"):
            if kind == "":
                self.fail("kind", "", "required field 'kind' is empty")
            else:
                self.fail("kind", self.raw("kind"), "unknown kind: use 'resistor' or 'transistor'")
            return None
        if part_id == "":
            self.fail("part_id", "", "required field 'part_id' is empty")
        for col, spec in COLUMNS.items():
            if kind not in spec.kinds and self.raw(col) != "" and col in self.index:
                self.warnings.append((self.line, col, self.raw(col),
                                      f"field does not apply to a {kind} row; ignored"))
        missing = [c for c, spec in COLUMNS.items()
                   if spec.required and kind in spec.kinds and c not in self.index]
        for col in missing:
            self.fail(col, "", f"required column '{col}' for a {kind} row is missing "
                               "from the header")
        if missing:
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
                self.fail("polarity", self.raw("polarity"), "unknown polarity: use NPN or PNP")
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
        assumed = frozenset(c for c in TRANSISTOR_DEFAULTS if c not in values)
        optional = {c: values.get(c, TRANSISTOR_DEFAULTS[c][0]) for c in TRANSISTOR_DEFAULTS}
        return Transistor(
            polarity=polarity,  # type: ignore[arg-type]
            hfe_min=values["hfe_min"], hfe_max=values["hfe_max"], vceo_max=values["vceo_max"],
            ic_max=values["ic_max"], pd_max_w=values["pd_max_w"], assumed=assumed,
            **optional, **common,  # type: ignore[arg-type]
        )
