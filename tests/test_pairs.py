"""Resistor pairs: the exact asymmetric band, and each part's power at the worst split.

Expected values: hand calculation (R‖R and R + R with each part at its tolerance ends),
and dense evaluations of the DESIGN §2 divider closed form written here over the parts
of the pair (no engine code).  Stock rows and jobs are invented for these tests.
"""

from __future__ import annotations

import itertools
from dataclasses import replace

import numpy as np
import pytest

from stockbias.analysis.check import analyze_stage, build_spec
from stockbias.analysis.stage import ResistorSpec
from stockbias.analysis.worst_case import worst_case
from stockbias.assign import pair_of, resolve_resistor
from stockbias.job import parse_job
from stockbias.parts import Inventory, Resistor, Transistor


def par(x: float, y: float) -> float:
    return x * y / (x + y)


def test_one_percent_parallel_ten_percent_band_is_asymmetric() -> None:
    a = Resistor("MF-1K", 1000.0, 1.0, 0.25)
    b = Resistor("CF-2K15", 2150.0, 10.0, 0.25)
    p = pair_of("RE", a, b, "parallel")
    nominal = par(1000.0, 2150.0)
    # hand calculation: both parts low, both parts high
    low, high = par(990.0, 1935.0), par(1010.0, 2365.0)
    assert p.value == pytest.approx(nominal, rel=1e-15)
    assert p.tol_minus == pytest.approx(1 - low / nominal, rel=1e-12)
    assert p.tol_plus == pytest.approx(high / nominal - 1, rel=1e-12)
    assert (round(100 * p.tol_minus, 2), round(100 * p.tol_plus, 2)) == (4.05, 3.69)
    assert p.band(25.0, 25.0) == pytest.approx((low, high), rel=1e-14)
    assert p.to_dict()["tolerance_minus_pct"] == pytest.approx(100 * (1 - low / nominal))


def test_series_band_and_worst_split_rating_by_hand() -> None:
    a = Resistor("A", 2200.0, 1.0, 0.125)
    b = Resistor("B", 470.0, 10.0, 0.25)
    p = pair_of("R1", a, b, "series")
    assert p.band(25.0, 25.0) == pytest.approx((2178.0 + 423.0, 2222.0 + 517.0), rel=1e-14)
    # a carries Ra/(Ra + Rb): most at a high, b low; b most at b high, a low
    share_a = 2222.0 / (2222.0 + 423.0)
    share_b = 517.0 / (517.0 + 2178.0)
    assert p.rating == pytest.approx(min(0.125 / share_a, 0.25 / share_b), rel=1e-12)


def test_parallel_worst_split_rating_by_hand_with_drift() -> None:
    # 240 Ω ±5 % −350 ppm/°C 63 mW in parallel with 560 Ω ±1 % +100 ppm/°C 0.25 W, 0…60 °C.
    a = Resistor("CF-240R", 240.0, 5.0, 0.063, tempco_ppm=-350.0, tempco_signed=True)
    b = Resistor("MF-560R", 560.0, 1.0, 0.25, tempco_ppm=100.0, tempco_signed=True)
    p = pair_of("RE", a, b, "parallel", ambient=(0.0, 60.0))
    # In parallel a part carries the other's share of the resistance: a's share
    # Rb/(Ra + Rb) is largest with a low and b high.  Both parts sit at one ambient:
    # at 0 °C a is ×(1 + 350e-6·25), b ×(1 − 100e-6·25); at 60 °C a ×(1 − 350e-6·35),
    # b ×(1 + 100e-6·35).
    best = np.inf
    for fa, fb in ((1 + 350e-6 * 25, 1 - 100e-6 * 25), (1 - 350e-6 * 35, 1 + 100e-6 * 35)):
        al, ah = 240 * 0.95 * fa, 240 * 1.05 * fa
        bl, bh = 560 * 0.99 * fb, 560 * 1.01 * fb
        best = min(best, 0.063 / (bh / (al + bh)), 0.25 / (ah / (ah + bl)))
    assert p.rating == pytest.approx(best, rel=1e-12)
    # the nominal split (a carries 560/800 = 70 %) would allow more: 0.063/0.7 = 90 mW
    assert p.rating < 0.063 / 0.7


JOB = """
[supply]
volts = 12
tolerance_pct = 0
[target]
ic_min = "{ic_min}"
ic_max = "{ic_max}"
vce_min = "1 V"
[limits]
resistor_derating = 0.5
[environment]
ambient_min_c = 25
ambient_max_c = 25
[search]
topology = "divider"
"""

Q = Transistor("QN-FIX", "NPN", 200, 200, 40, 0.5, 1.0, vbe_min=0.65, vbe_max=0.65, qty=50)


def _ic(vcc: float, r1: float, r2: float, re: float) -> float:
    """DESIGN §2 divider closed form with β 200 and VBE 0.65 V fixed."""
    vbb, rbb = vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2)
    return 200 / 201 * (vbb - 0.65) / (re + rbb / 201)


def _stage(ic_min: float, ic_max: float, re_parts: tuple[Resistor, Resistor], r2: float,
           rc: float = 1e3):
    rows = (Resistor("R1", 47e3, 0.1, 0.25, qty=50), Resistor("R2", r2, 0.1, 0.25, qty=50),
            Resistor("RC", rc, 0.1, 1.0, qty=50), *re_parts)
    inv = Inventory("<pair stage>", rows, (Q,))
    job = parse_job(JOB.format(ic_min=repr(ic_min), ic_max=repr(ic_max)), "<pair job>")
    vals = {"R1": "R1", "R2": "R2", "RC": "RC",
            "RE": f"{re_parts[0].part_id}|{re_parts[1].part_id}"}
    parts = {role: resolve_resistor(role, text, inv, 5.0) for role, text in vals.items()}
    return job, parts


def _dense_re(a: Resistor, b: Resistor, n: int = 21):
    ta, tb = a.tolerance_pct / 100, b.tolerance_pct / 100
    ra = a.value_ohm * (1 + ta * np.linspace(-1, 1, n))
    rb = b.value_ohm * (1 + tb * np.linspace(-1, 1, n))
    return ra[:, None], rb[None, :]


def test_exact_band_passes_a_stage_the_symmetric_band_rejected() -> None:
    a, b = Resistor("MF-1K", 1000.0, 1.0, 0.25, qty=50), Resistor("CF-2K15", 2150.0, 10.0,
                                                                  0.25, qty=50)
    nominal = par(1000.0, 2150.0)
    # IC min at RE's top: exact +3.69 % vs the symmetric ±4.05 %; put ic_min between them
    ic_exact_min = _ic(12, 47e3 * 1.001, 10e3 * 0.999, par(1010.0, 2365.0))
    ic_sym_min = _ic(12, 47e3 * 1.001, 10e3 * 0.999, nominal * (1 + 0.0404615))
    ic_min = 0.5 * (ic_exact_min + ic_sym_min)
    ic_max = 1.2 * ic_exact_min
    job, parts = _stage(ic_min, ic_max, (a, b), 10e3)
    # every real corner: a dense grid over both parts and R1, R2 at their ends
    ra, rb = _dense_re(a, b)
    dense = [_ic(12, r1, r2, par(ra, rb)) for r1, r2 in itertools.product(
        (47e3 * 0.999, 47e3 * 1.001), (10e3 * 0.999, 10e3 * 1.001))]
    assert min(float(np.min(x)) for x in dense) >= ic_min          # meets the window
    res = analyze_stage(job, job.stage, parts, Q, samples=0)
    assert res.ok, [c.name for c in res.failing]
    assert float(res.worst.bounds["ic"].min) == pytest.approx(ic_exact_min, rel=1e-12)
    # the symmetric band at the wider side would have failed ic_min
    spec = build_spec(job, job.stage, parts, Q)
    re = parts["RE"]
    sym = dict(spec.resistors)
    sym["RE"] = ResistorSpec(re.value, max(re.tol_minus, re.tol_plus))
    b_sym = worst_case(replace(spec, resistors=sym)).bounds["ic"]
    assert float(b_sym.min) < ic_min


def test_a_part_over_its_allowance_at_the_worst_split_fails_the_check() -> None:
    # 240 Ω ±5 % 63 mW ‖ 560 Ω ±1 % 0.25 W in RE; derating 0.5 → 31.5 mW allowed for the
    # 240 Ω part.  R2 is chosen so its dissipation peaks just above that at a real split.
    a = Resistor("CF-240R", 240.0, 5.0, 0.063, qty=50)
    b = Resistor("MF-560R", 560.0, 1.0, 0.25, qty=50)
    ra, rb = _dense_re(a, b)

    def p240_max(r2: float) -> float:
        worst = 0.0
        for r1, r2x in itertools.product((47e3 * 0.999, 47e3 * 1.001),
                                          (r2 * 0.999, r2 * 1.001)):
            re = par(ra, rb)
            v = 201 / 200 * _ic(12, r1, r2x, re) * re      # IE·RE
            worst = max(worst, float(np.max(v ** 2 / ra)))
        return worst

    r2 = 17e3
    while p240_max(r2) < 0.0318:        # step R2 up until the 240 Ω part exceeds 31.8 mW
        r2 *= 1.002
    assert 0.0318 <= p240_max(r2) < 0.0330
    job, parts = _stage(1e-4, 0.1, (a, b), r2, rc=100.0)   # active: VCE about 7.6 V
    res = analyze_stage(job, job.stage, parts, Q, samples=0)
    assert res.nominal["region"] == "active"
    p_re = next(c for c in res.constraints if c.name == "p_RE")
    assert not p_re.ok, p_re          # the 240 Ω part is over its 31.5 mW at a real split
    # the nominal split (240 Ω carries 560/800 of the power) would have passed this total
    total = float(res.worst.bounds["p_RE"].max)
    assert total * 560 / 800 <= 0.0315


SUB_SHELF = """kind,part_id,value,tolerance_pct,power_w,tempco_ppm,qty,unit_cost,polarity,hfe_min,\
hfe_max,vceo_max,ic_max,pd_max_w,vbe_min,vbe_max,theta_ja
resistor,R-47K,47k,1,0.25,,50,0.01,,,,,,,,,
resistor,R-22K,22k,1,0.25,,50,0.01,,,,,,,,,
resistor,R-10K,10k,1,0.25,+100,50,0.01,,,,,,,,,
resistor,R-8K2,8k2,10,0.25,-350,50,0.01,,,,,,,,,
resistor,R-4K7,4k7,1,0.25,,50,0.01,,,,,,,,,
resistor,R-3K9,3k9,1,0.25,,50,0.02,,,,,,,,,
resistor,R-3K3,3k3,5,0.25,±200,50,0.02,,,,,,,,,
resistor,R-2K7,2k7,1,0.25,,50,0.03,,,,,,,,,
resistor,R-2K2,2k2,1,0.25,,50,0.01,,,,,,,,,
resistor,R-1K,1k,1,0.25,,50,0.01,,,,,,,,,
transistor,Q-A,,,,,50,0.05,NPN,100,200,40,0.2,0.5,0.62,0.68,250
transistor,Q-B,,,,,50,0.05,NPN,150,600,40,0.2,0.5,0.62,0.68,250
"""

SUB_JOB = """
[supply]
volts = 12
tolerance_pct = 2
[target]
ic_min = "0.7 mA"
ic_max = "1.4 mA"
vce_min = "3.5 V"
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 5
[search]
topology = "divider"
"""


def test_substitute_with_a_kept_pair_equals_an_exhaustive_one_change_search(tmp_path) -> None:
    from stockbias.search.substitute import substitute
    from stockbias.stock_io import read_inventory

    path = tmp_path / "pair_shelf.csv"
    path.write_text(SUB_SHELF)
    inv = read_inventory(path)
    job = parse_job(SUB_JOB, "<substitute pair job>")
    # RE is 10 k (1 %, +100 ppm/°C) ‖ 8.2 k (10 %, −350 ppm/°C): unequal values, tolerances
    # and tempco signs
    values = {"R1": "R-47K", "R2": "R-47K", "RC": "R-2K7", "RE": "R-10K|R-8K2"}
    # the worst-case limits alone (the stage's purpose: tests/test_keep_purpose.py)
    result = substitute(job, values, "Q-A", inv, samples=0, purpose=False)
    amb = (0.0, 50.0)
    base = {r: resolve_resistor(r, t, inv, 5.0, ambient=amb) for r, t in values.items()}
    assert (base["RE"].arrangement, base["RE"].part_ids) == ("parallel", ["R-10K", "R-8K2"])
    for cand in result.candidates:
        q = cand.transistor
        if cand.ruled_out is not None:
            continue
        drop_in = analyze_stage(job, job.stage, base, q, samples=0).ok
        assert cand.drop_in == drop_in, q.part_id
        if drop_in:
            continue
        # exhaustive: every single-role change to every other stock line, checked in full
        passing = []
        for role in values:
            for r in inv.resistors:
                if role != "RE" and r.part_id == values[role]:
                    continue
                parts = dict(base)
                parts[role] = resolve_resistor(role, r.part_id, inv, 5.0, ambient=amb)
                if analyze_stage(job, job.stage, parts, q, samples=0).ok:
                    passing.append((r.unit_cost, role, r.part_id))
        if passing:
            assert len(cand.changes) == 1 and cand.check.ok, q.part_id
            # source: the exhaustive one-change enumeration above
            assert cand.added_cost == pytest.approx(min(p[0] for p in passing), abs=1e-12)
            (role, part), = ((r, p.part_ids[0]) for r, p in cand.changes.items())
            assert any(p[1:] == (role, part) for p in passing)
        else:
            assert len(cand.changes) != 1


BOARD = """
[supply]
volts = 12
tolerance_pct = 2
[environment]
ambient_min_c = 0
ambient_max_c = 50
[build]
quantity = 5
[search]
time_limit_s = 60

[[stage]]
name = "input"
topology = "divider"
transistor = "Q-A"
[stage.target]
ic_min = "0.7 mA"
ic_max = "1.4 mA"
vce_min = "3 V"
[stage.values]
R1 = "R-47K"
R2 = "R-47K"
RC = "R-2K2"
RE = "{re}"

[[stage]]
name = "driver"
topology = "divider"
transistor = "Q-A"
[stage.target]
ic_min = "0.7 mA"
ic_max = "1.4 mA"
vce_min = "3 V"
[stage.values]
R1 = "R-47K"
R2 = "R-47K"
RC = "R-2K2"
RE = "R-4K7"
"""


@pytest.mark.parametrize("re", ["R-10K|R-8K2", "R-10K|6k8"])
def test_consolidate_checks_a_fixed_pair_with_its_exact_band_and_replaces_it(tmp_path,
                                                                            re) -> None:
    # Boards search single lines only; a pair on the current board (here of unequal values,
    # tolerances and tempco signs, or with one half off the shelf) is checked as it is, with
    # its exact band, and replaced by one stock line, counted as a change.
    from stockbias.search.board import stage_job
    from stockbias.search.consolidate import consolidate
    from stockbias.stock_io import read_inventory

    path = tmp_path / "pair_shelf.csv"
    path.write_text(SUB_SHELF)
    inv = read_inventory(path)
    job = parse_job(BOARD.format(re=re), "<pair board>")
    result = consolidate(job, inv)
    st = job.stages[0]
    amb = (0.0, 50.0)
    parts = {r: resolve_resistor(r, t, inv, 5.0, ambient=amb) for r, t in st.values.items()}
    assert parts["RE"].arrangement == "parallel"
    ref = analyze_stage(stage_job(job, st), st, parts, inv.find_transistor("Q-A"), samples=0)
    assert result.before_ok["input"] == ref.ok
    assert any("RE@input is a pair now" in n for n in result.assumptions)
    assert result.after is not None
    after = next(s for s in result.after.stages if s.name == "input")
    assert after.check.parts["RE"].arrangement == "single" and "RE" in after.changed
    assert after.check.ok
