"""Gain limits over corners where the transistor is not always active.

Reference: an evaluation written here, corner by corner — a saturated or cut-off corner has
gain 0 (it does not amplify), every other corner its own |gain|; gain_min holds when the
smallest of those is at least gain_min, gain_max when the largest is at most gain_max.
``evaluate_limits`` must give those margins from bounds reduced either way the code reduces
them: skipping undefined corners (vertex checks: ``nanmin``/``nanmax`` and a count of the
corners that are not active) or propagating them (the Monte Carlo per-board ``minimum``;
there only the "min" limits are relied on, a board with such a corner fails
``active_region`` anyway).
"""

from __future__ import annotations

import warnings

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from stockbias.analysis.constraints import Limit, evaluate_limits

GAIN_MIN, GAIN_MAX = 20.0, 300.0
LIMITS = [Limit("gain_min", "gain_abs", "min", GAIN_MIN, "V/V", "", outside_active=0.0),
          Limit("gain_max", "gain_abs", "max", GAIN_MAX, "V/V", "", outside_active=0.0)]

corners = st.lists(
    st.tuples(st.booleans(), st.floats(0.0, 1000.0, allow_nan=False)), min_size=1,
    max_size=16)


def reference(cs: list[tuple[bool, float]]) -> tuple[float, float]:
    gains = [g if active else 0.0 for active, g in cs]
    return min(gains) - GAIN_MIN, GAIN_MAX - max(gains)


@settings(max_examples=300, derandomize=True, deadline=None)
@given(cs=corners)
def test_skipping_reduction_matches_the_corner_by_corner_rule(
        cs: list[tuple[bool, float]]) -> None:
    g = np.array([gain if active else np.nan for active, gain in cs])
    n_bad = float(sum(not active for active, _ in cs))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)   # all-NaN slice: no active corner
        low = {"gain_abs": np.asarray(np.nanmin(g)), "non_active_corners": np.asarray(n_bad)}
        high = {"gain_abs": np.asarray(np.nanmax(g)), "non_active_corners": np.asarray(n_bad)}
    m = evaluate_limits(LIMITS, low, high)
    want_min, want_max = reference(cs)
    assert float(m["gain_min"]) == want_min
    assert float(m["gain_max"]) == want_max


@settings(max_examples=300, derandomize=True, deadline=None)
@given(cs=corners)
def test_propagating_reduction_gives_the_same_gain_min(cs: list[tuple[bool, float]]) -> None:
    g = np.array([gain if active else np.nan for active, gain in cs])
    bad = np.array([0.0 if active else 1.0 for active, _ in cs])
    low = {"gain_abs": np.asarray(np.min(g)), "non_active_corners": np.asarray(bad.min())}
    high = {"gain_abs": np.asarray(np.max(g)), "non_active_corners": np.asarray(bad.max())}
    m = evaluate_limits(LIMITS[:1], low, high)
    assert float(m["gain_min"]) == reference(cs)[0]
