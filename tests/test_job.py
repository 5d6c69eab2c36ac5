"""Job files (TOML, DESIGN §3): defaults, notation, boards, and every contradiction named."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from stockbias.errors import JobError
from stockbias.job import load_job, parse_job

SAMPLES = Path(__file__).resolve().parent.parent / "inventory_samples"
BASE = '[supply]\nvolts = 12\ntolerance_pct = 5\n[target]\nic = "1.5 mA"\nic_window_pct = 10\n'


def test_sample_job_loads() -> None:
    job = load_job(SAMPLES / "line_driver_job.toml")
    stage = job.stage
    assert stage.target.ic_min == pytest.approx(1.2e-3)   # 1.5 mA − 20 %
    assert stage.target.ic_max == pytest.approx(1.8e-3)   # 1.5 mA + 20 %
    assert stage.target.vce_min == 3.0
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
        (BASE + "yield_min = 99\n", 7, "target.yield_min", "99", "fraction"),
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
