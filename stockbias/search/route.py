"""``stockbias.design``: the search a job asks for, as the ``design`` command picks it.

A single stage with ``[target] yield_min`` goes to the yield search
(:func:`.yield_search.yield_design`, a :class:`.yield_search.YieldDesignResult`), a board
with ``yield_min`` in any stage to the yield board search (:func:`.yield_board.yield_board`,
a :class:`.yield_board_result.YieldBoardResult`); every other job, boards included, to the
worst-case search (:func:`.design.design`, a :class:`.design_result.DesignResult`).
"""

from __future__ import annotations

from typing import Any

from ..job import Job
from ..parts import Inventory

__all__ = ["design"]


def design(job: Job, inventory: Inventory, **options: Any) -> Any:
    """The best designs for ``job`` from ``inventory``.

    Parameters
    ----------
    job : Job
    inventory : Inventory
    **options
        Passed to the search: ``top`` and ``time_limit_s`` for both; ``executor`` and
        ``progress`` (a ``(text, fraction)`` callback) for the yield search; the worst-case
        search's own keywords otherwise.
    """
    if not job.is_board and job.stage.target.yield_min is not None:
        from .yield_search import yield_design

        return yield_design(job, inventory, **options)
    if job.is_board and any(s.target.yield_min is not None for s in job.stages):
        from .yield_board import yield_board

        return yield_board(job, inventory, **options)
    from .design import design as worst_case_design

    return worst_case_design(job, inventory, **options)
