"""One wall-clock deadline for a whole search command.

A :class:`Deadline` is made once, when a search starts, and passed down to every phase
(candidate tables, the row pre-pass, dominance, the CP-SAT model, re-verification), so
that ``time_limit_s`` bounds the command and not only the solver.  Phases ask
:meth:`Deadline.expired` between blocks of work and hand CP-SAT :meth:`Deadline.remaining`.

The clock is injectable (``clock``: a callable returning seconds, monotonic), and
:meth:`Deadline.after_checks` makes a deadline that expires after a fixed number of
checks, so that a cut-short search can be reproduced without timing anything.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable

__all__ = ["Deadline"]


class Deadline:
    """A point in time after which a search stops and reports what it has.

    Parameters
    ----------
    limit_s : float
        Seconds from now, s (``inf`` for no limit).
    clock : callable, optional
        Returns the current time, s (default :func:`time.monotonic`).
    """

    def __init__(self, limit_s: float, clock: Callable[[], float] = time.monotonic):
        self.clock = clock
        self.start = clock()
        self.limit = float(limit_s)
        self.at = self.start + self.limit
        self.checks = 0
        self._checks_left: int | None = None
        self.hit = False

    @classmethod
    def until(cls, at: float) -> Deadline:
        """A deadline at the :func:`time.monotonic` value ``at`` (for callers that hold the
        end of the command as a number)."""
        d = cls(0.0)
        d.limit = at - d.start
        d.at = at
        return d

    @classmethod
    def after_checks(cls, n: int) -> Deadline:
        """A deadline that expires at the ``n``-th call of :meth:`expired` (n ≥ 1) and
        stays expired; :meth:`remaining` is 0 once it has expired, else 3600 s."""
        d = cls(float("inf"))
        d._checks_left = int(n)
        return d

    def expired(self) -> bool:
        """True once the deadline has passed (and from then on)."""
        self.checks += 1
        if not self.hit:
            if self._checks_left is not None:
                self._checks_left -= 1
                self.hit = self._checks_left <= 0
            else:
                self.hit = self.clock() > self.at
        return self.hit

    def remaining(self) -> float:
        """Seconds left, s (0 once expired)."""
        if self.hit:
            return 0.0
        if self._checks_left is not None:
            return 3600.0
        return max(self.at - self.clock(), 0.0)

    def elapsed(self) -> float:
        """Seconds since the deadline was made, s."""
        return self.clock() - self.start

    def share(self, fraction: float) -> Deadline:
        """A deadline at ``fraction`` of this one's limit, on the same clock (the phase
        that must leave time for later ones); a deadline counted in checks is shared as
        itself."""
        if self._checks_left is not None or not math.isfinite(self.limit):
            return self
        d = Deadline(0.0, self.clock)
        d.start, d.limit = self.start, self.limit * fraction
        d.at = self.start + d.limit
        return d

    def past(self, fraction: float) -> bool:
        """True once more than ``fraction`` of the limit has been used (never for a
        deadline counted in checks)."""
        if self._checks_left is not None or not math.isfinite(self.limit):
            return self.hit
        return self.clock() - self.start > fraction * self.limit

    def monotonic_at(self) -> float:
        """The deadline as a :func:`time.monotonic` value (for code that compares times), s."""
        if self._checks_left is not None or self.clock is not time.monotonic:
            return time.monotonic() + self.remaining()
        return self.at
