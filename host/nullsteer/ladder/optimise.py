"""Choose the ladder resistors: branch and bound over the standard values, with proofs.

Objective: minimise the worst nominal log error ``h`` of the settings over the wanted
range [lo, hi] (see :mod:`nullsteer.ladder.coverage`; tolerance only shifts the range).
Contacts are ideal during the search; the design reports the figures with parasitics.

Search space: a base value B (0 or a candidate), shunt values (``series-shunt``) and a
multiset of chain values r1 <= r2 <= ... <= rn, all from the candidate lists (symmetry:
each multiset is visited once, in ascending order). The chain is built smallest first.
P_k denotes the subset sums of r1..rk (sorted, with multiplicity), S_k their largest,
f the topology's chain -> setting maps (identity, and x -> x p / (x + p) with a shunt
p), so every setting is f(B + q + x) for one map, x in P_k and q a subset sum of the
later values r(k+1)..rn. The search looks for builds strictly better than the incumbent
h*; with u = e^h* a build is better only if the intervals [s/u, s u] of its settings s
cover [lo, hi]. A branch is cut only by one of the bounds below, each of which holds for
every completion, so the result equals an exhaustive search over the same candidates
(tested against :func:`exhaustive_best`).

1. Gap bound. Every later value is >= r(k+1), so the settings below min_f f(B + r(k+1))
   are exactly f(B + P_k). Let C be the end of the stretch [lo, C] those cover. No later
   setting lies below min_f f(B + r(k+1)), so unless C >= hi,
   min_f f(B + r(k+1)) <= C u, i.e. r(k+1) <= max_f f^-1(C u) - B.
2. Reach bound. Coverage never exceeds (largest setting) u, and each later value obeys
   bound 1 with that optimistic coverage; if even the largest allowed values cannot
   reach hi the node is infeasible. As reach grows with r(k+1), the loop over r(k+1)
   (descending) stops at the first value that fails.
3. Counting bound. Split the settings into 2^m clusters f(B + q + P_k), one per subset
   sum q of the m = n - k later values and per map. A setting s below lo/u or above hi u
   covers nothing of [lo, hi]. In one cluster, the covering settings z1 < ... < zM are
   consecutive members, all >= lo/u, and their intervals cover a log length of at most
   2h* + sum_i min(2h*, ln(z(i+1)/zi)) and at most 2h* + ln(zM/z1). Both f preserve
   order and do not stretch log distances (d ln f / d ln x <= 1), and a gap g of P_k at
   a point >= lo/u is at most ln(1 + g u/lo) in log, so a cluster covers at most
   c_k = 2h* + min(sum over gaps g of P_k of min(2h*, ln(1 + g u/lo)), ln(1 + S_k u/lo)).
   A cluster helps only if its lowest point f(B + q) <= hi u, i.e.
   q <= max_f f^-1(hi u) - B =: Q; as each later value is >= rk, such a q is a sum of
   at most t = floor(Q / rk) of them, so at most N = sum_{j <= min(m, t)} C(m, j)
   clusters per map help. Covering needs N c_k >= ln(hi/lo) (summed over maps).

The search is deterministic: the candidates are tried in a fixed order and a node budget
(not a clock) decides when to stop and report ``proven=False`` with the best so far.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from nullsteer.ladder.coverage import log_settings, worst_log_error, worst_log_error_rows
from nullsteer.ladder.eseries import ESeries
from nullsteer.ladder.topology import LadderValues, Topology

_EPS = 1e-12
#: Default node budget of one search (a few seconds here; benchmarks/bench_ladder.py
#: shows how many nodes each relay count needs to finish).
DEFAULT_NODE_BUDGET = 5_000


@dataclass(frozen=True)
class Candidates:
    """Allowed values, ohms, ascending: chain resistors, base (0 is always allowed), shunts."""

    chain_ohm: tuple[float, ...]
    base_ohm: tuple[float, ...]
    shunt_ohm: tuple[float, ...]


@dataclass(frozen=True)
class SearchResult:
    """Best build found, its nominal log error over the (shifted) range, nodes visited, and
    whether the search finished (False: stopped by the node budget, best found so far)."""

    values: LadderValues
    log_error: float
    nodes: int
    proven: bool = True


class _Stop(Exception):
    pass


def default_candidates(series: ESeries, lo_ohm: float, hi_ohm: float, relays: int = 8) -> Candidates:
    """Candidate values for a range: chain and base up to ``hi_ohm``, shunts to 20 x ``hi_ohm``."""
    floor_ohm = max(0.1, lo_ohm * 2.0 ** -(relays + 1))
    chain = tuple(series.values_ohm(floor_ohm, hi_ohm))
    shunt = tuple(series.values_ohm(lo_ohm / 2.0, hi_ohm * 20.0))
    return Candidates(chain, chain, shunt)


def _cover_rows(y: np.ndarray, lo: float, up: float, down: float) -> np.ndarray:
    """Per row: end of the stretch [lo, x] covered by intervals [y*down, y*up] (rows ascending)."""
    u = np.maximum.accumulate(np.maximum(y * up, lo), axis=1)
    prev = np.concatenate((np.full((y.shape[0], 1), lo), u[:, :-1]), axis=1)
    bad = y * down > prev
    first = np.argmax(bad, axis=1)
    rows = np.arange(y.shape[0])
    return np.where(bad[rows, first], prev[rows, first], u[:, -1])


def _binomial_prefix(n: int) -> np.ndarray:
    """table[m, t] = sum_{j <= t} C(m, j) for 0 <= m, t <= n."""
    table = np.zeros((n + 1, n + 1))
    for m in range(n + 1):
        table[m] = np.cumsum([math.comb(m, j) for j in range(n + 1)])
    return table


class _Search:
    """Depth-first search over chain multisets; every base candidate is carried along
    as a vector, so the chain tree is walked once for all bases."""

    def __init__(self, lo: float, hi: float, n_chain: int, cands: np.ndarray,
                 best_h: float, best: LadderValues | None, node_budget: int) -> None:
        self.lo, self.hi, self.n = lo, hi, n_chain
        self.la, self.lb = math.log(lo), math.log(hi)
        self.cands = cands
        self.cmax = float(cands[-1])
        self.best_h, self.best = best_h, best
        self.nodes = 0
        self.budget = node_budget
        self.binom = _binomial_prefix(n_chain)

    def run(self, bases: np.ndarray, shunt: tuple[float, ...]) -> None:
        self.shunt = shunt
        self._dfs(0, 0, np.zeros(1), bases, [])

    def _settings(self, chain: np.ndarray) -> np.ndarray:
        if not self.shunt:
            return chain
        p = self.shunt[0]
        return np.sort(np.concatenate((chain, chain * p / (chain + p)), axis=1), axis=1)

    def _max_chain(self, y):
        """Largest chain value whose lowest setting is <= y (inverse of the smallest map)."""
        if not self.shunt:
            return y
        p = self.shunt[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(y < p, y * p / (p - y), np.inf)

    def _reachable(self, top: np.ndarray, bases: np.ndarray, steps: int, up: float) -> np.ndarray:
        for _ in range(steps):
            top = top + np.minimum(self.cmax, self._max_chain(top * up * up) - bases)
        return top * up >= self.hi

    def _covered(self, x: np.ndarray, bases: np.ndarray, h: float) -> np.ndarray:
        """Per base: log length of [lo, hi] covered by the settings f(B + x) at error h."""
        z = np.log(np.maximum(self._settings(bases[:, None] + x[None, :]), 1e-9))
        top = np.minimum(z + h, self.lb)
        prev = np.concatenate((np.full((z.shape[0], 1), -np.inf), z[:, :-1] + h), axis=1)
        bottom = np.maximum(np.maximum(z - h, self.la), prev)
        return np.maximum(top - bottom, 0.0).sum(axis=1)

    def _count_ok(self, x: np.ndarray, r: float, bases: np.ndarray, m: int, h: float
                  ) -> np.ndarray:
        """Bound 3 for the child with chain sums ``x`` (ascending, last value ``r``) and
        ``m`` values still to choose: per base, can the clusters cover the range?"""
        need = (self.lb - self.la) * (1 - 1e-9)
        total = self._covered(x, bases, h)             # the clusters q = 0, exactly
        if m == 0:
            return total >= need
        floor = self.lo * math.exp(-h)                  # lowest setting that covers anything
        g = np.diff(x)                                  # gaps of P_k, at their lower ends x[:-1]
        j = np.arange(1, m + 1, dtype=float)
        loc = bases[None, :] + j[:, None] * r           # (m, nb): lowest q of j later values
        where = np.maximum(floor, loc[:, :, None] + x[None, None, :-1])
        gap_sum = np.minimum(np.log1p(g / where), 2.0 * h).sum(axis=2)
        span = np.log1p(x[-1] / np.maximum(floor, loc))
        c = 2.0 * h + np.minimum(gap_sum, span)         # (m, nb)
        count = np.array([math.comb(m, int(i)) for i in j])[:, None]
        for lowest in self._map_values(loc):
            room = self.lb - np.maximum(self.la, np.log(np.maximum(lowest, 1e-9)) - h)
            total = total + (count * np.clip(np.minimum(c, room), 0.0, None)).sum(axis=0)
        return total >= need

    def _last(self, idx_min: int, hi_idx: int, limit: np.ndarray, x: np.ndarray,
              bases: np.ndarray, chosen: list[float]) -> None:
        """The last chain value: every allowed candidate and base evaluated at once."""
        r = self.cands[idx_min:hi_idx]
        if r.size == 0:
            return
        ok = limit[None, :] * (1 + 1e-12) >= r[:, None]                   # (R, nb): bound 1
        if not ok.any():
            return
        ri, bi = np.nonzero(ok)
        chain = bases[bi][:, None] + np.concatenate(
            (np.broadcast_to(x, (ri.size, x.size)), r[ri][:, None] + x[None, :]), axis=1)
        y = np.sort(self._settings(chain), axis=1)
        err = worst_log_error_rows(np.log(np.maximum(y, 1e-9)), self.la, self.lb)
        # ties: the first in (largest value, smallest base) order, as the loop would find
        order = np.lexsort((bi, -ri))
        i = int(order[np.argmin(err[order])])
        if err[i] < self.best_h:
            self.best_h = float(err[i])
            self.best = LadderValues(float(bases[bi[i]]), tuple(chosen) + (float(r[ri[i]]),),
                                     self.shunt)

    def _map_values(self, y: np.ndarray) -> list[np.ndarray]:
        """The chain value ``y`` through each map (identity, then the shunt)."""
        if not self.shunt:
            return [y]
        p = self.shunt[0]
        return [y, y * p / (y + p)]

    def _dfs(self, k: int, idx_min: int, x: np.ndarray, bases: np.ndarray,
             chosen: list[float]) -> None:
        self.nodes += 1
        if self.nodes > self.budget:
            raise _Stop
        y = self._settings(bases[:, None] + x[None, :])
        if k == self.n:
            err = worst_log_error_rows(np.log(np.maximum(y, 1e-9)), self.la, self.lb)
            i = int(np.argmin(err))
            if err[i] < self.best_h:
                self.best_h = float(err[i])
                self.best = LadderValues(float(bases[i]), tuple(chosen), self.shunt)
            return
        h = self.best_h - _EPS
        up = math.exp(h)
        limit = self._max_chain(_cover_rows(y, self.lo, up, 1.0 / up) * up) - bases
        hi_idx = int(np.searchsorted(self.cands, limit.max() * (1 + 1e-12), side="right"))
        if k == self.n - 1:
            self._last(idx_min, hi_idx, limit, x, bases, chosen)
            return
        top = bases + x[-1]
        m = self.n - k - 1
        for idx in range(hi_idx - 1, idx_min - 1, -1):
            r = float(self.cands[idx])
            reach = self._reachable(top + r, bases, m, up)
            if not reach.any():
                break
            keep = reach & (limit * (1 + 1e-12) >= r)
            if not keep.any():
                continue
            child = np.sort(np.concatenate((x, x + r)))
            keep &= self._count_ok(child, r, bases, m, h)
            if keep.any():
                self._dfs(k + 1, idx, child, bases[keep], chosen + [r])
                h = self.best_h - _EPS  # the incumbent may have improved
                up = math.exp(h)


def branch_and_bound(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                     cands: Candidates, incumbent: SearchResult | None = None,
                     node_budget: int = DEFAULT_NODE_BUDGET) -> SearchResult:
    """Optimal build over ``cands`` for the nominal range [lo_ohm, hi_ohm] (ideal contacts).

    Parameters
    ----------
    topology : Topology
    lo_ohm, hi_ohm : float
        Wanted range (already shifted for tolerance), ohms.
    relays : int
        Ladder relays (chain + shunt).
    cands : Candidates
    incumbent : SearchResult, optional
        A known build to beat (default: :func:`scaled_binary_start`; never changes the
        result).
    node_budget : int
        Stop after visiting this many nodes and return the best build so far with
        ``proven=False`` (deterministic: the same inputs give the same result).
    """
    n_chain = topology.chain_relays(relays)
    chain = np.asarray(cands.chain_ohm, dtype=float)
    if incumbent is None:
        incumbent = scaled_binary_start(topology, lo_ohm, hi_ohm, relays, cands)
    search = _Search(lo_ohm, hi_ohm, n_chain, chain, incumbent.log_error + 1e-9,
                     incumbent.values, node_budget)
    bases = np.array(sorted({0.0, *cands.base_ohm}))
    shunts: list[tuple[float, ...]] = [()]
    if topology.shunt_relays:
        shunts = [(p,) for p in sorted(cands.shunt_ohm, reverse=True)]
    proven = True
    try:
        for shunt in shunts:
            search.run(bases, shunt)
    except _Stop:
        proven = False
    best = search.best
    assert best is not None
    h = worst_log_error(topology.ideal_settings_ohm(best), lo_ohm, hi_ohm)
    return SearchResult(best, h, search.nodes, proven)


def binary_weighted(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                    cands: Candidates) -> SearchResult:
    """Plain binary weighting for comparison: base = lo, chain (hi - lo)/(2**n - 1) * 2**i,
    each value rounded (by ratio) to the nearest candidate; no shunt search."""
    n_chain = topology.chain_relays(relays)
    chain = np.asarray(cands.chain_ohm)
    base_c = np.asarray(cands.base_ohm)

    def nearest(v: float, pool: np.ndarray) -> float:
        return float(pool[np.argmin(np.abs(np.log(pool / v)))])

    step = (hi_ohm - lo_ohm) / (2 ** n_chain - 1)
    values = LadderValues(nearest(lo_ohm, base_c),
                          tuple(sorted(nearest(step * 2 ** i, chain) for i in range(n_chain))),
                          (nearest(hi_ohm * 20, np.asarray(cands.shunt_ohm)),) * topology.shunt_relays)
    h = worst_log_error(topology.ideal_settings_ohm(values), lo_ohm, hi_ohm)
    return SearchResult(values, h, 0)


def scaled_binary_start(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                        cands: Candidates, steps: int = 61) -> SearchResult:
    """A quick starting build for the search: binary weighting with the step scaled by
    0.8 .. 1.6 and the base taken from the candidates at or below lo (every combination
    tried, the best kept; no shunt search). Only the search's starting incumbent: it
    never changes the search's result, only how soon the bounds bite."""
    n_chain = topology.chain_relays(relays)
    chain = np.asarray(cands.chain_ohm)
    base_c = np.array(sorted({0.0, *cands.base_ohm}))
    base_c = base_c[base_c <= lo_ohm * 1.05][-6:]
    shunt = (binary_weighted(topology, lo_ohm, hi_ohm, relays, cands).values.shunt_ohm)
    best = binary_weighted(topology, lo_ohm, hi_ohm, relays, cands)
    for b in base_c:
        for scale in np.geomspace(0.8, 1.6, steps):
            step = scale * (hi_ohm - b) / (2 ** n_chain - 1)
            vals = tuple(sorted(float(chain[np.argmin(np.abs(np.log(chain / (step * 2 ** i))))])
                                for i in range(n_chain)))
            v = LadderValues(float(b), vals, shunt)
            h = worst_log_error(topology.ideal_settings_ohm(v), lo_ohm, hi_ohm)
            if h < best.log_error:
                best = SearchResult(v, h, 0)
    return best


def exhaustive_best(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                    cands: Candidates) -> SearchResult:
    """Best build by trying every base, shunt and chain multiset (for tests; small cases only)."""
    n_chain = topology.chain_relays(relays)
    chain = np.asarray(cands.chain_ohm, dtype=float)
    combos = np.array(list(itertools.combinations_with_replacement(range(chain.size), n_chain)))
    values = chain[combos]                                        # (N, n)
    masks = np.arange(2 ** n_chain)
    bits = ((masks[:, None] >> np.arange(n_chain)[None, :]) & 1).astype(float)
    sums = values @ bits.T                                        # (N, 2**n)
    la, lb = math.log(lo_ohm), math.log(hi_ohm)
    best_h, best, tried = math.inf, None, 0
    shunts: list[tuple[float, ...]] = [()]
    if topology.shunt_relays:
        shunts = [(p,) for p in cands.shunt_ohm]
    for base in sorted({0.0, *cands.base_ohm}):
        x = base + sums
        for shunt in shunts:
            s = x if not shunt else np.concatenate((x, x * shunt[0] / (x + shunt[0])), axis=1)
            err = worst_log_error_rows(np.sort(np.log(np.maximum(s, 1e-9)), axis=1), la, lb)
            i = int(np.argmin(err))
            tried += err.size
            if err[i] < best_h:
                best_h, best = float(err[i]), LadderValues(base, tuple(values[i]), shunt)
    assert best is not None
    return SearchResult(best, best_h, tried)


__all__ = ["Candidates", "SearchResult", "default_candidates", "branch_and_bound",
           "binary_weighted", "scaled_binary_start", "DEFAULT_NODE_BUDGET", "exhaustive_best", "log_settings"]
