"""The command line never ends in a traceback: random job files and option values.

Structure-aware generation: real sections and keys (and a few unknown ones) with
values of every TOML type, engineering-notation strings right and wrong, extreme
numbers, wrong nesting; random ``--seed``, ``--top``, ``--time-limit``,
``--samples`` and ``-v`` values.  Every run must end with exit 0, 1 or 2 and
never print a traceback or reach the internal-error exit 3 (that would be an
exception nobody anticipated).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from stockbias.job import _SECTIONS

from .job_text import ROLES_VALUES, job_documents, plausible_jobs

ROOT = Path(__file__).resolve().parents[2]
DRAWERS = ROOT / "inventory_samples" / "workshop_drawers.csv"
VALID_VALUES = "R1=CF-47K,R2=CF-10K,RC=CF-4K7,RE=CF-1K0"

runner = CliRunner()


def _invoke(args: list[str]):
    from stockbias.cli.app import app

    return runner.invoke(app, args)


def _assert_clean(result, args: list[str]) -> None:
    out = result.output
    assert "Traceback" not in out, (args, out)
    assert "internal error" not in out, (args, out)
    assert result.exit_code in (0, 1, 2), (args, result.exit_code, out, result.exception)
    if result.exit_code == 2:
        # one line on stderr naming the problem
        assert out.strip(), args


_number_text = st.one_of(
    st.integers(min_value=-(10**30), max_value=10**30).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(["-1", "0", "1", "2**64", "18446744073709551617", "1e999", "-1e999",
                     "nan", "inf", "1e" + "9" * 5000, "9" * 5000, "0x10", " 3 ", "", "1,5",
                     "½", "٣", "1_000", "+7", "0.0000001"]),
    st.text(max_size=12),
)

_options = st.fixed_dictionaries({}, optional={
    "--seed": _number_text,
    "--samples": _number_text,
    "--tolerance": _number_text,
})

_value_text = st.one_of(
    st.just(VALID_VALUES),
    st.lists(st.sampled_from(ROLES_VALUES), min_size=1, max_size=5).map(",".join),
    st.text(alphabet="R1ECB2=+|,.k0Meu- ", max_size=20),
    st.text(max_size=20),
)


def _write(tmp: Path, text: str, bom: bool = False) -> Path:
    path = tmp / "job.toml"
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8", "surrogatepass"))
    return path


@settings(max_examples=150, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture,
                                 HealthCheck.data_too_large])
@given(doc=job_documents(), bom=st.booleans())
def test_check_with_random_job_files(tmp_path: Path, doc: str, bom: bool) -> None:
    job = _write(tmp_path, doc, bom)
    args = ["check", str(job), "-i", str(DRAWERS), "-v", VALID_VALUES, "-t", "QN-GP40",
            "--samples", "50", "--json"]
    _assert_clean(_invoke(args), args)


@settings(max_examples=100, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(doc=plausible_jobs())
def test_check_with_plausible_extremes(tmp_path: Path, doc: str) -> None:
    job = _write(tmp_path, doc)
    args = ["check", str(job), "-i", str(DRAWERS), "-v", VALID_VALUES, "-t", "QN-GP40",
            "--samples", "50", "--json"]
    _assert_clean(_invoke(args), args)


@settings(max_examples=15, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(doc=plausible_jobs())
def test_design_with_plausible_extremes(tmp_path: Path, doc: str) -> None:
    job = _write(tmp_path, doc)
    args = ["design", str(job), "-i", str(DRAWERS), "--time-limit", "1", "--top", "2",
            "--json"]
    _assert_clean(_invoke(args), args)


@settings(max_examples=120, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(options=_options, values=st.lists(_value_text, min_size=1, max_size=3),
       transistor=st.sampled_from(["QN-GP40", "QP-GP40", "CF-10K", "", "QN-NONE", "-1"]))
def test_check_with_random_options(options: dict[str, str], values: list[str],
                                   transistor: str) -> None:
    args = ["check", str(ROOT / "inventory_samples" / "line_driver_job.toml"),
            "-i", str(DRAWERS), "-t", transistor, "--json"]
    for v in values:
        args += ["-v", v]
    for name, text in options.items():
        args += [name, text]
    if "--samples" not in options:
        args += ["--samples", "50"]
    result = _invoke(args)
    _assert_clean(result, args)


@settings(max_examples=40, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(top=_number_text, limit=st.one_of(_number_text, st.just("0.5")))
def test_design_with_random_top_and_time_limit(top: str, limit: str) -> None:
    args = ["design", str(ROOT / "inventory_samples" / "line_driver_job.toml"),
            "-i", str(DRAWERS), "--top", top, "--time-limit", limit, "--json"]
    result = _invoke(args)
    _assert_clean(result, args)
    try:
        seconds = float(limit)
    except ValueError:
        return
    if not (math.isfinite(seconds) and 0.1 <= seconds <= 86400):
        assert result.exit_code == 2, (args, result.output)   # the option's stated range


@pytest.mark.parametrize("section", sorted(_SECTIONS))
def test_every_section_refuses_a_plain_number(tmp_path: Path, section: str) -> None:
    job = _write(tmp_path, f'{section} = 5\n[supply]\nvolts = 12\n' if section != "supply"
                 else 'supply = 5\n[target]\nic = "1m"\nic_window_pct = 10\n')
    args = ["check", str(job), "-i", str(DRAWERS), "-v", VALID_VALUES, "-t", "QN-GP40"]
    result = _invoke(args)
    _assert_clean(result, args)
    assert result.exit_code == 2
    assert f"key '{section}'" in result.output
