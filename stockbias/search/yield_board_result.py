"""The result of a board or a consolidation designed to a yield target
(:mod:`.yield_board`): each stage's evidence, each chosen board and its yield, the
worst-case optimum beside it and, for a consolidation, today's board as the reference."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..analysis.check import CheckResult
from ..analysis.statistics import YieldResult
from .board import BoardDesign
from .yield_evidence import SCREEN_SAMPLES, STREAM_CHECK

__all__ = ["StageEvidence", "YieldBoard", "YieldBoardResult"]


@dataclass
class StageEvidence:
    """What one stage of a chosen board claims, and on what evidence."""

    name: str
    yield_min: float | None
    confidence: float
    kind: str                 # "worst case", "sub-box", "sampled"
    box_mass: float
    screen: YieldResult | None
    judged: YieldResult | None
    judged_low: float | None
    check: CheckResult
    check_low: float

    @property
    def low(self) -> float:
        """The stage's yield bound: 1 or the sub-box's probability (proven), or the final
        check's lower bound (at ``confidence``)."""
        return {"worst case": 1.0, "sub-box": self.box_mass}.get(self.kind, self.check_low)

    def to_dict(self) -> dict[str, object]:
        mc = self.check.monte_carlo
        assert mc is not None
        return {"name": self.name, "yield_min": self.yield_min,
                "yield_confidence": self.confidence, "kind": self.kind,
                "box_mass": self.box_mass,
                "screen": None if self.screen is None else self.screen.to_dict(),
                "judged": None if self.judged is None else {
                    **self.judged.to_dict(), "yield_low_one_sided": self.judged_low},
                "final_check": {**mc.to_dict(), "yield_low_one_sided": self.check_low,
                                "stream": STREAM_CHECK},
                "worst_case_ok": all(c.ok for c in self.check.constraints
                                     if c.name != "yield_min"),
                "yield_low": self.low}


@dataclass
class YieldBoard:
    """A chosen board (parts and checks on the real shelf) and each stage's evidence."""

    board: BoardDesign
    level: int
    box: tuple[float, float]
    stages: list[StageEvidence]

    @property
    def board_yield(self) -> float:
        """Every stage passes: the product of the stages' final-check yields (independent
        draws, fixed corners)."""
        out = 1.0
        for s in self.stages:
            out *= s.check.monte_carlo.yield_.yield_  # type: ignore[union-attr]
        return out

    @property
    def board_low(self) -> float:
        out = 1.0
        for s in self.stages:
            out *= s.low
        return out

    @property
    def board_confidence(self) -> float:
        """The joint confidence of the stages' lower bounds (Bonferroni over the sampled)."""
        return 1.0 - sum(1.0 - s.confidence for s in self.stages if s.kind == "sampled")

    def to_dict(self) -> dict[str, object]:
        return {**self.board.to_dict(), "box_resistor_factor": self.box[0],
                "box_range_fraction": self.box[1],
                "stage_evidence": [s.to_dict() for s in self.stages],
                "board_yield": {"estimate": self.board_yield, "low": self.board_low,
                                "confidence": self.board_confidence,
                                "rule": "product of the stages' yields (independent draws "
                                        "per stage, fixed environment corners)"}}


@dataclass
class YieldBoardResult:
    """What :func:`yield_board` and :func:`yield_consolidate` return."""

    kind: str                                   # "board" or "consolidate"
    status: str
    designs: list[YieldBoard]
    objectives: tuple[str, ...]
    samples: int
    worst_case: Any                             # BoardResult or ConsolidateResult
    seconds: float
    stats: dict[str, object] = field(default_factory=dict)
    assumptions: list[str] = field(default_factory=list)
    explanation: str | None = None
    reference: list[tuple[str, CheckResult]] | None = None   # consolidation: today's board
    purpose: list[Any] = field(default_factory=list)          # consolidation: HeldPurpose

    # what a consolidation's report and change list read (as a ConsolidateResult has them)
    @property
    def solve_seconds(self) -> float:
        return self.seconds

    @property
    def bound(self) -> dict[str, float]:
        return {}

    @property
    def kept(self) -> list[str]:
        return list(getattr(self.worst_case, "kept", []))

    @property
    def before(self) -> dict[str, object]:
        return dict(self.worst_case.before)

    @property
    def before_ok(self) -> dict[str, bool]:
        return dict(self.worst_case.before_ok)

    @property
    def before_bom(self) -> list[dict[str, object]]:
        return list(self.worst_case.before_bom)

    @property
    def purpose_rule(self) -> str:
        return str(getattr(self.worst_case, "purpose_rule", ""))

    @property
    def found(self) -> bool:
        return bool(self.designs)

    @property
    def status_text(self) -> str:
        """The status in words (what a report prints)."""
        if self.designs:
            return ("feasible (the best among the candidate boards searched, every stage "
                    "judged by its yield target; not a proof over the whole shelf)")
        return "unknown (no candidate board was shown to meet every stage's target)"

    @property
    def after(self) -> BoardDesign | None:
        """The best board (what a consolidation's change list is written from)."""
        return self.designs[0].board if self.designs else None

    def worst_case_best(self) -> BoardDesign | None:
        wc = self.worst_case
        return wc.after if self.kind == "consolidate" else (
            wc.designs[0] if wc.designs else None)

    def to_dict(self) -> dict[str, object]:
        best = self.worst_case_best()
        out: dict[str, object] = {
            "status": self.status, "mode": "yield", "kind": self.kind,
            "samples_per_design": self.samples, "screen_samples": SCREEN_SAMPLES,
            "solve_seconds": self.seconds, "objectives": list(self.objectives),
            "designs": [d.to_dict() for d in self.designs],
            "worst_case_optimum": None if best is None else {
                "cost": best.cost, "part_count": best.part_count,
                "distinct_values": best.distinct_values, "bom_lines": best.bom_lines,
                "changes": best.changes},
            "worst_case_status": self.worst_case.status,
            "worst_case_explanation": self.worst_case.explanation,
            "stats": self.stats, "assumptions": self.assumptions,
            "explanation": self.explanation}
        if self.kind == "consolidate":
            wc = self.worst_case
            out["before"] = {**wc.before, "stages_ok": wc.before_ok}
            out["bom_before"] = wc.before_bom
            out["kept"] = wc.kept
            out["purpose_rule"] = wc.purpose_rule
            out["purpose"] = [p.to_dict() for p in self.purpose]
            out["reference"] = _reference_dict(self.reference or [])
        return out


def _reference_dict(ref: list[tuple[str, CheckResult]]) -> dict[str, object]:
    stages, product = [], 1.0
    for name, chk in ref:
        mc = chk.monte_carlo
        assert mc is not None
        product *= mc.yield_.yield_
        stages.append({"name": name, **mc.to_dict(),
                       "worst_case_ok": all(c.ok for c in chk.constraints
                                            if c.name != "yield_min")})
    return {"stages": stages, "board_yield": product}
