"""The shortcuts of the exponential model's fast path give the numbers of the long way.

Sources: each shortcut against the computation it replaces, written out here or taken
from the general path of the same code: the Gummel–Poon current equations with a card's
absent terms (ISC, IKR, VAR) as explicit zero arrays (every term computed) against the
scalar zeros that skip them; the two-axis vertex grid of ``vertex_check`` against the
one-axis vertices of ``worst_case.vertex_points``; the remembered card device against a
fresh build; the operating point of a model-card stage against a Newton solve of the
two junction equations written in this file.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from stockbias.analysis import stage as stage_mod
from stockbias.analysis.gp_dc import GPDevice, as_gummel_poon, device_at, junction_currents
from stockbias.analysis.operating_point import solve_exponential
from stockbias.analysis.stage import DeviceSpec, ResistorSpec, StageSpec
from stockbias.analysis.worst_case import vertex_points
from stockbias.search.prepass import _vertex_grid

# an invented card in the style of a small NPN with an early gain roll-off
CARD = {"is": 9e-15, "bf": 300.0, "nf": 1.0, "vaf": 85.0, "ikf": 0.012, "ise": 3e-14,
        "ne": 1.55, "br": 3.0, "nr": 1.0, "xtb": 1.5, "xti": 3.0, "eg": 1.11, "rb": 10.0,
        "re": 0.3, "rc": 1.0}


def _device(**zero_as) -> GPDevice:
    d = device_at(CARD, 40.0)
    vals = {f: getattr(d, f) for f in GPDevice.__dataclass_fields__}
    vals.update(zero_as)
    return GPDevice(**vals)


def test_skipped_zero_terms_equal_the_full_equations_bit_for_bit() -> None:
    rng = np.random.default_rng(7)
    vbe = rng.uniform(0.3, 0.85, 500)
    vbc = np.concatenate([rng.uniform(-8.0, 0.0, 400), rng.uniform(0.3, 0.8, 100)])
    zeros = np.zeros(500)
    # source: every term computed (array zeros are not skipped) vs the scalar-zero path
    full = junction_currents(vbe, vbc, _device(isc=zeros, inv_ikr=zeros, inv_var=zeros))
    fast = junction_currents(vbe, vbc, _device(isc=0.0, inv_ikr=0.0, inv_var=0.0))
    for a, b in zip([full[0], full[1], *full[2], *full[3]],
                    [fast[0], fast[1], *fast[2], *fast[3]], strict=True):
        np.testing.assert_array_equal(np.broadcast_to(a, (500,)), np.broadcast_to(b, (500,)))
    # no knee currents at all: qb is q1 alone
    full = junction_currents(vbe, vbc, _device(inv_ikf=zeros, isc=zeros, inv_ikr=zeros))
    fast = junction_currents(vbe, vbc, _device(inv_ikf=0.0, isc=0.0, inv_ikr=0.0))
    for a, b in zip([full[0], full[1], *full[2], *full[3]],
                    [fast[0], fast[1], *fast[2], *fast[3]], strict=True):
        np.testing.assert_array_equal(np.broadcast_to(a, (500,)), np.broadcast_to(b, (500,)))


def _spec(model: str = "exponential", card=None) -> StageSpec:
    values = {"R1": np.array([1.2e3, 1.5e3, 2.2e3]), "R2": np.array([390.0, 470.0, 560.0]),
              "RC": np.array([47.0, 56.0, 68.0]), "RE": np.array([56.0, 47.0, 39.0])}
    res = {r: ResistorSpec(v, 0.05, 0.005) for r, v in values.items()}
    dev = DeviceSpec("NPN", 200, 400, 0.6, 0.75, 0.2, 0.0, pd_max_w=0.5, card=card,
                     is_a=None if card is None else card["is"], br=3.0, vaf_v=85.0)
    return StageSpec("divider", res, dev, vcc=12.0, vcc_tol=0.05, vee=None, vee_tol=0.0,
                     ambient_min_c=0.0, ambient_max_c=50.0, model=model, load=600.0)


def _rows(point, shape) -> np.ndarray:
    cols = [point.vcc, *(point.r[k] for k in sorted(point.r)), point.hfe, point.vbe,
            point.icbo, point.ambient_c]
    return np.stack([np.broadcast_to(np.asarray(c, dtype=float), shape).reshape(3, -1)
                     for c in cols], axis=-1)


def test_vertex_grid_holds_the_same_vertices_as_vertex_points() -> None:
    spec = _spec()
    one, _bits = vertex_points(spec)
    two = _vertex_grid(spec)
    k = len(spec.axes())
    assert k == 8                        # VCC, four resistors, hFE, VBE, ambient
    a = _rows(one, (3, 2 ** k))
    b = _rows(two, (3, 2 ** 5, 2 ** 3))
    for d in range(3):                   # source: vertex_points, as sets of rows
        assert sorted(map(tuple, a[d])) == sorted(map(tuple, b[d]))
        assert len(set(map(tuple, b[d]))) == 2 ** k


def test_remembered_card_device_equals_a_fresh_build() -> None:
    spec = _spec(card=CARD)
    point = _vertex_grid(spec)
    stage_mod._CARD_GP.clear()
    first = stage_mod._card_gummel_poon(spec.device, point, point.ambient_c)
    again = stage_mod._card_gummel_poon(spec.device, point, point.ambient_c)
    fresh = stage_mod._card_device(spec.device, point, point.ambient_c)
    assert again is first                # remembered
    for name in ("is_a", "bf", "br", "ise", "isc", "ikf", "vaf"):
        np.testing.assert_array_equal(np.asarray(getattr(first, name)),
                                      np.asarray(getattr(fresh, name)))


def _reference_point(r1, r2, rc, re, vcc, dev: GPDevice):
    """The divider stage solved here: the base divider's Thevenin source, KVL round the
    base loop and the collector loop, Newton on the two intrinsic junction voltages from
    a start far from the answer (0.6 V, −5 V), to a step below 1e-13 V."""
    vth, rth = vcc * r2 / (r1 + r2), r1 * r2 / (r1 + r2)
    vbe, vbc = 0.6, -5.0
    for _ in range(200):
        ib, ic, dib, dic = junction_currents(vbe, vbc, dev)
        ie = ib + ic
        # base loop: Vth − IB·(Rth + RB) − VBE − IE·(RE + re) = 0
        f1 = vth - ib * (rth + dev.rb) - vbe - ie * (re + dev.re)
        # collector loop: VCC − IC·(RC + rc) − VCE − IE·(RE + re) = 0, VCE = VBE − VBC + …
        f2 = vcc - ic * (rc + dev.rc) - (vbe - vbc) - ie * (re + dev.re)
        die = (dib[0] + dic[0], dib[1] + dic[1])
        j = np.array([[-dib[0] * (rth + dev.rb) - 1 - die[0] * (re + dev.re),
                       -dib[1] * (rth + dev.rb) - die[1] * (re + dev.re)],
                      [-dic[0] * (rc + dev.rc) - 1 - die[0] * (re + dev.re),
                       -dic[1] * (rc + dev.rc) + 1 - die[1] * (re + dev.re)]], dtype=float)
        step = np.linalg.solve(j, -np.array([f1, f2], dtype=float))
        step = np.clip(step, -0.05, 0.05)
        vbe, vbc = vbe + step[0], vbc + step[1]
        if np.max(np.abs(step)) < 1e-13:
            break
    ib, ic, _, _ = junction_currents(vbe, vbc, dev)
    return float(ic), float(ib)


@pytest.mark.parametrize(("r1", "r2", "rc", "re", "temp_c"),
                         list(itertools.product((1.2e3, 2.2e3), (390.0, 560.0), (47.0,),
                                                (39.0, 56.0), (0.0, 50.0))))
def test_card_operating_point_matches_a_newton_written_here(r1, r2, rc, re, temp_c) -> None:
    dev = device_at(CARD, temp_c)
    gp = as_gummel_poon(dev)
    op = solve_exponential("divider", {"R1": r1, "R2": r2, "RC": rc, "RE": re}, "NPN", 12.0,
                           None, gp, temp_c + 273.15)
    ic_ref, ib_ref = _reference_point(r1, r2, rc, re, 12.0, dev)
    # source: the Newton solve above (independent start, the same equations)
    assert float(op.ic) == pytest.approx(ic_ref, rel=1e-9)
    assert float(op.ib) == pytest.approx(ib_ref, rel=1e-9)
