"""Streamed Monte Carlo: counts and histograms per chunk, one random stream per block of the
fixed grid, so a result depends on the seed and sample count alone."""

from __future__ import annotations

import numpy as np
import pytest
from test_worst_case import make_spec

from stockbias.analysis.constraints import Limit
from stockbias.analysis.histogram import Histogram
from stockbias.analysis.montecarlo import STREAM_BLOCK, board_values, monte_carlo
from stockbias.executor import InProcess, LocalProcesses, make_executor

LIMITS = [Limit("ic_min", "ic", "min", 1.05e-3, "A", ""),
          Limit("ic_max", "ic", "max", 1.45e-3, "A", ""),
          Limit("vce_min", "vce", "min", 2.0, "V", "")]
SAMPLES = 5 * STREAM_BLOCK + 333        # not a multiple of the block or of either chunk


def _same(a, b) -> None:
    assert a.yield_ == b.yield_
    assert a.failing == b.failing
    assert a.ic_window_boards == b.ic_window_boards
    assert np.array_equal(a.ic.counts, b.ic.counts) and a.ic.min == b.ic.min
    assert np.array_equal(a.vce.counts, b.vce.counts) and a.vce.max == b.vce.max
    assert np.array_equal(a.qpoint.counts, b.qpoint.counts)


def test_the_result_does_not_depend_on_the_chunk_size() -> None:
    spec = make_spec("divider")
    small = monte_carlo(spec, LIMITS, SAMPLES, 11, chunk=1_000)
    large = monte_carlo(spec, LIMITS, SAMPLES, 11, chunk=100_000)
    _same(small, large)
    assert 0.0 < small.yield_.yield_ < 1.0          # the case bites: some boards fail


def test_the_result_does_not_depend_on_the_number_of_workers() -> None:
    spec = make_spec("divider")
    one = monte_carlo(spec, LIMITS, SAMPLES, 4, chunk=2 * STREAM_BLOCK, executor=InProcess())
    two = monte_carlo(spec, LIMITS, SAMPLES, 4, chunk=2 * STREAM_BLOCK,
                      executor=LocalProcesses(2))
    _same(one, two)


def test_counts_equal_the_boards_drawn_one_by_one() -> None:
    # Reference: the same boards evaluated as arrays, counted with numpy (not the tally code)
    spec = make_spec("divider")
    mc = monte_carlo(spec, LIMITS, SAMPLES, 8, chunk=3 * STREAM_BLOCK)
    q, ok = board_values(spec, LIMITS, SAMPLES, 8)
    assert ok.size == SAMPLES and mc.yield_.samples == SAMPLES
    assert mc.yield_.passed == int(ok.sum())
    ic = q["ic"]
    assert mc.failing.get("ic_max", 0) == int((ic.max(axis=1) > 1.45e-3).sum())
    inside = ((ic >= 1.05e-3) & (ic <= 1.45e-3)).all(axis=1)
    assert mc.ic_window_boards == int(inside.sum())
    assert mc.ic.total == ic.size and mc.ic.min == ic.min() and mc.ic.max == ic.max()
    # percentiles from the histogram agree with numpy's on the raw values to one bin width
    for p in (0.135, 50.0, 99.865):
        assert mc.ic.percentile(p) == pytest.approx(np.percentile(ic, p),
                                                    abs=2 * mc.ic.resolution)


def test_another_stream_or_seed_draws_other_boards() -> None:
    spec = make_spec("divider")
    a = monte_carlo(spec, LIMITS, 4096, 3)
    b = monte_carlo(spec, LIMITS, 4096, 3, stream=1)
    c = monte_carlo(spec, LIMITS, 4096, 4)
    assert not np.array_equal(a.ic.counts, b.ic.counts)
    assert not np.array_equal(a.ic.counts, c.ic.counts)
    # a longer run starts with the same boards (the block grid is fixed)
    q_short, _ = board_values(spec, LIMITS, STREAM_BLOCK, 3)
    q_long, _ = board_values(spec, LIMITS, 3 * STREAM_BLOCK, 3)
    assert np.array_equal(q_short["ic"], q_long["ic"][:STREAM_BLOCK])
    q_mid, _ = board_values(spec, LIMITS, STREAM_BLOCK, 3, first_board=STREAM_BLOCK)
    assert np.array_equal(q_mid["ic"], q_long["ic"][STREAM_BLOCK:2 * STREAM_BLOCK])


def test_histogram_counts_percentiles_and_merge() -> None:
    # Reference values by hand calculation: 0..99 on 10 bins of width 10
    h = Histogram.empty(0.0, 100.0, 10).add(np.arange(100.0))
    assert h.counts.tolist() == [10] * 10 and h.resolution == 10.0
    assert h.percentile(50) == pytest.approx(50.0, abs=h.resolution)
    more = Histogram.empty(0.0, 100.0, 10).add(np.array([-5.0, 150.0, np.nan, 100.0]))
    both = h.merge(more)
    assert (both.below, both.above, both.undefined, both.counts[-1]) == (1, 1, 1, 11)
    assert (both.min, both.max, both.total) == (-5.0, 150.0, 104)
    assert both.percentile(0) == -5.0 and both.percentile(100) == 150.0
    edges, counts = both.rebinned(5)
    assert counts.tolist() == [20, 20, 20, 20, 21] and edges[-1] == 100.0
    with pytest.raises(ValueError, match="different edges"):
        h.merge(Histogram.empty(0.0, 50.0, 10))


def test_make_executor_choices() -> None:
    assert isinstance(make_executor(1), InProcess)
    assert make_executor(3).workers == 3
    assert make_executor(None).workers >= 1


def test_check_gives_the_same_answer_on_one_and_two_workers() -> None:
    import json

    from typer.testing import CliRunner

    from stockbias.cli.app import app
    from stockbias.samples import sample_path

    runner = CliRunner()
    args = ["check", str(sample_path("line_driver_job.toml")), "-i",
            str(sample_path("workshop_drawers.csv")), "-v",
            "R1=MF-47K5,R2=MF-10K0,RE=CF-1K0,RC=CF-3K3", "-t", "QN-LB2", "--samples",
            "210000", "--seed", "5", "--json"]
    one = runner.invoke(app, [*args, "--workers", "1"])
    two = runner.invoke(app, [*args, "--workers", "2"])
    assert one.exit_code == two.exit_code == 0, one.output + two.output
    mc1, mc2 = json.loads(one.stdout)["monte_carlo"], json.loads(two.stdout)["monte_carlo"]
    assert mc1 == mc2 and mc1["samples"] == 210000


def test_check_refuses_a_malformed_cluster_address() -> None:
    from typer.testing import CliRunner

    from stockbias.cli.app import app
    from stockbias.samples import sample_path

    res = CliRunner().invoke(app, ["check", str(sample_path("line_driver_job.toml")), "-i",
                                   str(sample_path("workshop_drawers.csv")), "-v",
                                   "R1=MF-47K5,R2=MF-10K0,RE=CF-1K0,RC=CF-3K3", "-t", "QN-LB2",
                                   "--cluster", "localhost:8786"])
    assert res.exit_code == 2
    assert "tcp://HOST:PORT" in res.output and "localhost:8786" in res.output
