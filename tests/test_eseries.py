"""IEC 60063 preferred-number series."""

from __future__ import annotations

import math

import eseries as reference
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from stockbias.eseries import (
    E24,
    E192,
    SERIES_NAMES,
    decade_values,
    mantissas,
    nearest,
    nearest_many,
    series_of,
    series_tolerance_pct,
    series_values,
    smallest_series,
    smallest_series_many,
)

# source: IEC 60063, as quoted in REFERENCES.md
IEC60063_QUOTED = {
    "E3": (10, 22, 47),
    "E6": (10, 15, 22, 33, 47, 68),
    "E12": (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82),
    "E24": (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62,
            68, 75, 82, 91),
}


@pytest.mark.parametrize("name", list(IEC60063_QUOTED))
def test_low_series_match_standard(name: str) -> None:
    # source: IEC 60063, as quoted in REFERENCES.md (exact integers)
    assert mantissas(name) == IEC60063_QUOTED[name]


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_matches_eseries_package(name: str) -> None:
    # source: PyPI package `eseries` (eseries.series), an independent implementation; exact
    assert mantissas(name) == tuple(reference.series(reference.ESeries[name]))


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_decade_values_match_eseries_package(name: str) -> None:
    # source: PyPI package `eseries`; its base values scaled into [1, 10), rel 1e-15
    base = reference.series(reference.ESeries[name])
    scale = 10 ** (len(str(base[0])) - 1)
    ours = decade_values(name)
    assert len(ours) == int(name[1:])
    np.testing.assert_allclose(ours, [b / scale for b in base], rtol=1e-15, atol=0.0)
    assert all(1.0 <= v < 10.0 for v in ours)
    assert list(ours) == sorted(ours)


def test_e24_historical_values() -> None:
    # source: IEC 60063, as quoted in REFERENCES.md: E24 differs from round(10^(i/24), 1 dp)
    # at exactly 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2
    formula = [round(10 ** (i / 24), 1) for i in range(24)]
    differ = [m / 10 for m, f in zip(E24, formula, strict=True) if not math.isclose(m / 10, f)]
    assert differ == [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2]


@pytest.mark.parametrize("name", ["E48", "E96", "E192"])
def test_three_figure_series_formula(name: str) -> None:
    # source: IEC 60063, as quoted in REFERENCES.md: round(10^(i/n)) to 3 significant
    # figures, except E192's 920 (formula 919)
    n = int(name[1:])
    formula = [round(100 * 10 ** (i / n)) for i in range(n)]
    differ = [(f, m) for m, f in zip(mantissas(name), formula, strict=True) if m != f]
    assert differ == ([(919, 920)] if name == "E192" else [])


def test_e192_has_920_not_919() -> None:
    # source: IEC 60063, as quoted in REFERENCES.md
    assert 920 in E192 and 919 not in E192
    assert series_of(920.0) == ("E192",)
    assert series_of(919.0) == ()


@pytest.mark.parametrize(
    ("coarse", "fine"),
    [("E3", "E6"), ("E6", "E12"), ("E12", "E24"), ("E48", "E96"), ("E96", "E192")],
)
def test_subsets(coarse: str, fine: str) -> None:
    # source: IEC 60063, as quoted in REFERENCES.md: E6 ⊂ E12 ⊂ E24, E48 ⊂ E96 ⊂ E192
    assert set(decade_values(coarse)) < set(decade_values(fine))


def test_e24_not_subset_of_e96() -> None:
    # source: IEC 60063, as quoted in REFERENCES.md: 4.7 is not E96, 4.75 is
    assert not set(decade_values("E24")) <= set(decade_values("E96"))
    assert 4.7 not in decade_values("E96")
    assert 4.75 in decade_values("E96")
    assert "E96" not in series_of(4.7e3)
    assert "E96" in series_of(4.75e3)


@pytest.mark.parametrize(
    ("name", "pct"),
    [("E3", 40.0), ("E6", 20.0), ("E12", 10.0), ("E24", 5.0), ("E48", 2.0), ("E96", 1.0),
     ("E192", 0.5)],
)
def test_tolerance(name: str, pct: float) -> None:
    # source: IEC 60063, as quoted in REFERENCES.md (E3 "wider than ±20 %": 40 % chosen,
    # which is also what the `eseries` package gives)
    assert series_tolerance_pct(name) == pct
    assert series_tolerance_pct(name) == pytest.approx(
        100 * reference.tolerance(reference.ESeries[name]), rel=1e-12)


def test_e3_tolerance_is_wider_than_e6() -> None:
    assert series_tolerance_pct("E3") > 20.0


@pytest.mark.parametrize("bad", ["E5", "E", "", "E24x", "R10"])
def test_unknown_series_names_valid_ones(bad: str) -> None:
    for call in (lambda: mantissas(bad), lambda: decade_values(bad),
                 lambda: series_tolerance_pct(bad), lambda: nearest(100.0, bad),
                 lambda: series_values(bad, 1.0, 10.0)):
        with pytest.raises(ValueError, match="E3, E6, E12, E24, E48, E96, E192"):
            call()


def test_series_name_case_insensitive() -> None:
    assert mantissas("e12") == mantissas("E12")


# --------------------------------------------------------------------------- values in a range


def test_series_values_exact_floats() -> None:
    values = series_values("E12", 1e3, 1e4)
    # exact: built from integers, so these equal the decimal literals
    assert 4700.0 in values and 8200.0 in values and 1000.0 in values and 10000.0 in values
    assert len(values) == 13
    sub_ohm = series_values("E6", 0.1, 1.0)
    assert list(sub_ohm) == [0.1, 0.15, 0.22, 0.33, 0.47, 0.68, 1.0]


def test_series_values_inclusive_and_sorted() -> None:
    assert list(series_values("E24", 4700.0, 4700.0)) == [4700.0]
    assert list(series_values("E24", 4701.0, 5099.0)) == []
    values = series_values("E96", 1.0, 1e9)
    assert len(values) == 9 * 96 + 1
    assert np.all(np.diff(values) > 0)
    assert values.dtype == np.float64


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_series_values_match_eseries_erange(name: str) -> None:
    # source: PyPI package `eseries` (eseries.erange), rel 1e-12
    ours = series_values(name, 0.5, 2.2e6)
    theirs = list(reference.erange(reference.ESeries[name], 0.5, 2.2e6))
    np.testing.assert_allclose(ours, theirs, rtol=1e-12, atol=0.0)


@pytest.mark.parametrize(("low", "high"), [(0.0, 1.0), (-1.0, 1.0), (10.0, 1.0),
                                           (1.0, float("inf")), (float("nan"), 1.0)])
def test_series_values_rejects_bad_bounds(low: float, high: float) -> None:
    with pytest.raises(ValueError, match="bounds"):
        series_values("E12", low, high)


# --------------------------------------------------------------------------- nearest, membership


@pytest.mark.parametrize(
    ("value", "name", "expected"),
    [
        (9.9, "E12", 10.0),  # crosses the decade boundary upwards
        (9.1, "E12", 10.0),  # log midpoint of 8.2 and 10 is 9.06
        (9.0, "E12", 8.2),
        (1.04, "E12", 1.0),
        (0.099, "E3", 0.1),
        (0.0455, "E6", 0.047),
        (4.6e3, "E24", 4.7e3),
        (4.8e3, "E96", 4.75e3),  # log midpoint of 4.75k and 4.87k is 4.81k
        (4.82e3, "E96", 4.87e3),
        (4.8e3, "E192", 4.81e3),
        (2.3e9, "E12", 2.2e9),
        (9.7e9, "E24", 10e9),
        (0.35, "E6", 0.33),
        (0.4, "E6", 0.47),  # log midpoint of 0.33 and 0.47 is 0.394
        (1.0, "E192", 1.0),
        (9.93, "E192", 9.88),  # log midpoint of 9.88 and 10 is 9.940
        (9.95, "E192", 10.0),
    ],
)
def test_nearest(value: float, name: str, expected: float) -> None:
    # expected: by hand from the series lists, in log distance; exact
    assert nearest(value, name) == expected


@pytest.mark.parametrize("name", SERIES_NAMES)
@given(value=st.floats(min_value=1e-3, max_value=1e10))
def test_nearest_agrees_with_eseries(name: str, value: float) -> None:
    # source: PyPI package `eseries` (find_less_than_or_equal / find_greater_than_or_equal):
    # the nearest in log distance is one of the two neighbours, and the closer in ratio
    key = reference.ESeries[name]
    below = reference.find_less_than_or_equal(key, value)
    above = reference.find_greater_than_or_equal(key, value)
    ours = nearest(value, name)
    assert math.isclose(ours, below, rel_tol=1e-12) or math.isclose(ours, above, rel_tol=1e-12)
    best = min(abs(math.log(below / value)), abs(math.log(above / value)))
    assert abs(math.log(ours / value)) <= best + 1e-12


@pytest.mark.parametrize("bad", [0.0, -4.7e3, float("nan"), float("inf")])
def test_nearest_rejects(bad: float) -> None:
    with pytest.raises(ValueError, match="finite and > 0"):
        nearest(bad, "E12")


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        (4700.0, ("E3", "E6", "E12", "E24", "E192")),  # 470 is also an E192 value
        (4750.0, ("E96", "E192")),
        (10.0, SERIES_NAMES),
        (1.0, SERIES_NAMES),
        (1e9, SERIES_NAMES),
        (1000.0, SERIES_NAMES),
        (125.0, ()),
        (123.0, ("E192",)),
        (0.47, ("E3", "E6", "E12", "E24", "E192")),
        (0.047, ("E3", "E6", "E12", "E24", "E192")),
        (2.2e9, ("E3", "E6", "E12", "E24")),
        (3.3e9, ("E6", "E12", "E24")),
        (5.1e3, ("E24",)),
        (3.0, ("E24",)),
        (3.01, ("E48", "E96", "E192")),
        (1.02e3, ("E96", "E192")),
        (1.01e3, ("E192",)),
        (9.88e5, ("E192",)),
        (9.9e5, ()),
    ],
)
def test_series_of(value: float, expected: tuple[str, ...]) -> None:
    # expected: by hand from the IEC 60063 lists above
    assert series_of(value) == expected
    assert smallest_series(value) == (expected[0] if expected else None)


def test_series_of_tolerance() -> None:
    assert series_of(4700.0 * (1 + 1e-9)) == series_of(4700.0)
    assert series_of(4700.0 * (1 + 1e-3)) == ()
    assert series_of(4700.0 * (1 + 1e-3), rel_tol=2e-3)[:4] == ("E3", "E6", "E12", "E24")


@pytest.mark.parametrize("name", SERIES_NAMES)
@given(index=st.integers(min_value=0, max_value=191), decade=st.integers(min_value=-3, max_value=9))
def test_every_series_value_is_found(name: str, index: int, decade: int) -> None:
    values = mantissas(name)
    m = values[index % len(values)]
    value = m * 10.0 ** (decade - len(str(m)) + 1)
    assert name in series_of(value)
    assert nearest(value, name) == pytest.approx(value, rel=1e-12)


# -- the array versions: element by element the same as the scalar functions -----------------

def _probe_values() -> np.ndarray:
    """Every series value from 1 mΩ to 10 GΩ, those of 0.1 Ω…1 kΩ nudged, random fill, ties."""
    exact = np.unique(np.concatenate([series_values(n, 1e-3, 1e10) for n in SERIES_NAMES]))
    near = np.unique(np.concatenate([series_values(n, 0.1, 1e3) for n in SERIES_NAMES]))
    rng = np.random.default_rng(60063)
    fill = 10.0 ** rng.uniform(-3.0, 10.0, 2_000)
    # geometric midpoints of neighbouring E3 values: exact ties in ratio (lower one wins)
    e3 = series_values("E3", 1e-3, 1e10)
    mids = np.sqrt(e3[:-1] * e3[1:])
    return np.concatenate([exact, near * (1 + 1e-7), near * (1 - 1e-7), near * 1.004,
                           fill, mids, [1e-30, 1e30, 999.9999999999, 1000.0000000001]])


@pytest.mark.parametrize("name", SERIES_NAMES)
def test_nearest_many_equals_nearest_everywhere(name: str) -> None:
    # source: exhaustive evaluation of the scalar nearest() written here, exact equality
    values = _probe_values()
    expected = np.array([nearest(v, name) for v in values])
    np.testing.assert_array_equal(nearest_many(values, name), expected)


def test_smallest_series_many_equals_smallest_series() -> None:
    # source: exhaustive evaluation of the scalar smallest_series(), exact equality
    values = _probe_values()
    assert smallest_series_many(values) == [smallest_series(v) for v in values]


def test_array_versions_keep_shape_and_take_empty_input() -> None:
    grid = np.array([[4700.0, 4750.0], [125.0, 0.47]])
    # expected: by hand from the IEC 60063 lists above
    np.testing.assert_array_equal(nearest_many(grid, "E12"), [[4700.0, 4700.0], [120.0, 0.47]])
    assert smallest_series_many(grid) == ["E3", "E96", None, "E3"]
    assert nearest_many([], "E24").shape == (0,)
    assert smallest_series_many([]) == []


@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf])
def test_array_versions_reject_what_the_scalar_rejects(bad: float) -> None:
    with pytest.raises(ValueError, match="finite and > 0"):
        nearest_many([4700.0, bad], "E12")
    with pytest.raises(ValueError, match="finite and > 0"):
        smallest_series_many([bad])


def test_both_ways_of_smallest_series_many_equal_smallest_series() -> None:
    # source: exhaustive evaluation of the scalar smallest_series(), exact equality; the
    # plain-Python way (short lists before numpy is loaded) and the array way
    from stockbias.eseries import _smallest_series_arrays, _smallest_series_plain

    values = [float(v) for v in np.asarray(_probe_values(), dtype=float).ravel()]
    expected = [smallest_series(v) for v in values]
    assert _smallest_series_plain(values, 1e-6) == expected
    assert _smallest_series_arrays(values, 1e-6) == expected
    with pytest.raises(ValueError, match="finite and > 0"):
        _smallest_series_plain([4700.0, math.nan], 1e-6)
