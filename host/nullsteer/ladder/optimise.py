"""Choose the ladder resistors: branch and bound over the standard values, with proofs.

Objective: minimise the worst nominal log error ``h`` of the settings over the wanted
range [lo, hi] (see :mod:`nullsteer.ladder.coverage`; tolerance only shifts the range).
Contacts are ideal during the search; the design reports the figures with parasitics.

Search space: a shunt tuple (one value per shunt relay of the topology), a base value B
(0 or a candidate) and a multiset of chain values r1 <= ... <= rn, all from the
candidate lists. Every setting is g(B, x) = par(B + par(x, Pc), Pw) for one shunt state
(Pw, Pc) (see :mod:`nullsteer.ladder.topology`) and one chain sum x. Facts used below,
for every map g: (a) g is increasing in x; (b) g(B, x) <= B + x; (c) g does not stretch
log distances measured on B + x: g(B, x + d) / g(B, x) <= (B + x + d) / (B + x) for
d >= 0 (true for par(., P), whose log slope P / (a + P) <= 1, and for a -> B + a, whose
log slope a / (B + a) <= 1, and so for their compositions); (d) g(B, x) < sup_x g =
par(B + Pc, Pw) =: T.

Branching: the shunt tuple first (each tuple its own subtree, ordered by a quick
evaluation: the incumbent's base and chain with that tuple), then the chain smallest
first (each multiset visited once, ascending); every base candidate is carried as a
vector. P_k are the subset sums of r1..rk, S_k the largest. The search looks for builds
strictly better than the incumbent h*; with u = e^h* a build is better only if the
intervals [s/u, s u] of its settings s cover [lo, hi]. A branch is cut only by one of
the bounds below, each of which holds for every completion, so a finished search equals
an exhaustive search over the same candidates (tested against :func:`exhaustive_best`).

0. Shunt bound. With n chain relays each shunt state has N = 2^n settings, each covering
   a log length of at most 2h, and by (d) none of them covers anything above T u. So
   the states cover at most sum_states min(N 2h, max(0, ln(min(hi, T u)/lo))) with T
   taken at the largest base; a tuple whose sum is below ln(hi/lo) is cut.
1. Gap bound. Every later value is >= r(k+1), so by (a) the settings below
   m = min_g g(B, r(k+1)) are exactly g(B, P_k). Let C >= lo be the end of the stretch
   [lo, C] those cover (C = lo when lo itself is uncovered). Unless C >= hi the points
   just above C need a later setting s with s / u <= C, so m <= C u, i.e.
   r(k+1) <= max_g g^-1(B, C u) (the largest chain sum whose setting is <= C u).
2. Reach bound. The coverage end C satisfies C <= max(lo, s_max u) with s_max <=
   B + (chain total) by (b) -- it never falls below lo, whatever the settings. Each later
   value obeys bound 1 with that C, so adding the largest values bound 1 allows, one
   after the other, gives an upper bound of B + chain total; a build needs
   s_max u >= hi. The bound grows with r(k+1), so the loop over r(k+1) (descending)
   stops at the first value that fails.
3. Counting bound. Split the settings into clusters g(B, q + P_k), one per subset sum q
   of the m = n - k later values and per map. A setting below lo/u or above hi u covers
   nothing. In one cluster the covering settings z1 < ... < zM are consecutive members,
   all >= lo/u, and their intervals cover a log length of at most
   2h* + sum_i min(2h*, ln(z(i+1)/zi)) and at most 2h* + ln(zM/z1). By (c) a gap g of
   P_k at chain sum w gives a log step of at most ln(1 + g/(B + w)), and by (b)
   B + w >= lo/u for a covering setting, so a cluster whose q is a sum of j later values
   (q >= j r(k+1)) covers at most
   c = 2h* + min(sum_gaps min(2h*, ln(1 + g/max(lo/u, B + j r + w))), ln(1 + S_k/max(lo/u, B + j r))),
   and no more than the part of [lo, hi] above its lowest point g(B, j r) / u. There are
   C(m, j) such clusters per map; the q = 0 clusters are counted exactly. Covering needs
   the sum to reach ln(hi/lo).

Budgets: ``time_budget_s`` (a clock) and ``node_budget`` (a count, for reproducible
tests) stop the search with the best build so far and ``proven=False``. A tuple whose
subtree did not finish within its share of the time is left unproven, and the search
moves on to the next tuple (each tuple gets a share, so no one of them eats the budget).
A local search (:mod:`nullsteer.ladder.localsearch`) seeds the incumbent; it never
changes a finished search's result, only how soon the bounds bite.
"""

from __future__ import annotations

import itertools
import math
import time
from dataclasses import dataclass, field

import numpy as np

from nullsteer.ladder.coverage import log_settings, worst_log_error, worst_log_error_rows
from nullsteer.ladder.eseries import ESeries
from nullsteer.ladder.localsearch import Pools, canonical, errors, local_search
from nullsteer.ladder.topology import LadderValues, Topology, par, par_inverse

_EPS = 1e-12
#: Default time budget of one search, seconds.
DEFAULT_TIME_BUDGET_S = 2.0
#: Share of the time budget spent on the local-search seed.
_SEED_SHARE = 0.5
#: Nodes every shunt tuple may use in the first, cheap pass.
_FIRST_PASS_NODES = 40


@dataclass(frozen=True)
class Candidates:
    """Allowed values, ohms, ascending: chain resistors, base (0 is always allowed), shunts."""

    chain_ohm: tuple[float, ...]
    base_ohm: tuple[float, ...]
    shunt_ohm: tuple[float, ...]


@dataclass(frozen=True)
class SearchResult:
    """Best build found, its nominal log error over the (shifted) range, nodes visited,
    whether the search finished (False: stopped by a budget, best found so far), the
    time it took and the shunt tuples finished (or cut) out of all."""

    values: LadderValues
    log_error: float
    nodes: int
    proven: bool = True
    time_s: float = field(default=0.0, compare=False)
    tuples_done: int = 0
    tuples_total: int = 0


class _Stop(Exception):
    """The whole search must stop (node budget or overall deadline)."""


class _Slice(Exception):
    """This shunt tuple's share is used up."""


def default_candidates(series: ESeries, lo_ohm: float, hi_ohm: float, relays: int = 8) -> Candidates:
    """Candidate values for a range: chain and base up to ``hi_ohm``, shunts to 20 x ``hi_ohm``."""
    floor_ohm = max(0.1, lo_ohm * 2.0 ** -(relays + 1))
    chain = tuple(series.values_ohm(floor_ohm, hi_ohm))
    shunt = tuple(series.values_ohm(lo_ohm / 2.0, hi_ohm * 20.0))
    return Candidates(chain, chain, shunt)


def _cover_rows(y: np.ndarray, lo: float, up: float, down: float) -> np.ndarray:
    """Per row: end of the stretch [lo, x] covered by intervals [y*down, y*up] (rows
    ascending); lo itself when lo is not covered."""
    u = np.maximum.accumulate(np.maximum(y * up, lo), axis=1)
    prev = np.concatenate((np.full((y.shape[0], 1), lo), u[:, :-1]), axis=1)
    bad = y * down > prev
    first = np.argmax(bad, axis=1)
    rows = np.arange(y.shape[0])
    return np.where(bad[rows, first], prev[rows, first], u[:, -1])


def shunt_tuples(topology: Topology, cands: Candidates) -> list[tuple[float, ...]]:
    """Every shunt tuple once (shunts of one span are interchangeable: descending)."""
    k = topology.shunt_relays
    if k == 0:
        return [()]
    pool = sorted(cands.shunt_ohm, reverse=True)
    if len(set(topology.shunts)) == 1:
        return [tuple(c) for c in itertools.combinations_with_replacement(pool, k)]
    return [tuple(c) for c in itertools.product(pool, repeat=k)]


def shunt_bound_ok(topology: Topology, shunt: tuple[float, ...], n_chain: int, lo: float,
                   hi: float, base_max: float, h: float) -> bool:
    """Bound 0: can the shunt tuple's states cover [lo, hi] at error h at all?"""
    need = math.log(hi / lo) * (1 - 1e-9)
    total = 0.0
    for pw, pc in topology.shunt_maps(shunt):
        top = float(par(base_max + pc, pw)) * math.exp(h)
        reach = max(0.0, math.log(min(hi, top) / lo)) if top > 0 else 0.0
        total += min(2 ** n_chain * 2.0 * h, reach)
    return total >= need


class _Search:
    """Depth-first search over chain multisets for one shunt tuple at a time; every
    base candidate is carried along as a vector, so the chain tree is walked once for
    all bases."""

    def __init__(self, lo: float, hi: float, n_chain: int, cands: np.ndarray,
                 best_h: float, best: LadderValues | None, node_budget: int | None,
                 deadline: float) -> None:
        self.lo, self.hi, self.n = lo, hi, n_chain
        self.la, self.lb = math.log(lo), math.log(hi)
        self.cands = cands
        self.cmax = float(cands[-1])
        self.best_h, self.best = best_h, best
        self.nodes = 0
        self.budget = node_budget if node_budget is not None else math.inf
        self.deadline = deadline
        self.slice_end = deadline
        self.slice_nodes = math.inf
        self.shunt: tuple[float, ...] = ()
        self.maps: list[tuple[float, float]] = [(math.inf, math.inf)]

    def run(self, bases: np.ndarray, shunt: tuple[float, ...], maps: list[tuple[float, float]],
            slice_end: float, slice_nodes: float) -> None:
        """Search one shunt tuple; raises _Slice when its share is used up."""
        self.shunt, self.maps = shunt, maps
        self.slice_end, self.slice_nodes = slice_end, self.nodes + slice_nodes
        self._dfs(0, 0, np.zeros(1), bases, [])

    def _apply(self, b: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Every map of g(b, x), concatenated along the last axis (b, x broadcast)."""
        return np.concatenate([np.broadcast_to(par(b + par(x, pc), pw),
                                               np.broadcast_shapes(b.shape, x.shape))
                               for pw, pc in self.maps], axis=-1)

    def _settings(self, bases: np.ndarray, x: np.ndarray) -> np.ndarray:
        return np.sort(self._apply(bases[:, None], x[None, :]), axis=1)

    def _max_chain(self, bases: np.ndarray, v: np.ndarray) -> np.ndarray:
        """Per base: the largest chain sum x with min_g g(B, x) <= v (-inf: none)."""
        best = np.full(bases.shape, -np.inf)
        for pw, pc in self.maps:
            a = par_inverse(v, pw) - bases
            x = np.where(a >= 0, par_inverse(np.maximum(a, 0.0), pc), -np.inf)
            best = np.maximum(best, x)
        return best

    def _reachable(self, total: np.ndarray, bases: np.ndarray, steps: int, up: float) -> np.ndarray:
        """Bound 2 from chain total ``total`` with ``steps`` values still to add."""
        for _ in range(steps):
            cover = np.maximum(self.lo, (bases + total) * up)
            total = total + np.minimum(self.cmax, self._max_chain(bases, cover * up))
        return (bases + total) * up >= self.hi

    def _covered(self, x: np.ndarray, bases: np.ndarray, h: float) -> np.ndarray:
        """Per base: log length of [lo, hi] covered by the settings g(B, x) at error h."""
        z = np.log(np.maximum(self._settings(bases, x), 1e-9))
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
        q = j[:, None] * r + np.zeros_like(bases)[None, :]     # (m, nb): lowest q
        loc = bases[None, :] + q
        where = np.maximum(floor, loc[:, :, None] + x[None, None, :-1])
        gap_sum = np.minimum(np.log1p(g / where), 2.0 * h).sum(axis=2)
        span = np.log1p(x[-1] / np.maximum(floor, loc))
        c = 2.0 * h + np.minimum(gap_sum, span)         # (m, nb)
        count = np.array([math.comb(m, int(i)) for i in j])[:, None]
        for pw, pc in self.maps:
            lowest = par(bases[None, :] + par(q, pc), pw)
            room = self.lb - np.maximum(self.la, np.log(np.maximum(lowest, 1e-9)) - h)
            total = total + (count * np.clip(np.minimum(c, room), 0.0, None)).sum(axis=0)
        return total >= need

    def _better(self, err: np.ndarray, base: np.ndarray, chains: list[tuple[float, ...]]) -> None:
        i = int(np.argmin(err))
        if err[i] < self.best_h:
            self.best_h = float(err[i])
            self.best = LadderValues(float(base[i]), chains[i], self.shunt)

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
        sums = np.concatenate((np.broadcast_to(x, (ri.size, x.size)), r[ri][:, None] + x[None, :]),
                              axis=1)
        y = np.sort(self._apply(bases[bi][:, None], sums), axis=1)
        err = worst_log_error_rows(np.log(np.maximum(y, 1e-9)), self.la, self.lb)
        order = np.lexsort((bi, -ri))       # ties: largest value, then smallest base
        i = int(order[np.argmin(err[order])])
        self._better(err[i:i + 1], bases[bi[i]:bi[i] + 1], [tuple(chosen) + (float(r[ri[i]]),)])

    def _tick(self) -> None:
        self.nodes += 1
        if self.nodes > self.budget:
            raise _Stop
        if self.nodes % 8 == 0:
            now = time.perf_counter()
            if now > self.deadline:
                raise _Stop
            if now > self.slice_end:
                raise _Slice
        if self.nodes > self.slice_nodes:
            raise _Slice

    def _dfs(self, k: int, idx_min: int, x: np.ndarray, bases: np.ndarray,
             chosen: list[float]) -> None:
        self._tick()
        y = self._settings(bases, x)
        if k == self.n:
            err = worst_log_error_rows(np.log(np.maximum(y, 1e-9)), self.la, self.lb)
            self._better(err, bases, [tuple(chosen)] * bases.size)
            return
        h = self.best_h - _EPS
        up = math.exp(h)
        limit = self._max_chain(bases, _cover_rows(y, self.lo, up, 1.0 / up) * up)
        hi_idx = int(np.searchsorted(self.cands, limit.max() * (1 + 1e-12), side="right"))
        if k == self.n - 1:
            self._last(idx_min, hi_idx, limit, x, bases, chosen)
            return
        m = self.n - k - 1
        for idx in range(hi_idx - 1, idx_min - 1, -1):
            r = float(self.cands[idx])
            reach = self._reachable(np.full(bases.shape, x[-1] + r), bases, m, up)
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


def _pools(cands: Candidates) -> Pools:
    return Pools(np.array(sorted({0.0, *cands.base_ohm})), np.asarray(cands.chain_ohm, dtype=float),
                 np.asarray(cands.shunt_ohm, dtype=float))


def quick_order(topology: Topology, seed: LadderValues, tuples: list[tuple[float, ...]],
                lo: float, hi: float) -> np.ndarray:
    """Log error of the seed's base and chain with each shunt tuple (one evaluation)."""
    if not topology.shunt_relays:
        return np.zeros(1)
    t = len(tuples)
    return errors(topology, np.full(t, seed.base_ohm), np.repeat([seed.chain_ohm], t, axis=0),
                  np.array(tuples), lo, hi)


def greedy_build(topology: Topology, shunt: tuple[float, ...], lo_ohm: float, hi_ohm: float,
                 n_chain: int, cands: Candidates, steps: int = 14,
                 base_max_ohm: float = math.inf) -> SearchResult:
    """A constructive build for one shunt tuple: for each base and a trial error h, take
    at each step the largest chain value that bound 1 allows (the one that reaches
    furthest); bisect on h for the smallest that still covers [lo, hi]. A quick
    per-tuple evaluation and a seed for the local search (not optimal in general)."""
    chain = np.asarray(cands.chain_ohm, dtype=float)
    bases = np.array(sorted({0.0, *(b for b in cands.base_ohm if b <= base_max_ohm)}))
    helper = _Search(lo_ohm, hi_ohm, n_chain, chain, math.inf, None, None, math.inf)
    helper.shunt, helper.maps = shunt, topology.shunt_maps(shunt)
    lo_h = np.zeros(bases.size)
    hi_h = np.full(bases.size, math.log(hi_ohm / lo_ohm))
    best_v, best_h = None, math.inf
    for _ in range(steps):
        h = 0.5 * (lo_h + hi_h)
        up = np.exp(h)
        x = np.zeros((bases.size, 1))
        vals = np.zeros((bases.size, n_chain))
        prev = np.zeros(bases.size)
        for k in range(n_chain):
            y = np.sort(helper._apply(bases[:, None], x), axis=1)
            cover = _cover_rows(y, lo_ohm, up[:, None], 1.0 / up[:, None])
            limit = helper._max_chain(bases, cover * up)
            idx = np.searchsorted(chain, limit * (1 + 1e-12), side="right") - 1
            r = chain[np.clip(idx, 0, chain.size - 1)]
            r = np.where((idx >= 0) & (r >= prev), r, prev if k else chain[0])
            vals[:, k], prev = r, r
            x = np.concatenate((x, x + r[:, None]), axis=1)
        err = errors(topology, bases, vals, np.repeat([shunt], bases.size, axis=0).reshape(
            bases.size, len(shunt)), lo_ohm, hi_ohm)
        ok = err <= h + 1e-12
        hi_h = np.where(ok, np.minimum(hi_h, err), hi_h)
        lo_h = np.where(ok, lo_h, h)
        i = int(np.argmin(err))
        if err[i] < best_h:
            best_h = float(err[i])
            best_v = LadderValues(float(bases[i]), tuple(float(c) for c in vals[i]), shunt)
    assert best_v is not None
    return SearchResult(canonical(topology, best_v), best_h, 0)


def seed_search(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                cands: Candidates, deadline: float = math.inf, kicks: int = 40) -> SearchResult:
    """The starting incumbent: scaled binary weighting; the best shunt tuples for its
    chain (quick evaluation), each with its greedy build (:func:`greedy_build`); then a
    local search from the three best of those."""
    pools = _pools(cands)
    start = scaled_binary_start(topology, lo_ohm, hi_ohm, relays, cands)
    tuples = shunt_tuples(topology, cands)
    order = np.argsort(quick_order(topology, start.values, tuples, lo_ohm, hi_ohm), kind="stable")
    best, best_h = start.values, start.log_error
    n_chain = topology.chain_relays(relays)
    greedy = sorted((greedy_build(topology, tuples[int(i)], lo_ohm, hi_ohm, n_chain, cands)
                     for i in order[:6]), key=lambda r: r.log_error)
    # three different starts: the best greedy build, one with a base at most lo / 2,
    # and the best tuple with the binary chain
    tried = [greedy[0],
             greedy_build(topology, greedy[0].values.shunt_ohm, lo_ohm, hi_ohm, n_chain, cands,
                          base_max_ohm=lo_ohm / 2),
             SearchResult(LadderValues(start.values.base_ohm, start.values.chain_ohm,
                                       tuples[int(order[0])]), math.inf, 0)]
    for rank, res in enumerate(tried):
        v0 = res.values
        if res.log_error < best_h:
            best, best_h = v0, res.log_error
        share = deadline if math.isinf(deadline) else (
            time.perf_counter() + (deadline - time.perf_counter()) / (len(tried) - rank))
        v, h = local_search(topology, v0, lo_ohm, hi_ohm, pools, kicks, share, seed=rank + 1)
        if h < best_h:
            best, best_h = v, h
    return SearchResult(best, best_h, 0)


def branch_and_bound(topology: Topology, lo_ohm: float, hi_ohm: float, relays: int,
                     cands: Candidates, incumbent: SearchResult | None = None,
                     node_budget: int | None = None,
                     time_budget_s: float | None = DEFAULT_TIME_BUDGET_S) -> SearchResult:
    """Optimal build over ``cands`` for the nominal range [lo_ohm, hi_ohm] (ideal contacts).

    Parameters
    ----------
    topology : Topology
    lo_ohm, hi_ohm : float
        Wanted range (already shifted for tolerance), ohms.
    relays : int
        Ladder relays (chain + shunts).
    cands : Candidates
    incumbent : SearchResult, optional
        A known build to beat (default: :func:`seed_search`; never changes a finished
        search's result).
    node_budget : int, optional
        Stop after visiting this many nodes (reproducible; None: no count limit).
    time_budget_s : float, optional
        Stop after this many seconds, the seed search included (None: no clock). A
        stopped search returns the best build so far with ``proven=False``.
    """
    t0 = time.perf_counter()
    deadline = math.inf if time_budget_s is None else t0 + time_budget_s
    n_chain = topology.chain_relays(relays)
    if incumbent is None:
        seed_end = deadline if time_budget_s is None else t0 + _SEED_SHARE * time_budget_s
        incumbent = seed_search(topology, lo_ohm, hi_ohm, relays, cands, seed_end,
                                kicks=60 if time_budget_s is not None else 8)
    search = _Search(lo_ohm, hi_ohm, n_chain, np.asarray(cands.chain_ohm, dtype=float),
                     incumbent.log_error + 1e-9, canonical(topology, incumbent.values),
                     node_budget, deadline)
    bases = np.array(sorted({0.0, *cands.base_ohm}))
    tuples = shunt_tuples(topology, cands)
    order = [tuples[int(i)] for i in np.argsort(
        quick_order(topology, search.best or incumbent.values, tuples, lo_ohm, hi_ohm),
        kind="stable")]
    done: set[tuple[float, ...]] = set()
    try:
        for first_pass in (True, False):
            todo = [t for t in order if t not in done]
            for i, shunt in enumerate(todo):
                h = search.best_h - _EPS
                if not shunt_bound_ok(topology, shunt, n_chain, lo_ohm, hi_ohm, float(bases[-1]), h):
                    done.add(shunt)
                    continue
                now = time.perf_counter()
                share = (deadline - now) / (len(todo) - i)
                try:
                    search.run(bases, shunt, topology.shunt_maps(shunt), now + share,
                               _FIRST_PASS_NODES if first_pass and len(todo) > 1 else math.inf)
                    done.add(shunt)
                except _Slice:
                    pass
    except _Stop:
        pass
    best = search.best
    assert best is not None
    h = worst_log_error(topology.ideal_settings_ohm(best), lo_ohm, hi_ohm)
    return SearchResult(best, h, search.nodes, len(done) == len(tuples),
                        time.perf_counter() - t0, len(done), len(tuples))


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
                          tuple(nearest(hi_ohm * 20, np.asarray(cands.shunt_ohm))
                                for _ in range(topology.shunt_relays)))
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
    """Best build by trying every shunt tuple, base and chain multiset (for tests and
    benchmarks; small cases only). Shares no bound or ordering with the search."""
    n_chain = topology.chain_relays(relays)
    chain = np.asarray(cands.chain_ohm, dtype=float)
    combos = np.array(list(itertools.combinations_with_replacement(range(chain.size), n_chain)))
    values = chain[combos]                                        # (N, n)
    best_h, best, tried = math.inf, None, 0
    shunts = [()] if not topology.shunt_relays else list(
        itertools.product(cands.shunt_ohm, repeat=topology.shunt_relays))
    rows = len(values)
    for base in sorted({0.0, *cands.base_ohm}):
        for start in range(0, len(shunts), max(1, 20000 // rows)):
            block = shunts[start:start + max(1, 20000 // rows)]
            err = errors(topology, np.full(rows * len(block), base), np.tile(values, (len(block), 1)),
                         np.repeat(np.array(block, dtype=float).reshape(len(block), -1), rows, axis=0),
                         lo_ohm, hi_ohm)
            i = int(np.argmin(err))
            tried += err.size
            if err[i] < best_h:
                best_h = float(err[i])
                best = LadderValues(base, tuple(float(c) for c in values[i % rows]),
                                    tuple(float(p) for p in block[i // rows]))
    assert best is not None
    return SearchResult(best, best_h, tried)


__all__ = ["Candidates", "SearchResult", "default_candidates", "branch_and_bound",
           "binary_weighted", "scaled_binary_start", "seed_search", "shunt_tuples",
           "DEFAULT_TIME_BUDGET_S", "exhaustive_best", "log_settings"]
