"""SPICE ``.model`` cards for bipolar transistors, read as ngspice reads them.

A model library is a text file with one or more cards such as::

    * a comment line
    .MODEL QX NPN (IS=2.1f BF=180 VAF=74 ; trailing comment
    + IKF=0.3 NE=1.5 $ another trailing comment
    + XTB=1.5)

The rules, each checked against ngspice-39 reading the same text
(``tests/test_model_card.py``):

* keywords, model names, types and parameter names are case-insensitive;
* a line starting with ``+`` continues the statement above it; ``*`` comment lines
  and blank lines between a statement and its continuation are skipped;
* ``;`` and ``$`` start a comment that runs to the end of the line;
* the parentheses around the parameters are optional; commas separate like spaces;
  spaces around ``=`` are allowed;
* numbers carry SPICE scale suffixes: ``T G MEG K MIL M U N P F`` (``M`` is milli,
  ``MEG`` is 10⁶); letters after the number and its suffix are ignored, as SPICE
  ignores them (``10pF`` is 10 p, ``1mA`` is 1 m; note ``1e-14F`` is 10⁻²⁹);
* a parameter given twice keeps its last value (listed in :attr:`ModelCard.repeated`).

Where ngspice would silently read something other than what was probably meant, the
reader refuses with a one-line error instead: an RKM code such as ``4k7`` (ngspice
reads 4 k, ignoring the 7), digits after letters (``2x3``), an exponent with no digits
(``2.5e``), a second decimal point (``1..2``), an expression in braces or quotes.

Cards of other device types (diodes, MOSFETs) in the same library are read and kept
with their type; only NPN and PNP cards describe a stock transistor.  Lines outside
``.model`` statements (``.subckt``, element lines, ``.lib``) are skipped.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path

from stockbias.errors import ModelCardError

__all__ = [
    "BJT_PARAMETERS",
    "ModelCard",
    "parse_model_cards",
    "parse_spice_number",
    "read_model_cards",
]

#: Bipolar transistor parameters of the SPICE Gummel–Poon model as ngspice names them
#: (ngspice manual, BJT model parameters; recalled list, aliases checked against ngspice-39).
BJT_PARAMETERS = frozenset({
    "is", "bf", "nf", "vaf", "ikf", "ise", "ne", "br", "nr", "var", "ikr", "isc", "nc",
    "rb", "irb", "rbm", "re", "rc", "cje", "vje", "mje", "tf", "xtf", "vtf", "itf", "ptf",
    "cjc", "vjc", "mjc", "xcjc", "tr", "cjs", "vjs", "mjs", "xtb", "eg", "xti", "kf", "af",
    "fc", "tnom", "level", "subs", "iss", "ns", "tre1", "tre2", "trb1", "trb2", "trc1",
    "trc2", "trm1", "trm2", "tbf1", "tbf2", "tbr1", "tbr2", "tikf1", "tikf2", "tikr1",
    "tikr2", "tis1", "tis2", "tise1", "tise2", "tisc1", "tisc2", "tnf1", "tnf2", "tnr1",
    "tnr2", "tne1", "tne2", "tnc1", "tnc2", "tvaf1", "tvaf2", "tvar1", "tvar2", "titf1",
    "titf2", "ttf1", "ttf2", "ttr1", "ttr2", "tmje1", "tmje2", "tmjc1", "tmjc2", "tmjs1",
    "tmjs2", "tlev", "tlevc", "quasimod", "rco", "vo", "gamma", "qco", "vg", "cn", "d",
    "bvbe", "bvbc", "bvce", "icmax", "ibmax", "vbe_max", "vbc_max", "vce_max", "vbcfwd",
    "nkf", "minbase", "nbvcbo", "nbvebo", "nbvceo",
})

#: Older names ngspice reads as the parameter on the right (checked with ngspice-39).
BJT_ALIASES: Mapping[str, str] = {
    "va": "vaf", "vb": "var", "ik": "ikf", "c2": "ise", "c4": "isc", "pe": "vje",
    "me": "mje", "pc": "vjc", "mc": "mjc", "ps": "vjs", "ms": "mjs", "ccs": "cjs",
}

_SCALE = (("meg", 1e6), ("mil", 25.4e-6), ("t", 1e12), ("g", 1e9), ("k", 1e3),
          ("m", 1e-3), ("u", 1e-6), ("n", 1e-9), ("p", 1e-12), ("f", 1e-15))
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.\-]*")
_BJT_TYPES = frozenset({"npn", "pnp"})


def parse_spice_number(text: str) -> float:
    """A SPICE number (``2.2meg``, ``1e-14``, ``10pF``, ``.5u``) as a float.

    Parameters
    ----------
    text : str
        The number as written in a card.

    Returns
    -------
    float
        Its value, scale suffix applied, trailing unit letters ignored.

    Raises
    ------
    ValueError
        With a message saying why the text is refused.
    """
    body = text.strip()
    match = _NUMBER.match(body)
    if match is None or not body:
        raise ValueError("not a number")
    value = float(match.group(0))
    rest = body[match.end():]
    if rest[:1] in {"e", "E"}:
        raise ValueError("an exponent needs digits after the 'e'")
    if rest[:1] == ".":
        raise ValueError("a second decimal point")
    low = rest.lower()
    for suffix, factor in _SCALE:
        if low.startswith(suffix):
            value *= factor
            low = low[len(suffix):]
            break
    if any(c.isdigit() for c in low):
        raise ValueError("digits after a letter: SPICE would ignore them (an RKM code "
                         "such as 4k7 must be written 4.7k)")
    if low and not low.isalpha():
        raise ValueError("characters after the number that are not unit letters")
    return value


@dataclass(frozen=True)
class ModelCard:
    """One ``.model`` card as read from a library file.

    Attributes
    ----------
    name : str
        The model name as written.
    kind : str
        The device type, upper case (``NPN``, ``PNP``, ``D``, ``NMOS`` …).
    params : Mapping[str, float]
        Parameter values in SPICE units (SI), keys lower case, aliases resolved
        (``va`` is stored as ``vaf``).
    unknown : tuple of str
        Parameters this reader does not know for a bipolar transistor (kept in
        ``params``, listed here).
    repeated : tuple of str
        Parameters given more than once (the last value is kept, as in ngspice).
    file : str
        The library file.
    line : int
        The line the card starts on (1-based).
    """

    name: str
    kind: str
    params: Mapping[str, float]
    unknown: tuple[str, ...] = ()
    repeated: tuple[str, ...] = ()
    file: str = ""
    line: int = 0

    @property
    def is_bjt(self) -> bool:
        """True for an NPN or PNP card."""
        return self.kind.lower() in _BJT_TYPES


def _strip_comment(line: str) -> str:
    cut = len(line)
    for mark in (";", "$"):
        at = line.find(mark)
        if at != -1:
            cut = min(cut, at)
    return line[:cut]


def _statements(text: str) -> list[tuple[int, str]]:
    """Join ``+`` continuation lines; return (first line number, statement text)."""
    out: list[tuple[int, str]] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        stripped = raw.strip()
        if not stripped or stripped.startswith("*"):
            continue
        body = _strip_comment(raw)
        if stripped.startswith("+"):
            if out:
                out[-1] = (out[-1][0], out[-1][1] + " " + _strip_comment(stripped[1:]))
            continue
        out.append((number, body))
    return out


def _tokens(body: str) -> list[str]:
    return body.replace("(", " ").replace(")", " ").replace(",", " ").split()


def _card(number: int, statement: str, file: str) -> ModelCard:
    def fail(message: str, column: str | None = None, text: str | None = None) -> ModelCardError:
        return ModelCardError(message, file=file, line=number, column=column,
                              text=text if text is not None else statement.strip())

    if "{" in statement or "'" in statement or '"' in statement:
        raise fail("an expression in braces or quotes: write the number itself")
    # ".model NAME TYPE rest": parameters may be glued to the type by '('
    head = statement.strip()[len(".model"):]
    parts = head.replace("(", " ( ", 1).split(None, 2)
    if len(parts) < 2:
        raise fail("a .model card needs a name and a type")
    name, kind = parts[0], parts[1]
    if not _NAME.fullmatch(name):
        raise fail("model name must start with a letter", "name", name)
    if not kind.isalnum():
        raise fail("device type must be a word such as NPN or PNP", "type", kind)
    rest = parts[2] if len(parts) > 2 else ""
    rest = re.sub(r"\s*=\s*", "=", rest)
    params: dict[str, float] = {}
    repeated: list[str] = []
    bjt = kind.lower() in _BJT_TYPES
    for token in _tokens(rest):
        key, eq, value = token.partition("=")
        if not eq or not key or not value:
            raise fail("a parameter must read NAME=VALUE", None, token)
        key = key.lower()
        if bjt:
            key = BJT_ALIASES.get(key, key)
        try:
            number_value = parse_spice_number(value)
        except ValueError as exc:
            raise fail(str(exc), key.upper(), value) from None
        if key in params:
            repeated.append(key)
        params[key] = number_value
    unknown = tuple(sorted(k for k in params if bjt and k not in BJT_PARAMETERS))
    return ModelCard(name=name, kind=kind.upper(), params=params, unknown=unknown,
                     repeated=tuple(repeated), file=file, line=number)


def parse_model_cards(text: str, file: str = "<text>") -> list[ModelCard]:
    """Every ``.model`` card in ``text``, in file order.

    Raises
    ------
    ModelCardError
        For a malformed card or a model name defined twice: one line naming the
        file, the line and the text.
    """
    cards: list[ModelCard] = []
    seen: dict[str, int] = {}
    for number, statement in _statements(text):
        if not statement.strip().lower().startswith(".model"):
            continue
        if not statement.strip()[6:7].isspace():
            continue  # ".models" or similar is not a model card
        card = _card(number, statement, file)
        key = card.name.lower()
        if key in seen:
            raise ModelCardError(f"model {card.name!r} defined twice (first on line "
                                 f"{seen[key]})", file=file, line=number,
                                 text=card.name)
        seen[key] = number
        cards.append(card)
    return cards


def read_model_cards(path: str | Path) -> dict[str, ModelCard]:
    """The cards of a library file, keyed by lower-case model name.

    Raises
    ------
    ModelCardError
        For an unreadable file or a malformed card.
    """
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except OSError as exc:
        raise ModelCardError(f"cannot read the model file: {exc.strerror or exc}",
                             file=source) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    return {card.name.lower(): card for card in parse_model_cards(text, source)}
