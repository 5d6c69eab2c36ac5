"""The job reader: any text gives a Job inside the plausible ranges or one JobError."""

from __future__ import annotations

import math

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from stockbias.errors import JobError
from stockbias.job import Job, parse_job
from stockbias.job_ranges import PLAUSIBLE

from .job_text import job_documents, plausible_jobs

_SETTINGS = settings(max_examples=400, derandomize=True, deadline=None,
                     suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def _numbers(job: Job) -> dict[str, float]:
    """Every value of the job that has a plausible range, by key (stages: all of them)."""
    out: list[tuple[str, float | None]] = [
        ("volts", job.supply.volts), ("tolerance_pct", job.supply.tolerance_pct),
        ("negative_volts", job.supply.negative_volts),
        ("negative_tolerance_pct", job.supply.negative_tolerance_pct),
        ("ambient_min_c", job.environment.ambient_min_c),
        ("ambient_max_c", job.environment.ambient_max_c),
        ("quantity", job.build.quantity),
        ("default_tolerance_pct", job.build.default_tolerance_pct),
        ("top", job.search.top), ("time_limit_s", job.search.time_limit_s),
        ("seed", job.search.seed),
    ]
    if math.isfinite(job.small_signal.load):        # inf: no load given
        out.append(("load", job.small_signal.load))
    for stage in job.stages:
        t, lim = stage.target, stage.limits
        out += [("ic_min", t.ic_min), ("ic_max", t.ic_max), ("vce_min", t.vce_min),
                ("swing_pk", t.swing_pk), ("gain_min", t.gain_min), ("gain_max", t.gain_max),
                ("yield_min", None if t.yield_min is None else 100 * t.yield_min),
                ("supply_power_max", lim.supply_power_max),
                ("resistor_derating", lim.resistor_derating), ("tj_max", lim.tj_max),
                ("derating_knee_c", lim.derating_knee_c),
                ("derating_zero_c", lim.derating_zero_c)]
    return {k: v for k, v in out if v is not None}


def _assert_plausible(job: Job) -> None:
    for key, value in _numbers(job).items():
        if key in ("ic_min", "ic_max"):
            # ic ± window may reach past the ends of the ic range by the window
            assert 0 < value <= PLAUSIBLE["ic"].high * 2, (key, value)
            continue
        assert PLAUSIBLE[key].contains(value), (key, value)


@_SETTINGS
@given(text=job_documents())
def test_mutated_jobs_read_or_fail_with_one_job_error(text: str) -> None:
    try:
        job = parse_job(text, "job.toml")
    except JobError as exc:
        assert exc.file == "job.toml"
        assert "\n" not in exc.one_line()
        assert len(exc.one_line()) < 600
        return
    _assert_plausible(job)


@_SETTINGS
@given(text=plausible_jobs())
def test_plausible_values_read_back_unchanged(text: str) -> None:
    try:
        job = parse_job(text, "job.toml")
    except JobError as exc:
        # only the relations between keys may refuse a job made of plausible values
        assert any(word in exc.message for word in ("below", "above")), exc.one_line()
        return
    _assert_plausible(job)


@settings(max_examples=300, derandomize=True, deadline=None)
@given(text=st.text(alphabet=st.sampled_from(list("[]{}=\"'.,#\n 19eE+-_xabc\ufeff")),
                    max_size=60))
def test_any_text_is_a_job_or_a_job_error(text: str) -> None:
    # any other exception fails the test
    try:
        job = parse_job(text, "job.toml")
    except JobError as exc:
        assert exc.file == "job.toml" and "\n" not in exc.one_line()
        return
    _assert_plausible(job)
