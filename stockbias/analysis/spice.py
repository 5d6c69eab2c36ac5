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
from collections.abc import Mapping, Sequence
from pathlib import Path

from stockbias.analysis.device import TNOM_DEFAULT_C, XTB_DEFAULT
from stockbias.errors import StockbiasError
from stockbias.inert_text import check_spice_name, netlist_comment, netlist_text
from stockbias.topologies import Network, get_network, polarity_sign, rail_voltages

__all__ = [
    "MODEL_CARD_DEFAULTS",
    "SimulatorError",
    "ngspice_version",
    "read_raw_plots",
    "run_ngspice",
    "run_ngspice_plots",
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
# Longest comment line, characters: the caller's own sentences fit; free text is cut earlier.
_COMMENT_LIMIT = 2000


class SimulatorError(StockbiasError):
    """ngspice is missing, failed, or wrote no usable result."""


def _num(x: float) -> str:
    return f"{float(x):.12g}"


#: A full card's further DC terms (SPICE names, SI units), written only when given.
CARD_EXTRAS = ("ise", "ne", "isc", "nc", "ikf", "ikr", "var", "rb", "re", "rc")


def _card(model_card: Mapping[str, float]) -> dict[str, float]:
    missing = {"is_a", "bf"} - set(model_card)
    if missing:
        raise ValueError(f"model card needs {sorted(missing)}")
    unknown = set(model_card) - {"is_a", "bf", *MODEL_CARD_DEFAULTS, *CARD_EXTRAS}
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
    *,
    comments: Sequence[str] = (),
    role_parts: Mapping[str, tuple[str, Sequence[tuple[float, str]]]] | None = None,
    leakage: tuple[float, float] | None = None,
    card_comments: Sequence[str] = (),
    analyses: Sequence[str] = (".op",),
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
        Title line (free text: made inert by :func:`~stockbias.inert_text.netlist_text`).
    comments : sequence of str, optional
        Comment lines put after the title (``* `` is added; free text, made inert).
    role_parts : Mapping, optional
        role → (arrangement, [(ohm, label), ...]) to write a role as its stock
        parts: ``"single"`` (one part), ``"series"`` or ``"parallel"`` (two);
        each label (free text, made inert) becomes a comment line naming the
        element just above it.  Roles not named here are written from
        ``resistances``.
    leakage : (float, float), optional
        (collector–base leakage at 25 °C, ampere; doubling step, °C): a
        behavioural current source from collector to base inside the ammeters
        that follows the circuit temperature (``temper``).
    card_comments : sequence of str, optional
        Comment lines put just above the ``.model`` line (free text, made inert).
    analyses : sequence of str
        Analysis lines written by the caller's code, never from a file (default
        ``.op`` alone); each must be one line of printable ASCII.

    Returns
    -------
    str
        The netlist, ending with ``.end``.  Free text appears only on ``* ``
        comment lines and the title line, as one line of printable ASCII each;
        element, node and model names are from ``[A-Za-z0-9_]``.

    Raises
    ------
    ValueError
        For an unsafe role name or an analysis line that is not one printable line.
    """
    net = get_network(network)
    sign = polarity_sign(polarity)
    pol = "NPN" if sign > 0 else "PNP"
    card = _card(model_card)
    rails = rail_voltages(net, pol, vcc, vee)
    nodes = dict(_NODE_NAMES)
    for a in analyses:
        if not a.isascii() or not a.isprintable():
            raise ValueError(f"analysis line is not one printable ASCII line: {a!r}")
    # The first line is the title, read as text by SPICE; still, never let it look like
    # a card, a comment or a continuation to a reader that skips it differently.
    head = " ".join(netlist_text(title).split()) or "stockbias stage"
    lines = [f"title: {head}" if head[0] in ".*+;$" else head]
    lines += [netlist_comment(c, _COMMENT_LIMIT) for c in comments]
    lines.append(f"* network {net.name}, {pol}; values in ohm, volt, ampere")
    for rail, node in _RAIL_NODE.items():
        v = float(rails[rail])
        if v == 0.0:
            nodes[rail] = "0"
        else:
            nodes[rail] = node
            lines.append(f"V_{rail} {node} 0 DC {_num(v)}")
    for role in net.roles:
        check_spice_name(role.name)
        value = resistances.get(role.name)
        a, b = nodes[role.node_a], nodes[role.node_b]
        if role_parts is not None and role.name in role_parts:
            lines += _part_lines(role.name, a, b, *role_parts[role.name])
            continue
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
    if leakage is not None and leakage[0] > 0:
        icbo25, doubling = leakage
        ends = "qc qb" if pol == "NPN" else "qb qc"
        lines += [
            f"* collector-base leakage: {_num(icbo25)} A at 25 C, doubling every "
            f"{_num(doubling)} C",
            f"B_ICBO {ends} I = {_num(icbo25)} * pow(2, (temper - 25) / {_num(doubling)})",
        ]
    lines += [netlist_comment(c, _COMMENT_LIMIT) for c in card_comments]
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
    params += [f"{k.upper()}={_num(card[k])}" for k in CARD_EXTRAS
               if k in card and math.isfinite(card[k]) and card[k] != 0.0]
    lines += [
        f".model QSTAGE {pol} ({' '.join(params)})",
        "* tight tolerances and a small GMIN: this netlist is a cross-check",
        ".options reltol=1e-6 abstol=1e-15 vntol=1e-9 gmin=1e-15",
        f".temp {_num(temp_c)}",
        *analyses,
        ".end",
    ]
    # Every line is one printable ASCII line: nothing can start a card of its own.
    bad = next((x for x in lines if not (x.isascii() and x.isprintable())), None)
    if bad is not None:
        raise ValueError(f"netlist line is not one printable ASCII line: {bad!r}")
    return "\n".join(lines) + "\n"


def _part_lines(role: str, a: str, b: str, arrangement: str,
                parts: Sequence[tuple[float, str]]) -> list[str]:
    """Element lines of one role written as its stock part(s)."""
    for value, _ in parts:
        if not (float(value) > 0 and math.isfinite(float(value))):
            raise ValueError(f"role {role}: resistance must be finite and > 0 (ohm)")
    # A label is free text (part id, location): it goes on its own comment line
    # naming the element, never onto the element card itself.
    if arrangement == "single" and len(parts) == 1:
        value, label = parts[0]
        name = f"R_{role}"
        return ([netlist_comment(f"{name}: {label}", _COMMENT_LIMIT)] if label else []) + [
            f"{name} {a} {b} {_num(value)}"]
    if arrangement not in ("series", "parallel") or len(parts) != 2:
        raise ValueError(f"role {role}: a pair is 'series' or 'parallel' with two parts")
    (va, la), (vb, lb) = parts
    mid = f"{role.lower()}_mid" if arrangement == "series" else b
    out = [f"* {role}: {arrangement} pair"]
    out += [netlist_comment(f"R_{role}a: {la}", _COMMENT_LIMIT)] if la else []
    out.append(f"R_{role}a {a} {mid} {_num(va)}")
    out += [netlist_comment(f"R_{role}b: {lb}", _COMMENT_LIMIT)] if lb else []
    out.append(f"R_{role}b {mid if arrangement == 'series' else a} {b} {_num(vb)}")
    return out


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


def read_raw_plots(text: str) -> list[tuple[str, dict[str, list[float]]]]:
    """Every plot of an ASCII rawfile: (plot name, vector name → values).

    ngspice writes one plot per analysis (a ``.dc`` sweep before the ``.op``,
    whatever their order in the netlist); real vectors only.
    """
    plots: list[tuple[str, dict[str, list[float]]]] = []
    lines = text.splitlines()
    i = 0
    while i < len(lines):
        if not lines[i].startswith("Plotname:"):
            i += 1
            continue
        name = lines[i].split(":", 1)[1].strip()
        n_vars = n_points = None
        j = i + 1
        while j < len(lines) and lines[j].strip() not in ("Variables:",):
            key, _, value = lines[j].partition(":")
            if key.strip() == "No. Variables":
                n_vars = int(value)
            elif key.strip() == "No. Points":
                n_points = int(value)
            j += 1
        if n_vars is None or n_points is None or j >= len(lines):
            raise SimulatorError(f"ngspice rawfile: plot '{name}' has no header")
        names = [lines[j + 1 + k].split()[1].lower() for k in range(n_vars)]
        j += 1 + n_vars
        if j >= len(lines) or lines[j].strip() != "Values:":
            raise SimulatorError(f"ngspice rawfile: plot '{name}' has no values")
        tokens: list[str] = []
        j += 1
        need = n_points * (n_vars + 1)
        while j < len(lines) and len(tokens) < need:
            tokens.extend(lines[j].split())
            j += 1
        if len(tokens) < need:
            raise SimulatorError(f"ngspice rawfile: plot '{name}' is truncated")
        vectors: dict[str, list[float]] = {v: [] for v in names}
        for p in range(n_points):
            row = tokens[p * (n_vars + 1) + 1:(p + 1) * (n_vars + 1)]
            for v, x in zip(names, row, strict=True):
                vectors[v].append(float(x))
        plots.append((name, vectors))
        i = j
    return plots


def _run_raw(netlist: str) -> str:
    """Run ngspice in batch mode on ``netlist``; the ASCII rawfile's text."""
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
        return raw.read_text()


def run_ngspice_plots(netlist: str) -> list[tuple[str, dict[str, list[float]]]]:
    """Run every analysis of ``netlist`` in ngspice; each plot as :func:`read_raw_plots`."""
    return read_raw_plots(_run_raw(netlist))


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
    return _parse_ascii_raw(_run_raw(netlist))


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
