"""Stock rows as frozen dataclasses: resistors, transistors and the inventory.

Values are SI base units (ohm, volt, ampere, watt), except the fields whose
name carries the scale: ``tolerance_pct`` (percent), ``tempco_ppm``
(ppm/°C), ``theta_ja`` (°C/W), ``tj_max`` (°C), ``eg_ev`` (eV).

A transistor row may leave optional data out.  The defaults of DESIGN §3 are
filled in here, once, and the names of the defaulted fields are kept in
:attr:`Transistor.assumed`, so every report can say what it assumed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

if TYPE_CHECKING:
    from .device_data import DeviceCard

__all__ = [
    "ASSUMED_TEMPCO_PPM",
    "MODEL_CARD_FIELDS",
    "TRANSISTOR_DEFAULTS",
    "Inventory",
    "Resistor",
    "Transistor",
    "assumed_tempco_ppm",
    "id_key",
]

Polarity = Literal["NPN", "PNP"]

#: Defaults for optional transistor columns, with where each comes from.
#: (value, reason shown to the user)
TRANSISTOR_DEFAULTS: dict[str, tuple[float | None, str]] = {
    "vbe_min": (0.60, "VBE min 0.60 V at 1 mA (common practice for small-signal silicon)"),
    "vbe_max": (0.75, "VBE max 0.75 V at 1 mA (common practice for small-signal silicon)"),
    "vce_sat": (0.2, "VCE(sat) 0.2 V (common practice)"),
    "hfe_test_ic": (1e-3, "hFE and VBE taken as specified at 1 mA"),
    "theta_ja": (None, "no θJA: junction temperature estimated from the 25 °C PD rating"),
    "tj_max": (150.0, "TJ max 150 °C (common practice for small-signal silicon)"),
    "icbo_a": (0.0, "no leakage given: ICBO taken as 0"),
    "is_a": (None, "no IS: derived from the middle of the VBE range at the hFE test current"),
    "br": (1.0, "BR 1 (SPICE default)"),
    "nf": (1.0, "NF 1 (SPICE default)"),
    "nr": (1.0, "NR 1 (SPICE default)"),
    "vaf_v": (math.inf, "no VAF: Early effect ignored"),
    "xtb": (1.5, "XTB 1.5 (typical of device model cards, recalled)"),
    "xti": (3.0, "XTI 3 (SPICE default)"),
    "eg_ev": (1.11, "EG 1.11 eV (silicon, SPICE default)"),
}

#: Optional fields used only by the exponential (Gummel-Poon) model.
MODEL_CARD_FIELDS = frozenset({"is_a", "br", "nf", "nr", "vaf_v", "xti", "eg_ev"})

#: Resistor tempco taken where the stock row gives none, by tolerance class:
#: (largest tolerance of the class in percent, magnitude in ppm/°C taken as either sign,
#: why).  The widest typical drift of the technologies parts of that tolerance are made in
#: (typical ranges, common practice): metal film ±15…±100 and thin film ±25…±100 ppm/°C
#: for 1 % and better; carbon film −250…−1000 and thick film ±100…±300 ppm/°C for wider
#: tolerances.  Taken as either sign because the technology is not known.
ASSUMED_TEMPCO_PPM: tuple[tuple[float, float, str], ...] = (
    (1.0, 100.0, "1 % or better: metal or thin film, ±15 to ±100 ppm/°C typical"),
    (math.inf, 1000.0, "wider than 1 %: carbon film reaches −1000 ppm/°C, thick film "
                       "±300 ppm/°C"),
)


def assumed_tempco_ppm(tolerance_pct: float) -> tuple[float, str]:
    """The tempco magnitude taken for a resistor whose row gives none, and why.

    Parameters
    ----------
    tolerance_pct : float
        The part's tolerance, percent.

    Returns
    -------
    (float, str)
        Magnitude in ppm/°C (either sign, worst case either way) and the reason in words
        (see :data:`ASSUMED_TEMPCO_PPM`).
    """
    for upper, ppm, why in ASSUMED_TEMPCO_PPM:
        if tolerance_pct <= upper:
            return ppm, why
    raise AssertionError("the last tolerance class is unbounded")  # pragma: no cover


@dataclass(frozen=True)
class Resistor:
    """One resistor line of the stock file.

    Attributes
    ----------
    part_id : str
        Stock code, unique in the file.
    value_ohm : float
        Resistance, ohm.  ``0`` is a zero-ohm link (never used for a bias role).
    tolerance_pct : float
        Manufacturing tolerance, percent (±).
    power_w : float
        Power rating at 70 °C or below, watt.
    tempco_ppm : float or None
        Temperature coefficient, ppm/°C.
    tempco_signed : bool
        True when the stock file wrote the coefficient with a sign (``-350``, ``+100``):
        it is that signed coefficient.  False (a bare magnitude or ``±350``): either sign,
        worst case either way, and ``tempco_ppm`` is the magnitude.
    qty : int
        Pieces in stock.
    unit_cost : float
        Cost of one piece, in the stock file's currency.
    line : int
        Physical line of the row in the stock file.
    """

    part_id: str
    value_ohm: float
    tolerance_pct: float
    power_w: float
    tempco_ppm: float | None = None
    qty: int = 0
    unit_cost: float = 0.0
    location: str = ""
    note: str = ""
    line: int = 0
    tempco_signed: bool = False

    kind = "resistor"

    def __post_init__(self) -> None:
        if self.value_ohm < 0 or not math.isfinite(self.value_ohm):
            raise ValueError(f"resistance must be finite and >= 0, got {self.value_ohm}")
        if not 0 < self.tolerance_pct <= 50:
            raise ValueError(f"tolerance must be in (0, 50] %, got {self.tolerance_pct}")
        if self.power_w <= 0:
            raise ValueError(f"power rating must be > 0 W, got {self.power_w}")
        if self.qty < 0:
            raise ValueError(f"quantity must be >= 0, got {self.qty}")
        if self.tempco_ppm is not None and not math.isfinite(self.tempco_ppm):
            raise ValueError(f"tempco must be finite, got {self.tempco_ppm}")
        if self.tempco_ppm is not None and not self.tempco_signed and self.tempco_ppm < 0:
            raise ValueError("an unsigned tempco is a magnitude (>= 0); mark a negative "
                             "coefficient tempco_signed")

    @property
    def tempco_text(self) -> str:
        """The coefficient as taken: ``−350 ppm/°C``, ``+100 ppm/°C`` or ``±350 ppm/°C``."""
        if self.tempco_ppm is None:
            return "-"
        if self.tempco_signed:
            sign = "−" if self.tempco_ppm < 0 else "+"
            return f"{sign}{abs(self.tempco_ppm):g} ppm/°C"
        return f"±{self.tempco_ppm:g} ppm/°C"

    @property
    def tempco_assumed(self) -> bool:
        """True when the row gives no tempco and :func:`assumed_tempco_ppm` is taken."""
        return self.tempco_ppm is None

    @property
    def tempco_used_ppm(self) -> float:
        """The coefficient the analysis uses, ppm/°C: the row's (signed when
        ``tempco_signed``, else a magnitude), or the assumed magnitude where it gives none."""
        if self.tempco_ppm is None:
            return assumed_tempco_ppm(self.tolerance_pct)[0]
        return self.tempco_ppm

    @property
    def is_link(self) -> bool:
        """True for a zero-ohm link."""
        return self.value_ohm == 0.0

    def to_dict(self) -> dict[str, object]:
        return {
            "part_id": self.part_id, "kind": self.kind, "line": self.line,
            "value_ohm": self.value_ohm, "tolerance_pct": self.tolerance_pct,
            "power_w": self.power_w, "tempco_ppm": self.tempco_ppm,
            "tempco_signed": self.tempco_signed, "qty": self.qty,
            "unit_cost": self.unit_cost, "location": self.location, "note": self.note,
            "zero_ohm_link": self.is_link,
        }


@dataclass(frozen=True)
class Transistor:
    """One transistor line of the stock file (data at 25 °C).

    Attributes
    ----------
    polarity : {"NPN", "PNP"}
    hfe_min, hfe_max : float
        DC current gain range at ``hfe_test_ic``, dimensionless.
    vceo_max : float
        Collector-emitter breakdown rating, volt.
    ic_max : float
        Collector current rating, ampere.
    pd_max_w : float
        Dissipation rating at 25 °C ambient, watt.
    vbe_min, vbe_max : float
        Base-emitter voltage range at ``hfe_test_ic``, 25 °C, volt.
    vce_sat : float
        Saturation voltage, volt.
    hfe_test_ic : float
        Collector current the hFE and VBE ranges are specified at, ampere.
    theta_ja : float or None
        Junction-to-ambient thermal resistance, °C/W.
    tj_max : float
        Maximum junction temperature, °C.
    icbo_a : float
        Collector-base leakage at 25 °C, ampere.
    is_a : float or None
        Gummel-Poon saturation current at TNOM, ampere (None: derive).
    br, nf, nr : float
        Gummel-Poon reverse beta and emission coefficients.
    vaf_v : float
        Forward Early voltage, volt (inf: none).
    xtb, xti : float
        Temperature exponents of beta and IS.
    eg_ev : float
        Band gap, eV.
    assumed : frozenset of str
        Names of the optional fields left out of the row and filled by default.
    model_name, model_file, curve_file : str
        The row's device-data columns as written (empty when absent).
    card : DeviceCard or None
        The DC parameters the row's model card or datasheet points give
        (:mod:`stockbias.device_data`); its IS, BR, NF, NR, VAF, XTB, XTI, EG fill the
        fields above that the row left empty.
    device_note : str
        Set when the hFE and VBE ranges were moved along the card to a job's current
        window: what was used.
    """

    part_id: str
    polarity: Polarity
    hfe_min: float
    hfe_max: float
    vceo_max: float
    ic_max: float
    pd_max_w: float
    vbe_min: float = 0.60
    vbe_max: float = 0.75
    vce_sat: float = 0.2
    hfe_test_ic: float = 1e-3
    theta_ja: float | None = None
    tj_max: float = 150.0
    icbo_a: float = 0.0
    is_a: float | None = None
    br: float = 1.0
    nf: float = 1.0
    nr: float = 1.0
    vaf_v: float = math.inf
    xtb: float = 1.5
    xti: float = 3.0
    eg_ev: float = 1.11
    qty: int = 0
    unit_cost: float = 0.0
    location: str = ""
    note: str = ""
    line: int = 0
    assumed: frozenset[str] = field(default_factory=frozenset)
    model_name: str = ""
    model_file: str = ""
    curve_file: str = ""
    card: DeviceCard | None = field(default=None, compare=False, repr=False)
    device_note: str = ""

    kind = "transistor"

    def __post_init__(self) -> None:
        if self.polarity not in ("NPN", "PNP"):
            raise ValueError(f"polarity must be NPN or PNP, got {self.polarity!r}")
        if not 0 < self.hfe_min <= self.hfe_max:
            raise ValueError(f"need 0 < hfe_min <= hfe_max, got {self.hfe_min}..{self.hfe_max}")
        if not 0 < self.vbe_min <= self.vbe_max:
            raise ValueError(f"need 0 < vbe_min <= vbe_max, got {self.vbe_min}..{self.vbe_max}")
        for name in ("vceo_max", "ic_max", "pd_max_w", "hfe_test_ic"):
            if getattr(self, name) <= 0:
                raise ValueError(f"{name} must be > 0, got {getattr(self, name)}")
        if self.qty < 0:
            raise ValueError(f"quantity must be >= 0, got {self.qty}")

    @property
    def hfe_nominal(self) -> float:
        """Geometric mean of the hFE range (the nominal point of DESIGN §3)."""
        return math.sqrt(self.hfe_min * self.hfe_max)

    @property
    def vbe_nominal(self) -> float:
        """Middle of the VBE range, volt."""
        return 0.5 * (self.vbe_min + self.vbe_max)

    def assumptions(self) -> list[str]:
        """Human-readable statements of every default this row relies on (and, for a row
        with a model card or datasheet points, where its device data come from)."""
        out = [TRANSISTOR_DEFAULTS[name][1] for name in TRANSISTOR_DEFAULTS
               if name in self.assumed]
        if self.card is not None:
            out.append(self.device_note or f"β(IC, T) and VBE(IC) from the {self.card.source}")
        return out

    def to_dict(self) -> dict[str, object]:
        out: dict[str, object] = {"part_id": self.part_id, "kind": self.kind, "line": self.line}
        for name in ("polarity", "hfe_min", "hfe_max", "vceo_max", "ic_max", "pd_max_w",
                     *TRANSISTOR_DEFAULTS, "qty", "unit_cost", "location", "note"):
            value = getattr(self, name)
            out[name] = None if isinstance(value, float) and math.isinf(value) else value
        out["assumed"] = sorted(self.assumed)
        if self.card is not None:
            out["model_name"] = self.model_name
            out["model_file"] = self.model_file
            out["curve_file"] = self.curve_file
            out["device_data"] = self.card.source
            out["device_note"] = self.device_note
        return out


def id_key(part_id: str) -> str:
    """The form two part ids are compared in: letter case ignored (``CF-4K7`` = ``cf-4k7``)."""
    return part_id.casefold()


@dataclass(frozen=True)
class Inventory:
    """A validated stock file.

    Attributes
    ----------
    path : str
        The file it was read from.
    resistors, transistors : tuple
        The rows, in file order.
    delimiter : str
        The field delimiter found (``','`` or ``';'``).
    warnings : tuple of (line, column, text, message)
        Things worth saying that are not errors (zero-ohm links, ignored fields).
    sha256 : str
        Hash of the file's bytes as read.
    """

    path: str
    resistors: tuple[Resistor, ...]
    transistors: tuple[Transistor, ...]
    delimiter: str = ","
    warnings: tuple[tuple[int, str, str, str], ...] = ()
    sha256: str = ""
    extra_columns: tuple[str, ...] = ()

    # Part ids are matched without regard to letter case (`qn-gp40` finds QN-GP40), as
    # role names are; the stock reader refuses two ids that differ only in case.

    def part(self, part_id: str) -> Resistor | Transistor:
        """The row with this stock code (any letter case); KeyError if there is none."""
        key = id_key(part_id)
        rows: tuple[Resistor | Transistor, ...] = (*self.resistors, *self.transistors)
        for row in rows:
            if id_key(row.part_id) == key:
                return row
        raise KeyError(part_id)

    def find_resistor(self, part_id: str) -> Resistor | None:
        """The resistor line with this part id (any letter case), or None."""
        key = id_key(part_id)
        return next((r for r in self.resistors if id_key(r.part_id) == key), None)

    def find_transistor(self, part_id: str) -> Transistor | None:
        """The transistor line with this part id (any letter case), or None."""
        key = id_key(part_id)
        return next((t for t in self.transistors if id_key(t.part_id) == key), None)

    @property
    def bias_resistors(self) -> tuple[Resistor, ...]:
        """Resistor lines usable in a bias role (zero-ohm links left out)."""
        return tuple(r for r in self.resistors if not r.is_link)

    def to_pandas(self) -> tuple[object, object]:
        """Two DataFrames (resistors, transistors); pandas is imported only here."""
        import pandas as pd

        res = pd.DataFrame([r.to_dict() for r in self.resistors])
        trs = pd.DataFrame([t.to_dict() for t in self.transistors])
        return res, trs
