"""SPICE netlist of a bias stage and an ngspice runner for independent checks.

The netlist states every Gummel–Poon parameter stockbias uses (IS, BF, BR,
NF, NR, VAF, XTB, XTI, EG, TNOM) explicitly, because ngspice's defaults differ
from ours (its XTB default is 0, ours 1.5).  An absent optional role is a 0 V
source (an exact short whose current can be read).  Zero-volt sources in the
collector and base leads measure IC and IB.  The substrate (4th BJT node) is
tied to the collector of an NPN (vertical device) or the base of a PNP
(lateral device): ngspice puts GMIN across the substrate junction, and a
grounded substrate would leak through it.

:func:`run_ngspice` runs ``ngspice -b`` in a temporary directory and reads the
ASCII rawfile.
"""

from __future__ import annotations

import functools
import math
import os
import re
import shutil
import subprocess
import tempfile
from collections.abc import Mapping
from pathlib import Path

from stockbias.analysis.device import TNOM_DEFAULT_C, XTB_DEFAULT
from stockbias.errors import StockbiasError
from stockbias.topologies import Network, get_network, polarity_sign, rail_voltages

__all__ = [
    "MODEL_CARD_DEFAULTS",
    "SimulatorError",
    "ngspice_version",
    "run_ngspice",
    "spice_operating_point",
    "write_netlist",
]

# Defaults for model-card keys a caller leaves out (DESIGN §2 defaults).
MODEL_CARD_DEFAULTS: dict[str, float] = {
    "br": 1.0,
    "nf": 1.0,
    "nr": 1.0,
    "vaf": math.inf,
    "xti": 3.0,
    "eg_ev": 1.11,
    "xtb": XTB_DEFAULT,
    "tnom_c": TNOM_DEFAULT_C,
}
_NODE_NAMES = {"B": "b", "C": "c", "E": "e", "GND": "0"}
_RAIL_NODE = {"RAIL_C": "rail_c", "RAIL_E": "rail_e"}
_TIMEOUT_S = 60.0


class SimulatorError(StockbiasError):
    """ngspice is missing, failed, or wrote no usable result."""


def _num(x: float) -> str:
    return f"{float(x):.12g}"


def _card(model_card: Mapping[str, float]) -> dict[str, float]:
    missing = {"is_a", "bf"} - set(model_card)
    if missing:
        raise ValueError(f"model card needs {sorted(missing)}")
    unknown = set(model_card) - {"is_a", "bf", *MODEL_CARD_DEFAULTS}
    if unknown:
        raise ValueError(f"model card: unknown parameter(s) {sorted(unknown)}")
    return {**MODEL_CARD_DEFAULTS, **{k: float(v) for k, v in model_card.items()}}


def write_netlist(
    network: Network | str,
    resistances: Mapping[str, float],
    polarity: str,
    vcc: float,
    vee: float | None,
    model_card: Mapping[str, float],
    temp_c: float,
    title: str = "stockbias stage",
) -> str:
    """SPICE netlist of one stage for a DC operating point.

    Parameters
    ----------
    network : Network or str
        The bias network or its registry name.
    resistances : Mapping[str, float]
        Resistance of each role, ohm; an optional role missing or 0 is a short.
    polarity : {"NPN", "PNP"}
        Transistor polarity.
    vcc : float
        Positive supply, volt.
    vee : float or None
        Negative supply, volt, signed (``dual_supply`` only).
    model_card : Mapping[str, float]
        Gummel–Poon parameters at TNOM: ``is_a`` (ampere) and ``bf`` required;
        ``br, nf, nr, vaf`` (volt, ``inf`` for none), ``xti, eg_ev`` (eV),
        ``xtb, tnom_c`` (°C) default to :data:`MODEL_CARD_DEFAULTS`.
    temp_c : float
        Circuit temperature, °C.
    title : str
        Title line.

    Returns
    -------
    str
        The netlist, ending with ``.end``.
    """
    net = get_network(network)
    sign = polarity_sign(polarity)
    pol = "NPN" if sign > 0 else "PNP"
    card = _card(model_card)
    rails = rail_voltages(net, pol, vcc, vee)
    nodes = dict(_NODE_NAMES)
    lines = [" ".join(str(title).split()) or "stockbias stage"]
    lines.append(f"* network {net.name}, {pol}; values in ohm, volt, ampere")
    for rail, node in _RAIL_NODE.items():
        v = float(rails[rail])
        if v == 0.0:
            nodes[rail] = "0"
        else:
            nodes[rail] = node
            lines.append(f"V_{rail} {node} 0 DC {_num(v)}")
    for role in net.roles:
        value = resistances.get(role.name)
        a, b = nodes[role.node_a], nodes[role.node_b]
        if value is None or float(value) == 0.0:
            if not role.optional:
                raise ValueError(f"network {net.name}: role {role.name} is required")
            lines.append(f"V_{role.name} {a} {b} DC 0 ; {role.name} absent: a short")
        else:
            if float(value) < 0 or not math.isfinite(float(value)):
                raise ValueError(f"role {role.name}: resistance must be finite and >= 0 (ohm)")
            lines.append(f"R_{role.name} {a} {b} {_num(value)}")
    substrate = "qc" if pol == "NPN" else "qb"
    lines += [
        "* zero-volt sources measure the collector and base currents",
        "V_IC c qc DC 0",
        "V_IB b qb DC 0",
        f"Q1 qc qb e {substrate} QSTAGE",
    ]
    params = [
        f"IS={_num(card['is_a'])}",
        f"BF={_num(card['bf'])}",
        f"BR={_num(card['br'])}",
        f"NF={_num(card['nf'])}",
        f"NR={_num(card['nr'])}",
    ]
    if math.isfinite(card["vaf"]):
        params.append(f"VAF={_num(card['vaf'])}")
    else:
        lines.append("* VAF infinite: left at the SPICE default (no Early effect)")
    params += [
        f"XTB={_num(card['xtb'])}",
        f"XTI={_num(card['xti'])}",
        f"EG={_num(card['eg_ev'])}",
        f"TNOM={_num(card['tnom_c'])}",
    ]
    lines += [
        f".model QSTAGE {pol} ({' '.join(params)})",
        "* tight tolerances: this netlist is a cross-check",
        ".options reltol=1e-6 abstol=1e-15 vntol=1e-9",
        f".temp {_num(temp_c)}",
        ".op",
        ".end",
    ]
    return "\n".join(lines) + "\n"


def _ngspice() -> str:
    exe = shutil.which("ngspice")
    if exe is None:
        raise SimulatorError("ngspice was not found on PATH; install it (apt-get install ngspice)")
    return exe


@functools.lru_cache(maxsize=1)
def ngspice_version() -> str:
    """The installed ngspice version, e.g. ``"ngspice-39"``."""
    proc = subprocess.run(
        [_ngspice(), "--version"], capture_output=True, text=True, timeout=_TIMEOUT_S, check=False
    )
    match = re.search(r"ngspice-(\S+)", proc.stdout + proc.stderr)
    if match is None:
        raise SimulatorError("could not read the ngspice version")
    return f"ngspice-{match.group(1)}"


def _parse_ascii_raw(text: str) -> dict[str, float]:
    lines = text.splitlines()
    try:
        var_at = next(i for i, s in enumerate(lines) if s.strip() == "Variables:")
        val_at = next(i for i, s in enumerate(lines) if s.strip() == "Values:")
    except StopIteration:
        raise SimulatorError("ngspice rawfile has no Variables/Values section") from None
    names = []
    for s in lines[var_at + 1 : val_at]:
        fields = s.split()
        if len(fields) >= 2:
            names.append(fields[1].lower())
    tokens = " ".join(lines[val_at + 1 :]).split()
    # First point only: an index, then one value per variable.
    if len(tokens) < len(names) + 1:
        raise SimulatorError("ngspice rawfile is truncated")
    values = tokens[1 : len(names) + 1]
    return {name: float(v) for name, v in zip(names, values, strict=True)}


def run_ngspice(netlist: str) -> dict[str, float]:
    """Run a DC operating point in ngspice (batch mode) and read every vector.

    Parameters
    ----------
    netlist : str
        A complete netlist with ``.op`` (as from :func:`write_netlist`).

    Returns
    -------
    dict
        Vector name (lower case, e.g. ``"v(b)"``, ``"i(v_ic)"``) to value in
        volt or ampere.  A source's current is positive flowing into its
        positive node from the circuit.

    Raises
    ------
    SimulatorError
        When ngspice is missing, times out or writes no result.
    """
    exe = _ngspice()
    with tempfile.TemporaryDirectory(prefix="stockbias-spice-") as tmp:
        work = Path(tmp)
        (work / "stage.cir").write_text(netlist)
        env = {**os.environ, "SPICE_ASCIIRAWFILE": "1", "HOME": tmp}
        try:
            proc = subprocess.run(
                [exe, "-b", "-r", "stage.raw", "stage.cir"],
                cwd=work, env=env, capture_output=True, text=True,
                timeout=_TIMEOUT_S, check=False,
            )
        except subprocess.TimeoutExpired:
            raise SimulatorError(f"ngspice did not finish within {_TIMEOUT_S:g} s") from None
        raw = work / "stage.raw"
        if not raw.exists():
            tail = " | ".join((proc.stderr or proc.stdout).strip().splitlines()[-3:])
            raise SimulatorError(f"ngspice wrote no result (exit {proc.returncode}): {tail}")
        return _parse_ascii_raw(raw.read_text())


def spice_operating_point(
    network: Network | str,
    resistances: Mapping[str, float],
    polarity: str,
    vcc: float,
    vee: float | None,
    model_card: Mapping[str, float],
    temp_c: float,
) -> dict[str, float]:
    """ngspice's operating point of one stage in stockbias's conventions.

    Parameters are those of :func:`write_netlist`.

    Returns
    -------
    dict
        ``vb, vc, ve`` (volt, signed against ground), ``ic, ib, ie`` (ampere,
        positive in normal operation), ``vce, vbe, vbc`` (volt, polarity
        oriented).
    """
    sign = polarity_sign(polarity)
    result = run_ngspice(
        write_netlist(network, resistances, polarity, vcc, vee, model_card, temp_c)
    )
    vb, vc, ve = result["v(b)"], result["v(c)"], result["v(e)"]
    ic = sign * result["i(v_ic)"]
    ib = sign * result["i(v_ib)"]
    return {
        "vb": vb,
        "vc": vc,
        "ve": ve,
        "ic": ic,
        "ib": ib,
        "ie": ic + ib,
        "vce": sign * (vc - ve),
        "vbe": sign * (vb - ve),
        "vbc": sign * (vb - vc),
    }
