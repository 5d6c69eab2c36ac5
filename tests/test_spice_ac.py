"""Mid-band gain and input resistance of the exponential model against ngspice ``.ac``.

Reference: ngspice-39 (Debian package ``ngspice``; ``ngspice -v`` prints
"ngspice-39 : Circuit level simulation program"), run in batch mode on the netlist
stockbias writes for the stage (``write_netlist`` with the card of
``render.netlist.model_card``), with an AC test set added: a 1 V AC source through a
1000 F coupling capacitor into the base, a 1000 F bypass capacitor across RE where the
job bypasses it, and the load through a 1000 F coupling capacitor; one frequency,
1 kHz, where every capacitor is a short to within 2e-7 Ω.  The gain is v(c)/v(b)
(from the base terminal, as stockbias defines it) and the input resistance
v(b)/i_in, both from ngspice's complex solution.

The Early effect is included on both sides (VAF finite in most cases): stockbias's
figures carry rₒ and the exact Gummel–Poon derivatives, so no term is left out.

Tolerance: measured agreement is at most 1e-6 relative (ngspice's reltol 1e-6 on the
operating point); the tests allow 1e-5, a margin of 10.  The emission
coefficient NF = 1.05 alone moves the gain by 5 % if gm is taken as IC/VT,
far outside it.
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

from stockbias.analysis.spice import ngspice_version, write_netlist
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec, evaluate
from stockbias.parts import Transistor
from stockbias.render.netlist import model_card

pytestmark = [
    pytest.mark.spice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed"),
]

REFERENCE_VERSION = "ngspice-39"
RTOL = 1e-5  # measured at most 1e-6 against ngspice-39; margin 10

# name: (network, polarity, supply V, negative supply V, resistor values ohm, NF, VAF V,
#        RE bypassed, load ohm)
CASES = {
    "divider-npn-bypassed-load": ("divider", "NPN", 12.0, None,
                                  {"R1": 56e3, "R2": 12e3, "RC": 4.3e3, "RE": 1.1e3},
                                  1.05, 80.0, True, 15e3),
    "divider-npn-unbypassed-load": ("divider", "NPN", 12.0, None,
                                    {"R1": 56e3, "R2": 12e3, "RC": 4.3e3, "RE": 1.1e3},
                                    1.05, 80.0, False, 15e3),
    "divider-pnp-bypassed-noload": ("divider", "PNP", 9.0, None,
                                    {"R1": 33e3, "R2": 8.2e3, "RC": 2.7e3, "RE": 680.0},
                                    1.08, 45.0, True, math.inf),
    "divider-pnp-unbypassed-load-no-early": ("divider", "PNP", 9.0, None,
                                             {"R1": 33e3, "R2": 8.2e3, "RC": 2.7e3,
                                              "RE": 680.0}, 1.03, math.inf, False, 6.8e3),
    "feedback-npn-unbypassed-load": ("collector_feedback", "NPN", 10.0, None,
                                     {"RB": 180e3, "RC": 3.9e3, "RE": 390.0},
                                     1.05, 60.0, False, 22e3),
    "feedback-pnp-bypassed-load": ("collector_feedback", "PNP", 10.0, None,
                                   {"RB": 180e3, "RC": 3.9e3, "RE": 390.0},
                                   1.05, 60.0, True, 22e3),
    "dual-npn-bypassed-load": ("dual_supply", "NPN", 9.0, -9.0,
                               {"RB": 22e3, "RE": 6.8e3, "RC": 3.3e3}, 1.05, 70.0, True, 10e3),
    "dual-pnp-unbypassed": ("dual_supply", "PNP", 9.0, -9.0,
                            {"RB": 22e3, "RE": 6.8e3, "RC": 3.3e3}, 1.07, 70.0, False,
                            math.inf),
    "fixed-npn-unbypassed-load": ("fixed_base", "NPN", 12.0, None,
                                  {"RB": 560e3, "RC": 3.3e3, "RE": 470.0}, 1.05, 90.0, False,
                                  10e3),
    "fixed-pnp-no-re": ("fixed_base", "PNP", 12.0, None,
                        {"RB": 820e3, "RC": 3.3e3}, 1.05, 90.0, True, 10e3),
}


def _transistor(polarity: str, nf: float, vaf: float) -> Transistor:
    return Transistor(part_id="QX", polarity=polarity, hfe_min=110.0, hfe_max=260.0,
                      vceo_max=40.0, ic_max=0.2, pd_max_w=0.5, vbe_min=0.62, vbe_max=0.70,
                      hfe_test_ic=2e-3, nf=nf, vaf_v=vaf, br=2.0)


def _complex_vectors(raw: str) -> dict[str, complex]:
    """The first point of the AC plot of an ASCII rawfile, vector name → complex value."""
    lines = raw.splitlines()
    start = next(i for i, s in enumerate(lines) if s.startswith("Plotname:") and "AC" in s)
    n_vars = next(int(s.split(":")[1]) for s in lines[start:] if s.startswith("No. Variables"))
    var_at = next(i for i in range(start, len(lines)) if lines[i].strip() == "Variables:")
    names = [lines[var_at + 1 + k].split()[1].lower() for k in range(n_vars)]
    val_at = var_at + 1 + n_vars
    assert lines[val_at].strip() == "Values:"
    tokens = " ".join(lines[val_at + 1:]).split()[1:n_vars + 1]
    out = {}
    for name, tok in zip(names, tokens, strict=True):
        re_, im_ = (float(x) for x in tok.split(","))
        out[name] = complex(re_, im_)
    return out


def _ngspice_ac(netlist: str) -> dict[str, complex]:
    with tempfile.TemporaryDirectory(prefix="stockbias-ac-") as tmp:
        work = Path(tmp)
        (work / "stage.cir").write_text(netlist)
        subprocess.run(["ngspice", "-b", "-r", "stage.raw", "stage.cir"], cwd=work,
                       env={"SPICE_ASCIIRAWFILE": "1", "HOME": tmp, "PATH": "/usr/bin:/bin"},
                       capture_output=True, text=True, timeout=60, check=False)
        return _complex_vectors((work / "stage.raw").read_text())


def _ours(case: tuple) -> tuple[float, float, float]:
    network, polarity, vcc, vee, values, nf, vaf, bypassed, load = case
    t = _transistor(polarity, nf, vaf)
    spec = StageSpec(network=network, device=DeviceSpec.from_transistor(t), vcc=vcc, vee=vee,
                     resistors={r: ResistorSpec(v, 0.0) for r, v in values.items()},
                     model="exponential", load=load, re_bypassed=bypassed)
    q = evaluate(spec, spec.nominal_point()).quantities
    return float(q["gain"]), float(q["rin"]), float(q["gm"])


def _spice(case: tuple) -> tuple[float, float]:
    network, polarity, vcc, vee, values, nf, vaf, bypassed, load = case
    card, _ = model_card(_transistor(polarity, nf, vaf))
    text = write_netlist(network, values, polarity, vcc, vee, card, 25.0,
                         analyses=(".op", ".ac lin 1 1k 1k"))
    ac = ["V_SIG sig 0 DC 0 AC 1", "C_IN sig b 1k"]
    if bypassed and "RE" in values:
        re_line = next(s for s in text.splitlines() if s.startswith("R_RE "))
        ac.append("C_BYP " + " ".join(re_line.split()[1:3]) + " 1k")
    if math.isfinite(load):
        ac += ["C_OUT c out 1k", f"R_LOAD out 0 {load:.12g}"]
    text = text.replace("\n.end\n", "\n" + "\n".join(ac) + "\n.end\n")
    v = _ngspice_ac(text)
    vb, vc = v["v(b)"], v["v(c)"]
    i_in = -v["i(v_sig)"]  # a source's current flows into its positive node
    gain, rin = vc / vb, vb / i_in
    # mid-band: the capacitors are shorts, the answer is real to within 1e-6 of its size
    assert abs(gain.imag) <= 1e-6 * abs(gain) and abs(rin.imag) <= 1e-6 * abs(rin)
    return gain.real, rin.real


def test_ngspice_version_is_the_reference() -> None:
    # The tolerances above were measured against ngspice-39 (Debian 12).  The comparisons hold
    # any version to them; this pins the floor: an older simulator (or an unreadable version
    # string) fails here rather than being trusted as the reference.
    version = ngspice_version()
    match = re.fullmatch(r"ngspice-(\d+)(?:\.\d+)*\+?", version)
    assert match is not None, version
    assert int(match.group(1)) >= int(REFERENCE_VERSION.split("-")[1]), version


@pytest.mark.parametrize("name", list(CASES))
def test_gain_and_input_resistance_match_ngspice_ac(name: str) -> None:
    case = CASES[name]
    gain, rin, _ = _ours(case)
    sp_gain, sp_rin = _spice(case)
    assert gain == pytest.approx(sp_gain, rel=RTOL)
    assert rin == pytest.approx(sp_rin, rel=RTOL)


def test_emission_coefficient_is_in_gm() -> None:
    # gm = IC/(NF·VT) − 1/rₒ (derivative of the Gummel–Poon collector current, hand
    # calculation): with NF = 1.05 gm is 1/1.05 of IC/VT, minus the Early term
    case = CASES["divider-npn-bypassed-load"]
    network, polarity, vcc, _vee, values, nf, vaf, bypassed, load = case
    t = _transistor(polarity, nf, vaf)
    spec = StageSpec(network=network, device=DeviceSpec.from_transistor(t), vcc=vcc,
                     resistors={r: ResistorSpec(v, 0.0) for r, v in values.items()},
                     model="exponential", load=load, re_bypassed=bypassed)
    ev = evaluate(spec, spec.nominal_point())
    ic, vce, vbe = (float(np.asarray(x)) for x in (ev.op.ic, ev.op.vce, ev.op.vbe))
    vt = 1.380649e-23 * 298.15 / 1.602176634e-19  # CODATA k, q; 25 °C
    ro = (vaf + vce - vbe) / ic
    assert float(ev.quantities["gm"]) == pytest.approx(ic / (nf * vt) - 1 / ro, rel=1e-9)
