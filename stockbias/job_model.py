"""What a design job says, as frozen dataclasses (DESIGN §3); :mod:`stockbias.job` reads them
from TOML.

Units: volts V, currents A, power W, temperatures °C, tolerances as percentage
numbers, yields and derating as fractions, the load in ohm, time in seconds.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

__all__ = [
    "DEFAULT_OBJECTIVES",
    "MODELS",
    "OBJECTIVES",
    "TOPOLOGY_NAMES",
    "Build",
    "Environment",
    "Job",
    "KeepPurpose",
    "Limits",
    "Search",
    "SmallSignal",
    "Stage",
    "Supply",
    "Target",
]

TOPOLOGY_NAMES = ("divider", "collector_feedback", "dual_supply", "fixed_base")
MODELS = ("constant_vbe", "exponential")
OBJECTIVES = ("cost", "part_count", "distinct_values", "bom_lines", "ic_margin", "changes")
DEFAULT_OBJECTIVES = ("cost", "part_count", "distinct_values", "ic_margin")


@dataclass(frozen=True)
class Supply:
    """Supply rails.  volts : V (positive rail); negative_volts : V (signed, < 0) or None."""

    volts: float
    tolerance_pct: float = 0.0
    negative_volts: float | None = None
    negative_tolerance_pct: float | None = None
    mains_derived: bool = False

    @property
    def vee_tolerance_pct(self) -> float:
        return (self.tolerance_pct if self.negative_tolerance_pct is None
                else self.negative_tolerance_pct)

    @property
    def max_ce_voltage(self) -> float:
        """Largest collector-emitter voltage the rails can impose at upper tolerance, V."""
        v = self.volts * (1 + self.tolerance_pct / 100)
        if self.negative_volts is not None:
            v += abs(self.negative_volts) * (1 + self.vee_tolerance_pct / 100)
        return v


@dataclass(frozen=True)
class Target:
    """Operating-point requirements.  Currents A, voltages V, gains as |Av|, yield a fraction."""

    ic_min: float
    ic_max: float
    vce_min: float = 0.0
    swing_pk: float | None = None
    gain_min: float | None = None
    gain_max: float | None = None
    yield_min: float | None = None
    ic_set: float | None = None  # the job's ``ic`` when the window is ic ± ic_window_pct, A
    rin_min: float | None = None  # input resistance incl. the bias network, ohm
    divider_ratio_min: float | None = None  # I(R2)/IB at every corner (divider); 0: none
    # |gain| at the nominal point, V/V: set from an existing stage's own figure
    # (consolidate, substitute), not a job key
    gain_nominal_min: float | None = None
    gain_nominal_max: float | None = None
    #: one-sided confidence at which a design's yield must be shown to meet yield_min
    #: (the job's percent as a fraction; 95 % when the job does not say)
    yield_confidence: float = 0.95

    @property
    def ic(self) -> float:
        """The target current, A: the job's ``ic``, or, for a window given as ic_min and
        ic_max, its centre (geometric mean)."""
        return self.ic_set if self.ic_set is not None else math.sqrt(self.ic_min * self.ic_max)


@dataclass(frozen=True)
class Limits:
    """Limits at the worst corner.  W; fraction; °C (None: each transistor's own TJ max)."""

    supply_power_max: float | None = None
    resistor_derating: float = 0.5
    tj_max: float | None = None
    derating_knee_c: float = 70.0
    derating_zero_c: float = 155.0
    supply_current_max: float | None = None  # A, drawn from the supply at the worst corner


@dataclass(frozen=True)
class Environment:
    """Ambient temperature range, °C."""

    ambient_min_c: float = 25.0
    ambient_max_c: float = 25.0

    @property
    def nominal_c(self) -> float:
        """25 °C unless the range excludes it (then its middle), DESIGN §3."""
        if self.ambient_min_c <= 25.0 <= self.ambient_max_c:
            return 25.0
        return 0.5 * (self.ambient_min_c + self.ambient_max_c)


@dataclass(frozen=True)
class SmallSignal:
    """AC conditions: load in ohm (inf: none); RE fully bypassed or not."""

    load: float = math.inf
    re_bypassed: bool = True
    stated: tuple[str, ...] = ()  # the keys the job gave; the others took their defaults


@dataclass(frozen=True)
class Build:
    """Build quantity and what the search may combine."""

    quantity: int = 1
    allow_pairs: bool = False
    default_tolerance_pct: float = 5.0


@dataclass(frozen=True)
class Search:
    """Search settings."""

    topology: str = "divider"
    model: str = "constant_vbe"
    objectives: tuple[str, ...] = DEFAULT_OBJECTIVES
    top: int = 5
    time_limit_s: float = 20.0
    seed: int = 0


@dataclass(frozen=True)
class KeepPurpose:
    """How far a change to an existing stage may move its purpose, in % of today's figures.

    ``gain_pct``: nominal |gain| within ± this; ``rin_pct``: worst-case input resistance at
    least this; ``swing_pct``: worst-case peak swing at least this; ``supply_current_pct``:
    worst-case supply current at most this.  None: that figure is not held.
    """

    gain_pct: float | None = 10.0
    rin_pct: float | None = 80.0
    swing_pct: float | None = 90.0
    supply_current_pct: float | None = 125.0


@dataclass(frozen=True)
class Stage:
    """One transistor stage of a job or board."""

    name: str
    topology: str
    target: Target
    limits: Limits
    transistor: str | None = None
    values: dict[str, str] = field(default_factory=dict)
    #: the file's [keep_purpose] / [stage.keep_purpose] (None: the defaults)
    keep_purpose: KeepPurpose | None = None
    #: [stage.refs]: role (or ``transistor``) → reference designator(s) on the schematic
    refs: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class Job:
    """A whole job: shared sections plus one or more stages."""

    path: str
    supply: Supply
    environment: Environment
    small_signal: SmallSignal
    build: Build
    search: Search
    stages: tuple[Stage, ...]

    @property
    def stage(self) -> Stage:
        """The single stage of a one-stage job."""
        return self.stages[0]

    @property
    def is_board(self) -> bool:
        return len(self.stages) > 1

    def with_topology(self, topology: str) -> Job:
        """The same job with every stage set to one topology."""
        return replace(self, stages=tuple(replace(s, topology=topology) for s in self.stages))
