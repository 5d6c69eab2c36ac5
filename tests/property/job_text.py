"""Hypothesis strategies that write job TOML text: a valid job, then mutations.

A purely random text is refused at its first line; starting from a valid job and
changing one to three things (a value of any TOML type or an extreme number, a
key removed or misspelt, a section of the wrong type, a board of stages) reaches
every check of the job reader and, when the job stays valid, the analysis.
"""

from __future__ import annotations

import json

from hypothesis import strategies as st

from stockbias.job import _SECTIONS
from stockbias.job_ranges import PLAUSIBLE

#: A valid one-stage job (TOML value text per key), close to the bundled sample.
BASE: dict[str, dict[str, str]] = {
    "supply": {"volts": "12", "tolerance_pct": "5"},
    "target": {"ic": '"1.5 mA"', "ic_window_pct": "20", "vce_min": '"3 V"'},
    "limits": {"supply_power_max": '"60 mW"', "resistor_derating": "0.5"},
    "environment": {"ambient_min_c": "0", "ambient_max_c": "55"},
    "small_signal": {"load": '"10k"', "re_bypassed": "true"},
    "build": {"quantity": "10", "allow_pairs": "false"},
    "search": {"topology": '"divider"', "model": '"constant_vbe"',
               "objectives": '["cost", "part_count"]', "top": "5", "time_limit_s": "20"},
}

ROLES_VALUES = ["R1=CF-47K", "R2=CF-10K", "RC=CF-4K7", "RE=CF-1K0", "RE=1k+1k", "RC=4k7|4k7",
                "RB=100k", "R1=4.7e+4", "R1=1e308", "R2=-5", "RE=0", "RE=LINK-0R", "RX=1k",
                "R1=", "=1k", "R1=CF-47K+", "R1=|", "RC=1e" + "9" * 50]

_UNIT_WORD = {"V": " V", "A": " A", "W": " W", "ohm": " Ω", "%": "%", "°C": " °C", "s": " s",
              "": ""}
_PREFIXES = ["", "m", "u", "µ", "n", "k", "M", "G", "p", "T"]


def _toml_string(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)


def _toml_float(x: float) -> str:
    if x != x:
        return "nan"
    if x in (float("inf"), float("-inf")):
        return "inf" if x > 0 else "-inf"
    text = repr(x)
    return text if any(c in text for c in ".en") else text + ".0"


def _near_range(key: str) -> st.SearchStrategy[str]:
    """Numbers in and around a key's plausible range, bare or as quantity strings."""
    rng = PLAUSIBLE[key]
    lo, hi = float(rng.low), float(rng.high)
    span = max(abs(lo), abs(hi), 1.0)
    numbers = st.one_of(
        st.sampled_from([lo, hi, 0.0, -lo, -hi, lo * 0.999, hi * 1.001, (lo + hi) / 2]),
        st.floats(min_value=lo, max_value=hi),
        st.floats(min_value=lo, max_value=hi),
        st.floats(min_value=-10 * span, max_value=10 * span),
    )
    bare = numbers.map(_toml_float)
    word = _UNIT_WORD.get(rng.unit, "")
    quoted = st.builds(lambda x, p: _toml_string(f"{x:g} {p}{word.strip()}".strip()),
                       numbers, st.sampled_from(_PREFIXES))
    return st.one_of(bare, quoted)


_anything = st.deferred(lambda: st.one_of(
    st.integers().map(str),
    st.integers(min_value=10**300, max_value=10**400).map(str),
    st.sampled_from(["1" + "0" * 5000, "-" + "9" * 4400, "1e" + "9" * 5000, "0x" + "f" * 5000,
                     "inf", "-inf", "nan", "true", "false", "1979-05-27", "07:32:00",
                     '""', '" "', '"∞"', '"1e999"', '"-0"', '"1e-99999 A"', '"4k7"',
                     '"12 V V"', '"0x10"', "[]", "{}", "[[1], [2]]",
                     "[" * 5000 + "]" * 5000, "[" * 120 + "]" * 120,
                     "{a = " * 400 + "1" + "}" * 400, "'''multi\nline'''",
                     '"' + "9" * 5000 + '"', '"1e' + "9" * 5000 + ' mA"']),
    st.floats(allow_nan=True, allow_infinity=True).map(_toml_float),
    st.text(max_size=15).map(_toml_string),
    st.lists(st.sampled_from(["1", '"cost"', '"x"', "[1]", "{a=1}", "true"]),
             max_size=4).map(lambda items: "[" + ", ".join(items) + "]"),
    st.text(alphabet="abc=[]{}\"'.,#\n 1", max_size=10),      # mostly not TOML at all
))


def _value_for(key: str) -> st.SearchStrategy[str]:
    if key in PLAUSIBLE:
        near = _near_range(key)
        return st.one_of(near, near, near, _anything)
    return _anything


def _render(doc: dict[str, object]) -> str:
    # keys that are not tables go first, where TOML reads them as top-level keys
    lines = [f"{k} = {v}" for k, v in doc.items() if not isinstance(v, (dict, list))]
    for section, body in doc.items():
        if isinstance(body, dict):
            lines.append(f"[{section}]")
            lines += [f"{k} = {v}" for k, v in body.items()]
        elif isinstance(body, list):   # [[stage]] tables, already rendered
            lines += body
    return "\n".join(lines) + "\n"


def _stage_lines(name: str, target: dict[str, str], extra: list[str]) -> list[str]:
    out = ["[[stage]]", f"name = {name}", *extra, "[stage.target]"]
    out += [f"{k} = {v}" for k, v in target.items()]
    return out


@st.composite
def job_documents(draw: st.DrawFn) -> str:
    """The text of a job file: the valid base changed in one to three ways."""
    doc: dict[str, object] = {s: dict(b) for s, b in BASE.items()}
    for _ in range(draw(st.sampled_from([1, 1, 1, 2, 3]))):
        kind = draw(st.sampled_from(["value"] * 8 + ["drop", "unknown", "section_type",
                                                     "board", "board", "duplicate", "raw"]))
        section = draw(st.sampled_from(sorted(_SECTIONS)))
        body = doc.get(section)
        if kind == "value" and isinstance(body, dict):
            key = draw(st.sampled_from(sorted(_SECTIONS[section])))
            body[key] = draw(_value_for(key))
        elif kind == "drop" and isinstance(body, dict) and body:
            body.pop(draw(st.sampled_from(sorted(body))))
        elif kind == "unknown" and isinstance(body, dict):
            body[draw(st.sampled_from(["volt", "ic_windw_pct", "x", "Volts", "tolerance"]))] = "1"
        elif kind == "section_type":
            doc[section] = draw(_anything)
        elif kind == "board" and isinstance(doc.get("target"), dict):
            target = doc.pop("target")
            assert isinstance(target, dict)
            lines = _stage_lines('"a"', target, [])
            second = dict(target)
            key = draw(st.sampled_from(sorted(_SECTIONS["target"])))
            second[key] = draw(_value_for(key))
            extra = draw(st.sampled_from([[], ['transistor = "QN-GP40"'], ["transistor = 5"],
                                          ["target = 5"], ["limits = 5"], ["values = []"],
                                          ['topology = "any"'], ["[stage.limits]", "tj_max = 1"],
                                          ['[stage.values]', 'R1 = "CF-47K"', "RE = 1e999"]]))
            lines += _stage_lines(draw(st.sampled_from(['"b"', '"a"', "1", '""'])), second,
                                  extra)
            doc["stage"] = lines
        elif kind == "duplicate":
            doc["stage"] = ["[[stage]]", "name = \"x\"", "[stage.target]", "ic = 5"] \
                if draw(st.booleans()) else ["stage = 5"]
        elif kind == "raw":
            doc[draw(st.sampled_from(["zzz", "supply", "target"]))] = draw(_anything)
    return _render(doc)


@st.composite
def plausible_jobs(draw: st.DrawFn) -> str:
    """A valid job with one to four numeric keys set anywhere inside their plausible range
    (bare numbers, whole where the key is whole): these pass the reader and reach the
    analysis, so extreme but accepted values are exercised there."""
    doc: dict[str, dict[str, str]] = {s: dict(b) for s, b in BASE.items()}
    numeric = sorted((s, k) for s in doc for k in _SECTIONS[s]
                     if k in PLAUSIBLE and k not in ("ic_min", "ic_max", "negative_volts",
                                                     "negative_tolerance_pct", "seed"))
    for section, key in draw(st.lists(st.sampled_from(numeric), min_size=1, max_size=4,
                                      unique=True)):
        rng = PLAUSIBLE[key]
        if rng.whole:
            value = str(draw(st.integers(min_value=int(rng.low), max_value=int(rng.high))))
        else:
            lo, hi = float(rng.low), float(rng.high)
            x = draw(st.one_of(st.sampled_from([lo, hi]), st.floats(min_value=lo, max_value=hi)))
            if (rng.low_open and x <= lo) or (rng.high_open and x >= hi):
                x = (lo + hi) / 2
            value = _toml_float(x)
        doc[section][key] = value
    return _render(dict(doc))
