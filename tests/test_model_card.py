"""The SPICE ``.model`` card reader against ngspice reading the same text.

Expected values in the tables below were read from ngspice-39 (``print @model[param]``
after loading a card with that text); the live tests at the end re-run ngspice on
generated cards and compare every parameter.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

from stockbias.errors import ModelCardError
from stockbias.model_card import (
    BJT_PARAMETERS,
    parse_model_cards,
    parse_spice_number,
    read_model_cards,
)

HAS_NGSPICE = shutil.which("ngspice") is not None

# text: value ngspice-39 reads (BF=<text> on a card, then print @m[bf])
NGSPICE_NUMBERS = {
    "1f": 1e-15,
    "2mil": 5.08e-5,
    "3MEGohm": 3e6,
    "3Mohm": 3e-3,       # M is milli, as in every SPICE
    "1e-3k": 1.0,
    "5.e2": 500.0,
    ".5u": 5e-7,
    "1E+2x": 100.0,
    "1.5e-14A": 1.5e-14,  # A is not a scale suffix: ignored
    "1a": 1.0,            # nor is a (no atto in ngspice-39)
    "2V": 2.0,
    "3g": 3e9,
    "3t": 3e12,
    "+4": 4.0,
    "1e3meg": 1e9,
    "1mA": 1e-3,
    "1.0E-14F": 1e-29,    # F after the exponent is femto, not farad
    "10pF": 1e-11,
    "1MEG": 1e6,
    "1Meg": 1e6,
    "1.e-3": 1e-3,
    "1e3k": 1e6,
    "-1.5": -1.5,
    "4.7K": 4.7e3,
    "0.1mil": 2.54e-6,
}

# text ngspice reads as something other than was probably meant: refused
# (ngspice-39 value in the comment)
REFUSED_NUMBERS = {
    "4k7": "RKM",          # ngspice: 4000
    "2x3": "digits after a letter",  # ngspice: 2
    "2.5e": "exponent",    # ngspice: 2.5
    "1e-": "exponent",     # ngspice: 1
    "1..2": "decimal point",  # ngspice: 1
    "abc": "not a number",
    "": "not a number",
}


@pytest.mark.parametrize(("text", "expected"), NGSPICE_NUMBERS.items())
def test_numbers_read_as_ngspice_reads_them(text: str, expected: float) -> None:
    assert parse_spice_number(text) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(("text", "words"), REFUSED_NUMBERS.items())
def test_ambiguous_numbers_are_refused(text: str, words: str) -> None:
    with pytest.raises(ValueError, match=words):
        parse_spice_number(text)


CARD_TEXT = """\
* a small library
.MODEL MA npn (IS=2e-15 BF=150 ; trailing comment bf=999
* a comment line between a statement and its continuation
+ VAF=80 $ dollar comment vaf=1
+ nf=1.01)
.model mb PNP is=3e-15 bf=77 br=2
.Model mc NPN(is=4e-15,bf=88, br=3 ,vaf=50)
.model md npn ( IS = 5e-15 BF= 99 )
.model me npn (is=6e-15 bf=50$x
+ br=4)
.model dz D (is=1e-14 n=1.8)
Q1 c b 0 ma
.subckt amp a b
.ends
.model mr npn (bf=100 bf=200 c2=1e-13 c4=2e-13 va=70 ik=0.3 vb=20 xyz=3 level=1)
"""

# model: {param: value}, read from ngspice-39 on CARD_TEXT
CARD_EXPECTED = {
    "ma": {"is": 2e-15, "bf": 150.0, "vaf": 80.0, "nf": 1.01},
    "mb": {"is": 3e-15, "bf": 77.0, "br": 2.0},
    "mc": {"is": 4e-15, "bf": 88.0, "br": 3.0, "vaf": 50.0},
    "md": {"is": 5e-15, "bf": 99.0},
    "me": {"is": 6e-15, "bf": 50.0, "br": 4.0},
    "mr": {"bf": 200.0, "ise": 1e-13, "isc": 2e-13, "vaf": 70.0, "ikf": 0.3, "var": 20.0},
}


def test_card_syntax() -> None:
    cards = {c.name.lower(): c for c in parse_model_cards(CARD_TEXT, "lib.txt")}
    assert sorted(cards) == ["dz", "ma", "mb", "mc", "md", "me", "mr"]
    for name, params in CARD_EXPECTED.items():
        for key, value in params.items():
            assert cards[name].params[key] == pytest.approx(value, rel=1e-12), (name, key)
    assert cards["ma"].params["bf"] == 150.0  # the comment's bf=999 is not read
    assert cards["ma"].kind == "NPN" and cards["mb"].kind == "PNP"
    assert cards["ma"].line == 2 and cards["mr"].line == 15
    assert cards["ma"].name == "MA"
    assert cards["dz"].kind == "D" and not cards["dz"].is_bjt
    assert cards["mr"].unknown == ("xyz",)
    assert cards["mr"].repeated == ("bf",)
    assert set(cards["ma"].params) <= BJT_PARAMETERS


@pytest.mark.parametrize(("text", "line", "words"), [
    (".model q1 npn (bf=4k7)", 1, "parameter 'BF'.*RKM.*text '4k7'"),
    ("* lib\n.model q1 npn (bf={100*2})", 2, "expression"),
    (".model q1", 1, "name and a type"),
    (".model q1 npn (bf)", 1, "NAME=VALUE.*text 'bf'"),
    (".model q1 npn (bf=)", 1, "NAME=VALUE"),
    (".model q1 npn bf=100\n.model Q1 pnp bf=50", 2, "defined twice.*line 1"),
    (".model 1q npn bf=100", 1, "start with a letter"),
])
def test_malformed_cards_are_one_line_errors(text: str, line: int, words: str) -> None:
    with pytest.raises(ModelCardError) as info:
        parse_model_cards(text, "lib/models.txt")
    message = info.value.one_line()
    assert message.startswith(f"lib/models.txt:{line}:")
    assert "\n" not in message
    assert re.search(words, message), message


def test_read_file_and_errors(tmp_path: Path) -> None:
    path = tmp_path / "parts.lib"
    path.write_bytes(b"\xef\xbb\xbf.model QA npn (is=1f bf=100)\r\n+ vaf=60\r\n")
    cards = read_model_cards(path)
    assert cards["qa"].params == {"is": 1e-15, "bf": 100.0, "vaf": 60.0}
    with pytest.raises(ModelCardError, match="cannot read the model file"):
        read_model_cards(tmp_path / "missing.lib")


# ---- live comparison with ngspice on generated cards -------------------------------

_SUFFIXES = [("", 1.0), ("f", 1e-15), ("p", 1e-12), ("n", 1e-9), ("u", 1e-6),
             ("m", 1e-3), ("k", 1e3), ("meg", 1e6), ("g", 1e9), ("mil", 25.4e-6)]
_PARAMS = ["is", "bf", "br", "nf", "nr", "vaf", "var", "ikf", "ikr", "ise", "ne", "isc",
           "nc", "rb", "re", "rc", "xtb", "xti", "eg", "tnom"]


def _random_card(rng: np.random.Generator, index: int) -> tuple[str, dict[str, float]]:
    """A card with random formatting: case, parentheses, commas, continuations,
    comments and number forms; and the values it means."""
    chosen = rng.choice(_PARAMS, size=int(rng.integers(3, 9)), replace=False)
    pieces, values = [], {}
    for key in chosen:
        mantissa = round(float(rng.uniform(0.1, 999)), int(rng.integers(0, 4)))
        suffix, scale = _SUFFIXES[int(rng.integers(len(_SUFFIXES)))]
        text = f"{mantissa:g}"
        if rng.random() < 0.3:
            exponent = int(rng.integers(-3, 4))
            text = f"{mantissa:g}e{exponent:+d}"
            mantissa *= 10.0 ** exponent
        if rng.random() < 0.5:
            suffix = suffix.upper()
        # unit letters that are not scale letters: ignored by SPICE and by the reader
        unit = "" if rng.random() < 0.7 else str(rng.choice(["V", "A", "ohm", "s"]))
        number = f"{text}{suffix}{unit}"
        name = key.upper() if rng.random() < 0.5 else key
        sep = " = " if rng.random() < 0.2 else "="
        pieces.append(f"{name}{sep}{number}")
        values[key] = mantissa * scale
    kind = rng.choice(["NPN", "npn", "Pnp"])
    model = f"m{index}"
    lines = [f".{rng.choice(['model', 'MODEL', 'Model'])} {model} {kind}"]
    paren = rng.random() < 0.7
    lines[0] += " (" if paren else " "
    for i, piece in enumerate(pieces):
        joiner = ", " if rng.random() < 0.2 else " "
        if i and rng.random() < 0.3:
            if rng.random() < 0.3:
                lines.append("* comment between continuation lines")
            lines.append("+ " + piece)
        else:
            lines[-1] += (joiner if i else "") + piece
        if rng.random() < 0.15:
            lines[-1] += rng.choice([" ; note bf=1", " $ note vaf=2"])
            lines.append("+ ")
    if paren:
        lines.append("+ )")
    return "\n".join(lines), values


def _ngspice_values(card_text: str, names: list[str], params: dict[str, list[str]]
                    ) -> dict[tuple[str, str], float]:
    lines = ["* generated cards", card_text]
    for i, name in enumerate(names):
        lines.append(f"Q{i} c b 0 {name}")
    lines += ["V1 c 0 5", "V2 b 0 0.6", ".control"]
    for name in names:
        for key in params[name]:
            lines.append(f"print @{name}[{key}]")
    lines += [".endc", ".end"]
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "cards.cir"
        path.write_text("\n".join(lines) + "\n")
        proc = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True,
                              timeout=60, check=False, cwd=tmp, env={**os.environ, "HOME": tmp})
    found = {}
    for match in re.finditer(r"^@(\w+)\[(\w+)\] = (\S+)", proc.stdout, re.MULTILINE):
        found[(match.group(1), match.group(2))] = float(match.group(3))
    return found


@pytest.mark.spice
@pytest.mark.skipif(not HAS_NGSPICE, reason="ngspice is not installed")
def test_generated_cards_match_ngspice() -> None:
    rng = np.random.default_rng(20261202)
    texts, expected = [], {}
    for i in range(60):
        text, values = _random_card(rng, i)
        texts.append(text)
        expected[f"m{i}"] = values
    library = "\n".join(texts)
    cards = {c.name: c for c in parse_model_cards(library, "generated.lib")}
    spice = _ngspice_values(library, list(expected), {k: list(v) for k, v in expected.items()})
    compared = 0
    for name, values in expected.items():
        for key, value in values.items():
            ours = cards[name].params[key]
            assert ours == pytest.approx(value, rel=1e-9), (name, key, library)
            assert (name, key) in spice, (name, key)
            # ngspice prints 7 significant digits
            assert ours == pytest.approx(spice[(name, key)], rel=1e-6), (name, key)
            compared += 1
    assert compared > 200
