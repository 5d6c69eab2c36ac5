"""Job files (TOML, DESIGN §3): defaults, notation, boards, and every contradiction named."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from stockbias.errors import JobError
from stockbias.job import _SECTIONS, load_job, parse_job
from stockbias.job_ranges import PLAUSIBLE, implausible

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"
BASE = '[supply]\nvolts = 12\ntolerance_pct = 5\n[target]\nic = "1.5 mA"\nic_window_pct = 10\n'


def test_sample_job_loads() -> None:
    job = load_job(SAMPLES / "line_driver_job.toml")
    stage = job.stage
    assert stage.target.ic_min == pytest.approx(1.05e-3)  # 1.5 mA − 30 %
    assert stage.target.ic_max == pytest.approx(1.95e-3)  # 1.5 mA + 30 %
    assert stage.target.vce_min == 3.0
    # its purpose (source: the job file)
    assert (stage.target.swing_pk, stage.target.gain_min, stage.target.gain_max) == (2.0, 1.5,
                                                                                    4.0)
    assert stage.target.rin_min == pytest.approx(5e3)
    assert job.small_signal.re_bypassed is False
    assert stage.limits.supply_power_max == pytest.approx(0.06)
    assert job.supply.max_ce_voltage == pytest.approx(12.6)
    assert job.small_signal.load == 10e3
    assert (job.environment.ambient_min_c, job.environment.ambient_max_c) == (0.0, 55.0)
    assert job.build.quantity == 10


def test_defaults() -> None:
    job = parse_job(BASE)
    assert job.search.topology == "divider"
    assert job.search.model == "constant_vbe"
    assert job.search.objectives == ("cost", "part_count", "distinct_values", "ic_margin")
    assert job.stage.limits.resistor_derating == 0.5   # DESIGN §2 default design derating
    assert job.environment.nominal_c == 25.0
    assert math.isinf(job.small_signal.load)
    assert job.build.default_tolerance_pct == 5.0


def test_nominal_temperature_outside_range_is_the_middle() -> None:
    job = parse_job(BASE + "[environment]\nambient_min_c = 40\nambient_max_c = 80\n")
    assert job.environment.nominal_c == 60.0   # DESIGN §3: middle when 25 °C is excluded


def test_dual_supply_max_ce_voltage() -> None:
    job = parse_job('[supply]\nvolts = 9\ntolerance_pct = 10\nnegative_volts = "-6 V"\n'
                    '[target]\nic_min = "1m"\nic_max = "2m"\n[search]\ntopology = "dual_supply"\n')
    assert job.supply.max_ce_voltage == pytest.approx(9.9 + 6.6)   # VCC + |VEE| at +10 %


def test_board_file() -> None:
    text = ('[supply]\nvolts = 15\n[build]\nquantity = 4\n'
            '[[stage]]\nname = "input"\ntransistor = "Q7"\n[stage.target]\nic = "0.5m"\n'
            'ic_window_pct = 15\n[stage.values]\nR1 = "100k"\nRE = "R-1K"\n'
            '[[stage]]\nname = "driver"\ntopology = "collector_feedback"\n[stage.target]\n'
            'ic_min = "4 mA"\nic_max = "6 mA"\n[stage.limits]\ntj_max = 110\n')
    job = parse_job(text)
    assert job.is_board
    assert [s.name for s in job.stages] == ["input", "driver"]
    assert job.stages[0].values == {"R1": "100k", "RE": "R-1K"}
    assert job.stages[0].transistor == "Q7"
    assert job.stages[1].topology == "collector_feedback"
    assert job.stages[1].limits.tj_max == 110.0
    assert job.stages[1].target.ic_max == pytest.approx(6e-3)


@pytest.mark.parametrize(
    ("text", "line", "key", "bad", "words"),
    [
        ('[supply]\nvolts = "12 A"\n[target]\nic_min=1e-3\nic_max=2e-3\n', 2, "supply.volts",
         "12 A", "unit 'A'"),
        ('[supply]\nvolts = -5\n[target]\nic_min=1e-3\nic_max=2e-3\n', 2, "supply.volts", "-5",
         "positive"),
        (BASE + 'ic_min = "1m"\n', 7, "target.ic_min", "1m", "not both"),
        (BASE.replace("ic_window_pct = 10", "ic_windw_pct = 10"), 6, "target.ic_windw_pct",
         "ic_windw_pct", "did you mean 'ic_window_pct'"),
        ('[supply]\nvolts=12\n[target]\nic_min="2m"\nic_max="1m"\n', 4, "target.ic_min", "2m",
         "below ic_max"),
        (BASE + "gain_min = 50\ngain_max = 20\n", 7, "target.gain_min", "50", "below gain_max"),
        (BASE + "yield_min = 0.997\n", 7, "target.yield_min", "0.997",
         "yield_min is a percent (at least 50, below 100), not a fraction: for 99.7 % write "
         "yield_min = 99.7"),
        (BASE + "yield_min = 1\n", 7, "target.yield_min", "1", "write yield_min = 99.9"),
        (BASE + "yield_min = 30\n", 7, "target.yield_min", "30", "at least 50 % and below 100 %"),
        (BASE + 'yield_min = "100 %"\n', 7, "target.yield_min", "100 %", "below 100 %"),
        (BASE + "[environment]\nambient_min_c = 80\nambient_max_c = 20\n", 8,
         "environment.ambient_min_c", "80", "above ambient_max_c"),
        (BASE + '[search]\ntopology = "darlington"\n', 8, "search.topology", "darlington",
         "unknown topology"),
        (BASE + '[search]\nobjectives = ["cost", "beauty"]\n', 8, "search.objectives", "beauty",
         "unknown objective"),
        (BASE + '[search]\ntopology = "dual_supply"\n', 8, "search.topology", "dual_supply",
         "negative_volts"),
        (BASE + "[build]\nquantity = 2.5\n", 8, "build.quantity", "2.5", "whole number"),
        (BASE + "[limits]\nresistor_derating = 2\n", 8, "limits.resistor_derating", "2",
         "at most 1"),
        (BASE + "[targt]\nx = 1\n", 7, "targt", "targt", "did you mean [target]"),
        ('[supply]\nvolts = 12\nnegative_volts = 6\n[target]\nic_min=1e-3\nic_max=2e-3\n', 3,
         "supply.negative_volts", "6", "signed negative"),
    ],
)
def test_errors_name_line_key_and_text(text: str, line: int, key: str, bad: str,
                                       words: str) -> None:
    with pytest.raises(JobError) as info:
        parse_job(text, "job.toml")
    err = info.value
    assert (err.file, err.line, err.column, err.text) == ("job.toml", line, key, bad)
    assert words in err.message
    assert err.one_line().startswith(f"job.toml:{line}: key '{key}': ")


def test_board_stage_errors_point_at_the_right_stage() -> None:
    text = ('[supply]\nvolts = 15\n'
            '[[stage]]\nname = "a"\n[stage.target]\nic_min = "1m"\nic_max = "2m"\n'
            '[[stage]]\nname = "b"\n[stage.target]\nic_min = "3m"\nic_max = "2m"\n')
    with pytest.raises(JobError) as info:
        parse_job(text, "board.toml")
    assert info.value.line == 11
    assert info.value.text == "3m"


def test_missing_target_and_bad_toml() -> None:
    with pytest.raises(JobError, match="needs a \\[target\\]"):
        parse_job("[supply]\nvolts = 12\n")
    with pytest.raises(JobError, match="not valid TOML") as info:
        parse_job("[supply]\nvolts = = 12\n")
    assert info.value.line == 2


def test_mains_derived_flag_and_caution() -> None:
    from stockbias.analysis.check import cautions

    job = parse_job(BASE.replace("tolerance_pct = 5\n",
                                 "tolerance_pct = 5\nmains_derived = true\n"))
    assert job.supply.mains_derived
    assert any("mains" in c for c in cautions(job, [], {}))
    with pytest.raises(JobError, match="true or false"):
        parse_job(BASE.replace("tolerance_pct = 5\n",
                               'tolerance_pct = 5\nmains_derived = "yes"\n'))


# --- plausible ranges (job_ranges.PLAUSIBLE) ---------------------------------------------

_SECTION_OF = {key: section for section, keys in _SECTIONS.items() for key in keys}
# the keys a value needs beside it to be read at all
_COMPANIONS = {"ic_min": "ic_max = 10", "ic_max": "ic_min = 1e-7", "ic": "ic_window_pct = 30",
               "ic_window_pct": 'ic = "1 mA"'}


def _job_with(key: str, value: str) -> str:
    section = _SECTION_OF[key]
    body = {"supply": ["volts = 12"], "target": []}
    if section != "target" or key not in _COMPANIONS:
        body["target"] = ['ic = "1 mA"', "ic_window_pct = 30"]
    else:
        body["target"] = [_COMPANIONS[key]]
    body.setdefault(section, [])
    body[section] = [line for line in body[section] if not line.startswith(f"{key} ")]
    body[section].append(f"{key} = {value}")
    return "".join(f"[{s}]\n" + "".join(f"{line}\n" for line in lines)
                   for s, lines in body.items())


def _outside(key: str) -> list[float]:
    """The nearest values beyond each end of the range (the end itself where it is open)."""
    rng = PLAUSIBLE[key]
    if rng.whole:
        return [rng.low - 1, rng.high + 1]
    low = rng.low if rng.low_open else math.nextafter(rng.low, -math.inf)
    high = rng.high if rng.high_open else math.nextafter(rng.high, math.inf)
    return [low, high]


def _text(key: str, value: float) -> str:
    return str(int(value)) if PLAUSIBLE[key].whole else repr(float(value))


@pytest.mark.parametrize("key", sorted(PLAUSIBLE))
def test_values_just_outside_the_plausible_range_are_refused(key: str) -> None:
    # exhaustive over the table: the next float beyond each closed end, an open end itself
    for value in _outside(key):
        text = _job_with(key, _text(key, value))
        with pytest.raises(JobError) as info:
            parse_job(text, "job.toml")
        err = info.value
        line = text.splitlines().index(f"{key} = {_text(key, value)}") + 1
        assert (err.line, err.column) == (line, f"{_SECTION_OF[key]}.{key}"), err.one_line()
        assert err.text == _text(key, value)
        assert key in err.message and "must be" in err.message


# the closed ends a job can use alone (the others need a partner key to stay consistent)
_ALONE = sorted(k for k in PLAUSIBLE if k not in ("derating_knee_c", "derating_zero_c"))


@pytest.mark.parametrize("key", _ALONE)
def test_the_closed_ends_of_a_plausible_range_are_accepted(key: str) -> None:
    rng = PLAUSIBLE[key]
    ends = [v for v, is_open in ((rng.low, rng.low_open), (rng.high, rng.high_open))
            if not is_open]
    if key in ("ic_min", "ic_max"):   # the partner sits at the other end
        ends = [rng.low] if key == "ic_min" else [rng.high]
    for value in ends:
        parse_job(_job_with(key, _text(key, value)), "job.toml")   # no error


def test_plausible_ranges_in_words() -> None:
    assert implausible("volts", 12.0) is None
    assert implausible("no_such_key", 1e308) is None
    assert implausible("volts", 1e308).startswith("volts must be at least 100 mV and at most "
                                                  "1 kV (")
    assert implausible("quantity", 2.5) == ("quantity must be a whole number, at least 1 and "
                                            "at most 10000000")
    assert implausible("time_limit_s", 0.0).startswith("time_limit_s must be more than 0 s")
    assert implausible("ic", math.nan) is not None
    assert implausible("ic", math.inf) is not None


@pytest.mark.parametrize(
    ("text", "line", "key", "bad", "words"),
    [
        (BASE.replace("volts = 12", "volts = 1e308"), 2, "supply.volts", "1e+308",
         "at most 1 kV"),
        (BASE + "[environment]\nambient_min_c = -273.15\n", 8, "environment.ambient_min_c",
         "-273.15", "at least -60 °C"),
        (BASE.replace('"1.5 mA"', "1e-300"), 5, "target.ic", "1e-300", "at least 100 nA"),
        (BASE.replace('"1.5 mA"', '"1e-99999 A"'), 5, "target.ic", "1e-99999 A",
         "at least 100 nA"),
        (BASE + "[search]\nseed = 1.5\n", 8, "search.seed", "1.5", "whole number"),
        (BASE + "[search]\ntop = 1" + "0" * 400 + "\n", 8, "search.top",
         "1000000000000000000000000000000000000000… (401 characters)", "beyond any float"),
        (BASE + "[limits]\ntj_max = 25\n", 8, "limits.tj_max", "25", "more than 25 °C"),
        (BASE + '[search]\nobjectives = ["cost", 5]\n', 8, "search.objectives", "5",
         "unknown objective"),
    ],
)
def test_implausible_and_ill_typed_values(text: str, line: int, key: str, bad: str,
                                          words: str) -> None:
    with pytest.raises(JobError) as info:
        parse_job(text, "job.toml")
    err = info.value
    assert (err.file, err.line, err.column, err.text) == ("job.toml", line, key, bad)
    assert words in err.message


@pytest.mark.parametrize(
    ("text", "line", "words"),
    [
        (BASE + "[build]\nquantity = 1" + "0" * 5000 + "\n", 8, "thousands of digits"),
        (BASE + "[search]\nseed = 0x" + "f" * 5000 + "\n", 8, "thousands of digits"),
        (BASE + "[build]\nquantity = " + "[" * 5000 + "]" * 5000 + "\n", 8, "nested too deeply"),
    ],
)
def test_inputs_python_refuses_to_read_are_job_errors(text: str, line: int, words: str
                                                       ) -> None:
    with pytest.raises(JobError) as info:
        parse_job(text, "job.toml")
    assert (info.value.line, info.value.file) == (line, "job.toml")
    assert words in info.value.one_line()


def test_stage_subtables_of_the_wrong_type() -> None:
    head = '[supply]\nvolts = 15\n[[stage]]\nname = "a"\n'
    for sub, value in (("target", "5"), ("limits", '"x"'), ("values", "[1]")):
        with pytest.raises(JobError) as info:
            parse_job(head + f"{sub} = {value}\n", "board.toml")
        assert (info.value.line, info.value.column) == (5, f"stage.{sub}")
        assert f"[stage.{sub}]" in info.value.message


def test_byte_order_mark_is_ignored(tmp_path: Path) -> None:
    path = tmp_path / "job.toml"
    path.write_bytes(b"\xef\xbb\xbf" + BASE.encode("utf-8"))
    job = load_job(path)
    assert job.supply.volts == 12.0
    assert job.stage.target.ic_min == pytest.approx(1.35e-3)   # 1.5 mA − 10 %
    assert parse_job("\ufeff" + BASE).supply.volts == 12.0


def test_every_numeric_job_key_has_a_plausible_range() -> None:
    import stockbias.job as job_module

    # [keep_purpose] percentages are bounded by the reader's own table of them
    own = set(getattr(job_module, "_KEEP_RANGES", {}))
    missing = [f"[{section}] {key}" for section, keys in _SECTIONS.items()
               for key, unit in keys.items()
               if unit is not None and key not in PLAUSIBLE and key not in own]
    assert missing == []


@pytest.mark.parametrize(("value", "fraction"), [
    ("99.7", 0.997), ('"99.7 %"', 0.997), ('"99.7%"', 0.997), ("50", 0.5), ("99.99", 0.9999),
    ("99.9999", 0.999999)])
def test_yield_min_is_a_percent_kept_as_a_fraction(value: str, fraction: float) -> None:
    # hand calculation: a percent over 100; the Target keeps the fraction (DESIGN: yields
    # are fractions), exactly the decimal the job wrote
    job = parse_job(BASE + f"yield_min = {value}\n", "job.toml")
    assert job.stage.target.yield_min == fraction
    board = parse_job('[supply]\nvolts = 12\n[[stage]]\nname = "a"\n[stage.target]\n'
                      f'ic = "1 mA"\nic_window_pct = 20\nyield_min = {value}\n', "board.toml")
    assert board.stages[0].target.yield_min == fraction
