"""What the search may use: resistor candidates per role and usable transistors.

A *candidate* is what one role can be built from: a single stock line, a
series or parallel pair of two stock lines (``allow_pairs``), or, for an
optional role, nothing at all (absent, a short).  Candidates are held as
sorted numpy arrays (by nominal value) so that the pre-pass can cut the
admissible interval of a role with ``searchsorted``.

Bounds match the re-verification path exactly: a candidate's band is the one
:func:`stockbias.analysis.check.build_spec` takes from the
:class:`stockbias.assign.ResolvedResistor` of the same parts, by the same
functions (:mod:`stockbias.resistor_band`): each part over its tolerance and its
tempco drift across the ambient range (a signed tempco one way, an unsigned one
either way); a pair's exact, asymmetric band from its parts' extremes; a pair's
rating the smallest rating_i / worst share_i at the split its parts' bands allow.

Stock quantity: a line is offered only if it holds at least one build's worth
(``build.quantity`` pieces; two for a pair of the same line).  The model then
enforces the full count, a line used by two roles needing twice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..assign import ResolvedResistor, pair_of
from ..job import Job
from ..parts import Inventory, Resistor, Transistor
from ..resistor_band import (
    drift_factors,
    pair_band,
    pair_rating,
    pair_tempco,
    pair_value,
    piece_band,
)

__all__ = [
    "ABSENT",
    "PARALLEL",
    "SERIES",
    "SINGLE",
    "RoleCandidates",
    "Shelf",
    "build_shelf",
    "micro",
    "usable_transistors",
]

ABSENT, SINGLE, SERIES, PARALLEL = -1, 0, 1, 2
_ARRANGEMENT = {SINGLE: "single", SERIES: "series", PARALLEL: "parallel"}


def micro(cost: float) -> int:
    """A cost in the stock file's currency as integer micro-units."""
    return round(cost * 1_000_000)


@dataclass(frozen=True)
class RoleCandidates:
    """Candidates for one role, sorted by nominal value (absent first when offered).

    Arrays (length n): ``value`` ohm, ``tol`` fraction (the wider side of the band at 25 °C),
    ``tempco`` ppm/°C (magnitude), ``drift`` largest drift fraction of a part over the
    ambient range, ``low``/``high`` ohm (the exact band the spec uses),
    ``rating`` W (allowed total at 70 °C), ``cost`` micro-units, ``parts`` count,
    ``line_a``/``line_b`` indices into :attr:`Shelf.lines` (−1 none), ``value_a``/``value_b``
    indices into :attr:`Shelf.values` (−1 none), ``arrangement`` code.
    """

    value: np.ndarray
    tol: np.ndarray
    tempco: np.ndarray
    drift: np.ndarray
    low: np.ndarray
    high: np.ndarray
    rating: np.ndarray
    cost: np.ndarray
    parts: np.ndarray
    line_a: np.ndarray
    line_b: np.ndarray
    value_a: np.ndarray
    value_b: np.ndarray
    arrangement: np.ndarray

    def __len__(self) -> int:
        return int(self.value.size)

    def take(self, idx: np.ndarray) -> RoleCandidates:
        return RoleCandidates(**{k: getattr(self, k)[idx] for k in self.__dataclass_fields__})

    @property
    def present(self) -> np.ndarray:
        return self.arrangement != ABSENT


@dataclass(frozen=True)
class Shelf:
    """The resistor lines usable in bias roles and the candidate table built from them.

    ``lines``: the resistor rows (zero-ohm links and lines short of one build left out);
    ``values``: sorted distinct nominal values, ohm; ``single``/``with_pairs``: candidates
    without and with pairs; ``span_c``: largest |T − 25 °C| over the ambient range;
    ``ambient_c``: the ambient range, °C.
    """

    lines: tuple[Resistor, ...]
    values: np.ndarray
    single: RoleCandidates
    with_pairs: RoleCandidates | None
    span_c: float
    ambient_c: tuple[float, float] = (25.0, 25.0)
    #: resolved parts by (role, arrangement, line a, line b): a pair's exact band and
    #: worst-split rating are worked out once per search, not once per listing
    _resolved: dict = field(default_factory=dict, compare=False, repr=False)

    def candidates(self, optional: bool, pairs: bool) -> RoleCandidates:
        """The candidate table of a role (with an absent entry first when optional)."""
        base = self.with_pairs if pairs and self.with_pairs is not None else self.single
        if not optional:
            return base
        absent = _table([0.0], [0.0], [0.0], [0.0], [0.0], [0.0], [0.0], [0], [0], [-1], [-1], [-1],
                        [-1], [ABSENT])
        return _concat(absent, base)

    def resolved(self, role: str, cand: RoleCandidates, i: int) -> ResolvedResistor | None:
        """The :class:`ResolvedResistor` of candidate ``i`` (None when absent)."""
        code = int(cand.arrangement[i])
        if code == ABSENT:
            return None
        key = (role, code, int(cand.line_a[i]), int(cand.line_b[i]))
        got = self._resolved.get(key)
        if got is None:
            a = self.lines[key[2]]
            got = ResolvedResistor.of_part(role, a) if code == SINGLE else pair_of(
                role, a, self.lines[key[3]], _ARRANGEMENT[code], ambient=self.ambient_c)
            self._resolved[key] = got
        return got


def _table(value, tol, tempco, drift, low, high, rating, cost, parts, la, lb, va, vb,
           arr) -> RoleCandidates:
    f = np.asarray
    return RoleCandidates(f(value, float), f(tol, float), f(tempco, float), f(drift, float),
                          f(low, float), f(high, float), f(rating, float), f(cost, np.int64),
                          f(parts, np.int64), f(la, np.int64), f(lb, np.int64), f(va, np.int64),
                          f(vb, np.int64), f(arr, np.int64))


def _concat(a: RoleCandidates, b: RoleCandidates) -> RoleCandidates:
    return RoleCandidates(**{k: np.concatenate([getattr(a, k), getattr(b, k)])
                             for k in a.__dataclass_fields__})


def _sorted(c: RoleCandidates) -> RoleCandidates:
    order = np.lexsort((c.cost, c.tol, c.value))
    return c.take(order)


def build_shelf(job: Job, inventory: Inventory, *, pairs: bool | None = None,
                max_pairs: int = 400_000) -> Shelf:
    """Candidate tables from the stock file for this job.

    Parameters
    ----------
    job : Job
        Build quantity, ``allow_pairs`` and the ambient range (tempco drift).
    inventory : Inventory
    pairs : bool, optional
        Override ``job.build.allow_pairs``.
    max_pairs : int
        Refuse more pair candidates than this (memory), per arrangement.
    """
    env = job.environment
    amb = (env.ambient_min_c, env.ambient_max_c)
    span = max(abs(env.ambient_min_c - 25.0), abs(env.ambient_max_c - 25.0))
    need = job.build.quantity
    lines = tuple(r for r in inventory.bias_resistors if r.qty >= need)
    values = np.unique(np.array([r.value_ohm for r in lines], dtype=float))
    n = len(lines)
    v = np.array([r.value_ohm for r in lines], dtype=float)
    t = np.array([r.tolerance_pct / 100 for r in lines], dtype=float)
    tcs = np.array([r.tempco_used_ppm for r in lines], dtype=float)  # signed where stated
    sgn = np.array([r.tempco_signed for r in lines], dtype=bool)
    tc = np.abs(tcs)
    rating = np.array([r.power_w for r in lines], dtype=float)
    cost = np.array([micro(r.unit_cost) for r in lines], dtype=np.int64)
    vid = np.searchsorted(values, v)
    f_lo, f_hi = drift_factors(tcs, sgn, *amb)
    drift = np.maximum(1.0 - f_lo, f_hi - 1.0)
    lo1, hi1 = piece_band(v, t, tcs, sgn, *amb)
    idx = np.arange(n)
    single = _sorted(_table(v, t, tc, drift, lo1, hi1, rating, cost, np.ones(n), idx,
                            -np.ones(n), vid, -np.ones(n), np.full(n, SINGLE)))
    with_pairs = None
    if (job.build.allow_pairs if pairs is None else pairs) and n:
        ia, ib = np.triu_indices(n)            # unordered pairs, a line with itself included
        qty = np.array([r.qty for r in lines])
        ok = np.where(ia == ib, qty[ia] >= 2 * need, True)
        ia, ib = ia[ok], ib[ok]
        if ia.size > max_pairs:
            from ..errors import InputError

            raise InputError(f"{n} resistor lines make {ia.size} pairs per arrangement, more "
                             f"than the search handles ({max_pairs}); turn allow_pairs off or "
                             "use a smaller shelf", column="allow_pairs", text="true")
        tables = [single]
        for code in (SERIES, PARALLEL):
            series = code == SERIES
            ra, rb, ta, tb = v[ia], v[ib], t[ia], t[ib]
            nom = pair_value(ra, rb, series)
            # the same arithmetic as assign.pair_of, so search and check agree bit for bit
            lo25, hi25 = pair_band(ra * (1 - ta), ra * (1 + ta), rb * (1 - tb), rb * (1 + tb),
                                   series)
            tol = np.maximum(1 - lo25 / nom, hi25 / nom - 1)
            lo, hi = pair_band(lo1[ia], hi1[ia], lo1[ib], hi1[ib], series)
            rate = pair_rating(rating[ia], rating[ib], (ra, ta, tcs[ia], sgn[ia]),
                               (rb, tb, tcs[ib], sgn[ib]), series, *amb)
            both = sgn[ia] & sgn[ib]
            tcp = np.abs(pair_tempco(ra, rb, np.where(both, tcs[ia], tc[ia]),
                                     np.where(both, tcs[ib], tc[ib]), series))
            dr = np.maximum(drift[ia], drift[ib])
            tables.append(_table(nom, tol, tcp, dr, lo, hi, rate, cost[ia] + cost[ib],
                                 np.full(ia.size, 2), ia, ib, vid[ia], vid[ib],
                                 np.full(ia.size, code)))
        merged = tables[0]
        for extra in tables[1:]:
            merged = _concat(merged, extra)
        with_pairs = _sorted(merged)
    return Shelf(lines=lines, values=values, single=single, with_pairs=with_pairs, span_c=span,
                 ambient_c=amb)


def usable_transistors(job: Job, inventory: Inventory,
                       polarities: tuple[str, ...] = ("NPN", "PNP")
                       ) -> tuple[list[Transistor], list[tuple[Transistor, str]]]:
    """Transistors that can possibly meet the job, and why each other one cannot.

    A row is left out when (each a proven necessary condition): its VCEO does not exceed the
    largest collector–emitter voltage the supplies can impose; its IC max is below the
    window's lower edge; its dissipation allowed at the hottest ambient is below
    ``ic_min × vce_min``; it holds fewer than one build's worth; or the stage names another
    transistor.
    """
    from ..analysis.ratings import transistor_pd_allowed

    need_v = job.supply.max_ce_voltage
    hot = job.environment.ambient_max_c
    keep: list[Transistor] = []
    out: list[tuple[Transistor, str]] = []
    stage = job.stage
    t = stage.target
    for q in inventory.transistors:
        theta = math.nan if q.theta_ja is None else q.theta_ja
        tj = q.tj_max if stage.limits.tj_max is None else stage.limits.tj_max
        pd_ok = float(transistor_pd_allowed(q.pd_max_w, theta, hot, tj))
        if stage.transistor is not None and q.part_id != stage.transistor:
            out.append((q, f"the stage names transistor {stage.transistor}"))
        elif q.polarity not in polarities:
            out.append((q, f"{q.polarity} does not fit the supply"))
        elif q.vceo_max <= need_v:
            out.append((q, f"VCEO {q.vceo_max:g} V does not exceed the {need_v:.3g} V the "
                        "supplies can impose"))
        elif q.ic_max < t.ic_min:
            out.append((q, f"IC max {q.ic_max:g} A is below the window"))
        elif pd_ok < t.ic_min * t.vce_min:
            out.append((q, f"allowed dissipation {pd_ok * 1e3:.3g} mW at {hot:g} °C is below "
                        f"IC min × VCE min"))
        elif q.qty < job.build.quantity:
            out.append((q, f"only {q.qty} in stock for a build of {job.build.quantity}"))
        else:
            keep.append(q)
    return keep, out


def stage_networks(job: Job, topology: str) -> list[str]:
    """The networks a stage searches: its topology, or for ``any`` every network the
    supplies permit (``dual_supply`` needs a negative rail)."""
    from ..job import TOPOLOGY_NAMES

    if topology != "any":
        return [topology]
    return [n for n in TOPOLOGY_NAMES
            if n != "dual_supply" or job.supply.negative_volts is not None]
