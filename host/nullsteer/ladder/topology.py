"""Ladder topologies: how the resistors and relays are wired, as data.

``series-shorting``
    An optional fixed base resistor R0 in series with a chain R1..Rn. Each chain
    resistor has a relay whose normally-closed contact is wired across it: bit i = 0
    leaves the contact closed (R(i+1) shorted), bit i = 1 opens it (R(i+1) in
    circuit). Settings: R0 + sum of the inserted resistors (arithmetic spacing).

``series-shunt``
    The same base + chain on bits 0..n-2, and one more relay (bit n-1) whose
    normally-open contact puts a shunt resistor Rs across the whole base + chain. Each
    chain value appears twice, once as itself and once compressed by the shunt
    (x -> x Rs / (x + Rs)), so the low end of the range gets finer steps: the settings
    spread closer to geometric (ratio) spacing than a plain chain.

In both, the termination path also runs through one pole of the reversal relay
(K_REV) and the normally-closed contact of the open relay (K_OPEN). The
receiver-protect relay (K_PROT) sits across the receiver input, not in this path.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from enum import Enum

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.ladder.network import Contact, Node, Parallel, Resistor, Role, Series


class TopologyName(str, Enum):
    SERIES_SHORTING = "series-shorting"
    SERIES_SHUNT = "series-shunt"


#: Monotone maps from a chain value to a setting, with their inverses (for the search).
Map = tuple[Callable[[float], float], Callable[[float], float]]


@dataclass(frozen=True)
class LadderValues:
    """The resistor values of one build.

    Parameters
    ----------
    base_ohm : float
        Fixed base resistor R0 (0: none).
    chain_ohm : tuple of float
        Chain resistors R1..Rn, ascending; chain resistor i is driven by bit i.
    shunt_ohm : tuple of float
        Shunt resistors (one for ``series-shunt``, none for ``series-shorting``),
        driven by the bits after the chain.
    """

    base_ohm: float
    chain_ohm: tuple[float, ...]
    shunt_ohm: tuple[float, ...] = ()

    @property
    def resistors_ohm(self) -> list[float]:
        """Ladder resistors in bit order (bit i switches ``resistors_ohm[i]``)."""
        return list(self.chain_ohm) + list(self.shunt_ohm)


def _identity() -> Map:
    return (lambda x: x, lambda y: y)


def _shunt_map(p_ohm: float) -> Map:
    def fwd(x: float) -> float:
        return x * p_ohm / (x + p_ohm)

    def inv(y: float) -> float:
        return y * p_ohm / (p_ohm - y) if y < p_ohm else float("inf")

    return (fwd, inv)


@dataclass(frozen=True)
class Topology:
    """A topology: its name, its relay count split, and pure functions of a build.

    Parameters
    ----------
    name : TopologyName
    shunt_relays : int
        Relays used for shunts (the rest of the ladder relays form the chain).
    summary : str
        One line for listings.
    """

    name: TopologyName
    shunt_relays: int
    summary: str

    def chain_relays(self, relays: int) -> int:
        return relays - self.shunt_relays

    def min_relays(self) -> int:
        return self.shunt_relays + 1

    def maps(self, shunt_ohm: tuple[float, ...]) -> list[Map]:
        """Chain value -> setting maps used by the optimiser (ideal contacts)."""
        return [_identity()] + [_shunt_map(p) for p in shunt_ohm]

    def ideal_settings_ohm(self, v: LadderValues) -> np.ndarray:
        """DC value of every mask 0 .. 2**bits - 1 with ideal contacts, ohms (mask order)."""
        n = len(v.chain_ohm)
        masks = np.arange(2 ** (n + len(v.shunt_ohm)))
        bits = (masks[:, None] >> np.arange(n)[None, :]) & 1
        chain = v.base_ohm + bits @ np.asarray(v.chain_ohm, dtype=float).reshape(n)
        if not v.shunt_ohm:
            return chain
        p = v.shunt_ohm[0]
        shunted = ((masks >> n) & 1).astype(bool)
        return np.where(shunted, chain * p / (chain + p), chain)

    def tree(self, v: LadderValues) -> Node:
        """The wiring of this build as a network tree (termination side at the top)."""
        path: list[Node] = [
            Contact("K_REV", Role.REVERSE, note="reversal relay pole, closed in both directions"),
            Contact("K_OPEN", Role.OPEN, note="NC; energised opens the termination"),
        ]
        chain: list[Node] = []
        if v.base_ohm > 0:
            chain.append(Resistor("R0", v.base_ohm, "base, always in circuit"))
        for i, r in enumerate(v.chain_ohm):
            chain.append(Parallel((Resistor(f"R{i + 1}", r),
                                   Contact(f"K{i + 1}", Role.LADDER, i, False,
                                           ))))
        if not v.shunt_ohm:
            return Series(tuple(path + chain))
        n = len(v.chain_ohm)
        shunt = Series((Resistor("Rs", v.shunt_ohm[0], "shunt across the chain"),
                        Contact(f"K{n + 1}", Role.LADDER, n, True,
                                )))
        return Series(tuple(path) + (Parallel((Series(tuple(chain)), shunt)),))


TOPOLOGIES: dict[str, Topology] = {
    TopologyName.SERIES_SHORTING.value: Topology(
        TopologyName.SERIES_SHORTING, 0,
        "base + chain, a shorting relay across each chain resistor"),
    TopologyName.SERIES_SHUNT.value: Topology(
        TopologyName.SERIES_SHUNT, 1,
        "base + chain as series-shorting, plus one relay switching a shunt across it"),
}


def get_topology(name: str, key: str = "topology") -> Topology:
    """The topology called ``name``; unknown names raise ConfigError on ``key``."""
    t = TOPOLOGIES.get(name) if isinstance(name, str) else None
    if t is None:
        raise ConfigError(key, f"unknown topology {name!r} (expected one of: {', '.join(TOPOLOGIES)})")
    return t
