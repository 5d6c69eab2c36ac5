"""Command-line resistor tokens: every token resolves or is one clear InputError.

Random tokens built from the pieces people type (digits, decimal points, exponents with
signs, SI and letter-code multipliers, ``+``/``|`` pair separators, part-id-like letter
prefixes, units) against a shelf whose ids carry values (``R4K7``): resolution either
returns a role whose every part lies in the plausible range 1 mΩ…10 GΩ with a band
around the nominal, or raises :class:`stockbias.errors.InputError`; never anything else.
"""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from stockbias.assign import resolve_resistor
from stockbias.errors import InputError
from stockbias.parts import Inventory, Resistor

SHELF = Inventory("<value-named shelf>", tuple(
    Resistor(pid, v, tol, 0.25, tempco_ppm=tc, tempco_signed=sgn, qty=10, line=i + 2)
    for i, (pid, v, tol, tc, sgn) in enumerate([
        ("R4K7", 4.7e3, 5.0, -350.0, True), ("R10K", 10e3, 1.0, 100.0, True),
        ("R47K", 47e3, 5.0, 350.0, False), ("MF-1K00", 1e3, 1.0, None, False)])), ())

PIECES = st.sampled_from(["0", "1", "4", "7", "9", "47", "999", ".", "e", "E", "e+", "e-",
                          "+", "-", "|", "k", "K", "M", "MEG", "m", "R", "G", "Ω", "ohm",
                          " ", "R4K7", "R10K", "MF-", "±", "1e308", "1e-9", "x"])
TOKENS = st.lists(PIECES, min_size=1, max_size=6).map("".join)


@settings(max_examples=400, derandomize=True, deadline=None)
@given(TOKENS, st.booleans())
def test_a_token_resolves_or_is_one_input_error(token: str, with_shelf: bool) -> None:
    inv = SHELF if with_shelf else None
    try:
        p = resolve_resistor("R1", token, inv, 5.0, ambient=(0.0, 70.0))
    except InputError as exc:
        assert exc.message and "\n" not in exc.message
        return
    pieces = p.pieces or p.parts
    assert pieces and len(pieces) <= 2
    for piece in pieces:
        assert 1e-3 <= piece.value_ohm <= 1e10
    lo, hi = p.band(0.0, 70.0)
    assert math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= p.value <= hi
    assert p.rating > 0 and math.isfinite(p.rating)
    if inv is not None and not p.in_stock:
        # an unstocked value never looks like one of this shelf's ids
        assert not token.upper().startswith(("R", "MF"))
