"""A SPICE netlist of a chosen stage, for verification in a simulator.

The netlist holds the stage's stock parts (values, with part ids in
comments; a pair as its two resistors), the supplies at their nominal
voltage, a Gummel–Poon ``.model`` with every parameter stockbias uses stated
explicitly (IS, BF, BR, NF, NR, VAF, XTB, XTI, EG and TNOM = 27 °C), the
collector–base leakage as a temperature-following source, an ``.op`` at the
nominal temperature and a ``.dc TEMP`` sweep over the job's ambient range.

Stock data are specified at 25 °C, model cards at TNOM = 27 °C.  The card is
converted with the same Gummel–Poon temperature laws the analysis uses
(:mod:`stockbias.analysis.device`), so that ngspice reproduces the
exponential-model nominal point of ``check``: IS at 27 °C from IS at 25 °C,
BF and BR at 27 °C by (300.15/298.15)^XTB.  Where the row has no IS, IS is
derived from the middle of the VBE range at the hFE test current; BF is the
geometric mean of the hFE range (a stock row has no BF of its own).

Text from the stock file, the job and the command line (part ids, locations,
stage names, paths) only ever reaches ``* `` comment lines and the title, made
inert by :func:`stockbias.inert_text.netlist_text`: one line of printable
ASCII, line breaks and control characters shown as ``<U+XXXX>``.  Element,
node and model names are generated from the roles (``R_R1``, ``QSTAGE``) and a
comment line above each element says which stock part it is.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from ..analysis import device
from ..analysis.check import build_spec
from ..analysis.spice import write_netlist
from ..analysis.stage import evaluate
from ..assign import ResolvedResistor
from ..inert_text import netlist_text
from ..job import Job
from ..parts import Transistor
from ..units import format_quantity

__all__ = ["ExportedNetlist", "export_netlist", "model_card"]

_T25 = device.STOCK_REFERENCE_C + device.CELSIUS_TO_KELVIN
_TNOM_C = device.TNOM_DEFAULT_C
_TNOM = _TNOM_C + device.CELSIUS_TO_KELVIN
# Our own sentences may be long; free text from a file is capped by _free first.
_OWN_LIMIT = 2000


def _ascii(text: str) -> str:
    """Our own text as one line of printable ASCII (``Ω`` → ``ohm``)."""
    return netlist_text(text, _OWN_LIMIT)


def _free(text: str) -> str:
    """Free text from a file or the command line (part id, location, stage name,
    path) as an inert, capped piece of a comment line."""
    return netlist_text(text)


def _q(value: float, unit: str) -> str:
    return _ascii(format_quantity(value, unit, digits=4))


def model_card(t: Transistor) -> tuple[dict[str, float], list[str]]:
    """Gummel–Poon card at TNOM = 27 °C for a stock row, and comment lines saying how.

    Returns
    -------
    card : dict
        ``is_a`` (A), ``bf, br, nf, nr, vaf`` (V, inf for none), ``xtb, xti,
        eg_ev`` (eV), ``tnom_c`` (°C), as :func:`stockbias.analysis.spice.write_netlist`
        takes them.
    notes : list of str
        Where each value came from.
    """
    if t.card is not None:
        return _card_as_given(t)
    notes = []
    xtb, xti, eg, nf = t.xtb, t.xti, t.eg_ev, t.nf
    if t.is_a is None:
        is25 = float(device.saturation_current_from_vbe(t.vbe_nominal, t.hfe_test_ic, nf, _T25))
        is27 = float(device.saturation_current_at(is25, _TNOM, _T25, xti, eg))
        notes.append(f"IS derived: the row gives none, so IS = {is25:.4g} A at 25 C makes "
                     f"IC = {_q(t.hfe_test_ic, 'A')} at VBE = {t.vbe_nominal:.4g} V (middle "
                     f"of {t.vbe_min:.3g}..{t.vbe_max:.3g} V); moved to TNOM 27 C with "
                     f"XTI and EG")
    else:
        is27 = float(t.is_a)
        notes.append("IS from the stock row (taken at TNOM 27 C)")
    ratio = (_TNOM / _T25) ** xtb
    bf27 = t.hfe_nominal * ratio
    br27 = t.br * ratio
    notes.append(f"BF = geometric mean of hFE {t.hfe_min:g}..{t.hfe_max:g} at 25 C "
                 f"({t.hfe_nominal:.4g}) x (300.15/298.15)^XTB for TNOM 27 C; BR likewise")
    notes.append("stock data are at 25 C, TNOM is 27 C: the card is converted with the "
                 "Gummel-Poon temperature laws so that it gives the same device at 25 C")
    defaulted = sorted({"br", "nf", "nr", "vaf_v", "xtb", "xti", "eg_ev"} & t.assumed)
    if defaulted:
        notes.append("not in the stock row, defaults used: " + ", ".join(
            n.upper().replace("_V", "").replace("_EV", "") for n in defaulted))
    card = {"is_a": is27, "bf": bf27, "br": br27, "nf": nf, "nr": t.nr, "vaf": t.vaf_v,
            "xtb": xtb, "xti": xti, "eg_ev": eg, "tnom_c": _TNOM_C}
    return card, notes


def _card_as_given(t: Transistor) -> tuple[dict[str, float], list[str]]:
    """A row with a model card (or fitted datasheet points): the card's parameters as
    given, its own TNOM kept (ngspice moves them to temperature as the analysis does);
    the row's own Gummel–Poon columns replace the card's where the row gives them."""
    from ..analysis.gp_dc import CARD_DEFAULTS

    assert t.card is not None
    p = {**CARD_DEFAULTS, **t.card.params}
    row = {"is": t.is_a, "br": t.br, "nf": t.nf, "nr": t.nr, "xtb": t.xtb, "xti": t.xti,
           "eg": t.eg_ev, "vaf": 0.0 if math.isinf(t.vaf_v) else t.vaf_v}
    overridden = sorted(k.upper() for k, v in row.items()
                        if v is not None and k in t.card.params and v != t.card.params[k])
    p.update({k: v for k, v in row.items() if v is not None})
    notes = [f"parameters from the {t.card.source}, as given (TNOM {p['tnom']:g} C kept)"]
    if overridden:
        notes.append("the stock row's own columns replace the card's " + ", ".join(overridden))
    notes.append(f"BF is the card's: the nominal point; the stock row's hFE bin "
                 f"{t.hfe_min:g}..{t.hfe_max:g} is the spread around it")
    card = {"is_a": p["is"], "bf": p["bf"], "br": p["br"], "nf": p["nf"], "nr": p["nr"],
            "vaf": p["vaf"] if p["vaf"] else math.inf, "xtb": p["xtb"], "xti": p["xti"],
            "eg_ev": p["eg"], "tnom_c": p["tnom"]}
    for key in ("ise", "ne", "isc", "nc", "ikf", "ikr", "var", "rb", "re", "rc"):
        if p.get(key):
            card[key] = p[key]
    return card, notes


@dataclass(frozen=True)
class ExportedNetlist:
    """A netlist and what stockbias expects ngspice to find in it.

    ``expected`` holds the exponential-model nominal point (ic, ib A; vb, vc,
    ve, vce V) at ``temperature_c`` (°C); ``sweep_c`` is the (start, stop,
    step) of the ``.dc TEMP`` sweep or None when the ambient range is one
    temperature.
    """

    text: str
    card: dict[str, float]
    expected: dict[str, float]
    temperature_c: float
    sweep_c: tuple[float, float, float] | None


def _sweep(lo: float, hi: float) -> tuple[float, float, float] | None:
    if hi <= lo:
        return None
    step = 5.0 if hi - lo >= 10 else (hi - lo) / 4
    n = math.ceil((hi - lo) / step - 1e-9)
    return lo, hi, (hi - lo) / n


def _part_label(p: ResolvedResistor, i: int) -> str:
    if p.off_stock and i >= len(p.parts):
        return f"not a stock part: {_q(p.value, 'ohm')} at +/-{100 * p.tol:.3g} %"
    part = p.parts[i]
    label = (f"{_free(part.part_id)} {_q(part.value_ohm, 'ohm')} +/-{part.tolerance_pct:g} % "
             f"{_q(part.power_w, 'W')}")
    return f"{label} at {_free(part.location)}" if part.location else label


def export_netlist(job: Job, parts: Mapping[str, ResolvedResistor], transistor: Transistor,
                   *, topology: str | None = None, source: str = "",
                   stage_name: str | None = None) -> ExportedNetlist:
    """The SPICE netlist of one stage with its stock parts (see the module notes).

    Parameters
    ----------
    job : Job
        Supplies (nominal voltages), ambient range (the sweep), the stage.
    parts : Mapping[str, ResolvedResistor]
        Each role's resolved part(s).
    transistor : Transistor
        The stock row the ``.model`` is built from.
    topology : str, optional
        The network (default: the stage's).
    source : str
        Where the design came from (a comment line).
    stage_name : str, optional
        Stage of a board (default the first).
    """
    stage = next((s for s in job.stages if s.name == stage_name), job.stage)
    topo = topology or stage.topology
    exp_job = job.with_topology(topo)
    exp_job = replace(exp_job, search=replace(exp_job.search, model="exponential"))
    spec = build_spec(exp_job, exp_job.stages[0], parts, transistor, topo)
    ev = evaluate(spec, spec.nominal_point(), small_signal=False)
    expected = {k: float(np.asarray(ev.quantities[k]).reshape(-1)[0])
                for k in ("ic", "ib", "vb", "vc", "ve", "vce")}
    region = str(np.asarray(ev.op.region_name).reshape(-1)[0])
    t_nom = spec.nominal_ambient_c
    card, notes = model_card(transistor)
    role_parts = {}
    resistances = {}
    for role, p in parts.items():
        resistances[role] = p.value
        if p.arrangement == "single":
            role_parts[role] = ("single", [(p.value, _part_label(p, 0))])
        else:
            values = [x.value_ohm for x in p.parts]
            if len(values) != 2:  # half of the pair is not a stock part: write the pair value
                role_parts[role] = ("single", [(p.value, f"{p.arrangement} pair, "
                                                f"{_q(p.value, 'ohm')} (not all in stock)")])
                continue
            role_parts[role] = (p.arrangement, [(values[i], _part_label(p, i)) for i in (0, 1)])
    s = job.supply
    supply = f"supply {_q(s.volts, 'V')} +/-{s.tolerance_pct:g} % (nominal here)"
    if s.negative_volts is not None and spec.network.supply == "dual":
        supply += f", negative rail {_q(s.negative_volts, 'V')} +/-{s.vee_tolerance_pct:g} %"
    env = job.environment
    sweep = _sweep(env.ambient_min_c, env.ambient_max_c)
    comments = [
        f"stage '{_free(stage.name)}' of job {_free(job.path)}" + (f"; {_free(source)}"
                                                                  if source else ""),
        f"Q1 (model QSTAGE): {transistor.polarity} {_free(transistor.part_id)}: hFE "
        f"{transistor.hfe_min:g}.."
        f"{transistor.hfe_max:g} at {_q(transistor.hfe_test_ic, 'A')}, VBE "
        f"{transistor.vbe_min:.3g}..{transistor.vbe_max:.3g} V, VCEO "
        f"{_q(transistor.vceo_max, 'V')}, PD {_q(transistor.pd_max_w, 'W')}",
        supply,
        f"ambient {env.ambient_min_c:g}..{env.ambient_max_c:g} C; the device sits at the "
        "circuit temperature (no self-heating)",
        f"stockbias exponential-model nominal point at {t_nom:g} C ({region}): "
        f"IC = {_q(expected['ic'], 'A')}, IB = {_q(expected['ib'], 'A')}, "
        f"VCE = {_q(expected['vce'], 'V')}, VB = {_q(expected['vb'], 'V')}, "
        f"VC = {_q(expected['vc'], 'V')}, VE = {_q(expected['ve'], 'V')}",
        "IC is i(V_IC), IB is i(V_IB) (negated for a PNP)",
    ]
    icbo_nom = 0.5 * transistor.icbo_a
    if icbo_nom > 0:
        comments.append(f"leakage at the nominal point: half the row's ICBO "
                        f"({_q(transistor.icbo_a, 'A')} at 25 C), as check takes it")
    analyses = [".op"]
    if sweep is not None:
        lo, hi, step = sweep
        analyses.append(f"* temperature sweep over the ambient range, {step:.4g} C steps")
        analyses.append(f".dc TEMP {lo:.6g} {hi:.6g} {step:.6g}")
        analyses.append(".print dc v(b) v(c) v(e) i(V_IC) i(V_IB)")
    else:
        analyses.append("* the ambient range is one temperature: no sweep")
    text = write_netlist(
        topo, resistances, transistor.polarity, s.volts, s.negative_volts, card, t_nom,
        title=f"stockbias export: {topo} stage with {_free(transistor.part_id)}",
        comments=[_ascii(c) for c in comments], role_parts=role_parts,
        leakage=(icbo_nom, 10.0) if icbo_nom > 0 else None,
        card_comments=[_ascii(n) for n in notes], analyses=analyses)
    return ExportedNetlist(text, card, expected, t_nom, sweep)
