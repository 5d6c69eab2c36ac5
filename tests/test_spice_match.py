"""The exponential operating point against ngspice, the outside reference simulator.

Tolerances were measured against ngspice-39 (Debian package ``ngspice``;
``ngspice -v`` prints "ngspice-39 : Circuit level simulation program") on the
cases below: IC agrees to at most 1.1e-5 relative (allowed 3e-5) with an
absolute floor for cut-off of 2e-11 A measured (allowed 1e-10 A: ngspice puts
GMIN = 1e-12 S across each junction, which we do not model), node voltages to
0.07 mV (allowed 0.2 mV), and the same region by the same rule.  The running
version must be the one the tolerances were measured with
(:func:`test_ngspice_version_is_recorded`); for another version re-measure them.
Circuits come from a seeded generator with realistic values over all four
networks, both polarities, ambient −40…85 °C, with and without an Early
voltage, active, saturated and cut off.
"""

from __future__ import annotations

import math
import re
import shutil
from dataclasses import dataclass

import numpy as np
import pytest

from stockbias.analysis.device import CELSIUS_TO_KELVIN, gummel_poon_at
from stockbias.analysis.operating_point import (
    classify_exponential,
    region_names,
    solve_exponential,
)
from stockbias.analysis.spice import (
    ngspice_version,
    spice_operating_point,
    write_netlist,
)

pytestmark = [
    pytest.mark.spice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed"),
]

REFERENCE_VERSION = "ngspice-39"
IC_RTOL = 3e-5  # relative; ngspice-39 measured 1.1e-5
IC_ATOL = 1e-10  # ampere: GMIN leakage floor in cut-off; ngspice-39 measured 2e-11
V_ATOL = 2e-4  # volt; ngspice-39 measured 0.07 mV

_INTENTS = {
    "divider": ("active", "active", "saturated", "cutoff", "active"),
    "dual_supply": ("active", "active", "saturated", "cutoff", "active"),
    "fixed_base": ("active", "active", "saturated", "active", "active"),
    "collector_feedback": ("active",) * 5,  # VCB = IB·RB > 0: never saturates
}
_NETWORKS = tuple(_INTENTS)
_VBE_GUESS = 0.65  # volt, for sizing only


@dataclass(frozen=True)
class Case:
    name: str
    network: str
    polarity: str
    vcc: float
    vee: float | None
    values: dict[str, float]
    card: dict[str, float]
    temp_c: float
    intent: str


def _sig(x: float, digits: int = 4) -> float:
    return float(f"{x:.{digits}g}")


def _size(network, intent, rng, vcc, vee, ic, beta):
    """Resistances of an NPN stage meant to land in ``intent`` (NPN terms)."""
    if network == "divider":
        ve = rng.uniform(0.1, 0.2) * vcc
        vb = ve + _VBE_GUESS
        i_div = 10.0 * ic / beta
        r1 = (vcc - vb) / (i_div + ic / beta)
        r2 = vb / i_div
        if intent == "cutoff":
            vbb = rng.uniform(0.01, 0.06)
            r2 = r1 * vbb / (vcc - vbb)
        rc = (0.45 if intent != "saturated" else 2.5) * (vcc - ve) / ic
        return {"R1": r1, "R2": r2, "RC": rc, "RE": ve / ic}
    if network == "collector_feedback":
        ve = 0.1 * vcc if rng.random() < 0.5 else 0.0
        vce = rng.uniform(0.35, 0.5) * vcc
        values = {"RC": (vcc - vce - ve) / ic, "RB": (vce - _VBE_GUESS) * beta / ic}
        if ve > 0:
            values["RE"] = ve / ic
        return values
    if network == "dual_supply":
        if intent == "cutoff":
            return {"RB": 10e3, "RE": 4.7e3, "RC": 4.7e3}
        re = (abs(vee) - _VBE_GUESS) / ic
        rc = (0.5 * vcc if intent != "saturated" else 2.5 * (vcc + _VBE_GUESS)) / ic
        return {"RB": 0.05 * beta * re, "RE": re, "RC": rc}
    ve = 0.1 * vcc if rng.random() < 0.5 else 0.0
    values = {
        "RB": (vcc - _VBE_GUESS - ve) * beta / ic,
        "RC": (0.4 if intent != "saturated" else 3.0) * (vcc - ve) / ic,
    }
    if ve > 0:
        values["RE"] = ve / ic
    return values


def generate_cases(seed: int = 39, per_network: int = 10) -> list[Case]:
    """Seeded circuits over every network, polarity, region and temperature."""
    rng = np.random.default_rng(seed)
    cases = []
    for j in range(per_network):
        for network in _NETWORKS:
            intent = _INTENTS[network][j % 5]
            polarity = ("NPN", "PNP")[j % 2]
            temp_c = (-40.0, 85.0)[j] if j < 2 else _sig(rng.uniform(-40.0, 85.0), 3)
            card = {
                "is_a": _sig(math.exp(rng.uniform(math.log(3e-15), math.log(3e-14))), 3),
                "bf": _sig(rng.uniform(80.0, 350.0), 3),
                "br": _sig(rng.uniform(1.0, 6.0), 3),
                "nf": _sig(rng.uniform(1.0, 1.02), 4),
                "nr": _sig(rng.uniform(1.0, 1.05), 4),
                "vaf": math.inf if (j // 2) % 2 == 0 else _sig(rng.uniform(30.0, 150.0), 3),
                "xti": _sig(rng.uniform(2.5, 3.5), 3),
                "eg_ev": _sig(rng.uniform(1.10, 1.12), 4),
                "xtb": _sig(rng.uniform(0.8, 2.0), 3),
                "tnom_c": 27.0,
            }
            vcc = _sig(rng.uniform(6.0, 24.0), 3)
            vee = None
            if network == "dual_supply":
                vee = -_sig(rng.uniform(3.0, 12.0) if intent != "cutoff" else
                            rng.uniform(0.01, 0.06), 3)
            ic = math.exp(rng.uniform(math.log(0.2e-3), math.log(5e-3)))
            values = {k: _sig(v) for k, v in
                      _size(network, intent, rng, vcc, vee, ic, card["bf"]).items()}
            if polarity == "PNP" and vee is not None:  # PNP: RAIL_C = VEE, RAIL_E = +VCC
                vcc, vee = -vee, -vcc
            vaf = "inf" if math.isinf(card["vaf"]) else f"{card['vaf']:g}V"
            name = f"{network}-{polarity}-{intent}-{temp_c:g}C-VAF{vaf}-{j}"
            cases.append(Case(name, network, polarity, vcc, vee, values, card, temp_c, intent))
    return cases


CASES = generate_cases()


def compare(case: Case) -> dict[str, object]:
    """Our exponential point and ngspice's for one case."""
    sp = spice_operating_point(
        case.network, case.values, case.polarity, case.vcc, case.vee, case.card, case.temp_c
    )
    temp_k = case.temp_c + CELSIUS_TO_KELVIN
    gp = gummel_poon_at(**case.card, temp_c=case.temp_c)
    op = solve_exponential(case.network, case.values, case.polarity, case.vcc, case.vee, gp,
                           temp_k)
    sp_region = classify_exponential(sp["vbe"], sp["vbc"], gp.nf, gp.nr, temp_k)
    return {"spice": sp, "ours": op, "spice_region": str(region_names(sp_region))}


def test_generator_covers_the_space():
    assert len(CASES) >= 30
    assert len({c.name for c in CASES}) == len(CASES)
    assert {(c.network, c.polarity) for c in CASES} == {
        (n, p) for n in _NETWORKS for p in ("NPN", "PNP")}
    intents = [c.intent for c in CASES]
    assert intents.count("saturated") >= 4 and intents.count("cutoff") >= 4
    assert sum(math.isfinite(c.card["vaf"]) for c in CASES) >= 10
    temps = [c.temp_c for c in CASES]
    assert min(temps) == -40.0 and max(temps) == 85.0


@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_operating_point_matches_ngspice(case):
    result = compare(case)
    sp, op = result["spice"], result["ours"]
    # region by the same rule on both answers, and the one the circuit was sized for
    assert str(op.region_name) == case.intent
    assert result["spice_region"] == case.intent
    # ngspice-39: IC within 3e-5 (1e-10 A floor for GMIN), node voltages within 0.2 mV
    assert abs(float(op.ic) - sp["ic"]) <= IC_RTOL * abs(sp["ic"]) + IC_ATOL
    for node in ("vb", "vc", "ve"):
        assert abs(float(getattr(op, node)) - sp[node]) <= V_ATOL, node


def test_ngspice_version_is_recorded() -> None:
    # The tolerances above were measured against ngspice-39 (Debian 12).  The comparisons hold
    # any version to them; this pins the floor: an older simulator (or an unreadable version
    # string) fails here rather than being trusted as the reference.
    version = ngspice_version()
    match = re.fullmatch(r"ngspice-(\d+)(?:\.\d+)*\+?", version)
    assert match is not None, version
    assert int(match.group(1)) >= int(REFERENCE_VERSION.split("-")[1]), version


def test_netlist_states_the_model_explicitly():
    case = next(c for c in CASES if c.polarity == "PNP" and "RE" not in c.values
                and c.network == "fixed_base")
    text = write_netlist(case.network, case.values, case.polarity, case.vcc, case.vee,
                         case.card, case.temp_c, title="check")
    model = next(line for line in text.splitlines() if line.startswith(".model"))
    for key in ("IS=", "BF=", "BR=", "NF=", "NR=", "XTB=", "XTI=", "EG=", "TNOM=27"):
        assert key in model
    assert "Q1 qc qb e qb QSTAGE" in text  # PNP substrate tied to the base
    assert "V_RE e rail_e DC 0" in text  # absent RE: an exact short
    assert f".temp {case.temp_c:.12g}" in text and ".op" in text
    assert text.rstrip().endswith(".end")
