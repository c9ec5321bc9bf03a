"""Local search over ladder values: the branch and bound's starting incumbent.

Coordinate descent: for one position at a time (the base, a chain value, a shunt) every
candidate value is tried in one vectorised evaluation and the best kept; sweeps repeat
until none improves. The worst error is a maximum and so flat under most single moves;
the descent therefore ranks moves by the worst error first and then by a p-norm of all
the stretches' errors, so it can walk along a plateau towards a lower worst error. Then seeded random kicks (two positions moved a few candidates
away) followed by descent, kept when better. Deterministic for a given kick count; a
deadline (``time.perf_counter`` seconds) cuts it short.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass

import numpy as np

from nullsteer.ladder.coverage import gap_errors_rows, worst_log_error_rows

_P = 12.0
_WINDOW = 6
from nullsteer.ladder.topology import LadderValues, Topology


@dataclass(frozen=True)
class Pools:
    """Candidate values per position kind, ohms ascending (base pool includes 0)."""

    base: np.ndarray
    chain: np.ndarray
    shunt: np.ndarray


def scores(topology: Topology, base: np.ndarray, chain: np.ndarray, shunt: np.ndarray,
           lo_ohm: float, hi_ohm: float) -> tuple[np.ndarray, np.ndarray]:
    """(worst log error, p-norm of the stretch errors) of each build (rows)."""
    s = topology.settings_batch(base, chain, shunt)
    x = np.sort(np.log(np.maximum(s, 1e-9)), axis=1)
    g = gap_errors_rows(x, math.log(lo_ohm), math.log(hi_ohm))
    worst = g.max(axis=1)
    norm = worst * (((g / np.maximum(worst, 1e-300)[:, None]) ** _P).sum(axis=1)) ** (1 / _P)
    return worst, norm


def errors(topology: Topology, base: np.ndarray, chain: np.ndarray, shunt: np.ndarray,
           lo_ohm: float, hi_ohm: float) -> np.ndarray:
    """Worst nominal log error of each build (rows), ideal contacts."""
    s = topology.settings_batch(base, chain, shunt)
    x = np.sort(np.log(np.maximum(s, 1e-9)), axis=1)
    return worst_log_error_rows(x, math.log(lo_ohm), math.log(hi_ohm))


def canonical(topology: Topology, v: LadderValues) -> LadderValues:
    """Chain ascending; shunts of the same span in descending order (one of each pair)."""
    sh = list(v.shunt_ohm)
    if len(set(topology.shunts)) == 1 and len(sh) > 1:
        sh.sort(reverse=True)
    return LadderValues(float(v.base_ohm), tuple(sorted(float(c) for c in v.chain_ohm)),
                        tuple(float(p) for p in sh))


def _vector(v: LadderValues) -> np.ndarray:
    return np.array([v.base_ohm, *v.chain_ohm, *v.shunt_ohm], dtype=float)


def _rows(topology: Topology, vec: np.ndarray, n: int, pos: int, pool: np.ndarray
          ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    m = np.repeat(vec[None, :], pool.size, axis=0)
    m[:, pos] = pool
    return m[:, 0], m[:, 1:1 + n], m[:, 1 + n:]


def descend(topology: Topology, start: LadderValues, lo_ohm: float, hi_ohm: float,
            pools: Pools, deadline: float = math.inf) -> tuple[LadderValues, float]:
    """Coordinate descent from ``start``: (build, its log error). Each move tries the
    candidates within ``_WINDOW`` places of the present value (the kicks make the
    longer jumps)."""
    n = len(start.chain_ohm)
    vec = _vector(canonical(topology, start))
    w, nm = scores(topology, vec[:1], vec[None, 1:1 + n], vec[None, 1 + n:], lo_ohm, hi_ohm)
    h, norm = float(w[0]), float(nm[0])
    kinds = [pools.base] + [pools.chain] * n + [pools.shunt] * topology.shunt_relays
    improved = True
    while improved and time.perf_counter() < deadline:
        improved = False
        for pos, full in enumerate(kinds):
            at = int(np.searchsorted(full, vec[pos]))
            pool = full[max(0, at - _WINDOW):at + _WINDOW + 1]
            err, nrm = scores(topology, *_rows(topology, vec, n, pos, pool), lo_ohm, hi_ohm)
            i = int(np.lexsort((nrm, err))[0])
            if err[i] < h - 1e-15 or (err[i] <= h + 1e-15 and nrm[i] < norm * (1 - 1e-9)):
                h, norm, vec[pos], improved = float(err[i]), float(nrm[i]), pool[i], True
    v = LadderValues(float(vec[0]), tuple(vec[1:1 + n]), tuple(vec[1 + n:]))
    return canonical(topology, v), h


def _indices(vec: np.ndarray, kinds: list[np.ndarray]) -> np.ndarray:
    return np.array([int(np.argmin(np.abs(np.log(np.maximum(pool, 1e-9) / max(v, 1e-9)))))
                     for v, pool in zip(vec, kinds)])


def _kick(vec: np.ndarray, kinds: list[np.ndarray], rng: np.random.Generator) -> np.ndarray:
    """Two positions moved one to three candidates away."""
    out = vec.copy()
    idx = _indices(vec, kinds)
    for pos in rng.choice(len(kinds), size=min(2, len(kinds)), replace=False):
        pool = kinds[pos]
        out[pos] = pool[int(np.clip(idx[pos] + rng.choice([-3, -2, -1, 1, 2, 3]), 0, pool.size - 1))]
    return out


def local_search(topology: Topology, start: LadderValues, lo_ohm: float, hi_ohm: float,
                 pools: Pools, kicks: int = 40, deadline: float = math.inf,
                 seed: int = 1) -> tuple[LadderValues, float]:
    """Descent from ``start``, then ``kicks`` rounds of a kick (two positions moved) and
    a descent; the best is kept."""
    best, h = descend(topology, start, lo_ohm, hi_ohm, pools, deadline)
    rng = np.random.default_rng(seed)
    n = len(start.chain_ohm)
    kinds = [pools.base] + [pools.chain] * n + [pools.shunt] * topology.shunt_relays
    for _ in range(kicks):
        if time.perf_counter() >= deadline:
            break
        vec = _kick(_vector(best), kinds, rng)
        cand = LadderValues(float(vec[0]), tuple(vec[1:1 + n]), tuple(vec[1 + n:]))
        v, hv = descend(topology, cand, lo_ohm, hi_ohm, pools, deadline)
        if hv < h - 1e-15:
            best, h = v, hv
    return best, h


__all__ = ["Pools", "errors", "canonical", "descend", "local_search"]
