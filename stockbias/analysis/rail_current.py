"""Currents a bias network draws: from the supply, and in the divider.

Both are derived from the solved branch currents (:class:`OperatingPoint`), in the
NPN frame where every role's current is oriented from ``node_a`` to ``node_b``.

Supply current
    The current out of the collector-side rail (``RAIL_C``) and the current into the
    emitter-side rail (``RAIL_E``).  On a single supply the two are equal (every branch
    returns to the other rail); on a split supply (``dual_supply``, base returned to
    ground) they differ by the base-return current, and the larger is the supply
    current: the one a regulator or a battery must deliver.  A, ≥ 0 in normal bias.

Divider ratio
    The current in the lower divider leg R2 as a multiple of the base current,
    I(R2)/IB (divider network only).  The trade's rule of thumb asks for at least 10
    so that the base current hardly loads the divider (common practice).  Dimensionless;
    ``inf`` where IB ≤ 0.
"""

from __future__ import annotations

import numpy as np

from ..topologies import Network
from .operating_point import OperatingPoint

__all__ = ["divider_ratio", "supply_current"]


def _out_of(network: Network, op: OperatingPoint, node: str) -> np.ndarray:
    """Net current leaving fixed node ``node`` through the roles, A (NPN frame)."""
    total = np.zeros(op.shape)
    for role in network.roles:
        if role.node_a == node:
            total = total + np.asarray(op.resistor_current(role.name), dtype=float)
        elif role.node_b == node:
            total = total - np.asarray(op.resistor_current(role.name), dtype=float)
    return total


def supply_current(network: Network, op: OperatingPoint) -> np.ndarray:
    """Current drawn from the supply at each point, A.

    Parameters
    ----------
    network : Network
    op : OperatingPoint
        The solved stage.

    Returns
    -------
    ndarray
        max(current out of RAIL_C, current into RAIL_E), A.
    """
    return np.maximum(_out_of(network, op, "RAIL_C"), -_out_of(network, op, "RAIL_E"))


def divider_ratio(op: OperatingPoint) -> np.ndarray:
    """I(R2)/IB of a divider stage at each point (dimensionless; inf where IB ≤ 0).

    Parameters
    ----------
    op : OperatingPoint
        A solved ``divider`` stage.
    """
    i2 = np.asarray(op.resistor_current("R2"), dtype=float)
    ib = np.asarray(op.ib, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(ib > 0, i2 / np.where(ib > 0, ib, 1.0), np.inf)
