"""Which part of the design search a run finished: the words of a cut-short result.

The single-stage search walks its rows in a fixed order (network, then ranges of the
first enumerated role's candidates sorted by value, then transistors) and searches them
in groups.  :class:`Coverage` records the last group searched to the end, so that a run
stopped by the time limit can say exactly which designs it has ruled in or out.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ..units import format_quantity

__all__ = ["Coverage"]


@dataclass
class _Net:
    role: str                 # the first enumerated role (R1, RB) or "" (exponential model)
    values: list[float]       # its candidates' nominal values, ohm, sorted
    a: int = 0                # first-role candidates [0, a) searched with every transistor
    z: int = 0                # [a, z) searched with the transistors [0, q)
    q: int = 0


@dataclass
class Coverage:
    """The searched part of the row order.  ``transistors``: how many the search uses."""

    transistors: int
    nets: dict[str, _Net] = field(default_factory=dict)
    order: list[str] = field(default_factory=list)
    scan_complete: bool = False

    def start(self, network: str, role: str, values: list[float]) -> None:
        """A network whose rows are about to be scanned (``role`` "" when not sliced)."""
        self.nets[network] = _Net(role, values)
        self.order.append(network)

    def searched(self, network: str, span: tuple[int, int], q_index: int) -> None:
        """Every row of ``network`` up to (``span``, transistor ``q_index``) is searched."""
        n = self.nets[network]
        if q_index + 1 >= self.transistors:
            n.a = n.z = span[1]
            n.q = 0
        else:
            n.a, n.z, n.q = span[0], span[1], q_index + 1

    def message(self, networks: list[str]) -> str:
        """One sentence saying what the time limit left unsearched."""
        if self.scan_complete:
            return ("the time limit stopped the search after every row was scanned but "
                    "before every row that could hold a better design was expanded; the "
                    "designs shown are the best found, not proven best")
        parts = []
        for net in networks:
            n = self.nets.get(net)
            if n is None:
                parts.append(f"{net} not reached")
                continue
            total = len(n.values)
            if not n.role:
                parts.append(f"{net}: {n.q if n.a == 0 else self.transistors} of "
                             f"{self.transistors} transistors searched")
                continue
            if n.a >= total:
                parts.append(f"{net}: every row searched")
                continue
            if n.a == 0 and n.q == 0:
                parts.append(f"{net}: none of {total:,} {n.role} candidates searched")
                continue
            if n.a == 0:
                text = (f"{net}: {n.role} candidates 1–{n.z:,} of {total:,} searched with "
                        f"{n.q} of {self.transistors} transistors")
            else:
                text = (f"{net}: {n.role} candidates 1–{n.a:,} of {total:,} (values to "
                        f"{format_quantity(n.values[n.a - 1], 'ohm')}) searched with every "
                        "transistor")
                if n.q > 0:
                    text += (f", {n.a + 1:,}–{n.z:,} with {n.q} of {self.transistors} "
                             "transistors")
            parts.append(text)
        return ("the time limit cut the pre-pass, so the status is not a proof: "
                + "; ".join(parts) + "; the rest was not searched")
