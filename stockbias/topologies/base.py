"""The declarative description every bias network shares.

A network is a set of resistor *roles*, each tied between two of six nodes:
the transistor terminals ``B``, ``C``, ``E``, the collector-side rail
``RAIL_C``, the emitter-side rail ``RAIL_E`` and ground ``GND``.  Roles are
named by function so that a PNP stage is the true mirror of the NPN one
(DESIGN §2).  Each role is oriented: current flows from ``node_a`` to
``node_b`` in a normally biased NPN stage (and the other way round in the
mirrored PNP stage).

An optional role may be absent; an absent role is a short between its two
nodes.  In resistance arrays, absence is spelled ``0.0`` (or the key is left
out of the mapping); the solvers treat it as an ideal short, exactly.

Rails (volts, signed against ground):

========================  =========  =========
stage                     RAIL_C     RAIL_E
========================  =========  =========
NPN, single supply        +VCC       0
NPN, ``dual_supply``      +VCC       VEE (< 0)
PNP, single supply        0          +VCC
PNP, ``dual_supply``      VEE (< 0)  +VCC
========================  =========  =========
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np

__all__ = [
    "FIXED_NODES",
    "NODES",
    "TERMINAL_NODES",
    "ActiveClosedForm",
    "Network",
    "Role",
    "polarity_sign",
    "rail_voltages",
]

TERMINAL_NODES = ("B", "C", "E")
FIXED_NODES = ("RAIL_C", "RAIL_E", "GND")
NODES = TERMINAL_NODES + FIXED_NODES

# (r, v_rail_c, v_rail_e, beta, vbe, icbo) -> (ib, ic, vb, vc, ve), all in the
# NPN frame (a PNP stage is solved as the NPN stage with every voltage negated).
ActiveClosedForm = Callable[..., tuple[np.ndarray, ...]]


@dataclass(frozen=True)
class Role:
    """One resistor position of a bias network.

    Attributes
    ----------
    name : str
        Role name, a contract (``R1``, ``R2``, ``RC``, ``RE``, ``RB``).
    node_a, node_b : str
        The nodes it joins; normal NPN current flows from ``node_a`` to ``node_b``.
    optional : bool
        True when the role may be left out (then it is a short).
    description : str
        One line in the trade's words.
    """

    name: str
    node_a: str
    node_b: str
    optional: bool = False
    description: str = ""

    def __post_init__(self) -> None:
        for node in (self.node_a, self.node_b):
            if node not in NODES:
                raise ValueError(f"role {self.name}: unknown node {node!r}, valid: {NODES}")
        if self.node_a == self.node_b:
            raise ValueError(f"role {self.name}: both ends on node {self.node_a}")
        if self.node_a in FIXED_NODES and self.node_b in FIXED_NODES:
            raise ValueError(f"role {self.name}: joins two fixed nodes")


@dataclass(frozen=True)
class Network:
    """A bias network: its roles and how its rails are fed.

    Attributes
    ----------
    name : str
        Registry name (``divider``, ``collector_feedback``, ``dual_supply``, ``fixed_base``).
    roles : tuple of Role
        The resistor positions.
    description : str
        One line in the trade's words.
    supply : {"single", "dual"}
        ``"dual"`` when the emitter-side rail of the NPN stage is the negative rail VEE.
    active_closed_form : callable
        Closed-form active-region solution with constant VBE (NPN frame), the
        fast path of :func:`stockbias.analysis.operating_point.solve_constant_vbe`.
    """

    name: str
    roles: tuple[Role, ...]
    description: str
    supply: Literal["single", "dual"]
    active_closed_form: ActiveClosedForm

    def __post_init__(self) -> None:
        names = [r.name for r in self.roles]
        if len(set(names)) != len(names):
            raise ValueError(f"network {self.name}: duplicate role names {names}")
        if self.supply not in ("single", "dual"):
            raise ValueError(f"network {self.name}: supply must be 'single' or 'dual'")
        # Every terminal node needs a resistive path, and at most one optional
        # role per terminal node (its short current then follows from KCL).
        for node in TERMINAL_NODES:
            at_node = [r for r in self.roles if node in (r.node_a, r.node_b)]
            if not at_node:
                raise ValueError(f"network {self.name}: node {node} is floating")
            if sum(r.optional for r in at_node) > 1:
                raise ValueError(f"network {self.name}: two optional roles at node {node}")

    @property
    def role_names(self) -> tuple[str, ...]:
        """All role names in declaration order."""
        return tuple(r.name for r in self.roles)

    @property
    def required_roles(self) -> tuple[str, ...]:
        """Roles that must be fitted."""
        return tuple(r.name for r in self.roles if not r.optional)

    @property
    def optional_roles(self) -> tuple[str, ...]:
        """Roles that may be left out (a short)."""
        return tuple(r.name for r in self.roles if r.optional)

    def role(self, name: str) -> Role:
        """The role called ``name``; ValueError listing the valid names otherwise."""
        for r in self.roles:
            if r.name == name:
                return r
        raise ValueError(f"network {self.name} has no role {name!r}; roles: {self.role_names}")


def polarity_sign(polarity: str) -> float:
    """+1.0 for ``"NPN"``, -1.0 for ``"PNP"`` (case-insensitive); ValueError otherwise."""
    p = str(polarity).strip().upper()
    if p == "NPN":
        return 1.0
    if p == "PNP":
        return -1.0
    raise ValueError(f"polarity must be 'NPN' or 'PNP', got {polarity!r}")


def rail_voltages(
    network: Network,
    polarity: str,
    vcc: float | np.ndarray,
    vee: float | np.ndarray | None = None,
) -> dict[str, np.ndarray]:
    """Voltages of the fixed nodes of a stage, signed against ground.

    Parameters
    ----------
    network : Network
        The bias network.
    polarity : {"NPN", "PNP"}
        Transistor polarity.
    vcc : float or ndarray
        Positive supply, volt (> 0).
    vee : float or ndarray, optional
        Negative supply, volt, signed (< 0); required by ``dual_supply``
        networks, ignored by the others.

    Returns
    -------
    dict
        ``{"RAIL_C": ..., "RAIL_E": ..., "GND": 0}`` in volt, broadcast arrays.
    """
    sign = polarity_sign(polarity)
    vcc_a = np.asarray(vcc, dtype=float)
    if np.any(vcc_a <= 0):
        raise ValueError("vcc must be positive (volt)")
    if network.supply == "dual":
        if vee is None:
            raise ValueError(f"network {network.name} needs the negative supply vee")
        vee_a = np.asarray(vee, dtype=float)
        if np.any(vee_a >= 0):
            raise ValueError("vee must be negative (volt, signed)")
        hot, cold = np.broadcast_arrays(vcc_a, vee_a)
    else:
        hot = vcc_a
        cold = np.zeros_like(vcc_a)
    if sign > 0:
        rail_c, rail_e = hot, cold
    else:
        rail_c, rail_e = cold, hot
    return {
        "RAIL_C": np.array(rail_c, dtype=float),
        "RAIL_E": np.array(rail_e, dtype=float),
        "GND": np.zeros_like(rail_c, dtype=float),
    }
