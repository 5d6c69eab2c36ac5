"""Registry of bias networks, one module each behind :class:`Network`."""

from __future__ import annotations

from stockbias.topologies.base import (
    FIXED_NODES,
    NODES,
    TERMINAL_NODES,
    Network,
    Role,
    polarity_sign,
    rail_voltages,
)
from stockbias.topologies.collector_feedback import COLLECTOR_FEEDBACK
from stockbias.topologies.divider import DIVIDER
from stockbias.topologies.dual_supply import DUAL_SUPPLY
from stockbias.topologies.fixed_base import FIXED_BASE

__all__ = [
    "FIXED_NODES",
    "NETWORKS",
    "NODES",
    "TERMINAL_NODES",
    "Network",
    "Role",
    "get_network",
    "polarity_sign",
    "rail_voltages",
]

NETWORKS: dict[str, Network] = {
    n.name: n for n in (DIVIDER, COLLECTOR_FEEDBACK, DUAL_SUPPLY, FIXED_BASE)
}


def get_network(name: str | Network) -> Network:
    """The network called ``name`` (a :class:`Network` passes through).

    Raises
    ------
    ValueError
        For an unknown name; the message lists the valid names.
    """
    if isinstance(name, Network):
        return name
    try:
        return NETWORKS[name]
    except (KeyError, TypeError):
        valid = ", ".join(sorted(NETWORKS))
        raise ValueError(f"unknown network {name!r}; valid networks: {valid}") from None
