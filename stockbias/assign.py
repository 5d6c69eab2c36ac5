"""Turn ``ROLE=VALUE_OR_PART_ID`` assignments into resistor specs.

A role takes a stock part id, a value (matched to a stock line of that value
when there is one), a series pair ``A+B`` or a parallel pair ``A|B``.  A value
that is not on the shelf is analysed with a stated tolerance, flagged as not in
stock (``in_stock: false``) and warned about.

Tokens are read in this order: a part id of the shelf (in any letter case, as
everywhere ids are looked up); a transistor id (an error); a value in engineering
notation (``4k7``, ``4.7e+4``, ``R47``) — unless the token resembles the shelf's
part ids (a token that begins with a letter and is a close spelling of an id or
has the same letter prefix as one, as ``R999`` beside lines named ``R4K7``, ``R10K``), which
is an error naming the nearest ids, because a mistyped id must not be analysed
as a 0.999 Ω resistor.  A value must lie in the stock reader's plausible range
(1 mΩ…10 GΩ).  A value held by several stock lines takes the tightest
tolerance, then the cheapest, then the one with most pieces, and says so.

Pairs: the bounds of a series or parallel pair are exact from its parts' bounds
(both are monotone in each part), so the band is asymmetric in general; each
part's dissipation is checked at the worst split its own tolerances and drifts
allow (:mod:`stockbias.resistor_band`).
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field

from .analysis.stage import ResistorPiece, ResistorSpec
from .errors import InputError, NotationError
from .parts import Inventory, Resistor, assumed_tempco_ppm
from .resistor_band import drift_factors, pair_band, pair_rating, pair_tempco, piece_band
from .units import parse_quantity

__all__ = ["ResolvedResistor", "parse_assignments", "resolve_resistor",
           "tempco_assumption"]

#: Power rating assumed for a value that is not a stock part, W (a quarter-watt part).
OFF_STOCK_POWER_W = 0.25

#: Plausible resistance of a bias part, ohm (the stock reader's range).
VALUE_RANGE_OHM = (1e-3, 1e10)

#: A ``+`` that joins a series pair (not the sign of an exponent such as ``4.7e+4``).
_SERIES_PLUS = re.compile(r"(?<![0-9.][eE])\+")


@dataclass(frozen=True)
class ResolvedResistor:
    """One role's resistor (or pair).

    Attributes
    ----------
    role : str
    value : float
        Nominal resistance, ohm.
    tol : float
        Wider side of the tolerance band at 25 °C, fraction (for display; the band itself
        is ``tol_minus``/``tol_plus``).
    tempco_ppm : float
        Temperature coefficient, ppm/°C: signed when ``tempco_signed``, else a magnitude
        taken as either sign (a pair: the first-order combination of its parts).
    rating : float
        Allowed total dissipation at 70 °C, W (a pair: the smallest rating_i / worst share_i).
    parts : tuple of Resistor
        The stock lines used (empty off stock).
    pieces : tuple of Resistor
        Every physical part, stock or not (a value off the shelf has an empty part id).
    tol_minus, tol_plus : float
        The band at 25 °C below and above the nominal, fractions.
    choice : str
        Which stock line a value took and why, when several hold it.
    """

    role: str
    value: float
    tol: float
    tempco_ppm: float
    rating: float
    parts: tuple[Resistor, ...]
    arrangement: str = "single"  # single | series | parallel
    off_stock: bool = False
    warnings: tuple[str, ...] = field(default_factory=tuple)
    pieces: tuple[Resistor, ...] = ()
    tempco_signed: bool = False
    tol_minus: float | None = None
    tol_plus: float | None = None
    choice: str = ""

    @classmethod
    def of_part(cls, role: str, part: Resistor, *, off_stock: bool = False,
                warnings: tuple[str, ...] = (), choice: str = "") -> ResolvedResistor:
        """One role built from one resistor row (``off_stock``: a value not on the shelf)."""
        tol = part.tolerance_pct / 100
        return cls(role=role, value=part.value_ohm, tol=tol, tempco_ppm=part.tempco_used_ppm,
                   rating=part.power_w, parts=() if off_stock else (part,),
                   off_stock=off_stock, warnings=warnings, pieces=(part,),
                   tempco_signed=part.tempco_signed, tol_minus=tol, tol_plus=tol, choice=choice)

    @property
    def in_stock(self) -> bool:
        """Every part of the role is a stock line."""
        return not self.off_stock

    @property
    def part_ids(self) -> list[str]:
        return [p.part_id for p in self.parts]

    @property
    def unit_cost(self) -> float:
        return sum(p.unit_cost for p in self.parts)

    def _pieces(self) -> tuple[Resistor, ...]:
        if self.pieces:
            return self.pieces
        if self.parts:
            return self.parts
        return (Resistor("", self.value, 100 * self.tol, self.rating,
                         tempco_ppm=self.tempco_ppm, tempco_signed=self.tempco_signed),)

    def band(self, ambient_min_c: float, ambient_max_c: float) -> tuple[float, float]:
        """Exact (low, high) over tolerance and tempco drift across the ambient range, ohm."""
        bands = [piece_band(p.value_ohm, p.tolerance_pct / 100, p.tempco_used_ppm,
                            p.tempco_signed, ambient_min_c, ambient_max_c)
                 for p in self._pieces()]
        if self.arrangement == "single" or len(bands) == 1:
            lo, hi = bands[0]
        else:
            lo, hi = pair_band(*bands[0], *bands[1], series=self.arrangement == "series")
        return float(lo), float(hi)

    def spec(self, ambient_min_c: float, ambient_max_c: float) -> ResistorSpec:
        """The analysis spec: the exact band, and the pieces Monte Carlo draws."""
        lo, hi = self.band(ambient_min_c, ambient_max_c)
        pieces = tuple(ResistorPiece(p.value_ohm, p.tolerance_pct / 100, p.tempco_used_ppm,
                                     p.tempco_signed) for p in self._pieces())
        drift = max((abs(f - 1.0) for p in self._pieces() for f in drift_factors(
            p.tempco_used_ppm, p.tempco_signed, ambient_min_c, ambient_max_c)), default=0.0)
        return ResistorSpec(self.value, self.tol, float(drift), band=(lo, hi), pieces=pieces,
                            arrangement=self.arrangement)

    @property
    def tol_low(self) -> float:
        return self.tol if self.tol_minus is None else self.tol_minus

    @property
    def tol_high(self) -> float:
        return self.tol if self.tol_plus is None else self.tol_plus

    def to_dict(self) -> dict[str, object]:
        ids: object = self.part_ids[0] if len(self.parts) == 1 else self.part_ids
        return {"part_id": None if self.off_stock and not self.parts else ids,
                "value_ohm": self.value, "tolerance_pct": 100 * self.tol,
                "tolerance_minus_pct": 100 * self.tol_low,
                "tolerance_plus_pct": 100 * self.tol_high, "arrangement": self.arrangement,
                "tempco_ppm": self.tempco_ppm, "tempco_signed": self.tempco_signed,
                "power_rating_w": self.rating, "off_stock": self.off_stock,
                "in_stock": self.in_stock, "choice": self.choice or None}


def tempco_assumption(parts: object) -> list[str]:
    """How the resistor tempcos were taken, one sentence each (``parts``: role → resolved).

    A stated coefficient is used with its sign (or as either sign when bare); a part whose
    stock row gives none takes :func:`stockbias.parts.assumed_tempco_ppm` for its tolerance,
    named here with the parts it applies to.
    """
    from .units import format_quantity

    items = list(parts.values()) if isinstance(parts, dict) else list(parts)  # type: ignore
    pieces = [p for r in items for p in r._pieces()]
    stated = [p for p in pieces if not p.tempco_assumed and p.tempco_ppm]
    signed = [p for p in stated if p.tempco_signed]
    out = []
    if stated and len(signed) == len(stated):
        out.append("resistor tempco taken with its stated sign: R(T) = R·(1 + tc·(T − 25 °C)) "
                   "over the ambient range")
    elif signed:
        out.append("resistor tempco: a signed coefficient with its sign, a bare magnitude or ± "
                   "as either sign, over the ambient range")
    elif stated:
        out.append("resistor tempco taken as ± its magnitude over the ambient range")
    missing: dict[tuple[float, str], list[str]] = {}
    for p in pieces:
        if p.tempco_assumed:
            ppm, why = assumed_tempco_ppm(p.tolerance_pct)
            name = p.part_id or f"{format_quantity(p.value_ohm, 'ohm')} (not in stock)"
            names = missing.setdefault((ppm, why), [])
            if name not in names:
                names.append(name)
    for (ppm, why), names in missing.items():
        out.append(f"no tempco given for {', '.join(names)}: taken as ±{ppm:g} ppm/°C, either "
                   f"sign ({why}; common practice); set tempco_ppm in the stock file to use "
                   "the real figure")
    return out


def parse_assignments(text: str | list[str], source: str = "--values") -> dict[str, str]:
    """``"R1=47k,R2=RS-10K"`` (or a list of such) → {role: text}."""
    items: list[str] = []
    for chunk in ([text] if isinstance(text, str) else text):
        items.extend(p.strip() for p in chunk.split(",") if p.strip())
    out: dict[str, str] = {}
    for item in items:
        if "=" not in item:
            raise InputError("expected ROLE=VALUE_OR_PART_ID", column=source, text=item)
        role, _, value = item.partition("=")
        role, value = role.strip().upper(), value.strip()
        if not role or not value:
            raise InputError("expected ROLE=VALUE_OR_PART_ID", column=source, text=item)
        if role in out:
            raise InputError(f"role {role} is given twice", column=source, text=item)
        out[role] = value
    return out


def _letters(text: str) -> str:
    """The leading letters of a token, upper case (``R4K7`` → ``R``, ``CF-4K7`` → ``CF``)."""
    m = re.match(r"[A-Za-z]+", text)
    return m.group(0).upper() if m else ""


def _resembling(text: str, inventory: Inventory) -> list[str]:
    """Part ids that ``text`` could be a mistyped form of (nearest first; empty: none)."""
    ids = [r.part_id for r in inventory.resistors if r.part_id]
    if not ids:
        return []
    upper = {i.upper(): i for i in ids}
    if text.upper() in upper:
        return [upper[text.upper()]]
    prefix = _letters(text)
    if not prefix:       # 4k7, 10k, 0.47: the ordinary value notation, never an id
        return []
    close = difflib.get_close_matches(text.upper(), list(upper), n=3, cutoff=0.8)
    same_prefix = bool(prefix) and any(_letters(i) == prefix for i in ids)
    if not close and not same_prefix:
        return []
    near = close or difflib.get_close_matches(text.upper(), list(upper), n=3, cutoff=0.0)
    return [upper[n] for n in near]


def _one(text: str, inventory: Inventory | None, default_tol_pct: float,
         source: str) -> tuple[Resistor, bool, list[str], str]:
    """A single resistor from a part id or a value: (row, off stock, warnings, choice)."""
    if inventory is not None:
        part = inventory.find_resistor(text)
        if part is not None:
            if part.is_link:
                raise InputError("a zero-ohm link cannot take a bias role", column=source,
                                 text=text)
            return part, False, [], ""
        if inventory.find_transistor(text) is not None:
            raise InputError("that part id is a transistor, not a resistor", column=source,
                             text=text)
    try:
        value = parse_quantity(text, "ohm")
    except NotationError as exc:
        hint = ""
        if inventory is not None:
            near = _resembling(text, inventory) or difflib.get_close_matches(
                text, [r.part_id for r in inventory.resistors], n=3, cutoff=0.5)
            hint = (f" (not a stock part id either; nearest ids: {', '.join(near)})" if near
                    else " (not a stock part id either)")
        raise InputError(f"{exc.message}{hint}", column=source, text=text) from None
    if inventory is not None:
        near = _resembling(text, inventory)
        if near:
            raise InputError(f"no stock part has this id, and it looks like one (nearest ids: "
                             f"{', '.join(near)}); give the exact id, or write the value "
                             "without a letter prefix (e.g. 0.47 or 470m)", column=source,
                             text=text)
    if value <= 0:
        raise InputError("a bias resistor must be more than 0 Ω", column=source, text=text)
    lo, hi = VALUE_RANGE_OHM
    if not lo <= value <= hi:
        raise InputError("a resistance must be between 1 mΩ and 10 GΩ", column=source,
                         text=text)
    if inventory is not None:
        same = [r for r in inventory.bias_resistors if abs(r.value_ohm - value) <= 1e-9 * value]
        if same:
            best = min(same, key=lambda r: (r.tolerance_pct, r.unit_cost, -r.qty, r.line))
            choice = ""
            if len(same) > 1:
                choice = (f"{text} is held by {len(same)} stock lines "
                          f"({', '.join(r.part_id for r in same)}): took {best.part_id} "
                          "(tightest tolerance, then cheapest, then most pieces); give the "
                          "part id to choose another")
            return best, False, [choice] if choice else [], choice
    warn = (f"{text} is not a stock part: analysed at ±{default_tol_pct:g} % and "
            f"{OFF_STOCK_POWER_W:g} W")
    part = Resistor(part_id="", value_ohm=value, tolerance_pct=default_tol_pct,
                    power_w=OFF_STOCK_POWER_W)
    return part, True, [warn], ""


def _split_pair(text: str) -> tuple[str, list[str]] | None:
    """(arrangement, [left, right]) of ``A+B`` or ``A|B``; None for one part."""
    plus = _SERIES_PLUS.split(text)
    if len(plus) > 1:
        return "series", plus
    bars = text.split("|")
    if len(bars) > 1:
        return "parallel", bars
    return None


def resolve_resistor(role: str, text: str, inventory: Inventory | None,
                     default_tol_pct: float, source: str = "--values",
                     ambient: tuple[float, float] = (25.0, 25.0)) -> ResolvedResistor:
    """Resolve one role's assignment (single part, ``A+B`` series or ``A|B`` parallel).

    ``ambient`` (°C) is the range over which a pair's worst power split includes the parts'
    tempco drift (25 °C alone: tolerances only).
    """
    whole = inventory.find_resistor(text) if inventory is not None else None
    pair = None if whole is not None else _split_pair(text)
    if pair is not None:
        arrangement, sides = pair
        sep = "+" if arrangement == "series" else "|"
        if len(sides) != 2 or not sides[0].strip() or not sides[1].strip():
            raise InputError(f"a {arrangement} pair is written A{sep}B (two parts)",
                             column=source, text=text)
        (a, off_a, w_a, c_a) = _one(sides[0].strip(), inventory, default_tol_pct, source)
        (b, off_b, w_b, c_b) = _one(sides[1].strip(), inventory, default_tol_pct, source)
        return pair_of(role, a, b, arrangement, off_a or off_b, (*w_a, *w_b),
                       ambient=ambient, choice="; ".join(c for c in (c_a, c_b) if c))
    part, off, warns, choice = _one(text, inventory, default_tol_pct, source)
    return ResolvedResistor.of_part(role, part, off_stock=off, warnings=tuple(warns),
                                    choice=choice)


def pair_bounds(a: Resistor, b: Resistor, arrangement: str) -> tuple[float, float, float]:
    """(nominal, low, high) of a pair from its parts' tolerance bands at 25 °C, ohm."""
    series = arrangement == "series"
    ba = piece_band(a.value_ohm, a.tolerance_pct / 100, 0.0, False, 25.0, 25.0)
    bb = piece_band(b.value_ohm, b.tolerance_pct / 100, 0.0, False, 25.0, 25.0)
    lo, hi = pair_band(*ba, *bb, series=series)
    nominal = a.value_ohm + b.value_ohm if series else \
        a.value_ohm * b.value_ohm / (a.value_ohm + b.value_ohm)
    return nominal, float(lo), float(hi)


def pair_of(role: str, a: Resistor, b: Resistor, arrangement: str, off: bool = False,
            warns: tuple[str, ...] = (), *, ambient: tuple[float, float] = (25.0, 25.0),
            choice: str = "") -> ResolvedResistor:
    """A series or parallel pair of two resistor rows (``off``: a part is not in stock)."""
    series = arrangement == "series"
    nominal, low, high = pair_bounds(a, b, arrangement)
    rating = float(pair_rating(
        a.power_w, b.power_w,
        (a.value_ohm, a.tolerance_pct / 100, a.tempco_used_ppm, a.tempco_signed),
        (b.value_ohm, b.tolerance_pct / 100, b.tempco_used_ppm, b.tempco_signed),
        series, *ambient))
    signed = a.tempco_signed and b.tempco_signed
    tca = a.tempco_used_ppm if signed else abs(a.tempco_used_ppm)
    tcb = b.tempco_used_ppm if signed else abs(b.tempco_used_ppm)
    tempco = float(pair_tempco(a.value_ohm, b.value_ohm, tca, tcb, series))
    t_minus, t_plus = 1 - low / nominal, high / nominal - 1
    parts = tuple(p for p in (a, b) if p.part_id)
    return ResolvedResistor(role=role, value=nominal, tol=max(t_minus, t_plus),
                            tempco_ppm=tempco, rating=rating, parts=parts,
                            arrangement=arrangement, off_stock=off, warnings=warns,
                            pieces=(a, b), tempco_signed=signed and bool(tca or tcb),
                            tol_minus=t_minus, tol_plus=t_plus, choice=choice)
