"""The exponential search with model-card transistors equals an exhaustive enumeration.

Each transistor of a generated shelf gets an invented card with low-current
recombination (ISE), high injection (IKF, here near the design current), a reverse Early
voltage and series resistances, so the cut of :mod:`stockbias.search.exp_cut` runs on
the full Gummel–Poon device.  The reference is ``tests/test_search_exhaustive.py``'s
enumeration of every assignment and vertex, then the full analysis (no search code).
"""

from __future__ import annotations

from dataclasses import replace

import pytest
from test_search_exhaustive import OBJECTIVE_SETS, _exhaustive, _job, _search_keys, _shelf

from stockbias.device_data import DeviceCard
from stockbias.search.design import design


def _with_cards(inv, ikf: float):
    out = []
    for k, q in enumerate(inv.transistors):
        card = {"is": 6e-15 * (1 + 0.3 * k), "bf": q.hfe_max * 1.1, "ise": 4e-14, "ne": 1.6,
                "ikf": ikf, "var": 30.0, "vaf": 60.0, "br": 3.0, "rb": 25.0, "re": 0.5,
                "rc": 1.5, "xtb": 1.5, "tnom": 27.0}
        dc = DeviceCard(card, f"card C{k} (generated)", "card", (1e-5, 0.1))
        out.append(replace(q, card=dc, is_a=card["is"], br=3.0, vaf_v=60.0, xtb=1.5,
                           assumed=q.assumed - {"is_a", "br", "vaf_v", "xtb"}))
    return replace(inv, transistors=tuple(out))


CASES = [
    # (seed, topology, lines, transistors, window %, build, objectives, ambient, IKF A)
    (41, "divider", 7, 2, 35, 5, 0, (0, 50), 3e-3),
    (43, "dual_supply", 12, 2, 30, 5, 1, (0, 50), 5e-3),
    (42, "collector_feedback", 14, 2, 60, 5, 0, (25, 25), 6e-3),  # none: both agree
]


@pytest.mark.parametrize("case", CASES, ids=[f"seed{c[0]}-{c[1]}" for c in CASES])
def test_card_search_matches_exhaustive(case):
    seed, topology, n_lines, n_q, window, build, obj, temps, ikf = case
    inv = _with_cards(_shelf(seed, n_lines, n_q, build, False), ikf)
    job = _job(seed, topology, window, build, OBJECTIVE_SETS[obj], temps)
    job = replace(job, search=replace(job.search, model="exponential"))
    expected = _exhaustive(job, inv, 3)
    result = design(job, inv, top=3)
    # source: the exhaustive enumeration with the same full card model
    assert _search_keys(job, result) == expected, (result.status, result.stats)
    if expected:
        assert result.status == "optimal"
        assert all(d.check.ok for d in result.designs)
    else:
        assert result.status == "infeasible"
