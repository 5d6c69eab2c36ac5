"""Turn ``ROLE=VALUE_OR_PART_ID`` assignments into resistor specs.

A role takes a stock part id, a value (matched to a stock line of that value
when there is one), a series pair ``A+B`` or a parallel pair ``A|B``.  A value
that is not on the shelf is analysed with a stated tolerance and a warning.

Pairs: the worst-case bounds of a series or parallel pair are exact from its
parts' bounds (both are monotone in each part); the pair's dissipation splits
by the share each part carries (series: R_i/ΣR; parallel: G_i/ΣG), so the
pair's allowed total is the smallest allowed_i / share_i.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from .errors import InputError, NotationError
from .parts import Inventory, Resistor
from .units import parse_quantity

__all__ = ["ResolvedResistor", "parse_assignments", "resolve_resistor"]

#: Power rating assumed for a value that is not a stock part, W (a quarter-watt part).
OFF_STOCK_POWER_W = 0.25


@dataclass(frozen=True)
class ResolvedResistor:
    """One role's resistor (or pair).

    value : ohm; tol, drift : fractions; rating : allowed total at 70 °C, W (the pair's
    smallest allowed_i / share_i); parts : the stock lines used (empty off stock).
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

    @property
    def part_ids(self) -> list[str]:
        return [p.part_id for p in self.parts]

    @property
    def unit_cost(self) -> float:
        return sum(p.unit_cost for p in self.parts)

    def to_dict(self) -> dict[str, object]:
        ids: object = self.part_ids[0] if len(self.parts) == 1 else self.part_ids
        return {"part_id": None if self.off_stock else ids, "value_ohm": self.value,
                "tolerance_pct": 100 * self.tol, "arrangement": self.arrangement,
                "tempco_ppm": self.tempco_ppm, "power_rating_w": self.rating,
                "off_stock": self.off_stock}


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


def _one(text: str, inventory: Inventory | None, default_tol_pct: float,
         source: str) -> tuple[Resistor, bool, list[str]]:
    """A single resistor from a part id or a value."""
    if inventory is not None:
        part = inventory.find_resistor(text)
        if part is not None:
            if part.is_link:
                raise InputError("a zero-ohm link cannot take a bias role", column=source,
                                 text=text)
            return part, False, []
        if inventory.find_transistor(text) is not None:
            raise InputError("that part id is a transistor, not a resistor", column=source,
                             text=text)
    try:
        value = parse_quantity(text, "ohm")
    except NotationError as exc:
        hint = " (not a stock part id either)" if inventory is not None else ""
        raise InputError(f"{exc.message}{hint}", column=source, text=text) from None
    if value <= 0:
        raise InputError("a bias resistor must be more than 0 Ω", column=source, text=text)
    if inventory is not None:
        same = [r for r in inventory.bias_resistors if abs(r.value_ohm - value) <= 1e-9 * value]
        if same:
            best = min(same, key=lambda r: (r.tolerance_pct, r.unit_cost, r.line))
            return best, False, []
    warn = (f"{text} is not a stock part: analysed at ±{default_tol_pct:g} % and "
            f"{OFF_STOCK_POWER_W:g} W")
    part = Resistor(part_id="", value_ohm=value, tolerance_pct=default_tol_pct,
                    power_w=OFF_STOCK_POWER_W)
    return part, True, [warn]


def resolve_resistor(role: str, text: str, inventory: Inventory | None,
                     default_tol_pct: float, source: str = "--values") -> ResolvedResistor:
    """Resolve one role's assignment (single part, ``A+B`` series or ``A|B`` parallel)."""
    for sep, arrangement in (("+", "series"), ("|", "parallel")):
        if sep in text:
            left, _, right = text.partition(sep)
            if not left.strip() or not right.strip() or sep in right:
                raise InputError(f"a {arrangement} pair is written A{sep}B (two parts)",
                                 column=source, text=text)
            (a, off_a, w_a) = _one(left.strip(), inventory, default_tol_pct, source)
            (b, off_b, w_b) = _one(right.strip(), inventory, default_tol_pct, source)
            return _pair(role, a, b, arrangement, off_a or off_b, (*w_a, *w_b))
    part, off, warns = _one(text, inventory, default_tol_pct, source)
    return ResolvedResistor(role=role, value=part.value_ohm, tol=part.tolerance_pct / 100,
                            tempco_ppm=part.tempco_ppm or 0.0, rating=part.power_w,
                            parts=() if off else (part,), off_stock=off,
                            warnings=tuple(warns))


def pair_bounds(a: Resistor, b: Resistor, arrangement: str) -> tuple[float, float, float]:
    """(nominal, low, high) of a pair from its parts' tolerance bands, ohm."""
    ta, tb = a.tolerance_pct / 100, b.tolerance_pct / 100
    ra, rb = a.value_ohm, b.value_ohm
    if arrangement == "series":
        return ra + rb, ra * (1 - ta) + rb * (1 - tb), ra * (1 + ta) + rb * (1 + tb)

    def par(x: float, y: float) -> float:
        return x * y / (x + y)

    return par(ra, rb), par(ra * (1 - ta), rb * (1 - tb)), par(ra * (1 + ta), rb * (1 + tb))


def _pair(role: str, a: Resistor, b: Resistor, arrangement: str, off: bool,
          warns: tuple[str, ...]) -> ResolvedResistor:
    nominal, low, high = pair_bounds(a, b, arrangement)
    # The band is not symmetric in general; the spec takes the wider side (conservative).
    tol = max(nominal - low, high - nominal) / nominal
    if arrangement == "series":
        share_a = a.value_ohm / nominal
    else:
        share_a = b.value_ohm / (a.value_ohm + b.value_ohm)
    share_b = 1.0 - share_a
    rating = min(a.power_w / share_a, b.power_w / share_b)
    tempco = max(abs(a.tempco_ppm or 0.0), abs(b.tempco_ppm or 0.0))  # ± magnitude
    parts = tuple(p for p in (a, b) if p.part_id)
    return ResolvedResistor(role=role, value=nominal, tol=tol, tempco_ppm=tempco, rating=rating,
                            parts=parts, arrangement=arrangement, off_stock=off,
                            warnings=warns)
