"""The design's result path does only the work its outputs show, with the same values.

* a design's full check leaves the RSS spreads and stability factors unworked until read
  (no output of ``design`` shows them), and ``Design.to_dict`` carries the check's own
  figures unchanged;
* the searches' NaN-to-lowest conversion equals ``numpy.nan_to_num(x, nan=-inf)``;
* ``json_out.clean`` gives plain values the same treatment as before its fast path.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from stockbias.analysis.box_search import nan_low
from stockbias.job import load_job
from stockbias.render.json_out import clean
from stockbias.search.defaults import with_design_defaults
from stockbias.search.design import design
from stockbias.stock_io import read_inventory

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"


def test_design_leaves_spreads_unworked_and_shows_the_checks_figures() -> None:
    job, _ = with_design_defaults(load_job(SAMPLES / "line_driver_job.toml"))
    result = design(job, read_inventory(SAMPLES / "workshop_drawers.csv"), top=2)
    assert result.status == "optimal" and len(result.designs) == 2
    for d in result.designs:
        shown = d.to_dict()
        assert d.check._spread_cache == []      # to_dict did not work them out either
        full = d.check.to_dict()                # reads them (the check command's view)
        assert d.check._spread_cache != []
        for key in ("worst_case", "constraints", "nominal", "purpose"):
            assert shown[key] == full[key]      # expected: the check's own dictionary
        assert shown["ok"] is full["ok"] is True


@pytest.mark.parametrize("values", [
    [math.nan, math.inf, -math.inf, 1.5, -0.0, 0.0, 1e308, -2.5e-300],
    [[math.nan, 2.0], [-math.inf, 3.0]],
    [],
])
def test_nan_low_equals_numpy_nan_to_num(values: list) -> None:
    x = np.array(values, dtype=float)
    # expected: numpy's own nan_to_num with nan=-inf (±inf to ± the largest float)
    want = np.nan_to_num(x, nan=-np.inf)
    got = nan_low(x)
    assert got.shape == want.shape and got.dtype == want.dtype
    np.testing.assert_array_equal(got, want)
    assert np.array_equal(np.signbit(got), np.signbit(want))   # −0.0 stays −0.0


def test_clean_plain_and_numpy_values() -> None:
    payload = {"a": math.nan, "b": [1, 2.5, True, None, "x", math.inf], 3: (1, 2),
               "c": np.float64(2.0), "d": np.array([1.0, np.nan]), "e": {"f": np.int64(7)},
               "g": np.bool_(True), "h": {2, 1}}
    # expected: by hand from the rules (non-finite → None, numpy → Python, tuples and
    # sets → lists, keys → str)
    assert clean(payload) == {"a": None, "b": [1, 2.5, True, None, "x", None], "3": [1, 2],
                              "c": 2.0, "d": [1.0, None], "e": {"f": 7}, "g": True,
                              "h": [1, 2]}
    out = clean(payload)
    assert type(out["c"]) is float and type(out["e"]["f"]) is int and type(out["g"]) is bool


@pytest.mark.parametrize("peak", [0.05, 0.2, 0.5, 0.8, 0.95])
def test_golden_maximum_finds_the_peak_on_either_side(peak: float) -> None:
    from stockbias.analysis.box_search import golden_maximum

    a, b = np.zeros(2), np.array([1.0, 2.0])
    # expected: the vertex of −(t − peak)² (hand calculation), within the final bracket
    # (1 or 2 × 0.618^30 wide)
    got = golden_maximum(lambda t: -(t - peak) ** 2, a, b, iterations=30)
    np.testing.assert_allclose(got, [peak, peak], atol=1e-5)
