"""The objects :func:`stockbias.design` returns: ranked designs and the search result."""

from __future__ import annotations

from dataclasses import dataclass, field

from ..analysis.check import CheckResult
from ..assign import ResolvedResistor
from ..parts import Transistor
from ..topologies import get_network

__all__ = ["VERIFY_SAMPLES", "Design", "DesignResult", "DesignVariant"]

#: Monte Carlo boards the worst-case search checks a design with when the job also sets
#: ``yield_min`` (the point yield is one more limit there; explanations judge alike).
VERIFY_SAMPLES = 2000


@dataclass(frozen=True)
class DesignVariant:
    """One value of a network's free role (RC) that works with it.

    ``verified``: True when the full check (``analyze_stage``) passed it, None when it was
    checked at every vertex only; ``cost_micro``: the whole design's cost per board with
    this part, integer micro-units; ``vce_min``: worst-case VCE over the vertices, V;
    ``ic_margin``: fraction of the target current.
    """

    part: ResolvedResistor
    representative: bool
    verified: bool | None
    cost_micro: int
    vce_min: float
    ic_margin: float

    def to_dict(self) -> dict[str, object]:
        p = self.part
        ids: object = p.part_ids[0] if len(p.parts) == 1 else list(p.part_ids)
        return {"part_id": ids, "value_ohm": p.value, "tolerance_pct": 100 * p.tol,
                "arrangement": p.arrangement, "representative": self.representative,
                "check": "full" if self.verified else "vertices",
                "cost": self.cost_micro / 1e6, "cost_micro": self.cost_micro,
                "vce_min": self.vce_min, "ic_margin": self.ic_margin}


@dataclass(frozen=True)
class Design:
    """One ranked design with its re-verification."""

    rank: int
    topology: str
    transistor: Transistor
    check: CheckResult
    cost: float
    cost_micro: int
    part_count: int
    distinct_values: int
    bom_lines: int
    ic_margin: float
    #: the role whose values are interchangeable under this network (None: collector
    #: feedback, where every role sets IC) and every such value, the representative included
    free_role: str | None = None
    variants: tuple[DesignVariant, ...] = ()
    #: None when ``variants`` is every variant; else they are the representative and the
    #: two ends of the range only, and this bounds the count from above (the candidates
    #: between the ends that the search's necessary conditions leave)
    variants_at_most: int | None = None

    def variant_range(self) -> dict[str, object] | None:
        """min/max value (ohm) and count of the free role's variants (``None`` when only
        the ends were sought; ``count_at_most`` bounds it), None without a free role."""
        if self.free_role is None or not self.variants:
            return None
        vals = [v.part.value for v in self.variants]
        every = self.variants_at_most is None
        return {"role": self.free_role, "min_ohm": min(vals), "max_ohm": max(vals),
                "count": len(vals) if every else None,
                "count_at_most": len(vals) if every else self.variants_at_most,
                "every_variant_listed": every}

    def to_dict(self) -> dict[str, object]:
        c = self.check   # the parts of its to_dict() shown here (not its spreads)
        parts = {}
        for role, p in self.check.parts.items():
            ids: object = p.part_ids[0] if len(p.parts) == 1 else p.part_ids
            parts[role] = {"part_id": ids, "value_ohm": p.value, "tolerance_pct": 100 * p.tol,
                           "arrangement": p.arrangement}
        return {
            "rank": self.rank, "topology": self.topology,
            "polarity": self.transistor.polarity, "cost": self.cost,
            "cost_micro": self.cost_micro, "part_count": self.part_count,
            "distinct_values": self.distinct_values, "bom_lines": self.bom_lines,
            "ic_margin": self.ic_margin,
            "transistor": {"part_id": self.transistor.part_id,
                           "polarity": self.transistor.polarity},
            "parts": parts, "absent": [r for r in get_network(self.topology).optional_roles
                                       if r not in parts],
            "ok": c.ok, "worst_case": c.worst.to_dict(),
            "constraints": [x.to_dict() for x in c.constraints], "nominal": c.nominal,
            "purpose": None if c.purpose is None else c.purpose.to_dict(),
            "warnings": self.check.warnings, "cautions": self.check.cautions,
            "free_role": self.free_role,
            "variants": [v.to_dict() for v in self.variants],
            "variant_range": self.variant_range(),
        }


@dataclass
class DesignResult:
    """What :func:`design` returns.  ``status``: optimal | feasible | infeasible | unknown."""

    status: str
    solve_seconds: float
    designs: list[Design]
    objectives: tuple[str, ...]
    explanation: object | None = None
    bound: dict[str, float] = field(default_factory=dict)
    stats: dict[str, object] = field(default_factory=dict)
    assumptions: list[str] = field(default_factory=list)
    excluded_transistors: list[dict[str, str]] = field(default_factory=list)

    @property
    def found(self) -> bool:
        return bool(self.designs)

    def to_dict(self) -> dict[str, object]:
        return {
            "status": self.status, "solve_seconds": self.solve_seconds,
            "objectives": list(self.objectives),
            "proven": self.status in ("optimal", "infeasible"),
            "bound": self.bound,
            "designs": [d.to_dict() for d in self.designs],
            "explanation": None if self.explanation is None else self.explanation.to_dict(),
            "assumptions": self.assumptions, "stats": self.stats,
            "excluded_transistors": self.excluded_transistors,
        }
