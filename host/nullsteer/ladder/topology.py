"""Ladder topologies: how the resistors and relays are wired, as data.

``series-shorting``
    An optional fixed base resistor R0 in series with a chain R1..Rn. Each chain
    resistor has a relay whose normally-closed contact is wired across it: bit i = 0
    leaves the contact closed (R(i+1) shorted), bit i = 1 opens it (R(i+1) in
    circuit). Settings: R0 + sum of the inserted resistors (arithmetic spacing).

``series-shunt``
    The same base + chain on bits 0..n-1, and one more relay (bit n) whose
    normally-open contact puts a shunt resistor Rs1 across the whole base + chain. Each
    chain value appears twice, once as itself and once compressed by the shunt
    (x -> x Rs / (x + Rs)), so the low end of the range gets finer steps: the settings
    spread closer to geometric (ratio) spacing than a plain chain.

``series-twin-shunt``
    Two shunt relays (bits n, n+1), each switching its own resistor across the whole
    base + chain: four compressions (none, Rs1, Rs2, Rs1 || Rs2) of the chain.

``series-split-shunt``
    Two shunt relays: Rs1 (bit n) across the whole base + chain, Rs2 (bit n+1) across
    the chain only (the base stays outside it).

A topology is data: its list of shunt spans (``whole`` or ``chain``). Every setting is
``par(B + par(x, Pc), Pw)`` for the chain sum x of the set chain bits, with ``Pc`` the
parallel value of the energised ``chain``-span shunts and ``Pw`` that of the energised
``whole``-span ones (``par(a, inf) = a``); :meth:`Topology.ideal_settings_ohm` and the
network tree of :meth:`Topology.tree` are two independent descriptions of that.

In every topology the termination path also runs through one pole of the reversal
relay (K_REV) and the normally-closed contact of the open relay (K_OPEN). The
receiver-protect relay (K_PROT) sits across the receiver input, not in this path.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import Enum

import numpy as np

from nullsteer.errors import ConfigError
from nullsteer.ladder.network import Contact, Node, Parallel, Resistor, Role, Series


class TopologyName(str, Enum):
    SERIES_SHORTING = "series-shorting"
    SERIES_SHUNT = "series-shunt"
    SERIES_TWIN_SHUNT = "series-twin-shunt"
    SERIES_SPLIT_SHUNT = "series-split-shunt"


class ShuntSpan(str, Enum):
    """What a shunt resistor is switched across."""

    WHOLE = "whole"  # base + chain
    CHAIN = "chain"  # the chain only (base outside)


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
        Shunt resistors in the topology's shunt order, driven by the bits after the chain.
    """

    base_ohm: float
    chain_ohm: tuple[float, ...]
    shunt_ohm: tuple[float, ...] = ()

    @property
    def resistors_ohm(self) -> list[float]:
        """Ladder resistors in bit order (bit i switches ``resistors_ohm[i]``)."""
        return list(self.chain_ohm) + list(self.shunt_ohm)


def par(a, p):
    """``a`` in parallel with ``p`` (``p = inf``: no shunt); works on arrays."""
    a = np.asarray(a, dtype=float)
    if math.isinf(p):
        return a
    with np.errstate(invalid="ignore"):
        return np.where(np.isinf(a), p, a * p / (a + p))


def par_inverse(v, p):
    """The ``a >= 0`` with ``par(a, p) = v`` (inf where ``v >= p``); arrays welcome."""
    v = np.asarray(v, dtype=float)
    if math.isinf(p):
        return v
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(v < p, v * p / np.where(v < p, p - v, 1.0), np.inf)


def _par_g(a: np.ndarray, g: np.ndarray) -> np.ndarray:
    """``a`` in parallel with a conductance ``g`` (siemens; 0: nothing across it)."""
    return a / (1.0 + a * g)


def _parallel_all(values: list[float]) -> float:
    g = sum(1.0 / p for p in values)
    return math.inf if g == 0 else 1.0 / g


@dataclass(frozen=True)
class Topology:
    """A topology: its name, its shunt spans, and pure functions of a build.

    Parameters
    ----------
    name : TopologyName
    shunts : tuple of ShuntSpan
        One entry per shunt relay, in bit order after the chain.
    summary : str
        One line for listings.
    """

    name: TopologyName
    shunts: tuple[ShuntSpan, ...]
    summary: str

    @property
    def shunt_relays(self) -> int:
        return len(self.shunts)

    def chain_relays(self, relays: int) -> int:
        return relays - self.shunt_relays

    def min_relays(self) -> int:
        return self.shunt_relays + 1

    def shunt_maps(self, shunt_ohm: tuple[float, ...]) -> list[tuple[float, float]]:
        """Every shunt state as (Pw, Pc): the parallel value of the energised whole-span
        and chain-span shunts, ohms (inf: none); the all-off state first."""
        out = []
        for state in range(2 ** len(self.shunts)):
            on = [(span, p) for i, (span, p) in enumerate(zip(self.shunts, shunt_ohm))
                  if state >> i & 1]
            out.append((_parallel_all([p for s, p in on if s is ShuntSpan.WHOLE]),
                        _parallel_all([p for s, p in on if s is ShuntSpan.CHAIN])))
        return out

    def settings_batch(self, base_ohm: np.ndarray, chain_ohm: np.ndarray,
                       shunt_ohm: np.ndarray) -> np.ndarray:
        """Ideal-contact DC ohms of many builds at once.

        ``base_ohm`` (R,), ``chain_ohm`` (R, n), ``shunt_ohm`` (R, k) -> (R, 2**(n+k)),
        columns in mask order."""
        base = np.asarray(base_ohm, dtype=float)[:, None]
        chain = np.atleast_2d(np.asarray(chain_ohm, dtype=float))
        shunt = np.asarray(shunt_ohm, dtype=float).reshape(base.shape[0], len(self.shunts))
        n = chain.shape[1]
        bits = ((np.arange(2 ** n)[:, None] >> np.arange(n)[None, :]) & 1).astype(float)
        sums = chain @ bits.T                                           # (R, 2**n)
        blocks = []
        for state in range(2 ** len(self.shunts)):
            g = {ShuntSpan.WHOLE: np.zeros(base.shape), ShuntSpan.CHAIN: np.zeros(base.shape)}
            for i, span in enumerate(self.shunts):
                if state >> i & 1:
                    g[span] = g[span] + 1.0 / shunt[:, i:i + 1]
            blocks.append(_par_g(base + _par_g(sums, g[ShuntSpan.CHAIN]), g[ShuntSpan.WHOLE]))
        return np.concatenate(blocks, axis=1)

    def ideal_settings_ohm(self, v: LadderValues) -> np.ndarray:
        """DC value of every mask 0 .. 2**bits - 1 with ideal contacts, ohms (mask order)."""
        return self.settings_batch(np.array([v.base_ohm]), np.array([v.chain_ohm], dtype=float),
                                   np.array([v.shunt_ohm], dtype=float))[0]

    def tree(self, v: LadderValues) -> Node:
        """The wiring of this build as a network tree (termination side at the top)."""
        path: list[Node] = [
            Contact("K_REV", Role.REVERSE, note="reversal relay pole, closed in both directions"),
            Contact("K_OPEN", Role.OPEN, note="NC; energised opens the termination"),
        ]
        chain: list[Node] = []
        for i, r in enumerate(v.chain_ohm):
            chain.append(Parallel((Resistor(f"R{i + 1}", r),
                                   Contact(f"K{i + 1}", Role.LADDER, i, False))))
        n = len(v.chain_ohm)
        branches: dict[ShuntSpan, list[Node]] = {ShuntSpan.WHOLE: [], ShuntSpan.CHAIN: []}
        for j, (span, p) in enumerate(zip(self.shunts, v.shunt_ohm)):
            where = "base + chain" if span is ShuntSpan.WHOLE else "the chain only"
            branches[span].append(Series((Resistor(f"Rs{j + 1}", p, f"shunt across {where}"),
                                          Contact(f"K{n + j + 1}", Role.LADDER, n + j, True))))
        body: Node = Series(tuple(chain))
        if branches[ShuntSpan.CHAIN]:
            body = Parallel((body, *branches[ShuntSpan.CHAIN]))
        if v.base_ohm > 0:
            body = Series((Resistor("R0", v.base_ohm, "base, always in circuit"), body))
        if branches[ShuntSpan.WHOLE]:
            body = Parallel((body, *branches[ShuntSpan.WHOLE]))
        return _flatten(Series(tuple(path) + (body,)))


def _flatten(node: Node) -> Node:
    """Series inside series merged (one drawing column for the plain chain)."""
    if isinstance(node, Series):
        parts: list[Node] = []
        for p in node.parts:
            q = _flatten(p)
            parts.extend(q.parts if isinstance(q, Series) else (q,))
        return Series(tuple(parts))
    if isinstance(node, Parallel):
        return Parallel(tuple(_flatten(b) for b in node.branches))
    return node


TOPOLOGIES: dict[str, Topology] = {
    TopologyName.SERIES_SHORTING.value: Topology(
        TopologyName.SERIES_SHORTING, (),
        "base + chain, a shorting relay across each chain resistor"),
    TopologyName.SERIES_SHUNT.value: Topology(
        TopologyName.SERIES_SHUNT, (ShuntSpan.WHOLE,),
        "base + chain as series-shorting, plus one relay switching a shunt across it"),
    TopologyName.SERIES_TWIN_SHUNT.value: Topology(
        TopologyName.SERIES_TWIN_SHUNT, (ShuntSpan.WHOLE, ShuntSpan.WHOLE),
        "base + chain, plus two relays each switching its own shunt across it"),
    TopologyName.SERIES_SPLIT_SHUNT.value: Topology(
        TopologyName.SERIES_SPLIT_SHUNT, (ShuntSpan.WHOLE, ShuntSpan.CHAIN),
        "base + chain, one shunt across all of it and one across the chain only"),
}


def get_topology(name: str, key: str = "topology") -> Topology:
    """The topology called ``name``; unknown names raise ConfigError on ``key``."""
    t = TOPOLOGIES.get(name) if isinstance(name, str) else None
    if t is None:
        raise ConfigError(key, f"unknown topology {name!r} (expected one of: {', '.join(TOPOLOGIES)})")
    return t
